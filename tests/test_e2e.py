"""End to end: real scripts in small fixture repos, checked through the whole pipeline.

Each fixture repo under tests/data/repos/<case>/ keeps its expected findings in
expected.json beside it: "present" findings (rule, path, optional line, cell,
confidence) that must be reported, and rules that must not be ("absent" for
the whole repo, "absent_in" per script).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from figproof.pipeline import check

REPOS = Path(__file__).parent / "data" / "repos"
CASES = sorted(p.name for p in REPOS.iterdir() if (p / "expected.json").exists())


def run_case(case: str, tmp_path: Path):
    repo = tmp_path / case
    shutil.copytree(REPOS / case, repo, ignore=shutil.ignore_patterns("expected.json"))
    return check(repo).result


@pytest.mark.slow
@pytest.mark.parametrize("case", CASES)
def test_fixture_repo(case: str, tmp_path: Path) -> None:
    if case.startswith("seaborn"):
        pytest.importorskip("seaborn", reason="seaborn is needed for the seaborn fixture repo")
    expected = json.loads((REPOS / case / "expected.json").read_text())
    result = run_case(case, tmp_path)
    found = [f for f in result.findings]
    for want in expected.get("present", []):
        matches = [f for f in found if f.rule == want["rule"] and f.path == want["path"]
                   and all(getattr(f, k) == v for k, v in want.items() if k not in ("rule", "path"))]
        assert matches, f"{case}: expected {want}, got {[(f.rule, f.path, f.line, f.cell) for f in found]}"
    for rule in expected.get("absent", []):
        assert not [f for f in found if f.rule == rule], f"{case}: {rule} should not be reported"
    for path, rules in expected.get("absent_in", {}).items():
        bad = [f for f in found if f.path == path and f.rule in rules]
        assert not bad, f"{case}: {path} should not get {bad}"


@pytest.mark.slow
def test_matplotlib_bar_and_hist_artists(tmp_path: Path) -> None:
    """ax.bar returns a BarContainer of Rectangle patches; ax.hist draws its bins the same way
    (matplotlib documentation of Axes.bar and Axes.hist). figproof must see both, and tell them apart."""
    result = run_case("mpl_bars", tmp_path)
    [run] = result.runs
    bars_fig, hist_fig = run.figures
    [bars] = bars_fig.axes[0].bars
    [hist] = hist_fig.axes[0].bars
    assert bars.origin == "bar" and bars.heights.size == 2
    assert hist.origin == "hist" and hist.heights.size == 5
    assert not [f for f in result.findings if f.figure == hist_fig.id]
    assert bars_fig.outputs == ("figures/means.png",)
    assert [e.path for e in run.events if e.action == "read"] == ["data/cells.csv"]


@pytest.mark.slow
def test_failures_carry_exception_and_line(tmp_path: Path) -> None:
    result = run_case("broken", tmp_path)
    status = {r.path: r.status for r in result.runs}
    assert status == {"healthy.py": "ok", "raises.py": "failed", "syntax_error.py": "failed"}
    msg = {f.path: f.message for f in result.findings if f.rule == "script-fails"}
    assert "IndexError" in msg["raises.py"] and "raises.py:11" in msg["raises.py"]
    assert "SyntaxError" in msg["syntax_error.py"]

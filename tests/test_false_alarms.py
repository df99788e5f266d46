"""The false-alarm patterns of issue 14 stay silent, and their true counterparts still fire.

Each script in tests/data/false_alarms/ is an invented figure of a soil-microbe lab; its first line names the
rules it is about. ``quiet_*`` scripts must raise none of them, ``fires_*`` scripts must raise each. They run
once, together, through the real child process (one check of one repo).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from figproof.pipeline import CheckOptions, check
from figproof.run.execute import Runner

CASES = Path(__file__).parent / "data" / "false_alarms"
SCRIPTS = sorted(p.name for p in CASES.glob("*.py"))


def _rules(name: str) -> list[str]:
    head = (CASES / name).read_text(encoding="utf-8").splitlines()[0]
    return head.lstrip("# ").split(":")[0].split()


@pytest.fixture(scope="module")
def found(tmp_path_factory: pytest.TempPathFactory, warm_runner: Runner) -> dict[str, list]:
    repo = tmp_path_factory.mktemp("false-alarms") / "lab"
    shutil.copytree(CASES, repo)
    # the opt-in grayscale rule is on, so its quiet cases are judged too
    (repo / "figproof.toml").write_text('timeout = 60\n[rules.colours-confusable-gray]\nseverity = "note"\n')
    result = check(repo, CheckOptions(cache=False), runner=warm_runner).result
    by_script: dict[str, list] = {name: [] for name in SCRIPTS}
    for f in result.findings:
        by_script.setdefault(f.path, []).append(f)
    assert all(r.status == "ok" for r in result.runs), [(r.path, r.error) for r in result.runs if r.status != "ok"]
    return by_script


@pytest.mark.slow
@pytest.mark.parametrize("name", [s for s in SCRIPTS if s.startswith("quiet_")])
def test_quiet(name: str, found: dict[str, list]) -> None:
    raised = [(f.rule, f.message) for f in found[name] if f.rule in _rules(name)]
    assert not raised, f"{name}: {raised}"


@pytest.mark.slow
@pytest.mark.parametrize("name", [s for s in SCRIPTS if s.startswith("fires_")])
def test_fires(name: str, found: dict[str, list]) -> None:
    raised = {f.rule for f in found[name]}
    missing = [r for r in _rules(name) if r not in raised]
    assert not missing, f"{name}: {missing} not raised; got {[(f.rule, f.message) for f in found[name]]}"


@pytest.mark.slow
def test_hue_levels_are_named_by_their_legend_labels(found: dict[str, list]) -> None:
    # seaborn draws the hue levels as one unlabelled collection; its legend names each colour
    msg = next(f.message for f in found["fires_seaborn_hue_points.py"] if f.rule == "colours-confusable-cvd")
    assert "'forest' (#d62728)" in msg and "'meadow' (#2ca02c)" in msg, msg


@pytest.mark.slow
def test_errorbar_series_are_named_by_their_legend_labels(found: dict[str, list]) -> None:
    # the legend names each errorbar container; the clash is told in those names, not as bare hex lines
    msg = next(f.message for f in found["fires_legend_errorbar_lines.py"] if f.rule == "colours-confusable-cvd")
    assert "'mineral fertiliser'" in msg and "'no amendment'" in msg, msg

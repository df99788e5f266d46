"""figure-orphan on partial checks: --changed-files, --shard then merge, exclude, and the result cache.

A committed figure is an orphan only when no figure script of the repo writes or reads it.  A check that runs
some scripts judges only what it can: the scripts that ran, what the cache knows the others wrote last time, and
the literal file names the others' code saves to.  Shards are judged together by `figproof merge`.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from PIL import Image

from figproof.cli import ExitCode, main
from figproof.discover.outputs import saved_names
from figproof.discover.shard import shard_of

_LITERAL = """\
import matplotlib.pyplot as plt
fig, ax = plt.subplots()
ax.plot([1, 2, 3], [2.0, 1.5, 3.0], marker="o")
fig.savefig("figures/{name}.png")
"""
# names its file through a variable: what it writes cannot be read from the code
_DYNAMIC = """\
import matplotlib.pyplot as plt
for name in ["{name}"]:
    fig, ax = plt.subplots()
    ax.plot([1, 2, 3], [2.0, 1.5, 3.0], marker="o")
    fig.savefig(f"figures/{{name}}.png")
"""


def _committed(path: Path) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    Image.new("RGB", (64, 48), "white").save(path)  # its content does not matter: figure-drift is off


def _lab(tmp_path: Path, dynamic: bool) -> Path:
    """Four scripts writing a.png .. d.png, and one committed figure nobody writes (old.png)."""
    repo = tmp_path / "lab"
    (repo / "figures").mkdir(parents=True)
    for name in "abcd":
        (repo / f"plot_{name}.py").write_text((_DYNAMIC if dynamic else _LITERAL).format(name=name))
    for name in ("a", "b", "c", "d", "old"):
        _committed(repo / "figures" / f"{name}.png")
    (repo / "figproof.toml").write_text('fail-on = "warning"\n[rules.figure-drift]\nseverity = "off"\n')
    return repo


def _check(repo: Path, out: Path, *extra: str, changed: str | None = None) -> tuple[int, dict]:
    if changed:  # as pre-commit calls it: from the repo, with the staged files
        with pytest.MonkeyPatch.context() as mp:
            mp.chdir(repo)
            code = main(["check", "--changed-files", changed, "--quiet", "--json", str(out), *extra])
    else:
        code = main(["check", str(repo), "--quiet", "--json", str(out), *extra])
    return code, json.loads(out.read_text())


def _orphans(report: dict) -> list[str]:
    return sorted(f["path"] for f in report["findings"] if f["rule"] == "figure-orphan")


def test_saved_names_reads_literal_names_and_gives_up_on_anything_else(tmp_path: Path) -> None:
    (tmp_path / "lit.py").write_text(_LITERAL.format(name="a") + "plt.imsave('figures/raw.png', [[0, 1]])\n")
    (tmp_path / "dyn.py").write_text(_DYNAMIC.format(name="a"))
    (tmp_path / "helper.py").write_text("def save(fig, name):\n    fig.savefig(name)\n")
    (tmp_path / "via_helper.py").write_text("import helper\nimport matplotlib.pyplot as plt\n"
                                            "helper.save(plt.figure(), 'figures/h.png')\n")
    assert saved_names(tmp_path, "lit.py") == ("figures/a.png", "figures/raw.png")
    assert saved_names(tmp_path, "dyn.py") is None
    assert saved_names(tmp_path, "via_helper.py") is None  # the helper saves under a name it is handed


@pytest.mark.slow
@pytest.mark.parametrize("dynamic", [False, True], ids=["literal-names", "dynamic-names"])
def test_changed_files_raises_no_orphan_for_the_figures_of_scripts_that_did_not_run(tmp_path: Path,
                                                                                    dynamic: bool) -> None:
    repo = _lab(tmp_path, dynamic)
    code, report = _check(repo, tmp_path / "one.json", "--no-cache", changed="plot_a.py")
    assert [s["path"] for s in report["scripts"]] == ["plot_a.py"]
    assert report["not_run"] == ["plot_b.py", "plot_c.py", "plot_d.py"]
    if dynamic:
        # nobody can tell what the other three write: their figures and old.png are not judged, and it says so
        assert _orphans(report) == [] and code == ExitCode.PASSED
        assert [f["path"] for f in report["pending"]] == ["figures/b.png", "figures/c.png", "figures/d.png",
                                                           "figures/old.png"]
    else:
        # the others save to literal names, none of them old.png: it is still an orphan
        assert _orphans(report) == ["figures/old.png"] and code == ExitCode.FAILED
        assert report["pending"] == []


@pytest.mark.slow
def test_the_cache_tells_what_scripts_that_did_not_run_wrote_last_time(tmp_path: Path) -> None:
    repo = _lab(tmp_path, dynamic=True)
    _, full = _check(repo, tmp_path / "full.json")  # fills the cache
    assert _orphans(full) == ["figures/old.png"]
    code, report = _check(repo, tmp_path / "one.json", changed="plot_a.py")
    assert _orphans(report) == ["figures/old.png"] and report["pending"] == [] and code == ExitCode.FAILED


@pytest.mark.slow
def test_shards_merged_find_the_orphans_of_a_full_run(tmp_path: Path) -> None:
    repo = _lab(tmp_path, dynamic=True)
    assert {shard_of(f"plot_{n}.py", 2) for n in "abcd"} == {1, 2}  # both shards run something
    _, full = _check(repo, tmp_path / "full.json", "--no-cache")
    parts = []
    for k in (1, 2):
        code, part = _check(repo, tmp_path / f"part{k}.json", "--no-cache", "--shard", f"{k}/2")
        assert _orphans(part) == [] and code == ExitCode.PASSED  # with fail-on = warning, no shard fails alone
        parts.append(str(tmp_path / f"part{k}.json"))
    merged_path = tmp_path / "merged.json"
    code = main(["merge", *parts, "--json", str(merged_path), "--quiet"])
    merged = json.loads(merged_path.read_text())
    assert _orphans(merged) == _orphans(full) == ["figures/old.png"]
    assert code == ExitCode.FAILED and merged["summary"]["passed"] is False
    assert "not_run" not in merged and "pending" not in merged


@pytest.mark.slow
def test_an_excluded_script_is_not_run_and_its_figures_are_no_orphans(tmp_path: Path) -> None:
    repo = _lab(tmp_path, dynamic=True)
    (repo / "figproof.toml").write_text('exclude = ["plot_d.py", "figures/old.png"]\n'
                                        '[rules.figure-drift]\nseverity = "off"\n')
    _, report = _check(repo, tmp_path / "r.json", "--no-cache")
    assert report["not_run"] == ["plot_d.py"]
    assert _orphans(report) == []  # d.png may be plot_d.py's; old.png is excluded as a figure file
    assert report["pending"] == [{**report["pending"][0], "path": "figures/d.png"}]


@pytest.mark.slow
def test_a_full_run_reports_no_partial_fields(tmp_path: Path) -> None:
    repo = _lab(tmp_path, dynamic=False)
    (repo / "figures" / "old.png").unlink(missing_ok=True)
    code, report = _check(repo, tmp_path / "r.json", "--no-cache")
    assert code == ExitCode.PASSED and "not_run" not in report and "pending" not in report


def test_the_markdown_names_the_scripts_that_did_not_run_and_what_was_not_judged() -> None:
    from figproof.model.findings import CheckResult, Finding, Summary
    from figproof.report.markdown import partial_notes

    orphan = Finding(rule="figure-orphan", severity="warning", confidence="likely", path="figures/old.png",
                     line=None, figure=None, axes=None, message="…", fingerprint="f" * 16)
    result = CheckResult(root="lab", version="0", runs=(), findings=(), fail_on="warning",
                         summary=Summary(scripts=1, figures=1, errors=0, warnings=0, notes=0, accepted=0, passed=True),
                         not_run=("plot_b.py",), pending=(orphan,))
    assert partial_notes(result) == [
        "partial check: 1 of 2 figure scripts did not run (`plot_b.py`)",
        "1 committed figure that no script of this check wrote or read was not judged as orphan: a script that "
        "did not run may write it (`figproof merge` judges the shards of a check together)"]


@pytest.mark.slow
def test_two_scripts_writing_one_committed_file_are_one_finding_and_each_is_compared_on_its_own(
        tmp_path: Path, warm_runner) -> None:
    from figproof.pipeline import check

    repo = tmp_path / "lab"
    (repo / "figures").mkdir(parents=True)
    for name, size in (("a", (6.4, 4.8)), ("b", (3.2, 2.4))):
        (repo / f"plot_{name}.py").write_text(
            f"import matplotlib.pyplot as plt\nfig, ax = plt.subplots(figsize={size})\nax.plot([1, 2], [3, 4])\n"
            f"fig.savefig('figures/shared.png', dpi=100)\n")
    _committed(repo / "figures" / "shared.png")  # 64×48 px: neither script draws that
    result = check(repo, runner=warm_runner).result
    drift = sorted(f.message for f in result.findings if f.rule == "figure-drift")
    assert drift == [
        "figures/shared.png is 64×48 px but plot_a.py now draws it at 640×480 px",
        "figures/shared.png is 64×48 px but plot_b.py now draws it at 320×240 px",
        "figures/shared.png is written by 2 scripts (plot_a.py, plot_b.py); the last to run leaves its version, "
        "and each is compared with the committed file on its own"]

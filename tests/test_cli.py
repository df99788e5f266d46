"""The command line, tested in process: exit codes, one-line errors, reports, determinism."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

import figproof
from figproof.cli import ExitCode, main
from figproof.rules import RULES

REPOS = Path(__file__).parent / "data" / "repos"


def copy(case: str, tmp_path: Path) -> Path:
    dest = tmp_path / case
    shutil.copytree(REPOS / case, dest, ignore=shutil.ignore_patterns("expected.json"))
    return dest


def test_public_surface() -> None:
    assert figproof.__all__ == sorted(figproof.__all__) == ["__version__"]


def test_rules_lists_every_rule(capsys) -> None:
    assert main(["rules"]) == ExitCode.PASSED
    out = capsys.readouterr().out
    listed = [line.split()[0] for line in out.splitlines()[: len(RULES)]]
    assert listed == [r.id for r in RULES]
    # the opt-in rule is marked as such, and the footer says how to turn it on
    assert "colours-confusable-gray  opt-in" in out and 'severity = "note"' in out.splitlines()[-1]


def test_explain_known_and_unknown(capsys) -> None:
    assert main(["explain", "bars-for-continuous"]) == ExitCode.PASSED
    out = capsys.readouterr().out
    assert "Why it matters" in out and "How to fix it" in out and "Sources" in out
    assert main(["explain", "no-such-rule"]) == ExitCode.USAGE
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no-such-rule" in err


def test_missing_path_is_a_usage_error(tmp_path, capsys) -> None:
    assert main(["check", str(tmp_path / "nope")]) == ExitCode.USAGE
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "nope" in err


def test_bad_config_is_one_line_naming_file_key_value(tmp_path, capsys) -> None:
    (tmp_path / "pyproject.toml").write_text("[tool.figproof]\ntimeout = -3\n")
    assert main(["check", str(tmp_path)]) == ExitCode.USAGE
    err = capsys.readouterr().err.strip()
    assert "\n" not in err
    assert "pyproject.toml" in err and "'timeout'" in err and "-3" in err


def test_invalid_toml_is_one_line(tmp_path, capsys) -> None:
    (tmp_path / "figproof.toml").write_text("timeout = = 3\n")
    assert main(["check", str(tmp_path)]) == ExitCode.USAGE
    assert capsys.readouterr().err.strip().count("\n") == 0


def test_no_scripts_passes_with_a_note(tmp_path, capsys) -> None:
    (tmp_path / "notes.py").write_text("print('no plotting here')\n")
    assert main(["check", str(tmp_path)]) == ExitCode.PASSED
    assert "no figure scripts found" in capsys.readouterr().out


def test_explicit_include_matching_nothing_names_the_pattern(tmp_path, capsys) -> None:
    (tmp_path / "figproof.toml").write_text('include = ["plots/*.py"]\n')
    assert main(["check", str(tmp_path)]) == ExitCode.USAGE
    assert "plots/*.py" in capsys.readouterr().err


@pytest.mark.slow
def test_failing_check_writes_reports_and_exits_1(tmp_path, capsys) -> None:
    repo = copy("broken", tmp_path)
    out = tmp_path / "out"
    code = main(["check", str(repo), "--json", str(out / "r.json"), "--markdown", str(out / "r.md")])
    assert code == ExitCode.FAILED
    data = json.loads((out / "r.json").read_text())
    assert data["schema"] == 2 and data["tool"]["name"] == "figproof"
    assert data["summary"]["passed"] is False and data["summary"]["errors"] == 2
    assert {s["path"]: s["status"] for s in data["scripts"]} == {
        "healthy.py": "ok", "raises.py": "failed", "syntax_error.py": "failed"}
    finding = next(f for f in data["findings"] if f["path"] == "raises.py")
    assert set(finding) >= {"rule", "severity", "confidence", "path", "line", "figure", "axes", "message", "help"}
    md = (out / "r.md").read_text()
    assert md.startswith("## figproof FAILED") and "`raises.py:11`" in md
    assert md.strip() in capsys.readouterr().out


@pytest.mark.slow
def test_fail_on_never_passes(tmp_path) -> None:
    repo = copy("broken", tmp_path)
    (repo / "figproof.toml").write_text('fail-on = "never"\n')
    assert main(["check", str(repo), "--quiet"]) == ExitCode.PASSED


@pytest.mark.slow
def test_reports_are_byte_identical_across_runs(tmp_path) -> None:
    """Two checks of the same repo give the same bytes, with and without the result cache."""
    repo = copy("mpl_bars", tmp_path)
    texts = []
    for i in range(3):
        out = tmp_path / f"out{i}"
        flags = ["--no-cache"] if i == 2 else []
        main(["check", str(repo), "--quiet", "--json", str(out / "r.json"), "--markdown", str(out / "r.md"), *flags])
        texts.append(((out / "r.json").read_bytes(), (out / "r.md").read_bytes()))
    assert texts[0] == texts[1] == texts[2]


@pytest.mark.slow
def test_user_tree_is_never_written(tmp_path) -> None:
    """A check leaves `git status` clean and every file's mtime as it was, even when scripts
    delete and rewrite files and save figures into the repo."""
    repo = copy("mpl_bars", tmp_path)
    (repo / "figures" / "vandal.py").write_text(
        "import os, matplotlib.pyplot as plt\n"
        "os.remove('data/cells.csv')\n"
        "open('figures/means.py', 'w').write('oops')\n"
        "plt.figure().savefig('figures/vandal.png')\n")
    env = {**os.environ, "GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@example.org",
           "GIT_COMMITTER_NAME": "t", "GIT_COMMITTER_EMAIL": "t@example.org"}
    for cmd in (["git", "init", "-q"], ["git", "add", "."], ["git", "commit", "-qm", "fixture"]):
        subprocess.run(cmd, cwd=repo, check=True, env=env)
    before = {p: p.stat().st_mtime_ns for p in repo.rglob("*") if ".git" not in p.parts}
    main(["check", str(repo), "--quiet"])
    assert (repo / ".figproof-cache" / ".gitignore").read_text().strip() == "*"
    status = subprocess.run(["git", "status", "--porcelain", "--ignored"], cwd=repo, capture_output=True,
                            text=True, check=True).stdout
    # the only new thing is figproof's own result cache, which ignores itself for git
    assert status == "!! .figproof-cache/\n"
    after = {p: p.stat().st_mtime_ns for p in repo.rglob("*")
             if ".git" not in p.parts and ".figproof-cache" not in p.parts}
    assert after == before


def test_importing_rules_does_not_import_pyplot() -> None:
    code = "import sys, figproof.rules, figproof.pipeline; print('matplotlib.pyplot' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"

"""The command line in a lab's workflow: accepting findings, shards, changed files, CI output."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
from pathlib import Path

import pytest

from figproof.cli import ExitCode, main

REPOS = Path(__file__).parent / "data" / "repos"
GIT_ENV = {"GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@example.org", "GIT_COMMITTER_NAME": "t",
           "GIT_COMMITTER_EMAIL": "t@example.org"}


def copy(case: str, tmp_path: Path) -> Path:
    dest = tmp_path / case
    shutil.copytree(REPOS / case, dest, ignore=shutil.ignore_patterns("expected.json"))
    return dest


def git(repo: Path, *args: str) -> None:
    subprocess.run(["git", *args], cwd=repo, check=True, capture_output=True, env={**os.environ, **GIT_ENV})


@pytest.mark.slow
def test_accept_then_only_new_problems_fail(tmp_path, capsys) -> None:
    repo = copy("broken", tmp_path)
    assert main(["check", str(repo), "--quiet", "--no-cache"]) == ExitCode.FAILED
    assert main(["accept", str(repo)]) == ExitCode.PASSED
    entries = json.loads((repo / ".figproof-accepted.json").read_text())
    assert entries  # the file lists today's findings
    assert main(["check", str(repo), "--quiet", "--json", str(tmp_path / "r.json")]) == ExitCode.PASSED
    data = json.loads((tmp_path / "r.json").read_text())
    assert data["summary"]["accepted"] == 2 and all("accepted" in f for f in data["findings"])
    # a new problem still fails the build
    (repo / "new.py").write_text("import matplotlib.pyplot as plt\nplt.plot([1, 2])\nraise RuntimeError('x')\n")
    assert main(["check", str(repo), "--quiet"]) == ExitCode.FAILED


@pytest.mark.slow
def test_allow_comment_accepts_with_its_reason(tmp_path) -> None:
    repo = copy("broken", tmp_path)
    (repo / "syntax_error.py").unlink()
    raises = repo / "raises.py"
    raises.write_text(raises.read_text().replace(
        "ax.plot(values, values[5])", "ax.plot(values, values[5])  # figproof: allow script-fails -- kept broken "
                                      "on purpose for the teaching notes"))
    out = tmp_path / "r.json"
    assert main(["check", str(repo), "--quiet", "--json", str(out)]) == ExitCode.PASSED
    [f] = [f for f in json.loads(out.read_text())["findings"] if f["rule"] == "script-fails"]
    assert f["accepted"] == "kept broken on purpose for the teaching notes"


def test_malformed_accepted_file_is_one_line(tmp_path, capsys) -> None:
    (tmp_path / "a.py").write_text("import matplotlib.pyplot as plt\n")
    (tmp_path / ".figproof-accepted.json").write_text("{not json")
    assert main(["check", str(tmp_path), "--quiet"]) == ExitCode.USAGE
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and ".figproof-accepted.json" in err


@pytest.mark.slow
def test_shards_merge_to_the_whole(tmp_path) -> None:
    repo = copy("broken", tmp_path)
    whole = tmp_path / "whole.json"
    main(["check", str(repo), "--quiet", "--no-cache", "--json", str(whole)])
    parts = []
    for k in (1, 2):
        part = tmp_path / f"part{k}.json"
        main(["check", str(repo), "--quiet", "--shard", f"{k}/2", "--json", str(part)])
        parts.append(str(part))
    merged = tmp_path / "merged.json"
    code = main(["merge", *parts, "--json", str(merged), "--quiet"])
    assert code == ExitCode.FAILED
    a, b = json.loads(whole.read_text()), json.loads(merged.read_text())
    assert sorted(s["path"] for s in b["scripts"]) == sorted(s["path"] for s in a["scripts"])
    assert b["findings"] == a["findings"] and b["summary"] == a["summary"]


def test_bad_shard_spec_is_a_usage_error(tmp_path, capsys) -> None:
    (tmp_path / "a.py").write_text("import matplotlib.pyplot as plt\n")
    assert main(["check", str(tmp_path), "--shard", "3/2"]) == ExitCode.USAGE
    assert "3/2" in capsys.readouterr().err


@pytest.mark.slow
def test_changed_files_checks_scripts_and_their_readers(tmp_path, monkeypatch) -> None:
    repo = copy("mpl_bars", tmp_path)
    (repo / "figures" / "other.py").write_text("import matplotlib.pyplot as plt\nplt.figure()\n")
    git(repo, "init", "-q")
    git(repo, "add", ".")
    git(repo, "commit", "-qm", "x")
    monkeypatch.chdir(repo)
    out = tmp_path / "r.json"
    main(["check", "--changed-files", "data/cells.csv", "--quiet", "--json", str(out)])
    assert [s["path"] for s in json.loads(out.read_text())["scripts"]] == ["figures/means.py"]
    main(["check", "--changed-files", "figures/other.py", "--quiet", "--json", str(out)])
    assert [s["path"] for s in json.loads(out.read_text())["scripts"]] == ["figures/other.py"]


@pytest.mark.slow
def test_changed_data_file_selects_the_scripts_that_read_it_last_time(tmp_path, monkeypatch) -> None:
    """Once a script has run, the inputs it really read (kept with its cached result) decide, not its text."""
    repo = tmp_path / "repo"
    (repo / "data").mkdir(parents=True)
    (repo / "data" / "counts.csv").write_text("a,b\n1,2\n3,4\n")
    (repo / "indirect.py").write_text("import matplotlib.pyplot as plt, numpy as np\n"
                                      "name = 'data/' + 'co' + 'unts' + '.csv'\n"
                                      "plt.plot(np.loadtxt(name, delimiter=',', skiprows=1))\n")
    (repo / "unrelated.py").write_text("import matplotlib.pyplot as plt\nplt.plot([1, 2])\n")
    git(repo, "init", "-q")
    git(repo, "add", ".")
    git(repo, "commit", "-qm", "x")
    monkeypatch.chdir(repo)
    out = tmp_path / "r.json"
    main(["check", "--changed-files", "data/counts.csv", "--quiet", "--json", str(out)])
    assert json.loads(out.read_text())["scripts"] == []  # nothing recorded yet, and no script names the file
    main(["check", "--quiet"])  # a full run records what each script read
    main(["check", "--changed-files", "data/counts.csv", "--quiet", "--json", str(out)])
    assert [s["path"] for s in json.loads(out.read_text())["scripts"]] == ["indirect.py"]


def test_unknown_git_ref_is_one_line(tmp_path, capsys) -> None:
    (tmp_path / "a.py").write_text("import matplotlib.pyplot as plt\n")
    git(tmp_path, "init", "-q")
    git(tmp_path, "add", ".")
    git(tmp_path, "commit", "-qm", "x")
    assert main(["check", str(tmp_path), "--changed-since", "no-such-branch"]) == ExitCode.USAGE
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and "no-such-branch" in err


@pytest.mark.slow
def test_github_actions_annotations_and_step_summary(tmp_path, monkeypatch, capsys) -> None:
    repo = copy("broken", tmp_path)
    summary = tmp_path / "step-summary.md"
    monkeypatch.setenv("GITHUB_ACTIONS", "true")
    monkeypatch.setenv("GITHUB_STEP_SUMMARY", str(summary))
    assert main(["check", str(repo), "--no-cache"]) == ExitCode.FAILED
    out = capsys.readouterr().out
    # GitHub's workflow-command syntax: ::error file=...,line=...::message
    assert "::error file=raises.py,line=11," in out
    assert summary.read_text().startswith("## figproof FAILED")


@pytest.mark.slow
def test_step_summary_links_the_visual_report_through_the_run_page(tmp_path, monkeypatch, capsys) -> None:
    repo = copy("broken", tmp_path)
    summary = tmp_path / "step-summary.md"
    for name, value in (("GITHUB_ACTIONS", "true"), ("GITHUB_STEP_SUMMARY", str(summary)),
                        ("GITHUB_SERVER_URL", "https://github.example"), ("GITHUB_REPOSITORY", "lab/figures"),
                        ("GITHUB_RUN_ID", "77")):
        monkeypatch.setenv(name, value)
    monkeypatch.chdir(tmp_path)
    main(["check", str(repo), "--no-cache", "--markdown", "report/summary.md", "--html", "report/html"])
    capsys.readouterr()
    # the job summary cannot open a file of the run; it links the run's page, where the artifact is listed
    assert ("[visual report](https://github.example/lab/figures/actions/runs/77#artifacts) "
            "(html/index.html in this run's report artifact)") in summary.read_text()
    assert "[visual report](html/index.html)." in (tmp_path / "report" / "summary.md").read_text()
    assert (tmp_path / "report" / "html" / "index.html").is_file()


@pytest.mark.slow
def test_sarif_and_gitlab_files(tmp_path) -> None:
    repo = copy("broken", tmp_path)
    main(["check", str(repo), "--quiet", "--sarif", str(tmp_path / "r.sarif"), "--gitlab", str(tmp_path / "g.json")])
    sarif = json.loads((tmp_path / "r.sarif").read_text())
    assert sarif["version"] == "2.1.0" and len(sarif["runs"][0]["results"]) == 2
    gitlab = json.loads((tmp_path / "g.json").read_text())
    assert {g["location"]["path"] for g in gitlab} == {"raises.py", "syntax_error.py"}

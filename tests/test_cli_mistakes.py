"""Ordinary mistakes on the command line end in one line and exit 2, never a traceback (exit 3)."""

from __future__ import annotations

import json
import os
import stat
from pathlib import Path

import pytest

from figproof.cli import ExitCode, main

SCRIPT = "import matplotlib.pyplot as plt\nfig, ax = plt.subplots()\nax.plot([1, 2], [3, 4])\nfig.savefig('{out}')\n"
_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0  # chmod does not stop root from writing


def _one_line(capsys: pytest.CaptureFixture[str]) -> str:
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "Traceback" not in err, err
    return err


@pytest.mark.parametrize("jobs", ["0", "-3"])
def test_jobs_below_one_is_a_usage_error(tmp_path: Path, capsys: pytest.CaptureFixture[str], jobs: str) -> None:
    assert main(["check", str(tmp_path), "--jobs", jobs]) == ExitCode.USAGE
    assert _one_line(capsys) == f"figproof: --jobs must be a positive whole number (got {jobs})"


def test_markdown_at_a_folder_and_images_at_a_file_are_usage_errors(tmp_path: Path,
                                                                     capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "a.py").write_text(SCRIPT.format(out="a.png"))
    folder = tmp_path / "out"
    folder.mkdir()
    assert main(["check", str(tmp_path), "--markdown", str(folder)]) == ExitCode.USAGE
    assert _one_line(capsys) == f"figproof: --markdown {folder}: is a folder; give the name of the file to write"
    file = tmp_path / "images.txt"
    file.write_text("x")
    assert main(["check", str(tmp_path), "--images", str(file)]) == ExitCode.USAGE
    assert _one_line(capsys) == f"figproof: --images {file}: is a file; give a folder for the images"
    assert main(["check", str(tmp_path), "--json", str(file / "r.json")]) == ExitCode.USAGE
    assert "a file stands where its folder should be" in _one_line(capsys)


def test_html_at_a_file_is_a_usage_error(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "a.py").write_text(SCRIPT.format(out="a.png"))
    file = tmp_path / "report.html"
    file.write_text("x")
    assert main(["check", str(tmp_path), "--html", str(file)]) == ExitCode.USAGE
    assert _one_line(capsys) == f"figproof: --html {file}: is a file; give a folder for the visual report"
    assert main(["check", str(tmp_path), "--html", str(file / "html")]) == ExitCode.USAGE
    assert _one_line(capsys) == f"figproof: --html {file / 'html'}: a file stands where its folder should be"
    assert file.read_text() == "x"  # the user's file is untouched


@pytest.mark.slow
@pytest.mark.skipif(_ROOT, reason="running as root, whom chmod does not stop from writing")
def test_accept_in_a_read_only_repo_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    repo = tmp_path / "lab"
    repo.mkdir()
    (repo / "a.py").write_text(SCRIPT.format(out="a.png") + "raise RuntimeError('x')\n")
    repo.chmod(stat.S_IRUSR | stat.S_IXUSR)
    try:
        assert main(["accept", str(repo)]) == ExitCode.USAGE
    finally:
        repo.chmod(stat.S_IRWXU)
    assert "cannot write the accepted-findings file" in _one_line(capsys).splitlines()[-1]


def test_demo_keep_into_an_unusable_folder_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("x")  # a file where the folder should be: refused for root too
    assert main(["demo", "--keep", str(blocker)]) == ExitCode.USAGE
    assert _one_line(capsys).startswith(f"figproof: --keep {blocker}: cannot copy the demo repo there")


@pytest.mark.slow
def test_a_file_path_checks_that_script(tmp_path: Path) -> None:
    repo = tmp_path / "lab"
    repo.mkdir()
    (repo / "figproof.toml").write_text("")
    (repo / "a.py").write_text(SCRIPT.format(out="a.png"))
    (repo / "b.py").write_text(SCRIPT.format(out="b.png"))
    out = tmp_path / "r.json"
    main(["check", str(repo / "b.py"), "--quiet", "--no-cache", "--json", str(out)])
    report = json.loads(out.read_text())
    assert [s["path"] for s in report["scripts"]] == ["b.py"] and report["not_run"] == ["a.py"]


def test_a_file_path_no_script_belongs_with_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "figproof.toml").write_text("")
    (tmp_path / "a.py").write_text(SCRIPT.format(out="a.png"))
    (tmp_path / "notes.txt").write_text("nothing reads this\n")
    assert main(["check", str(tmp_path / "notes.txt"), "--no-cache"]) == ExitCode.USAGE
    assert "not a figure script, and no figure script reads or imports it" in _one_line(capsys)


@pytest.mark.slow
@pytest.mark.skipif(_ROOT, reason="running as root, whom chmod does not stop from writing")
def test_a_read_only_repo_says_the_cache_is_not_writable_once(tmp_path: Path) -> None:
    repo = tmp_path / "lab"
    repo.mkdir()
    for name in "abc":
        (repo / f"{name}.py").write_text(SCRIPT.format(out=f"/tmp/{name}-never.png").replace("fig.savefig", "#"))
    repo.chmod(stat.S_IRUSR | stat.S_IXUSR)
    out = tmp_path / "r.json"
    try:
        main(["check", str(repo), "--quiet", "--json", str(out)])
    finally:
        repo.chmod(stat.S_IRWXU)
    report = json.loads(out.read_text())
    cache_notes = [n for n in report["notes"] if "result cache" in n]
    assert len(cache_notes) == 1 and cache_notes[0].endswith("(3 scripts)")
    assert all(not s["notes"] for s in report["scripts"])


@pytest.mark.slow
def test_accept_that_cannot_write_its_file_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                                        monkeypatch: pytest.MonkeyPatch) -> None:
    # as on a read-only repo (root ignores chmod, so the refusal is simulated where the file is written)
    import figproof.policy.accept

    def refuse(*args: object, **kwargs: object) -> None:
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(figproof.policy.accept, "write_accepted", refuse)
    (tmp_path / "a.py").write_text(SCRIPT.format(out="a.png"))
    assert main(["accept", str(tmp_path), "--jobs", "1"]) == ExitCode.USAGE
    err = capsys.readouterr().err.strip().splitlines()[-1]
    assert err == (f"figproof: {tmp_path / '.figproof-accepted.json'}: cannot write the accepted-findings file "
                   f"(Permission denied); make the repo writable")


def test_notes_about_the_cache_folder_are_said_once_for_the_check() -> None:
    from figproof.model.records import ScriptRun
    from figproof.pipeline import lift_shared_notes

    cache = "result cache .figproof-cache is not writable; the result was not stored"
    runs = tuple(ScriptRun(path=p, status="ok", notes=(cache, "cell 2: skipped 1 IPython magic or shell line"))
                 for p in ("a.ipynb", "b.ipynb"))
    lifted, notes = lift_shared_notes(runs)
    assert notes == [f"{cache} (2 scripts)"]
    assert [r.notes for r in lifted] == [("cell 2: skipped 1 IPython magic or shell line",)] * 2

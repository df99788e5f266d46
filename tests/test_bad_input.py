"""Bad input never crashes figproof and never touches the user's files."""

from __future__ import annotations

from pathlib import Path

import pytest

from figproof.pipeline import check

PLOT = "import matplotlib.pyplot as plt\n"


def write(repo: Path, name: str, text: str) -> Path:
    path = repo / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)
    return path


@pytest.mark.slow
def test_corrupt_notebook_is_reported_and_others_still_run(tmp_path: Path) -> None:
    write(tmp_path, "broken.ipynb", '{"cells": [ {"cell_type": "code", "source": "import matplotlib"')
    write(tmp_path, "fine.py", PLOT + "plt.plot([1, 2, 3])\n")
    result = check(tmp_path).result
    status = {r.path: r.status for r in result.runs}
    assert status == {"broken.ipynb": "failed", "fine.py": "ok"}
    [f] = [f for f in result.findings if f.rule == "script-fails"]
    assert f.path == "broken.ipynb" and "notebook" in f.message and "\n" not in f.message


@pytest.mark.slow
def test_unreadable_committed_figure_is_a_finding_not_a_crash(tmp_path: Path) -> None:
    write(tmp_path, "fig.py", PLOT + "plt.plot([1, 2])\nplt.savefig('out.png')\nplt.savefig('out.png')\n")
    (tmp_path / "out.png").write_bytes(b"\x89PNG\r\n\x1a\n this is not really a png")
    before = (tmp_path / "out.png").read_bytes()
    result = check(tmp_path).result
    [run] = result.runs
    assert run.status == "ok" and run.figures[0].outputs == ("out.png",)  # saved twice, listed once
    drift = [f for f in result.findings if f.rule == "figure-drift"]
    assert drift and "out.png" in drift[0].message
    assert (tmp_path / "out.png").read_bytes() == before


@pytest.mark.slow
def test_writing_into_the_real_repo_by_absolute_path_is_blocked(tmp_path: Path) -> None:
    """The script runs on a copy; an absolute path back into the user's repo must not reach it."""
    repo = tmp_path / "repo"
    leak, data = repo / "leak.png", repo / "notes.txt"
    write(repo, "fig.py", PLOT + f"plt.plot([1, 2])\nplt.savefig({str(leak)!r})\n")
    write(repo, "other.py", PLOT + f"open({str(data)!r}, 'w').write('overwritten')\n")
    data.write_text("the lab's notes")
    result = check(repo).result
    assert not leak.exists() and data.read_text() == "the lab's notes"
    assert {r.path: [e.action for e in r.events] for r in result.runs} == {
        "fig.py": ["blocked-write"], "other.py": ["blocked-write"]}
    assert {f.path for f in result.findings if f.rule == "write-outside-copy"} == {"fig.py", "other.py"}


@pytest.mark.slow
def test_unusual_axes_do_not_crash(tmp_path: Path) -> None:
    write(tmp_path, "axes.py", PLOT + (
        "import numpy as np, datetime as dt\n"
        "fig = plt.figure()\n"
        "polar = fig.add_subplot(2, 2, 1, projection='polar')\n"
        "polar.plot(np.linspace(0, 6, 50), np.linspace(0, 1, 50), 'o')\n"
        "ax3 = fig.add_subplot(2, 2, 2, projection='3d')\n"
        "ax3.scatter([1, 2], [3, 4], [5, 6])\n"
        "ax = fig.add_subplot(2, 2, 3)\n"
        "ax.plot([1, 2, 3], [1, 4, 9], 'o-')\n"
        "twin = ax.twinx()\n"
        "twin.bar([1, 2, 3], [0.5, 0.25, 0.75])\n"
        "dates = fig.add_subplot(2, 2, 4)\n"
        "days = [dt.date(2026, 5, d) for d in (1, 2, 3)]\n"
        "dates.plot(days, [1.5, 2.5, 2.0], 'o')\n"
        "masked = np.ma.masked_array([1.0, 2.0, 3.0], mask=[0, 1, 0])\n"
        "ax.scatter([1, 2, 3], masked)\n"
        "ax.scatter([], [])\n"
        "ax.imshow(np.random.default_rng(0).random((4, 4, 3)), extent=(0, 1, 0, 1))\n"))
    result = check(tmp_path).result
    [run] = result.runs
    assert run.status == "ok", run.error
    assert len(run.figures[0].axes) == 5
    assert {a.projection for a in run.figures[0].axes} == {"polar", "3d", "rectilinear"}
    assert not [f for f in result.findings if f.rule == "script-fails"]

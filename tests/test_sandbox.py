"""Reused sandbox copies: whatever a script does to its copy is undone before the next script gets it.

The reference is a fresh copy of the repo (shutil.copytree, as figproof always made): after a script's
changes and a release, the copy handed out next must hold the same entries, types, permissions, contents
and link targets.
"""

from __future__ import annotations

import os
import stat
import sys
import time
from pathlib import Path

import pytest

from figproof.run import sandbox
from figproof.run.execute import FreshInterpreter, Options, Task, execute_all
from figproof.run.sandbox import SandboxPool, copy_repo, restore, scan


def make_repo(root: Path) -> Path:
    (root / "data" / "raw").mkdir(parents=True)
    (root / "figures").mkdir()
    (root / ".git").mkdir()
    (root / ".git" / "HEAD").write_text("ref: refs/heads/main\n")
    (root / "data" / "yield.csv").write_text("plot,yield\n1,4.2\n2,3.9\n")
    (root / "data" / "raw" / "plate1.csv").write_text("well,od\nA1,0.31\n")
    (root / "figures" / "yield.png").write_bytes(b"\x89PNG committed figure")
    (root / "figures" / "yield.py").write_text("print('draws the figure')\n")
    os.symlink("yield.csv", root / "data" / "latest.csv")
    return root


def tree(top: Path) -> dict[str, tuple[str, int, bytes | str]]:
    """Every entry under ``top``: kind, permission bits, and contents (files) or target (links)."""
    out: dict[str, tuple[str, int, bytes | str]] = {}
    for path, st in sorted(scan(top).items()):
        full = top / path
        mode = stat.S_IMODE(st[3])
        if stat.S_ISLNK(st[0]):
            out[path] = ("link", 0, os.readlink(full))
        elif stat.S_ISDIR(st[0]):
            out[path] = ("dir", mode, "")
        else:
            out[path] = ("file", mode, full.read_bytes())
    return out


def vandalise(copy: Path) -> None:
    """What scripts do to the repo they run in, all at once."""
    (copy / "data" / "yield.csv").write_text("plot,yield\n1,9.9\n2,9.9\n")  # same size, new content
    (copy / "figures" / "yield.png").write_bytes(b"\x89PNG regenerated, longer than before")
    (copy / "figures" / "yield.py").unlink()
    (copy / "figures" / "new.png").write_bytes(b"new output")
    (copy / "out" / "deep").mkdir(parents=True)
    (copy / "out" / "deep" / "table.csv").write_text("x\n")
    for child in (copy / "data" / "raw").iterdir():
        child.unlink()
    (copy / "data" / "raw").rmdir()
    (copy / "data" / "raw").write_text("now a file")  # a folder replaced by a file
    (copy / "data" / "latest.csv").unlink()
    os.symlink("/etc/hostname", copy / "data" / "latest.csv")  # a link pointed elsewhere
    os.chmod(copy / "data", 0o500)
    os.chmod(copy / "data", 0o755)
    os.chmod(copy / "data" / "yield.csv", 0o600)
    (copy / ".git").mkdir()  # a folder figproof never copies appears


def test_a_released_copy_matches_a_fresh_copy_again(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    copy_repo(repo, tmp_path / "fresh")
    with SandboxPool(repo) as pool:
        box = pool.acquire()
        assert tree(box.repo) == tree(tmp_path / "fresh")
        assert ".git" not in os.listdir(box.repo)  # common practice: VCS folders stay out of the copy
        vandalise(box.repo)
        assert tree(box.repo) != tree(tmp_path / "fresh")
        pool.release(box)
        time.sleep(0.05)  # past the next tick of the file clock: the restored copy is ready again
        again = pool.acquire()
        assert again is box and pool.made == 1  # reused, not copied again
        assert tree(again.repo) == tree(tmp_path / "fresh")
        pool.release(again)
    assert not box.base.exists()  # closing the pool deletes its copies
    assert tree(repo)["data/yield.csv"][2] == b"plot,yield\n1,4.2\n2,3.9\n"  # the user's files never changed


def test_a_same_size_rewrite_right_after_handing_out_is_caught(tmp_path: Path) -> None:
    # the status-change time is the kernel's; the pool waits for the file clock to tick past the snapshot,
    # so even a write in the first microseconds changes it
    repo = make_repo(tmp_path / "repo")
    original = (repo / "data" / "yield.csv").read_bytes()
    with SandboxPool(repo, jobs=1) as pool:
        for i in range(30):
            box = pool.acquire()
            assert (box.repo / "data" / "yield.csv").read_bytes() == original, i
            (box.repo / "data" / "yield.csv").write_bytes(original.replace(b"4.2", b"7.7"))
            pool.release(box)
        assert pool.made <= 2  # two copies per job, used in turn


def test_an_unchanged_copy_is_handed_out_as_it_is(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    with SandboxPool(repo) as pool:
        box = pool.acquire()
        before = scan(box.repo)
        pool.release(box)
        assert scan(box.repo) == before and pool.restored == 0


def test_copies_in_use_at_the_same_time_are_different(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    with SandboxPool(repo, jobs=2) as pool:
        a, b = pool.acquire(), pool.acquire()
        assert a.base != b.base
        pool.release(a)
        pool.release(b)


def test_a_copy_that_cannot_be_restored_is_replaced(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    with SandboxPool(repo) as pool:
        box = pool.acquire()
        (box.repo / "figures" / "yield.py").unlink()
        (repo / "figures" / "yield.py").unlink()  # gone from the repo too: nothing to put back
        pool.release(box)
        assert not box.base.exists()
        fresh = pool.acquire()
        assert fresh is not box and pool.made == 2
        assert not (fresh.repo / "figures" / "yield.py").exists()  # the new copy follows the repo
        pool.release(fresh)


def test_restore_raises_when_the_repo_changed_underneath(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    copy_repo(repo, tmp_path / "copy")
    snapshot = scan(tmp_path / "copy")
    (tmp_path / "copy" / "data" / "yield.csv").unlink()
    (repo / "data" / "yield.csv").unlink()
    with pytest.raises(OSError):
        restore(tmp_path / "copy", repo, snapshot)


def test_skipped_folders_stay_out_of_restored_copies(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    (repo / "data" / "raw" / "report").mkdir()
    (repo / "data" / "raw" / "report" / "old.md").write_text("figproof's own report folder\n")
    with SandboxPool(repo, ("data/raw/report",)) as pool:
        box = pool.acquire()
        assert not (box.repo / "data" / "raw" / "report").exists()
        for child in (box.repo / "data" / "raw").iterdir():
            child.unlink()
        (box.repo / "data" / "raw").rmdir()  # put back as a whole folder, still without the skipped one
        pool.release(box)
        box = pool.acquire()
        assert (box.repo / "data" / "raw" / "plate1.csv").exists()
        assert not (box.repo / "data" / "raw" / "report").exists()
        pool.release(box)


def test_no_reuse_on_a_file_system_with_coarse_time_stamps(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(sandbox, "FINE_STAMPS_NS", 1)  # every stamp counts as coarse
    repo = make_repo(tmp_path / "repo")
    with SandboxPool(repo) as pool:
        for _ in range(3):
            box = pool.acquire()
            pool.release(box)
            assert not box.base.exists()
        assert pool.made == 3


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root is not stopped by permissions")
def test_a_copy_the_script_locked_is_still_deleted(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    with SandboxPool(repo) as pool:
        box = pool.acquire()
        os.chmod(box.repo / "data", 0)
        pool.release(box)
        assert not box.base.exists()


@pytest.mark.slow
def test_the_next_script_sees_the_repo_the_previous_one_wrecked(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    (repo / "a_wreck.py").write_text(
        "import os, shutil\n"
        "open('data/yield.csv', 'w').write('plot,yield\\n1,0.0\\n')\n"
        "shutil.rmtree('data/raw')\n"
        "os.remove('figures/yield.png')\n"
        "open('stray.txt', 'w').write('left behind')\n")
    (repo / "b_check.py").write_text(
        "import os\n"
        "assert open('data/yield.csv').read() == 'plot,yield\\n1,4.2\\n2,3.9\\n'\n"
        "assert os.path.exists('data/raw/plate1.csv') and os.path.exists('figures/yield.png')\n"
        "assert not os.path.exists('stray.txt')\n")
    options = Options(root=repo, artifacts=tmp_path / "art", jobs=1, timeout=60, memory_limit=1024)
    runs = execute_all([Task(script="a_wreck.py"), Task(script="b_check.py")], options, FreshInterpreter())
    assert [r.status for r in runs] == ["ok", "ok"], runs[1].stderr_tail
    assert (repo / "data" / "yield.csv").read_text() == "plot,yield\n1,4.2\n2,3.9\n"


def test_the_clock_the_pool_waits_on_is_the_file_clock(tmp_path: Path) -> None:
    # a file written now carries a time stamp no later than the file clock one tick on
    (tmp_path / "f").write_text("x")
    stamp = os.lstat(tmp_path / "f").st_ctime_ns
    resolution = 0.02 if sys.platform.startswith("linux") else 2.0  # Linux: a jiffy, 1-10 ms; others: generous
    assert sandbox._now_ns() + int(resolution * 1e9) > stamp

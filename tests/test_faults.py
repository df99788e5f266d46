"""figproof's own trouble: interrupted checks, killed checks, a full or unwritable temp folder, the repo view.

Each end-to-end test runs figproof as a separate process with ``TMPDIR`` pointed at a folder of its own, so
what a check leaves behind can be counted.  A test waits for a line the fixture script prints (never for a
fixed time) before it signals figproof.  Exit codes are the documented ones (README, "Exit codes"); 130 and 143
are the shell convention for a process ended by SIGINT and SIGTERM (128 + the signal number, POSIX
``sh`` "Exit Status for Commands").
"""

from __future__ import annotations

import errno
import json
import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from collections.abc import Iterator
from pathlib import Path

import pytest

from figproof import cli
from figproof.run import scratch
from figproof.run.execute import FreshInterpreter, Options, Task, execute_all
from figproof.run.resources import EnvironmentProblem
from figproof.run.sandbox import SandboxPool

linux_only = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="uses /proc and Linux mounts")
WAIT = 120.0  # seconds before a test gives up waiting for a line or an exit (a failure, never a pass)

SLOW = """
    import os, subprocess, sys, time
    import matplotlib.pyplot as plt
    plt.plot([1, 2, 3], [2, 1, 3])
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(300)"])
    print("started", os.getpid(), os.getppid(), sleeper.pid, flush=True)
    if os.environ.get("FIGPROOF_TEST_HOLD") == "1":
        time.sleep(300)  # held until figproof is signalled or killed
    sleeper.kill()
"""
FAST = """
    import matplotlib.pyplot as plt
    plt.bar(["a", "b"], [1, 2])
"""


def write_repo(root: Path, files: dict[str, str | bytes]) -> Path:
    for rel, body in files.items():
        path = root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(body, bytes):
            path.write_bytes(body)
        else:
            path.write_text(textwrap.dedent(body), encoding="utf-8")
    return root


def leftovers(tmp: Path) -> list[str]:
    """figproof's folders in a temp folder."""
    return sorted(p.name for p in tmp.iterdir() if p.name.startswith("figproof-"))


def alive(pid: int) -> bool:
    """Whether a process runs (a zombie no longer runs; init reaps it in its own time)."""
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


def start_check(repo: Path, tmp: Path, *extra: str, hold: bool = True, runner: str = "") -> subprocess.Popen[str]:
    env = dict(os.environ, TMPDIR=str(tmp), FIGPROOF_TEST_HOLD="1" if hold else "0")
    if runner:
        env["FIGPROOF_RUNNER"] = runner
    return subprocess.Popen([sys.executable, "-m", "figproof.cli", "check", str(repo), *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, stdin=subprocess.DEVNULL, text=True,
                            env=env, cwd=repo.parent)


def wait_started(tmp: Path, proc: subprocess.Popen[str], count: int = 1) -> list[list[int]]:
    """Wait until ``count`` scripts printed their "started" line (read from the run folders' stdout files)."""
    deadline = time.monotonic() + WAIT
    while time.monotonic() < deadline:
        found = []
        for out in tmp.glob("figproof-run-*/*/stdout.txt"):
            for line in out.read_text(errors="replace").splitlines():
                if line.startswith("started "):
                    found.append([int(x) for x in line.split()[1:]])
        if len(found) >= count:
            return found
        if proc.poll() is not None:
            pytest.fail(f"figproof ended early ({proc.returncode}): {proc.communicate()[1][-2000:]}")
        time.sleep(0.05)  # polling for the line the script prints, not waiting for a guessed time
    proc.kill()
    pytest.fail("the fixture script never said it started")


@pytest.fixture
def tmp(tmp_path: Path) -> Path:
    folder = tmp_path / "tmp"
    folder.mkdir()
    return folder


@pytest.mark.slow
@linux_only
@pytest.mark.parametrize(("sig", "code", "runner"), [(signal.SIGINT, 130, ""), (signal.SIGTERM, 143, ""),
                                                      (signal.SIGTERM, 143, "fresh")])
def test_a_signal_mid_run_stops_children_and_leaves_no_temp_folder(tmp_path: Path, tmp: Path, sig: int,
                                                                   code: int, runner: str) -> None:
    repo = write_repo(tmp_path / "repo", {"figures/slow_a.py": SLOW, "figures/slow_b.py": SLOW})
    report = tmp_path / "out" / "report.json"
    proc = start_check(repo, tmp, "--jobs", "2", "--json", str(report), runner=runner)
    started = wait_started(tmp, proc, count=2)
    assert leftovers(tmp), "a running check has its folders in the temp folder"
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=WAIT)
    assert proc.returncode == code
    assert leftovers(tmp) == []
    for script_pid, parent_pid, sleeper_pid in started:
        # the script, the process that started it (the warm pool's server, or figproof itself) and its grandchild
        assert not alive(script_pid) and not alive(parent_pid) and not alive(sleeper_pid)
    assert not report.exists() and not (report.parent.exists() and list(report.parent.iterdir()))  # no partial
    assert "Traceback" not in err and f"stopped by {signal.Signals(sig).name}" in err


@pytest.mark.slow
@linux_only
def test_kill_9_then_a_new_check_sweeps_the_leftovers_and_keeps_the_cache(tmp_path: Path, tmp: Path) -> None:
    repo = write_repo(tmp_path / "repo", {"figures/a_fast.py": FAST, "figures/b_slow.py": SLOW})
    proc = start_check(repo, tmp, "--jobs", "1")
    # a_fast.py has finished and is in the cache: scripts run in order with one job
    (script_pid, parent_pid, sleeper_pid), = wait_started(tmp, proc)
    proc.kill()
    proc.communicate(timeout=WAIT)
    left = leftovers(tmp)
    assert left, "SIGKILL leaves the folders behind (nothing can clean up)"
    again = start_check(repo, tmp, "--jobs", "1", hold=False)
    _, err = again.communicate(timeout=WAIT)
    assert again.returncode in (0, 1), err
    assert leftovers(tmp) == []  # the stale folders were swept, the new check removed its own
    assert "1 of 2 script results from the cache" in err
    # the killed check's children did not run on: the pool's server saw its requests end, and a fresh
    # interpreter's child dies with its parent
    assert not alive(script_pid) and not alive(parent_pid) and not alive(sleeper_pid)


@linux_only
def test_sweep_removes_only_folders_whose_owner_is_gone(tmp: Path) -> None:
    gone = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                          text=True, check=True)
    dead_pid = int(gone.stdout)
    stale = tmp / "figproof-stale"
    stale.mkdir()
    (stale / scratch.MARKER).write_text(json.dumps({"pid": dead_pid, "start": 1, "boot": None}))
    live = scratch.make_scratch(parent=tmp)  # owned by this (running) process
    unmarked = tmp / "figproof-unmarked"
    unmarked.mkdir()
    reused = tmp / "figproof-reused-pid"  # this process's id, but an earlier start time: a recycled id
    reused.mkdir()
    record = scratch.owner_record()
    earlier = int(record["start"]) - 1  # type: ignore[call-overload]
    (reused / scratch.MARKER).write_text(json.dumps({**record, "start": earlier}))
    other = tmp / "something-else"
    other.mkdir()
    (other / scratch.MARKER).write_text(json.dumps({"pid": dead_pid, "start": 1, "boot": None}))
    removed = scratch.sweep_stale(tmp)
    assert removed == sorted([stale, reused])
    assert live.is_dir() and unmarked.is_dir() and other.is_dir()
    assert scratch.sweep_stale(tmp, also_mine=True) == [live]


@linux_only
def test_process_start_time_is_field_22_of_proc_stat() -> None:
    # proc(5): field 22 "starttime", the time the process started after system boot, in clock ticks; field 3
    # is the state letter, so the fields after the parenthesised name start at field 3
    text = Path("/proc/self/stat").read_text()
    after_name = text[text.rfind(")") + 2:].split()
    assert after_name[0] in "RSDZTtWXxKIP"
    assert scratch.process_start(os.getpid()) == int(after_name[22 - 3])
    child = subprocess.Popen([sys.executable, "-c", "import sys; sys.stdin.read()"], stdin=subprocess.PIPE)
    try:
        # a process started later has a start time no earlier than ours
        assert scratch.process_start(child.pid) >= scratch.process_start(os.getpid())  # type: ignore[operator]
    finally:
        child.communicate(b"")
    assert scratch.process_start(child.pid) is None


# ---------------------------------------------------------------- the temp folder: full, missing, read-only


@pytest.fixture
def small_tmpfs(tmp_path: Path) -> Iterator[Path]:
    """A 4 MiB tmpfs (needs root, or a kernel that lets this user mount); skipped where it cannot be made."""
    mount = tmp_path / "small"
    mount.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=4m", "tmpfs", str(mount)], capture_output=True)
    if done.returncode != 0:
        pytest.skip("cannot mount a size-limited tmpfs here (needs root); the stand-in test covers ENOSPC")
    try:
        yield mount
    finally:
        subprocess.run(["umount", "-l", str(mount)], check=False)


def one_line_error(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    return lines[0]


@pytest.mark.slow
@linux_only
@pytest.mark.parametrize("view", ["copy", "overlay"])
def test_a_full_temp_folder_is_one_line_and_no_finding(tmp_path: Path, small_tmpfs: Path, view: str) -> None:
    data = bytes(range(256)) * (6 * 4096)  # 6 MiB: more than the 4 MiB temp folder holds
    writer = """
        import numpy as np
        import matplotlib.pyplot as plt
        plt.plot([1, 2], [1, 2])
        np.save("figures/big.npy", np.ones(1_000_000))  # 8 MB written into the repo view
        plt.savefig("figures/line.png")
    """
    files: dict[str, str | bytes] = {"figures/line.py": writer}
    if view == "copy":
        files["data/big.bin"] = data
    repo = write_repo(tmp_path / "repo", files)
    report = tmp_path / "report.json"
    env = dict(os.environ, TMPDIR=str(small_tmpfs), FIGPROOF_REPO_VIEW=view)
    done = subprocess.run([sys.executable, "-m", "figproof.cli", "check", str(repo), "--json", str(report),
                           "--no-cache"], capture_output=True, text=True, env=env, timeout=WAIT)
    line = one_line_error(done.stderr)
    assert done.returncode == 4, done.stderr
    assert line.startswith("figproof: no space left in ") and str(small_tmpfs) in line and "free" in line
    if view == "copy":
        assert "6.0 MiB needed per job" in line  # the repo's size against the free space
    assert "script-fails" not in done.stdout and not report.exists()
    assert leftovers(small_tmpfs) == []


def test_no_room_for_the_copy_stand_in(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                       capsys: pytest.CaptureFixture[str]) -> None:
    # where no small file system can be mounted: the copy fails as a full disk makes it fail
    repo = write_repo(tmp_path / "repo", {"figures/bars.py": FAST})
    tmp = tmp_path / "tmp"
    tmp.mkdir()
    monkeypatch.setenv("TMPDIR", str(tmp))
    monkeypatch.setenv("FIGPROOF_REPO_VIEW", "copy")

    def full(*_args: object, **_kw: object) -> None:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr("figproof.run.sandbox.copy_repo", full)
    code = cli.main(["check", str(repo), "--no-cache", "--json", str(tmp_path / "r.json")])
    out, err = capsys.readouterr()
    assert code == cli.ExitCode.ENVIRONMENT
    line = one_line_error(err)
    assert line.startswith(f"figproof: no space left in the temp folder {tmp}") and "needed per job" in line
    assert "script-fails" not in out and not (tmp_path / "r.json").exists()
    assert leftovers(tmp) == []


@pytest.mark.parametrize("kind", ["file", "missing"])
def test_tmpdir_that_is_not_a_folder_is_one_line(tmp_path: Path, kind: str, monkeypatch: pytest.MonkeyPatch,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    repo = write_repo(tmp_path / "repo", {"figures/bars.py": FAST})
    target = tmp_path / "not-a-folder"
    if kind == "file":
        target.write_text("a file, not a folder\n")
    monkeypatch.setenv("TMPDIR", str(target))
    code = cli.main(["check", str(repo), "--no-cache"])
    out, err = capsys.readouterr()
    assert code == cli.ExitCode.ENVIRONMENT
    line = one_line_error(err)
    assert str(target) in line and "TMPDIR" in line
    assert "script-fails" not in out


@linux_only
def test_read_only_temp_folder_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                           monkeypatch: pytest.MonkeyPatch) -> None:
    # root is not stopped by permission bits, so a read-only mount stands for an unwritable folder
    mount = tmp_path / "ro"
    mount.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "ro,size=1m", "tmpfs", str(mount)], capture_output=True)
    if done.returncode != 0:
        if os.geteuid() == 0:
            pytest.skip("cannot mount a read-only tmpfs here")
        mount.chmod(0o500)  # an ordinary user is stopped by the permission bits
    repo = write_repo(tmp_path / "repo", {"figures/bars.py": FAST})
    monkeypatch.setenv("TMPDIR", str(mount))
    try:
        code = cli.main(["check", str(repo), "--no-cache"])
    finally:
        subprocess.run(["umount", "-l", str(mount)], check=False, capture_output=True)
    out, err = capsys.readouterr()
    assert code == cli.ExitCode.ENVIRONMENT
    line = one_line_error(err)
    assert f"temp folder {mount} (TMPDIR) is not writable" in line and "script-fails" not in out


def test_fork_refused_is_the_machines_trouble(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    repo = write_repo(tmp_path / "repo", {"a.py": FAST, "b.py": FAST})
    monkeypatch.setenv("TMPDIR", str(tmp_path))

    def refuse(*_args: object, **_kw: object) -> None:
        raise BlockingIOError(errno.EAGAIN, os.strerror(errno.EAGAIN))

    monkeypatch.setattr("figproof.run.execute.subprocess.Popen", refuse)
    options = Options(root=repo, artifacts=tmp_path / "art", jobs=2)
    with pytest.raises(EnvironmentProblem, match="refused to start a process"):
        execute_all([Task(script="a.py"), Task(script="b.py")], options, runner=FreshInterpreter())
    assert leftovers(tmp_path) == []


# ---------------------------------------------------------------- the repo view: overlay, clones, copy


@linux_only
def test_overlay_view_keeps_the_repo_untouched_and_copies_nothing(tmp_path: Path,
                                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("TMPDIR", str(tmp_path))
    big = bytes(range(256)) * 4096  # 1 MiB
    script = """
        import os, pathlib
        import matplotlib.pyplot as plt
        seen = sorted(os.listdir("."))
        size = len(pathlib.Path("data/big.bin").read_bytes())
        pathlib.Path("data/notes.txt").write_text("changed by the script")
        os.remove("data/old.csv")
        plt.plot([1, 2], [2, 1])
        plt.savefig("figures/out.png")
        print(seen, size, flush=True)
    """
    repo = write_repo(tmp_path / "repo", {"figures/edit.py": script, "figures/edit_too.py": script,
                                          "data/big.bin": big, "data/notes.txt": "original",
                                          "data/old.csv": "a,b\n1,2\n",
                                          ".git/HEAD": "ref: refs/heads/main\n", "figures/__pycache__/x.pyc": ""})
    before = {p: p.read_bytes() for p in sorted(repo.rglob("*")) if p.is_file()}
    with SandboxPool(repo, jobs=2, method="auto") as pool:
        box = pool.acquire()
        if pool.method != "overlay":
            pool.release(box)
            pytest.skip(f"overlays are not allowed here: {pool.why_not_overlay}")
        # nothing of the repo was copied: the upper layer holds only whiteouts (the hidden .git, __pycache__)
        kinds = {p.relative_to(box.upper).as_posix(): p.lstat().st_mode for p in box.upper.rglob("*")}
        assert sorted(kinds) == [".git", "figures", "figures/__pycache__"]
        assert not any(p.is_file() for p in box.upper.rglob("*"))
        pool.release(box)
        options = Options(root=repo, artifacts=tmp_path / "art", sandboxes=pool, jobs=2)
        first, second = execute_all([Task(script="figures/edit.py"), Task(script="figures/edit_too.py")], options,
                                    FreshInterpreter())
    for run in (first, second):
        assert run.status == "ok", (run.error, run.stderr_tail)
        assert "repo-overlay" in run.isolation
        # each run sees the repo as committed: the other run's edit and deletion are not in its view
        assert run.stdout_tail.strip() == "['data', 'figures'] 1048576"
    assert (tmp_path / "art" / "figures__edit.py" / "regenerated" / "figures" / "out.png").is_file()
    assert {p: p.read_bytes() for p in sorted(repo.rglob("*")) if p.is_file()} == before
    assert leftovers(tmp_path) == []


@linux_only
def test_overlay_refused_falls_back_to_a_copy(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("TMPDIR", str(tmp_path))
    monkeypatch.setattr("figproof.run.sandbox.probe_overlay", lambda *_a: "overlay refused: Operation not permitted")
    repo = write_repo(tmp_path / "repo", {"figures/bars.py": FAST, "data/x.csv": "a\n1\n"})
    with SandboxPool(repo, method="auto") as pool:
        options = Options(root=repo, artifacts=tmp_path / "art", sandboxes=pool)
        (run,) = execute_all([Task(script="figures/bars.py")], options, FreshInterpreter())
        assert pool.why_not_overlay.startswith("overlay refused")
        # ext4 and tmpfs cannot clone: the clone attempt falls back to copies (btrfs or XFS would clone)
        assert pool.method in ("reflink", "copy")
    assert run.status == "ok" and ({"repo-copy", "repo-reflink"} & set(run.isolation))
    assert leftovers(tmp_path) == []


@pytest.fixture
def btrfs(tmp_path: Path) -> Iterator[Path]:
    """A small btrfs file system on a loop device (copy-on-write clones); skipped without mkfs.btrfs or root."""
    if shutil.which("mkfs.btrfs") is None:
        pytest.skip("mkfs.btrfs (btrfs-progs) is not installed: no file system with clones to test on")
    image, mount = tmp_path / "btrfs.img", tmp_path / "btrfs"
    with open(image, "wb") as fh:
        fh.truncate(256 << 20)  # sparse; btrfs needs a little over 100 MiB
    mount.mkdir()
    made = subprocess.run(["mkfs.btrfs", "-q", str(image)], capture_output=True)
    if made.returncode != 0 or subprocess.run(["mount", "-o", "loop", str(image), str(mount)],
                                              capture_output=True).returncode != 0:
        pytest.skip("cannot make and mount a loop btrfs here (needs root and loop devices)")
    try:
        yield mount
    finally:
        subprocess.run(["umount", str(mount)], check=False, capture_output=True)


@linux_only
def test_reflink_view_shares_the_data_files_blocks(btrfs: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    tmp = btrfs / "tmp"
    tmp.mkdir()
    monkeypatch.setenv("TMPDIR", str(tmp))
    monkeypatch.setattr("figproof.run.sandbox.probe_overlay", lambda *_a: "overlay refused: stand-in")
    data = os.urandom(1 << 20) * 40  # 40 MiB of data that compression could not shrink much
    repo = write_repo(btrfs / "repo", {"figures/bars.py": FAST, "data/plates.bin": data})
    os.sync()
    free_before = shutil.disk_usage(btrfs).free
    with SandboxPool(repo, jobs=2, method="auto") as pool:
        boxes = [pool.acquire(), pool.acquire()]
        os.sync()
        used = free_before - shutil.disk_usage(btrfs).free
        assert pool.method == "reflink" and all(b.method == "reflink" for b in boxes)
        # two full copies would take 80 MiB; clones take metadata only
        assert used < 8 << 20, used
        with open(boxes[0].repo / "data" / "plates.bin", "r+b") as fh:
            fh.write(b"changed")  # copy-on-write: the clone changes, the repo's file does not
        assert (repo / "data" / "plates.bin").read_bytes() == data
        for box in boxes:
            pool.release(box)
        options = Options(root=repo, artifacts=tmp / "art", sandboxes=pool)
        (run,) = execute_all([Task(script="figures/bars.py")], options, FreshInterpreter())
    assert run.status == "ok" and "repo-reflink" in run.isolation
    assert leftovers(tmp) == []


def test_clone_refused_copies_the_file(tmp_path: Path) -> None:
    from figproof.run.view import Cloner

    src = tmp_path / "a.bin"
    src.write_bytes(b"x" * 5000)
    cloner = Cloner()
    cloner(str(src), str(tmp_path / "b.bin"))
    cloner(str(src), str(tmp_path / "c.bin"))
    assert (tmp_path / "b.bin").read_bytes() == (tmp_path / "c.bin").read_bytes() == src.read_bytes()
    assert cloner.cloned + cloner.copied == 2
    if cloner.copied:
        assert not cloner.try_clone and cloner.cloned == 0  # the first refusal stops further attempts


def test_report_header_names_the_repo_view() -> None:
    from figproof.model.findings import CheckResult, Summary
    from figproof.model.records import ScriptRun
    from figproof.report import json as json_report
    from figproof.report import markdown

    runs = (ScriptRun(path="a.py", status="ok", isolation=("repo-overlay", "memory-cap", "network-off")),)
    result = CheckResult(root=".", version="0", runs=runs, findings=(), notes=(), fail_on="error",
                         summary=Summary(scripts=1, figures=0, errors=0, warnings=0, notes=0, accepted=0,
                                         passed=True))
    header = markdown.render(result).splitlines()[2]
    assert ("Isolation: ran on an overlay of the read-only repo (nothing copied), memory cap, network off, "
            "time limit." in header)
    assert json.loads(json_report.render(result))["scripts"][0]["isolation"][0] == "repo-overlay"


@linux_only
def test_cache_temp_folder_of_a_killed_check_is_pruned_at_once(tmp_path: Path) -> None:
    from figproof.run.cache import RUNS, prune

    runs = tmp_path / "cache" / RUNS
    runs.mkdir(parents=True)
    gone = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                          text=True, check=True)
    dead, writing = runs / ".tmp-dead", runs / ".tmp-writing"
    for folder, pid in ((dead, int(gone.stdout)), (writing, os.getpid())):
        folder.mkdir()
        record = scratch.owner_record(pid if pid == os.getpid() else None)
        record["pid"] = pid
        if pid != os.getpid():
            record["start"] = 1
        (folder / scratch.MARKER).write_text(json.dumps(record))
    assert prune(tmp_path / "cache", []) == [".tmp-dead"]  # the one still being written stays
    assert writing.is_dir()


def test_readme_lists_every_exit_code() -> None:
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    for code in cli.ExitCode:
        assert f"| `{int(code)}` |" in readme, code


@linux_only
def test_a_second_signal_during_clean_up_stops_at_once() -> None:
    # the clean-up after the first SIGINT is made to hang; the second SIGINT must end the process anyway
    code = textwrap.dedent("""
        import os, signal, time
        from figproof.interrupt import Interrupted, stop_on_signals
        with stop_on_signals():
            try:
                os.kill(os.getpid(), signal.SIGINT)
                time.sleep(60)
            except Interrupted as exc:
                print("first", exc.exit_code, flush=True)
                os.kill(os.getpid(), signal.SIGINT)
                time.sleep(60)  # a clean-up that would take a minute
        print("not reached", flush=True)
    """)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=WAIT)
    assert done.returncode == 130
    assert done.stdout.split() == ["first", "130"]
    assert "stopped at once" in done.stderr and "Traceback" not in done.stderr


def test_too_many_open_files_names_the_folder(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    def refuse(*_args: object, **_kw: object) -> str:
        raise OSError(errno.EMFILE, os.strerror(errno.EMFILE))

    monkeypatch.setattr("figproof.run.scratch.tempfile.mkdtemp", refuse)
    with pytest.raises(EnvironmentProblem) as caught:
        scratch.make_scratch(parent=tmp_path)
    assert str(caught.value) == (f"too many open files to make a temporary folder in {tmp_path}; raise the limit "
                                 f"(ulimit -n) or run fewer jobs (--jobs)")


@pytest.mark.slow
@linux_only
def test_an_overlay_the_child_cannot_mount_is_one_line(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # a comma cannot be written in overlayfs's mount options: the child refuses and says so, the parent stops
    repo = write_repo(tmp_path / "lab,2024", {"figures/bars.py": FAST})
    monkeypatch.setenv("TMPDIR", str(tmp_path))
    with SandboxPool(repo, method="overlay") as pool:
        options = Options(root=repo, artifacts=tmp_path / "art", sandboxes=pool)
        with pytest.raises(EnvironmentProblem, match=r"could not mount the overlay view of the repo in .*"
                                                     r"FIGPROOF_REPO_VIEW=copy"):
            execute_all([Task(script="figures/bars.py")], options, FreshInterpreter())
    assert leftovers(tmp_path) == []


def test_removing_a_folder_that_another_check_empties_meanwhile_never_raises(tmp_path: Path,
                                                                              monkeypatch: pytest.MonkeyPatch) -> None:
    # two checks at once (two test workers, two CI jobs): a sweep may find a subfolder gone when it opens it;
    # shutil.rmtree then reports os.open, which the clean-up must not call again without its flags
    from figproof.run.scratch import remove_tree

    tree = tmp_path / "figproof-run"
    (tree / "copy" / "renders").mkdir(parents=True)
    (tree / "copy" / "renders" / "figure-1.png").write_bytes(b"x")
    real_open = os.open

    def vanished(path: object, flags: int, *args: object, **kwargs: object) -> int:
        if str(path).endswith("renders"):
            raise FileNotFoundError(errno.ENOENT, "No such file or directory", str(path))
        return real_open(path, flags, *args, **kwargs)  # type: ignore[arg-type]

    monkeypatch.setattr(os, "open", vanished)
    remove_tree(tree)  # the docstring's promise: never raises
    monkeypatch.undo()
    remove_tree(tree)
    assert not tree.exists()

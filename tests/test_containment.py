"""Hostile scripts: each is contained, reported, and never stops the other scripts from being checked.

One repo holds all the quick hostile scripts next to an honest one; they run together (two at a time) under
each runner, and each test below reads its own script's result.  The heavy ones (200 figures, 10^6 points,
100 MB of output) run in a second batch with a longer timeout.
"""

from __future__ import annotations

import hashlib
import json
import os
import textwrap
import uuid
from pathlib import Path

import pytest

from figproof import cli
from figproof.model.records import ScriptRun
from figproof.run.execute import FreshInterpreter, Options, Task, execute_all
from figproof.run.pool import WarmPool

pytestmark = pytest.mark.skipif(not Path("/proc/self/stat").exists(),
                                reason="process checks read /proc (Linux); the hostile scripts use POSIX calls")

TIMEOUT = 10.0  # long enough for a fresh interpreter to import matplotlib on a busy 2-core machine
MEMORY_MIB = 600  # numpy + pandas + matplotlib take about 200 MiB of address space after import
OUTSIDE = Path.home() / f".figproof-hostile-{uuid.uuid4().hex}.txt"

QUICK = {
    "honest.py": """
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.plot([1, 2, 3], [2, 4, 3])
        fig.savefig("honest.png")
    """,
    "loop.py": """
        import os, signal
        print(os.getpid(), flush=True)
        signal.signal(signal.SIGTERM, signal.SIG_IGN)  # needs the SIGKILL that follows the grace period
        while True:
            pass
    """,
    "membomb.py": """
        import numpy as np
        blocks = []
        while True:
            blocks.append(np.ones(10_000_000))  # 80 MB a step, every page touched
    """,
    "spawner.py": """
        import os, subprocess, sys
        sleeper = [sys.executable, "-c", "import time; time.sleep(60)"]
        kids = [subprocess.Popen(sleeper), subprocess.Popen(sleeper, stdout=subprocess.DEVNULL)]
        if os.fork() == 0:  # a forked grandchild that outlives its parent
            import time
            time.sleep(60)
            os._exit(0)
        print(" ".join(str(k.pid) for k in kids), flush=True)
        import matplotlib.pyplot as plt
        plt.plot([1, 2])
    """,
    "vandal.py": """
        import os, shutil
        os.remove("data/input.csv")
        with open("README.md", "w") as fh:
            fh.write("gone")
        shutil.rmtree("keep")
        open("new_file.txt", "w").close()
    """,
    "outside.py": f"""
        import matplotlib.pyplot as plt
        plt.plot([1, 2])
        with open({str(OUTSIDE)!r}, "w") as fh:
            fh.write("escaped")
    """,
    "network.py": """
        import socket
        # 192.0.2.1 is TEST-NET-1, reserved for documentation (RFC 5737): never a real host
        socket.create_connection(("192.0.2.1", 80), timeout=1)
    """,
    "early_exit.py": """
        import os
        import matplotlib.pyplot as plt
        plt.plot([1, 2])
        os._exit(0)
        plt.savefig("never.png")
    """,
    "segfault.py": """
        import ctypes
        ctypes.string_at(0)
    """,
    "sysexit.py": """
        import sys
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.bar([1, 2], [3, 4])
        fig.savefig("first.png")
        sys.exit(0)
        plt.figure()
    """,
    "needs_input.py": """
        import matplotlib.pyplot as plt
        plt.plot([1, 2])
        sample = input("which sample? ")
    """,
    "thread.py": """
        import threading, time
        import matplotlib.pyplot as plt

        def forever():
            while True:
                time.sleep(0.05)

        threading.Thread(target=forever).start()  # not a daemon: it would keep a normal interpreter alive
        plt.plot([1, 2])
    """,
}
HEAVY = {
    "many_figures.py": """
        import matplotlib.pyplot as plt
        import warnings
        warnings.simplefilter("ignore")  # matplotlib warns when more than 20 figures are open
        for i in range(200):
            plt.figure(figsize=(2, 2))
            plt.plot([0, i])
    """,
    "million_points.py": """
        import numpy as np
        import matplotlib.pyplot as plt
        rng = np.random.default_rng(0)
        fig, ax = plt.subplots()
        ax.scatter(rng.normal(size=1_000_000), rng.normal(size=1_000_000), s=1)
        fig.savefig("million.png", dpi=50)
    """,
    "loud.py": """
        import sys
        chunk = "x" * (1 << 20)
        for _ in range(100):
            sys.stdout.write(chunk)
        print("done", file=sys.stderr)
        import matplotlib.pyplot as plt
        plt.plot([1, 2])
    """,
}
REPO_FILES = {"data/input.csv": "a,b\n1,2\n", "README.md": "the lab's figures\n", "keep/notes.txt": "keep me\n"}


def write_repo(root: Path, scripts: dict[str, str]) -> Path:
    for rel, text in {**REPO_FILES, **scripts}.items():
        path = root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(textwrap.dedent(text), encoding="utf-8")
    return root


def snapshot(root: Path) -> dict[str, tuple[int, str]]:
    return {p.relative_to(root).as_posix(): (p.stat().st_mtime_ns, hashlib.sha256(p.read_bytes()).hexdigest())
            for p in sorted(root.rglob("*")) if p.is_file()}


def process_state(pid: int) -> str | None:
    """State letter of a process from /proc (R, S, Z, ...), or None when it no longer exists."""
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    return stat.rsplit(")", 1)[1].split()[0]


def children_of(pid: int) -> list[int]:
    found = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                stat = Path(f"/proc/{entry}/stat").read_text()
            except OSError:
                continue
            if int(stat.rsplit(")", 1)[1].split()[1]) == pid:
                found.append(int(entry))
    return found


class Batch:
    """Results of one batch of hostile scripts under one runner."""

    def __init__(self, root: Path, runs: list[ScriptRun], before: dict[str, tuple[int, str]], mode: str,
                 artifacts: Path) -> None:
        self.root = root
        self.runs = {r.path: r for r in runs}
        self.before = before
        self.mode = mode
        self.artifacts = artifacts

    def __getitem__(self, script: str) -> ScriptRun:
        return self.runs[script]


def run_batch(tmp: Path, scripts: dict[str, str], mode: str, timeout: float) -> Batch:
    repo = write_repo(tmp / "repo", scripts)
    before = snapshot(repo)
    runner = FreshInterpreter() if mode == "fresh" else WarmPool()
    if isinstance(runner, WarmPool) and not runner.start():
        pytest.skip("the warm pool cannot start on this platform")
    options = Options(root=repo, artifacts=tmp / "art", timeout=timeout, memory_limit=MEMORY_MIB, jobs=2)
    try:
        runs = execute_all([Task(script=s) for s in sorted(scripts)], options, runner=runner)
    finally:
        if isinstance(runner, WarmPool):
            runner.close()
    return Batch(repo, runs, before, mode, tmp / "art")


@pytest.fixture(scope="module", params=["fresh", "warm"])
def quick(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> Batch:
    batch = run_batch(tmp_path_factory.mktemp(f"quick-{request.param}"), QUICK, request.param, TIMEOUT)
    yield batch
    OUTSIDE.unlink(missing_ok=True)


@pytest.fixture(scope="module", params=["fresh", "warm"])
def heavy(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> Batch:
    return run_batch(tmp_path_factory.mktemp(f"heavy-{request.param}"), HEAVY, request.param, 120.0)


def test_every_script_has_a_result_and_the_honest_one_passes(quick: Batch) -> None:
    assert sorted(quick.runs) == sorted(QUICK)
    assert quick["honest.py"].status == "ok"
    assert len(quick["honest.py"].figures) == 1
    mode = "fresh-interpreter" if quick.mode == "fresh" else "warm-pool"
    for run in quick.runs.values():
        # every run says which isolation was in force, also the ones killed before they could report
        assert {"memory-cap", "network-off", mode} <= set(run.isolation), run.path
        assert {"repo-copy", "repo-reflink", "repo-overlay"} & set(run.isolation), run.path


def test_infinite_loop_times_out_and_its_group_is_killed(quick: Batch) -> None:
    run = quick["loop.py"]
    assert run.status == "timeout" and run.error is not None and run.error.kind == "timeout"
    pid = int(run.stdout_tail.split()[0])
    assert process_state(pid) is None  # killed despite ignoring SIGTERM, and reaped: no zombie
    assert [p for p in children_of(os.getpid()) if process_state(p) == "Z"] == []


def test_memory_bomb_is_reported_as_memory(quick: Batch) -> None:
    run = quick["membomb.py"]
    assert run.status == "memory" and run.error is not None and run.error.kind == "memory"


def test_grandchildren_are_killed_when_the_script_ends(quick: Batch) -> None:
    run = quick["spawner.py"]
    assert run.status == "ok"
    for pid in map(int, run.stdout_tail.split()):
        # killed; a "Z" entry is one the machine's init has not reaped yet, which no longer runs
        assert process_state(pid) in (None, "Z")


def test_users_tree_is_untouched_by_a_vandal(quick: Batch) -> None:
    assert quick["vandal.py"].status == "ok"
    assert snapshot(quick.root) == quick.before  # same files, same contents, same mtimes


def test_write_outside_the_repo_is_blocked_and_reported(quick: Batch) -> None:
    run = quick["outside.py"]
    assert not OUTSIDE.exists()
    assert run.status == "failed" and run.error is not None and run.error.type == "PermissionError"
    blocked = [e for e in run.events if e.action == "blocked-write"]
    assert [e.path for e in blocked] == [str(OUTSIDE)] and not blocked[0].inside_repo
    assert len(run.figures) == 1  # the figure drawn before the attempt is still checked


def test_network_connection_is_refused_and_reported(quick: Batch) -> None:
    run = quick["network.py"]
    assert run.status == "failed" and run.error is not None
    assert [e.action for e in run.events] == ["network"]
    assert "192.0.2.1" in run.events[0].path


def test_os_exit_before_saving_is_a_lost_run(quick: Batch) -> None:
    run = quick["early_exit.py"]
    assert run.status == "failed" and run.error is not None and run.error.kind == "no-report"
    assert "exit status 0" in run.error.message
    assert not any(e.action == "save" for e in run.events)


def test_segfault_is_reported_as_a_signal(quick: Batch) -> None:
    run = quick["segfault.py"]
    assert run.status == "failed" and run.error is not None
    assert (run.error.kind, run.error.type) == ("signal", "SIGSEGV")


def test_sys_exit_zero_keeps_the_figures_drawn_so_far(quick: Batch) -> None:
    run = quick["sysexit.py"]
    assert run.status == "ok" and run.error is None
    assert len(run.figures) == 1
    assert [e.path for e in run.events if e.action == "save"] == ["first.png"]


def test_input_is_reported_as_needing_input(quick: Batch) -> None:
    run = quick["needs_input.py"]
    assert run.status == "failed" and run.error is not None and run.error.kind == "needs-input"
    assert run.error.source is not None and run.error.source.line == 4


def test_thread_left_running_does_not_keep_the_child_alive(quick: Batch) -> None:
    run = quick["thread.py"]
    assert run.status == "ok" and len(run.figures) == 1


@pytest.mark.slow
def test_two_hundred_figures_are_all_extracted(heavy: Batch) -> None:
    run = heavy["many_figures.py"]
    assert run.status == "ok", run.error
    assert len(run.figures) == 200


@pytest.mark.slow
def test_a_million_points_are_extracted(heavy: Batch) -> None:
    run = heavy["million_points.py"]
    assert run.status == "ok", run.error
    points = [m for ax in run.figures[0].axes for m in ax.points]
    assert sum(len(p.x) for p in points) == 1_000_000


@pytest.mark.slow
def test_hundred_megabytes_of_output_are_capped(heavy: Batch) -> None:
    run = heavy["loud.py"]
    assert run.status == "ok" and len(run.figures) == 1
    stdout = heavy.artifacts / "loud.py" / "stdout.txt"
    assert stdout.stat().st_size < 2 * (1 << 20)  # the child keeps 1 MiB; 100 MiB were written
    assert run.stdout_tail.endswith("[figproof: output capped]\n")
    assert run.stderr_tail.strip() == "done"


HOSTILE_CONFIG = """
    [tool.figproof]
    include = ["*.py"]
    timeout = 3
    memory-limit = 600
    jobs = 2
"""


@pytest.mark.slow
def test_check_command_writes_its_report_and_exits_with_the_threshold_code(tmp_path: Path,
                                                                          capsys: pytest.CaptureFixture[str]) -> None:
    scripts = {k: QUICK[k] for k in ("honest.py", "loop.py", "segfault.py", "membomb.py")}
    repo = write_repo(tmp_path / "repo", {**scripts, "pyproject.toml": HOSTILE_CONFIG})
    report = tmp_path / "report.json"
    code = cli.main(["check", str(repo), "--json", str(report)])
    capsys.readouterr()
    assert code == 1  # documented exit code: thresholds crossed (script-fails errors)
    data = json.loads(report.read_text())
    status = {s["path"]: s["status"] for s in data["scripts"]}
    assert status == {"honest.py": "ok", "loop.py": "timeout", "segfault.py": "failed", "membomb.py": "memory"}
    assert {f["path"] for f in data["findings"] if f["rule"] == "script-fails"} == {"loop.py", "segfault.py",
                                                                                   "membomb.py"}


"""The executor: both runners draw the same thing, the warm pool leaks no state between scripts, falls back,
survives losing its server and leaves no process behind."""

from __future__ import annotations

import json
import os
import sys
import textwrap
from pathlib import Path

import pytest

from figproof.model.records import ScriptRun
from figproof.run.execute import FreshInterpreter, Options, Task, execute_all
from figproof.run.pool import WarmPool, default_runner

posix_only = pytest.mark.skipif(os.name != "posix" or sys.platform == "darwin",
                                reason="the warm pool forks; it is used on Linux and other POSIX systems but macOS")


def write_repo(root: Path, files: dict[str, str]) -> Path:
    for rel, text in files.items():
        path = root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(textwrap.dedent(text), encoding="utf-8")
    return root


def run_all(root: Path, scripts: list[str], artifacts: Path, runner: object | None, **kw: object) -> list[ScriptRun]:
    options = Options(root=root, artifacts=artifacts, timeout=float(kw.pop("timeout", 60)),  # type: ignore[arg-type]
                      memory_limit=int(kw.pop("memory_limit", 1024)), jobs=int(kw.pop("jobs", 1)))  # type: ignore[arg-type]
    return execute_all([Task(script=s) for s in scripts], options, runner=runner)  # type: ignore[arg-type]


def our_children() -> list[tuple[int, str]]:
    """(pid, state) of every process whose parent is this test process, read from /proc."""
    out = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            stat = Path(f"/proc/{entry}/stat").read_text()
        except OSError:
            continue
        fields = stat.rsplit(")", 1)[1].split()
        if int(fields[1]) == os.getpid():
            out.append((int(entry), fields[0]))
    return out


@pytest.fixture(params=["fresh", "warm"])
def runner(request: pytest.FixtureRequest) -> object:
    if request.param == "fresh":
        yield FreshInterpreter()
        return
    if os.name != "posix" or sys.platform == "darwin":
        pytest.skip("the warm pool forks; it is not used on this platform")
    pool = WarmPool()
    assert pool.start()
    yield pool
    pool.close()


FIGURE = """
    import matplotlib.pyplot as plt
    import numpy as np
    import pandas as pd

    table = pd.read_csv("data/plants.csv")
    fig, ax = plt.subplots(figsize=(3, 2))
    ax.scatter(table["dose"], table["height"], c="tab:green")
    ax.plot(np.arange(4), np.arange(4) ** 2)
    ax.set_title("Height by dose")
    fig.savefig("figures/plants.png", dpi=50)
"""


@pytest.mark.slow
@posix_only
def test_both_runners_give_identical_models_and_renders(tmp_path: Path) -> None:
    repo = write_repo(tmp_path / "repo", {"figures/plants.py": FIGURE,
                                          "data/plants.csv": "dose,height\n1,2.5\n2,3.1\n3,4.0\n"})
    fresh = run_all(repo, ["figures/plants.py"], tmp_path / "fresh", FreshInterpreter())[0]
    with WarmPool() as pool:
        warm = run_all(repo, ["figures/plants.py"], tmp_path / "warm", pool)[0]
    assert fresh.status == warm.status == "ok"
    assert "fresh-interpreter" in fresh.isolation and "warm-pool" in warm.isolation
    for run in (fresh, warm):
        assert {"memory-cap", "network-off"} <= set(run.isolation)
        assert {"repo-copy", "repo-reflink", "repo-overlay"} & set(run.isolation)  # the repo view it ran on

    def comparable(folder: Path) -> dict[str, object]:
        data = json.loads((folder / "run.json").read_text())
        data["run"].pop("seconds")
        data["run"].pop("isolation")
        return data

    slug = "figures__plants.py"
    assert comparable(tmp_path / "fresh" / slug) == comparable(tmp_path / "warm" / slug)
    for name in ("arrays.npz", "renders/figure-1.png", "regenerated/figures/plants.png"):
        assert (tmp_path / "fresh" / slug / name).read_bytes() == (tmp_path / "warm" / slug / name).read_bytes()


# Script A changes every piece of process state a script can reach; script B, run next by the same server,
# fails (AssertionError) if any of it leaked.
LEAKY = """
    import os, sys
    import matplotlib
    import matplotlib.pyplot as plt
    import numpy as np
    import helper

    helper.COUNTER.append(1)
    matplotlib.rcParams["lines.linewidth"] = 9.0
    plt.style.use("dark_background")
    plt.figure()
    plt.plot([1, 2])
    os.environ["FIGPROOF_TEST_LEAK"] = "1"
    sys.path.append("/leaked-path")
    sys.argv.append("--leaked")
    sys.modules["leaked_module"] = helper
    os.chdir("figures")
    np.random.seed(1)
    print("A", np.random.rand())
"""
CHECKER = """
    import os, sys
    import matplotlib
    import matplotlib.pyplot as plt
    import numpy as np

    assert matplotlib.rcParams["lines.linewidth"] == matplotlib.rcParamsDefault["lines.linewidth"]
    assert matplotlib.rcParams["axes.facecolor"] == "white"
    assert plt.get_fignums() == [], plt.get_fignums()
    assert "helper" not in sys.modules and "leaked_module" not in sys.modules
    import helper
    assert helper.COUNTER == []
    assert "FIGPROOF_TEST_LEAK" not in os.environ
    assert "/leaked-path" not in sys.path
    assert sys.argv == [os.path.abspath(__file__)], sys.argv
    assert os.path.isfile("figures/checker.py"), os.getcwd()
    assert os.environ["MPLBACKEND"] == "Agg" and matplotlib.get_backend().lower() == "agg"
    print("B", np.random.rand())
    fig, ax = plt.subplots()
    ax.plot([1, 2, 3])
"""


@pytest.mark.slow
def test_no_state_leaks_from_one_script_to_the_next(tmp_path: Path, runner: object) -> None:
    repo = write_repo(tmp_path / "repo", {"figures/leaky.py": LEAKY, "figures/checker.py": CHECKER,
                                          "figures/helper.py": "COUNTER = []\n"})
    leaky, checker = run_all(repo, ["figures/leaky.py", "figures/checker.py"], tmp_path / "art", runner)
    assert leaky.status == "ok", leaky.error
    assert checker.status == "ok", (checker.error, checker.stderr_tail)
    assert len(checker.figures) == 1


RANDOM = """
    import numpy as np
    import random
    print(np.random.rand(), random.random())
"""


@pytest.mark.slow
def test_unseeded_random_numbers_differ_between_runs(tmp_path: Path, runner: object) -> None:
    # output-nondeterministic compares two runs: forked children must not share the server's generator state
    repo = write_repo(tmp_path / "repo", {"a.py": RANDOM, "b.py": RANDOM})
    a, b = run_all(repo, ["a.py", "b.py"], tmp_path / "art", runner)
    assert a.status == b.status == "ok"
    np_a, py_a = a.stdout_tail.split()
    np_b, py_b = b.stdout_tail.split()
    assert np_a != np_b and py_a != py_b


ENV = """
    import json, os, sys
    import matplotlib
    keys = ["SOURCE_DATE_EPOCH", "PYTHONHASHSEED", "TZ", "MPLBACKEND", "OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS",
            "MPLCONFIGDIR"]
    info = {k: os.environ.get(k) for k in keys}
    info["mplconfig_exists"] = os.path.isdir(os.environ["MPLCONFIGDIR"])
    info["stdin"] = sys.stdin.read()
    info["linewidth"] = matplotlib.rcParams["lines.linewidth"]
    info["cwd"] = os.getcwd()
    info["path0"] = sys.path[0]
    print(json.dumps(info))
"""


@pytest.mark.slow
def test_child_environment(tmp_path: Path, runner: object) -> None:
    # a matplotlibrc in the working folder is read by matplotlib at import (matplotlib docs, "Customizing
    # Matplotlib with style sheets and rcParams": the current working directory is searched first)
    repo = write_repo(tmp_path / "repo", {"a.py": ENV, "b.py": ENV, "matplotlibrc": "lines.linewidth: 7.5\n"})
    a, b = run_all(repo, ["a.py", "b.py"], tmp_path / "art", runner)
    infos = [json.loads(r.stdout_tail) for r in (a, b)]
    for info in infos:
        assert info["SOURCE_DATE_EPOCH"] == os.environ.get("SOURCE_DATE_EPOCH", "0")
        assert info["PYTHONHASHSEED"] == "0" and info["TZ"] == "UTC" and info["MPLBACKEND"] == "Agg"
        assert info["OMP_NUM_THREADS"] == info["OPENBLAS_NUM_THREADS"] == "1"
        assert info["mplconfig_exists"] and info["stdin"] == ""
        assert info["linewidth"] == 7.5
        assert info["cwd"] == info["path0"] != str(repo)  # the sandbox copy, first on sys.path
    assert infos[0]["MPLCONFIGDIR"] != infos[1]["MPLCONFIGDIR"]


@posix_only
def test_default_runner_is_the_warm_pool_and_can_be_forced_fresh(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("FIGPROOF_RUNNER", raising=False)
    chosen = default_runner()
    try:
        assert isinstance(chosen, WarmPool)
    finally:
        chosen.close()  # type: ignore[attr-defined]
    monkeypatch.setenv("FIGPROOF_RUNNER", "fresh")
    assert isinstance(default_runner(), FreshInterpreter)


def test_pool_that_cannot_start_falls_back_to_fresh_interpreters(tmp_path: Path,
                                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("FIGPROOF_RUNNER", raising=False)
    monkeypatch.setattr(WarmPool, "_spawn", lambda self: False)
    assert isinstance(default_runner(), FreshInterpreter)
    repo = write_repo(tmp_path / "repo", {"a.py": "print('hello')\n"})
    pool = WarmPool()
    run = run_all(repo, ["a.py"], tmp_path / "art", pool)[0]
    pool.close()
    assert run.status == "ok" and "fresh-interpreter" in run.isolation


def test_pool_with_missing_python_does_not_start() -> None:
    pool = WarmPool(python="/nonexistent/python3")
    assert pool.start() is False
    pool.close()


KILLER = """
    import os, signal, time
    # hostile: kill the worker server that forked this process (only when run by the warm pool)
    parent = os.getppid()
    with open(f"/proc/{parent}/cmdline", "rb") as fh:
        if b"figproof.child.server" in fh.read():
            os.kill(parent, signal.SIGKILL)
            time.sleep(0.5)
    import matplotlib.pyplot as plt
    plt.plot([1, 2])
"""


@pytest.mark.slow
@posix_only
def test_pool_survives_losing_its_server(tmp_path: Path) -> None:
    repo = write_repo(tmp_path / "repo", {"a_killer.py": KILLER, "b_after.py": FIGURE.replace("data/", "")
                                          .replace('fig.savefig("figures/plants.png", dpi=50)', ""),
                                          "plants.csv": "dose,height\n1,2\n2,3\n"})
    with WarmPool() as pool:
        first_server = pool._proc.pid if pool._proc else None
        killer, after = run_all(repo, ["a_killer.py", "b_after.py"], tmp_path / "art", pool)
        second_server = pool._proc.pid if pool._proc else None
    assert killer.status == "ok" and "fresh-interpreter" in killer.isolation
    assert any("warm worker pool stopped" in n for n in killer.notes)
    assert after.status == "ok" and "warm-pool" in after.isolation  # a new server took over
    assert first_server != second_server


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads /proc (Linux) to list processes")
def test_execute_all_leaves_no_process_behind(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("FIGPROOF_RUNNER", raising=False)
    repo = write_repo(tmp_path / "repo", {f"s{i}.py": "import matplotlib.pyplot as plt\nplt.plot([1, 2])\n"
                                          for i in range(3)})
    before = {pid for pid, _ in our_children()}  # the session's shared warm pool (tests/conftest.py) may already be running
    runner = default_runner()
    try:
        runs = run_all(repo, ["s0.py", "s1.py", "s2.py"], tmp_path / "art", runner, jobs=2)
    finally:
        getattr(runner, "close", lambda: None)()
    assert [r.status for r in runs] == ["ok"] * 3
    assert [child for child in our_children() if child[0] not in before] == []


def _children_of(pid: int) -> list[int]:
    out = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                fields = Path(f"/proc/{entry}/stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid and fields[0] != "Z":
                out.append(int(entry))
    return out


@pytest.mark.slow
@posix_only
@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads /proc (Linux) to list processes")
def test_a_spare_child_killed_from_outside_is_replaced(tmp_path: Path) -> None:
    # the server forks the next script's child ahead of its request; if that spare dies, the next run forks anew
    import select
    import signal

    repo = write_repo(tmp_path / "repo", {f"s{i}.py": f"import matplotlib.pyplot as plt\nplt.plot([{i}, 2])\n"
                                          for i in range(2)})
    with WarmPool() as pool:
        server = pool._proc.pid if pool._proc else 0
        assert server, "the warm pool did not start"
        spares = _children_of(server)  # the server forks its spare before it says it is ready
        assert len(spares) == 1  # exactly one child waits before any request
        # wait until the spare has really exited (its pidfd turns readable when it ends), so the request below
        # meets a dead spare; a kill still in flight would let the spare take the request and die with it
        pidfd = os.pidfd_open(spares[0])
        try:
            os.kill(spares[0], signal.SIGKILL)
            ended, _, _ = select.select([pidfd], [], [], 60)  # a guard against hanging, not a synchronisation
            assert ended == [pidfd]
        finally:
            os.close(pidfd)
        runs = run_all(repo, ["s0.py", "s1.py"], tmp_path / "art", pool)
        assert [r.status for r in runs] == ["ok", "ok"]
        assert all("warm-pool" in r.isolation for r in runs)
    assert _children_of(server) == []

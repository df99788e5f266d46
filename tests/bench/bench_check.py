"""Time `figproof check` against re-running the scripts by hand (run: python tests/bench/bench_check.py).

Builds a repo of 40 small figure scripts (numpy + matplotlib, half of them with pandas; each saves a PNG) and
prints:

(a) the wall time of running the 40 scripts one after another with plain ``python``;
(b) the wall time of ``figproof check`` on that repo (the command line, every rule, default jobs), with the
    warm worker pool and with ``FIGPROOF_RUNNER=fresh``, and its ratio to (a) (target: at most 0.5);
(c) figproof's per-script overhead: its wall time for a script (from handing the task to the runner until
    the run is back: sandbox copy, starting and reaping the child, capture, drawing and extracting the
    model, reading it back, keeping the outputs) plus the rules on that run, minus the script's own compute
    as the script measures it; median over the 40 scripts, one script at a time (target: under 50 ms);
(d) every rule on one figure with a scatter of 10^6 points and a 4000x4000 image: time and peak extra memory
    (target: under 2 s and 1 GiB);
(e) ``figproof check`` again on the unchanged repo with the result cache on (target: under 1 s).

(b) runs with ``--no-cache`` so every script really runs.

Options: ``--scripts N`` (default 40), ``--repeat R`` (best of R for (a) and (b), default 2).
"""

from __future__ import annotations

import argparse
import gc
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

from figproof import rules
from figproof.config import load_config
from figproof.discover.inventory import discover
from figproof.model.context import RunContext
from figproof.pipeline import build_context
from figproof.rules import by_id
from figproof.run.execute import FreshInterpreter, Options, Task, execute_all
from figproof.run.pool import WarmPool
from figproof.run.sandbox import SandboxPool

HEADER = """\
import time
import numpy as np
import matplotlib
import matplotlib.pyplot as plt
{pandas}
_t0 = time.perf_counter()
rng = np.random.default_rng({seed})
"""
FOOTER = """\
fig.savefig("figures/fig{index:02d}.png", dpi=72)
print("COMPUTE", time.perf_counter() - _t0)
"""
BODIES = [
    # dot plot of two groups
    """fig, ax = plt.subplots(figsize=(4, 3))
for i, mu in enumerate((10, 12)):
    y = rng.normal(mu, 2, 30)
    ax.scatter(np.full(30, i) + rng.uniform(-0.1, 0.1, 30), y, s=12)
ax.set_xticks([0, 1], ["control", "salt"])
ax.set_ylabel("root length (mm)")
""",
    # growth curves
    """fig, ax = plt.subplots(figsize=(4, 3))
t = np.arange(12)
for k in (0.2, 0.3, 0.4):
    ax.plot(t, 30 / (1 + np.exp(-k * (t - 6))), marker="o")
ax.set_xlabel("day")
""",
    # histogram
    """fig, ax = plt.subplots(figsize=(4, 3))
ax.hist(rng.gamma(2.0, 1.5, 500), bins=25)
ax.set_ylabel("count")
""",
    # heat map
    """fig, ax = plt.subplots(figsize=(4, 3))
im = ax.imshow(rng.normal(size=(40, 60)), cmap="viridis")
fig.colorbar(im, ax=ax)
""",
    # box plot with points
    """fig, ax = plt.subplots(figsize=(4, 3))
groups = [rng.normal(m, 1.0, 25) for m in (3, 4, 5)]
ax.boxplot(groups)
for i, g in enumerate(groups, start=1):
    ax.plot(np.full(g.size, i), g, ".", alpha=0.5)
""",
]
PANDAS_BODIES = [
    # grouped table, mean bars of counts
    """table = pd.DataFrame({"plot": rng.integers(0, 4, 200), "seedlings": rng.poisson(12, 200)})
counts = table.groupby("plot")["seedlings"].sum()
fig, ax = plt.subplots(figsize=(4, 3))
ax.bar(counts.index, counts.to_numpy())
ax.set_ylabel("number of seedlings")
""",
    # table read from the repo's data folder
    """table = pd.read_csv("data/leaves.csv")
fig, ax = plt.subplots(figsize=(4, 3))
for name, grp in table.groupby("line"):
    ax.scatter(grp["area"], grp["chlorophyll"], label=name, s=10)
ax.legend()
""",
    # pandas plotting
    """frame = pd.DataFrame(rng.normal(size=(50, 3)).cumsum(axis=0), columns=["a", "b", "c"])
ax = frame.plot(figsize=(4, 3))
fig = ax.figure
""",
]


def make_repo(root: Path, n: int) -> list[str]:
    """Write ``n`` figure scripts and their data under ``root``; return the scripts' repo-relative paths."""
    (root / "figures").mkdir(parents=True)
    (root / "data").mkdir()
    lines = ["line,area,chlorophyll"] + [f"{'ab'[i % 2]},{10 + i % 7},{30 + (i * 7) % 11}" for i in range(300)]
    (root / "data" / "leaves.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    scripts = []
    for i in range(n):
        use_pandas = i % 2 == 1
        body = PANDAS_BODIES[(i // 2) % len(PANDAS_BODIES)] if use_pandas else BODIES[(i // 2) % len(BODIES)]
        text = (HEADER.format(pandas="import pandas as pd" if use_pandas else "", seed=i) + body
                + FOOTER.format(index=i))
        rel = f"figures/fig{i:02d}.py"
        (root / rel).write_text(text, encoding="utf-8")
        scripts.append(rel)
    return scripts


def plain_env() -> dict[str, str]:
    env = dict(os.environ)
    env["MPLBACKEND"] = "Agg"
    return env


def plain_run(root: Path, scripts: list[str]) -> float:
    """Seconds to run every script one after another with plain python (as a user re-running them would)."""
    started = time.perf_counter()
    for rel in scripts:
        subprocess.run([sys.executable, rel], cwd=root, env=plain_env(), check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - started


def cli_check(root: Path, out: Path, runner: str, *flags: str) -> tuple[float, int]:
    """Wall seconds and exit code of the `figproof check` command line."""
    env = dict(os.environ)
    env.pop("FIGPROOF_RUNNER", None)
    if runner == "fresh":
        env["FIGPROOF_RUNNER"] = "fresh"
    figproof = Path(sys.executable).with_name("figproof")
    cmd = [str(figproof)] if figproof.exists() else [sys.executable, "-m", "figproof"]
    started = time.perf_counter()
    proc = subprocess.run([*cmd, "check", str(root), "--json", str(out), "--quiet", *flags],
                          env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    seconds = time.perf_counter() - started
    if proc.returncode not in (0, 1):
        sys.exit(f"figproof check failed with exit code {proc.returncode}:\n{proc.stderr.decode()[-2000:]}")
    return seconds, proc.returncode


def overhead(root: Path, runner: object, work: Path) -> tuple[float, float, float, float]:
    """Median figproof seconds per script, median compute, median overhead (ms) and median rules time (ms).

    Each script is run alone (jobs=1) and timed from the call to the runner until it returns: getting a
    sandbox copy (made, or restored after the previous script), starting and reaping the child, reading its run record back and keeping its outputs all count.
    Comparing its figures with the committed ones and the rules on that run are timed too and counted as
    overhead.
    """
    config = load_config(root, rules=by_id())
    inventory = discover(config)
    runs, walls = [], []
    with SandboxPool(config.root, jobs=1) as sandboxes:  # the repo copies, as execute_all shares them
        # as `figproof check` runs scripts when no images are asked for: no renderings kept
        options = Options(root=config.root, artifacts=work / "art", jobs=1, renders=False, sandboxes=sandboxes)
        for script in inventory.scripts:
            started = time.perf_counter()
            run = runner.run(Task(script=script), options)  # type: ignore[attr-defined]
            walls.append(time.perf_counter() - started)
            if run.status != "ok":
                sys.exit(f"{run.path}: {run.status} {run.error}")
            runs.append(run)
    totals, computes, extra, rule_times = [], [], [], []
    for run, wall in zip(runs, walls, strict=False):
        started = time.perf_counter()
        context = build_context(config, inventory, (run,), options.artifacts, None)  # committed-figure compare
        rules.apply((run,), context, config.rules)
        rule_seconds = time.perf_counter() - started
        compute = float(run.stdout_tail.split("COMPUTE", 1)[1].split()[0])
        totals.append(wall + rule_seconds)
        computes.append(compute)
        extra.append(wall + rule_seconds - compute)
        rule_times.append(rule_seconds)
    return (statistics.median(totals), statistics.median(computes), statistics.median(extra) * 1000,
            statistics.median(rule_times) * 1000)


BIG = """\
import numpy as np
import matplotlib.pyplot as plt
rng = np.random.default_rng(1)
fig, (a, b) = plt.subplots(1, 2, figsize=(8, 4))
a.scatter(rng.normal(size=1_000_000), rng.normal(size=1_000_000), s=2)
a.set_xlabel("trait x")
b.imshow(rng.random((4000, 4000)), cmap="magma")
fig.savefig("big.png", dpi=60)
"""


def _rss_kib(field: str) -> int:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1])
    return 0


def big_rules(work: Path) -> tuple[float, float, float, int, int]:
    """Rule time (s), tracemalloc peak (MiB), peak RSS growth (MiB), figures and findings for the big figure."""
    root = work / "big"
    root.mkdir()
    (root / "big.py").write_text(BIG, encoding="utf-8")
    config = load_config(root, rules=by_id())
    inventory = discover(config)
    runs = execute_all([Task(script="big.py")], Options(root=root, artifacts=work / "big-art", timeout=600,
                                                        memory_limit=8192), FreshInterpreter())
    if runs[0].status != "ok":
        sys.exit(f"big.py: {runs[0].status} {runs[0].error} {runs[0].stderr_tail[-500:]}")
    context = RunContext(inventory=inventory, runs=tuple(runs))
    gc.collect()
    clear_refs = Path("/proc/self/clear_refs")
    if clear_refs.exists():
        try:
            clear_refs.write_text("5")  # reset the peak RSS (VmHWM) so it measures the rules alone
        except OSError:
            pass
    rss_before = _rss_kib("VmRSS")
    tracemalloc.start()
    started = time.perf_counter()
    findings = rules.apply(tuple(runs), context, config.rules)
    seconds = time.perf_counter() - started
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    rss_peak = _rss_kib("VmHWM")
    return seconds, peak / 2**20, (rss_peak - rss_before) / 1024, len(runs[0].figures), len(findings)


def machine() -> str:
    model = ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        model = platform.processor()
    import matplotlib
    import numpy
    import pandas

    return (f"{os.cpu_count()} CPUs ({model or 'unknown model'}), {platform.system()} {platform.release()}, "
            f"Python {platform.python_version()}, numpy {numpy.__version__}, pandas {pandas.__version__}, "
            f"matplotlib {matplotlib.__version__}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--scripts", type=int, default=40)
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    print(f"machine: {machine()}")
    work = Path(tempfile.mkdtemp(prefix="figproof-bench-"))
    try:
        repo = work / "lab"
        scripts = make_repo(repo, args.scripts)
        # the first plain run also commits the figures, so figure-drift has committed files to compare
        plain = min(plain_run(repo, scripts) for _ in range(args.repeat))
        print(f"(a) plain python, {len(scripts)} scripts one after another: {plain:.2f} s "
              f"({plain / len(scripts) * 1000:.0f} ms per script)")
        for runner in ("warm", "fresh"):
            best, code = min(cli_check(repo, work / f"report-{runner}.json", runner, "--no-cache")
                             for _ in range(args.repeat))
            label = "warm pool" if runner == "warm" else "fresh interpreters"
            print(f"(b) figproof check, {label}, jobs={os.cpu_count()}: {best:.2f} s, exit {code}, "
                  f"ratio to (a) {best / plain:.2f} (target <= 0.50)")
        for label, runner in (("warm pool", None), ("fresh interpreters", FreshInterpreter())):
            pool = WarmPool() if runner is None else None
            if pool is not None and not pool.start():
                print("(c) warm pool unavailable on this machine")
                continue
            total, compute, extra, rule_ms = overhead(repo, pool or runner, work / f"over-{label[:4]}")
            if pool is not None:
                pool.close()
            print(f"(c) per-script, {label}, jobs=1: figproof {total * 1000:.0f} ms, script's own compute "
                  f"{compute * 1000:.0f} ms, overhead median {extra:.0f} ms (comparison and rules {rule_ms:.1f} ms of it; "
                  f"target < 50 ms)")
        cli_check(repo, work / "report-cache.json", "warm")  # fills the result cache
        cached = min(cli_check(repo, work / "report-cache.json", "warm")[0] for _ in range(args.repeat))
        print(f"(e) figproof check again with nothing changed, result cache on: {cached:.2f} s (target < 1 s)")
        seconds, peak, rss, figures, findings = big_rules(work)
        print(f"(d) all rules on 10^6 scatter points + a 4000x4000 image ({figures} figure, {findings} findings): "
              f"{seconds:.2f} s, peak traced allocations {peak:.0f} MiB, peak RSS growth {rss:.0f} MiB "
              f"(targets < 2 s, < 1024 MiB)")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()

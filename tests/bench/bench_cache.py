"""Time a re-run with the result cache on: 40 small figure scripts, nothing changed (issue 7 target: under 1 s).

Plain script, not collected by pytest:  .venv/bin/python tests/bench/bench_cache.py
Prints the cold check, the warm check (every script a cache hit), and one hit of one script.
"""

from __future__ import annotations

import os
import platform
import statistics
import tempfile
import time
from pathlib import Path

from figproof.pipeline import CheckOptions, check
from figproof.run.cache import HIT_NOTE, CachingRunner
from figproof.run.execute import FreshInterpreter, Options, Task

SCRIPTS = 40

SCRIPT = """\
import matplotlib.pyplot as plt
import pandas as pd

t = pd.read_csv("data/plot_{i}.csv")
fig, ax = plt.subplots()
ax.plot(t["day"], t["height"], "o")
ax.set_xlabel("day")
ax.set_ylabel("height (cm)")
fig.savefig("figures/plot_{i}.png")
"""


def make_repo(root: Path) -> None:
    (root / "figures").mkdir(parents=True)
    (root / "data").mkdir()
    for i in range(SCRIPTS):
        rows = "\n".join(f"{d},{10 + d * 0.7 + (i % 5) * 0.1:.2f}" for d in range(20))
        (root / "data" / f"plot_{i}.csv").write_text("day,height\n" + rows + "\n")
        (root / "figures" / f"plot_{i}.py").write_text(SCRIPT.format(i=i))


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "lab"
        make_repo(root)
        cache = root / ".figproof-cache"

        def runner() -> CachingRunner:
            return CachingRunner(FreshInterpreter, cache)  # the class is the factory: started only on a miss

        started = time.perf_counter()
        with runner() as r:
            cold = check(root, CheckOptions(artifacts=Path(tmp) / "a1", jobs=2), runner=r)
        cold_s = time.perf_counter() - started
        warm_times = []
        for n in range(3):
            started = time.perf_counter()
            with runner() as r:
                warm = check(root, CheckOptions(artifacts=Path(tmp) / f"a{n + 2}", jobs=2), runner=r)
            warm_times.append(time.perf_counter() - started)
            assert r.hits == SCRIPTS and r.misses == 0, (r.hits, r.misses)
        assert all(run.notes[-1] == HIT_NOTE for run in warm.result.runs)
        assert len(warm.result.findings) == len(cold.result.findings)

        r = runner()
        options = Options(root=root, artifacts=Path(tmp) / "single")
        hit_times = []
        for _ in range(20):
            started = time.perf_counter()
            r.run(Task(script="figures/plot_0.py"), options)
            hit_times.append(time.perf_counter() - started)
        started = time.perf_counter()
        CachingRunner(FreshInterpreter, cache)
        setup_s = time.perf_counter() - started

    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}")
    print(f"cold check, {SCRIPTS} scripts, fresh interpreter, jobs=2: {cold_s:.2f} s")
    print(f"warm check, every script a cache hit (median of 3): {statistics.median(warm_times):.3f} s")
    print(f"one cache hit of one script (median of 20): {statistics.median(hit_times) * 1000:.1f} ms")
    print(f"CachingRunner set-up (environment fingerprint): {setup_s * 1000:.1f} ms")


if __name__ == "__main__":
    main()

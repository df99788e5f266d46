"""Time Hartigan's dip test (figproof.science.dip.dip_test: tie spreading, sort, dip, table p-value).

Target: n = 10^5 under 0.5 s.  Prints the best of several runs for each n and sample shape.
Run from the repo root:  .venv/bin/python tests/bench/bench_dip.py
"""

from __future__ import annotations

import time

import numpy as np

from figproof.science.dip import dip_test


def best_of(values: np.ndarray, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        dip_test(values)
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    rng = np.random.default_rng(0)
    for n, repeats in ((10**3, 50), (10**5, 5)):
        shapes = {
            "uniform": rng.uniform(size=n),
            "normal": rng.normal(size=n),
            "bimodal": np.concatenate([rng.normal(0, 1, n // 2), rng.normal(4, 1, n - n // 2)]),
            "integers (ties)": rng.poisson(20, n).astype(float),
        }
        for name, values in shapes.items():
            seconds = best_of(values, repeats)
            print(f"dip_test n={n:>7d} {name:<16s} {seconds * 1e3:9.2f} ms")


if __name__ == "__main__":
    main()

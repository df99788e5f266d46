"""Time points-hidden on 10^4, 10^5 and 10^6 points (models built by hand; run: python tests/bench/bench_points.py).

Prints one line per size: the best of three runs of the rule alone, and which overlap method it used.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # the repo root, for tests.builders

from figproof.rules.visibility import GRID_ABOVE, points_hidden
from tests.builders import Axis, axes_with, figure, points_px


def model(n: int, seed: int = 0):
    """A 640x480 px axes at dpi 100 with n default-size markers scattered over a Gaussian blob."""
    rng = np.random.default_rng(seed)
    box = (80.0, 52.8, 576.0, 422.4)
    px = np.clip(rng.normal(328.0, 80.0, n), box[0], box[2])
    py = np.clip(rng.normal(237.6, 60.0, n), box[1], box[3])
    ax = axes_with(Axis(lim=(80, 576)), Axis(lim=(52.8, 422.4)), box=box, points=[points_px(px, py, size=36.0)])
    return figure(ax, dpi=100.0)


def main() -> None:
    knobs = points_hidden.defaults()
    for n in (10_000, 100_000, 1_000_000):
        fig = model(n)
        best = float("inf")
        found = []
        for _ in range(3):
            t0 = time.perf_counter()
            found = list(points_hidden.check(fig, knobs))
            best = min(best, time.perf_counter() - t0)
        method = "k-d tree" if n <= GRID_ABOVE else "grid"
        print(f"points-hidden n={n:>9,d}  {best * 1000:8.1f} ms  ({method}; {len(found)} finding(s))")


if __name__ == "__main__":
    main()

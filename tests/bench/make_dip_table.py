"""Generate src/figproof/science/_dip_table.py: Monte Carlo quantiles of the dip under the uniform null.

Hartigan & Hartigan (1985) show the uniform distribution is the least favourable
unimodal null for the dip, so critical values come from uniform samples.  For
each sample size n in SIZES we draw ``draws(n)`` samples of n independent
U(0, 1) values with numpy's PCG64 generator seeded by ``[SEED, n]``, compute
each dip with figproof.science.dip.dip_statistic, and store the quantiles of
sqrt(n)*dip at PROBS (numpy's default linear quantile rule).  figproof.science.dip
interpolates between rows in 1/sqrt(n) and between quantiles linearly.

Run from the repo root:  .venv/bin/python tests/bench/make_dip_table.py [--jobs 2]
It prints the time per size and rewrites the table module.
"""

from __future__ import annotations

import argparse
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from figproof.science.dip import dip_statistic

SEED = 19850301  # Hartigan & Hartigan, Annals of Statistics 13(1), March 1985
SIZES = (4, 5, 6, 7, 8, 9, 10, 12, 15, 20, 25, 30, 40, 50, 70, 100, 150, 200, 300, 500, 700, 1000,
         1500, 2000, 3000, 5000, 10000, 20000, 50000)
PROBS = (0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95,
         0.98, 0.99, 0.995, 0.998, 0.999)


def draws(n: int) -> int:
    """Monte Carlo draws for size n: many where a dip is cheap, fewer for the largest sizes."""
    if n <= 2000:
        return 40000
    if n <= 10000:
        return 10000
    return 4000


def quantiles_for(n: int) -> tuple[int, list[float], float]:
    """sqrt(n)*dip quantiles at PROBS for uniform samples of size n, and the seconds taken."""
    start = time.perf_counter()
    rng = np.random.default_rng([SEED, n])
    dips = np.array([dip_statistic(rng.uniform(size=n)) for _ in range(draws(n))])
    q = np.quantile(np.sqrt(n) * dips, PROBS)
    return n, [float(f"{v:.6g}") for v in q], time.perf_counter() - start


def render(rows: dict[int, list[float]]) -> str:
    """The table module's source text."""
    lines = [
        '"""Monte Carlo quantiles of sqrt(n)*dip for uniform samples (generated; do not edit).',
        "",
        "Made by tests/bench/make_dip_table.py: for each n in NS, DRAWS[i] samples of n",
        "U(0, 1) values from numpy's PCG64 seeded with [SEED, n]; the dip of each by",
        "figproof.science.dip.dip_statistic; QUANTILES[i][j] is the PROBS[j] quantile of sqrt(n)*dip.",
        '"""',
        "",
        f"SEED = {SEED}",
        f"PROBS = {PROBS!r}",
        f"NS = {tuple(rows)!r}",
        f"DRAWS = {tuple(draws(n) for n in rows)!r}",
        "QUANTILES = (",
    ]
    for n, q in rows.items():
        lines.append(f"    ({', '.join(repr(v) for v in q)}),  # n = {n}")
    lines.append(")")
    return "\n".join(lines) + "\n"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--jobs", type=int, default=1)
    parser.add_argument("--out", type=Path,
                        default=Path(__file__).resolve().parents[2] / "src" / "figproof" / "science" / "_dip_table.py")
    args = parser.parse_args()
    rows: dict[int, list[float]] = {}
    with ProcessPoolExecutor(max_workers=args.jobs) as pool:
        for n, q, seconds in pool.map(quantiles_for, sorted(SIZES, reverse=True)):
            rows[n] = q
            print(f"n={n:6d} draws={draws(n):6d} {seconds:8.1f} s  median sqrt(n)*dip={q[PROBS.index(0.5)]:.4f}",
                  flush=True)
    args.out.write_text(render({n: rows[n] for n in SIZES}), encoding="utf-8")
    print(f"wrote {args.out}")


if __name__ == "__main__":
    main()

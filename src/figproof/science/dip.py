"""Hartigan & Hartigan's dip test of unimodality.

The dip of a sample is the largest distance between its empirical
distribution function and the closest unimodal distribution function
(Hartigan & Hartigan, "The dip test of unimodality", Annals of Statistics
13(1), 1985, 70-84).  :func:`dip_statistic` follows the published
algorithm (Hartigan, "Algorithm AS 217: computation of the dip statistic to
test for unimodality", Applied Statistics 34(3), 1985, 320-325): it fits the
greatest convex minorant (GCM) and the least concave majorant (LCM) of the
empirical distribution over a shrinking candidate modal interval, each cycle
moving the interval's ends to the points where the two fits are farthest
apart.  Building the GCM/LCM predecessor indices is linear in n; each cycle
is linear in the points of the current interval and is done with numpy.

The statistic is reported on the probability scale, so it lies in
[1/(2n), 1/4].  :func:`dip_pvalue` turns it into a p-value against the
uniform distribution (the least favourable unimodal null, as in Hartigan &
Hartigan) by interpolating a table of Monte Carlo quantiles shipped in
:mod:`figproof.science._dip_table` and made by ``tests/bench/make_dip_table.py``.

Discrete data have ties, and ties make the empirical distribution jump in a
way no continuous unimodal law can follow, so the test would reject unimodal
integer scores.  :func:`spread_ties` first replaces each group of k equal
values by k values evenly spaced within half the data resolution of the
original value (deterministic, no random jitter).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["DipTest", "dip_pvalue", "dip_statistic", "dip_test", "spread_ties"]

# Below this many points a cycle's maximum search is faster in plain Python than in numpy.
_SMALL_SEGMENT = 256


@dataclass(frozen=True, slots=True, kw_only=True)
class DipTest:
    """Result of :func:`dip_test`: the dip, its p-value, the sample size and the modal interval."""

    dip: float
    pvalue: float
    n: int
    low: float
    high: float


def _clean(values: object) -> np.ndarray:
    """Return the finite values of ``values`` as a flat float array (masked entries dropped)."""
    if isinstance(values, np.ma.MaskedArray):
        values = values.compressed()
    arr = np.asarray(values, dtype=float).ravel()
    return arr[np.isfinite(arr)]


def _segment_max_python(x: list[float], jb: int, je: int, lower: bool) -> float:
    # One GCM (lower=True) or LCM segment: largest vertical gap, in units of 1/n, to the chord.
    best = 1.0
    if je - jb > 1 and x[je] != x[jb]:
        c = (je - jb) / (x[je] - x[jb])
        xb = x[jb]
        if lower:
            for jj in range(jb, je + 1):
                t = (jj - jb + 1) - (x[jj] - xb) * c
                if t > best:
                    best = t
        else:
            for jj in range(jb, je + 1):
                t = (x[jj] - xb) * c - (jj - jb - 1)
                if t > best:
                    best = t
    return best


def _segments_max(xs: np.ndarray, xl: list[float], starts: list[int], ends: list[int], lower: bool) -> float:
    """Largest chord gap over consecutive hull segments [starts[k], ends[k]] (indices into the 1-based xs)."""
    if not starts:
        return 0.0
    total = sum(e - b + 1 for b, e in zip(starts, ends, strict=True))
    if total <= _SMALL_SEGMENT:
        return max(_segment_max_python(xl, b, e, lower) for b, e in zip(starts, ends, strict=True))
    best = 1.0
    jb = np.asarray(starts)
    je = np.asarray(ends)
    keep = (je - jb > 1) & (xs[je] != xs[jb])
    if not keep.any():
        return best
    jb = jb[keep]
    je = je[keep]
    lengths = je - jb + 1
    seg = np.repeat(np.arange(len(jb)), lengths)
    # Index of every point within its own segment, then its global index.
    local = np.arange(lengths.sum()) - np.repeat(np.cumsum(lengths) - lengths, lengths)
    jj = jb[seg] + local
    c = (je - jb) / (xs[je] - xs[jb])
    if lower:
        t = (local + 1) - (xs[jj] - xs[jb[seg]]) * c[seg]
    else:
        t = (xs[jj] - xs[jb[seg]]) * c[seg] - (local - 1)
    return max(best, float(t.max()))


def _dip_sorted(x_sorted: np.ndarray) -> tuple[float, int, int]:
    """The dip of sorted finite values and the 0-based indices of the modal interval."""
    n = len(x_sorted)
    if n < 2 or x_sorted[-1] == x_sorted[0]:
        return (1.0 / (2 * n) if n else 0.0), 0, max(n - 1, 0)
    # 1-based copies, as in the published algorithm, so the index arithmetic reads as there.
    xs = np.concatenate(([0.0], x_sorted))
    x: list[float] = xs.tolist()

    # mn[j]: predecessor of j on the greatest convex minorant of points 1..j.
    mn = [0] * (n + 1)
    mn[1] = 1
    for j in range(2, n + 1):
        m = j - 1
        xj = x[j]
        while m != 1:
            mm = mn[m]
            if (xj - x[m]) * (m - mm) < (x[m] - x[mm]) * (j - m):
                break
            m = mm
        mn[j] = m
    # mj[k]: successor of k on the least concave majorant of points k..n.
    mj = [0] * (n + 1)
    mj[n] = n
    for k in range(n - 1, 0, -1):
        m = k + 1
        xk = x[k]
        while m != n:
            mm = mj[m]
            if (xk - x[m]) * (m - mm) < (x[m] - x[mm]) * (k - m):
                break
            m = mm
        mj[k] = m

    low, high = 1, n
    dip = 1.0  # in units of 1/(2n): the dip of any sample is at least 1/(2n)
    while True:
        # Change points of the GCM from high down to low, and of the LCM from low up to high.
        gcm = [0, high]
        while gcm[-1] > low:
            gcm.append(mn[gcm[-1]])
        l_gcm = len(gcm) - 1
        lcm = [0, low]
        while lcm[-1] < high:
            lcm.append(mj[lcm[-1]])
        l_lcm = len(lcm) - 1
        ig, ih = l_gcm, l_lcm
        ix, iv = l_gcm - 1, 2

        # Largest distance between the GCM and the LCM over [low, high], walking both hulls.
        d = 0.0
        if l_gcm != 2 or l_lcm != 2:
            while True:
                gix = gcm[ix]
                liv = lcm[iv]
                if gix > liv:
                    # The next change point is the LCM's: measure it against the GCM segment.
                    g1 = gcm[ix + 1]
                    dx = (liv - g1 + 1) - (x[liv] - x[g1]) * (gix - g1) / (x[gix] - x[g1])
                    iv += 1
                    if dx >= d:
                        d = dx
                        ig = ix + 1
                        ih = iv - 1
                else:
                    # The next change point is the GCM's: measure it against the LCM segment.
                    l1 = lcm[iv - 1]
                    dx = (x[gix] - x[l1]) * (liv - l1) / (x[liv] - x[l1]) - (gix - l1 - 1)
                    ix -= 1
                    if dx >= d:
                        d = dx
                        ig = ix + 1
                        ih = iv
                ix = max(ix, 1)
                iv = min(iv, l_lcm)
                if gcm[ix] == lcm[iv]:
                    break
        else:
            d = 1.0
        if d < dip:
            break

        # The dips of the convex minorant over [gcm[ig], low] and the concave majorant over [high, lcm[ih]].
        dip_l = _segments_max(xs, x, [gcm[j + 1] for j in range(ig, l_gcm)], [gcm[j] for j in range(ig, l_gcm)], True)
        dip_u = _segments_max(xs, x, [lcm[j] for j in range(ih, l_lcm)], [lcm[j + 1] for j in range(ih, l_lcm)], False)
        dip = max(dip, dip_l, dip_u)

        # Without this test the cycle can repeat forever (a fix known since the 1994 R port).
        if low == gcm[ig] and high == lcm[ih]:
            break
        low, high = gcm[ig], lcm[ih]
    return dip / (2 * n), low - 1, high - 1


def dip_statistic(values: object) -> float:
    """Hartigan's dip of a sample, on the probability scale.

    Parameters
    ----------
    values : array_like
        Observations in any order; NaN, infinite and masked entries are dropped.

    Returns
    -------
    float
        The dip, in [1/(2n), 1/4]; 0.0 for an empty sample.  Ties are used as
        given (see :func:`spread_ties`).
    """
    x = np.sort(_clean(values))
    return _dip_sorted(x)[0]


def spread_ties(values: object) -> np.ndarray:
    """Replace each group of k equal values by k values evenly spread within half the data resolution.

    The resolution is the smallest gap between distinct values.  A value v
    repeated k times becomes ``v + resolution * ((i + 0.5) / k - 0.5)`` for
    i = 0..k-1, so every value moves by less than half the resolution and the
    order of distinct values is kept.  Returns sorted finite values.
    """
    x = np.sort(_clean(values))
    if len(x) < 2:
        return x
    distinct, start, counts = np.unique(x, return_index=True, return_counts=True)
    if len(distinct) == len(x):
        return x
    if len(distinct) == 1:
        return x  # no resolution to spread within: a constant sample has dip 1/(2n) either way
    resolution = float(np.min(np.diff(distinct)))
    rank = np.arange(len(x)) - np.repeat(start, counts)
    k = np.repeat(counts, counts)
    return x + resolution * ((rank + 0.5) / k - 0.5)


def _quantiles_at(n: int) -> np.ndarray:
    """sqrt(n)·dip quantiles at PROBS for sample size n (interpolated in 1/sqrt(n) between table rows)."""
    from figproof.science import _dip_table  # imported late so the table's generator can use this module

    ns = np.asarray(_dip_table.NS, float)
    table = np.asarray(_dip_table.QUANTILES, float)  # rows: n in NS; columns: PROBS; values sqrt(n)*dip
    if n <= ns[0]:
        return table[0]
    if n >= ns[-1]:
        # sqrt(n)·dip converges in law (Hartigan & Hartigan 1985), so the last row serves beyond the table.
        return table[-1]
    i = int(np.searchsorted(ns, n)) - 1
    u0, u1, u = 1 / math.sqrt(ns[i]), 1 / math.sqrt(ns[i + 1]), 1 / math.sqrt(n)
    w = (u0 - u) / (u0 - u1)
    return (1 - w) * table[i] + w * table[i + 1]


def dip_pvalue(dip: float, n: int) -> float:
    """P-value of a dip for sample size n against the uniform null, from the shipped Monte Carlo table.

    Interpolates linearly in 1/sqrt(n) between tabled sizes and linearly in
    sqrt(n)·dip between tabled quantiles.  Beyond the table's extreme
    quantiles the p-value is clamped to its end probabilities (so the
    smallest p-value reported is 1 - max(PROBS)).
    """
    if n < 4 or not math.isfinite(dip):
        return 1.0
    from figproof.science import _dip_table

    q = _quantiles_at(n)
    cdf = float(np.interp(math.sqrt(n) * dip, q, np.asarray(_dip_table.PROBS, float)))
    return min(1.0, max(0.0, round(1.0 - cdf, 12)))  # rounded so the floor reads as 0.001, not 0.0010000000000000009


def dip_test(values: object, *, ties: bool = True) -> DipTest:
    """Dip test of unimodality: the dip, its p-value against the uniform null, n and the modal interval.

    Parameters
    ----------
    values : array_like
        Observations; NaN, infinite and masked entries are dropped.
    ties : bool
        Spread tied values within half the data resolution first (default).
    """
    x = spread_ties(values) if ties else np.sort(_clean(values))
    n = len(x)
    if n == 0:
        return DipTest(dip=0.0, pvalue=1.0, n=0, low=math.nan, high=math.nan)
    dip, lo, hi = _dip_sorted(x)
    return DipTest(dip=dip, pvalue=dip_pvalue(dip, n), n=n, low=float(x[lo]), high=float(x[hi]))


"""Hartigan's dip test: the statistic against an outside implementation, the p-value table against fresh
Monte Carlo, and the limits in Hartigan & Hartigan (1985)."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from figproof.science import _dip_table
from figproof.science.dip import dip_pvalue, dip_statistic, dip_test, spread_ties


def _samples(seed: int) -> list[np.ndarray]:
    """Tie-free samples of many shapes and sizes (continuous draws have no ties with probability 1)."""
    rng = np.random.default_rng(seed)
    out = []
    for n in (4, 5, 7, 10, 17, 30, 64, 100, 333, 1000, 2500):
        out += [rng.uniform(size=n), rng.normal(size=n), rng.exponential(size=n), rng.standard_cauchy(size=n),
                np.concatenate([rng.normal(0, 1, n // 2), rng.normal(4, 1, n - n // 2)]),
                np.concatenate([rng.normal(0, 1, n // 3), rng.normal(3, 0.5, n // 3),
                                rng.normal(7, 2, n - 2 * (n // 3))])]
    return [x for x in out if np.unique(x).size == x.size]


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_dip_equals_diptest_package(seed: int) -> None:
    # Outside reference: the `diptest` package (PyPI; a port of Maechler's R diptest of AS 217). It is GPL,
    # so it is a test-only oracle here, never a runtime dependency. allow_zero=False is AS 217's convention
    # that the dip is at least 1/(2n).
    diptest = pytest.importorskip("diptest", reason="the GPL `diptest` package is the test-only oracle")
    for x in _samples(seed):
        assert dip_statistic(x) == pytest.approx(diptest.dipstat(x, allow_zero=False), abs=1e-10)


def test_dip_is_order_free_and_affine_invariant() -> None:
    # From the definition (a distance between distribution functions): the dip does not depend on the
    # order of the data, on location and scale, or on reflection x -> -x.
    rng = np.random.default_rng(3)
    x = np.concatenate([rng.normal(0, 1, 70), rng.normal(3, 1, 50)])
    d = dip_statistic(x)
    assert dip_statistic(rng.permutation(x)) == pytest.approx(d, abs=1e-12)
    assert dip_statistic(3.5 * x - 12.0) == pytest.approx(d, abs=1e-12)
    assert dip_statistic(-x) == pytest.approx(d, abs=1e-12)


def test_hartigan_bounds() -> None:
    # For n points the dip lies in [1/(2n), 1/4]: the lower bound as R's diptest manual states it (Maechler,
    # diptest::dip, "the same minimum value, 1/(2n)"); the upper bound from Hartigan & Hartigan 1985 (Annals of
    # Statistics 13(1): 70-84), from memory.
    rng = np.random.default_rng(4)
    for n in (4, 9, 50, 400):
        for x in (rng.uniform(size=n), np.concatenate([np.zeros(n // 2), np.ones(n - n // 2)]) +
                  rng.normal(0, 1e-6, n)):
            d = dip_statistic(x)
            assert 1 / (2 * n) - 1e-15 <= d <= 0.25 + 1e-15


def test_uniform_dip_tends_to_zero_like_one_over_sqrt_n() -> None:
    # Hartigan & Hartigan 1985 (abstract: the distribution of the statistic is determined asymptotically when
    # sampling from the uniform; R's diptest tabulates quantiles of sqrt(n)*dip): the dip tends to 0 and
    # sqrt(n)*dip has a limiting distribution, so the dip shrinks about tenfold for a hundredfold larger n.
    rng = np.random.default_rng(5)
    mean_dip = {n: np.mean([dip_statistic(rng.uniform(size=n)) for _ in range(40)]) for n in (100, 10000)}
    assert mean_dip[10000] < 0.01
    ratio = mean_dip[100] / mean_dip[10000]
    assert 7 < ratio < 14


def test_two_separated_normals_tend_to_one_quarter() -> None:
    # Limit, derived from the definition: two equal point masses have dip 1/4 (the best unimodal fit is
    # 1/2 at the first mass rising to 3/4 just before the second), the largest possible dip (Hartigan &
    # Hartigan 1985; that it is the largest is from memory). Two equal normals approach it as their separation
    # grows, slowly, since a concave fit has to climb the far component's whole rise.
    rng = np.random.default_rng(6)
    dips = []
    for sep in (4.0, 10.0, 100.0, 1e4):
        x = np.concatenate([rng.normal(0, 1, 2000), rng.normal(sep, 1, 2000)])
        dips.append(dip_statistic(x))
    assert dips == sorted(dips)
    assert dips[-1] == pytest.approx(0.25, abs=0.002)
    assert dips[0] > 0.02


def test_table_against_fresh_monte_carlo() -> None:
    # Fresh uniform draws with a seed unrelated to the table's: the tabled 95% quantile of sqrt(n)*dip
    # must agree with the fresh one, and p < 0.05 must come up about 5% of the time (loose tolerance:
    # 2000 draws give a standard error near 0.005 on the share). n = 37 lies between tabled sizes.
    rng = np.random.default_rng(20240611)
    j95 = _dip_table.PROBS.index(0.95)
    for n in (37, 200):
        dips = np.array([dip_statistic(rng.uniform(size=n)) for _ in range(2000)])
        fresh = float(np.quantile(np.sqrt(n) * dips, 0.95))
        tabled = float(np.sqrt(n) * _interp_critical(n, j95))
        assert tabled == pytest.approx(fresh, rel=0.05)
        share = np.mean([dip_pvalue(d, n) < 0.05 for d in dips])
        assert 0.03 < share < 0.07


def _interp_critical(n: int, j: int) -> float:
    """Critical dip at PROBS[j] read straight off the table (linear in 1/sqrt(n)); an independent reading."""
    ns = np.asarray(_dip_table.NS, float)
    col = np.asarray(_dip_table.QUANTILES, float)[:, j]
    return float(np.interp(1 / math.sqrt(n), 1 / np.sqrt(ns[::-1]), col[::-1])) / math.sqrt(n)


def test_pvalues_agree_with_diptest_table() -> None:
    # Outside reference: diptest.diptest's p-value, interpolated in its own table of critical values
    # (Maechler's, from a separate Monte Carlo). Two independent tables agree to Monte Carlo error.
    diptest = pytest.importorskip("diptest", reason="the GPL `diptest` package is the test-only oracle")
    rng = np.random.default_rng(8)
    for n, gap in ((30, 2.0), (60, 2.5), (120, 3.0), (500, 2.2), (1000, 0.0)):
        x = np.concatenate([rng.normal(0, 1, n // 2), rng.normal(gap, 1, n - n // 2)])
        _d, p_ref = diptest.diptest(x)
        assert dip_pvalue(dip_statistic(x), n) == pytest.approx(p_ref, abs=0.03)


def test_table_provenance_and_shape() -> None:
    assert len(_dip_table.QUANTILES) == len(_dip_table.NS) == len(_dip_table.DRAWS)
    assert all(len(row) == len(_dip_table.PROBS) for row in _dip_table.QUANTILES)
    # quantiles increase along each row, and sqrt(n)*dip settles down (its limit law) at large n
    assert all(np.all(np.diff(row) >= 0) for row in _dip_table.QUANTILES)
    median = _dip_table.PROBS.index(0.5)
    tail = [row[median] for n, row in zip(_dip_table.NS, _dip_table.QUANTILES, strict=True) if n >= 1000]
    assert max(tail) - min(tail) < 0.02


def test_pvalue_is_monotone_and_bounded() -> None:
    ps = [dip_pvalue(d, 100) for d in np.linspace(0.005, 0.2, 50)]
    assert all(b <= a for a, b in itertools.pairwise(ps))
    assert ps[0] > 0.99 and ps[-1] < 0.01
    assert dip_pvalue(0.05, 3) == 1.0  # no test below 4 points
    assert dip_pvalue(float("nan"), 100) == 1.0
    # beyond the largest tabled n the sqrt(n) scaling of the last row is used
    assert dip_pvalue(0.3 / math.sqrt(10**6), 10**6) == pytest.approx(dip_pvalue(0.3 / math.sqrt(50000), 50000))


def test_spread_ties_stays_within_half_resolution() -> None:
    x = np.array([3.0, 1.0, 2.0, 2.0, 2.0, 5.0, 5.0])
    s = spread_ties(x)
    original = np.sort(x)
    assert np.unique(s).size == s.size
    assert np.all(np.abs(s - original) < 0.5)  # resolution here is 1
    assert np.all(np.diff(s) > 0)
    assert np.array_equal(s, spread_ties(x[::-1]))  # deterministic, order-free
    assert np.array_equal(spread_ties([4.0, 1.0]), [1.0, 4.0])  # no ties: only sorted


def test_ties_do_not_make_unimodal_scores_multimodal() -> None:
    # Common practice: Likert scores (integers 1-7) from a unimodal population are not multimodal.
    # Without spreading, the stairs of the empirical distribution alone make the test reject.
    rng = np.random.default_rng(9)
    scores = rng.choice(np.arange(1, 8), size=300, p=[0.05, 0.1, 0.2, 0.3, 0.2, 0.1, 0.05]).astype(float)
    assert dip_test(scores, ties=False).pvalue < 0.01
    assert dip_test(scores).pvalue > 0.05
    polarised = rng.choice(np.arange(1, 8), size=300, p=[0.3, 0.15, 0.04, 0.02, 0.04, 0.15, 0.3]).astype(float)
    assert dip_test(polarised).pvalue < 0.01


def test_bad_input() -> None:
    assert dip_statistic([]) == 0.0
    assert dip_test([]).n == 0 and dip_test([]).pvalue == 1.0
    assert dip_test([np.nan, np.nan]).n == 0
    assert dip_statistic([2.0]) == 0.5  # 1/(2n), AS 217's convention for a single value
    assert dip_test([2.0]).pvalue == 1.0
    assert dip_statistic([1.0, 1.0, 1.0, 1.0]) == pytest.approx(1 / 8)
    masked = np.ma.masked_array([0.0, 0.1, 0.2, 50.0, 0.3, 0.35, 0.5], mask=[0, 0, 0, 1, 0, 0, 0])
    assert dip_statistic(masked) == pytest.approx(dip_statistic([0.0, 0.1, 0.2, 0.3, 0.35, 0.5]))
    assert dip_statistic([0.0, np.inf, 1.0, 2.0, -np.inf, 3.0]) == pytest.approx(dip_statistic([0, 1, 2, 3.0]))
    big = np.random.default_rng(10).normal(size=10**6)
    result = dip_test(big)
    assert result.n == 10**6 and 5e-7 <= result.dip < 0.002 and result.pvalue > 0.01

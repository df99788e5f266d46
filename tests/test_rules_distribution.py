"""Distribution rules on hand-built models: dots-binned, summary-hides-small-n, box-hides-modes, errorbars-ambiguous."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from figproof.model.records import Axis
from figproof.rules import distribution
from figproof.rules.bars import bars_for_continuous
from figproof.rules.distribution import box_hides_modes, dots_binned, errorbars_ambiguous, summary_hides_small_n
from tests.builders import (
    asym_errorbars,
    axes,
    bars,
    box_of,
    call_of,
    errorbars,
    figure,
    points,
    sample_of,
    table_of,
    violin_of,
)


def hits(rule, fig, **overrides):
    return list(rule.check(fig, {**rule.defaults(), **overrides}))


def binned(values, bins=10):
    """Bin centres for each value, as a script drawing a dot plot from np.histogram would."""
    counts, edges = np.histogram(values, bins=bins)
    centres = (edges[:-1] + edges[1:]) / 2
    return np.repeat(centres, counts), np.concatenate([np.arange(1, c + 1) for c in counts]).astype(float)


def jitter(rng, center, n, width=0.15):
    return center + rng.uniform(-width, width, n)


def test_module_is_listed() -> None:
    from figproof import rules

    ids = {r.id for r in rules.RULES}
    assert {"dots-binned", "summary-hides-small-n", "box-hides-modes", "errorbars-ambiguous"} <= ids
    assert (dots_binned, summary_hides_small_n, box_hides_modes, errorbars_ambiguous) == distribution.RULES


def test_rules_are_documented() -> None:
    for r in distribution.RULES:
        assert r.why and r.fix and r.sources and r.summary
        assert "import matplotlib.pyplot as plt" in r.bad and "import matplotlib.pyplot as plt" in r.good
        for k in r.knobs:
            assert k.help


# --------------------------------------------------------------------------
# dots-binned
# --------------------------------------------------------------------------


def test_histogram_bin_centres_are_binned() -> None:
    rng = np.random.default_rng(1)
    mass = rng.normal(24.0, 3.0, 60)
    x, y = binned(mass)
    fig = figure(axes(points=[points(x, y)]))
    found = hits(dots_binned, fig)
    assert len(found) == 1
    assert found[0].confidence == "likely"
    assert "the x values of 60 points" in found[0].message and "step" in found[0].message


def test_binned_against_loaded_column_is_certain() -> None:
    rng = np.random.default_rng(2)
    mass = rng.normal(24.0, 3.0, 60).round(2)
    x, y = binned(mass)
    fig = figure(axes(points=[points(x, y)]), tables=(table_of(mass=mass, cage=rng.integers(1, 4, 60)),))
    (hit,) = hits(dots_binned, fig)
    assert hit.confidence == "certain"
    assert "'mass'" in hit.message and "data/measurements.csv" in hit.message


def test_integer_and_likert_dot_plots_are_not_binned() -> None:
    # Common practice: dot plots of integers or Likert scores are not binned.
    rng = np.random.default_rng(3)
    scores = rng.integers(1, 8, 120).astype(float)
    fig = figure(axes(points=[points(jitter(rng, 0, 120), scores)]))
    assert hits(dots_binned, fig) == []
    # the same scores loaded from a table: plotted values equal the source values
    fig = figure(axes(points=[points(jitter(rng, 0, 120), scores)]), tables=(table_of(score=scores),))
    assert hits(dots_binned, fig) == []


def test_unit_conversion_of_discrete_data_is_not_binned() -> None:
    # lengths measured to the whole inch, plotted in cm: a non-round step, but the values are the data
    rng = np.random.default_rng(4)
    inches = rng.integers(10, 20, 80).astype(float)
    fig = figure(axes(points=[points(jitter(rng, 0, 80), inches * 2.54)]), tables=(table_of(length_in=inches),))
    assert hits(dots_binned, fig) == []
    # without the table the non-round lattice is reported
    fig = figure(axes(points=[points(jitter(rng, 0, 80), inches * 2.54)]))
    assert [h.confidence for h in hits(dots_binned, fig)] == ["likely"]


def test_round_step_at_half_offset_is_possible() -> None:
    rng = np.random.default_rng(5)
    values = np.floor(rng.normal(20, 3, 90)) + 0.5  # centres of unit bins
    fig = figure(axes(points=[points(jitter(rng, 0, 90), values)]))
    (hit,) = hits(dots_binned, fig)
    assert hit.confidence == "possible" and "halfway" in hit.message


def test_jittered_strip_plot_with_median_line_passes_every_rule() -> None:
    # Common practice: jittered dot plots with a median line pass every rule here.
    rng = np.random.default_rng(6)
    a, b = rng.normal(24, 3, 30), rng.normal(21, 3, 30)
    ax = axes(points=[points(jitter(rng, 0, 30), a), points(jitter(rng, 1, 30), b)])
    fig = figure(ax, calls=(call_of("scatter", x=jitter(rng, 0, 30), y=a),))
    for r in distribution.RULES:
        assert hits(r, fig) == [], r.id


def test_dots_binned_skips_categorical_and_small_sets() -> None:
    rng = np.random.default_rng(7)
    x, y = binned(rng.normal(0, 1, 60))
    ax = axes(points=[points(x, y)])
    cat = ax.__class__(index=0, x=Axis(categorical=True), y=ax.y, points=ax.points)
    assert hits(dots_binned, figure(cat)) == []
    x, y = binned(rng.normal(0, 1, 8), bins=4)
    assert hits(dots_binned, figure(axes(points=[points(x, y)]))) == []


def test_dots_binned_bad_input() -> None:
    empty = figure(axes(points=[points([], [])]))
    nan = figure(axes(points=[points([np.nan] * 20, [np.nan] * 20)]))
    single = figure(axes(points=[points([1.0], [2.0])]))
    masked = figure(axes(points=[points(np.ma.masked_array(np.arange(20.0), mask=[1] * 20), np.zeros(20))]))
    for fig in (empty, nan, single, masked):
        assert hits(dots_binned, fig) == []
    rng = np.random.default_rng(8)
    x, y = binned(rng.normal(0, 1, 10**6), bins=40)
    assert len(hits(dots_binned, figure(axes(points=[points(x, y)])))) == 1


# --------------------------------------------------------------------------
# summary-hides-small-n
# --------------------------------------------------------------------------


def _boxes(groups, **kw):
    samples = tuple(sample_of(g) for g in groups)
    boxes = [box_of(g, position=i + 1, sample=i, **kw) for i, g in enumerate(groups)]
    return samples, boxes


def test_small_boxes_without_points_warn() -> None:
    rng = np.random.default_rng(10)
    groups = [rng.normal(m, 1, 6) for m in (5, 6, 6.5)]
    samples, boxes = _boxes(groups)
    [found] = hits(summary_hides_small_n, figure(axes(boxes=boxes), samples=samples))
    assert found.severity == "warning" and found.confidence == "likely"
    # one finding for the three boxes of the axes, with the counts
    assert found.message == ("3 boxes (at x = 1, 2, 3) summarise n = 6 values each and draw 0 of 18 (0%) of "
                             "their values as points")
    [one] = hits(summary_hides_small_n, figure(axes(boxes=boxes[:1]), samples=samples[:1]))
    assert one.message == "the box at x = 1 summarises n = 6 values and draws 0 of 6 (0%) of them as points"


def test_small_boxes_with_their_points_pass() -> None:
    rng = np.random.default_rng(11)
    groups = [rng.normal(m, 1, 6) for m in (5, 6, 6.5)]
    samples, boxes = _boxes(groups)
    pts = [points(jitter(rng, i + 1, 6, 0.1), g) for i, g in enumerate(groups)]
    assert hits(summary_hides_small_n, figure(axes(boxes=boxes, points=pts), samples=samples)) == []
    # points of the wrong group at that position do not count
    wrong = [points(jitter(rng, i + 1, 6, 0.1), g + 100) for i, g in enumerate(groups)]
    [wrong_place] = hits(summary_hides_small_n, figure(axes(boxes=boxes, points=wrong), samples=samples))
    assert wrong_place.message.startswith("3 boxes")


def test_fliers_do_not_count_as_points() -> None:
    values = np.array([1.0, 1.1, 1.2, 1.3, 1.4, 1.5, 9.0])
    samples, boxes = _boxes([values])
    assert boxes[0].fliers.tolist() == [9.0]
    flier_marks = points([1.0], [9.0], kind="line")
    (hit,) = hits(summary_hides_small_n, figure(axes(boxes=boxes, points=[flier_marks]), samples=samples))
    assert "0 of 7" in hit.message


def test_n_thresholds() -> None:
    rng = np.random.default_rng(12)
    groups = [rng.normal(0, 1, n) for n in (3, 9, 12, 15)]
    samples, boxes = _boxes(groups)
    found = hits(summary_hides_small_n, figure(axes(boxes=boxes), samples=samples))
    got = [(h.severity, h.confidence) for h in found]
    # n = 12 and 15 are not small (n < 10, common practice): no note for them by default
    assert got == [("warning", "certain"), ("warning", "likely")]


def test_violin_and_box_n_without_sample() -> None:
    rng = np.random.default_rng(13)
    v = rng.normal(0, 1, 7)
    box = box_of(v, position=0.0)  # n recorded, no sample index
    found = hits(summary_hides_small_n, figure(axes(boxes=[box], violins=[violin_of(v, position=1.0)])))
    assert [h.message.split(" at ")[0] for h in found] == ["the box", "the violin"]
    unknown = box_of(v, with_n=False)
    assert hits(summary_hides_small_n, figure(axes(boxes=[unknown]))) == []  # never guess n


def test_bars_of_loaded_group_means() -> None:
    rng = np.random.default_rng(14)
    signal = rng.normal(10, 2, 18)
    dose = np.repeat([0, 1, 2], 6)
    means = [signal[dose == k].mean() for k in range(3)]
    fig = figure(axes(bars=[bars(means)]), tables=(table_of(signal=signal, groups={"dose": dose}),))
    # bars of group means are bars-for-continuous's finding; the small groups are the same problem
    assert hits(bars_for_continuous, fig) and hits(summary_hides_small_n, fig) == []

    # bars of counts match no group mean: not summaries
    assert hits(summary_hides_small_n, figure(axes(bars=[bars([3, 5, 2])]),
                                              tables=(table_of(signal=signal, groups={"dose": dose}),))) == []


def test_summary_bad_input() -> None:
    empty = box_of([1.0, 2.0, 3.0])
    fig = figure(axes(boxes=[empty], points=[points([], [])]), samples=(sample_of([np.nan] * 5),))
    fig2 = figure(axes(boxes=[box_of([1.0, 2.0, 3.0], sample=0)]), samples=(sample_of([np.nan, 1.0, 2.0, 3.0]),))
    assert len(hits(summary_hides_small_n, fig)) == 1
    assert len(hits(summary_hides_small_n, fig2)) == 1
    assert hits(summary_hides_small_n, figure(axes(bars=[bars([])]))) == []
    big = np.random.default_rng(15).normal(size=10**6)
    fig3 = figure(axes(boxes=[box_of(big, sample=0)]), samples=(sample_of(big),))
    assert hits(summary_hides_small_n, fig3) == []


# --------------------------------------------------------------------------
# box-hides-modes
# --------------------------------------------------------------------------


def _bimodal(rng, n=80):
    return np.concatenate([rng.normal(220, 15, n // 2), rng.normal(340, 15, n - n // 2)])


def test_bimodal_box_is_reported() -> None:
    rng = np.random.default_rng(20)
    v = _bimodal(rng)
    (hit,) = hits(box_hides_modes, figure(axes(boxes=[box_of(v, sample=0)]), samples=(sample_of(v),)))
    assert hit.confidence == "likely" and "dip" in hit.message and "n = 80" in hit.message
    assert "p ≤ 0.001" in hit.message  # beyond the table's 0.999 quantile


def test_unimodal_and_skewed_boxes_pass() -> None:
    # Skewed unimodal data must not be flagged (a bimodality coefficient would flag them).
    rng = np.random.default_rng(21)
    for v in (rng.normal(0, 1, 200), rng.lognormal(0, 0.9, 200), rng.exponential(1, 200)):
        assert hits(box_hides_modes, figure(axes(boxes=[box_of(v, sample=0)]), samples=(sample_of(v),))) == []


def test_modes_with_violin_or_points_pass() -> None:
    rng = np.random.default_rng(22)
    v = _bimodal(rng)
    samples = (sample_of(v),)
    with_violin = axes(boxes=[box_of(v, sample=0)], violins=[violin_of(v)])
    with_points = axes(boxes=[box_of(v, sample=0)], points=[points(jitter(rng, 1, v.size, 0.1), v)])
    assert hits(box_hides_modes, figure(with_violin, samples=samples)) == []
    assert hits(box_hides_modes, figure(with_points, samples=samples)) == []


def test_discrete_scores_need_enough_distinct_values() -> None:
    rng = np.random.default_rng(23)
    polar = rng.choice([1.0, 2.0, 6.0, 7.0], size=100)  # only 4 distinct values: the test is not run
    assert hits(box_hides_modes, figure(axes(boxes=[box_of(polar, sample=0)]), samples=(sample_of(polar),))) == []
    # unimodal integer data with ties: spreading the ties keeps them unimodal
    counts = rng.poisson(12, 300).astype(float)
    assert np.unique(counts).size >= 10
    assert hits(box_hides_modes, figure(axes(boxes=[box_of(counts, sample=0)]), samples=(sample_of(counts),))) == []


def test_box_modes_bad_input() -> None:
    small = np.array([1.0, 1.2, 5.0, 5.2] * 4)
    assert hits(box_hides_modes, figure(axes(boxes=[box_of(small, sample=0)]), samples=(sample_of(small),))) == []
    nan = figure(axes(boxes=[box_of([1.0, 2.0, 3.0], sample=0)]), samples=(sample_of([np.nan] * 30),))
    assert hits(box_hides_modes, nan) == []
    bad_index = figure(axes(boxes=[box_of([1.0, 2.0, 3.0], sample=5)]))
    assert hits(box_hides_modes, bad_index) == []


# --------------------------------------------------------------------------
# errorbars-ambiguous (reference values from scipy.stats)
# --------------------------------------------------------------------------


def _groups(rng, n=6, means=(10.0, 12.0, 15.0)):
    return [rng.normal(m, 2.0, n) for m in means]


def _table(groups):
    return table_of(**{f"g{i}": g for i, g in enumerate(groups)})


def test_sem_bars_without_points_warn() -> None:
    rng = np.random.default_rng(30)
    groups = _groups(rng)
    # scipy.stats.sem (ddof=1) as the reference for the standard error
    eb = errorbars([0, 1, 2], [g.mean() for g in groups], [stats.sem(g) for g in groups])
    (hit,) = hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(_table(groups),)))
    assert hit.severity == "warning" and hit.confidence == "certain"
    assert hit.message == ("error bars: all 3 show ±1 SEM (n = 6, 6, 6); 3 SEM bars on n < 10 without the "
                           "points drawn")


def test_sem_bars_with_points_are_a_note() -> None:
    rng = np.random.default_rng(31)
    groups = _groups(rng)
    eb = errorbars([0, 1, 2], [g.mean() for g in groups], [stats.sem(g) for g in groups])
    pts = [points(jitter(rng, i, 6, 0.1), g) for i, g in enumerate(groups)]
    (hit,) = hits(errorbars_ambiguous, figure(axes(errorbars=[eb], points=pts)))  # raw data from the drawn points
    assert hit.severity is None and "±1 SEM" in hit.message


@pytest.mark.parametrize(("half", "label"), [
    (lambda g: np.std(g, ddof=1), "±1 SD (ddof 1)"),
    (lambda g: np.std(g, ddof=0), "±1 SD (ddof 0)"),
    # scipy.stats.t.ppf: the t-based 95% confidence interval of the mean
    (lambda g: stats.t.ppf(0.975, g.size - 1) * stats.sem(g), "a 95% CI (t)"),
    (lambda g: 1.96 * stats.sem(g), "a 95% CI (1.96 SEM)"),
])
def test_symmetric_types(half, label) -> None:
    rng = np.random.default_rng(32)
    groups = _groups(rng, n=12)
    eb = errorbars([0, 1, 2], [g.mean() for g in groups], [half(g) for g in groups])
    (hit,) = hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), samples=tuple(sample_of(g, origin="bar") for g in groups)))
    assert hit.message == f"error bars: all 3 show {label} (n = 12, 12, 12)"
    assert hit.severity is None


def test_half_lengths_outside_tolerance_are_not_matched() -> None:
    rng = np.random.default_rng(33)
    groups = _groups(rng, n=12)
    eb = errorbars([0, 1, 2], [g.mean() for g in groups], [1.01 * stats.sem(g) for g in groups])
    # bars that match no statistic tell the reader nothing figproof can name: no finding
    assert hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(_table(groups),))) == []
    # one bar known among unknown ones: the known one is named, the others counted
    eb = errorbars([0, 1, 2], [g.mean() for g in groups], [stats.sem(groups[0])] + [1.01 * stats.sem(g) for g in groups[1:]])
    (hit,) = hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(_table(groups),)))
    assert "2 match none of" in hit.message and hit.confidence == "likely"


def test_two_sd_bars_as_seaborn_draws_them() -> None:
    # seaborn's errorbar=("sd", 2) draws mean ± 2 SD (seaborn documentation, "Statistical estimation and
    # error bars"); the SD is numpy's with ddof 1, as seaborn computes it
    rng = np.random.default_rng(35)
    groups = _groups(rng, n=12)
    eb = errorbars([0, 1, 2], [g.mean() for g in groups], [2 * np.std(g, ddof=1) for g in groups])
    (hit,) = hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(_table(groups),)))
    assert "±2 SD" in hit.message


def test_percentile_interval_around_median() -> None:
    rng = np.random.default_rng(34)
    groups = _groups(rng, n=25)
    med = [np.median(g) for g in groups]
    lo = [np.percentile(g, 2.5) for g in groups]
    hi = [np.percentile(g, 97.5) for g in groups]
    eb = asym_errorbars([0, 1, 2], med, lo, hi)
    (hit,) = hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(_table(groups),)))
    assert "the 95% percentile interval (n = 25, 25, 25)" in hit.message


def test_bootstrap_ci_is_recognised_approximately() -> None:
    # Reference: scipy.stats.bootstrap, percentile method, 1000 resamples (a typical plotting default).
    rng = np.random.default_rng(35)
    groups = [rng.lognormal(1.0, 0.5, 30) for _ in range(3)]
    lo, hi = [], []
    for g in groups:
        res = stats.bootstrap((g,), np.mean, n_resamples=1000, method="percentile", rng=np.random.default_rng(1))
        lo.append(res.confidence_interval.low)
        hi.append(res.confidence_interval.high)
    eb = asym_errorbars([0, 1, 2], [g.mean() for g in groups], lo, hi)
    (hit,) = hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(_table(groups),)))
    assert "a 95% bootstrap CI of the mean" in hit.message and "(n = 30, 30, 30)" in hit.message and hit.confidence == "likely"


def test_grouped_table_and_mixed_types() -> None:
    rng = np.random.default_rng(36)
    signal = rng.normal(10, 2, 24)
    dose = np.repeat([0, 1, 2, 3], 6)
    g = [signal[dose == k] for k in range(4)]
    half = [stats.sem(g[0]), stats.sem(g[1]), np.std(g[2], ddof=1), 0.123]
    eb = errorbars([0, 1, 2, 3], [x.mean() for x in g], half)
    (hit,) = hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(table_of(signal=signal, groups={"dose": dose}),)))
    assert hit.message.startswith("error bars: 2 of 4 (50%) show ±1 SEM (n = 6, 6); 1 of 4 (25%) show ±1 SD")
    assert "1 match none of" in hit.message


def test_unknown_data_says_nothing() -> None:
    eb = errorbars([0, 1], [3.0, 4.0], [0.5, 0.7])
    assert hits(errorbars_ambiguous, figure(axes(errorbars=[eb]))) == []


def test_errorbars_bad_input() -> None:
    rng = np.random.default_rng(37)
    groups = _groups(rng)
    nan = errorbars([0, np.nan, 2], [np.nan, 1.0, 2.0], [1.0, np.nan, 0.0])
    empty = errorbars([], [], [])
    constant = errorbars([0], [2.0], [0.5])
    for eb, tables in ((nan, (_table(groups),)), (empty, ()), (constant, (table_of(c=[2.0, 2.0, 2.0]),))):
        assert hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=tables)) == []
    masked = table_of(a=np.ma.masked_array([1.0, 2.0, 3.0, 100.0], mask=[0, 0, 0, 1]).filled(np.nan))
    eb = errorbars([0], [2.0], [stats.sem([1.0, 2.0, 3.0])])
    assert "shows ±1 SEM (n = 3)" in hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(masked,)))[0].message
    big = rng.normal(5, 1, 10**6)
    eb = errorbars([0], [big.mean()], [np.std(big, ddof=1)])
    assert "SD" in hits(errorbars_ambiguous, figure(axes(errorbars=[eb]), tables=(table_of(v=big),)))[0].message


def test_raw_values_from_a_recorded_plot_call() -> None:
    # the observations were drawn with ax.plot(x, y, "o") in another axes; the call's arrays still count
    rng = np.random.default_rng(38)
    g = rng.normal(3, 1, 8)
    eb = errorbars([0], [g.mean()], [np.std(g, ddof=1)])
    fig = figure(axes(errorbars=[eb]), calls=(call_of("plot", axes=None, arg0=np.zeros(8), arg1=g),))
    assert hits(errorbars_ambiguous, fig)[0].message == "error bars: the one shows ±1 SD (ddof 1) (n = 8)"
    # sizes of a scatter call are not observations
    fig = figure(axes(errorbars=[eb]), calls=(call_of("scatter", x=np.zeros(8), y=np.ones(8), s=g),))
    assert hits(errorbars_ambiguous, fig) == []


def test_importing_rules_does_not_import_pyplot() -> None:
    import subprocess
    import sys

    code = "import sys, figproof.rules.distribution, figproof.science.dip; print('matplotlib.pyplot' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"


def test_messages_name_groups_by_their_tick_labels() -> None:
    from figproof.model.records import Axis
    from figproof.rules._observations import group_label, where

    ax = axes()
    ax = type(ax)(index=0, x=Axis(ticks=((1.0, "wild type"), (2.0, "2"))), y=ax.y)
    assert where(True, 1.0, ax) == "x = 1 ('wild type')"
    assert group_label(ax, True, 2.0) is None  # a label that only repeats the position adds nothing
    assert where(True, 3.0, ax) == "x = 3"

"""bars-for-continuous on hand-built models."""

from __future__ import annotations

import numpy as np

from figproof.rules.bars import bars_for_continuous as rule
from tests import builders as b

KNOBS = rule.defaults()


def hits(fig: b.FigureModel) -> list:
    return list(rule.check(fig, KNOBS))


def test_means_with_error_bars_on_tops_are_likely() -> None:
    heights = [4.21, 5.13, 3.87]
    fig = b.figure(b.axes(ylabel="leaf area (cm²)", bars=[b.bars(heights)],
                          errorbars=[b.errorbars([0, 1, 2], heights, [0.3, 0.4, 0.2])]))
    [hit] = hits(fig)
    assert hit.confidence == "likely" and hit.severity is None
    assert "3 bars" in hit.message and "3 carry error bars centred on their tops" in hit.message
    assert "whole numbers" not in hit.message  # the weak evidence is named only when it is all there is


def test_error_bars_elsewhere_do_not_count() -> None:
    fig = b.figure(b.axes(bars=[b.bars([4.2, 5.1])], errorbars=[b.errorbars([0, 1], [9.0, 9.0], [0.3, 0.4])]))
    [hit] = hits(fig)
    assert hit.confidence == "possible" and hit.severity == "note"


def test_counts_are_fine() -> None:
    # common practice (no source): bars suit counts, whole-number heights from a baseline of zero
    assert hits(b.figure(b.axes(bars=[b.bars([12, 7, 30])]))) == []


def test_count_and_share_labels_are_fine() -> None:
    # common practice (no source): bars suit proportions; the value-axis label says what the bars are
    for label in ("fraction germinated", "Percent of cells", "proportion alive", "Frequency", "number of nests"):
        assert hits(b.figure(b.axes(ylabel=label, bars=[b.bars([0.31, 0.52])]))) == [], label


def test_histograms_are_fine() -> None:
    assert hits(b.figure(b.axes(bars=[b.bars([0.1, 0.4, 0.3], origin="hist")]))) == []
    # adjacent equal-width bins with no gaps, drawn with ax.bar
    adjacent = b.bars([0.12, 0.45, 0.33, 0.1], positions=[0.5, 1.5, 2.5, 3.5], width=1.0)
    assert hits(b.figure(b.axes(bars=[adjacent]))) == []


def test_stacks_summing_to_100_are_shares() -> None:
    lower = b.bars([35.5, 60.25])
    upper = b.bars([64.5, 39.75], bottoms=[35.5, 60.25])
    assert hits(b.figure(b.axes(bars=[lower, upper]))) == []


def test_heights_equal_to_group_means_of_loaded_data_are_certain() -> None:
    values = np.array([1.2, 2.3, 1.9, 3.4, 2.8, 3.9])
    groups = np.array([0, 0, 0, 1, 1, 1])
    means = [values[groups == g].mean() for g in (0, 1)]
    table = b.LoadedTable(path="data/growth.csv", reader="pandas.read_csv", columns={"rate": values},
                          groups={"strain": groups})
    [hit] = hits(b.figure(b.axes(bars=[b.bars(means)]), tables=(table,)))
    assert hit.confidence == "certain"
    assert "'rate' by 'strain' in data/growth.csv" in hit.message


def test_heights_equal_to_means_of_aggregated_groups_are_certain() -> None:
    groups = [np.array([5.9, 6.4, 5.1, 6.8]), np.array([7.7, 8.4, 7.1, 8.9])]
    samples = tuple(b.Sample(values=g, origin="seaborn-estimate") for g in groups)
    [hit] = hits(b.figure(b.axes(bars=[b.bars([g.mean() for g in groups], origin="seaborn")]), samples=samples))
    assert hit.confidence == "certain" and "(n = 4, 4)" in hit.message


def test_seaborn_barplot_is_an_estimate() -> None:
    [hit] = hits(b.figure(b.axes(bars=[b.bars([2.5, 3.25], origin="seaborn")])))
    assert hit.confidence == "likely" and "seaborn" in hit.message


def test_seaborn_bars_of_one_value_each_are_those_values() -> None:
    # seaborn's barplot of one row per category (a rate per state): the mean of one value is that value
    rates = [18.8, 18.1, 18.6]
    samples = tuple(b.Sample(values=np.array([r]), origin="seaborn-estimate") for r in rates)
    assert hits(b.figure(b.axes(bars=[b.bars(rates, origin="seaborn")]), samples=samples)) == []
    # one group of several values among them: a summary again
    mixed = (*samples[:2], b.Sample(values=np.array([17.9, 19.3]), origin="seaborn-estimate"))
    assert hits(b.figure(b.axes(bars=[b.bars(rates, origin="seaborn")]), samples=mixed))


def test_grouped_bars_are_one_finding() -> None:
    """Bars drawn as one set per group (a hue level) are one chart: one finding counting all bars."""
    first, second = [4.21, 5.13], [3.87, 6.02]
    fig = b.figure(b.axes(bars=[b.bars(first, positions=[-0.2, 0.8]), b.bars(second, positions=[0.2, 1.2])],
                          errorbars=[b.errorbars([-0.2, 0.8, 0.2, 1.2], first + second, [0.3] * 4)]))
    [hit] = hits(fig)
    assert "4 bars in 2 groups" in hit.message and "4 carry error bars" in hit.message


def test_single_measurements_stay_a_note() -> None:
    [hit] = hits(b.figure(b.axes(bars=[b.bars([2.5, 3.25, 1.75])])))
    assert hit.severity == "note" and hit.confidence == "possible"


def test_odd_input_does_not_crash() -> None:
    empty = b.bars([])
    nan = b.bars([float("nan"), float("nan")])
    polar = b.Axes(index=0, projection="polar", bars=(b.bars([1.5, 2.5]),))
    assert hits(b.figure(b.axes(bars=[empty, nan]), )) == []
    assert hits(b.figure(polar)) == []

"""axis-clips-data and axis-empty-span on hand-built models."""

from __future__ import annotations

import numpy as np
import pytest

from figproof.model.findings import Hit
from figproof.model.records import Axes, Violin
from figproof.rules.axes import axis_clips_data, axis_empty_span
from tests.builders import (
    Axis,
    ErrorBars,
    Line,
    axes,
    axes_with,
    bars,
    box,
    errorbars,
    figure,
    line,
    patch,
    points,
    text,
)

# the 24 root lengths of the rule's Bad example: 9 of them exceed 40
LENGTHS = np.array([22, 25, 28, 31, 34, 37, 41, 44, 26, 29, 32, 35, 38, 42, 45, 48,
                    30, 33, 36, 39, 43, 46, 49, 52], dtype=float)
REGIMES = np.repeat([1.0, 2.0, 3.0], 8)


def clips(*axs: Axes, **knobs: float) -> list[Hit]:
    return list(axis_clips_data.check(figure(*axs), {**axis_clips_data.defaults(), **knobs}))


def empty(*axs: Axes, **knobs: float) -> list[Hit]:
    return list(axis_empty_span.check(figure(*axs), {**axis_empty_span.defaults(), **knobs}))


# --------------------------------------------------------------------------
# axis-clips-data
# --------------------------------------------------------------------------


def test_points_above_the_y_limit_are_counted_with_the_limit() -> None:
    ax = axes(xlim=(0.9, 3.1), ylim=(20, 40), points=[points(REGIMES, LENGTHS, xlim=(0.9, 3.1), ylim=(20, 40))])
    (hit,) = clips(ax)
    assert int((LENGTHS > 40).sum()) == 9  # independent count of the fixture
    assert hit.message == "9 of 24 points (38%) lie above the y-limit 40 and are not drawn"
    assert hit.axes == 0 and hit.severity is None and hit.source is not None


def test_values_on_a_limit_are_drawn() -> None:
    # autoscaling with margins(0) puts the extreme values exactly on the limits
    ax = axes(xlim=(1, 3), ylim=(22, 52), points=[points(REGIMES, LENGTHS, xlim=(1, 3), ylim=(22, 52))])
    assert clips(ax) == []


def test_inverted_axis_names_the_side_the_reader_sees() -> None:
    # an inverted y-axis (depth below the surface) draws values beyond the upper limit at the bottom
    ax = axes_with(Axis(lim=(0.9, 3.1)), Axis(lim=(40.0, 20.0), inverted=True),
                   points=[points(REGIMES, LENGTHS)])
    (hit,) = clips(ax)
    assert hit.message == "9 of 24 points (38%) lie below the y-limit 40 and are not drawn"


def test_values_at_or_below_zero_on_a_log_axis_count_as_hidden() -> None:
    # matplotlib's LogScale masks non-positive values (nonpositive="mask"): they are never drawn
    y = np.array([0.0, -1.0, 0.5, 3.0, 20.0, 150.0])
    ax = axes_with(Axis(lim=(-0.5, 5.5)), Axis(lim=(0.1, 1000.0), scale="log"),
                   points=[points(np.arange(6), y)])
    (hit,) = clips(ax)
    assert hit.message == "2 of 6 points (33%) have y <= 0 and are not drawn on the log-scaled y-axis"


def test_several_sides_are_listed_largest_first() -> None:
    x = np.array([-1.0, 0.5, 0.5, 0.5, 2.0, 0.5])
    y = np.array([0.5, 1.5, 1.2, 0.5, 0.5, 0.5])
    (hit,) = clips(axes(points=[points(x, y)]))
    assert hit.message == ("4 of 6 points (67%) lie outside the view limits and are not drawn "
                           "(2 above the y-limit 1, 1 left of the x-limit 0, 1 right of the x-limit 1)")


def test_missing_values_are_not_counted() -> None:
    # masked arrays reach the model as NaN (the extractor fills them); matplotlib does not draw them
    y = np.ma.masked_greater(np.array([0.2, 5.0, 0.4, np.nan]), 1.0).filled(np.nan)
    assert clips(axes(points=[points([0.1, 0.2, 0.3, 0.4], y)])) == []


@pytest.mark.parametrize("x, y", [([], []), ([np.nan, np.nan], [np.nan, np.nan]), ([0.5], [0.5])])
def test_empty_all_nan_and_single_point_give_nothing(x: list[float], y: list[float]) -> None:
    assert clips(axes(points=[points(x, y)])) == []


def test_a_single_point_outside_is_counted_in_the_singular() -> None:
    (hit,) = clips(axes(points=[points([0.5], [3.0])]))
    assert hit.message == "1 of 1 point (100%) lies above the y-limit 1 and is not drawn"


def test_bar_tops_above_the_limit_and_zero_bars_on_a_log_axis() -> None:
    (hit,) = clips(axes(xlim=(-0.5, 3.5), ylim=(0, 10), bars=[bars([4.0, 12.0, 9.0, 15.0])]))
    assert hit.message == "2 of 4 bar tops (50%) lie above the y-limit 10 and are not drawn"
    # empty histogram bins (height 0) on a log axis draw nothing: nothing was cut off
    hist = bars([0.0, 3.0, 0.0, 8.0], origin="hist")
    assert clips(axes_with(Axis(lim=(-0.5, 3.5)), Axis(lim=(0.5, 20.0), scale="log"), bars=[hist])) == []


def test_horizontal_bars_are_judged_along_x() -> None:
    hb = bars([4.0, 12.0], orientation="horizontal")
    (hit,) = clips(axes(xlim=(0, 10), ylim=(-0.5, 1.5), bars=[hb]))
    assert hit.message == "1 of 2 bar tops (50%) lies right of the x-limit 10 and is not drawn"


def test_error_bar_ends_below_zero_on_a_log_axis() -> None:
    eb = errorbars([0, 1, 2], [2.0, 5.0, 1.0], [3.0, 1.0, 0.5])  # lower ends -1, 4, 0.5
    (hit,) = clips(axes_with(Axis(lim=(-0.5, 2.5)), Axis(lim=(0.1, 10.0), scale="log"), errorbars=[eb]))
    assert hit.message == "1 of 6 error-bar ends (17%) has y <= 0 and is not drawn on the log-scaled y-axis"


def test_box_whiskers_and_outliers_beyond_the_limit() -> None:
    b = box(0.0, [1.0, 2.0, 3.0, 4.0, 6.0, 9.0, 11.0])
    (hit,) = clips(axes(xlim=(-0.5, 0.5), ylim=(0, 8), boxes=[b]))
    assert hit.message.startswith("2 of 4 box-plot whisker ends and outliers (50%) lie above the y-limit 8")


def test_reference_lines_colorbars_and_polar_axes_are_ignored() -> None:
    ref = Line(x=np.array([0.0, 1.0]), y=np.array([50.0, 50.0]), role="reference")
    assert clips(axes(ylim=(0, 1), lines=[ref])) == []
    outside = points([0.5], [9.0])
    assert clips(axes_with(Axis(), Axis(), is_colorbar=True, points=[outside])) == []
    assert clips(axes_with(Axis(), Axis(), projection="polar", points=[outside])) == []
    assert clips(axes_with(Axis(), Axis(), projection="3d", points=[outside])) == []


def test_line_markers_are_not_counted_twice() -> None:
    x, y = [0.2, 0.4, 0.6], [0.5, 1.5, 0.5]
    ln = line(x, y, marker="o")
    markers = points(x, y, kind="line")
    hits = clips(axes(lines=[ln], points=[markers]))
    assert [h.message for h in hits] == ["1 of 3 points along the lines (33%) lies above the y-limit 1 and is not drawn"]


def test_marker_only_lines_count_as_points() -> None:
    ln = line([0.2, 0.4], [0.5, 2.0], linestyle="None", marker="o")
    (hit,) = clips(axes(lines=[ln]))
    assert hit.message.startswith("1 of 2 points (50%)")


def test_a_time_series_cut_only_along_x_is_a_window() -> None:
    t = np.linspace(0, 10, 11)
    ln = line(t, np.sin(t) * 0.4 + 0.5)
    assert clips(axes(xlim=(2, 8), ylim=(0, 1), lines=[ln])) == []
    # the same line cut along y as well stays an error of the rule's default severity
    (hit,) = clips(axes(xlim=(2, 8), ylim=(0, 0.6), lines=[ln]))
    assert hit.severity is None


def test_min_count_knob() -> None:
    ax = axes(points=[points([0.5, 0.6], [0.5, 1.5])])
    assert len(clips(ax)) == 1
    assert clips(ax, min_count=2) == []


# --------------------------------------------------------------------------
# axis-empty-span
# --------------------------------------------------------------------------


def _autoscaled_limits(values: np.ndarray, *, yscale: str = "linear", invert: bool = False) -> tuple[float, float]:
    """The y-limits matplotlib itself chooses for a scatter of ``values`` (reference library, no pyplot)."""
    from matplotlib.figure import Figure

    fig = Figure()
    ax = fig.add_subplot()
    ax.scatter(np.arange(values.size), values)
    ax.set_yscale(yscale)
    if invert:
        ax.invert_yaxis()
    ax.autoscale_view()
    lo, hi = ax.get_ylim()
    return float(lo), float(hi)


@pytest.mark.parametrize("yscale, invert", [("linear", False), ("log", False), ("linear", True)])
def test_default_autoscaling_leaves_about_nine_percent(yscale: str, invert: bool) -> None:
    # matplotlib documentation, rcParams axes.ymargin = 0.05: the data interval is padded by 5% on each
    # side, so 0.1 / 1.1 = 9.1% of the axis is empty, in axes-fraction (scaled) coordinates
    values = np.array([3.0, 4.5, 7.0, 12.0, 30.0])
    lim = _autoscaled_limits(values, yscale=yscale, invert=invert)
    ax = axes_with(Axis(lim=(-0.5, 4.5)), Axis(lim=lim, scale=yscale, inverted=invert),
                   points=[points(np.arange(5), values)])
    assert empty(ax) == []  # 9% is far below the 50% default
    (hit,) = empty(ax, max_empty_share=0.09)
    assert hit.message.startswith("9% of the y-axis has no data")


def test_zero_forced_into_the_limits_is_likely() -> None:
    cold = np.array([88.0, 90.5, 91.0, 92.5, 93.0, 94.5])
    ax = axes(xlim=(-0.5, 0.5), ylim=(0, 100), points=[points(np.zeros(6), cold, ylim=(0, 100))])
    (hit,) = empty(ax)
    # hand count: data span 88-94.5 in 0-100 leaves 88% + 5.5% = 93.5% empty
    assert hit.message == ("94% of the y-axis has no data, most of it between the data and zero: "
                           "the values span 88 to 94.5 within limits 0 to 100")
    assert hit.confidence == "likely" and hit.severity is None and hit.key == "y-axis"


def test_wide_limits_without_zero_are_possible() -> None:
    ax = axes(xlim=(-0.5, 0.5), ylim=(50, 200), points=[points([0, 0, 0], [90.0, 95.0, 100.0])])
    (hit,) = empty(ax)
    assert hit.confidence is None  # the rule's default, possible
    # hand count: 10 of 150 units hold data, 93% are empty
    assert hit.message.startswith("93% of the y-axis has no data: the values span 90 to 100")


def test_a_reference_line_or_annotation_in_the_gap_lowers_it_to_a_note() -> None:
    pts = points(np.zeros(3), [88.0, 91.0, 94.0], ylim=(0, 100))
    zero = Line(x=np.array([0.0, 1.0]), y=np.array([0.0, 0.0]), role="reference")
    (hit,) = empty(axes(ylim=(0, 100), points=[pts], lines=[zero]))
    assert hit.severity == "note" and "a reference line at 0 lies in the empty part" in hit.message
    # an annotation placed in the empty band (display y 100-110 px of 52.8-422.4)
    (hit,) = empty(axes(ylim=(0, 100), points=[pts], texts=[text("detection limit", (100, 100, 200, 110))]))
    assert hit.severity == "note"
    # a reference line among the data does not explain the gap
    mid = Line(x=np.array([0.0, 1.0]), y=np.array([91.0, 91.0]), role="reference")
    (hit,) = empty(axes(ylim=(0, 100), points=[pts], lines=[mid]))
    assert hit.severity is None


def test_bars_images_and_odd_axes_are_skipped() -> None:
    pts = points([0, 1], [88.0, 94.0])
    assert empty(axes(ylim=(0, 100), points=[pts], bars=[bars([90.0, 92.0])])) == []
    assert empty(axes_with(Axis(), Axis(lim=(0, 100)), projection="polar", points=[pts])) == []
    assert empty(axes_with(Axis(), Axis(lim=(0, 100)), is_colorbar=True, points=[pts])) == []
    assert empty(axes_with(Axis(), Axis(lim=(0, 100), scale="symlog"), points=[pts])) == []


@pytest.mark.parametrize("y", [[], [np.nan, np.nan], [50.0], [50.0, 50.0, 50.0]])
def test_empty_nan_single_and_constant_values_give_nothing(y: list[float]) -> None:
    assert empty(axes(ylim=(0, 100), points=[points(np.zeros(len(y)), y)])) == []


def test_horizontal_boxes_use_x_as_the_value_axis() -> None:
    b = box(0.0, [40.0, 42.0, 44.0, 46.0, 48.0], orientation="horizontal")
    (hit,) = empty(axes(xlim=(0, 50), ylim=(-0.5, 0.5), boxes=[b]))
    assert hit.message.startswith("84% of the x-axis has no data, most of it between the data and zero")
    # the same box vertical, judged along y, whose limits hug it
    v = box(0.0, [40.0, 42.0, 44.0, 46.0, 48.0])
    assert empty(axes(xlim=(0, 50), ylim=(39.6, 48.4), boxes=[v])) == []


def test_categorical_y_makes_x_the_value_axis() -> None:
    pts = points([10.0, 11.0, 12.0], [0.0, 1.0, 2.0])
    ax = axes_with(Axis(lim=(0.0, 100.0)), Axis(lim=(-0.5, 2.5), categorical=True), points=[pts])
    (hit,) = empty(ax)
    assert hit.key == "x-axis"


def test_log_value_axis_uses_decades() -> None:
    # 10 to 20 on a 0.1-1000 log axis: log10 span 0.301 of 4 decades -> 92.5% empty
    pts = points([0, 1], [10.0, 20.0])
    (hit,) = empty(axes_with(Axis(lim=(-0.5, 1.5)), Axis(lim=(0.1, 1000.0), scale="log"), points=[pts]))
    assert hit.message.startswith("92% of the y-axis has no data: the values span 10 to 20")


def test_error_bars_violins_and_fills_count_as_data() -> None:
    pts = points([0, 1], [88.0, 94.0], ylim=(0, 100))
    eb = ErrorBars(positions=np.array([0.0, 1.0]), centers=np.array([88.0, 94.0]), lower=np.array([2.0, 10.0]),
                   upper=np.array([95.0, 99.0]))
    assert empty(axes(ylim=(0, 100), points=[pts], errorbars=[eb])) == []
    vio = Violin(position=0.0, low=5.0, high=98.0)
    assert empty(axes(ylim=(0, 100), points=[pts], violins=[vio])) == []
    # a fill_between band down to zero: display box from y=52.8 (value 0) up to the data
    band = patch("fill", (80, 52.8, 576, 400), face=(0.1, 0.4, 0.7, 0.3))
    assert empty(axes(ylim=(0, 100), points=[pts], patches=[band])) == []


def test_rule_records_are_complete() -> None:
    for r in (axis_clips_data, axis_empty_span):
        assert r.why and r.fix and r.sources and r.bad.strip() and r.good.strip()
        assert "import matplotlib.pyplot as plt" in r.bad and "savefig" in r.good


def test_a_shaded_span_in_the_gap_lowers_it_but_a_full_height_background_does_not() -> None:
    pts = points(np.zeros(3), [88.0, 91.0, 94.0], ylim=(0, 100))
    # axhspan(0, 10): display y 52.8 to 89.76 px of the 52.8-422.4 px axes box
    low = patch("rectangle", (80, 52.8, 576, 89.76), face=(0.8, 0.8, 0.8, 0.5))
    (hit,) = empty(axes(ylim=(0, 100), points=[pts], patches=[low]))
    assert hit.severity == "note" and "a shaded span" in hit.message
    full = patch("rectangle", (80, 52.8, 576, 422.4), face=(0.8, 0.8, 0.8, 0.5))
    (hit,) = empty(axes(ylim=(0, 100), points=[pts], patches=[full]))
    assert hit.severity is None


def test_logit_axis_fractions_round_trip() -> None:
    # 0.5 sits in the middle of a logit axis from 0.1 to 0.9 (log10(p / (1 - p)) is symmetric about 0.5)
    from figproof.rules.axes import _fraction, _from_fraction

    axis = Axis(lim=(0.1, 0.9), scale="logit")
    f = _fraction(np.array([0.1, 0.5, 0.9, 0.0, 1.0]), axis)
    assert f[:3] == pytest.approx([0.0, 0.5, 1.0])
    assert np.isnan(f[3:]).all()
    # a quarter of the way: odds the geometric mean of 1/9 and 1, i.e. 1/3, so p = 0.25
    assert _from_fraction(0.25, axis) == pytest.approx(0.25)


def test_bars_whose_baseline_is_cut_off_are_found() -> None:
    # common practice (no source): a bar encodes its value by its length from the baseline, so a value axis
    # that starts above the baseline makes the bars' lengths misleading
    cut = axes(xlim=(-1, 4), ylim=(400, 700), bars=[bars([480.0, 615.0, 502.0, 640.0])])
    [hit] = clips(cut)
    assert hit.message == "4 of 4 bar baselines (100%) lie below the y-limit 400 and are not drawn"
    assert clips(axes(xlim=(-1, 2), ylim=(0, 700), bars=[bars([480.0, 615.0])])) == []
    # on a log axis the baseline 0 cannot be drawn at all: not a finding
    assert clips(axes(xlim=(-1, 2), ylim=(1, 1000), yscale="log", bars=[bars([48.0, 615.0])])) == []


def test_limits_the_script_set_alike_on_several_panels_are_one_scale() -> None:
    # g.set(ylim=(0, 25)) on a grid: each panel keeps the common scale, so the empty part is the point
    def panel(index: int, autoscaled: bool = False) -> Axes:
        pts = points(np.zeros(3), [1.6, 5.0, 10.0], ylim=(0, 25))
        return axes_with(Axis(), Axis(lim=(0.0, 25.0), autoscaled=autoscaled), index=index, points=[pts])
    assert empty(panel(0), panel(1)) == []
    # set on one panel only, or the other panel's limits chosen by matplotlib: judged on its own
    assert empty(panel(0))
    assert empty(panel(0), panel(1, autoscaled=True))

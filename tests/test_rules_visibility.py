"""points-hidden on hand-built models, checked against matplotlib's marker geometry and scipy/brute force."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from figproof.model.findings import Hit
from figproof.model.records import Axes
from figproof.rules.visibility import marker_radius_px, overlap, point_set_problems, points_hidden
from tests.builders import Axis, axes_with, bars_px, figure, patch, points_px

BOX = (0.0, 0.0, 1000.0, 1000.0)


def hits(*axs: Axes, dpi: float = 72.0, **knobs: float) -> list[Hit]:
    """Each problem of each point set, before the rule groups them into one finding per axes."""
    fig = figure(*axs, dpi=dpi)
    grouped = list(points_hidden.check(fig, {**points_hidden.defaults(), **knobs}))
    found = [h for h in grouped if len(h.details) <= 1]
    for h in grouped:
        if len(h.details) > 1:
            ax = fig.axes[h.axes]
            k = {**points_hidden.defaults(), **knobs}
            found += [p for i, ps in enumerate(ax.points) for p in point_set_problems(ax, i, ps, fig, k, dpi)]
    return found


def ax_of(*point_sets, **fields) -> Axes:
    return axes_with(Axis(lim=(0, 1000)), Axis(lim=(0, 1000)), box=BOX, points=list(point_sets), **fields)


def by_key(found: list[Hit]) -> dict[str, Hit]:
    return {h.key.rsplit(":", 1)[1]: h for h in found}


# --------------------------------------------------------------------------
# geometry against the reference libraries
# --------------------------------------------------------------------------


def test_marker_radius_follows_matplotlib_size_semantics() -> None:
    # matplotlib documentation, Axes.scatter: s is the marker area in points**2; 72 points per inch
    assert marker_radius_px(np.array([36.0]), 72.0)[0] == pytest.approx(3.0)
    assert marker_radius_px(np.array([36.0]), 144.0)[0] == pytest.approx(6.0)
    assert marker_radius_px(np.array([-1.0, np.nan, 0.0]), 100.0).tolist() == [0.0, 0.0, 0.0]


def test_marker_radius_matches_a_rendered_matplotlib_marker() -> None:
    # reference library: render one filled circle with matplotlib's Agg backend (no pyplot) and measure
    # the dark area, which must be pi * r**2 for r = 0.5 * sqrt(s) * dpi / 72
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    dpi, s = 100.0, 400.0
    fig = Figure(figsize=(2, 2), dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_axis_off()
    ax.scatter([0.5], [0.5], s=s, c="black", linewidths=0)
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    fig.canvas.draw()
    gray = np.asarray(fig.canvas.buffer_rgba())[..., :3].mean(axis=2)
    area = float((gray < 128).sum())
    r = marker_radius_px(np.array([s]), dpi)[0]
    assert area == pytest.approx(math.pi * r * r, rel=0.03)


def test_nearest_neighbour_flags_match_a_brute_force_distance_matrix() -> None:
    # reference: the full pairwise distance matrix (what scipy cKDTree.query(k=2) must reproduce)
    rng = np.random.default_rng(3)
    px, py = rng.uniform(0, 200, 300), rng.uniform(0, 200, 300)
    px[:5] = px[5:10] + 0.2  # a few near-duplicates
    py[:5] = py[5:10]
    radius = rng.uniform(1.0, 6.0, 300)
    ov = overlap(px, py, radius)
    d = np.hypot(px[:, None] - px[None, :], py[:, None] - py[None, :])
    np.fill_diagonal(d, np.inf)
    j = d.argmin(axis=1)
    near = d[np.arange(300), j]
    assert ov.exact
    assert np.array_equal(ov.hidden, near < np.maximum(radius, radius[j]))
    assert np.array_equal(ov.duplicate, near < 0.5)
    assert ov.duplicate.sum() >= 10


def test_grid_estimate_agrees_with_the_exact_count_on_random_points() -> None:
    # for points scattered at random (a Poisson process), P(nearest neighbour < r) = 1 - exp(-density*pi*r^2)
    # (the nearest-neighbour distribution of a Poisson pattern, whose mean 1/(2*sqrt(density)) is Clark & Evans
    # 1954, Ecology 35: 445-453); a grid with cells of area pi*r^2 flags the same expected share
    rng = np.random.default_rng(11)
    n, side, r = 50_000, 2000.0, 3.0
    px, py = rng.uniform(0, side, n), rng.uniform(0, side, n)
    radius = np.full(n, r)
    exact = overlap(px, py, radius).hidden.mean()
    grid = overlap(px, py, radius, grid_above=1000).hidden.mean()
    theory = 1 - math.exp(-n / side**2 * math.pi * r * r)
    assert exact == pytest.approx(theory, abs=0.01)
    assert grid == pytest.approx(exact, abs=0.03)


# --------------------------------------------------------------------------
# overlap thresholds
# --------------------------------------------------------------------------


def _pairs(n_pairs: int, n_single: int, gap: float) -> tuple[np.ndarray, np.ndarray]:
    """n_pairs of markers ``gap`` px apart and n_single isolated ones, all 50 px apart from each other."""
    x = [50.0 * (i % 18) + 50 for i in range(n_pairs + n_single)]
    y = [50.0 * (i // 18) + 50 for i in range(n_pairs + n_single)]
    px = np.array(x + [x[i] + gap for i in range(n_pairs)])
    py = np.array(y + [y[i] for i in range(n_pairs)])
    return px, py


def test_a_few_overlaps_raise_nothing() -> None:
    px, py = _pairs(5, 90, 2.0)  # 10 of 100 hidden (radius 3 px at dpi 72, s=36)
    assert hits(ax_of(points_px(px, py))) == []


def test_four_in_ten_hidden_is_a_warning() -> None:
    px, py = _pairs(22, 56, 1.0)  # 44 of 100, 1 px apart: under half the 3 px radius
    (hit,) = hits(ax_of(points_px(px, py)))
    assert hit.severity is None and hit.confidence == "certain"
    assert hit.message == ("44 of 100 markers (44%) sit almost on top of a neighbour (centres closer than half "
                           "the marker radius, 1.5 px), so readers cannot count them")


def test_markers_a_radius_apart_are_both_seen() -> None:
    # equal discs a radius apart overlap by about 39% of their area (circle-circle intersection,
    # 2 acos(1/2) - sqrt(3)/2 over pi): both are seen and counted; half a radius apart, about 68%
    px, py = _pairs(30, 40, 2.5)
    assert hits(ax_of(points_px(px, py))) == []


def test_half_hidden_is_an_error() -> None:
    px, py = _pairs(30, 40, 1.0)  # 60 of 100
    (hit,) = hits(ax_of(points_px(px, py)))
    assert hit.severity == "error" and hit.message.startswith("60 of 100 markers (60%)")


def test_a_quarter_duplicates_is_an_error() -> None:
    px, py = _pairs(13, 74, 0.0)  # 26 of 100 sit exactly on another marker
    (hit,) = hits(ax_of(points_px(px, py)))
    assert hit.severity == "error" and "26 of them drawn on exactly the same spot" in hit.message
    # a few exact ties (values measured to 0.1 mm) leave the rest of the cloud countable
    assert hits(ax_of(points_px(*_pairs(6, 88, 0.0)))) == []


def test_larger_markers_or_dpi_hide_more() -> None:
    px, py = _pairs(30, 40, 2.5)
    assert hits(ax_of(points_px(px, py)), dpi=72) == []  # half the 3 px radius < 2.5 px gap
    assert hits(ax_of(points_px(px, py)), dpi=144)[0].severity == "error"  # radius 6 px, half of it 3 px
    # s = 100: half the radius exactly 2.5 px, not closer than the gap; s = 121: 2.75 px
    assert hits(ax_of(points_px(px, py, size=[100.0])), dpi=72) == []
    assert hits(ax_of(points_px(px, py, size=[121.0])), dpi=72)[0].severity == "error"
    # per-point sizes: the larger radius of the pair decides
    sizes = np.full(px.size, 4.0)
    sizes[-30:] = 144.0  # the second marker of each pair: radius 6 px
    assert hits(ax_of(points_px(px, py, size=sizes)), dpi=72)[0].severity == "error"


# --------------------------------------------------------------------------
# covered by bars, shapes, the legend
# --------------------------------------------------------------------------


def _row(n: int = 40) -> tuple[np.ndarray, np.ndarray]:
    return np.linspace(20, 980, n), np.full(n, 100.0)


def test_points_under_bars_drawn_later_are_covered() -> None:
    px, py = _row()  # 40 points 24.6 px apart; the bar covers x 0-200 -> 8 points
    pts = points_px(px, py, zorder=1.0, draw_order=0)
    later = bars_px([(0, 0, 200, 300)], zorder=1.0, draw_order=1)
    (hit,) = hits(ax_of(pts, bars=[later]))
    inside = int(((px - 3 >= 0) & (px + 3 <= 200)).sum())
    assert hit.message == f"{inside} of 40 markers ({100 * inside / 40:.0f}%) are covered ({inside} under opaque " \
                          "bars or shapes drawn later)"
    assert hit.severity == "error"  # >= 5%


def test_bars_drawn_first_or_translucent_do_not_cover() -> None:
    px, py = _row()
    pts = points_px(px, py, zorder=1.0, draw_order=2)
    assert hits(ax_of(pts, bars=[bars_px([(0, 0, 200, 300)], draw_order=1)])) == []
    assert hits(ax_of(pts, bars=[bars_px([(0, 0, 200, 300)], color=(0.5, 0.5, 0.5, 0.5), zorder=3)])) == []
    # equal z-order and unknown draw order: we cannot tell, so we do not claim it
    unknown = points_px(px, py)
    assert hits(ax_of(unknown, bars=[bars_px([(0, 0, 200, 300)])])) == []
    # a higher z-order needs no draw order
    assert len(hits(ax_of(unknown, bars=[bars_px([(0, 0, 200, 300)], zorder=2.0)]))) == 1


def test_opaque_patches_count_but_legend_frames_in_patches_do_not_double_count() -> None:
    px, py = _row()
    pts = points_px(px, py)
    shape = patch("polygon", (0, 0, 200, 300), zorder=2.0)
    (hit,) = hits(ax_of(pts, patches=[shape]))
    assert "under opaque bars or shapes" in hit.message
    frame = patch("legend", (0, 0, 200, 300), face=(1, 1, 1, 0.8), zorder=5.0)
    assert hits(ax_of(pts, patches=[frame])) == []  # only legend_box stands for the legend


def test_points_under_the_legend() -> None:
    px, py = _row(100)
    pts = points_px(px, py)
    # one marker under the legend: a warning (any), 1% < 5%
    legend_one = (px[50] - 5, 90.0, px[50] + 5, 110.0)
    (hit,) = hits(ax_of(pts, legend_box=legend_one))
    assert hit.message == "1 of 100 markers (1%) are covered (1 under the legend)" and hit.severity is None
    (hit,) = hits(ax_of(pts, legend_box=(0.0, 0.0, 300.0, 200.0)))
    assert hit.severity == "error"


def test_a_marker_half_under_a_bar_still_shows() -> None:
    pts = points_px([198.0, 500.0], [100.0, 500.0])
    assert hits(ax_of(pts, bars=[bars_px([(0, 0, 200, 300)], zorder=2.0)])) == []


# --------------------------------------------------------------------------
# faint markers
# --------------------------------------------------------------------------


def test_nearly_transparent_isolated_markers_are_faint() -> None:
    px, py = _row()
    (hit,) = hits(ax_of(points_px(px, py, face=(0, 0, 0, 0.03))))
    assert hit.message.startswith("40 of 40 markers (100%) are nearly invisible")
    assert hit.severity is None and "opacity 0.03" in hit.message


def test_faint_markers_that_pile_up_are_not_faint() -> None:
    # 500 markers with alpha 0.3 in a 100 px blob: stacked, they build a visible density (each centre lies
    # under about 1 + 500 * pi * 3**2 / 100**2 = 2.4 markers: 1 - 0.7**2.4 = 58% opaque, short of saturation)
    rng = np.random.default_rng(5)
    pts = points_px(rng.uniform(500, 600, 500), rng.uniform(500, 600, 500), face=(0, 0, 0, 0.3))
    found = by_key(hits(ax_of(pts)))
    # drawn see-through, the pile shows its density: not reported (common practice)
    assert "faint" not in found and "overlap" not in found
    # the same markers in a 10 px blob: about 140 deep, the stack is saturated and hides how many there are
    # (1 - 0.7**7 = 92% opaque from 7 markers on)
    deep = points_px(rng.uniform(500, 510, 500), rng.uniform(500, 510, 500), face=(0, 0, 0, 0.3))
    assert by_key(hits(ax_of(deep)))["overlap"].severity == "error"
    opaque = points_px(rng.uniform(500, 510, 500), rng.uniform(500, 510, 500), face=(0, 0, 0, 0.5))
    assert by_key(hits(ax_of(opaque)))["overlap"].severity == "error"


def test_problems_of_one_axes_are_one_finding() -> None:
    px, py = _pairs(22, 56, 1.0)  # 44 of 100 overlap
    faint = points_px([100.0, 900.0], [100.0, 900.0], face=(1, 1, 1, 1))
    (hit,) = points_hidden.check(figure(ax_of(points_px(px, py), faint), dpi=72.0), points_hidden.defaults())
    assert len(hit.details) == 2 and "1 more problem" in hit.message


def test_white_markers_on_white_are_faint_unless_outlined() -> None:
    px, py = _row()
    assert len(hits(ax_of(points_px(px, py, face=(1, 1, 1, 1))))) == 1
    outlined = points_px(px, py, face=(1, 1, 1, 1), edge=(0, 0, 0, 1))
    assert hits(ax_of(outlined)) == []
    # the same white markers over a dark axes face are plainly visible
    assert hits(ax_of(points_px(px, py, face=(1, 1, 1, 1)), facecolor=(0.1, 0.1, 0.1, 1.0))) == []


def test_moderate_transparency_is_fine() -> None:
    px, py = _row()
    assert hits(ax_of(points_px(px, py, face=(0.12, 0.47, 0.71, 0.3)))) == []


# --------------------------------------------------------------------------
# bad input
# --------------------------------------------------------------------------


@pytest.mark.parametrize("px, py", [([], []), ([np.nan] * 3, [np.nan] * 3), ([500.0], [500.0])])
def test_empty_nan_and_single_point(px: list[float], py: list[float]) -> None:
    assert hits(ax_of(points_px(px, py))) == []


def test_points_outside_the_axes_are_left_to_axis_clips_data() -> None:
    px, py = _pairs(30, 40, 0.0)
    assert hits(ax_of(points_px(px + 5000, py))) == []


def test_masked_values_arrive_as_nan_and_are_ignored() -> None:
    px = np.ma.masked_invalid(np.array([100.0, np.inf, 300.0])).filled(np.nan)
    assert hits(ax_of(points_px(px, [100.0, 100.0, 100.0]))) == []


def test_polar_3d_and_colorbar_axes_are_skipped() -> None:
    px, py = _pairs(30, 40, 0.0)
    for fields in ({"projection": "polar"}, {"projection": "3d"}, {"is_colorbar": True}):
        assert hits(ax_of(points_px(px, py), **fields)) == []


def test_odd_dpi_and_missing_sizes_fall_back_to_matplotlib_defaults() -> None:
    # rcParams figure.dpi = 100 and lines.markersize = 6 (s = 36): radius 4.17 px, half of it 2.08 px
    px, py = _pairs(30, 40, 2.0)
    pts = points_px(px, py, size=[])
    assert hits(ax_of(pts), dpi=float("nan"))[0].severity == "error"
    assert hits(ax_of(pts), dpi=0.0)[0].severity == "error"


def test_a_million_points_use_the_grid() -> None:
    rng = np.random.default_rng(1)
    n = 1_000_000
    pts = points_px(rng.uniform(0, 1000, n), rng.uniform(0, 1000, n), size=4.0)
    (hit,) = hits(ax_of(pts))
    assert hit.confidence == "likely" and "sit almost on top of a neighbour" in hit.message
    assert hit.severity == "error"


def test_rule_record_is_complete() -> None:
    assert points_hidden.why and points_hidden.fix and len(points_hidden.sources) >= 3
    assert {k.name for k in points_hidden.knobs} >= {"hidden_warning", "hidden_error", "duplicate_error",
                                                     "covered_error", "grid_above"}
    assert "scatter" in points_hidden.bad and "scatter" in points_hidden.good


# --------------------------------------------------------------------------
# common practice (issue 4): a seaborn-style strip plot is not "hidden"
# --------------------------------------------------------------------------


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_a_default_strip_plot_of_30_per_group_with_median_lines_passes(seed: int) -> None:
    # Common practice (no source): a strip plot with seaborn's defaults and 30 points per group is not hidden
    # at the error level, and a jittered dot plot with a median line passes every rule here.  The defaults
    # are read from seaborn 0.13's source: stripplot size=5 (s = size**2 = 25 points²) and jitter drawn
    # uniformly within ±0.1 of the category spacing; figure 640x480 px at dpi 100 (matplotlib defaults).
    from figproof.rules.axes import axis_clips_data, axis_empty_span
    from tests.builders import BOX, line, to_display

    rng = np.random.default_rng(seed)
    groups = [rng.normal(mu, 2.0, 30) for mu in (10.0, 12.0, 11.0)]
    x = np.concatenate([np.full(30, i) + rng.uniform(-0.1, 0.1, 30) for i in range(3)])
    y = np.concatenate(groups)
    pad = 0.05 * np.ptp(y)  # matplotlib's default axes.ymargin
    xlim, ylim = (-0.5, 2.5), (float(y.min() - pad), float(y.max() + pad))
    px, py = to_display(x, y, xlim, ylim)
    dots = dataclasses.replace(points_px(px, py, size=25.0), x=x, y=y)
    medians = [line([i - 0.3, i + 0.3], [np.median(g)] * 2, xlim=xlim, ylim=ylim) for i, g in enumerate(groups)]
    ax = axes_with(Axis(lim=xlim), Axis(lim=ylim), box=BOX, points=[dots], lines=medians)
    fig = figure(ax, dpi=100.0)
    for r in (points_hidden, axis_clips_data, axis_empty_span):
        found = list(r.check(fig, r.defaults()))
        assert not [h for h in found if (h.severity or r.severity) == "error"], (r.id, found)
    assert list(points_hidden.check(fig, points_hidden.defaults())) == []


@pytest.mark.parametrize("n", [2, 37, 1500, 1501, 4000])
def test_nearest_neighbours_match_scipy_ckdtree(n: int) -> None:
    """Both paths (distance matrix for small sets, k-d tree above) agree with scipy's cKDTree.query(k=2)."""
    from scipy.spatial import cKDTree

    from figproof.rules.visibility import _nearest

    xy = np.random.default_rng(n).uniform(0, 300, (n, 2))
    near, other = _nearest(xy)
    dist, _idx = cKDTree(xy).query(xy, k=2)  # reference: scipy documentation, cKDTree.query
    np.testing.assert_allclose(near, dist[:, 1], rtol=1e-12)
    np.testing.assert_allclose(np.hypot(*(xy - xy[other]).T), dist[:, 1], rtol=1e-12)

"""The pieces of the HTML report on hand-built models: marks, the values behind a summary, the page.

References: scipy.stats.t.interval for the 95 % confidence interval of a mean; numpy.percentile for the
quartiles; html5lib (strict) for the page's structure; the builders' linear data-to-pixel map (as matplotlib
maps linear axes) for where marks belong.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from figproof.model.findings import CheckResult, Finding, Summary
from figproof.model.records import Axes, Axis, BarSet, FigureModel, LoadedTable, Sample, Text
from figproof.report import html
from figproof.report.marks import clipped, finding_boxes, overlapping
from figproof.report.redraw import centre_and_interval, code, groups_behind
from tests.builders import BOX, points, to_display


def _finding(rule: str, message: str = "m", axes: int | None = 0, accepted: str | None = None,
             severity: str = "error") -> Finding:
    return Finding(rule=rule, severity=severity, confidence="certain", path="fig.py", line=3, figure="fig.py#1",
                   axes=axes, message=message, accepted=accepted)


def test_clipped_points_are_marked_on_the_edge_they_cross() -> None:
    ps = points([0.2, 0.5, 0.6], [0.5, 1.4, 1.2])  # two above the y-limit 1
    ax = Axes(index=0, display_box=BOX, points=(ps,))
    [box] = clipped(ax)
    x_in, _ = to_display([0.5, 0.6], [1, 1])
    assert box[0] <= x_in.min() and box[2] >= x_in.max()
    assert box[1] < BOX[3] < box[3]  # straddles the top edge
    assert clipped(Axes(index=0, display_box=BOX, points=(points([0.2], [0.5]),))) == []


def test_overlapping_markers_are_grouped() -> None:
    px = np.array([100.0, 101.0, 300.0])
    ps = points([0, 0, 0], [0, 0, 0])
    from dataclasses import replace

    ps = replace(ps, px=px, py=np.array([200.0, 200.5, 50.0]), sizes=np.array([36.0]))
    [box] = overlapping(Axes(index=0, display_box=BOX, points=(ps,)), dpi=100)
    assert box[0] < 100 and box[2] > 101 and box[2] < 300  # the lone marker at x = 300 is not in it


def test_low_contrast_marks_the_text_of_the_named_colour() -> None:
    faint = Text(text="n.s.", color=(0.8, 0.8, 0.8, 1.0), display_box=(200.0, 300.0, 230.0, 312.0))
    dark = Text(text="p < 0.01", display_box=(400.0, 300.0, 460.0, 312.0))
    fig = FigureModel(id="fig.py#1", script="fig.py", number=1, axes=(Axes(index=0, display_box=BOX,
                                                                           texts=(faint, dark)),))
    f = _finding("low-contrast", "annotation 'n.s.' in #cccccc on #ffffff has contrast 1.6:1, below 4.5:1")
    assert finding_boxes(fig, f) == [(198.0, 298.0, 232.0, 314.0)]
    # a finding with nothing more precise to point at is marked by its axes
    assert finding_boxes(fig, _finding("axis-empty-span")) == [BOX]


def test_mean_interval_is_the_t_interval_and_median_interval_the_quartiles() -> None:
    from scipy import stats

    values = np.array([4.1, 5.3, 3.8, 6.0, 5.1])
    centre, low, high = centre_and_interval(values, "mean")
    ref = stats.t.interval(0.95, values.size - 1, loc=values.mean(), scale=stats.sem(values))
    assert centre == pytest.approx(values.mean()) and (low, high) == pytest.approx(ref)
    centre, low, high = centre_and_interval(values, "median")
    assert (centre, low, high) == pytest.approx((np.median(values), *np.percentile(values, [25, 75])))


def _bar_figure() -> FigureModel:
    rng = np.random.default_rng(5)
    a, b = rng.normal(4, 1, 6).round(3), rng.normal(7, 1, 5).round(3)
    table = LoadedTable(path="data/leaves.csv", reader="pandas.read_csv",
                        columns={"area": np.concatenate([b, a])}, groups={"line": np.array([1] * 5 + [0] * 6)})
    heights = np.array([a.mean(), b.mean()])
    boxes = np.array([[100.0, 60.0, 200.0, 200.0], [300.0, 60.0, 400.0, 300.0]])
    bars = BarSet(positions=np.array([0.0, 1.0]), widths=np.array([0.8, 0.8]), bottoms=np.zeros(2), heights=heights,
                  display_boxes=boxes)
    ax = Axes(index=0, display_box=BOX, bars=(bars,), x=Axis(ticks=((0.0, "wild type"), (1.0, "mutant"))),
              y=Axis(label="leaf area (cm²)"))
    return FigureModel(id="fig.py#1", script="fig.py", number=1, axes=(ax,), tables=(table,))


def test_bar_heights_are_traced_to_the_table_groups_in_bar_order() -> None:
    fig = _bar_figure()
    groups = groups_behind(fig, _finding("bars-for-continuous"))
    assert groups is not None and groups.statistic == "mean"
    table = fig.tables[0]
    assert [g.tolist() for g in groups.values] == [table.columns["area"][5:].tolist(),
                                                   table.columns["area"][:5].tolist()]
    assert groups.labels == ("wild type", "mutant") and groups.value_label == "leaf area (cm²)"
    assert groups.table is None  # no repo to read the table back from: the values are written out
    text = code(groups, fig.id)
    assert text.count("np.array([") == 2 and "..." not in text
    namespace: dict[str, object] = {}
    exec(compile(text.split("rng = ")[0], "redraw", "exec"), namespace)  # the data part defines the groups
    assert [list(g) for g in namespace["groups"]] == [list(g) for g in groups.values]  # type: ignore[attr-defined]


def test_boxes_use_their_recorded_values_and_other_findings_get_no_redraw() -> None:
    from tests.builders import box_of

    vals = [np.array([1.0, 2.0, 2.5, 3.0]), np.array([5.0, 6.0, 6.5, 9.0])]
    boxes = (box_of(vals[0], position=1.0, sample=0), box_of(vals[1], position=2.0, sample=1))
    fig = FigureModel(id="nb.ipynb#2", script="nb.ipynb", number=2,
                      axes=(Axes(index=0, display_box=BOX, boxes=boxes),),
                      samples=tuple(Sample(values=v, origin="boxplot_stats") for v in vals))
    groups = groups_behind(fig, _finding("box-hides-modes"))
    assert groups is not None and groups.statistic == "median"
    assert [g.tolist() for g in groups.values] == [v.tolist() for v in vals]
    assert groups_behind(fig, _finding("low-contrast")) is None
    assert groups_behind(fig, _finding("box-hides-modes", axes=3)) is None


def test_page_folds_accepted_findings_away_and_parses_strictly() -> None:
    import html5lib

    open_f = _finding("axis-empty-span", "60% of the y-axis has no data")
    taken = _finding("points-hidden", "3 of 40 markers overlap", accepted="checked by hand", severity="warning")
    entry = html.FigureEntry(id="fig.py#1", script="fig.py", where="fig.py:2", image="img/fig.png",
                             image_size=(1280, 960), model_size=(640.0, 480.0), findings=(open_f, taken),
                             boxes=((BOX,), (BOX,)))
    result = CheckResult(root="lab", version="0", runs=(), findings=(open_f, taken), fail_on="error",
                         summary=Summary(scripts=1, figures=1, errors=1, warnings=0, notes=0, accepted=1,
                                         passed=False))
    text = html.render(html.Page(result=result, figures=(entry,)))
    html5lib.HTMLParser(strict=True).parse(text)
    folded = re.search(r'<details class="accepted">(.*?)</details>', text, re.S)
    assert folded and "checked by hand" in folded.group(1) and "points-hidden" in folded.group(1)
    # one mark, for the open finding, scaled by 2 (a 1280-px rendering of a 640-px model) and flipped in y
    marks = re.findall(r'<rect class="line" x="(\d+)" y="(\d+)" width="(\d+)" height="(\d+)"', text)
    x0, y0, x1, y1 = BOX
    assert marks == [(str(round(2 * x0)), str(round(960 - 2 * y1)), str(round(2 * (x1 - x0))),
                      str(round(2 * (y1 - y0))))]
    assert text.count('data-accepted="yes"') == 1


def test_close_markers_match_a_kd_tree() -> None:
    from scipy.spatial import cKDTree

    from figproof.report.marks import _close_pairs

    rng = np.random.default_rng(11)
    xy = rng.uniform(0, 400, (3000, 2))
    pairs = cKDTree(xy).query_pairs(3.0, output_type="ndarray")  # scipy's reference neighbour search
    assert _close_pairs(xy, 3.0).tolist() == np.unique(pairs.ravel()).tolist()

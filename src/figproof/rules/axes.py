"""Axis rules: view limits that cut off plotted values, and value axes that are mostly empty.

Both rules work in the axis's *scaled* coordinate (log10 for a log axis, the
logit for a logit axis, the value itself for a linear one), which is where
matplotlib spaces values evenly; a share of that coordinate is a share of
the drawn axis length, whichever way round the axis runs.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from figproof.model.findings import Confidence, Hit, Severity
from figproof.model.records import Axes, Axis, Box, ErrorBars, FigureModel, Line, PointSet, Source, Violin
from figproof.rules.base import Knob, Knobs, counted, rule

# scales whose axes-fraction coordinate we can compute without extra parameters
_FRACTION_SCALES = ("linear", "log", "logit")
_NO_LINE = ("None", "none", "", " ")


# --------------------------------------------------------------------------
# shared helpers
# --------------------------------------------------------------------------


def _cartesian(ax: Axes) -> bool:
    """Polar, 3-D and colour-bar axes have no plain x/y view limits to judge."""
    return ax.projection == "rectilinear" and not ax.is_colorbar


def _scaled(values: np.ndarray, scale: str) -> tuple[np.ndarray, np.ndarray]:
    """Values in the scale's evenly spaced coordinate, and which of them the scale can show at all."""
    v = np.asarray(values, dtype=float)
    with np.errstate(all="ignore"):
        if scale == "log":
            shown = v > 0
            t = np.log10(np.where(shown, v, 1.0))
        elif scale == "logit":
            shown = (v > 0) & (v < 1)
            w = np.where(shown, v, 0.5)
            t = np.log10(w / (1.0 - w))
        else:
            # linear, and an order-preserving stand-in for scales with unknown parameters (symlog, asinh)
            shown = np.ones(v.shape, dtype=bool)
            t = v
    return t, shown


def _limits(axis: Axis) -> tuple[float, float, float, float] | None:
    """(lo, hi) in data and in scaled coordinates, lo < hi; None when the limits are unusable."""
    lo, hi = sorted(float(v) for v in axis.lim)
    if not (np.isfinite(lo) and np.isfinite(hi)) or hi <= lo:
        return None
    (tlo, thi), shown = _scaled(np.array([lo, hi]), axis.scale)
    if not shown.all() or thi <= tlo:
        return None
    return lo, hi, float(tlo), float(thi)


def _fraction(values: np.ndarray, axis: Axis) -> np.ndarray | None:
    """Axes-fraction position along ``axis`` (0 at the lower data limit, 1 at the upper); NaN where not drawable."""
    lims = _limits(axis)
    if lims is None or axis.scale not in _FRACTION_SCALES:
        return None
    _, _, tlo, thi = lims
    t, shown = _scaled(values, axis.scale)
    f = (t - tlo) / (thi - tlo)
    return np.where(shown & np.isfinite(f), f, np.nan)


def _from_fraction(fraction: float, axis: Axis) -> float:
    """The data value at an axes fraction (inverse of :func:`_fraction`)."""
    lims = _limits(axis)
    if lims is None:
        return float("nan")
    _, _, tlo, thi = lims
    t = tlo + fraction * (thi - tlo)
    if axis.scale == "log":
        return float(10.0**t)
    if axis.scale == "logit":
        return float(1.0 / (1.0 + 10.0**-t))
    return float(t)


def _fmt(value: float) -> str:
    """A limit or value as people write it: 4 significant digits, no '-0'."""
    text = f"{value:.4g}"
    return "0" if text in ("-0", "0") else text


def _is_inverted(axis: Axis) -> bool:
    return bool(axis.inverted or axis.lim[0] > axis.lim[1])


def _same_xy(a: PointSet, b: Line) -> bool:
    """True when a line-marker point set repeats the vertices of a Line (the extractor emits both)."""
    if len(a.x) != len(b.x) or len(a.y) != len(b.y):
        return False
    return bool(np.array_equal(a.x, b.x, equal_nan=True) and np.array_equal(a.y, b.y, equal_nan=True))


# --------------------------------------------------------------------------
# axis-clips-data
# --------------------------------------------------------------------------

CLIP_MIN_COUNT = 1.0
CLIP_TOLERANCE = 1e-9

_BELOW, _ABOVE, _UNSHOWN = 1, 2, 3


@dataclass(frozen=True, slots=True)
class _Family:
    """Plotted values of one kind in one axes: coordinates, the mark each came from, and its nouns."""

    singular: str
    plural: str
    x: np.ndarray
    y: np.ndarray
    mark: np.ndarray  # index into sources
    sources: tuple[Source | None, ...]
    monotonic_x: tuple[bool, ...] = ()  # per mark, lines only: x runs one way (a series over time or dose)


def _families(ax: Axes) -> list[_Family]:
    """Collect the values a reader expects to see: points, line vertices, bar tops and baselines, error-bar and
    whisker ends."""
    out: list[_Family] = []

    def build(singular: str, plural: str, parts: list[tuple[np.ndarray, np.ndarray, Source | None]],
              monotonic: tuple[bool, ...] = ()) -> None:
        if not parts:
            return
        xs, ys, marks = [], [], []
        for i, (x, y, _) in enumerate(parts):
            n = min(x.size, y.size)
            xs.append(x[:n])
            ys.append(y[:n])
            marks.append(np.full(n, i))
        out.append(_Family(singular, plural, np.concatenate(xs), np.concatenate(ys), np.concatenate(marks),
                           tuple(p[2] for p in parts), monotonic))

    def flat(a: np.ndarray) -> np.ndarray:
        return np.asarray(a, dtype=float).ravel()

    data_lines = [ln for ln in ax.lines if ln.role == "data"]
    pts: list[tuple[np.ndarray, np.ndarray, Source | None]] = []
    for ps in ax.points:
        # markers of a Line2D that also has a drawn line are counted once, as line vertices
        if ps.kind == "line" and any(_same_xy(ps, ln) for ln in data_lines if ln.linestyle not in _NO_LINE):
            continue
        pts.append((flat(ps.x), flat(ps.y), ps.source))
    lines: list[tuple[np.ndarray, np.ndarray, Source | None]] = []
    monotonic: list[bool] = []
    for ln in data_lines:
        x, y = flat(ln.x), flat(ln.y)
        if ln.linestyle in _NO_LINE:
            pts.append((x, y, ln.source))
            continue
        lines.append((x, y, ln.source))
        steps = np.diff(x[np.isfinite(x)])
        monotonic.append(bool(steps.size and (np.all(steps >= 0) or np.all(steps <= 0))))
    build("point", "points", pts)
    build("point along the lines", "points along the lines", lines, tuple(monotonic))

    tops: list[tuple[np.ndarray, np.ndarray, Source | None]] = []
    bases: list[tuple[np.ndarray, np.ndarray, Source | None]] = []
    for b in ax.bars:
        n = min(b.positions.size, b.heights.size)
        heights = flat(b.heights)[:n]
        bottoms = flat(b.bottoms)[:n] if b.bottoms.size >= n else np.zeros(n)
        pos = flat(b.positions)[:n]
        drawn = heights != 0  # an empty bin or zero bar shows nothing to cut off
        value = (bottoms + heights)[drawn]
        pos = pos[drawn]
        tops.append((pos, value, b.source) if b.orientation != "horizontal" else (value, pos, b.source))
        # a bar's length from its baseline is its value: a cut-off baseline makes the bar lie about it
        # (on a log axis the baseline 0 cannot be drawn at all; matplotlib clips it and so do we)
        value_axis = ax.y if b.orientation != "horizontal" else ax.x
        if value_axis.scale == "linear":
            base = bottoms[drawn]
            bases.append((pos, base, b.source) if b.orientation != "horizontal" else (base, pos, b.source))
    build("bar top", "bar tops", tops)
    build("bar baseline", "bar baselines", bases)

    ends: list[tuple[np.ndarray, np.ndarray, Source | None]] = []
    for e in ax.errorbars:
        n = min(e.positions.size, e.lower.size, e.upper.size)
        pos = np.tile(flat(e.positions)[:n], 2)
        value = np.concatenate([flat(e.lower)[:n], flat(e.upper)[:n]])
        ends.append((pos, value, e.source) if e.orientation != "horizontal" else (value, pos, e.source))
    build("error-bar end", "error-bar ends", ends)

    whiskers: list[tuple[np.ndarray, np.ndarray, Source | None]] = []
    for bx in ax.boxes:
        value = np.concatenate([[bx.whislo, bx.whishi], flat(bx.fliers)])
        pos = np.full(value.size, float(bx.position))
        whiskers.append((pos, value, bx.source) if bx.orientation != "horizontal" else (value, pos, bx.source))
    build("box-plot whisker end or outlier", "box-plot whisker ends and outliers", whiskers)
    return out


def _sides(values: np.ndarray, axis: Axis, tolerance: float) -> np.ndarray | None:
    """Per value: 0 drawn or missing, _BELOW / _ABOVE the data limits, _UNSHOWN by the scale (<= 0 on log)."""
    lims = _limits(axis)
    if lims is None:
        return None
    _, _, tlo, thi = lims
    finite = np.isfinite(values)
    t, shown = _scaled(values, axis.scale)
    slack = tolerance * (thi - tlo)  # values on a limit are drawn (half a marker still shows)
    side = np.zeros(values.shape, dtype=np.int8)
    side[finite & shown & (t < tlo - slack)] = _BELOW
    side[finite & shown & (t > thi + slack)] = _ABOVE
    side[finite & ~shown] = _UNSHOWN
    return side


def _where(name: str, code: int, axis: Axis) -> str:
    """Where values with ``code`` went, in the words a reader of the drawn figure would use."""
    if code == _UNSHOWN:
        bound = "<= 0 or >= 1" if axis.scale == "logit" else "<= 0"
        return f"at {name} {bound} on the {axis.scale}-scaled {name}-axis"
    lo, hi = sorted(axis.lim)
    greater = code == _ABOVE
    # an inverted axis draws larger values towards the bottom / left
    if _is_inverted(axis):
        greater = not greater
    if name == "y":
        word = "above" if greater else "below"
    else:
        word = "right of" if greater else "left of"
    return f"{word} the {name}-limit {_fmt(hi if code == _ABOVE else lo)}"


@rule(
    "axis-clips-data",
    severity="error",
    confidence="certain",
    why="""
        Values outside the view limits are silently not drawn: a point above the y-limit, a bar whose top is cut
        off, an error bar that ends outside the axes, or a value <= 0 on a log axis simply vanishes, and the
        reader sees a cleaner, narrower result than the data support. Limits set by hand to "zoom in", shared
        limits copied from another panel, and a log scale switched on late are the usual causes. Nothing in the
        saved figure tells the reader that anything is missing.
    """,
    fix="""
        Let matplotlib choose the limits (remove `set_xlim`/`set_ylim`/`axis([...])`), or widen them to cover
        every plotted value. If an outlier must stay off-scale, say so in the figure (an arrow with its value,
        or a broken axis) and in the caption, and accept the finding with an allow comment that gives the
        reason. On a log axis, drop or report values <= 0 explicitly instead of letting the scale hide them.
        A line series cut only along its x-axis (a window of a long recording) is a chosen zoom and is not
        reported.
    """,
    sources=(
        "matplotlib documentation, Axes.set_xlim / Axes.set_ylim: artists outside the view limits are clipped "
        "to the axes and not drawn.",
        "matplotlib documentation, matplotlib.scale.LogScale: non-positive values are masked or clipped "
        "(nonpositive='mask' | 'clip') and cannot appear on a log axis.",
        "Common practice: every plotted observation should be visible, or its omission stated in the figure.",
    ),
    knobs=(
        Knob(name="min_count", default=CLIP_MIN_COUNT, minimum=1,
             help="Fewest cut-off values of one kind in one axes that make a finding."),
        Knob(name="tolerance", default=CLIP_TOLERANCE, minimum=0, maximum=0.1,
             help="Share of the axis length beyond a limit that still counts as on the limit."),
    ),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        # root length (mm) of seedlings grown under three light regimes, 8 per regime
        regime = np.repeat([1.0, 2.0, 3.0], 8)
        length = np.array([22, 25, 28, 31, 34, 37, 41, 44,
                           26, 29, 32, 35, 38, 42, 45, 48,
                           30, 33, 36, 39, 43, 46, 49, 52], dtype=float)
        fig, ax = plt.subplots()
        ax.scatter(regime, length)
        ax.set_ylim(20, 40)
        ax.set_ylabel("root length (mm)")
        fig.savefig("roots.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np
        # root length (mm) of seedlings grown under three light regimes, 8 per regime
        regime = np.repeat([1.0, 2.0, 3.0], 8)
        length = np.array([22, 25, 28, 31, 34, 37, 41, 44,
                           26, 29, 32, 35, 38, 42, 45, 48,
                           30, 33, 36, 39, 43, 46, 49, 52], dtype=float)
        fig, ax = plt.subplots()
        ax.scatter(regime, length)
        ax.set_ylabel("root length (mm)")
        fig.savefig("roots.png")
    """,
)
def axis_clips_data(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """Axis limits cut off plotted values (points, points along lines, bar tops, error-bar ends).

    Counted per axes and per kind of value.  A value is cut off when it lies
    beyond a view limit by more than ``tolerance`` of the axis length, or when
    the axis scale cannot show it (<= 0 on a log axis).  Missing values (NaN,
    masked) are not drawn by matplotlib either and are not counted.  Reference
    lines (axhline and friends), colour-bar axes and polar/3-D axes are ignored.
    """
    min_count = float(knobs.get("min_count", CLIP_MIN_COUNT))
    tolerance = float(knobs.get("tolerance", CLIP_TOLERANCE))
    for ax in figure.axes:
        if not _cartesian(ax):
            continue
        for fam in _families(ax):
            sx = _sides(fam.x, ax.x, tolerance)
            sy = _sides(fam.y, ax.y, tolerance)
            if sx is None or sy is None:
                continue
            present = np.isfinite(fam.x) & np.isfinite(fam.y)
            cut = present & ((sx != 0) | (sy != 0))
            total = int(present.sum())
            count = int(cut.sum())
            if count == 0 or count < min_count:
                continue
            # a value cut on both axes is told once, by its y side (the value axis of most plots)
            groups: dict[tuple[str, int], int] = {}
            for code in (_ABOVE, _BELOW, _UNSHOWN):
                n = int((cut & (sy == code)).sum())
                if n:
                    groups[("y", code)] = n
            for code in (_ABOVE, _BELOW, _UNSHOWN):
                n = int((cut & (sy == 0) & (sx == code)).sum())
                if n:
                    groups[("x", code)] = n
            ranked = sorted(groups.items(), key=lambda kv: (-kv[1], kv[0]))
            head = counted(count, total, fam.singular, fam.plural)
            one = count == 1
            if len(ranked) == 1:
                (name, code), _ = ranked[0]
                axis = ax.x if name == "x" else ax.y
                where = _where(name, code, axis)
                if code == _UNSHOWN:
                    bound = f"{name} {'<= 0 or >= 1' if axis.scale == 'logit' else '<= 0'}"
                    message = (f"{head} {'has' if one else 'have'} {bound} and {'is' if one else 'are'} not drawn "
                               f"on the {axis.scale}-scaled {name}-axis")
                else:
                    message = f"{head} {'lies' if one else 'lie'} {where} and {'is' if one else 'are'} not drawn"
            else:
                parts = ", ".join(f"{n} {_where(name, code, ax.x if name == 'x' else ax.y)}"
                                  for (name, code), n in ranked)
                message = f"{head} lie outside the view limits and are not drawn ({parts})"
            first = int(fam.mark[np.flatnonzero(cut)[0]])
            severity: Severity | None = None
            confidence: Confidence | None = None
            if fam.monotonic_x:
                # a line series cut only along x is a chosen window of a long signal, not hidden data
                cut_marks = set(fam.mark[cut].tolist())
                x_only = not (cut & (sy != 0)).any()
                if x_only and all(fam.monotonic_x[m] for m in cut_marks):
                    continue
            (name, code), _ = ranked[0]
            cause = (ax.x if name == "x" else ax.y).limit_source if code != _UNSHOWN else None
            yield Hit(message=message, source=fam.sources[first], axes=ax.index, severity=severity,
                      confidence=confidence, key=f"{fam.plural}", cause=cause)


# --------------------------------------------------------------------------
# axis-empty-span
# --------------------------------------------------------------------------

EMPTY_MAX_SHARE = 0.5


def _value_axis(ax: Axes) -> str | None:
    """Which axis carries the measured values.

    Box and violin plots: the axis their orientation points along.  Otherwise
    y, unless y is categorical (a horizontal strip or dot plot), then x.  Both
    axes categorical: none.
    """
    summaries: list[Box | Violin] = [*ax.boxes, *ax.violins]
    if summaries:
        horizontal = sum(1 for m in summaries if m.orientation == "horizontal")
        return "x" if 2 * horizontal > len(summaries) else "y"
    if ax.y.categorical:
        return None if ax.x.categorical else "x"
    return "y"


def _display_fraction(lo_px: float, hi_px: float, ax: Axes, which: str, axis: Axis) -> tuple[float, float]:
    """A display-pixel interval along ``which`` as data-ordered axes fractions (flipped on inverted axes)."""
    x0, y0, x1, y1 = ax.display_box
    a, b = (x0, x1) if which == "x" else (y0, y1)
    span = b - a
    if span == 0:
        return float("nan"), float("nan")
    f0, f1 = sorted(((lo_px - a) / span, (hi_px - a) / span))
    if _is_inverted(axis):
        f0, f1 = 1.0 - f1, 1.0 - f0
    return f0, f1


def _value_fractions(ax: Axes, which: str, axis: Axis) -> np.ndarray:
    """Axes fractions of the drawn values on the value axis: points, data lines, error bars, boxes, violins, fills."""
    vals: list[np.ndarray] = []

    def along(a_x: np.ndarray, a_y: np.ndarray) -> np.ndarray:
        return np.asarray(a_x if which == "x" else a_y, dtype=float).ravel()

    for ps in ax.points:
        vals.append(along(ps.x, ps.y))
    for ln in ax.lines:
        if ln.role == "data":
            vals.append(along(ln.x, ln.y))
    for e in ax.errorbars:
        on_value_axis = (e.orientation == "horizontal") == (which == "x")
        if on_value_axis:
            vals.extend([np.asarray(e.lower, float).ravel(), np.asarray(e.upper, float).ravel()])
    for bx in ax.boxes:
        vals.append(np.concatenate([[bx.whislo, bx.q1, bx.median, bx.q3, bx.whishi],
                                    np.asarray(bx.fliers, float).ravel()]))
    for v in ax.violins:
        vals.append(np.array([v.low, v.high], dtype=float))
    f = _fraction(np.concatenate(vals) if vals else np.zeros(0), axis)
    if f is None:
        return np.zeros(0)
    out = [f]
    for p in ax.patches:
        # fill_between bands and areas are data drawn down to their baseline
        if p.kind == "fill":
            x0, y0, x1, y1 = p.display_box
            lo, hi = (x0, x1) if which == "x" else (y0, y1)
            if hi > lo:
                out.append(np.array(_display_fraction(lo, hi, ax, which, axis)))
    f = np.concatenate(out)
    f = f[np.isfinite(f)]
    return np.clip(f, 0.0, 1.0)


def _marks_in_gap(ax: Axes, which: str, axis: Axis, fmin: float, fmax: float) -> list[str]:
    """Reference lines, spans and annotations that sit in the empty part of the value axis."""
    found: list[str] = []

    def in_gap(f0: float, f1: float) -> bool:
        return bool(np.isfinite(f0) and np.isfinite(f1) and f1 >= 0 and f0 <= 1 and (f0 < fmin or f1 > fmax))

    for ln in ax.lines:
        if ln.role != "reference":
            continue
        v = np.asarray(ln.x if which == "x" else ln.y, dtype=float).ravel()
        v = v[np.isfinite(v)]
        # only a line across the value axis (constant along it) marks a level such as zero or a threshold
        if v.size and np.ptp(v) == 0:
            f = _fraction(v[:1], axis)
            if f is not None and in_gap(float(f[0]), float(f[0])):
                found.append(f"a reference line at {_fmt(float(v[0]))}")
    for t in ax.texts:
        if t.role in ("annotation", "text") and t.in_axes:
            x0, y0, x1, y1 = t.display_box
            lo, hi = (x0, x1) if which == "x" else (y0, y1)
            if hi > lo:
                c = (lo + hi) / 2
                f0, _ = _display_fraction(c, c, ax, which, axis)
                if in_gap(f0, f0):
                    found.append("an annotation")
    for p in ax.patches:
        if p.kind in ("rectangle", "polygon"):
            x0, y0, x1, y1 = p.display_box
            lo, hi = (x0, x1) if which == "x" else (y0, y1)
            if hi > lo:
                # a span (axhspan: a normal range, a detection limit) explains the gap when most of it lies
                # there; a background band behind all the data does not
                f0, f1 = _display_fraction(lo, hi, ax, which, axis)
                f0, f1 = max(f0, 0.0), min(f1, 1.0)
                if f1 > f0 and not (f0 <= fmin and f1 >= fmax):
                    outside = max(0.0, min(f1, fmin) - f0) + max(0.0, f1 - max(f0, fmax))
                    if outside > (f1 - f0) / 2:
                        found.append("a shaded span")
    return found


def _values(ax: Axes, which: str) -> np.ndarray:
    """The data values drawn along ``which`` by points and data lines (for telling a rating scale)."""
    parts = [np.asarray(ps.x if which == "x" else ps.y, float).ravel() for ps in ax.points]
    parts += [np.asarray(ln.x if which == "x" else ln.y, float).ravel() for ln in ax.lines if ln.role == "data"]
    parts += [np.asarray([b.median, b.q1, b.q3], float) for b in ax.boxes]
    values = np.concatenate(parts) if parts else np.zeros(0)
    return values[np.isfinite(values)]


def _bounded_scale(lo: float, hi: float, values: np.ndarray) -> bool:
    """Limits that show a whole bounded scale: a proportion (0 to 1), a percentage (0 to 100), or a rating
    scale of a few whole-number steps (1 to 5, 0 to 10) holding whole-number data."""
    lo, hi = min(lo, hi), max(lo, hi)
    if lo >= -0.05 and hi <= 1.05 and hi - lo >= 0.9:
        return True
    if lo >= -5.0 and hi <= 105.0 and hi - lo >= 90.0:
        return True
    whole = values.size > 0 and bool(np.all(np.isclose(values, np.round(values))))
    return whole and hi - lo <= 11.0 and lo >= -1.0


def _same_limits_set_elsewhere(figure: FigureModel, ax: Axes, which: str, axis: Axis) -> bool:
    """The script set these very limits on another panel too (``g.set(xlim=...)`` on a grid): one scale for all."""
    if axis.autoscaled:
        return False
    for other in figure.axes:
        if other is ax or other.is_colorbar:
            continue
        theirs = other.x if which == "x" else other.y
        if not theirs.autoscaled and np.allclose(theirs.lim, axis.lim, rtol=1e-9, atol=0.0):
            return True
    return False


@rule(
    "axis-empty-span",
    severity="warning",
    confidence="possible",
    why="""
        In a dot, strip, line, box or violin plot the position along the value axis is the message. When most of
        that axis is empty, the data are squeezed into a thin band: differences between groups and the spread
        within them become hard to see. The usual cause is forcing zero into the limits (`set_ylim(0, ...)`,
        `bottom=0`) out of a habit that only bar charts need; bars encode values by length from a baseline, dots
        and lines by position, which needs no baseline. Matplotlib's own autoscaling leaves about 9% of the axis
        empty (a 5% margin on each side). Limits that show a whole bounded scale on purpose (0 to 1 for a
        proportion, 0 to 100%, a five-point rating scale), limits shared with sibling panels so they can be
        compared, and axes turned off are left alone.
    """,
    fix="""
        Let matplotlib autoscale the value axis, or set limits that hug the data. If zero or another level is
        meaningful (a threshold, a detection limit, a control mean), draw it as a reference line with
        `ax.axhline` or label it, and keep the limits just wide enough to show it. If several panels must share
        a scale on purpose, accept the finding with an allow comment that says so.
    """,
    sources=(
        "matplotlib documentation, rcParams axes.xmargin / axes.ymargin (default 0.05) and Axes.margins: "
        "autoscaling pads the data interval by 5% on each side, leaving 0.1/1.1 = 9.1% of the axis empty.",
        "Common practice: position-encoded plots (dots, lines, boxes) need not include zero; length-encoded "
        "plots (bars) must.",
    ),
    knobs=(
        Knob(name="max_empty_share", default=EMPTY_MAX_SHARE, minimum=0.1, maximum=1.0,
             help="Share of the value axis without data at which a finding is raised."),
    ),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        # shoot height (cm) of seedlings grown at two temperatures
        cold = np.array([41.2, 42.0, 42.6, 43.1, 43.9, 44.5])
        warm = np.array([43.8, 44.6, 45.1, 45.9, 46.4, 47.0])
        fig, ax = plt.subplots()
        ax.scatter(np.zeros(6), cold)
        ax.scatter(np.ones(6), warm)
        ax.set_xticks([0, 1], ["4 °C", "20 °C"])
        ax.set_ylim(0, 50)
        ax.set_ylabel("shoot height (cm)")
        fig.savefig("shoots.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np
        # shoot height (cm) of seedlings grown at two temperatures
        cold = np.array([41.2, 42.0, 42.6, 43.1, 43.9, 44.5])
        warm = np.array([43.8, 44.6, 45.1, 45.9, 46.4, 47.0])
        fig, ax = plt.subplots()
        ax.scatter(np.zeros(6), cold)
        ax.scatter(np.ones(6), warm)
        ax.set_xticks([0, 1], ["4 °C", "20 °C"])
        ax.set_ylabel("shoot height (cm)")
        fig.savefig("shoots.png")
    """,
)
def axis_empty_span(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """The value axis of a dot, line or box plot spends most of its length where there are no data.

    The value axis is the one boxes and violins point along; otherwise y,
    unless y is categorical (then x).  The empty share is the part of the
    axis, in axes-fraction coordinates, below the lowest and above the
    highest drawn value (gaps between clusters are the data's own).  Axes
    with bars are skipped (their baseline is meaningful), and so are axes
    with images or meshes, fewer than two distinct values, scales other than
    linear/log/logit, and polar, 3-D and colour-bar axes; so are axes turned off,
    limits shared with sibling panels, and limits the script set to show a
    whole bounded scale (0-1, 0-100, a rating scale).  Confidence rises
    to likely when zero was forced into the limits; a reference line, shaded
    span or annotation inside the gap lowers the finding to a note.
    """
    max_share = float(knobs.get("max_empty_share", EMPTY_MAX_SHARE))
    for ax in figure.axes:
        if not _cartesian(ax) or not ax.axis_on or any(b.heights.size for b in ax.bars):
            continue
        if any(c.kind in ("image", "mesh", "contour") for c in ax.colormaps):
            continue
        if not (ax.points or ax.boxes or ax.violins or ax.errorbars or any(ln.role == "data" for ln in ax.lines)):
            continue
        which = _value_axis(ax)
        if which is None:
            continue
        axis = ax.x if which == "x" else ax.y
        lims = _limits(axis)
        if lims is None or axis.categorical or axis.scale not in _FRACTION_SCALES:
            continue
        if axis.shared or _same_limits_set_elsewhere(figure, ax, which, axis):
            continue  # the limits are shared with sibling panels, so they can be compared: the space is theirs
        if not axis.autoscaled and _bounded_scale(lims[0], lims[1], _values(ax, which)):
            continue  # the script showed the whole of a bounded scale on purpose
        f = _value_fractions(ax, which, axis)
        if f.size < 2 or np.ptp(f) == 0:
            continue
        fmin, fmax = float(f.min()), float(f.max())
        empty = fmin + (1.0 - fmax)
        if empty < max_share:
            continue
        lo, hi, _, _ = lims
        dmin, dmax = _from_fraction(fmin, axis), _from_fraction(fmax, axis)
        confidence: Confidence | None = None
        zero_note = ""
        if axis.scale == "linear" and lo <= 0.0 <= hi and not dmin <= 0.0 <= dmax:
            zero_side_gap = fmin if dmin > 0 else 1.0 - fmax
            if zero_side_gap > empty / 2:
                confidence = "likely"
                zero_note = ", most of it between the data and zero"
        marks = _marks_in_gap(ax, which, axis, fmin, fmax)
        severity: Severity | None = "note" if marks else None
        gap_note = f"; {marks[0]} lies in the empty part" if marks else ""
        drawn: tuple[PointSet | Line | Box | Violin | ErrorBars, ...] = (
            *ax.points, *ax.lines, *ax.boxes, *ax.violins, *ax.errorbars)
        source = next((m.source for m in drawn if m.source is not None), None)
        yield Hit(message=(f"{100 * empty:.0f}% of the {which}-axis has no data{zero_note}: the values span "
                           f"{_fmt(dmin)} to {_fmt(dmax)} within limits {_fmt(lo)} to {_fmt(hi)}{gap_note}"),
                  source=source, axes=ax.index, severity=severity, confidence=confidence, key=f"{which}-axis")


RULES = (axis_clips_data, axis_empty_span)

"""What the colour rules measure: backgrounds, and the colours that must be told apart in one axes.

The colour-pair rules judge only colours that *name categories*: colours a reader must match to a key
to know which series is which.  Candidates, per axes:

- each point set that is not colour-mapped (``PointSet.colormap is None``): its face colour, or its
  edge colour where the faces are transparent; several colours per point set (seaborn ``hue=``) each
  count;
- each line with ``role == "data"`` (error-bar, reference, box and violin lines are not series);
- each bar set: its face colours (several when bars are coloured one by one);
- each filled area (``Patch.kind`` ``"fill"`` or ``"polygon"``) that is not a background band (a shape
  as wide or as tall as the whole axes: ``axvspan``/``axhspan``);
- each distinct colour of a colour map with few colours drawn as an image or mesh.

Which of them must be told apart by colour:

- when the axes has a legend: the colours the legend shows (its entries' colours, or a series whose
  label is in it); colours the legend does not name are not keyed by colour;
- without a legend: lines and points (colour alone tells them apart) unless as many direct labels
  (annotations) sit in the axes; bar sets only where they share positions (groups at their own
  positions, and bars coloured one by one under their tick labels, are told apart by where they stand);
  filled areas only when they are the data (no lines or points in the axes) and are not labelled
  directly; nothing in an axes with its axis turned off (a picture, a labelled pie).

Colours that step along one lightness ramp (:func:`looks_sequential`: bars coloured by height, lines drawn
from a sequential map, a 12-step palette) encode an ordered value and are left to the colour-map rule.
Colours are blended over the axes background before any measurement, identical drawn colours count
once, and two series drawn in the same base colour or with the same label are one series drawn twice.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from figproof.model.records import Axes, ColorMapping, FigureModel, Source
from figproof.rules.base import Knobs
from figproof.science import colour as cs

# --------------------------------------------------------------------------
# backgrounds and series
# --------------------------------------------------------------------------


def opaque(rgba: tuple[float, ...] | None, under: np.ndarray) -> np.ndarray:
    """An RGBA colour as the opaque sRGB colour it shows over ``under``."""
    if rgba is None:
        return under
    out = cs.blend_over(rgba, under)
    return under if np.isnan(out).any() else out[0]


def figure_background(figure: FigureModel) -> np.ndarray:
    """The figure's face colour as seen (a transparent figure is shown on white)."""
    return opaque(figure.facecolor, np.array(cs.WHITE))


def axes_background(ax: Axes, figure: FigureModel) -> np.ndarray:
    """The axes' face colour as seen over the figure background."""
    return opaque(ax.facecolor, figure_background(figure))


def public_label(label: str) -> str:
    # matplotlib marks artists that stay out of legends with a leading underscore
    return "" if label.startswith("_") else label


@dataclass(frozen=True, slots=True)
class Series:
    """One colour a reader must tell apart from the others in its axes."""

    rgba: tuple[float, float, float, float]
    label: str
    what: str  # line | points | bars | area | category
    source: Source | None
    style: tuple[str, str, str, float] = ("", "", "", 0.0)  # line style, marker, hatch, line width


def told_apart_by_style(a: Series, b: Series) -> bool:
    """Line style, marker, hatch or a line twice as wide as the other already names the pair (not colour alone)."""
    if a.what != b.what or not (a.style[0] or a.style[1] or a.style[2]):
        return False
    if a.style[:3] != b.style[:3]:
        return True
    wa, wb = a.style[3], b.style[3]
    return wa > 0.0 and wb > 0.0 and max(wa, wb) >= 2.0 * min(wa, wb)


def distinct_rows(colors: np.ndarray) -> np.ndarray:
    """Unique RGBA rows in order of first appearance (colours equal to 8 bits count once)."""
    arr = cs.as_rgba(colors)
    arr = arr[~np.isnan(arr).any(axis=1)]
    if arr.shape[0] == 0:
        return arr
    _, first = np.unique(np.round(arr * 255).astype(int), axis=0, return_index=True)
    return arr[np.sort(first)]


def visible_colors(faces: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Face colours, or edge colours where the faces are transparent ('none')."""
    f = cs.as_rgba(faces)
    e = cs.as_rgba(edges)
    if f.shape[0] == 0:
        return e
    if e.shape[0] not in (1, f.shape[0]):
        return f
    e = np.broadcast_to(e, f.shape) if e.shape[0] else f
    hollow = np.nan_to_num(f[:, 3]) <= 0.0
    return np.where(hollow[:, None], e, f)


def is_palette(cm: ColorMapping, max_colors: float) -> bool:
    return (not cm.is_rgb) and 1 < cm.n_colors <= max_colors


def ordered_in_lightness(rgb: np.ndarray) -> bool:
    """True when the colours' J' steps all go the same way (a stepped continuous map)."""
    if rgb.shape[0] < 2:
        return True
    steps = np.diff(cs.srgb_to_ucs(rgb)[:, 0])
    return bool(np.all(steps > 0) or np.all(steps < 0))


def palette_colors(cm: ColorMapping, max_colors: float) -> np.ndarray:
    """The distinct colours of a few-colour map that labels categories (empty when it does not)."""
    if not is_palette(cm, max_colors):
        return np.zeros((0, 4))
    rows = distinct_rows(np.asarray(cm.samples))
    if rows.shape[0] < 2 or ordered_in_lightness(rows[:, :3]):
        return np.zeros((0, 4))
    return rows


def _thinned(lightness: np.ndarray, step: float) -> np.ndarray:
    """Indices of sorted ``lightness`` values kept so that each is at least ``step`` above the last kept."""
    keep = [0]
    for k in range(1, lightness.size):
        if lightness[k] - lightness[keep[-1]] >= step:
            keep.append(k)
    return np.asarray(keep)


def looks_sequential(rgb: np.ndarray) -> bool:
    """True when three or more colours lie along one lightness ramp: the steps of a sequential map.

    Colours drawn from a sequential map (viridis, Blues, a 20-step palette) encode an ordered value.  Taken
    in order of lightness J' (CAM02-UCS) they form a nearly straight path whose hue turns one way in small
    steps; a qualitative palette (tab10, Okabe & Ito, seaborn's deep) zigzags: its path in order of
    lightness is much longer than the distance between its ends, and its hue jumps.  Decided from the
    colours alone.  Limits (path at most 1.42 times the end-to-end distance, hue steps up to 70 degrees,
    at most 20 degrees against the turn) from matplotlib's and seaborn's maps and palettes: common practice.
    """
    if rgb.shape[0] < 3:
        return False
    ucs = cs.srgb_to_ucs(rgb)[np.argsort(cs.srgb_to_ucs(rgb)[:, 0])]
    steps = np.diff(ucs, axis=0)
    flat = np.abs(steps[:, 0]) < 1.0
    if np.any(flat & (np.hypot(steps[:, 1], steps[:, 2]) >= 5.0)):
        return False  # two colours of (almost) one lightness but another hue: not a ramp
    ucs = ucs[_thinned(ucs[:, 0], 1.0)]  # a finely sampled map (256 steps of viridis): steps of 1 J' or more
    if ucs.shape[0] < 3:
        return False
    path = float(np.linalg.norm(np.diff(ucs, axis=0), axis=1).sum())
    ends = float(np.linalg.norm(ucs[-1] - ucs[0]))
    if ends <= 0.0 or path > 1.42 * ends:
        return False
    chroma = np.hypot(ucs[:, 1], ucs[:, 2])
    coloured = chroma >= 10.0  # near-grays have no meaningful hue (cividis passes through gray)
    if coloured.sum() < 2:
        return True  # a gray ramp
    hue = np.arctan2(ucs[:, 2], ucs[:, 1])
    neighbours = coloured[:-1] & coloured[1:]  # a step through a gray has no hue to turn
    steps = np.degrees(np.angle(np.exp(1j * (hue[1:] - hue[:-1]))))[neighbours]
    if steps.size == 0:
        return True
    return bool(np.max(np.abs(steps)) <= 70.0 and (np.all(steps >= -20.0) or np.all(steps <= 20.0)))


def on_a_ramp(rgba: Any) -> bool:
    """Three or more distinct colours (RGBA rows) that step along one lightness ramp: a map, not categories."""
    rows = np.asarray(rgba, float).reshape(-1, 4)
    rows = distinct_rows(rows)[:, :3] if rows.shape[0] else rows[:, :3]
    return rows.shape[0] >= 3 and looks_sequential(rows)


def _same_color(a: np.ndarray, b: np.ndarray) -> bool:
    return bool(np.max(np.abs(a[:3] - b[:3])) <= 0.02)


def _legend_colors(ax: Axes) -> np.ndarray:
    rows = [p.facecolor for p in ax.patches if p.kind == "legend-entry"]
    return cs.as_rgba(np.asarray(rows, float)) if rows else np.zeros((0, 4))


def _legend_name(ax: Axes, row: np.ndarray) -> str:
    """The legend's words for a colour (seaborn's hue levels: the bars carry no label, the legend does)."""
    return next((public_label(p.label) for p in ax.patches if p.kind == "legend-entry" and p.label
                 and _same_color(row, np.asarray(p.facecolor, float))), "")


@dataclass(frozen=True, slots=True)
class _Artist:
    """The colours one artist contributes, before deciding whether colour is what names them."""

    colors: np.ndarray  # distinct RGBA rows
    label: str
    what: str
    source: Source | None
    span: tuple[float, float] = (0.0, 0.0)  # bars: the range of positions they occupy
    decorative: bool = False
    style: tuple[str, str, str, float] = ("", "", "", 0.0)


def _spans_axes(box: tuple[float, float, float, float], ax: Axes) -> bool:
    """A shape as wide or as tall as the whole axes: a background band (axvspan/axhspan), not data."""
    x0, y0, x1, y1 = ax.display_box
    w, h = x1 - x0, y1 - y0
    bw, bh = box[2] - box[0], box[3] - box[1]
    return (w > 0 and bw >= 0.98 * w and bh < 0.98 * h) or (h > 0 and bh >= 0.98 * h and bw < 0.98 * w)


_DASHES = {"solid": "-", "dashed": "--", "dashdot": "-.", "dotted": ":"}


def _dash(linestyle: str) -> str:
    return _DASHES.get(linestyle, linestyle)


def _artists(ax: Axes, palette_max_colors: float, max_colors: float) -> list[_Artist]:
    found: list[_Artist] = []

    def add(colors: np.ndarray, label: str, what: str, source: Source | None, **kw: object) -> None:
        rows = distinct_rows(colors)
        rows = rows[rows[:, 3] > 0.0] if rows.shape[0] else rows
        if rows.shape[0] == 0 or rows.shape[0] > max_colors:
            return  # so many colours encode a continuous variable, not categories
        found.append(_Artist(rows, label, what, source, **kw))  # type: ignore[arg-type]

    for ps in ax.points:
        if ps.colormap is None and ps.x.size:
            add(visible_colors(ps.facecolors, ps.edgecolors), public_label(ps.label), "points", ps.source)
    for ln in ax.lines:
        # a line without points draws nothing (seaborn adds such lines as legend handles)
        if ln.role == "data" and ln.x.size and ln.linestyle not in ("", " ", "None", "none"):
            add(np.asarray([ln.color], float), public_label(ln.label), "line", ln.source,
                style=(_dash(ln.linestyle), ln.marker, "", float(ln.linewidth)))
    for bs in ax.bars:
        if bs.positions.size:
            lo = float(np.nanmin(bs.positions - bs.widths / 2)) if bs.widths.size else float(np.nanmin(bs.positions))
            hi = float(np.nanmax(bs.positions + bs.widths / 2)) if bs.widths.size else float(np.nanmax(bs.positions))
            add(visible_colors(bs.facecolors, bs.edgecolors), public_label(bs.label), "bars", bs.source, span=(lo, hi),
                style=("-", "", bs.hatch, 0.0))
    for patch in ax.patches:
        if patch.kind in ("fill", "polygon"):
            add(visible_colors(np.asarray([patch.facecolor]), np.asarray([patch.edgecolor])),
                public_label(patch.label), "area", patch.source, decorative=_spans_axes(patch.display_box, ax),
                style=(_dash(patch.linestyle), "", patch.hatch, 0.0))
    for cm in ax.colormaps:
        if cm.kind != "scatter" and cm.kind != "colorbar":
            add(palette_colors(cm, palette_max_colors), public_label(cm.name), "category", cm.source)
    return found


def _keyed_by_colour(ax: Axes, artists: list[_Artist]) -> list[_Artist]:
    """The artists whose colours are what names their categories (see the module doc)."""
    legend = _legend_colors(ax)
    labels = {lab for lab in ax.legend_labels if lab}
    out: list[_Artist] = []
    for art in artists:
        if art.decorative:
            continue
        if ax.legend_labels:
            # a legend names the colours it shows: only those must be told apart
            keep = [row for row in art.colors if any(_same_color(row, c) for c in legend)]
            if not keep and art.label and art.label in labels:
                keep = list(art.colors)
            if keep and not art.label and all(_legend_name(ax, row) for row in keep):
                # an unlabelled artist of several legend colours (seaborn's hue bars): one series per level
                out += [_Artist(np.asarray([row]), _legend_name(ax, row), art.what, art.source, art.span,
                                style=art.style) for row in keep]
            elif keep:
                out.append(_Artist(np.asarray(keep), art.label, art.what, art.source, art.span, style=art.style))
            continue
        out.append(art)
    out = _without_bands(out)
    if ax.legend_labels:
        return out
    return _without_redundant(ax, out)


def _without_bands(artists: list[_Artist]) -> list[_Artist]:
    """Filled areas in the colour of a line or point set are its error band, not a series of their own."""
    drawn = [row for a in artists if a.what in ("line", "points") for row in a.colors]
    return [a for a in artists if a.what != "area" or not drawn
            or not all(any(_same_color(row, c) for c in drawn) for row in a.colors)]


def _without_redundant(ax: Axes, artists: list[_Artist]) -> list[_Artist]:
    """No legend: drop colours that position, tick labels or direct labels already tell apart."""
    if not ax.axis_on:
        return []  # a picture or a directly labelled pie: nothing keys its colours
    direct = sum(1 for t in ax.texts if t.role == "annotation" and t.text.strip())
    data = [a for a in artists if a.what in ("line", "points")]
    bars = [a for a in artists if a.what == "bars"]
    out = [a for a in artists if a.what == "category"]
    if data and direct < len(data):
        out += data
    # bars coloured one by one sit at their own positions under their tick labels; bar sets that do not
    # share positions are told apart by where they stand
    shared = [b for b in bars if b.colors.shape[0] == 1 and any(
        o is not b and o.span[0] < b.span[1] and b.span[0] < o.span[1] for o in bars)]
    out += shared
    areas = [a for a in artists if a.what == "area"]
    if areas and not data and direct < len(areas):
        out += areas  # filled areas are the data (a stack plot), not shading below lines
    return out


def axes_series(ax: Axes, *, palette_max_colors: float, max_colors: float) -> list[Series]:
    """The colours of ``ax`` that must be told apart, in drawing-list order (see the module doc)."""
    if ax.is_colorbar:
        return []
    artists = _keyed_by_colour(ax, _artists(ax, palette_max_colors, max_colors))
    # one artist coloured through a ramp (bars coloured by height, a sequential hue palette) is a map
    artists = [a for a in artists if not looks_sequential(a.colors[:, :3])]
    found: list[Series] = []
    for art in artists:
        for k, row in enumerate(art.colors):
            name = art.label if art.colors.shape[0] == 1 else (f"{art.label} {k + 1}" if art.label else "")
            found.append(Series(tuple(float(v) for v in row), name, art.what, art.source,  # type: ignore[arg-type]
                                art.style))
    # several artists of one kind whose colours step along a ramp (lines drawn from a sequential map)
    # are a map too
    for what in {s.what for s in found}:
        if on_a_ramp([(*s.rgba[:3], 1.0) for s in found if s.what == what]):
            found = [s for s in found if s.what != what]
    colors = np.array([s.rgba[:3] for s in found]) if found else np.zeros((0, 3))
    if looks_sequential(distinct_rows(np.c_[colors, np.ones(len(colors))])[:, :3] if len(colors) else colors):
        return []
    return found


def series_name(s: Series, hex_: str) -> str:
    return f"'{s.label}' ({hex_})" if s.label else f"{s.what} {hex_}"


@dataclass(frozen=True, slots=True)
class AxesPairs:
    """Series of one axes, blended, deduplicated, with the pairs worth comparing."""

    axes: int
    series: list[Series]
    rgb: np.ndarray  # (n, 3) as seen
    hexes: list[str]
    pairs: list[tuple[int, int]]


def ramp_kinds(per_axes: list[list[Series]]) -> set[str]:
    """Kinds of mark (line, points, ...) whose colours over the whole figure step along one lightness ramp.

    Facets of one plot share its palette: a sequential hue palette split over panels, two or three
    levels in each, is still a map of an ordered value.
    """
    kinds = {s.what for series in per_axes for s in series}
    return {what for what in kinds
            if on_a_ramp([(*s.rgba[:3], 1.0) for series in per_axes for s in series if s.what == what])}


def axes_pairs(figure: FigureModel, knobs: Knobs) -> list[AxesPairs]:
    out: list[AxesPairs] = []
    per_axes = [axes_series(ax, palette_max_colors=knobs["palette_max_colors"], max_colors=knobs["max_colors"])
                for ax in figure.axes]
    ramps = ramp_kinds(per_axes)
    for ax, series in zip(figure.axes, per_axes, strict=True):
        series = [s for s in series if s.what not in ramps]
        if len(series) < 2:
            continue
        bg = axes_background(ax, figure)
        rgb = cs.blend_over(np.array([s.rgba for s in series]), bg)
        keep: list[int] = []
        seen: set[str] = set()
        for i in range(len(series)):
            h = cs.to_hex(rgb[i])
            if h not in seen:
                seen.add(h)
                keep.append(i)
        series = [series[i] for i in keep]
        rgb = rgb[keep]
        base = [cs.to_hex(s.rgba) for s in series]
        pairs = [
            (i, j)
            for i in range(len(series))
            for j in range(i + 1, len(series))
            if base[i] != base[j] and not (series[i].label and series[i].label == series[j].label)
            and not told_apart_by_style(series[i], series[j])
        ]
        if pairs:
            out.append(AxesPairs(ax.index, series, rgb, [cs.to_hex(c) for c in rgb], pairs))
    return out

"""What the colour rules measure: backgrounds, and the colours that must be told apart in one axes.

Which colours "must be told apart" in one axes (the series of that axes):

- each point set (scatter collection or markers of a line) that is not colour-mapped
  (``PointSet.colormap is None``): its face colour, or its edge colour where the faces are
  transparent (``'none'`` faces arrive as alpha 0); a point set with several colours per
  point contributes each distinct colour as a category (seaborn ``hue=``, ``c=[list]``);
- each line with ``role == "data"`` (error-bar, reference, box and violin lines are not series);
- each bar set: its face colours (several when bars are coloured one by one), edge colour for
  hollow bars;
- each filled area (``Patch.kind`` ``"fill"`` or ``"polygon"``: fill_between, stackplot, violin
  bodies, hand-drawn polygons);
- each distinct colour of a colour map with few colours (``ColorMapping.n_colors`` at most
  ``palette_max_colors``) drawn as an image or mesh, since such a map labels categories;
  a map whose few colours are ordered in lightness is a stepped continuous map and is judged
  as a map instead.  Scatter ``c=`` maps are skipped here: the point set already gives the
  colours actually used.

Legend entries enter through the artists they label (their labels name the colours in
messages).  Colours are blended over the axes background before any measurement, identical
drawn colours count once, and two series drawn in the same base colour (say a line and its
translucent band) or with the same label are one series drawn twice, never a clashing pair.
"""

from __future__ import annotations

from dataclasses import dataclass

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


def axes_series(ax: Axes, *, palette_max_colors: float, max_colors: float) -> list[Series]:
    """The colours of ``ax`` that must be told apart, in drawing-list order (see the module doc)."""
    found: list[Series] = []

    def add(colors: np.ndarray, label: str, what: str, source: Source | None) -> None:
        rows = distinct_rows(colors)
        rows = rows[rows[:, 3] > 0.0] if rows.shape[0] else rows
        if rows.shape[0] > max_colors:
            return  # so many colours encode a continuous variable, not categories
        for k, row in enumerate(rows):
            name = label if rows.shape[0] == 1 else (f"{label} {k + 1}" if label else "")
            found.append(Series(tuple(float(v) for v in row), name, what, source))  # type: ignore[arg-type]

    if ax.is_colorbar:
        return found
    for ps in ax.points:
        if ps.colormap is not None:
            continue
        add(visible_colors(ps.facecolors, ps.edgecolors), public_label(ps.label), "points", ps.source)
    for ln in ax.lines:
        if ln.role == "data" and ln.linestyle not in ("", " ", "None", "none"):
            add(np.asarray([ln.color], float), public_label(ln.label), "line", ln.source)
    for bs in ax.bars:
        add(visible_colors(bs.facecolors, bs.edgecolors), public_label(bs.label), "bars", bs.source)
    for patch in ax.patches:
        if patch.kind in ("fill", "polygon"):
            add(visible_colors(np.asarray([patch.facecolor]), np.asarray([patch.edgecolor])),
                public_label(patch.label), "area", patch.source)
    for cm in ax.colormaps:
        if cm.kind != "scatter" and cm.kind != "colorbar":
            add(palette_colors(cm, palette_max_colors), public_label(cm.name), "category", cm.source)
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


def axes_pairs(figure: FigureModel, knobs: Knobs) -> list[AxesPairs]:
    out: list[AxesPairs] = []
    for ax in figure.axes:
        series = axes_series(ax, palette_max_colors=knobs["palette_max_colors"], max_colors=knobs["max_colors"])
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
        ]
        if pairs:
            out.append(AxesPairs(ax.index, series, rgb, [cs.to_hex(c) for c in rgb], pairs))
    return out

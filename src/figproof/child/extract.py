"""Turn drawn matplotlib figures into the plain-data model (runs inside the child).

Each figure is drawn exactly once; only artists still attached to an Axes
after that draw are extracted (plotting libraries add and remove scratch
artists while they work).
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib import colors as mcolors
from matplotlib.axes import Axes as MplAxes
from matplotlib.collections import LineCollection, PathCollection, PolyCollection
from matplotlib.container import BarContainer, ErrorbarContainer
from matplotlib.figure import Figure
from matplotlib.image import AxesImage
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle
from matplotlib.text import Text as MplText

from figproof.child.backdrop import backdrop_at, backdrops_at
from figproof.child.capture import Recorder
from figproof.model.records import (
    RGBA,
    Axes,
    Axis,
    BarSet,
    Box,
    ColorMappedKind,
    ColorMapping,
    ErrorBars,
    FigureModel,
    Line,
    LineRole,
    LoadedTable,
    Patch,
    PatchKind,
    PlotCall,
    PointSet,
    Projection,
    Sample,
    Source,
    Text,
    TextRole,
    Violin,
)

CMAP_SAMPLES = 256
NO_MARKERS = ("", " ", "None", "none", None)


def _rgba(value: Any) -> RGBA:
    try:
        r, g, b, a = mcolors.to_rgba(value)
        return (float(r), float(g), float(b), float(a))
    except (ValueError, TypeError):
        return (0.0, 0.0, 0.0, 0.0)


def _rgba_array(values: Any, alpha: float | None = None) -> np.ndarray:
    try:
        arr = np.asarray(mcolors.to_rgba_array(values), float)
    except (ValueError, TypeError):
        arr = np.zeros((0, 4))
    if alpha is not None and arr.size:
        arr[:, 3] = alpha
    return arr


_PROJECTIONS: dict[str, Projection] = {"rectilinear": "rectilinear", "polar": "polar", "3d": "3d"}


def _src(artist: Any) -> Source | None:
    return getattr(artist, "_figproof_source", None)


def _lib(artist: Any) -> str:
    return getattr(artist, "_figproof_lib", "") or ""


def _box(bbox: Any) -> tuple[float, float, float, float]:
    return (float(bbox.x0), float(bbox.y0), float(bbox.x1), float(bbox.y1))


def _cmap_samples(cmap: Any) -> tuple[np.ndarray, int]:
    samples = np.asarray(cmap(np.linspace(0.0, 1.0, CMAP_SAMPLES)), float)
    return samples, int(getattr(cmap, "N", CMAP_SAMPLES))


# the names matplotlib gives a colour map made from a list of colours (ListedColormap, from_list): no name
_PLACEHOLDER_MAP_NAMES = ("unnamed", "from_list")


def _mapping(kind: ColorMappedKind, mappable: Any, shape: tuple[int, ...] = ()) -> ColorMapping:
    samples, n = _cmap_samples(mappable.get_cmap())
    norm = mappable.norm
    vmin = None if norm.vmin is None else float(norm.vmin)
    vmax = None if norm.vmax is None else float(norm.vmax)
    name = str(getattr(mappable.get_cmap(), "name", ""))
    name = "" if name in _PLACEHOLDER_MAP_NAMES else name
    return ColorMapping(kind=kind, name=name, samples=samples,
                        n_colors=n, shape=shape, vmin=vmin, vmax=vmax, source=_src(mappable))


def _data_coords(ax: MplAxes, transform: Any, xy: np.ndarray) -> np.ndarray:
    if transform == ax.transData or xy.size == 0:
        return xy
    return ax.transData.inverted().transform(transform.transform(xy))


def _axis(ax: MplAxes, which: str) -> Axis:
    axis = ax.xaxis if which == "x" else ax.yaxis
    lim = ax.get_xlim() if which == "x" else ax.get_ylim()
    converter = type(axis.get_converter()).__name__ if hasattr(axis, "get_converter") else ""
    ticks = tuple((float(t.get_loc()), t.label1.get_text()) for t in axis.get_major_ticks()
                  if t.label1.get_visible() and t.label1.get_text().strip())[:100]
    return Axis(lim=(float(lim[0]), float(lim[1])),
                scale=ax.get_xscale() if which == "x" else ax.get_yscale(),
                label=axis.get_label_text(), inverted=bool(lim[0] > lim[1]),
                categorical="Category" in converter, dates="Date" in converter, ticks=ticks,
                autoscaled=bool(ax.get_autoscalex_on() if which == "x" else ax.get_autoscaley_on()),
                shared=_shared(ax, which),
                limit_source=getattr(ax, f"_figproof_{which}lim_source", None))


def _shared(ax: MplAxes, which: str) -> bool:
    """True when the axis shares its limits with a sibling axes (sharex/sharey, or seaborn's grids)."""
    try:
        group = ax.get_shared_x_axes() if which == "x" else ax.get_shared_y_axes()
        return len(group.get_siblings(ax)) > 1
    except (AttributeError, TypeError):
        return False


class _AxesExtractor:
    """Collects the marks of one Axes; artists of boxes/violins/error bars are claimed first."""

    def __init__(self, ax: MplAxes, index: int, rec: Recorder, renderer: Any, used: set[int] | None = None) -> None:
        self.used = used if used is not None else set()
        self.order = {id(a): i for i, a in enumerate(ax.get_children())}
        self.ax = ax
        self.index = index
        self.rec = rec
        self.renderer = renderer
        self.claimed: set[int] = set()
        self.segments: list[tuple[float, float, float, bool, Line2D]] = []
        self.points: list[PointSet] = []
        self.lines: list[Line] = []
        self.bars: list[BarSet] = []
        self.errorbars: list[ErrorBars] = []
        self.boxes: list[Box] = []
        self.violins: list[Violin] = []
        self.colormaps: list[ColorMapping] = []
        self.texts: list[Text] = []
        self.patches: list[Patch] = []

    def attached(self, artist: Any) -> bool:
        return getattr(artist, "axes", None) is self.ax and artist.get_visible()

    # ---- claimed structures ----------------------------------------------

    def boxplots(self, samples: list[Sample]) -> None:
        for ax, stats, artists, vertical, src in self.rec.boxplots:
            if ax is not self.ax:
                continue
            for group in artists.values():
                self.claimed.update(id(a) for a in group)
            if not any(self.attached(a) for a in artists.get("boxes", [])):
                continue
            for s in stats:
                idx = _match_sample(samples, float(s.get("med", np.nan)), "boxplot_stats", self.used)
                self.boxes.append(Box(
                    orientation="vertical" if vertical else "horizontal", position=s["_position"],
                    median=float(s.get("med", np.nan)), q1=float(s.get("q1", np.nan)),
                    q3=float(s.get("q3", np.nan)), whislo=float(s.get("whislo", np.nan)),
                    whishi=float(s.get("whishi", np.nan)),
                    fliers=np.asarray(s.get("fliers", []), float).ravel(),
                    n=None if idx is None else int(samples[idx].values.size), sample=idx, source=src))

    def violinplots(self, samples: list[Sample]) -> None:
        for ax, stats, artists, vertical, src in self.rec.violins:
            if ax is not self.ax:
                continue
            for value in artists.values():
                group = value if isinstance(value, list) else [value]
                self.claimed.update(id(a) for a in group)
            for s in stats:
                idx = _match_sample(samples, float(s.get("median", np.nan)), "violin_stats", self.used)
                coords = np.asarray(s.get("coords", [np.nan]), float)
                self.violins.append(Violin(
                    orientation="vertical" if vertical else "horizontal", position=s["_position"],
                    low=float(np.nanmin(coords)), high=float(np.nanmax(coords)),
                    n=None if idx is None else int(samples[idx].values.size), sample=idx, source=src))

    def containers(self) -> None:
        for c in self.ax.containers:
            if isinstance(c, BarContainer):
                self.bar_container(c)
            elif isinstance(c, ErrorbarContainer):
                self.errorbar_container(c)

    def bar_container(self, c: BarContainer) -> None:
        rects = [p for p in c.patches if self.attached(p)]
        self.claimed.update(id(p) for p in c.patches)
        if not rects:
            return
        vertical = getattr(c, "orientation", "vertical") != "horizontal"
        hist = getattr(c, "_figproof_hist", False) or all(getattr(p, "_figproof_hist", False) for p in rects)
        lib = _lib(rects[0])
        origin = "hist" if hist else (lib or "bar")
        self.bars.append(_barset(rects, vertical, origin, c.get_label() or "", self.renderer,
                                 self.order.get(id(rects[0]))))

    def errorbar_container(self, c: ErrorbarContainer) -> None:
        data_line, caplines, barcols = c.lines
        for part in (data_line, *caplines, *barcols):
            if part is not None:
                self.claimed.add(id(part))
        centers_xy = None
        if data_line is not None:
            centers_xy = np.asarray(data_line.get_xydata(), float)
            # the legend names the container, not its data line: the series carries the container's label
            named = _label(data_line) or _label(c)
            if data_line.get_marker() not in NO_MARKERS and self.attached(data_line):
                marks = _line_points(self.ax, data_line, self.order.get(id(data_line)))
                self.points.append(replace(marks, label=marks.label or named))
            if data_line.get_linestyle() not in ("None", "", " ") and self.attached(data_line):
                self.lines.append(replace(_line(self.ax, data_line, "data"), label=named))
        for col in barcols:
            if not self.attached(col):
                continue
            segs = [np.asarray(s, float) for s in col.get_segments() if len(s) >= 2]
            if not segs:
                continue
            vertical = all(np.isclose(s[0, 0], s[-1, 0]) for s in segs)
            axis = 1 if vertical else 0
            pos = np.array([s[0, 1 - axis] for s in segs])
            lo = np.array([s[:, axis].min() for s in segs])
            hi = np.array([s[:, axis].max() for s in segs])
            if centers_xy is not None and len(centers_xy) == len(segs):
                centers = centers_xy[:, axis]
            else:
                centers = (lo + hi) / 2
            color = _rgba(col.get_color()[0]) if len(col.get_color()) else (0.0, 0.0, 0.0, 1.0)
            self.errorbars.append(ErrorBars(orientation="vertical" if vertical else "horizontal",
                                            positions=pos, centers=centers, lower=lo, upper=hi, color=color,
                                            origin="errorbar", source=_src(col) or _src(c)))

    # ---- free artists ----------------------------------------------------

    def free_lines(self) -> None:
        seg_bars: list[tuple[float, float, float, bool, Line2D]] = []
        for ln in self.ax.lines:
            if id(ln) in self.claimed or not self.attached(ln):
                continue
            seg = _errorbar_segment(ln)
            if seg is not None:
                seg_bars.append((*seg, ln))
                continue
            role: LineRole = "data" if ln.get_transform() == self.ax.transData else "reference"
            has_line = ln.get_linestyle() not in ("None", "", " ") and ln.get_linewidth() > 0
            if has_line or role == "reference":
                self.lines.append(_line(self.ax, ln, role))
            if ln.get_marker() not in NO_MARKERS and role == "data":
                self.points.append(_line_points(self.ax, ln, self.order.get(id(ln))))
        self.segments = seg_bars

    def segment_errorbars(self) -> None:
        """Single-segment lines (seaborn's intervals) that surround a summary mark become error bars."""
        seg_bars = self.segments
        if seg_bars:
            for vertical in (True, False):
                group = [s for s in seg_bars if s[3] == vertical]
                if not group:
                    continue
                pos = np.array([g[0] for g in group])
                lo = np.array([g[1] for g in group])
                hi = np.array([g[2] for g in group])
                centers, marked = self._estimates(pos, lo, hi, vertical)
                # a segment is an error bar only around a summary mark (a bar top, a point) inside it:
                # drop lines to an annotated point and step lines between groups are other lines
                for k in np.flatnonzero(~marked):
                    self.lines.append(_line(self.ax, group[k][4], "reference"))
                if not marked.any():
                    continue
                self.errorbars.append(ErrorBars(
                    orientation="vertical" if vertical else "horizontal", positions=pos[marked],
                    centers=centers[marked], lower=lo[marked], upper=hi[marked],
                    color=_rgba(group[int(np.flatnonzero(marked)[0])][4].get_color()), origin="lines",
                    source=_src(group[int(np.flatnonzero(marked)[0])][4])))

    def _estimates(self, pos: np.ndarray, lo: np.ndarray, hi: np.ndarray,
                   vertical: bool) -> tuple[np.ndarray, np.ndarray]:
        """The value each error bar belongs to (a bar top or a marker at its position, strictly inside it),
        and whether one was found.

        An interval need not be symmetric (a bootstrap CI is not), so its midpoint is only the fallback.
        """
        centers = (lo + hi) / 2
        marked = np.zeros(pos.size, bool)
        orientation = "vertical" if vertical else "horizontal"
        for i, p in enumerate(pos):
            margin = 1e-9 + 1e-6 * abs(hi[i] - lo[i])
            for bars in self.bars:
                if bars.orientation != orientation:
                    continue
                hit = np.flatnonzero(np.isclose(bars.positions, p, atol=1e-9 + 0.01 * float(np.nanmax(bars.widths))))
                if hit.size:
                    top = bars.bottoms[hit[0]] + bars.heights[hit[0]]
                    centers[i] = top
                    marked[i] = lo[i] + margin < top < hi[i] - margin
                    break
            else:
                for pts in self.points:
                    along, value = (pts.x, pts.y) if vertical else (pts.y, pts.x)
                    hit = np.flatnonzero(np.isclose(along, p, atol=1e-9 + 1e-6 * abs(p)))
                    inside = [j for j in hit if lo[i] + margin < value[j] < hi[i] - margin]
                    if inside:
                        centers[i] = value[inside[0]]
                        marked[i] = True
                        break
        return centers, marked

    def collections(self) -> None:
        for coll in self.ax.collections:
            if id(coll) in self.claimed or not self.attached(coll):
                continue
            if isinstance(coll, PathCollection):
                self.scatter(coll)
            elif isinstance(coll, LineCollection):
                continue
            elif (values := coll.get_array()) is not None:
                kind: ColorMappedKind = "contour" if type(coll).__name__ == "ContourSet" else "mesh"
                self.colormaps.append(_mapping(kind, coll, tuple(np.shape(values))))
            elif isinstance(coll, PolyCollection):
                fc = coll.get_facecolor()
                self.patches.append(Patch(
                    kind="fill", display_box=_box(coll.get_window_extent(self.renderer)),
                    facecolor=_rgba(fc[0]) if len(fc) else (0.0, 0.0, 0.0, 0.0),
                    edgecolor=_rgba(coll.get_edgecolor()[0]) if len(coll.get_edgecolor()) else (0.0, 0.0, 0.0, 0.0),
                    zorder=float(coll.get_zorder()), label=_label(coll), source=_src(coll),
                    draw_order=self.order.get(id(coll)), hatch=coll.get_hatch() or ""))

    def scatter(self, coll: PathCollection) -> None:
        offsets: np.ndarray = np.ma.filled(np.ma.asarray(coll.get_offsets(), float), np.nan).reshape(-1, 2)
        transform = coll.get_offset_transform()
        display = transform.transform(offsets) if offsets.size else np.zeros((0, 2))
        data = _data_coords(self.ax, transform, offsets)
        cmap_index = None
        if coll.get_array() is not None:
            self.colormaps.append(_mapping("scatter", coll, (len(offsets),)))
            cmap_index = len(self.colormaps) - 1
        sizes = np.asarray(coll.get_sizes(), float)
        self.points.append(PointSet(
            kind="scatter", x=data[:, 0], y=data[:, 1], px=display[:, 0], py=display[:, 1],
            sizes=sizes if sizes.size else np.array([36.0]), facecolors=_rgba_array(coll.get_facecolor()),
            edgecolors=_rgba_array(coll.get_edgecolor()), alpha=coll.get_alpha(), zorder=float(coll.get_zorder()),
            label=_label(coll), colormap=cmap_index, source=_src(coll), draw_order=self.order.get(id(coll)),
            backdrops=_backdrops(self.ax, display, float(coll.get_zorder()), coll)))

    def images(self) -> None:
        for im in self.ax.images:
            if not self.attached(im) or not isinstance(im, AxesImage):
                continue
            arr = im.get_array()
            shape = tuple(np.shape(arr)) if arr is not None else ()
            if len(shape) == 3:
                self.colormaps.append(ColorMapping(kind="image", is_rgb=True, shape=shape, source=_src(im)))
            else:
                self.colormaps.append(_mapping("image", im, shape))

    def free_patches(self) -> None:
        rows: list[Rectangle] = []
        for p in self.ax.patches:
            if id(p) in self.claimed or not self.attached(p):
                continue
            if isinstance(p, Rectangle) and p.get_width() != 0 and p.get_height() != 0:
                rows.append(p)
                continue
            self.patches.append(_patch(p, "polygon", self.renderer, self.order.get(id(p))))
        # rectangles drawn one by one in a row on a shared baseline are bars too
        by_base: dict[tuple[float, float], list[Rectangle]] = {}
        for r in rows:
            by_base.setdefault((round(r.get_y(), 12), round(abs(r.get_width()), 12)), []).append(r)
        for group in by_base.values():
            if len(group) >= 2 and all(r.get_transform() == self.ax.transData for r in group):
                self.bars.append(_barset(group, True, "rectangles", "", self.renderer, self.order.get(id(group[0]))))
            else:
                self.patches.extend(_patch(r, "rectangle", self.renderer, self.order.get(id(r))) for r in group)

    def text_marks(self) -> None:
        ax = self.ax
        left, right = ax._left_title, ax._right_title  # type: ignore[attr-defined]  # matplotlib's title artists
        marks: tuple[tuple[TextRole, MplText], ...] = (
            ("title", ax.title), ("title", left), ("title", right), ("xlabel", ax.xaxis.label),
            ("ylabel", ax.yaxis.label))
        for role, t in marks:
            self.add_text(t, role, in_axes=False)
        for axis in (ax.xaxis, ax.yaxis):
            for tick in axis.get_major_ticks():
                if tick.label1.get_visible() and tick.get_visible():
                    self.add_text(tick.label1, "tick", in_axes=False)
        for t in ax.texts:
            if self.attached(t):
                self.add_text(t, "annotation", in_axes=True)

    def add_text(self, t: MplText, role: TextRole, *, in_axes: bool) -> None:
        content = t.get_text()
        if not content.strip() or not t.get_visible():
            return
        bbox = t.get_bbox_patch()
        background = _rgba(bbox.get_facecolor()) if bbox is not None else None
        try:
            box = _box(t.get_window_extent(self.renderer))
        except (RuntimeError, ValueError):
            box = (0.0, 0.0, 0.0, 0.0)
        if in_axes:
            # annotations may sit outside the axes box: then their background is the figure's
            x0, y0, x1, y1 = _box(self.ax.bbox)
            cx, cy = (box[0] + box[2]) / 2, (box[1] + box[3]) / 2
            in_axes = x0 <= cx <= x1 and y0 <= cy <= y1
        weight = t.get_fontweight()
        backdrop = None
        if in_axes and role != "legend" and bbox is None:
            backdrop = backdrop_at(self.ax, (box[0] + box[2]) / 2, (box[1] + box[3]) / 2, float(t.get_zorder()), t)
        self.texts.append(Text(text=content[:200], role=role, color=_rgba(t.get_color()), background=background,
                               fontsize=float(t.get_fontsize()),
                               weight=str(weight) if not isinstance(weight, (int, float)) else
                               ("bold" if weight >= 600 else "normal"),
                               display_box=box, in_axes=in_axes, source=_src(t), backdrop=backdrop))

    def legend(self) -> tuple[tuple[str, ...], tuple[float, float, float, float] | None]:
        leg = self.ax.get_legend()
        if leg is None or not leg.get_visible():
            return (), None
        labels = tuple(t.get_text() for t in leg.get_texts())
        for t in leg.get_texts():
            self.add_text(t, "legend", in_axes=True)
        frame = leg.get_frame()
        box = _box(leg.get_window_extent(self.renderer))
        self.patches.append(Patch(kind="legend", display_box=box, facecolor=_rgba(frame.get_facecolor()),
                                  edgecolor=_rgba(frame.get_edgecolor()), zorder=float(leg.get_zorder()),
                                  source=_src(leg)))
        for handle, text in zip(getattr(leg, "legend_handles", []) or [], leg.get_texts(), strict=False):
            color = _handle_color(handle)
            if color is not None:
                self.patches.append(Patch(kind="legend-entry", facecolor=color, zorder=float(leg.get_zorder()),
                                          label=text.get_text()))
        return labels, box

    def build(self, samples: list[Sample]) -> Axes:
        ax = self.ax
        self.boxplots(samples)
        self.violinplots(samples)
        self.containers()
        self.free_lines()
        self.collections()
        self.segment_errorbars()
        self.images()
        self.free_patches()
        self.text_marks()
        labels, legend_box = self.legend()
        cbar = getattr(ax, "_colorbar", None)
        if cbar is not None and cbar.mappable is not None and cbar.mappable.get_cmap() is not None:
            self.colormaps.append(_mapping("colorbar", cbar.mappable))
        projection = _PROJECTIONS.get(ax.name, "other")
        return Axes(index=self.index, display_box=_box(ax.bbox), projection=projection,
                    x=_axis(ax, "x"), y=_axis(ax, "y"), title=ax.get_title(), facecolor=_rgba(ax.get_facecolor()),
                    is_colorbar=cbar is not None, points=tuple(self.points), lines=tuple(self.lines),
                    bars=tuple(self.bars), errorbars=tuple(self.errorbars), boxes=tuple(self.boxes),
                    violins=tuple(self.violins), colormaps=tuple(self.colormaps), texts=tuple(self.texts),
                    patches=tuple(self.patches), legend_labels=labels, legend_box=legend_box,
                    axis_on=bool(ax.axison))


def _label(artist: Any) -> str:
    label = artist.get_label() or ""
    return "" if label.startswith("_") else label


def _handle_color(handle: Any) -> RGBA | None:
    try:
        if isinstance(handle, Line2D):
            return _rgba(handle.get_color())
        for get in (handle.get_facecolor, getattr(handle, "get_edgecolor", None)):
            if get is None:
                continue
            arr = np.asarray(get(), float)
            arr = arr[0] if arr.ndim == 2 and len(arr) else arr
            if arr.size == 4 and arr[3] > 0.0:
                return _rgba(arr)
        return None
    except (AttributeError, ValueError, TypeError, IndexError):
        return None


def _barset(rects: list[Rectangle], vertical: bool, origin: str, label: str, renderer: Any,
            draw_order: int | None = None) -> BarSet:
    xs = np.array([r.get_x() for r in rects], float)
    ys = np.array([r.get_y() for r in rects], float)
    ws = np.array([r.get_width() for r in rects], float)
    hs = np.array([r.get_height() for r in rects], float)
    if vertical:
        positions, widths, bottoms, heights = xs + ws / 2, np.abs(ws), ys, hs
    else:
        positions, widths, bottoms, heights = ys + hs / 2, np.abs(hs), xs, ws
    boxes = np.array([_box(r.get_window_extent(renderer)) for r in rects], float).reshape(-1, 4)
    return BarSet(orientation="vertical" if vertical else "horizontal", positions=positions, widths=widths,
                  bottoms=bottoms, heights=heights, facecolors=_rgba_array([r.get_facecolor() for r in rects]),
                  edgecolors=_edges(rects), display_boxes=boxes, origin=origin,
                  label=label if not label.startswith("_") else "", zorder=float(rects[0].get_zorder()),
                  source=_src(rects[0]), draw_order=draw_order, hatch=rects[0].get_hatch() or "")


def _edges(rects: list[Rectangle]) -> np.ndarray:
    """Edge colours, transparent where the edge is not drawn (line width 0, matplotlib's default for bars)."""
    edges = _rgba_array([r.get_edgecolor() for r in rects])
    if edges.shape[0] == len(rects):
        widths = np.array([r.get_linewidth() for r in rects], float)
        edges[widths <= 0, 3] = 0.0
    return edges


def _patch(p: Any, kind: PatchKind, renderer: Any, draw_order: int | None = None) -> Patch:
    return Patch(kind=kind, display_box=_box(p.get_window_extent(renderer)), facecolor=_rgba(p.get_facecolor()),
                 edgecolor=_rgba(p.get_edgecolor()), zorder=float(p.get_zorder()), label=_label(p), source=_src(p),
                 draw_order=draw_order, linestyle=str(p.get_linestyle()), hatch=p.get_hatch() or "")


def _line(ax: MplAxes, ln: Line2D, role: LineRole) -> Line:
    xy: np.ndarray = np.ma.filled(np.ma.asarray(ln.get_xydata(), float), np.nan).reshape(-1, 2)
    display = ln.get_transform().transform(xy) if xy.size else np.zeros((0, 2))
    data = _data_coords(ax, ln.get_transform(), xy) if role == "data" else xy
    marker = ln.get_marker()
    return Line(x=data[:, 0], y=data[:, 1], px=display[:, 0], py=display[:, 1], color=_rgba(ln.get_color()),
                linewidth=float(ln.get_linewidth()), linestyle=str(ln.get_linestyle()),
                marker="" if marker in NO_MARKERS else str(marker), markersize=float(ln.get_markersize()),
                zorder=float(ln.get_zorder()), label=_label(ln), role=role, source=_src(ln))


def _line_points(ax: MplAxes, ln: Line2D, draw_order: int | None = None) -> PointSet:
    xy: np.ndarray = np.ma.filled(np.ma.asarray(ln.get_xydata(), float), np.nan).reshape(-1, 2)
    display = ln.get_transform().transform(xy) if xy.size else np.zeros((0, 2))
    data = _data_coords(ax, ln.get_transform(), xy)
    face = ln.get_markerfacecolor()
    alpha = ln.get_alpha()
    return PointSet(kind="line", x=data[:, 0], y=data[:, 1], px=display[:, 0], py=display[:, 1],
                    sizes=np.array([float(ln.get_markersize()) ** 2]),
                    facecolors=_rgba_array([face], alpha) if face not in ("none", "None") else np.zeros((1, 4)),
                    edgecolors=_rgba_array([ln.get_markeredgecolor()], alpha), alpha=alpha,
                    marker=str(ln.get_marker()), zorder=float(ln.get_zorder()), label=_label(ln), source=_src(ln),
                    draw_order=draw_order, backdrops=_backdrops(ax, display, float(ln.get_zorder()), ln))


_BACKDROP_POINTS = 200  # more markers than this: their backdrop is the axes face (a dense cloud covers itself)


def _backdrops(ax: MplAxes, display: np.ndarray, zorder: float, artist: Any) -> np.ndarray:
    """N×4 colours beneath each marker (NaN rows where only the axes face is), or empty for big sets."""
    if display.shape[0] == 0 or display.shape[0] > _BACKDROP_POINTS:
        return np.zeros((0, 4))
    out = np.full((display.shape[0], 4), np.nan)
    finite = np.flatnonzero(np.isfinite(display).all(axis=1))
    for k, under in zip(finite, backdrops_at(ax, display[finite], zorder, skip=artist), strict=True):
        if under is not None:
            out[k] = under
    return out


def _errorbar_segment(ln: Line2D) -> tuple[float, float, float, bool] | None:
    """A Line2D that is one error bar, as seaborn draws them: one segment, or NaN-joined bar and two caps.

    Returns (position, low end, high end, vertical) or None when the line is something else.
    """
    if ln.get_marker() not in NO_MARKERS:
        return None
    xy = np.asarray(ln.get_xydata(), float)
    if len(xy) < 2:
        return None
    breaks = np.flatnonzero(np.isnan(xy).any(axis=1))
    pieces = [p for p in np.split(xy, breaks) if len(p)]
    segs = [p[~np.isnan(p).any(axis=1)] for p in pieces]
    if any(len(seg) != 2 for seg in segs):
        return None
    kinds = [_orientation(seg) for seg in segs]
    if None in kinds:
        return None
    if len(segs) == 1:
        bar, kind = segs[0], kinds[0]
        if kind != "v":  # a lone horizontal segment may be a reference line; only vertical counts
            return None
    elif len(segs) == 3 and kinds.count(kinds[0]) != 3:
        odd = [i for i, k in enumerate(kinds) if kinds.count(k) == 1]
        if len(odd) != 1:
            return None
        bar, kind = segs[odd[0]], kinds[odd[0]]
    else:
        return None
    axis = 1 if kind == "v" else 0
    lo, hi = sorted((float(bar[0, axis]), float(bar[1, axis])))
    return float(bar[0, 1 - axis]), lo, hi, kind == "v"


def _orientation(seg: np.ndarray) -> str | None:
    same_x, same_y = np.isclose(seg[0, 0], seg[1, 0]), np.isclose(seg[0, 1], seg[1, 1])
    if same_x and not same_y:
        return "v"
    if same_y and not same_x:
        return "h"
    return None


def _match_sample(samples: list[Sample], median: float, origin: str, used: set[int]) -> int | None:
    for i, s in enumerate(samples):
        if s.origin != origin or s.values.size == 0 or i in used:
            continue
        finite = s.values[np.isfinite(s.values)]
        if finite.size and np.isclose(np.median(finite), median, rtol=1e-9, atol=1e-12):
            used.add(i)
            return i
    return None


def extract_figure(fig: Figure, number: int, rec: Recorder, folder: Path | None, *,
                   renders: bool = True) -> FigureModel:
    """Return the model of ``fig`` (drawn as needed; see :func:`draw_for_extraction`).

    With a ``folder``, ``renders`` writes the figure's pixels there as ``figure-N.png``, and a notebook's
    figure is also saved as its inline display would save it (``figure-N-inline.png``).
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
    render_path = folder / f"figure-{number}.png" if folder is not None and renders else None
    renderer = draw_for_extraction(fig, canvas, already_drawn=id(fig) in rec.drawn, renders=render_path is not None)
    render_name = None
    if render_path is not None:
        from PIL import Image

        # fast compression: renders are scratch files for the image panels, not deliverables
        Image.fromarray(np.asarray(canvas.buffer_rgba())).save(render_path, compress_level=1)
        render_name = render_path.name
    all_samples = [Sample(values=s.values, origin=s.origin, source=s.source) for s in rec.samples]
    axes_list = [ax for ax in fig.get_axes()]
    used: set[int] = set()
    models = [_AxesExtractor(ax, i, rec, renderer, used).build(all_samples) for i, ax in enumerate(axes_list)]
    models, samples = _reindex_samples(models, all_samples)
    index_of = {id(ax): i for i, ax in enumerate(axes_list)}
    calls = tuple(PlotCall(name=c.name, axes=index_of[id(c.axes)], arrays=c.arrays, source=c.source)
                  for c in rec.calls if id(c.axes) in index_of)
    tables = tuple(LoadedTable(path=t.path, reader=t.reader, columns=t.columns, groups=t.groups,
                               truncated=t.truncated, source=t.source) for t in rec.tables)
    fig_texts = []
    extractor = _AxesExtractor(axes_list[0], 0, rec, renderer) if axes_list else None
    if extractor is not None:
        suptitle = getattr(fig, "_suptitle", None)
        for t in fig.texts + ([suptitle] if suptitle is not None else []):
            extractor.add_text(t, "text", in_axes=False)
        fig_texts = extractor.texts
    inline = None
    if folder is not None and rec.script.endswith(".ipynb"):
        # how a notebook's inline display saves a figure: PNG, tight bounding box, the figure's dpi
        inline_path = folder / f"figure-{number}-inline.png"
        save = getattr(Figure.savefig, "__wrapped__", Figure.savefig)  # the unhooked savefig: not a user output
        save(fig, inline_path, format="png", bbox_inches="tight")
        inline = inline_path.name
    w, h = canvas.get_width_height()
    return FigureModel(id=f"{rec.script}#{number}", script=rec.script, number=number, dpi=float(fig.dpi),
                       size_px=(int(w), int(h)), facecolor=_rgba(fig.get_facecolor()), axes=tuple(models),
                       outputs=tuple(dict.fromkeys(rec.outputs.get(id(fig), []))), samples=samples, calls=calls,
                       tables=tables, render=render_name, source=rec.figure_sources.get(id(fig)),
                       texts=tuple(fig_texts), inline_render=inline)


def draw_for_extraction(fig: Figure, canvas: Any, *, already_drawn: bool, renders: bool) -> Any:
    """Bring ``fig`` to its drawn state and return an Agg renderer at the figure's dpi for measuring text.

    Extraction needs what only a draw settles (tick labels, layout-engine positions, artists that plotting
    libraries add or remove while drawing) and a renderer to measure text; the pixels are needed only for
    a rendering.  So: with ``renders``, a full Agg draw; else, when the script's own savefig drew the figure,
    nothing changed it since (``already_drawn`` and the figure is not stale) and no layout engine moves its
    axes with the dpi, no draw at all; else a draw that lays everything out but paints nothing
    (matplotlib's ``draw_without_rendering``).  All three give the same model.
    """
    # a layout engine places the axes for the dpi it ran at: the script's savefig may have used another
    reuse = already_drawn and not fig.stale and fig.get_layout_engine() is None
    if renders:
        canvas.draw()
    elif not reuse:
        fig.draw_without_rendering()
    return canvas.get_renderer()


def _reindex_samples(models: list[Axes], samples: list[Sample]) -> tuple[list[Axes], tuple[Sample, ...]]:
    """Keep the samples this figure's boxes and violins refer to (renumbered from 0), then the groups
    seaborn aggregated into estimates (rules match those to bars by their mean)."""
    import dataclasses

    used: dict[int, int] = {}
    out: list[Axes] = []
    for m in models:
        def renumber(mark: Any) -> Any:
            if mark.sample is None:
                return mark
            new = used.setdefault(mark.sample, len(used))
            return dataclasses.replace(mark, sample=new)

        out.append(dataclasses.replace(m, boxes=tuple(renumber(b) for b in m.boxes),
                                       violins=tuple(renumber(v) for v in m.violins)))
    ordered = sorted(used, key=used.__getitem__)
    has_bars = any(m.bars or m.errorbars for m in models)
    estimates = [s for s in samples if s.origin == "seaborn-estimate"] if has_bars else []
    return out, tuple(samples[i] for i in ordered) + tuple(estimates)

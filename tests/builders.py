"""Build figure models by hand for rule tests (no matplotlib involved).

Display coordinates are computed with a plain linear map from the axes'
limits to its display box, as matplotlib does for linear, non-inverted axes.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from figproof.model.records import (
    Axes,
    Axis,
    BarSet,
    Box,
    ColorMapping,
    ErrorBars,
    FigureModel,
    Line,
    LoadedTable,
    PlotCall,
    PointSet,
    Sample,
    ScriptRun,
    Source,
    Text,
    Violin,
)

BOX = (80.0, 52.8, 576.0, 422.4)  # matplotlib's default axes box for a 640x480 figure at dpi 100


def to_display(x: Any, y: Any, xlim=(0.0, 1.0), ylim=(0.0, 1.0), box=BOX) -> tuple[np.ndarray, np.ndarray]:
    """Map data coordinates to pixels for a linear axes."""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    x0, y0, x1, y1 = box
    px = x0 + (x - xlim[0]) / (xlim[1] - xlim[0]) * (x1 - x0)
    py = y0 + (y - ylim[0]) / (ylim[1] - ylim[0]) * (y1 - y0)
    return px, py


def src(line: int = 1, path: str = "fig.py", cell: int | None = None) -> Source:
    return Source(path=path, line=line, cell=cell)


def points(x: Sequence[float], y: Sequence[float], *, xlim=(0, 1), ylim=(0, 1), size: float = 36.0,
           color=(0.12, 0.47, 0.71, 1.0), line: int = 1, **kw: Any) -> PointSet:
    px, py = to_display(x, y, xlim, ylim)
    return PointSet(kind=kw.pop("kind", "scatter"), x=np.asarray(x, float), y=np.asarray(y, float), px=px, py=py,
                    sizes=np.array([size]), facecolors=np.array([color], float),
                    edgecolors=np.array([color], float), source=src(line), **kw)


def line(x: Sequence[float], y: Sequence[float], *, xlim=(0, 1), ylim=(0, 1), color=(0.12, 0.47, 0.71, 1.0),
         line_no: int = 1, **kw: Any) -> Line:
    px, py = to_display(x, y, xlim, ylim)
    return Line(x=np.asarray(x, float), y=np.asarray(y, float), px=px, py=py, color=color, source=src(line_no), **kw)


def bars(heights: Sequence[float], *, positions: Sequence[float] | None = None, width: float = 0.8,
         bottoms: Sequence[float] | None = None, origin: str = "bar", line: int = 1,
         color=(0.12, 0.47, 0.71, 1.0), orientation: str = "vertical", **kw: Any) -> BarSet:
    h = np.asarray(heights, float)
    pos = np.arange(len(h), dtype=float) if positions is None else np.asarray(positions, float)
    b = np.zeros_like(h) if bottoms is None else np.asarray(bottoms, float)
    return BarSet(orientation=orientation, positions=pos, widths=np.full_like(h, width), bottoms=b, heights=h,
                  facecolors=np.tile(np.asarray(color, float), (len(h), 1)),
                  edgecolors=np.tile(np.asarray(color, float), (len(h), 1)), origin=origin,
                  source=src(line), **kw)


def errorbars(positions, centers, half, *, line: int = 1, **kw: Any) -> ErrorBars:
    c = np.asarray(centers, float)
    h = np.asarray(half, float)
    return ErrorBars(positions=np.asarray(positions, float), centers=c, lower=c - h, upper=c + h,
                     source=src(line), **kw)


def axes(*, xlim=(0.0, 1.0), ylim=(0.0, 1.0), index: int = 0, xlabel: str = "", ylabel: str = "",
         yscale: str = "linear", xscale: str = "linear", **marks: Any) -> Axes:
    return Axes(index=index, display_box=BOX,
                x=Axis(lim=tuple(map(float, xlim)), label=xlabel, scale=xscale),
                y=Axis(lim=tuple(map(float, ylim)), label=ylabel, scale=yscale),
                **{k: tuple(v) for k, v in marks.items()} if marks else {})


def figure(*axs: Axes, script: str = "fig.py", number: int = 1, **kw: Any) -> FigureModel:
    return FigureModel(id=f"{script}#{number}", script=script, number=number, axes=tuple(axs),
                       source=Source(path=script, line=1), **kw)


def run(*figs: FigureModel, path: str = "fig.py", status: str = "ok", **kw: Any) -> ScriptRun:
    return ScriptRun(path=path, status=status, figures=tuple(figs), **kw)


__all__ = ["Axes", "Axis", "BarSet", "Box", "ColorMapping", "ErrorBars", "FigureModel", "Line", "LoadedTable",
           "PlotCall", "PointSet", "Sample", "ScriptRun", "Source", "Text", "Violin", "axes", "bars",
           "errorbars", "figure", "line", "points", "run", "src", "to_display"]


# --------------------------------------------------------------------------
# added for the axes and visibility rule tests
# --------------------------------------------------------------------------

from figproof.model.records import Patch  # noqa: E402  (kept with the helpers that use it)


def axes_with(x: Axis | None = None, y: Axis | None = None, *, index: int = 0, box=BOX, **fields: Any) -> Axes:
    """An Axes with full control of both Axis records (scale, inversion, categories) and any other field."""
    tuples = {k: tuple(v) if isinstance(v, list) else v for k, v in fields.items()}
    return Axes(index=index, display_box=box, x=x or Axis(), y=y or Axis(), **tuples)


def points_px(px: Sequence[float], py: Sequence[float], *, size: float | Sequence[float] = 36.0,
              face=(0.12, 0.47, 0.71, 1.0), edge=None, line: int = 1, **kw: Any) -> PointSet:
    """A point set given directly in display pixels (data coordinates equal to the pixels)."""
    px_ = np.asarray(px, float)
    py_ = np.asarray(py, float)
    sizes = np.atleast_1d(np.asarray(size, float))
    facecolors = np.atleast_2d(np.asarray(face, float))
    edgecolors = facecolors if edge is None else np.atleast_2d(np.asarray(edge, float))
    return PointSet(kind=kw.pop("kind", "scatter"), x=px_.copy(), y=py_.copy(), px=px_, py=py_, sizes=sizes,
                    facecolors=facecolors, edgecolors=edgecolors, source=src(line), **kw)


def bars_px(boxes: Sequence[Sequence[float]], *, color=(0.5, 0.5, 0.5, 1.0), zorder: float = 1.0,
            draw_order: int | None = None, line: int = 1) -> BarSet:
    """Vertical bars given by their display boxes (x0, y0, x1, y1); data values equal the pixels."""
    b = np.asarray(boxes, float).reshape(-1, 4)
    return BarSet(positions=(b[:, 0] + b[:, 2]) / 2, widths=b[:, 2] - b[:, 0], bottoms=b[:, 1],
                  heights=b[:, 3] - b[:, 1], facecolors=np.tile(np.asarray(color, float), (len(b), 1)),
                  edgecolors=np.tile(np.asarray(color, float), (len(b), 1)), display_boxes=b, zorder=zorder,
                  draw_order=draw_order, source=src(line))


def patch(kind: str, box: Sequence[float], *, face=(0.5, 0.5, 0.5, 1.0), zorder: float = 1.0,
          draw_order: int | None = None, line: int = 1) -> Patch:
    return Patch(kind=kind, display_box=tuple(map(float, box)), facecolor=tuple(map(float, face)),
                 zorder=zorder, draw_order=draw_order, source=src(line))


def box(position: float, values: Sequence[float], *, orientation: str = "vertical", line: int = 1) -> Box:
    """A box from five numbers (whislo, q1, median, q3, whishi) and optional fliers after them."""
    v = [float(a) for a in values]
    return Box(orientation=orientation, position=float(position), whislo=v[0], q1=v[1], median=v[2], q3=v[3],
               whishi=v[4], fliers=np.asarray(v[5:], float), source=src(line))


def text(content: str, box: Sequence[float], *, role: str = "annotation", in_axes: bool = True) -> Text:
    return Text(text=content, role=role, display_box=tuple(map(float, box)), in_axes=in_axes)


# --------------------------------------------------------------------------
# distribution marks and recorded data (added for the distribution rules)
# --------------------------------------------------------------------------


def sample_of(values: Sequence[float], *, origin: str = "boxplot_stats", line: int = 1) -> Sample:
    """A recorded group of raw values, as the child records a statistics helper's input."""
    return Sample(values=np.asarray(values, float), origin=origin, source=src(line))


def box_of(values: Sequence[float], *, position: float = 1.0, sample: int | None = None, line: int = 1,
           orientation: str = "vertical", with_n: bool = True) -> Box:
    """A box with the statistics matplotlib's boxplot_stats computes (quartiles by np.percentile, 1.5 IQR)."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    q1, med, q3 = np.percentile(v, [25, 50, 75])
    iqr = q3 - q1
    inside = v[(v >= q1 - 1.5 * iqr) & (v <= q3 + 1.5 * iqr)]
    return Box(orientation=orientation, position=float(position), median=float(med), q1=float(q1), q3=float(q3),
               whislo=float(inside.min()), whishi=float(inside.max()),
               fliers=v[(v < q1 - 1.5 * iqr) | (v > q3 + 1.5 * iqr)],
               n=int(v.size) if with_n else None, sample=sample, source=src(line))


def violin_of(values: Sequence[float], *, position: float = 1.0, sample: int | None = None, line: int = 1,
              orientation: str = "vertical") -> Violin:
    v = np.asarray(values, float)
    return Violin(orientation=orientation, position=float(position), low=float(np.nanmin(v)),
                  high=float(np.nanmax(v)), n=int(np.isfinite(v).sum()), sample=sample, source=src(line))


def table_of(path: str = "data/measurements.csv", *, groups: dict[str, Sequence[int]] | None = None,
             **columns: Sequence[float]) -> LoadedTable:
    """A loaded table: numeric columns, and text columns as integer codes in ``groups``."""
    return LoadedTable(path=path, reader="pandas.read_csv",
                       columns={k: np.asarray(v, float) for k, v in columns.items()},
                       groups={k: np.asarray(v, np.int64) for k, v in (groups or {}).items()})


def call_of(name: str, *, axes: int | None = 0, line: int = 1, **arrays: Sequence[float]) -> PlotCall:
    return PlotCall(name=name, axes=axes, arrays={k: np.asarray(v, float) for k, v in arrays.items()},
                    source=src(line))


def asym_errorbars(positions, centers, lower, upper, *, line: int = 1, **kw: Any) -> ErrorBars:
    """Error bars with explicit ends (percentile intervals, bootstrap CIs)."""
    return ErrorBars(positions=np.asarray(positions, float), centers=np.asarray(centers, float),
                     lower=np.asarray(lower, float), upper=np.asarray(upper, float), source=src(line), **kw)

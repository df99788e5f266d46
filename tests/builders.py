"""Build figure models by hand for rule tests (no matplotlib involved).

Display coordinates are computed with a plain linear map from the axes'
limits to its display box, as matplotlib does for linear, non-inverted axes.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from figproof.model import (
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

"""What a figure's summaries stand for: recorded groups of raw values and the points drawn near a position.

Shared by the distribution rules.  A *group* is a set of raw observations the
script handed to matplotlib (a statistics helper's input, a point call's
arrays) or loaded from disk (a table column, or a column split by a grouping
column).  Pure functions of the model, like the rules that use them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from figproof.model.records import Axes, FigureModel, PointSet

# Mean/median equality between a drawn centre and a recorded group: the same numbers computed by
# different code paths (pandas, numpy, seaborn) agree to a few ulps, so this only absorbs rounding.
SAME_RTOL = 1e-7
# Plotting calls, and their recorded array keys, that may hold the individual observations.
POINT_CALLS = {"scatter": ("x", "y"), "plot": ("arg0", "arg1", "arg2"), "stem": ("x", "y")}


def finite(values: object) -> np.ndarray:
    """Finite values of an array as float64 (masked entries dropped); empty on unusable input."""
    if values is None:
        return np.zeros(0)
    if isinstance(values, np.ma.MaskedArray):
        values = values.compressed()
    try:
        arr = np.asarray(values, dtype=float).ravel()
    except (TypeError, ValueError):
        return np.zeros(0)
    return arr[np.isfinite(arr)]


def rectilinear(ax: Axes) -> bool:
    return ax.projection == "rectilinear" and not ax.is_colorbar


def coords(ps: PointSet, vertical: bool) -> tuple[np.ndarray, np.ndarray]:
    """(position, value) coordinates of a point set, NaN pairs dropped."""
    x = np.asarray(ps.x, float).ravel()
    y = np.asarray(ps.y, float).ravel()
    m = min(x.size, y.size)
    x, y = x[:m], y[:m]
    pos, val = (x, y) if vertical else (y, x)
    keep = np.isfinite(pos) & np.isfinite(val)
    return pos[keep], val[keep]


def half_width(positions: list[float], default: float = 0.5) -> float:
    """Half the smallest spacing between group positions: how far a group's points may stray."""
    p = np.unique(finite(positions))
    if p.size < 2:
        return default
    return float(np.min(np.diff(p))) / 2


def drawn_near(ax: Axes, position: float, half: float, vertical: bool,
                exclude: np.ndarray | None = None) -> np.ndarray:
    """Value coordinates of the markers drawn within ``half`` of a group position.

    ``exclude`` holds flier values: marker lines sitting exactly on the
    group position whose values are all fliers belong to the box, not to the points.
    """
    found: list[np.ndarray] = []
    for ps in ax.points:
        pos, val = coords(ps, vertical)
        near = np.abs(pos - position) <= half
        if not near.any():
            continue
        if exclude is not None and exclude.size and ps.kind == "line":
            on_box = np.abs(pos[near] - position) <= 1e-9 * max(1.0, abs(position))
            if on_box.all() and np.isin(val[near], exclude).all():
                continue
        found.append(val[near])
    return np.concatenate(found) if found else np.zeros(0)


def matched(sample: np.ndarray, drawn: np.ndarray) -> int:
    """How many values of ``sample`` are drawn (each drawn marker accounts for one value)."""
    if sample.size == 0 or drawn.size == 0:
        return 0
    scale = max(float(np.max(np.abs(sample))), 1e-300)
    step = scale * 1e-9
    a, ca = np.unique(np.round(sample / step), return_counts=True)
    b, cb = np.unique(np.round(drawn / step), return_counts=True)
    _, ia, ib = np.intersect1d(a, b, assume_unique=True, return_indices=True)
    return int(np.minimum(ca[ia], cb[ib]).sum())


def shown(ax: Axes, values: np.ndarray | None, n: int, position: float, half: float, vertical: bool,
           fliers: np.ndarray | None = None) -> int:
    """How many of a group's n observations are drawn as points near its position."""
    drawn = drawn_near(ax, position, half, vertical, fliers)
    if values is not None and values.size:
        return matched(values, drawn)
    return min(int(drawn.size), n)


@dataclass(frozen=True, slots=True)
class Group:
    """A group of raw observations the figure could be summarising, and where it came from."""

    values: np.ndarray
    origin: str  # "sample" | "call" | "table" | "points"
    label: str


def recorded_groups(figure: FigureModel, axes_index: int) -> list[Group]:
    """Groups of raw values recorded for a figure: samples, point-call arrays, loaded table columns and groups."""
    groups: list[Group] = []
    for i, s in enumerate(figure.samples):
        groups.append(Group(finite(s.values), "sample", f"sample {i} ({s.origin})"))
    for call in figure.calls:
        if call.name not in POINT_CALLS or (call.axes is not None and call.axes != axes_index):
            continue
        for key in POINT_CALLS[call.name]:
            if key in call.arrays:
                groups.append(Group(finite(call.arrays[key]), "call", f"{call.name}() {key}"))
    for table in figure.tables:
        groupers = dict(table.groups)
        for name, col in table.columns.items():
            ok = col[np.isfinite(col)]
            # Integer columns with few levels group rows as text columns do (common practice: coded groups).
            if ok.size and 1 < np.unique(ok).size <= 50 and np.all(ok == np.round(ok)):
                groupers.setdefault(name, col)
        for name, col in table.columns.items():
            groups.append(Group(finite(col), "table", f"'{name}' in {table.path}"))
            for gname, codes in groupers.items():
                if gname == name or len(codes) != len(col):
                    continue
                codes = np.asarray(codes, float)
                for level in np.unique(codes[np.isfinite(codes)]):
                    if level < 0 and gname in table.groups:
                        continue  # -1 codes a missing label
                    groups.append(Group(finite(col[codes == level]), "table",
                                         f"'{name}' by '{gname}' in {table.path}"))
    return [g for g in groups if g.values.size >= 1]


def same(a: float, b: float, scale: float) -> bool:
    return abs(a - b) <= SAME_RTOL * max(abs(a), abs(b), scale) + 1e-300


def groups_centred(groups: list[Group], center: float, statistic: str) -> list[Group]:
    """Groups whose mean (or median) equals a drawn centre, distinct by value."""
    out: list[Group] = []
    seen: set[bytes] = set()
    for g in groups:
        if g.values.size < 2:
            continue
        c = float(np.mean(g.values)) if statistic == "mean" else float(np.median(g.values))
        spread = float(np.ptp(g.values))
        if not same(c, center, spread):
            continue
        key = np.sort(g.values).tobytes()
        if key not in seen:
            seen.add(key)
            out.append(g)
    return out


def fmt(v: float) -> str:
    return f"{v:.3g}"


def where(vertical: bool, position: float, ax: Axes | None = None) -> str:
    """'x = 2', or "x = 2 ('knockout')" when a tick label names the group at that position."""
    text = f"{'x' if vertical else 'y'} = {fmt(position)}"
    label = group_label(ax, vertical, position) if ax is not None else None
    return f"{text} ('{label}')" if label else text


def group_label(ax: Axes, vertical: bool, position: float) -> str | None:
    """The tick label at ``position`` on the group axis, unless it only repeats the number."""
    axis = ax.x if vertical else ax.y
    for loc, label in axis.ticks:
        if math.isclose(loc, position, rel_tol=1e-9, abs_tol=1e-9):
            try:
                if math.isclose(float(label.replace("\u2212", "-")), position, rel_tol=1e-9, abs_tol=1e-9):
                    return None
            except ValueError:
                pass
            return label
    return None

"""Where on a figure a finding is: boxes in the model's display coordinates, for the HTML report's marks.

Each finding of a figure gets the boxes of what it is about: the points and
line vertices cut off by the axis limits (placed on the edge they cross), the
markers that overlap, the text or marks of the colours a colour finding names,
the bars, boxes or error bars judged as a summary.  Boxes are ``(x0, y0, x1,
y1)`` in display pixels of the figure as the model describes it (origin at the
bottom left, as in matplotlib); the page scales them to the rendered image, so
they sit on the right pixels at any dpi.  A finding with nothing more precise
to point at is marked by its axes.  Pure functions of the model.
"""

from __future__ import annotations

import re
from collections.abc import Iterable

import numpy as np

from figproof.model.findings import Finding
from figproof.model.records import Axes, FigureModel
from figproof.model.records import Box as BoxStats

Box = tuple[float, float, float, float]
_PAD = 4.0  # pixels between a mark and its outline
_HEX = re.compile(r"#[0-9a-fA-F]{6}\b")
_MAX_BOXES = 12
_MAX_POINTS = 20000  # markers looked at for the overlap outlines of one point set


def _hex(rgba: Iterable[float]) -> str:
    r, g, b = (round(float(v) * 255) for v in list(rgba)[:3])
    return f"#{r:02x}{g:02x}{b:02x}"


def _around(px: np.ndarray, py: np.ndarray, pad: float = _PAD) -> Box | None:
    ok = np.isfinite(px) & np.isfinite(py)
    if not ok.any():
        return None
    return (float(px[ok].min()) - pad, float(py[ok].min()) - pad, float(px[ok].max()) + pad,
            float(py[ok].max()) + pad)


def _union(boxes: list[Box]) -> Box | None:
    if not boxes:
        return None
    return (min(b[0] for b in boxes), min(b[1] for b in boxes), max(b[2] for b in boxes), max(b[3] for b in boxes))


def _clip(box: Box, frame: Box, margin: float) -> Box | None:
    """``box`` cut to ``frame`` grown by ``margin``; None when nothing of it is left."""
    x0, y0 = max(box[0], frame[0] - margin), max(box[1], frame[1] - margin)
    x1, y1 = min(box[2], frame[2] + margin), min(box[3], frame[3] + margin)
    return (x0, y0, x1, y1) if x1 > x0 and y1 > y0 else None


def _axes_box(ax: Axes) -> Box:
    x0, y0, x1, y1 = ax.display_box
    return (min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1))


def _data_positions(ax: Axes) -> tuple[np.ndarray, np.ndarray]:
    """Display positions of every data point and data line vertex of the axes."""
    xs = [np.asarray(p.px, float).ravel() for p in ax.points]
    ys = [np.asarray(p.py, float).ravel() for p in ax.points]
    for line in ax.lines:
        if line.role == "data":
            xs.append(np.asarray(line.px, float).ravel())
            ys.append(np.asarray(line.py, float).ravel())
    if not xs:
        return np.zeros(0), np.zeros(0)
    return np.concatenate(xs), np.concatenate(ys)


def clipped(ax: Axes) -> list[Box]:
    """Boxes on the edges of the axes where data points, line vertices or bar ends lie beyond the view.

    The values themselves are not drawn; their positions are pulled onto the edge they cross, and each
    edge with cut values gets one box around them.
    """
    x0, y0, x1, y1 = _axes_box(ax)
    px, py = _data_positions(ax)
    ends_x, ends_y = [px], [py]
    for bars in ax.bars:
        b = np.asarray(bars.display_boxes, float).reshape(-1, 4)
        vertical = bars.orientation == "vertical"
        ends_x.append((b[:, 0] + b[:, 2]) / 2 if vertical else np.where(np.abs(b[:, 2] - x0) > np.abs(b[:, 0] - x0),
                                                                         b[:, 2], b[:, 0]))
        ends_y.append(np.where(np.abs(b[:, 3] - y0) > np.abs(b[:, 1] - y0), b[:, 3], b[:, 1]) if vertical
                      else (b[:, 1] + b[:, 3]) / 2)
    px, py = np.concatenate(ends_x), np.concatenate(ends_y)
    ok = np.isfinite(px) & np.isfinite(py)
    px, py = px[ok], py[ok]
    tol = 0.5
    out: list[Box] = []
    sides = {"top": py > y1 + tol, "bottom": py < y0 - tol, "right": px > x1 + tol, "left": px < x0 - tol}
    for side, beyond in sides.items():
        if not beyond.any():
            continue
        cx, cy = np.clip(px[beyond], x0, x1), np.clip(py[beyond], y0, y1)
        box = _around(cx, cy, 6.0)
        if box is not None:
            if side in ("top", "bottom"):
                edge = y1 if side == "top" else y0
                box = (box[0], edge - 8.0, box[2], edge + 8.0)
            else:
                edge = x1 if side == "right" else x0
                box = (edge - 8.0, box[1], edge + 8.0, box[3])
            out.append(box)
    return out


def _close_pairs(xy: np.ndarray, radius: float) -> np.ndarray:
    """Indices of points with a neighbour closer than ``radius`` (exact: distances within grid neighbourhoods).

    Points are put in square cells of side ``radius``; two points closer than ``radius`` lie in the same or
    adjacent cells, so only those pairs are measured.
    """
    cells = np.floor(xy / radius).astype(np.int64)
    order = np.lexsort((cells[:, 1], cells[:, 0]))
    buckets: dict[tuple[int, int], list[int]] = {}
    for i in order.tolist():
        buckets.setdefault((int(cells[i, 0]), int(cells[i, 1])), []).append(i)
    close: set[int] = set()
    for (cx, cy), members in buckets.items():
        near = [j for dx in (-1, 0, 1) for dy in (-1, 0, 1) for j in buckets.get((cx + dx, cy + dy), ())]
        a, b = xy[members], xy[near]
        d2 = ((a[:, None, :] - b[None, :, :]) ** 2).sum(axis=-1)
        same = np.asarray(members)[:, None] == np.asarray(near)[None, :]
        hit = (d2 < radius * radius) & ~same
        close.update(np.asarray(members)[hit.any(axis=1)].tolist())
    return np.array(sorted(close), dtype=np.int64)


def overlapping(ax: Axes, dpi: float) -> list[Box]:
    """Boxes around groups of markers that overlap a neighbour closer than the marker radius."""
    out: list[Box] = []
    for pts in ax.points:
        px, py = np.asarray(pts.px, float), np.asarray(pts.py, float)
        ok = np.isfinite(px) & np.isfinite(py)
        if ok.sum() < 2:
            continue
        sizes = np.asarray(pts.sizes, float)
        radius = float(np.sqrt(np.median(sizes)) / 2.0 * dpi / 72.0) if sizes.size else 3.0
        xy = np.column_stack([px[ok], py[ok]])
        if len(xy) > _MAX_POINTS:  # an outline needs no more: every k-th point, so the same check marks the same
            xy = xy[:: -(-len(xy) // _MAX_POINTS)]
        involved = _close_pairs(xy, max(radius, 0.5))
        if involved.size:
            out += _clusters(xy[involved], 4.0 * max(radius, 1.0))
    return out


def _clusters(xy: np.ndarray, reach: float) -> list[Box]:
    """Boxes around groups of points whose grid cells (side ``reach``) touch one another."""
    cells = {(int(a), int(b)) for a, b in np.floor(xy / reach).astype(np.int64)}
    parent = {c: c for c in cells}

    def root(c: tuple[int, int]) -> tuple[int, int]:
        while parent[c] != c:
            parent[c] = parent[parent[c]]
            c = parent[c]
        return c

    for cx, cy in cells:
        for dx in (-1, 0, 1):
            for dy in (-1, 0, 1):
                other = (cx + dx, cy + dy)
                if other in parent:
                    parent[root(other)] = root((cx, cy))
    keys = np.floor(xy / reach).astype(np.int64)
    groups: dict[tuple[int, int], list[int]] = {}
    for i, (a, b) in enumerate(keys.tolist()):
        groups.setdefault(root((a, b)), []).append(i)
    out = []
    for members in sorted(groups.values()):
        box = _around(xy[members, 0], xy[members, 1], reach / 4 + _PAD)
        if box is not None:
            out.append(box)
    return out


def _by_colour(figure: FigureModel, ax: Axes | None, hexes: set[str]) -> list[Box]:
    """Texts and marks drawn in any of the colours ``hexes``."""
    out: list[Box] = []
    texts = list(figure.texts) + [t for a in figure.axes for t in a.texts]
    for t in texts:
        if _hex(t.color) in hexes:
            out.append((t.display_box[0] - 2, t.display_box[1] - 2, t.display_box[2] + 2, t.display_box[3] + 2))
    for a in [ax] if ax is not None else list(figure.axes):
        marks: list[Box | None] = []
        for line in a.lines:
            if line.role == "data" and _hex(line.color) in hexes:
                marks.append(_around(np.asarray(line.px, float), np.asarray(line.py, float)))
        for pts in a.points:
            colours = {_hex(c) for c in np.asarray(pts.facecolors, float).reshape(-1, 4)}
            colours |= {_hex(c) for c in np.asarray(pts.edgecolors, float).reshape(-1, 4)}
            if colours & hexes:
                marks.append(_around(np.asarray(pts.px, float), np.asarray(pts.py, float)))
        # values beyond the view are not drawn: outline only the part of a mark inside the axes
        out += [c for c in (_clip(m, _axes_box(a), _PAD) for m in marks if m is not None) if c is not None]
        for bars in a.bars:
            faces = np.asarray(bars.facecolors, float).reshape(-1, 4)
            for k, b in enumerate(np.asarray(bars.display_boxes, float).reshape(-1, 4)):
                if k < len(faces) and _hex(faces[k]) in hexes:
                    out.append((b[0], b[1], b[2], b[3]))
    return out


def _to_display(ax: Axes, value: np.ndarray, along_y: bool) -> np.ndarray:
    axis = ax.y if along_y else ax.x
    lo, hi = axis.lim
    x0, y0, x1, y1 = ax.display_box
    p0, p1 = (y0, y1) if along_y else (x0, x1)
    v = np.asarray(value, float)
    if axis.scale == "log":
        with np.errstate(divide="ignore", invalid="ignore"):
            v, lo, hi = np.log10(v), np.log10(lo), np.log10(hi)
    span = hi - lo
    return p0 + (v - lo) / span * (p1 - p0) if span else np.full_like(v, np.nan)


def _summary_marks(ax: Axes) -> list[Box]:
    """Bars, boxes, violins and error bars of the axes: the marks a summary finding is about."""
    out: list[Box] = []
    for bars in ax.bars:
        for b in np.asarray(bars.display_boxes, float).reshape(-1, 4):
            out.append((min(b[0], b[2]) - 2, min(b[1], b[3]) - 2, max(b[0], b[2]) + 2, max(b[1], b[3]) + 2))
    for item in list(ax.boxes) + list(ax.violins):
        vertical = item.orientation == "vertical"
        low, high = (item.whislo, item.whishi) if isinstance(item, BoxStats) else (item.low, item.high)
        along = _to_display(ax, np.array([low, high]), vertical)
        across = _to_display(ax, np.array([item.position - 0.3, item.position + 0.3]), not vertical)
        if vertical:
            box = (across.min(), along.min(), across.max(), along.max())
        else:
            box = (along.min(), across.min(), along.max(), across.max())
        if all(np.isfinite(box)):
            out.append((float(box[0]) - _PAD, float(box[1]) - _PAD, float(box[2]) + _PAD, float(box[3]) + _PAD))
    if not out:
        for eb in ax.errorbars:
            vertical = eb.orientation == "vertical"
            along_lo = _to_display(ax, eb.lower, vertical)
            along_hi = _to_display(ax, eb.upper, vertical)
            across = _to_display(ax, eb.positions, not vertical)
            for a, b, c in zip(along_lo, along_hi, across, strict=False):
                box = (c - 6, min(a, b), c + 6, max(a, b)) if vertical else (min(a, b), c - 6, max(a, b), c + 6)
                if all(np.isfinite(box)):
                    out.append(tuple(float(v) for v in box))  # type: ignore[arg-type]
    return out


def _box_at(ax: Axes, message: str) -> list[Box]:
    """The box whose position the message names ("the box at x = 2 ...")."""
    found = re.search(r"at [xy] = (-?[0-9.]+(?:e-?\d+)?)", message)
    marks = _summary_marks(ax)
    if not found or not ax.boxes:
        return marks
    position = float(found.group(1))
    chosen = [k for k, b in enumerate(ax.boxes) if abs(b.position - position) < 1e-6 * max(1.0, abs(position))]
    boxes_only = marks[sum(len(np.asarray(b.display_boxes).reshape(-1, 4)) for b in ax.bars):]
    return [boxes_only[k] for k in chosen if k < len(boxes_only)] or marks


def finding_boxes(figure: FigureModel, finding: Finding) -> list[Box]:
    """Boxes (display pixels, origin bottom left) that show where ``finding`` lies on ``figure``."""
    ax = next((a for a in figure.axes if a.index == finding.axes), None)
    boxes: list[Box] = []
    rule = finding.rule
    if ax is not None:
        if rule == "axis-clips-data":
            boxes = clipped(ax)
        elif rule == "points-hidden":
            boxes = overlapping(ax, figure.dpi)
            if not boxes and ax.legend_box is not None and "legend" in finding.message:
                boxes = [ax.legend_box]
        elif rule in ("bars-for-continuous", "summary-hides-small-n", "errorbars-ambiguous"):
            boxes = _summary_marks(ax)
        elif rule == "box-hides-modes":
            boxes = _box_at(ax, finding.message)
        elif rule == "dots-binned":
            px, py = _data_positions(ax)
            box = _around(px, py)
            boxes = [box] if box is not None else []
    if rule in ("low-contrast", "colours-confusable-cvd", "colours-confusable-gray"):
        hexes = {h.lower() for h in _HEX.findall(finding.message)}
        if rule == "low-contrast":
            hexes = set(list(dict.fromkeys(h.lower() for h in _HEX.findall(finding.message)))[:1])
        boxes = _by_colour(figure, ax, hexes)
    boxes = list(dict.fromkeys(boxes))
    if not boxes and ax is not None:
        boxes = [_axes_box(ax)]
    if len(boxes) > _MAX_BOXES:
        joined = _union(boxes)
        boxes = [joined] if joined is not None else []
    return boxes


__all__ = ["Box", "clipped", "finding_boxes", "overlapping"]

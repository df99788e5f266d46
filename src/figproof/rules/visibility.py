"""Visibility rules: data markers a reader cannot see.

Everything here works in display pixels of the rendered figure, where
overlap is what the eye gets.  A marker of area ``s`` points² has a radius of
``0.5 * sqrt(s)`` points, and a point is 1/72 inch, so at ``dpi`` pixels per
inch the radius is ``0.5 * sqrt(s) * dpi / 72`` pixels.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from figproof.model.findings import Detail, Hit
from figproof.model.records import Axes, FigureModel, PointSet
from figproof.rules.base import Knob, Knobs, counted, rule
from figproof.science.colour import blend_over, delta_e

HIDDEN_WARNING = 0.4
HIDDEN_ERROR = 0.6
DUPLICATE_ERROR = 0.25
DUPLICATE_PX = 0.5
COVERED_ERROR = 0.05
OPAQUE_ALPHA = 0.9
FAINT_DELTA_E = 5.0
GRID_ABOVE = 2e5
DENSITY_ALPHA = 0.6  # common practice: markers this see-through show where they pile up...
SATURATION = 0.9  # ...until a stack is this opaque (at alpha 0.5, four markers): deeper stacks hide counts
COVER_SHARE = 0.5  # centres closer than half a radius: the upper marker covers about two thirds of the lower

_DEFAULT_DPI = 100.0  # matplotlib's rcParams figure.dpi default
_DEFAULT_SIZE = 36.0  # matplotlib's rcParams lines.markersize (6 pt) squared
_LEGEND_KINDS = ("legend", "legend-entry")


def marker_radius_px(sizes: np.ndarray, dpi: float) -> np.ndarray:
    """Display-pixel radius of markers of area ``sizes`` (points²) at ``dpi``.

    Parameters
    ----------
    sizes
        Marker areas in points², as ``scatter(s=...)`` takes them.
    dpi
        Pixels per inch of the rendering.

    Returns
    -------
    numpy.ndarray
        ``0.5 * sqrt(s) * dpi / 72``; invalid sizes give radius 0.
    """
    s = np.asarray(sizes, dtype=float)
    s = np.where(np.isfinite(s) & (s > 0), s, 0.0)
    return 0.5 * np.sqrt(s) * dpi / 72.0


@dataclass(frozen=True, slots=True)
class Overlap:
    """Per-point overlap flags of one point set."""

    hidden: np.ndarray  # nearest neighbour closer than the larger of the two radii
    duplicate: np.ndarray  # nearest neighbour closer than the duplicate distance
    exact: bool  # True: exact nearest neighbours; False: grid-occupancy estimate


def overlap(px: np.ndarray, py: np.ndarray, radius: np.ndarray, *, duplicate_px: float = DUPLICATE_PX,
            grid_above: float = GRID_ABOVE) -> Overlap:
    """Which markers are hidden by, or duplicate, their nearest neighbour.

    Up to ``grid_above`` points this is exact (the nearest other point, from a
    distance matrix for small sets and scipy ``cKDTree.query`` with k=2 above
    ``BRUTE_FORCE_MAX``).  Above ``grid_above``, a grid-occupancy count: a point counts as hidden when
    another point shares its grid cell, with cells of side ``sqrt(pi) * r``
    so that a cell has the area of the disc of radius ``r`` (the median
    radius); for points scattered at random both tests then flag the same
    expected share, ``1 - exp(-density * pi * r**2)``.
    """
    n = px.size
    none = np.zeros(n, dtype=bool)
    if n < 2:
        return Overlap(none, none.copy(), True)
    if n <= grid_above:
        near, other = _nearest(np.column_stack([px, py]))
        return Overlap(near < np.maximum(radius, radius[other]), near < duplicate_px, True)
    r = float(np.median(radius))
    hidden = _shares_cell(px, py, math.sqrt(math.pi) * r) if r > 0 else none
    duplicate = _shares_cell(px, py, math.sqrt(math.pi) * duplicate_px)
    return Overlap(hidden, duplicate, False)


BRUTE_FORCE_MAX = 1500  # below this, a distance matrix is faster than importing scipy (~0.3 s)


def _nearest(xy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distance to, and index of, each point's nearest other point (the k=2 query of a k-d tree)."""
    if len(xy) <= BRUTE_FORCE_MAX:
        d2 = ((xy[:, None, :] - xy[None, :, :]) ** 2).sum(axis=2)
        np.fill_diagonal(d2, np.inf)
        other = np.argmin(d2, axis=1)
        return np.sqrt(d2[np.arange(len(xy)), other]), other
    from scipy.spatial import cKDTree  # imported on use: scipy is slow to import

    dist, idx = cKDTree(xy).query(xy, k=2)
    return dist[:, 1], idx[:, 1]


def _shares_cell(px: np.ndarray, py: np.ndarray, side: float) -> np.ndarray:
    """True for points whose grid cell of the given side holds at least one other point."""
    cx = np.floor((px - px.min()) / side).astype(np.int64)
    cy = np.floor((py - py.min()) / side).astype(np.int64)
    key = cx * (int(cy.max()) + 1) + cy
    _, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
    return counts[inverse.ravel()] >= 2


def _per_point(values: np.ndarray, n: int, width: int) -> np.ndarray | None:
    """Broadcast a per-point property cyclically, as matplotlib collections do; None when absent."""
    arr = np.asarray(values, dtype=float)
    if arr.size == 0 or arr.size % width:
        return None
    arr = arr.reshape(-1, width) if width > 1 else arr.ravel()
    if len(arr) == n:
        return arr
    return np.resize(arr, (n, width) if width > 1 else n)


def _background(ax: Axes, figure: FigureModel) -> np.ndarray:
    """The opaque colour markers are drawn over: the axes face over the figure face over white paper."""
    fig_rgb = blend_over(np.array([figure.facecolor], dtype=float))[0]
    rgb = blend_over(np.array([ax.facecolor], dtype=float), np.append(fig_rgb, 1.0))[0]
    return np.append(rgb, 1.0)


def _drawn_after(z: float, order: int | None, pz: float, porder: int | None) -> bool:
    """Does an artist with z-order ``z`` / draw order ``order`` paint over one with ``pz`` / ``porder``?"""
    if z != pz:
        return z > pz
    # equal z-orders are drawn in the order the artists were added; unknown order: assume not over
    return order is not None and porder is not None and order > porder


def _covered(px: np.ndarray, py: np.ndarray, radius: np.ndarray, boxes: list[tuple[float, float, float, float]]
             ) -> np.ndarray:
    """Points whose whole marker lies inside one of the display boxes (x0, y0, x1, y1)."""
    out = np.zeros(px.size, dtype=bool)
    if not boxes or px.size == 0:
        return out
    order = np.argsort(px, kind="stable")
    sx = px[order]
    for x0, y0, x1, y1 in boxes:
        x0, x1 = sorted((x0, x1))
        y0, y1 = sorted((y0, y1))
        if not (x1 > x0 and y1 > y0):
            continue
        # candidates by x through the sorted order, then the exact whole-marker test
        cand = order[np.searchsorted(sx, x0, side="left"):np.searchsorted(sx, x1, side="right")]
        if cand.size == 0:
            continue
        r = radius[cand]
        inside = ((px[cand] - r >= x0) & (px[cand] + r <= x1) & (py[cand] - r >= y0) & (py[cand] + r <= y1))
        out[cand[inside]] = True
    return out


def _opaque_boxes(ax: Axes, ps: PointSet, opaque: float) -> list[tuple[float, float, float, float]]:
    """Display boxes of bars and shapes with a nearly opaque face drawn after the point set."""
    boxes: list[tuple[float, float, float, float]] = []
    for b in ax.bars:
        if not _drawn_after(b.zorder, b.draw_order, ps.zorder, ps.draw_order):
            continue
        disp = np.asarray(b.display_boxes, dtype=float).reshape(-1, 4) if b.display_boxes.size else np.zeros((0, 4))
        face = _per_point(b.facecolors, len(disp), 4)
        for k, box in enumerate(disp):
            if face is not None and np.isfinite(face[k, 3]) and face[k, 3] >= opaque and np.isfinite(box).all():
                boxes.append((float(box[0]), float(box[1]), float(box[2]), float(box[3])))
    for p in ax.patches:
        if p.kind in _LEGEND_KINDS or not _drawn_after(p.zorder, p.draw_order, ps.zorder, ps.draw_order):
            continue
        if p.facecolor[3] >= opaque and all(math.isfinite(v) for v in p.display_box):
            boxes.append(tuple(float(v) for v in p.display_box))  # type: ignore[arg-type]
    return boxes


def _color_scores(colors: np.ndarray, background: np.ndarray) -> np.ndarray:
    """CAM02-UCS difference between each RGBA colour blended over the background and the background."""
    c = np.nan_to_num(np.asarray(colors, dtype=float).reshape(-1, 4), nan=0.0)
    # a cheap bound first: a colour that moves some channel by >= 0.3 is plainly visible
    step = c[:, 3] * np.abs(c[:, :3] - background[:3]).max(axis=1)
    score = np.full(len(c), np.inf)
    todo = step < 0.3
    if todo.any():
        uniq, inv = np.unique(c[todo], axis=0, return_inverse=True)
        shown = blend_over(uniq, background)
        score[todo] = delta_e(shown, np.tile(background[:3], (len(uniq), 1)))[inv.ravel()]
    return score


def _backdrops(ps: PointSet, where: np.ndarray, background: np.ndarray) -> list[tuple[np.ndarray, np.ndarray]]:
    """The points of ``where`` grouped by what lies beneath them (the child's backdrop, else the axes face).

    A white median dot on a violin's inner box sits on the box, not on the axes face.
    """
    drops = np.asarray(ps.backdrops, float)
    if drops.ndim != 2 or drops.shape != (ps.x.size, 4) or where.size == 0:
        return [(background, np.arange(where.size))]
    under = np.tile(np.r_[background[:3], 1.0], (where.size, 1))
    found = ~np.isnan(drops[where]).any(axis=1)
    under[found, :3] = drops[where][found, :3]
    uniq, inv = np.unique(under, axis=0, return_inverse=True)
    return [(uniq[k], np.flatnonzero(inv.ravel() == k)) for k in range(len(uniq))]


def _faint(ps: PointSet, keep: np.ndarray, background: np.ndarray, limit: float) -> tuple[np.ndarray, float]:
    """Per drawn point: is the marker (face and edge) nearly invisible over the background? Also its lowest alpha."""
    where = np.flatnonzero(keep)
    best = np.zeros(where.size)
    alpha = np.zeros(where.size)
    seen_any = False
    for colors in (ps.facecolors, ps.edgecolors):
        rows = np.asarray(colors, dtype=float)
        if rows.size == 0 or rows.size % 4:
            continue
        rows = rows.reshape(-1, 4)
        seen_any = True
        # matplotlib cycles a short colour list over the points: score the rows once per backdrop, then index
        pick = where % len(rows)
        for under, members in _backdrops(ps, where, background):
            best[members] = np.maximum(best[members], _color_scores(rows, under)[pick[members]])
        alpha = np.maximum(alpha, np.nan_to_num(rows[:, 3], nan=0.0)[pick])
    if not seen_any:
        return np.zeros(where.size, dtype=bool), 1.0
    faint = best < limit
    return faint, float(alpha[faint].min()) if faint.any() else 1.0


@rule(
    "points-hidden",
    severity="warning",
    confidence="likely",
    why="""
        A dot plot or scatter plot promises to show every observation. Markers drawn on top of each other
        (large markers, many points, values rounded to a few levels), markers painted over by bars or the
        legend drawn later, and markers so transparent or pale that they vanish into the background all
        break that promise without any visible sign: the reader counts fewer points, misjudges where most of
        them lie, and cannot see outliers. A marker counts as hidden when a neighbour's centre is closer
        than half its radius (the upper disc then covers about two thirds of it; a radius apart, both are
        plainly seen). Markers drawn see-through (opacity 0.6 or less) show where they pile up, so their
        overlap is not reported, unless many stack on one spot: where k markers of opacity a overlap, the
        spot is 1 - (1 - a)^k opaque, and from 90% on one more marker changes nothing a reader sees.
    """,
    fix="""
        For overlap: use smaller markers (`s=`), spread tied values with jitter or a swarm layout
        (seaborn's `stripplot`/`swarmplot`), or, for very many points, show density instead (hexbin, 2-D
        histogram) or a transparent marker with an opaque outline. For points under bars: draw the points
        after the bars or with a higher `zorder`, or drop the bars. For points under the legend: move it
        (`loc=`, `bbox_to_anchor=` outside the axes). For faint markers: raise `alpha` or darken the colour.
    """,
    sources=(
        "matplotlib documentation, Axes.scatter: s is the marker size in points**2; one point is 1/72 inch "
        "(matplotlib 'Transformations' tutorial: fig.dpi pixels per inch).",
        "scipy documentation, scipy.spatial.cKDTree.query (k nearest neighbours).",
        "matplotlib documentation, Artist.set_zorder: artists with higher zorder are drawn on top; equal "
        "zorders are drawn in the order the artists were added.",
        "Luo, Cui & Li (2006), CAM02-UCS: colour difference of a marker blended over the background.",
        "Common practice: one observation per visible marker; 40% / 60% hidden and 25% duplicates as "
        "warning / error levels, half a radius between centres, opacity 0.6 and a 90% opaque stack are this "
        "project's choice; the overlap of two equal discs is the circle-circle intersection area.",
    ),
    knobs=(
        Knob(name="hidden_warning", default=HIDDEN_WARNING, minimum=0, maximum=1,
             help="Share of overlapped markers in one point set that makes a warning."),
        Knob(name="hidden_error", default=HIDDEN_ERROR, minimum=0, maximum=1,
             help="Share of overlapped markers in one point set that makes an error."),
        Knob(name="duplicate_error", default=DUPLICATE_ERROR, minimum=0, maximum=1,
             help="Share of markers within duplicate_px of another that makes an error."),
        Knob(name="duplicate_px", default=DUPLICATE_PX, minimum=0,
             help="Distance in display pixels below which two markers are duplicates."),
        Knob(name="covered_error", default=COVERED_ERROR, minimum=0, maximum=1,
             help="Share of markers under opaque shapes or the legend that makes an error (any makes a warning)."),
        Knob(name="opaque_alpha", default=OPAQUE_ALPHA, minimum=0, maximum=1,
             help="Face alpha at or above which a bar or shape drawn later hides what is beneath it."),
        Knob(name="faint_delta_e", default=FAINT_DELTA_E, minimum=0,
             help="CAM02-UCS colour difference from the background below which a marker is nearly invisible."),
        Knob(name="grid_above", default=GRID_ABOVE, minimum=2,
             help="Point count above which overlap is estimated on a grid instead of by nearest neighbours."),
        Knob(name="density_alpha", default=DENSITY_ALPHA, minimum=0, maximum=1,
             help="Marker opacity at or below which overlapping markers show density and are not reported, "
                  "unless many pile up on one spot (a stack 90% opaque)."),
    ),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        # leaf counts of 1500 rosettes against days after sowing, both recorded as whole numbers
        rng = np.random.default_rng(7)
        days = rng.integers(10, 20, size=1500)
        leaves = days // 2 + rng.integers(0, 4, size=1500)
        fig, ax = plt.subplots()
        ax.scatter(days, leaves, s=40)
        ax.set_xlabel("days after sowing")
        ax.set_ylabel("leaves")
        fig.savefig("leaves.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np
        # leaf area (cm²) of 60 rosettes against their fresh weight (mg)
        rng = np.random.default_rng(7)
        weight = rng.uniform(20.0, 120.0, size=60)
        area = 0.04 * weight + rng.normal(0.0, 0.4, size=60)
        fig, ax = plt.subplots()
        ax.scatter(weight, area, s=12)
        ax.set_xlabel("fresh weight (mg)")
        ax.set_ylabel("leaf area (cm²)")
        fig.savefig("leaf_area.png")
    """,
)
def points_hidden(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """Data markers that cannot be seen: overplotted, under opaque shapes or the legend, or nearly invisible.

    Per point set, in display pixels, counting only markers inside the axes
    box (markers outside it are axis-clips-data's business).  Three reasons,
    each its own finding: overlap (nearest neighbour closer than half the larger
    of the two marker radii; duplicates closer than ``duplicate_px``),
    covered (the whole marker inside a bar or shape with face alpha >=
    ``opaque_alpha`` drawn later, or inside the legend box), and faint (the
    marker blended over the background differs from it by less than
    ``faint_delta_e``, counted only where no neighbour overlaps to build up
    density).  Polar, 3-D and colour-bar axes are skipped.
    """
    k = {name: float(knobs.get(name, default)) for name, default in (
        ("hidden_warning", HIDDEN_WARNING), ("hidden_error", HIDDEN_ERROR), ("duplicate_error", DUPLICATE_ERROR),
        ("duplicate_px", DUPLICATE_PX), ("covered_error", COVERED_ERROR), ("opaque_alpha", OPAQUE_ALPHA),
        ("faint_delta_e", FAINT_DELTA_E), ("grid_above", GRID_ABOVE), ("density_alpha", DENSITY_ALPHA))}
    dpi = float(figure.dpi) if math.isfinite(figure.dpi) and figure.dpi > 0 else _DEFAULT_DPI
    for ax in figure.axes:
        if ax.projection != "rectilinear" or ax.is_colorbar:
            continue
        found = [hit for i, ps in enumerate(ax.points) for hit in point_set_problems(ax, i, ps, figure, k, dpi)]
        if found:
            yield _one_per_axes(ax, found)


_RANK = {"error": 0, None: 1, "warning": 1, "note": 2}


def _one_per_axes(ax: Axes, found: list[Hit]) -> Hit:
    """All hidden-marker problems of one axes as one finding: the worst first, the rest as details."""
    found = sorted(found, key=lambda h: _RANK[h.severity])
    head = found[0]
    rest = len(found) - 1
    more = f"; and {rest} more problem{'s' * (rest != 1)} with markers of this axes" if rest else ""
    return Hit(message=head.message + more, source=head.source, axes=ax.index, severity=head.severity,
               confidence=head.confidence, key=":".join(h.key for h in found),
               details=tuple(Detail(message=h.message, source=h.source, axes=ax.index) for h in found))


def _on_a_line(ax: Axes, ps: PointSet) -> bool:
    """Markers of a line that is also drawn: they sit along a curve the line already shows."""
    return ps.kind == "line" and any(
        ln.role == "data" and ln.source == ps.source and ln.x.size == ps.x.size and ln.linestyle not in
        ("", " ", "None", "none") for ln in ax.lines)


def _see_through(ps: PointSet) -> float:
    """The markers' opacity (face alpha times the set's alpha): low opacity is the remedy for overplotting."""
    faces = np.asarray(ps.facecolors, float)
    alpha = float(np.nanmax(faces[:, 3])) if faces.ndim == 2 and faces.shape[0] and faces.shape[1] == 4 else 1.0
    return alpha


def _deep_share(px: np.ndarray, py: np.ndarray, radius: float, alpha: float, grid_above: float) -> float:
    """Share of markers under so many others that their see-through colour no longer adds up.

    Where k markers of opacity ``alpha`` cover one spot it is 1 - (1 - alpha)**k opaque; from SATURATION
    on, one more marker changes nothing a reader can see.  A marker's depth is the number of markers
    (itself included) whose disc covers its centre.
    """
    n = px.size
    if n == 0 or alpha >= 1.0:
        return 1.0 if n else 0.0
    depth = math.ceil(math.log(1.0 - SATURATION) / math.log(1.0 - max(alpha, 1e-6)))
    xy = np.column_stack([px, py])
    if n <= BRUTE_FORCE_MAX:
        d2 = ((xy[:, None, :] - xy[None, :, :]) ** 2).sum(axis=2)
        counts = (d2 < radius * radius).sum(axis=1)
    elif n <= grid_above:
        from scipy.spatial import cKDTree

        counts = np.asarray(cKDTree(xy).query_ball_point(xy, radius, return_length=True))
    else:
        side = max(math.sqrt(math.pi) * radius, 1e-9)
        cells = np.floor(xy / side)
        _, inverse, per_cell = np.unique(cells, axis=0, return_inverse=True, return_counts=True)
        counts = per_cell[inverse.ravel()]
    return float((counts >= depth).mean())


def point_set_problems(ax: Axes, i: int, ps: PointSet, figure: FigureModel, k: dict[str, float],
                    dpi: float) -> Iterator[Hit]:
    x0, y0, x1, y1 = ax.display_box
    x0, x1 = sorted((x0, x1))
    y0, y1 = sorted((y0, y1))
    background = _background(ax, figure)
    px = np.asarray(ps.px, dtype=float).ravel()
    py = np.asarray(ps.py, dtype=float).ravel()
    n = min(px.size, py.size)
    px, py = px[:n], py[:n]
    slack = 0.5  # half a pixel of rounding at the axes edge
    keep = (np.isfinite(px) & np.isfinite(py) & (px >= x0 - slack) & (px <= x1 + slack)
            & (py >= y0 - slack) & (py <= y1 + slack))
    m = int(keep.sum())
    if m == 0:
        return
    sizes = _per_point(ps.sizes, n, 1)
    radius = marker_radius_px(sizes[keep] if sizes is not None else np.full(m, _DEFAULT_SIZE), dpi)
    kx, ky = px[keep], py[keep]

    # two markers whose centres are a radius apart are both plainly seen; closer than half a radius, the
    # upper one covers about two thirds of the lower (equal discs): that one can no longer be counted
    ov = overlap(kx, ky, COVER_SHARE * radius, duplicate_px=k["duplicate_px"], grid_above=k["grid_above"])
    hidden, dups = int(ov.hidden.sum()), int(ov.duplicate.sum())
    severity: str | None = None
    if hidden >= k["hidden_error"] * m or (dups and dups >= k["duplicate_error"] * m):
        severity = "error"
    elif hidden and hidden >= k["hidden_warning"] * m:
        severity = "warning"
    # markers drawn see-through already show density (the remedy for overplotting), and markers along a
    # drawn line show its course: their overlap is not reported
    alpha = _see_through(ps)
    # the stack depth is measured only for an overlap that would otherwise be reported
    remedied = severity is not None and (_on_a_line(ax, ps) or (alpha <= k["density_alpha"] and _deep_share(
        kx, ky, float(np.median(radius)), alpha, k["grid_above"]) < k["duplicate_error"]))
    if severity is not None and not remedied:
        dup_text = f", {dups} of them drawn on exactly the same spot" if dups else ""
        yield Hit(message=(f"{counted(hidden, m, 'marker', 'markers')} sit almost on top of a neighbour "
                           f"(centres closer than half the marker radius, "
                           f"{COVER_SHARE * float(np.median(radius)):.1f} px){dup_text}, so readers cannot "
                           f"count them"),
                  source=ps.source, axes=ax.index, severity="error" if severity == "error" else None,
                  confidence="certain" if ov.exact else "likely", key=f"points:{i}:overlap")

    under_shapes = _covered(kx, ky, radius, _opaque_boxes(ax, ps, k["opaque_alpha"]))
    legend = (_covered(kx, ky, radius, [ax.legend_box]) if ax.legend_box is not None
              else np.zeros(m, dtype=bool))
    covered = under_shapes | legend
    c = int(covered.sum())
    if c:
        reasons = []
        if under_shapes.any():
            reasons.append(f"{int(under_shapes.sum())} under opaque bars or shapes drawn later")
        if legend.any():
            reasons.append(f"{int(legend.sum())} under the legend")
        yield Hit(message=f"{counted(c, m, 'marker', 'markers')} are covered ({' and '.join(reasons)})",
                  source=ps.source, axes=ax.index, severity="error" if c >= k["covered_error"] * m else None,
                  confidence="certain", key=f"points:{i}:covered")

    faint, lowest_alpha = _faint(ps, keep, background, k["faint_delta_e"])
    # overlapping faint markers build up density; an isolated faint marker simply vanishes
    faint &= ~ov.hidden
    f = int(faint.sum())
    if f:
        yield Hit(message=(f"{counted(f, m, 'marker', 'markers')} are nearly invisible: drawn at opacity "
                           f"{lowest_alpha:.2g} they barely differ from the background (colour difference "
                           f"ΔE' below {k['faint_delta_e']:g})"),
                  source=ps.source, axes=ax.index, confidence="certain", key=f"points:{i}:faint")


RULES = (points_hidden,)

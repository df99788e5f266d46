"""The colour really beneath a text or a marker: what a reader sees around it.

Contrast must be judged against what is behind a mark, not against the axes face: white numbers on the
dark cells of a heat map, a white median dot inside a violin, a label on an image.  After the figure is
drawn, :func:`backdrop_at` asks each artist of the axes drawn below the mark whether it covers the point
(matplotlib's own ``contains``, so polygons, violin bodies and mesh cells are exact), takes its colour
there (an image's or mesh's colour-mapped value, a patch's face) and blends the stack over the axes face
in drawing order.  Runs in the child, which alone may touch matplotlib objects.
"""

from __future__ import annotations

from typing import Any

import numpy as np

RGBA = tuple[float, float, float, float]


def _over(top: np.ndarray, under: np.ndarray) -> np.ndarray:
    a = float(np.clip(top[3], 0.0, 1.0))
    return np.r_[top[:3] * a + under[:3] * (1.0 - a), 1.0]


def _event(ax: Any, x: float, y: float) -> Any:
    from matplotlib.backend_bases import MouseEvent

    # matplotlib's events carry pixel positions as numbers; sub-pixel positions are fine for contains()
    return MouseEvent("motion_notify_event", ax.figure.canvas, x, y)  # type: ignore[arg-type]


class _Point:
    """What a mouse event's ``x``, ``y`` and ``canvas`` are (pixels cut to whole numbers, as matplotlib does):
    all that the ``contains`` tests of patches, lines and plain collections read.  Building a real event
    also finds the axes under the point, which costs more than the test."""

    __slots__ = ("canvas", "x", "y")

    def __init__(self, canvas: Any, x: float, y: float) -> None:
        self.canvas, self.x, self.y = canvas, int(x), int(y)


def _reads_position_only(artist: Any) -> bool:
    """Whether :func:`_color_at` reads only the event's position for ``artist`` (images read its data
    coordinates; a collection class with a ``contains`` of its own may read anything)."""
    from matplotlib.collections import Collection
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    if isinstance(artist, (Line2D, Patch)):
        return True
    return isinstance(artist, Collection) and type(artist).contains is Collection.contains


def _color_at(artist: Any, event: Any) -> np.ndarray | None:
    """The colour ``artist`` paints at the event's point, or None when it does not cover it."""
    from matplotlib.collections import Collection
    from matplotlib.image import AxesImage
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    try:
        if isinstance(artist, Line2D):
            return _line_color_at(artist, event)
        if isinstance(artist, AxesImage):
            if not artist.get_window_extent().contains(event.x, event.y):
                return None
            value = artist.get_cursor_data(event)
            if value is None:
                return None
            rgba = np.asarray(artist.to_rgba(np.asarray(value)) if np.ndim(value) == 0 else value, float).ravel()
            if rgba.size == 3:
                rgba = np.r_[rgba, 1.0]
            if rgba.max() > 1.0:
                rgba = rgba / 255.0
            alpha = artist.get_alpha()
            return rgba if alpha is None else np.r_[rgba[:3], rgba[3] * alpha]
        if isinstance(artist, Patch):
            if not artist.contains_point((event.x, event.y)):
                return None
            return np.asarray(artist.get_facecolor(), float)
        if isinstance(artist, Collection):
            inside, info = artist.contains(event)
            index = info.get("ind", []) if isinstance(info, dict) else []
            if not inside or len(index) == 0:
                return None
            k = int(np.asarray(index).ravel()[-1])
            if artist.get_array() is not None:
                values: np.ma.MaskedArray = np.ma.asarray(artist.get_array()).ravel()
                if k < values.size and not np.ma.is_masked(values[k]):
                    return np.asarray(artist.to_rgba(np.asarray(float(values[k]))), float)
                return None
            faces = np.asarray(artist.get_facecolor(), float)
            if faces.size == 0:
                return None
            return faces[min(k, len(faces) - 1)]
    except (AttributeError, TypeError, ValueError, IndexError, RuntimeError):
        return None
    return None


THICK_LINE = 3.0  # points: a line this wide is a surface marks sit on (seaborn's inner box of a violin)


def _line_color_at(line: Any, event: Any) -> np.ndarray | None:
    """A thick solid line's colour where its stroke covers the event's point (within half its width)."""
    from matplotlib.colors import to_rgba

    width = float(line.get_linewidth())
    if width < THICK_LINE or line.get_linestyle() not in ("-", "solid"):
        return None
    xy: np.ndarray = np.ma.filled(np.ma.asarray(line.get_xydata(), float), np.nan).reshape(-1, 2)
    if xy.shape[0] < 2:
        return None
    pts = line.get_transform().transform(xy)
    a, b = pts[:-1], pts[1:]
    ok = ~(np.isnan(a).any(axis=1) | np.isnan(b).any(axis=1))
    a, b = a[ok], b[ok]
    if a.shape[0] == 0:
        return None
    p = np.array([event.x, event.y], float)
    ab = b - a
    length2 = np.maximum((ab * ab).sum(axis=1), 1e-12)
    t = np.clip(((p - a) * ab).sum(axis=1) / length2, 0.0, 1.0)
    gap = np.hypot(*(a + t[:, None] * ab - p).T)
    half = width * line.figure.dpi / 72.0 / 2.0
    if float(gap.min()) > half:
        return None
    rgba = np.asarray(to_rgba(line.get_color()), float)
    alpha = line.get_alpha()
    return rgba if alpha is None else np.r_[rgba[:3], rgba[3] * alpha]


def backdrop_at(ax: Any, x: float, y: float, below: float, skip: Any = None) -> RGBA | None:
    """The opaque colour beneath display point (x, y) of ``ax`` from the artists drawn before z-order ``below``.

    None when nothing but the axes face is there (the rules then use the face itself).  ``skip`` is the
    mark's own artist.
    """
    artists = _beneath(ax, below, skip)
    return _blend(ax, artists, _position_only(artists), x, y)


def backdrops_at(ax: Any, points: Any, below: float, skip: Any = None) -> list[RGBA | None]:
    """:func:`backdrop_at` for each (x, y) display point of one mark: the artists beneath are listed once."""
    artists = _beneath(ax, below, skip)
    position_only = _position_only(artists)
    return [_blend(ax, artists, position_only, float(x), float(y)) for x, y in points]


def _beneath(ax: Any, below: float, skip: Any) -> list[Any]:
    """The visible artists of ``ax`` a mark at z-order ``below`` may sit on, in drawing order."""
    from matplotlib.collections import Collection
    from matplotlib.image import AxesImage
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    children = [(float(a.get_zorder()), i, a) for i, a in enumerate(ax.get_children())
                if a is not skip and a is not ax.patch and a.get_visible()
                and isinstance(a, (AxesImage, Patch, Collection, Line2D)) and float(a.get_zorder()) <= below]
    if ax.get_legend() is not None:
        children = [c for c in children if c[2] is not ax.get_legend()]
    return [artist for _, _, artist in sorted(children, key=lambda c: (c[0], c[1]))]


def _position_only(artists: list[Any]) -> bool:
    """Whether every one of ``artists`` reads only an event's position (decided once per set of artists)."""
    return all(map(_reads_position_only, artists))


def _blend(ax: Any, artists: list[Any], position_only: bool, x: float, y: float) -> RGBA | None:
    """The colours ``artists`` paint at (x, y) blended over the axes face; None when none covers it."""
    if not artists:
        return None
    event = _Point(ax.figure.canvas, x, y) if position_only else _event(ax, x, y)
    stack = []
    for artist in artists:
        color = _color_at(artist, event)
        if color is not None and color[3] > 0.0:
            stack.append(color)
    if not stack:
        return None
    face = np.asarray(ax.patch.get_facecolor(), float)
    fig_face = np.asarray(ax.figure.get_facecolor(), float)
    seen = _over(face, _over(fig_face, np.array([1.0, 1.0, 1.0, 1.0])))
    for color in stack:
        seen = _over(color, seen)
    return (float(seen[0]), float(seen[1]), float(seen[2]), 1.0)


__all__ = ["backdrop_at", "backdrops_at"]

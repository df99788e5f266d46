"""low-contrast: text and data marks against what is really beneath them.

Text is judged against its own box, the legend frame, or the colour the child found beneath it
(:mod:`figproof.child.backdrop`: an image or mesh cell, a bar, a violin body), else the axes or figure
face.  Marks are judged by their size: thin lines and small markers need WCAG 2.1's 3:1 for graphical
objects; large filled shapes (bars, areas, big markers, thick lines) are seen at a lower contrast, so a
default matplotlib or seaborn palette of bars on white passes.  ``strict_wcag = 1`` judges every mark
at 3:1 against the axes face, as WCAG states it.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from figproof.model.findings import Detail, Hit
from figproof.model.records import Axes, FigureModel, PointSet, Source, Text
from figproof.rules._series import (
    axes_background,
    distinct_rows,
    figure_background,
    looks_sequential,
    on_a_ramp,
    opaque,
    public_label,
    visible_colors,
)
from figproof.rules.base import Knob, Knobs, counted, rule
from figproof.science import colour as cs

WCAG_GRAPHICS = 3.0  # WCAG 2.1 SC 1.4.11: graphical objects need 3:1 against adjacent colours
MARK_DELTA_E = 20.0  # CAM02-UCS difference that tells a mark from another mark beneath it: common practice
DENSITY_ALPHA = 0.3  # markers this see-through are drawn faint on purpose: common practice

_BOLD = {"bold", "heavy", "extra bold", "extrabold", "ultrabold", "black"}


def is_large_text(text: Text, large_size: float, large_bold_size: float) -> bool:
    """WCAG 2.1 "large scale" text: at least 18 pt, or at least 14 pt and bold."""
    weight = text.weight.strip().lower()
    bold = weight in _BOLD or (weight.isdigit() and int(weight) >= 700)
    return text.fontsize >= large_size or (bold and text.fontsize >= large_bold_size)


def _text_background(text: Text, ax: Axes, figure: FigureModel) -> np.ndarray:
    under = axes_background(ax, figure) if text.in_axes else figure_background(figure)
    if text.role == "legend":
        frames = [p for p in ax.patches if p.kind == "legend"]
        if frames:
            under = opaque(frames[0].facecolor, under)
    elif text.backdrop is not None and text.in_axes:
        under = opaque(text.backdrop, under)
    return opaque(text.background, under)


def _floor2(x: float) -> str:
    # shown truncated, never rounded up: 2.999 must not print as "3.00" next to "below 3:1"
    return f"{np.floor(x * 100.0) / 100.0:.2f}"


def _colour_words(hex_: str) -> str:
    """A plain name for a background colour in messages ('white', 'dark') beside its hex code."""
    lum = float(cs.relative_luminance(cs.as_rgba(hex_)[:, :3])[0])
    if hex_.lower() == "#ffffff":
        return "the white background (#ffffff)"
    return f"the {'dark' if lum < 0.18 else 'light'} background {hex_}"


@rule(
    "low-contrast",
    severity="error",
    confidence="certain",
    knobs=(
        Knob(name="text_ratio", default=4.5, minimum=1.0, maximum=21.0,
             help="lowest WCAG contrast ratio for normal text"),
        Knob(name="large_text_ratio", default=3.0, minimum=1.0, maximum=21.0,
             help="lowest WCAG contrast ratio for large text"),
        Knob(name="mark_text_ratio", default=3.0, minimum=1.0, maximum=21.0,
             help="lowest contrast ratio for text written on marks (heat-map cells, bars, slices)"),
        Knob(name="mark_ratio", default=1.8, minimum=1.0, maximum=21.0,
             help="lowest contrast ratio for thin lines and small markers; a warning (WCAG 2.1 asks 3)"),
        Knob(name="area_ratio", default=1.5, minimum=1.0, maximum=21.0,
             help="lowest contrast ratio for large filled marks (bars, areas, big markers, thick lines); a warning"),
        Knob(name="large_mark_size", default=10.0, minimum=0.0,
             help="marker diameter (pt) from which a marker counts as a large filled mark"),
        Knob(name="thick_line_width", default=4.0, minimum=0.0,
             help="line width (pt) from which a line counts as a large filled mark"),
        Knob(name="strict_wcag", default=0.0, minimum=0.0, maximum=1.0,
             help="1: judge every mark at WCAG 2.1's 3:1 against the axes face, as WCAG states it"),
        Knob(name="large_size", default=18.0, minimum=0.0, help="font size (pt) from which text is large"),
        Knob(name="large_bold_size", default=14.0, minimum=0.0,
             help="font size (pt) from which bold text is large"),
    ),
    why="""
        Pale text and marks vanish on projectors, in print and for readers with low vision. WCAG 2.1 sets
        the contrast ratio (L1 + 0.05) / (L2 + 0.05) between the relative luminances of foreground and
        background: at least 4.5:1 for normal text and 3:1 for large text (18 pt, or 14 pt bold); text
        is held to these. Numbers written on marks (heat-map cells, bars, pie slices) are held to 3:1
        (`mark_text_ratio`), as WCAG holds large text; seaborn's own choice between dark and white
        annotations can fall to 2.29:1 on mid-tone cells, and those are reported. For graphical
        objects WCAG asks 3:1, which the orange, green and olive of
        matplotlib's and seaborn's default palettes miss on white although readers see them plainly; so
        figproof warns about thin lines and small markers below 1.8:1 and about large filled shapes
        (bars, areas, big markers, thick lines: the threshold contrast of a target falls as it grows)
        below 1.5:1. Pale yellows, light grays and pastels fail; the default palettes pass.
        `strict_wcag = 1` applies WCAG's 3:1 to every mark. Stacked bar segments (they sit against
        each other), the pale steps of a colour ramp and see-through markers are designs, not faults.
        figproof measures each text against what is really beneath it (its
        own box, the legend frame, the image or mesh cell, bar or violin body under it, the axes face
        inside the axes, the figure face outside) and each marker against what it sits on, after
        blending transparency. A marker on another mark (a dot on a band or an area) also passes when
        its colour differs plainly from that mark (CAM02-UCS ΔE' 20 or more): a red dot on a blue area is
        seen at one luminance. A line drawn in the background's own colour is an outline or separator.
        Panels with their axis turned off are pictures, not plots, and their marks are not judged. One
        finding per figure for marks and one for text, naming the panels: a pale palette is one choice.
        The ratio is never rounded: 2.999 fails 3:1.
    """,
    fix="""
        Darken light text and marks (for example "#595959" or darker on white) or lighten the background;
        avoid light grays, yellows and pastel colours for thin lines and small markers on white, or give
        light markers and pale bars a dark edge colour. On a heat map, pick the annotation colour per cell
        (dark on light cells, white on dark ones), as seaborn's `annot=True` does.
    """,
    sources=(
        "W3C (2018), Web Content Accessibility Guidelines (WCAG) 2.1: relative luminance, contrast ratio, "
        "success criteria 1.4.3 (contrast, minimum) and 1.4.11 (non-text contrast).",
        "Blackwell H.R. (1946) Contrast thresholds of the human eye. Journal of the Optical Society of America "
        "36(11): the threshold contrast falls as the target grows (from memory: the search tool found no copy "
        "of the paper to check it against).",
        "seaborn 0.13.2, seaborn/matrix.py, _HeatMapper._annotate_heatmap: white annotations on cells of "
        "relative luminance up to 0.408, so as low as (1 + 0.05) / (0.408 + 0.05) = 2.29:1.",
        "Mark ratio 1.8:1, large-mark ratio 1.5:1, large marker 10 pt, thick line 4 pt, ΔE' 20 between a "
        "marker and the mark beneath it: common practice (the "
        "lowest ratios of matplotlib's tab10 and seaborn's deep and muted palettes on white are 2.0, 1.95 and 1.9).",
    ),
    bad="""
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.plot([0, 1, 2], [1.0, 1.5, 1.2], color="#222222")
        ax.set_title("Mean leaf area by week", color="#bbbbbb")
        fig.savefig("leaves.png")
    """,
    good="""
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.plot([0, 1, 2], [1.0, 1.5, 1.2], color="#222222")
        ax.set_title("Mean leaf area by week", color="#333333")
        fig.savefig("leaves.png")
    """,
)
def low_contrast(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """Text or data marks whose contrast with what lies beneath them is too low to read."""
    # one cause, one finding: a pale palette or a pale text colour is one choice however many panels show it
    texts = [h for ax in figure.axes for h in _text_hits(ax, figure, knobs)]
    ramp = _lines_on_a_ramp(figure)
    marks = [h for ax in figure.axes for h in _mark_hits(ax, figure, knobs, ramp)]
    for found, noun in ((texts, "text"), (marks, "mark")):
        if found:
            found.sort(key=lambda item: item[0])  # worst first; stable, so drawing order breaks ties
            yield _one_per_figure([h for _, h in found], noun)


_NOUNS = {"mark": ("mark", "marks"), "text": ("group of texts", "groups of texts")}


def _lines_on_a_ramp(figure: FigureModel) -> bool:
    """The figure's data lines take three or more colours along one lightness ramp (a sequential palette)."""
    return on_a_ramp([ln.color for ax in figure.axes for ln in ax.lines if ln.role == "data" and ln.x.size])


def _one_per_figure(found: list[Hit], noun: str) -> Hit:
    """The worst hit's words, how many more and in how many panels, every hit kept as details."""
    head = found[0]
    if len(found) == 1:
        return head
    panels = sorted({h.axes for h in found if h.axes is not None})
    rest = sum(max(len(h.details), 1) for h in found) - 1
    where = f" in {len(panels)} panels" if len(panels) > 1 else ""
    base = head.details[0].message if head.details else head.message
    one, many = _NOUNS[noun]
    more = f"; {rest} more {one if rest == 1 else many} too{where}" if rest else ""
    details = tuple(d for h in found for d in (h.details or (Detail(message=h.message, source=h.source,
                                                                         axes=h.axes),)))
    return Hit(message=base + more, source=head.source, axes=head.axes, severity=head.severity,
               key=f"{noun}s:" + "|".join(sorted(h.key for h in found)), details=details)


_TEXT_LIMIT = {"normal": "text_ratio", "large": "large_text_ratio", "mark": "mark_text_ratio"}  # knob names
_TEXT_KIND = {"normal": "normal text (WCAG 2.1)", "large": "large text (WCAG 2.1)",
              "mark": "text on marks (WCAG 2.1, as for large text)"}


def _text_hits(ax: Axes, figure: FigureModel, knobs: Knobs) -> Iterator[tuple[float, Hit]]:
    # group texts that share role, colours and size class: ten pale tick labels are one finding
    groups: dict[tuple[str, str, str, str], list[tuple[Text, float]]] = {}
    for text in ax.texts:
        if not text.text.strip() or np.isnan(np.asarray(text.color, float)).any() or text.color[3] <= 0.0:
            continue
        bg = _text_background(text, ax, figure)
        fg = opaque(text.color, bg)
        ratio = float(cs.contrast_ratio(fg, bg))
        # numbers written on the marks themselves (heat-map cells, bars, pie slices) are held to WCAG's 3:1
        # for large text; seaborn's own switch between dark and white annotations can give less (white on a
        # cell of relative luminance 0.408 is 2.29:1), and such cells are reported
        on_mark = text.backdrop is not None and text.in_axes and text.role != "legend" and text.background is None
        kind = "mark" if on_mark and knobs["strict_wcag"] < 0.5 else \
            "large" if is_large_text(text, knobs["large_size"], knobs["large_bold_size"]) or on_mark else "normal"
        if ratio < knobs[_TEXT_LIMIT[kind]]:
            groups.setdefault((text.role, cs.to_hex(fg), cs.to_hex(bg), kind), []).append((text, ratio))
    for (role, fg_hex, bg_hex, kind), items in groups.items():
        limit = knobs[_TEXT_LIMIT[kind]]
        size = _TEXT_KIND[kind]
        ratio = min(r for _, r in items)
        quoted = ", ".join(f"'{t.text.strip()[:30]}'" for t, _ in items[:3]) + (", ..." if len(items) > 3 else "")
        noun = "figure" if role == "text" else role  # text placed on the figure, outside any axes
        what = f"{noun} text {quoted}" if len(items) == 1 else f"{len(items)} {noun} texts ({quoted})"
        yield ratio, Hit(message=f"{what} in {fg_hex} is hard to read on {_colour_words(bg_hex)}: contrast "
                                 f"{_floor2(ratio)}:1, below {limit:g}:1 for {size}",
                         source=items[0][0].source, axes=ax.index, key=f"text:{role}:{fg_hex}:{bg_hex}")


@dataclass(frozen=True, slots=True)
class _Mark:
    what: str  # line | markers | bars
    label: str
    faces: np.ndarray  # N×4
    edges: np.ndarray  # N×4, 1×4 or empty
    under: np.ndarray  # N×3 opaque colours beneath each element
    limit: float
    large: bool
    source: Source | None


def _under(ps: PointSet, bg: np.ndarray, n: int) -> np.ndarray:
    drops = np.asarray(ps.backdrops, float)
    out = np.tile(bg[:3], (n, 1))
    if drops.ndim == 2 and drops.shape == (n, 4):
        found = ~np.isnan(drops).any(axis=1)
        out[found] = drops[found, :3]
    return out


def _marks(ax: Axes, bg: np.ndarray, knobs: Knobs, ramp: bool = False) -> Iterator[_Mark]:
    """The data marks of ``ax``; ``ramp``: the figure's lines step along a palette (pale steps are its design)."""
    strict = knobs["strict_wcag"] >= 0.5
    small, big = float(knobs["mark_ratio"]), float(knobs["area_ratio"])
    if strict:
        small = big = WCAG_GRAPHICS
    stacked = len(ax.bars) > 1 and any(np.any(np.asarray(b.bottoms, float) != 0) for b in ax.bars)

    def level(large: bool) -> float:
        return big if large else small

    for ln in ax.lines:
        if ln.role == "data" and ln.x.size and ln.linestyle not in ("", " ", "None", "none"):
            large = ln.linewidth >= knobs["thick_line_width"]
            c = np.asarray([ln.color], float)
            if not strict and (ramp or _same_as(c[0], bg)):
                continue  # a pale step of the palette, or the background's own colour (an outline, a separator)
            yield _Mark("line", public_label(ln.label), c, np.zeros((0, 4)), bg[None, :3], level(large), large,
                        ln.source)
    for ps in ax.points:
        # an empty point set draws nothing (seaborn adds such sets as legend handles): no contrast to judge
        if ps.x.size == 0 or ps.colormap is not None:
            continue
        faces = np.asarray(ps.facecolors, float)
        if faces.size == 0 and np.asarray(ps.edgecolors).size == 0:
            continue
        if not strict and faces.ndim == 2 and faces.shape[0] and faces.shape[1] == 4 \
                and float(np.nanmax(faces[:, 3])) <= DENSITY_ALPHA:
            continue  # see-through markers show density by design; their faintness is points-hidden's business
        if not strict and faces.ndim == 2 and faces.shape[1] == 4 and on_a_ramp(faces):
            continue  # points coloured along a ramp by an ordered value: its pale steps are the design
        sizes = np.asarray(ps.sizes, float)
        large = bool(sizes.size and np.sqrt(np.nanmin(sizes)) >= knobs["large_mark_size"])
        faces = visible_colors(faces if faces.size else ps.edgecolors, ps.edgecolors)
        n = faces.shape[0] if faces.shape[0] > 1 else ps.x.size
        under = bg[None, :3] if strict else _under(ps, bg, ps.x.size)
        if faces.shape[0] == 1 and n > 1:
            faces = np.tile(faces, (n, 1))
        elif faces.shape[0] != under.shape[0]:
            under = np.tile(bg[:3], (faces.shape[0], 1))
        yield _Mark("markers", public_label(ps.label), faces, np.asarray(ps.edgecolors, float), under,
                    level(large), large, ps.source)
    for bs in ax.bars:
        faces = np.asarray(bs.facecolors, float)
        if not strict and (stacked or (faces.ndim == 2 and looks_sequential(distinct_rows(faces)[:, :3]))):
            continue  # stacked segments sit against each other; the pale steps of a ramp are its design
        if np.asarray(bs.facecolors).size:
            yield _Mark("bars", public_label(bs.label), np.asarray(bs.facecolors, float),
                        np.asarray(bs.edgecolors, float), bg[None, :3], level(True), True, bs.source)


def _ratios(colors: np.ndarray, under: np.ndarray) -> np.ndarray:
    rgba = cs.as_rgba(colors)
    if rgba.shape[0] == 0:
        return np.zeros(0)
    under = np.broadcast_to(under, (rgba.shape[0], 3)) if under.shape[0] in (1, rgba.shape[0]) else \
        np.broadcast_to(under[:1], (rgba.shape[0], 3))
    alpha = np.nan_to_num(rgba[:, 3:4])
    seen = np.nan_to_num(rgba[:, :3]) * alpha + under * (1.0 - alpha)
    out = cs.contrast_ratio(seen, under)
    # a transparent or unreadable colour draws nothing, so it cannot supply contrast
    return np.where(np.isnan(rgba).any(axis=1) | (alpha[:, 0] <= 0.0), 1.0, out)


def _same_as(rgba: np.ndarray, bg: np.ndarray) -> bool:
    return bool(rgba[3] > 0.0 and np.max(np.abs(np.nan_to_num(rgba[:3]) - bg[:3])) <= 0.02)


def _stands_out_on_marks(m: _Mark, bg: np.ndarray, n: int) -> np.ndarray:
    """Per element: it sits on another mark (not the axes face) and differs from it plainly in colour.

    WCAG's ratio compares luminance against a background; a red dot on a blue area is plain to every
    reader at one luminance, so on other marks a CAM02-UCS difference of MARK_DELTA_E passes too.
    """
    out = np.zeros(n, dtype=bool)
    if n == 0 or m.under.shape[0] != n:
        return out
    on_mark = np.abs(m.under - bg[None, :3]).max(axis=1) > 0.02
    if not on_mark.any():
        return out
    faces = cs.as_rgba(m.faces)
    faces = np.broadcast_to(faces, (n, 4)) if faces.shape[0] == 1 else faces
    if faces.shape[0] != n:
        return out
    top = np.nan_to_num(faces[on_mark])
    alpha = np.clip(top[:, 3:4], 0.0, 1.0)
    shown = top[:, :3] * alpha + m.under[on_mark] * (1.0 - alpha)
    out[on_mark] = cs.delta_e(shown, m.under[on_mark]) >= MARK_DELTA_E
    return out


def _mark_hits(ax: Axes, figure: FigureModel, knobs: Knobs, ramp: bool = False) -> Iterator[tuple[float, Hit]]:
    if ax.is_colorbar or not ax.axis_on:
        return
    bg = axes_background(ax, figure)
    strict = knobs["strict_wcag"] >= 0.5
    low: list[tuple[float, str, Source | None, str]] = []
    for m in _marks(ax, bg, knobs, ramp):
        r = _ratios(m.faces, m.under)
        if m.edges.shape[0] in (1, r.size) and r.size:
            r = np.maximum(r, _ratios(m.edges, m.under))
        if not strict:
            r = np.where(_stands_out_on_marks(m, bg, r.size), np.inf, r)
        if r.size == 0 or not (r < m.limit).any():
            continue
        worst = int(np.argmin(r))
        rgba = cs.as_rgba(m.faces)
        beneath = m.under[min(worst, m.under.shape[0] - 1)]
        shown = cs.to_hex(cs.blend_over(np.nan_to_num(rgba[worst]), beneath)[0])
        under_hex = cs.to_hex(beneath)
        noun = m.what.rstrip("s") if r.size == 1 else m.what  # one bar, one marker
        name = f"{noun} of '{m.label}'" if m.label else noun
        kind = "large filled marks" if m.large and m.limit < knobs["mark_ratio"] else "graphical objects (WCAG 2.1)"
        bad = int((r < m.limit).sum())
        head = name if r.size == 1 or bad == r.size else f"{counted(bad, r.size)} {name}"
        low.append((float(r[worst]), f"{head} in {shown} {'is' if r.size == 1 else 'are'} hard to see on "
                    f"{_colour_words(under_hex)}: contrast {_floor2(float(r[worst]))}:1, below {m.limit:g}:1 for "
                    f"{kind}", m.source, f"{m.what}:{m.label}:{shown}"))
    if not low:
        return
    low.sort(key=lambda item: item[0])
    rest = len(low) - 1
    more = f"; {rest} more mark{'s' * (rest != 1)} of this axes too" if rest else ""
    yield low[0][0], Hit(message=low[0][1] + more, source=low[0][2], axes=ax.index, severity="warning",
                         key="marks:" + ",".join(sorted(k for _, _, _, k in low)),
                         details=tuple(Detail(message=msg, source=src, axes=ax.index) for _, msg, src, _ in low))


# listed in figproof.rules.colour.RULES, the colour family it belongs to
__all__ = ["is_large_text", "low_contrast"]

"""The change view of a drifted figure: what changed, shown on the regenerated figure itself.

The regenerated figure is shown faded; every pixel that differs from the
committed file keeps its full colour under a tint, and each connected region
of change (``scipy.ndimage.label`` on the mask of differing pixels, slightly
grown so the glyphs of one word join) is outlined.  A caption says in plain
words which parts of the figure changed ("the title and the bars changed;
33 % of pixels"), naming them from the regenerated figure's model (its texts,
bars, points, lines in display coordinates) when the saved file has the
figure's own geometry, and by position otherwise.

It is also the change view of a deposit's figure that differs from the one
submitted (:mod:`figproof.deposit.references`), compared with a blur and a
tolerance so that resampling and JPEG compression do not count as change.

Pure rendering with Pillow, numpy and scipy; deterministic (the same pair of
files gives the same bytes).  The HTML report shows the same picture and
switches in place between it and the two files.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from figproof.model.records import Axes, FigureModel

#: Longest side of a change view, in pixels; larger figures are shrunk (a changed pixel stays visible).
MAX_SIDE = 1200
MAX_PIXELS = 50_000_000
TINT = (196, 62, 0)  # a burnt orange: reads on white, on the faded figure and in grayscale
FADE = 0.28  # how much of the regenerated figure's ink is kept in the faded base
_GROW = 3  # pixels a changed region is grown by before regions are joined (joins the letters of a word)
_MAX_REGIONS = 24
_ROWS = 1024  # rows compared at a time: bounds the temporaries for large images


class ChangeViewError(ValueError):
    """An image cannot be read, or is too large for a change view."""


@dataclass(frozen=True, slots=True, kw_only=True)
class Change:
    """What changed between a committed and a regenerated raster figure.

    ``regions`` are boxes (x0, y0, x1, y1; top-left origin, end exclusive) in the
    pixels of the view image, which is the figure shrunk by ``scale``.
    """

    width: int
    height: int
    changed: int
    total: int
    regions: tuple[tuple[int, int, int, int], ...]
    parts: tuple[str, ...]
    scale: float = 1.0

    @property
    def share(self) -> float:
        return self.changed / self.total if self.total else 0.0

    def caption(self) -> str:
        """The change in plain words, e.g. "the title and the bars changed; 33 % of pixels"."""
        pct = 100.0 * self.share
        shown = f"{pct:.0f}" if pct >= 1 else ("<1" if self.changed else "0")
        if not self.changed:
            return "nothing changed"
        if self.parts:
            what = _join(self.parts)
            verb = "changed"
        else:
            n = len(self.regions)
            what = f"{n} region{'s' * (n != 1)} of the figure"
            verb = "changed"
        return f"{what} {verb}; {shown} % of pixels"


def _join(words: Iterable[str]) -> str:
    items = list(words)
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


# --------------------------------------------------------------------------
# reading
# --------------------------------------------------------------------------


def read_on_white(source: Path | bytes, max_pixels: int = MAX_PIXELS) -> np.ndarray:
    """An image file (or its bytes) as opaque H×W×3 uint8, transparency put over white.

    Raises
    ------
    ChangeViewError
        When Pillow cannot decode it or it has more than ``max_pixels`` pixels.
    """
    import io

    name = "image" if isinstance(source, bytes) else str(source)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", Image.DecompressionBombWarning)
            with Image.open(io.BytesIO(source) if isinstance(source, bytes) else source) as img:
                if img.width * img.height > max_pixels:
                    raise ChangeViewError(f"{name}: {img.width}x{img.height} is too large for a change view")
                img.load()
                rgba = img.convert("RGBA")
    except ChangeViewError:
        raise
    except (OSError, ValueError, SyntaxError, EOFError, Image.DecompressionBombError) as exc:
        raise ChangeViewError(f"{name}: cannot read the image ({exc})") from exc
    page = Image.new("RGBA", rgba.size, (255, 255, 255, 255))
    page.alpha_composite(rgba)
    return np.asarray(page.convert("RGB"))


def _canvas(x: np.ndarray, height: int, width: int) -> np.ndarray:
    """``x`` at the top left of a white canvas (images of different sizes are aligned top-left)."""
    if x.shape[:2] == (height, width):
        return x
    out = np.full((height, width, 3), 255, np.uint8)
    out[: x.shape[0], : x.shape[1]] = x
    return out


def changed_mask(committed: np.ndarray, regenerated: np.ndarray, tolerance: int = 0,
                 blur: float = 0.0) -> np.ndarray:
    """H×W bool: pixels that differ in any channel; where only one image reaches, every pixel counts.

    ``tolerance`` (grey levels, 0 to 254): a pixel changed only when a channel differs by more than this.
    ``blur`` (pixels): both images are first blurred with a Gaussian of this σ, so that what resampling
    and compression move by a pixel or two (a figure as a journal returns it) does not count as changed.
    """
    height, width = max(committed.shape[0], regenerated.shape[0]), max(committed.shape[1], regenerated.shape[1])
    mask = np.ones((height, width), bool)
    h, w = min(committed.shape[0], regenerated.shape[0]), min(committed.shape[1], regenerated.shape[1])
    if blur > 0:
        from scipy.ndimage import gaussian_filter

        sigma = (blur, blur, 0.0)
        committed = np.asarray(gaussian_filter(committed[:h, :w].astype(np.float32), sigma=sigma))
        regenerated = np.asarray(gaussian_filter(regenerated[:h, :w].astype(np.float32), sigma=sigma))
    for top in range(0, h, _ROWS):
        bottom = min(top + _ROWS, h)
        a, b = committed[top:bottom, :w], regenerated[top:bottom, :w]
        if tolerance:
            mask[top:bottom, :w] = np.any(np.abs(a.astype(np.int16) - b.astype(np.int16)) > tolerance, axis=-1)
        else:
            mask[top:bottom, :w] = np.any(a != b, axis=-1)
    return mask


def _shrink_mask(mask: np.ndarray, factor: int) -> np.ndarray:
    """Block maximum: a shrunk cell is changed when any pixel in it is."""
    if factor == 1:
        return mask
    h, w = -(-mask.shape[0] // factor) * factor, -(-mask.shape[1] // factor) * factor
    padded = np.zeros((h, w), bool)
    padded[: mask.shape[0], : mask.shape[1]] = mask
    return np.asarray(padded.reshape(h // factor, factor, w // factor, factor).any(axis=(1, 3)))


def regions_of(mask: np.ndarray) -> list[tuple[int, int, int, int]]:
    """Boxes around the connected regions of change (x0, y0, x1, y1; end exclusive), top to bottom.

    Regions are grown a few pixels before labelling so that nearby changes (the
    glyphs of one word, the two edges of a moved line) form one region; when
    there are still many, they are grown further so the view stays readable.
    """
    from scipy import ndimage

    if not mask.any():
        return []
    grow = _GROW
    while True:
        grown = ndimage.binary_dilation(mask, iterations=grow) if grow else mask
        labels, count = ndimage.label(grown)
        if count <= _MAX_REGIONS or grow > 64:
            break
        grow *= 2
    boxes = []
    for found in ndimage.find_objects(labels):
        if found is None:
            continue
        ys, xs = found
        # shrink back by the growth, but never past the changed pixels themselves
        inner = mask[ys, xs]
        rows, cols = np.flatnonzero(inner.any(axis=1)), np.flatnonzero(inner.any(axis=0))
        boxes.append((xs.start + int(cols[0]), ys.start + int(rows[0]), xs.start + int(cols[-1]) + 1,
                      ys.start + int(rows[-1]) + 1))
    return sorted(boxes, key=lambda b: (b[1], b[0]))


# --------------------------------------------------------------------------
# naming the parts that changed, from the figure's model
# --------------------------------------------------------------------------

_TEXT_PART = {"title": "the title", "xlabel": "the x-axis label", "ylabel": "the y-axis label",
              "tick": "the tick labels", "legend": "the legend", "annotation": "the annotations", "text": "the text"}
# parts are painted in this order; later ones cover earlier ones (texts and small marks sit on top)
# error bars sit under the bars here: an error bar drawn over a bar whose colour changed must not be named
_ORDER = ("the margins", "the plot area", "the image", "the shaded areas", "the lines", "the error bars", "the bars",
          "the boxes", "the points", "the colour bar", "the legend", "the tick labels", "the x-axis label",
          "the y-axis label", "the annotations", "the text", "the title")


def _geometry_matches(figure: FigureModel, width: int, height: int) -> float | None:
    """The scale from the figure's display pixels to the file's pixels, when the file has the figure's shape.

    A file saved at another dpi is the same picture scaled; one saved with a tight bounding box is cropped,
    and its pixels cannot be placed on the model, so parts are then not named.
    """
    fw, fh = figure.size_px
    if fw <= 0 or fh <= 0:
        return None
    scale = width / fw
    return scale if abs(fh * scale - height) <= max(1.0, 0.01 * height) else None


class _Painter:
    """Paints each part of a figure into a label image: pixel → the topmost part drawn there."""

    def __init__(self, width: int, height: int, scale: float, fig_height: float) -> None:
        self.image = Image.new("I", (width, height), 0)
        self.draw = ImageDraw.Draw(self.image)
        self.scale = scale
        self.fig_height = fig_height

    def _xy(self, x: float, y: float) -> tuple[float, float]:
        # model display coordinates have their origin at the bottom left; images at the top left
        return x * self.scale, (self.fig_height - y) * self.scale

    def box(self, label: int, box: Iterable[float], pad: float = 0.0) -> None:
        x0, y0, x1, y1 = (float(v) for v in box)
        if not all(math.isfinite(v) for v in (x0, y0, x1, y1)):
            return
        (ax, ay), (bx, by) = self._xy(min(x0, x1), max(y0, y1)), self._xy(max(x0, x1), min(y0, y1))
        self.draw.rectangle((ax - pad, ay - pad, bx + pad, by + pad), fill=label)

    def polyline(self, label: int, px: np.ndarray, py: np.ndarray, width: float) -> None:
        ok = np.isfinite(px) & np.isfinite(py)
        pts = [self._xy(float(x), float(y)) for x, y in zip(px[ok], py[ok], strict=True)]
        if len(pts) >= 2:
            self.draw.line(pts, fill=label, width=max(1, round(width * self.scale)))

    def dots(self, label: int, px: np.ndarray, py: np.ndarray, radius: np.ndarray | float) -> None:
        ok = np.isfinite(px) & np.isfinite(py)
        r = np.broadcast_to(np.asarray(radius, float), px.shape)[ok] * self.scale + 1.0
        for x, y, rr in zip(px[ok][:20000], py[ok][:20000], r[:20000], strict=False):
            cx, cy = self._xy(float(x), float(y))
            self.draw.ellipse((cx - rr, cy - rr, cx + rr, cy + rr), fill=label)


def _paint_axes(p: _Painter, ax: Axes, dpi: float, label: dict[str, int]) -> None:
    p.box(label["the colour bar" if ax.is_colorbar else "the plot area"], ax.display_box)
    if ax.is_colorbar:
        return
    for cm in ax.colormaps:
        if cm.kind in ("image", "mesh"):
            p.box(label["the image"], ax.display_box)
    for patch in ax.patches:
        p.box(label["the legend" if patch.kind == "legend" else "the shaded areas"], patch.display_box)
    for line in ax.lines:
        name = {"errorbar": "the error bars", "box": "the boxes", "violin": "the boxes"}.get(line.role, "the lines")
        p.polyline(label[name], np.asarray(line.px, float), np.asarray(line.py, float),
                   line.linewidth * dpi / 72.0 + 2.0)
        if line.marker and line.marker not in ("None", "none", " ", ""):
            p.dots(label["the points" if line.role == "data" else name], np.asarray(line.px, float),
                   np.asarray(line.py, float), line.markersize * dpi / 72.0 / 2.0)
    for bars in ax.bars:
        for box in np.asarray(bars.display_boxes, float).reshape(-1, 4):
            p.box(label["the bars"], box)
    for pts in ax.points:
        sizes = np.asarray(pts.sizes, float)
        radius = np.sqrt(sizes) / 2.0 * dpi / 72.0 if sizes.size else 3.0
        p.dots(label["the points"], np.asarray(pts.px, float), np.asarray(pts.py, float), radius)
    if ax.legend_box is not None:
        p.box(label["the legend"], ax.legend_box)
    for text in ax.texts:
        p.box(label[_TEXT_PART.get(text.role, "the text")], text.display_box, pad=1.0)


def changed_parts(figure: FigureModel, mask: np.ndarray, scale: float) -> tuple[str, ...]:
    """Names of the parts of ``figure`` that hold changed pixels of ``mask`` (at ``scale`` file px per display px).

    Each changed pixel counts for the topmost part drawn there (texts over marks over the plot area); a part
    is named when it holds at least 0.2 % of the changed pixels (and at least 4), in drawing order.
    """
    label = {name: i for i, name in enumerate(_ORDER)}
    height, width = mask.shape
    painter = _Painter(width, height, scale, figure.size_px[1])
    for ax in figure.axes:
        _paint_axes(painter, ax, figure.dpi, label)
    for text in figure.texts:
        painter.box(label[_TEXT_PART.get(text.role, "the text")], text.display_box, pad=1.0)
    owners = np.asarray(painter.image, dtype=np.int32)[mask]
    counts = np.bincount(owners, minlength=len(_ORDER))
    floor = max(4, 0.002 * owners.size)
    named = [name for name in reversed(_ORDER) if counts[label[name]] >= floor]
    # changes in the margins only are named as such; beside named parts they are the parts' own edges
    return tuple(n for n in named if n != "the margins") if len(named) > 1 else tuple(named)


def _where(box: tuple[int, int, int, int], width: int, height: int) -> str:
    cx, cy = (box[0] + box[2]) / 2 / width, (box[1] + box[3]) / 2 / height
    row = "top" if cy < 1 / 3 else ("bottom" if cy > 2 / 3 else "middle")
    col = "left" if cx < 1 / 3 else ("right" if cx > 2 / 3 else "centre")
    return "the centre" if (row, col) == ("middle", "centre") else f"the {row} {col}".replace("middle ", "")


# --------------------------------------------------------------------------
# the picture
# --------------------------------------------------------------------------


def _font(size: int) -> ImageFont.ImageFont | ImageFont.FreeTypeFont:
    try:
        return ImageFont.load_default(size=size)
    except (TypeError, OSError):  # Pillow without FreeType
        return ImageFont.load_default()


def _wrap(text: str, font: ImageFont.ImageFont | ImageFont.FreeTypeFont, width: float) -> list[str]:
    """Words of ``text`` in lines no wider than ``width`` pixels (a longer word gets a line of its own)."""
    lines: list[str] = []
    for word in text.split():
        if lines and font.getlength(f"{lines[-1]} {word}") <= width:
            lines[-1] += f" {word}"
        else:
            lines.append(word)
    return lines


def _shrink(x: np.ndarray, factor: int) -> np.ndarray:
    if factor == 1:
        return x
    img = Image.fromarray(x)
    return np.asarray(img.reduce(factor))


def analyse(committed: np.ndarray, regenerated: np.ndarray, figure: FigureModel | None = None, *,
            tolerance: int = 0, blur: float = 0.0) -> tuple[Change, np.ndarray, np.ndarray]:
    """Compare two opaque RGB images; return the change, the view's base image and its mask (both shrunk).

    ``tolerance`` and ``blur`` are :func:`changed_mask`'s (0: every differing pixel counts).
    """
    mask = changed_mask(committed, regenerated, tolerance, blur)
    height, width = mask.shape
    factor = max(1, -(-max(height, width) // MAX_SIDE))
    small_mask = _shrink_mask(mask, factor)
    base = _shrink(_canvas(regenerated, height, width), factor)
    small_mask = small_mask[: base.shape[0], : base.shape[1]]
    regions = regions_of(small_mask)
    parts: tuple[str, ...] = ()
    if figure is not None and regions:
        scale = _geometry_matches(figure, regenerated.shape[1], regenerated.shape[0])
        if scale is not None:
            parts = changed_parts(figure, small_mask, scale / factor)
    if not parts and regions and len(regions) <= 3:
        places = list(dict.fromkeys(_where(b, small_mask.shape[1], small_mask.shape[0]) for b in regions))
        parts = tuple(f"a region at {p}" for p in places)
    change = Change(width=width, height=height, changed=int(mask.sum()), total=int(mask.size),
                    regions=tuple(regions), parts=parts, scale=1.0 / factor)
    return change, base, small_mask


def render(change: Change, base: np.ndarray, mask: np.ndarray, *, caption: bool = True,
           since: str = "the committed file") -> Image.Image:
    """The change view: faded regenerated figure, changed pixels tinted, regions outlined, caption below."""
    ink = 255.0 - base.astype(np.float32)
    faded = 255.0 - ink * FADE
    tint = np.asarray(TINT, np.float32)
    out = faded
    # changed pixels keep the regenerated colour, pulled towards the tint so that white-on-white changes show
    out[mask] = base[mask].astype(np.float32) * 0.45 + tint * 0.55
    view = Image.fromarray(np.clip(np.rint(out), 0, 255).astype(np.uint8), "RGB")
    draw = ImageDraw.Draw(view)
    stroke = max(2, round(max(view.size) / 500))
    pad = stroke + 2
    for x0, y0, x1, y1 in change.regions:
        draw.rectangle((x0 - pad, y0 - pad, x1 - 1 + pad, y1 - 1 + pad), outline=TINT, width=stroke)
    if not caption:
        return view
    size = max(12, min(20, view.width // 40))
    font, small = _font(size), _font(max(11, size - 3))
    lines = [(t, font, (20, 20, 20)) for t in _wrap(f"Since {since}: {change.caption()}.", font,
                                                   view.width - 16)]
    lines += [(t, small, (90, 90, 90)) for t in _wrap("Regenerated figure, faded; changed pixels in orange, each "
                                                     "changed region outlined.", small, view.width - 16)]
    step = size + 6
    sheet = Image.new("RGB", (view.width, view.height + 14 + step * len(lines)), (255, 255, 255))
    sheet.paste(view, (0, 0))
    d = ImageDraw.Draw(sheet)
    d.rectangle((0, view.height, view.width, view.height + 3), fill=TINT)
    for k, (text, face, colour) in enumerate(lines):
        d.text((8, view.height + 10 + k * step), text, fill=colour, font=face)
    return sheet


def write_change_view(committed: Path | bytes, regenerated: Path | bytes, out_png: Path,
                      figure: FigureModel | None = None, *, caption: bool = True) -> Change:
    """Write the change view of a drifted raster figure as one PNG and return what changed.

    Parameters
    ----------
    committed, regenerated
        The committed file and the file the script wrote now (paths or encoded bytes).
    out_png
        Where to write the view; parent folders are created.
    figure
        The regenerated figure's model, to name the parts that changed (optional).
    caption
        Draw the caption band under the view (the HTML report writes its own caption).

    Raises
    ------
    ChangeViewError
        When either image cannot be read or is too large.
    """
    return write_view(read_on_white(committed), read_on_white(regenerated), out_png, figure, caption=caption)


def write_view(before: np.ndarray, after: np.ndarray, out_png: Path, figure: FigureModel | None = None, *,
               caption: bool = True, tolerance: int = 0, blur: float = 0.0,
               since: str = "the committed file") -> Change:
    """Write the change view of two opaque RGB images (``after`` is the regenerated figure) as one PNG.

    ``tolerance`` and ``blur`` are :func:`changed_mask`'s; ``since`` names ``before`` in the caption band.
    """
    change, base, mask = analyse(before, after, figure, tolerance=tolerance, blur=blur)
    out = Path(out_png)
    out.parent.mkdir(parents=True, exist_ok=True)
    render(change, base, mask, caption=caption, since=since).save(out, format="PNG")
    return change


__all__ = ["Change", "ChangeViewError", "analyse", "changed_mask", "changed_parts", "read_on_white", "regions_of",
           "render", "write_change_view", "write_view"]

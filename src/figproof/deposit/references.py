"""Match the manuscript's figures (as submitted) to the figures the deposit's scripts draw now.

A submitted figure rarely has the pixels a script writes: the journal's system rescales it, recompresses it as
JPEG, adds or trims margins, converts its colour profile, or puts it on a PDF page.  So both images are reduced
to what survives all that before they are compared: composited over white, converted to grey (ITU-R BT.601 luma,
Pillow's ``L`` mode), trimmed of uniform margins, scaled to a common size, and compared with the structural
similarity index (SSIM; Wang, Bovik, Sheikh and Simoncelli 2004, "Image quality assessment: from error visibility
to structural similarity", IEEE Trans. Image Processing 13(4):600–612) with its published constants: an 11-tap
Gaussian window of σ = 1.5, K1 = 0.01, K2 = 0.03.

SSIM is averaged over the windows that hold ink (a figure is mostly white paper, where any two figures agree),
and the two pictures are aligned by cutting a few pixels off the sides where one's ink reaches its edge.

Each reference is matched to the regenerated figure it resembles most.  Its verdict: ``reproduced`` at a
similarity of at least ``REPRODUCED`` (0.80) when also, laid over the regenerated figure, no more than
``MAX_CHANGED`` (2.5 %) of the pixels differ as the change view counts them (else ``differs``); ``differs``
when it is below that but at least ``RESEMBLES`` (0.30) and the two are each other's best match; else
``not-found``.  Both thresholds are common practice, chosen on copies of one plot resized, cropped by 3 pixels,
JPEG-compressed at quality 30 and set in margins (0.80 to 1.0) against other plots in the same style (0.19 to
0.33; a bar chart of other data reaches 0.85, which the pixel test catches).  Telling "differs" from "not
found" is a best guess; both mean the reference was not reproduced.  The comparison is in grey, so a change of
colour alone that keeps the lightness is not seen.

PDF pages are rendered with pypdfium2 (PDFium's Python binding), an optional extra: ``pip install figproof[pdf]``.
"""

from __future__ import annotations

import io
import itertools
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Literal

import numpy as np
from PIL import Image, ImageOps, UnidentifiedImageError

from figproof.model.records import FigureModel

if TYPE_CHECKING:
    from figproof.report.change_view import Change

REFERENCE_SUFFIXES = (".png", ".tif", ".tiff", ".jpg", ".jpeg", ".pdf", ".gif", ".webp", ".bmp")
SIDE = 128  # both images are scaled to SIDE × SIDE grey pixels before they are compared
REPRODUCED = 0.80
RESEMBLES = 0.30
PDF_DPI = 100
MAX_PIXELS = 80_000_000  # a reference larger than this is refused rather than decoded (a decompression bomb)
MARGIN_TOLERANCE = 40  # grey levels: a row or column this close to the corner colour is margin (JPEG noise too)
_INKED = 0.97  # a window whose local mean is below this (on white = 1) holds ink
_CROPS = (0.005, 0.01, 0.02)  # shares of width or height cut from a side when aligning a cropped reference
_SHORTLIST = 3  # regenerated figures per reference that the alignment search is tried on
_SIGMA, _TRUNCATE = 1.5, 3.5  # 11-tap window: radius int(3.5 * 1.5 + 0.5) = 5
_K1, _K2 = 0.01, 0.03

Verdict = Literal["reproduced", "differs", "not-found"]


class ReferenceError(Exception):
    """A reference file that cannot be read; the message is one line naming it."""


@dataclass(frozen=True, slots=True, kw_only=True)
class Picture:
    """One image to compare: a reference page or a regenerated figure, already normalised."""

    label: str  # "fig2.tif", "figures.pdf page 3", "plots/fig1.py#1"
    grey: np.ndarray  # SIDE × SIDE float64 in [0, 1]
    shown: Image.Image  # the trimmed RGB image, for the change view
    edges: tuple[bool, bool, bool, bool] = (False, False, False, False)  # ink reaches left, top, right, bottom


@dataclass(frozen=True, slots=True, kw_only=True)
class Match:
    """A reference figure's verdict and the regenerated figure it resembles most."""

    reference: str
    verdict: Verdict
    regenerated: str | None  # None when nothing was regenerated
    similarity: float  # SSIM with that figure (0 when nothing was regenerated)


# --------------------------------------------------------------------------- SSIM


@dataclass(frozen=True, slots=True)
class _Stats:
    """One grey image's local statistics under the SSIM window: computed once, compared with many images."""

    x: np.ndarray
    mean: np.ndarray
    var: np.ndarray  # population variance
    ink: np.ndarray  # windows whose local mean is below _INKED (on white = 1)


def _blur(img: np.ndarray) -> np.ndarray:
    from scipy.ndimage import gaussian_filter

    return np.asarray(gaussian_filter(img, sigma=_SIGMA, truncate=_TRUNCATE, mode="reflect"))


def _stats(img: np.ndarray) -> _Stats:
    x = img.astype(np.float64)
    mean = _blur(x)
    return _Stats(x=x, mean=mean, var=_blur(x * x) - mean * mean, ink=mean < _INKED)


_PAD = int(_TRUNCATE * _SIGMA + 0.5)  # where the window leaves the image: 5 pixels each side


def _index(s: _Stats, t: _Stats, data_range: float = 1.0) -> np.ndarray:
    cxy = _blur(s.x * t.x) - s.mean * t.mean
    c1, c2 = (_K1 * data_range) ** 2, (_K2 * data_range) ** 2
    index = ((2 * s.mean * t.mean + c1) * (2 * cxy + c2)) / ((s.mean * s.mean + t.mean * t.mean + c1)
                                                            * (s.var + t.var + c2))
    return index[_PAD:-_PAD, _PAD:-_PAD]


def ssim_map(a: np.ndarray, b: np.ndarray, data_range: float = 1.0) -> np.ndarray:
    """The local SSIM index of two equal-shape grey images (Wang et al. 2004, Gaussian window σ = 1.5).

    Local statistics use the population (not sample) covariance, as the paper does; the border where the
    window leaves the image is cut off (5 pixels each side).
    """
    if a.shape != b.shape:
        raise ValueError(f"images differ in shape: {a.shape} and {b.shape}")
    return _index(_stats(a), _stats(b), data_range)


def ssim(a: np.ndarray, b: np.ndarray, data_range: float = 1.0) -> float:
    """Mean structural similarity of two equal-shape grey images (the paper's MSSIM)."""
    return float(ssim_map(a, b, data_range).mean())


def inked_ssim(a: np.ndarray, b: np.ndarray) -> float:
    """Mean SSIM over the windows where either image has ink (grey images in [0, 1] on white).

    A figure is mostly white paper, where any two figures agree; averaged over all windows, two different
    plots in one style score 0.6 to 0.75, as high as a JPEG copy of the same plot.  Averaged over the inked
    windows (local mean below 0.97 in either image) they fall below 0.35 while copies stay above 0.85.
    """
    if a.shape != b.shape:
        raise ValueError(f"images differ in shape: {a.shape} and {b.shape}")
    return _inked(_stats(a), _stats(b))


def _inked(s: _Stats, t: _Stats) -> float:
    index = _index(s, t)
    ink = (s.ink | t.ink)[_PAD:-_PAD, _PAD:-_PAD]
    return float(index[ink].mean()) if ink.any() else 1.0


def similarity(reference: Picture, regenerated: Picture, *, align: bool = True,
               known: dict[int, _Stats] | None = None) -> float:
    """The inked SSIM of two pictures; with ``align``, the best over small cuts of either picture.

    A figure cut by a few pixels loses ink only on the sides where its ink reaches the edge of the image, so
    the other picture is cut on those sides by the shares in ``_CROPS``, in every combination for up to two
    sides and one side at a time (two rounds) for more.  Trimming cannot align such a cut on its own.
    ``known``: the pictures' statistics already computed (by ``id``; :func:`match` keeps them for every pair).
    """
    known = {} if known is None else known
    whole = {id(p): known.setdefault(id(p), _stats(p.grey)) for p in (reference, regenerated)}
    best = _inked(whole[id(reference)], whole[id(regenerated)])
    if not align:
        return best
    for fixed, moved in ((reference, regenerated), (regenerated, reference)):

        def score(cut: list[float], fixed: Picture = fixed, moved: Picture = moved) -> float:
            return _inked(whole[id(fixed)], _stats(_cropped(moved, cut)))

        for cut in _cuts([i for i, touches in enumerate(moved.edges) if touches]):
            best = max(best, score(cut))
        if best < REPRODUCED:
            # JPEG noise can widen a trimmed box by a few pixels on any side: one side at a time, two rounds
            cut = [0.0] * 4
            for _ in range(2):
                for side in range(4):
                    for share in _CROPS:
                        trial = list(cut)
                        trial[side] = share
                        value = score(trial)
                        if value > best:
                            best, cut = value, trial
    return best


def _cuts(sides: Sequence[int]) -> Iterator[list[float]]:
    shares = (0.0, *_CROPS)
    if not sides or len(sides) > 2:
        # three or four sides (a figure filling its image): the same share on every side it reaches
        for share in _CROPS if sides else ():
            yield [share if i in sides else 0.0 for i in range(4)]
        return
    for combo in itertools.product(shares, repeat=len(sides)):
        if any(combo):
            cut = [0.0] * 4
            for side, share in zip(sides, combo, strict=True):
                cut[side] = share
            yield cut


def _cropped(p: Picture, shares: Sequence[float]) -> np.ndarray:
    w, h = p.shown.size
    left, top, right, bottom = (round(s * (w if i % 2 == 0 else h)) for i, s in enumerate(shares))
    if w - left - right < 8 or h - top - bottom < 8:
        return p.grey
    return _grey(p.shown.crop((left, top, w - right, h - bottom)))


# --------------------------------------------------------------------------- normalising


def over_white(img: Image.Image) -> Image.Image:
    """The image as RGB, transparent areas over white, palette and CMYK converted (the embedded profile dropped)."""
    if img.mode in ("RGBA", "LA", "PA") or (img.mode == "P" and "transparency" in img.info):
        rgba = img.convert("RGBA")
        white = Image.new("RGBA", rgba.size, (255, 255, 255, 255))
        return Image.alpha_composite(white, rgba).convert("RGB")
    if img.mode in ("I;16", "I;16B", "I;16L", "I"):
        arr = np.asarray(img, dtype=np.float64)
        top = arr.max() or 1.0
        return Image.fromarray(np.uint8(np.clip(arr / top * 255.0, 0, 255))).convert("RGB")
    return img.convert("RGB")


def ink_box(img: Image.Image, tolerance: int = MARGIN_TOLERANCE) -> tuple[int, int, int, int] | None:
    """(left, top, right, bottom; end exclusive) of what is not uniform margin, or None for a blank image.

    A row or column is margin when every pixel of it is within ``tolerance`` grey levels of the corner colour.
    """
    grey = np.asarray(img.convert("L"), dtype=np.int16)
    corner = int(np.median([grey[0, 0], grey[0, -1], grey[-1, 0], grey[-1, -1]]))
    ink = np.abs(grey - corner) > tolerance
    rows, cols = np.flatnonzero(ink.any(axis=1)), np.flatnonzero(ink.any(axis=0))
    if rows.size == 0 or cols.size == 0:
        return None
    return int(cols[0]), int(rows[0]), int(cols[-1]) + 1, int(rows[-1]) + 1


def trim(img: Image.Image, tolerance: int = MARGIN_TOLERANCE) -> tuple[Image.Image, tuple[bool, bool, bool, bool]]:
    """The image without uniform margins (rows and columns within ``tolerance`` of the corner colour), and
    whether ink reaches each edge of the image (left, top, right, bottom; within 2 pixels)."""
    box = ink_box(img, tolerance)
    if box is None:
        return img, (False, False, False, False)
    w, h = img.size
    edges = (box[0] <= 2, box[1] <= 2, box[2] >= w - 2, box[3] >= h - 2)
    return img.crop(box), edges


def normalise(img: Image.Image) -> tuple[np.ndarray, Image.Image, tuple[bool, bool, bool, bool]]:
    """(SIDE × SIDE grey in [0, 1], trimmed RGB image, edges the ink reaches) for one picture."""
    rgb, edges = trim(over_white(ImageOps.exif_transpose(img) or img))
    return _grey(rgb), rgb, edges


def _grey(rgb: Image.Image) -> np.ndarray:
    grey = rgb.convert("L").resize((SIDE, SIDE), Image.Resampling.LANCZOS, reducing_gap=3.0)
    return np.asarray(grey, dtype=np.float64) / 255.0


def picture(label: str, img: Image.Image) -> Picture:
    grey, shown, edges = normalise(img)
    return Picture(label=label, grey=grey, shown=shown, edges=edges)


# --------------------------------------------------------------------------- reading files


def _open(path: Path) -> Image.Image:
    try:
        img = Image.open(path)  # reads the header only
        if img.width * img.height > MAX_PIXELS:
            raise ReferenceError(f"{path.name}: {img.width} x {img.height} pixels is more than figproof decodes "
                                 f"({MAX_PIXELS:,}); export the figure at a lower resolution")
        img.load()
    except (UnidentifiedImageError, OSError, Image.DecompressionBombError, SyntaxError, ValueError) as exc:
        raise ReferenceError(f"{path.name}: not a readable image ({_reason(exc)}); export the figure again") \
            from None
    return img


def _reason(exc: BaseException) -> str:
    return (str(exc).splitlines() or [type(exc).__name__])[0]


def _frames(path: Path) -> list[tuple[str, Image.Image]]:
    """Every page of an image file: one for most, each frame of a multi-page TIFF."""
    img = _open(path)
    count = getattr(img, "n_frames", 1)
    if count <= 1 or path.suffix.lower() not in (".tif", ".tiff"):
        return [(path.name, img)]
    out = []
    for i in range(count):
        img.seek(i)
        out.append((f"{path.name} page {i + 1}", img.copy()))
    return out


def pdf_pages(path: Path, dpi: int = PDF_DPI) -> list[tuple[str, Image.Image]]:
    """Each page of a PDF rendered at ``dpi`` (pypdfium2); ReferenceError naming the extra when it is absent."""
    try:
        import pypdfium2 as pdfium
    except ImportError:
        raise ReferenceError(f"{path.name}: PDF references need the optional extra 'pdf' "
                             f"(pip install 'figproof[pdf]'), or export the page as PNG") from None
    try:
        doc = pdfium.PdfDocument(str(path))
    except (pdfium.PdfiumError, OSError) as exc:
        raise ReferenceError(f"{path.name}: not a readable PDF ({_reason(exc)})") from None
    try:
        out = []
        for i in range(len(doc)):
            page = doc[i]
            out.append((f"{path.name} page {i + 1}" if len(doc) > 1 else path.name,
                        page.render(scale=dpi / 72).to_pil()))
            page.close()
        return out
    finally:
        doc.close()


def reference_files(folder: Path) -> list[Path]:
    """The reference figure files under ``folder`` (any depth, sorted; hidden files skipped)."""
    return sorted(p for p in folder.rglob("*") if p.is_file() and p.suffix.lower() in REFERENCE_SUFFIXES
                  and not any(part.startswith(".") for part in p.relative_to(folder).parts))


def load_references(folder: Path) -> tuple[list[Picture], list[str]]:
    """(normalised pictures of every reference page, one-line problems with files that could not be read)."""
    pictures: list[Picture] = []
    problems: list[str] = []
    for path in reference_files(folder):
        label = path.relative_to(folder).as_posix()
        try:
            pages = pdf_pages(path) if path.suffix.lower() == ".pdf" else _frames(path)
        except ReferenceError as exc:
            problems.append(str(exc))
            continue
        for name, img in pages:
            pictures.append(picture(label + name[len(path.name):], img))
    return pictures, problems


def regenerated_picture(label: str, png: Path | bytes) -> Picture | None:
    """A regenerated figure's render as a picture, or None when it cannot be decoded."""
    try:
        img = Image.open(io.BytesIO(png) if isinstance(png, bytes) else png)
        img.load()
    except (UnidentifiedImageError, OSError, Image.DecompressionBombError, SyntaxError, ValueError):
        return None
    return picture(label, img)


# --------------------------------------------------------------------------- matching


def verdict_for(score: float, mutual: bool = True) -> Verdict:
    """The verdict for a reference whose best match scores ``score`` (``mutual``: it is that figure's best too)."""
    if score >= REPRODUCED:
        return "reproduced"
    return "differs" if score >= RESEMBLES and mutual else "not-found"


def match(references: Sequence[Picture], regenerated: Sequence[Picture]) -> list[Match]:
    """Each reference with the regenerated figure it resembles most (ties: the first in order)."""
    found: list[tuple[Picture, int | None, float]] = []
    quick: dict[tuple[int, int], float] = {}
    known: dict[int, _Stats] = {}  # each picture's statistics, computed once
    for r, ref in enumerate(references):
        # a quick score for every pair, then the alignment search on the few most similar
        for g, reg in enumerate(regenerated):
            quick[r, g] = similarity(ref, reg, align=False, known=known)
        order = sorted(range(len(regenerated)), key=lambda g: (-quick[r, g], g))
        best: int | None = None
        score = 0.0
        for g in order[:_SHORTLIST]:
            s = similarity(ref, regenerated[g], known=known)
            if best is None or s > score:
                best, score = g, s
        found.append((ref, best, score))
    out = []
    for r, (ref, best, score) in enumerate(found):
        if best is None:
            out.append(Match(reference=ref.label, verdict="not-found", regenerated=None, similarity=0.0))
            continue
        mutual = all(quick[r, best] >= quick[other, best] for other in range(len(references)))
        verdict = verdict_for(score, mutual)
        if verdict == "reproduced" and changed_share(ref, regenerated[best]) > MAX_CHANGED:
            verdict = "differs" if mutual else "not-found"  # alike in grey at 128 px, not pixel for pixel
        out.append(Match(reference=ref.label, verdict=verdict, regenerated=regenerated[best].label,
                         similarity=round(score, 4)))
    return out


def matched_regenerated(matches: Iterable[Match]) -> dict[str, str]:
    """Regenerated figure → the reference it reproduces or resembles (the most similar when several do)."""
    best: dict[str, Match] = {}
    for m in matches:
        if m.regenerated is None or m.verdict == "not-found":
            continue
        if m.regenerated not in best or m.similarity > best[m.regenerated].similarity:
            best[m.regenerated] = m
    return {reg: m.reference for reg, m in sorted(best.items())}


# --------------------------------------------------------------------------- the change view

#: A figure as a journal returns it differs from the regenerated one by resampling and compression in every
#: edge; blurring both (σ = 2 px) and counting only differences above 64 grey levels leaves what really moved.
#: Common practice, set on a plot resized, cropped by 3 px and JPEG-compressed at quality 40 (no pixel counted)
#: against the same plot with one point moved (the point and its two line segments counted).
VIEW_BLUR, VIEW_TOLERANCE = 2.0, 64


#: Share of pixels that may differ (after the blur and tolerance above) between a reference laid over its
#: regenerated figure and the figure itself for it to count as reproduced.  SSIM on 128-px grey images cannot
#: tell a bar chart JPEG-compressed at quality 30 (0.80) from a bar chart of other data in the same style
#: (0.83 to 0.85); pixel for pixel the copies differ in 0 to 1.5 % of pixels, the other data in 3.7 % and more.
#: Common practice, set on those samples.
MAX_CHANGED = 0.025


def changed_share(reference: Picture, regenerated: Picture) -> float:
    """The share of pixels of the regenerated figure (trimmed) that differ from the reference laid over it,
    as the change view counts them (:data:`VIEW_BLUR`, :data:`VIEW_TOLERANCE`).

    Where either figure's ink reaches the edge of its image (a figure cut by its own canvas, or by a few pixels
    more when it was submitted), the two are aligned as :func:`similarity` aligns them: the least share over
    small cuts of either on those sides.
    """
    from figproof.report.change_view import changed_mask

    def share(shown: Image.Image, page: Image.Image) -> float:
        page = over_white(page)
        before = _placed(shown, page)
        return float(changed_mask(np.asarray(before), np.asarray(page), VIEW_TOLERANCE, VIEW_BLUR).mean())

    best = share(reference.shown, regenerated.shown)
    if best <= MAX_CHANGED:
        return best
    for cut in _cuts([i for i, touches in enumerate(reference.edges) if touches]):
        best = min(best, share(_crop(reference.shown, cut), regenerated.shown))
    for cut in _cuts([i for i, touches in enumerate(regenerated.edges) if touches]):
        best = min(best, share(reference.shown, _crop(regenerated.shown, cut)))
    return best


def _crop(img: Image.Image, shares: Sequence[float]) -> Image.Image:
    w, h = img.size
    left, top, right, bottom = (round(s * (w if i % 2 == 0 else h)) for i, s in enumerate(shares))
    if w - left - right < 8 or h - top - bottom < 8:
        return img
    return img.crop((left, top, w - right, h - bottom))


def placed(reference: Picture, page: Image.Image) -> Image.Image:
    """The reference as submitted, set on the regenerated figure's page: its trimmed figure scaled into the box
    the regenerated figure's ink fills, on white, so that the two can be laid over each other pixel for pixel."""
    return _placed(reference.shown, over_white(page))


def _placed(shown: Image.Image, page: Image.Image) -> Image.Image:
    box = ink_box(page) or (0, 0, page.width, page.height)
    out = Image.new("RGB", page.size, (255, 255, 255))
    size = (max(1, box[2] - box[0]), max(1, box[3] - box[1]))
    out.paste(shown.convert("RGB").resize(size, Image.Resampling.LANCZOS), box[:2])
    return out


def change_view(reference: Picture, page: Image.Image, out: Path, figure: FigureModel | None = None,
                *, caption: bool = True) -> tuple[Image.Image, Change]:
    """Write the change view of a reference that differs from its regenerated figure (``page``, as rendered).

    It is the change view of :mod:`figproof.report.change_view` (the regenerated figure faded, what differs
    from the figure as submitted tinted and outlined, the parts named from ``figure``'s model), with the
    tolerance of :data:`VIEW_TOLERANCE` after a blur of :data:`VIEW_BLUR`.  Returns the reference as placed
    on the page (what the view compares with) and what changed.
    """
    from figproof.report.change_view import write_view

    before = placed(reference, page)
    change = write_view(np.asarray(before), np.asarray(over_white(page)), out, figure, caption=caption,
                        tolerance=VIEW_TOLERANCE, blur=VIEW_BLUR, since="the figure as submitted")
    return before, change


__all__ = ["MAX_CHANGED", "REFERENCE_SUFFIXES", "REPRODUCED", "RESEMBLES", "Match", "Picture", "ReferenceError",
           "change_view", "changed_share", "ink_box", "load_references", "match", "matched_regenerated", "normalise",
           "pdf_pages", "picture", "placed", "reference_files", "regenerated_picture", "similarity", "ssim",
           "ssim_map", "trim", "verdict_for"]

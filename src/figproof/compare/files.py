"""Compare a committed figure file with the one a script regenerated.

Rasters are decoded with Pillow and compared pixel by pixel: exact equality
first, then the RMS difference as ``matplotlib.testing.compare`` defines it
(square root of the mean squared difference of 0–255 values over all
channels).  Vector files (PDF, SVG, EPS/PS) are compared byte for byte after
dropping the fields that change from run to run or from release to release
without changing the drawing (dates, producer strings, titles, the PDF
cross-reference offsets those strings shift, and SVG ids if they are the only
difference).

Nothing here raises on bad input: an undecodable, empty or truncated file is a
status, not an exception.  Images over ``MAX_PIXELS`` are not decoded (a
50-megapixel RGBA image already takes 200 MB per side): they are compared by
their bytes only and reported as ``"too-large"`` when the bytes differ.
"""

from __future__ import annotations

import base64
import binascii
import hashlib
import io
import re
import warnings
from collections.abc import Mapping
from pathlib import Path
from typing import Any, Literal, cast

import numpy as np
from PIL import Image

from figproof.compare.render_diff import rendering_only
from figproof.model.comparison import (
    RASTER_SUFFIXES,
    VECTOR_SUFFIXES,
    ComparisonStatus,
    OutputComparison,
    kind_of,
)

MAX_PIXELS = 50_000_000
MAX_VECTOR_BYTES = 256 * 1024 * 1024
_ROWS_PER_BLOCK_PIXELS = 1 << 20  # RMS is summed over blocks of about a megapixel to bound temporaries


# --------------------------------------------------------------------------
# matplotlib version recorded in a file
# --------------------------------------------------------------------------

# PNG "Software": "Matplotlib version3.8.0, https://matplotlib.org/"; PDF /Producer:
# "Matplotlib pdf backend v3.8.0"; SVG dc:title and PS %%Creator: "Matplotlib v3.8.0, ...".
_VERSION = re.compile(rb"matplotlib(?: pdf backend)?(?: version ?| v)(\d+\.\d+[0-9A-Za-z.+\-]*)", re.IGNORECASE)


def _version_in(text: bytes) -> str | None:
    found = _VERSION.search(text)
    return found.group(1).decode("ascii", "replace").rstrip(".,") if found else None


def recorded_version(path: Path, data: bytes | None = None) -> str | None:
    """The matplotlib version a figure file says it was made with, or None.

    PNG: the ``Software`` text chunk; PDF: ``/Producer`` (or ``/Creator``);
    SVG: the metadata ``dc:title``; EPS/PS: ``%%Creator``.
    """
    try:
        suffix = path.suffix.lower()
        if suffix in VECTOR_SUFFIXES:
            if data is None:
                data = _read_limited(path)
            if data is None:
                return None
            if suffix == ".pdf":
                producer = re.search(rb"/Producer\s*\(([^)]*)\)", data)
                if producer and _version_in(producer.group(1)):
                    return _version_in(producer.group(1))
            return _version_in(data[:8192] if suffix != ".pdf" else data)
        if suffix in RASTER_SUFFIXES:
            with _open_image(path if data is None else io.BytesIO(data)) as img:
                software = img.info.get("Software") or img.info.get("software")
                return _version_in(str(software).encode()) if software else None
    except (OSError, ValueError, SyntaxError, Image.DecompressionBombError):
        return None
    return None


# --------------------------------------------------------------------------
# rasters
# --------------------------------------------------------------------------


def _open_image(source: Path | io.BytesIO) -> Image.Image:
    # Pillow warns (and our tests turn warnings into errors) above its decompression-bomb
    # limit; we decide about size ourselves from the header, so silence only that warning.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", Image.DecompressionBombWarning)
        return Image.open(source)


class _Unreadable(Exception):
    pass


def _header(source: Path | io.BytesIO) -> tuple[int, int]:
    """Width and height from the header, without decoding the pixels."""
    try:
        with _open_image(source) as img:
            return img.size
    except Image.DecompressionBombError as exc:
        # Pillow refuses to even open images over twice its limit; the size is in the message only.
        raise _TooLarge(str(exc)) from exc
    except (OSError, ValueError, SyntaxError, EOFError) as exc:
        raise _Unreadable(_reason(exc)) from exc


class _TooLarge(Exception):
    pass


def _reason(exc: BaseException) -> str:
    text = str(exc).strip() or type(exc).__name__
    return text if len(text) <= 160 else text[:157] + "..."


def load_pixels(source: Path | io.BytesIO) -> np.ndarray:
    """Decode an image to an H×W×3 (opaque) or H×W×4 uint8 array.

    Follows ``matplotlib.testing.compare._load_image``: anything other than RGB
    becomes RGBA, and an RGBA image whose alpha is 255 everywhere becomes RGB,
    so an opaque RGBA file compares equal to the same pixels stored as RGB.
    Raises ``_Unreadable`` for files Pillow cannot decode completely.
    """
    try:
        with _open_image(source) as img:
            img.load()  # decode now: a truncated file fails here, not later
            if img.mode != "RGB":
                img = img.convert("RGBA")
                if img.getchannel("A").getextrema()[0] == 255:
                    img = img.convert("RGB")
            return np.asarray(img)
    except (OSError, ValueError, SyntaxError, EOFError, Image.DecompressionBombError) as exc:
        raise _Unreadable(_reason(exc)) from exc


def pixel_difference(committed: np.ndarray, regenerated: np.ndarray) -> np.ndarray:
    """Absolute per-channel difference of two same-shaped uint8 images (as uint8)."""
    a = committed.astype(np.int16)
    b = regenerated.astype(np.int16)
    return np.abs(a - b).astype(np.uint8)


def _same_channels(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    # One RGB, one RGBA with real transparency: compare both as RGBA (opaque alpha for the RGB one).
    if a.shape[-1] == b.shape[-1]:
        return a, b

    def rgba(x: np.ndarray) -> np.ndarray:
        if x.shape[-1] == 4:
            return x
        return np.concatenate([x, np.full((*x.shape[:2], 1), 255, np.uint8)], axis=-1)

    return rgba(a), rgba(b)


def rms_difference(committed: np.ndarray, regenerated: np.ndarray) -> tuple[float, int]:
    """RMS difference (0–255 scale) over all channels, and the number of pixels that differ.

    Same definition as ``matplotlib.testing.compare.calculate_rms``; summed in
    integer blocks so that a large image needs no float copy of itself.
    """
    a, b = _same_channels(committed, regenerated)
    height = a.shape[0]
    row_pixels = max(1, a.shape[1])
    step = max(1, _ROWS_PER_BLOCK_PIXELS // row_pixels)
    total = 0
    differing = 0
    for top in range(0, height, step):
        d = a[top : top + step].astype(np.int32) - b[top : top + step]
        total += int((d * d).sum(dtype=np.int64))
        differing += int(np.count_nonzero(np.any(d != 0, axis=-1)))
    count = a.size
    return (float(np.sqrt(total / count)) if count else 0.0), differing


def _fmt_size(size: tuple[int, int] | None) -> str:
    return f"{size[0]}×{size[1]} px" if size else "unknown size"


def _compare_raster(
    committed: Path | io.BytesIO, regenerated: Path | io.BytesIO, *, tolerance: float, max_pixels: int,
    shifts: bool = False,
) -> dict[str, Any]:
    out: dict[str, Any] = {}
    sizes: list[tuple[int, int] | None] = []
    for label, source in (("committed", committed), ("regenerated", regenerated)):
        try:
            sizes.append(_header(source))
        except _Unreadable as exc:
            return {**out, "status": f"unreadable-{label}", "message": f"the {label} file cannot be decoded: {exc}"}
        except _TooLarge:
            sizes.append(None)
        if isinstance(source, io.BytesIO):
            source.seek(0)
    out["committed_size"], out["regenerated_size"] = sizes
    if any(s is None or s[0] * s[1] > max_pixels for s in sizes):
        return {**out, **_too_large(committed, regenerated, sizes, max_pixels)}
    if sizes[0] != sizes[1]:
        return {
            **out,
            "status": "size-mismatch",
            "message": f"committed {_fmt_size(sizes[0])}, regenerated {_fmt_size(sizes[1])}",
        }
    if _same_bytes(committed, regenerated):  # the usual case for a reproducible script: no decoding needed
        width, height = sizes[0]  # type: ignore[misc]
        return {**out, "total_pixels": int(width * height), "rms": 0.0, "differing_pixels": 0, "status": "same",
                "message": "pixels identical (bytes identical)"}
    pixels = []
    for label, source in (("committed", committed), ("regenerated", regenerated)):
        try:
            pixels.append(load_pixels(source))
        except _Unreadable as exc:
            return {**out, "status": f"unreadable-{label}", "message": f"the {label} file cannot be decoded: {exc}"}
    a, b = pixels
    out["total_pixels"] = int(a.shape[0] * a.shape[1])
    # Exact equality and the RMS come from one pass over row blocks (no full-size boolean or float temporaries).
    rms, differing = rms_difference(a, b)
    out.update(rms=rms, differing_pixels=differing)
    if differing == 0:
        return {**out, "status": "same", "message": "pixels identical"}
    if tolerance > 0 and rms <= tolerance:
        return {**out, "status": "same", "message": f"RMS {rms:.3g} within tolerance {tolerance:g}"}
    if shifts:
        a, b = _same_channels(a, b)
        if rendering_only(a, b):
            return {**out, "status": "rendering",
                    "message": f"{differing} of {out['total_pixels']} pixels differ only by small shifts of edges "
                               f"and text"}
    return {**out, "status": "drift", "message": f"{differing} of {out['total_pixels']} pixels differ, RMS {rms:.3g}"}


def _same_bytes(a: Path | io.BytesIO, b: Path | io.BytesIO) -> bool:
    """Whether two files hold the same bytes (sizes first, then contents)."""
    def size(x: Path | io.BytesIO) -> int:
        return len(x.getbuffer()) if isinstance(x, io.BytesIO) else x.stat().st_size

    try:
        return size(a) == size(b) and _digest(a) == _digest(b)
    except OSError:
        return False


def _digest(source: Path | io.BytesIO) -> str:
    h = hashlib.sha256()
    if isinstance(source, io.BytesIO):
        h.update(source.getvalue())
        return h.hexdigest()
    with source.open("rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _too_large(
    committed: Path | io.BytesIO,
    regenerated: Path | io.BytesIO,
    sizes: list[tuple[int, int] | None],
    max_pixels: int,
) -> dict[str, Any]:
    # Identical bytes are identical pixels: that much can be said without decoding.
    if _digest(committed) == _digest(regenerated):
        return {"status": "same", "message": "bytes identical (too large to decode)"}
    biggest = max((s[0] * s[1] for s in sizes if s is not None), default=0)
    size_text = f"{biggest / 1e6:.0f} megapixels" if biggest else "too large for Pillow to open"
    return {
        "status": "too-large",
        "message": f"{size_text}, over the {max_pixels / 1e6:g}-megapixel limit for pixel comparison; bytes differ",
    }


# --------------------------------------------------------------------------
# vector files
# --------------------------------------------------------------------------

_PDF_VOLATILE = re.compile(rb"/(CreationDate|ModDate|Producer|Creator)\s*\((?:\\.|[^\\)])*\)")
_PDF_ID = re.compile(rb"/ID\s*\[\s*<[0-9A-Fa-f]*>\s*<[0-9A-Fa-f]*>\s*\]")
# The cross-reference table holds byte offsets, which shift when a volatile string changes length.
_PDF_XREF = re.compile(rb"\nxref\s.*?(?=\ntrailer)", re.DOTALL)
_PDF_STARTXREF = re.compile(rb"startxref\s+\d+")
_PS_VOLATILE = re.compile(rb"^%%(Title|Creator|CreationDate|For|Producer):[^\r\n]*\r?\n?", re.MULTILINE)
_SVG_METADATA = re.compile(rb"<metadata\b.*?</metadata>\s*", re.DOTALL)
_SVG_COMMENT = re.compile(rb"<!--.*?-->\s*", re.DOTALL)
_SVG_ID_DEF = re.compile(rb'\bid="([^"]+)"')
_SVG_ID_TOKEN = re.compile(rb'(\bid="|#)([A-Za-z_][\w.\-]*)')


def _read_limited(path: Path) -> bytes | None:
    try:
        if path.stat().st_size > MAX_VECTOR_BYTES:
            return None
        return path.read_bytes()
    except OSError:
        return None


def normalise_vector(data: bytes, suffix: str) -> bytes:
    """Drop the fields of a PDF, SVG or EPS/PS file that vary without changing the drawing."""
    suffix = suffix.lower()
    if suffix == ".pdf":
        data = _PDF_VOLATILE.sub(b"", data)
        data = _PDF_ID.sub(b"", data)
        data = _PDF_XREF.sub(b"\n", data)
        return _PDF_STARTXREF.sub(b"startxref", data)
    if suffix in (".eps", ".ps"):
        return _PS_VOLATILE.sub(b"", data)
    if suffix == ".svg":
        data = _SVG_METADATA.sub(b"", data)
        return _SVG_COMMENT.sub(b"", data)
    return data


def canonical_svg_ids(data: bytes) -> bytes:
    """Rename every id an SVG defines (and its references) to ``_<n>`` in order of first appearance.

    matplotlib derives marker and clip-path ids from a hash salted with
    ``svg.hashsalt``; two files that differ only in these names draw the same.
    """
    defined = set(_SVG_ID_DEF.findall(data))
    names: dict[bytes, bytes] = {}

    def rename(match: re.Match[bytes]) -> bytes:
        token = match.group(2)
        if token not in defined:
            return match.group(0)
        if token not in names:
            names[token] = b"_%d" % len(names)
        return match.group(1) + names[token]

    return _SVG_ID_TOKEN.sub(rename, data)


def _vector_problem(data: bytes, suffix: str) -> str | None:
    """Why a vector file is not a complete file of its kind, or None."""
    if not data:
        return "the file is empty"
    head = data[:1024].lstrip()
    if suffix == ".pdf":
        if not head.startswith(b"%PDF-"):
            return "no %PDF- header"
        if b"%%EOF" not in data[-1024:]:
            return "no %%EOF marker at the end (truncated?)"
    elif suffix in (".eps", ".ps"):
        if not head.startswith(b"%!PS"):
            return "no %!PS header"
    elif suffix == ".svg":
        if b"<svg" not in data[:4096]:
            return "no <svg> element at the start"
        if not data.rstrip().endswith(b"</svg>"):
            return "does not end with </svg> (truncated?)"
    return None


def _first_difference(a: bytes, b: bytes) -> int:
    n = min(len(a), len(b))
    block = 4096
    for start in range(0, n, block):
        if a[start : start + block] != b[start : start + block]:
            for i in range(start, min(start + block, n)):
                if a[i] != b[i]:
                    return i
    return n


def _side(problem: Literal["missing", "unreadable"], label: str) -> ComparisonStatus:
    """``missing-committed``, ``unreadable-regenerated``, ...: a problem of one side of the comparison."""
    return cast(ComparisonStatus, f"{problem}-{label}")


def _compare_vector(committed: Path, regenerated: Path) -> dict[str, Any]:
    suffix = committed.suffix.lower()
    raw: list[bytes] = []
    for label, path in (("committed", committed), ("regenerated", regenerated)):
        data = _read_limited(path)
        if data is None:
            return {"status": "too-large" if path.exists() else f"unreadable-{label}",
                    "message": f"the {label} file is over {MAX_VECTOR_BYTES // 2**20} MB or cannot be read"}
        problem = _vector_problem(data, suffix)
        if problem:
            return {"status": f"unreadable-{label}",
                    "message": f"the {label} file is not a valid {suffix[1:]}: {problem}"}
        raw.append(data)
    versions = {"committed_version": recorded_version(committed, raw[0]),
                "regenerated_version": recorded_version(regenerated, raw[1])}
    if raw[0] == raw[1]:
        return {**versions, "status": "same", "message": "bytes identical"}
    a, b = (normalise_vector(d, suffix) for d in raw)
    if a == b:
        return {**versions, "status": "same", "message": "identical apart from dates and producer fields"}
    if suffix == ".svg" and canonical_svg_ids(a) == canonical_svg_ids(b):
        return {**versions, "status": "same", "message": "identical apart from generated ids"}
    if suffix == ".svg":
        a, b = canonical_svg_ids(a), canonical_svg_ids(b)
    at = _first_difference(a, b)
    return {**versions, "status": "drift",
            "message": f"content differs from byte {at} of the normalised file ({len(a)} vs {len(b)} bytes)"}


# --------------------------------------------------------------------------
# public entry points
# --------------------------------------------------------------------------


def compare_output(
    committed: Path,
    regenerated: Path,
    *,
    tolerance: float,
    path: str | None = None,
    max_pixels: int = MAX_PIXELS,
    shifts: bool = False,
) -> OutputComparison:
    """Compare a committed figure file with the file its script regenerated.

    Parameters
    ----------
    committed, regenerated
        The file in the user's repo and the file the child wrote in its sandbox.
    tolerance
        Largest RMS difference (0–255 scale) still counted as ``"same"``; 0 means exact.
    path
        Repo-relative name to record (default: ``committed`` as given).
    max_pixels
        Rasters larger than this are compared by bytes only (``"too-large"`` when they differ).
    shifts
        Tell rendering-only differences (anti-aliasing, hinting, sub-pixel placement, see
        :mod:`figproof.compare.render_diff`) apart: status ``"rendering"`` instead of ``"drift"``.

    Returns
    -------
    OutputComparison
        Never raises for missing, empty, corrupt or huge files: those are statuses.
    """
    committed, regenerated = Path(committed), Path(regenerated)
    name = path if path is not None else committed.as_posix()
    kind = kind_of(committed)
    base: dict[str, Any] = {"path": name, "kind": kind, "tolerance": float(tolerance)}
    for label, file in (("committed", committed), ("regenerated", regenerated)):
        if not file.is_file():
            return OutputComparison(**base, status=_side("missing", label), message=f"no {label} file")
    if kind == "vector":
        return OutputComparison(**base, **_compare_vector(committed, regenerated))
    if kind == "other":
        same = _digest(committed) == _digest(regenerated)
        return OutputComparison(**base, status="same" if same else "drift",
                                message="bytes identical" if same else "bytes differ")
    for label, file in (("committed", committed), ("regenerated", regenerated)):
        if file.stat().st_size == 0:
            return OutputComparison(**base, status=_side("unreadable", label), message=f"the {label} file is empty")
    fields = _compare_raster(committed, regenerated, tolerance=tolerance, max_pixels=max_pixels, shifts=shifts)
    fields["committed_version"] = recorded_version(committed)
    fields["regenerated_version"] = recorded_version(regenerated)
    return OutputComparison(**base, **fields)


def compare_image_bytes(
    committed: bytes,
    regenerated: bytes,
    *,
    tolerance: float,
    path: str,
    cell: int | None = None,
    output: int | None = None,
    max_pixels: int = MAX_PIXELS,
    shifts: bool = False,
) -> OutputComparison:
    """Compare two encoded images held in memory (a notebook's stored PNG and a fresh rendering)."""
    base: dict[str, Any] = {"path": path, "kind": "raster", "tolerance": float(tolerance), "cell": cell,
                            "output": output}
    for label, data in (("committed", committed), ("regenerated", regenerated)):
        if not data:
            return OutputComparison(**base, status=_side("unreadable", label), message=f"the {label} image is empty")
    fields = _compare_raster(io.BytesIO(committed), io.BytesIO(regenerated), tolerance=tolerance,
                             max_pixels=max_pixels, shifts=shifts)
    return OutputComparison(**base, **fields)


def notebook_png_outputs(nb_json: Mapping[str, Any]) -> dict[int, list[bytes]]:
    """Decoded ``image/png`` outputs of a notebook's code cells, keyed by cell index.

    The index counts every cell of ``nb_json["cells"]`` from 0 (markdown cells
    included), so it matches the position nbformat gives.  Outputs are taken
    from ``display_data`` and ``execute_result`` entries in order; a value that
    is not valid base64 is skipped.  Odd input (not a notebook) gives ``{}``.
    """
    found: dict[int, list[bytes]] = {}
    cells = nb_json.get("cells") if isinstance(nb_json, Mapping) else None
    if not isinstance(cells, list):
        return found
    for index, cell in enumerate(cells):
        if not isinstance(cell, Mapping) or cell.get("cell_type") != "code":
            continue
        outputs = cell.get("outputs")
        if not isinstance(outputs, list):
            continue
        for out in outputs:
            if not isinstance(out, Mapping) or out.get("output_type") not in ("display_data", "execute_result"):
                continue
            data = out.get("data")
            value = data.get("image/png") if isinstance(data, Mapping) else None
            if isinstance(value, list):  # nbformat allows multi-line strings stored as lists
                value = "".join(v for v in value if isinstance(v, str))
            if not isinstance(value, str) or not value:
                continue
            try:
                decoded = base64.b64decode("".join(value.split()), validate=True)
            except (binascii.Error, ValueError):
                continue
            found.setdefault(index, []).append(decoded)
    return found


__all__ = [
    "MAX_PIXELS",
    "canonical_svg_ids",
    "compare_image_bytes",
    "compare_output",
    "load_pixels",
    "normalise_vector",
    "notebook_png_outputs",
    "pixel_difference",
    "recorded_version",
    "rms_difference",
]

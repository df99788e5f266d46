"""All colour science figproof uses, in one place.

Rules never reimplement a formula: they call this module.  Every function is
vectorised over a leading batch of colours (shape ``(..., 3)`` or ``(..., 4)``)
so that a rule can convert all colours of a figure in one call.

Colours are sRGB floats in [0, 1] ("sRGB1" in colorspacious' terms), as the
figure model stores them.  Conversions to the perceptually uniform space use
CAM02-UCS (Luo, Cui & Li 2006) through colorspacious; colour-vision deficiency
is simulated with the Machado, Oliveira & Fernandes (2009) matrices, also
through colorspacious.  No matplotlib here: colour specs arrive as RGBA floats.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from colorspacious import cspace_convert

#: The four kinds of vision figproof compares colours under, in report order.
VISIONS: tuple[str, ...] = ("normal", "protan", "deutan", "tritan")

# colorspacious names the Machado anomalies by their -anomaly form; severity
# 100 is the dichromat end of the scale (protanopia, deuteranopia, tritanopia).
_CVD_NAMES = {"protan": "protanomaly", "deutan": "deuteranomaly", "tritan": "tritanomaly"}

WHITE: tuple[float, float, float] = (1.0, 1.0, 1.0)


# --------------------------------------------------------------------------
# parsing and compositing
# --------------------------------------------------------------------------


def _parse_one(spec: Any) -> tuple[float, float, float, float]:
    """One colour as RGBA floats; NaNs mark a spec that could not be read."""
    bad = (np.nan, np.nan, np.nan, np.nan)
    if isinstance(spec, str):
        text = spec.strip().lower()
        if text == "none":
            return (0.0, 0.0, 0.0, 0.0)
        if text.startswith("#") and len(text) in (4, 5, 7, 9):
            digits = text[1:]
            if len(digits) in (3, 4):
                digits = "".join(ch * 2 for ch in digits)
            try:
                values = [int(digits[i : i + 2], 16) / 255.0 for i in range(0, len(digits), 2)]
            except ValueError:
                return bad
            return tuple(values + [1.0] * (4 - len(values)))  # type: ignore[return-value]
        return bad
    try:
        values = [float(v) for v in spec]
    except (TypeError, ValueError):
        return bad
    if len(values) == 3:
        values.append(1.0)
    return tuple(values) if len(values) == 4 else bad  # type: ignore[return-value]


def as_rgba(colors: Any) -> np.ndarray:
    """Read colours as an ``(n, 4)`` float array of RGBA in [0, 1].

    Parameters
    ----------
    colors
        One colour or a sequence of colours: RGB or RGBA tuples/arrays of
        floats, ``"#rrggbb"``/``"#rrggbbaa"`` strings, or ``"none"`` (fully
        transparent).  An ``(n, 3)`` or ``(n, 4)`` array is taken as it is.

    Returns
    -------
    numpy.ndarray
        ``(n, 4)`` floats, clipped to [0, 1].  Rows that could not be read, or
        that hold NaN or infinity, are NaN so callers can drop them.
    """
    if isinstance(colors, np.ndarray) and colors.dtype != object and colors.ndim in (1, 2):
        arr = np.atleast_2d(np.asarray(colors, dtype=float))
        if arr.shape[-1] == 3:
            arr = np.concatenate([arr, np.ones((arr.shape[0], 1))], axis=1)
        if arr.shape[-1] != 4:
            return np.full((0, 4), np.nan)
    else:
        if isinstance(colors, str) or (
            isinstance(colors, Sequence) and len(colors) in (3, 4) and all(
                isinstance(v, (int, float, np.number)) for v in colors)
        ):
            colors = [colors]
        try:
            arr = np.array([_parse_one(c) for c in colors], dtype=float).reshape(-1, 4)
        except TypeError:
            return np.full((0, 4), np.nan)
    arr = arr.copy()
    arr[~np.isfinite(arr).all(axis=1)] = np.nan
    return np.clip(arr, 0.0, 1.0)


def blend_over(rgba: Any, background: Any = WHITE) -> np.ndarray:
    """Composite RGBA colours over an opaque background, as a raster backend does.

    The blend happens on the stored sRGB values (not linear light) because
    that is what Agg and image viewers do, so the result is the colour a
    reader actually sees.  A background with alpha < 1 is first put on white.

    Returns
    -------
    numpy.ndarray
        ``(n, 3)`` sRGB1 floats.
    """
    fg = as_rgba(rgba)
    bg = as_rgba(background)[0]
    if bg.shape[0] == 4 and bg[3] < 1.0:
        bg = np.append(bg[3] * bg[:3] + (1.0 - bg[3]) * np.asarray(WHITE), 1.0)
    alpha = fg[:, 3:4]
    return alpha * fg[:, :3] + (1.0 - alpha) * bg[:3]


def to_hex(rgb: Any) -> str:
    """Format one sRGB1 colour as ``#rrggbb`` (alpha ignored)."""
    values = np.clip(np.asarray(rgb, dtype=float)[:3], 0.0, 1.0)
    return "#" + "".join(f"{round(v * 255):02x}" for v in values)


# --------------------------------------------------------------------------
# CAM02-UCS and colour-vision deficiency
# --------------------------------------------------------------------------


def _rgb(rgb: Any) -> np.ndarray:
    arr = np.asarray(rgb, dtype=float)[..., :3]
    return np.clip(np.nan_to_num(arr, nan=0.0), 0.0, 1.0)


def srgb_to_ucs(rgb: Any) -> np.ndarray:
    """Convert sRGB1 colours (``(..., 3)``) to CAM02-UCS J', a', b' (Luo, Cui & Li 2006)."""
    return np.asarray(cspace_convert(_rgb(rgb), "sRGB1", "CAM02-UCS"))


def check_severity(severity: float) -> float:
    """Return ``severity`` as a float, or raise ValueError when it lies outside 0–100."""
    value = float(severity)
    if not 0.0 <= value <= 100.0:
        raise ValueError(f"CVD severity must lie between 0 and 100 (got {severity!r})")
    return value


def _cvd_space(kind: str, severity: float) -> dict[str, Any]:
    if kind not in _CVD_NAMES:
        raise ValueError(f"unknown colour-vision deficiency {kind!r} (use protan, deutan or tritan)")
    return {"name": "sRGB1+CVD", "cvd_type": _CVD_NAMES[kind], "severity": check_severity(severity)}


def simulate_cvd(rgb: Any, kind: str, severity: float = 100.0) -> np.ndarray:
    """Simulate how colours look under protan, deutan or tritan vision (Machado et al. 2009).

    The colours are taken as lying in colorspacious' "sRGB1+CVD" space and
    converted *from* it *to* sRGB1, which applies the Machado matrix in linear
    light.  The matrix can leave the gamut, so the result is clipped to [0, 1].

    Parameters
    ----------
    rgb
        ``(..., 3)`` sRGB1 floats.
    kind
        ``"protan"``, ``"deutan"`` or ``"tritan"``.
    severity
        0 (normal vision) to 100 (dichromacy).
    """
    out = cspace_convert(_rgb(rgb), _cvd_space(kind, severity), "sRGB1")
    return np.clip(np.nan_to_num(np.asarray(out, dtype=float), nan=0.0), 0.0, 1.0)


def simulate_cvd_linear(linear_rgb: Any, kind: str, severity: float = 100.0) -> np.ndarray:
    """Apply the Machado simulation to *linear* RGB without clipping (to inspect the matrix itself)."""
    space = dict(_cvd_space(kind, severity), name="sRGB1-linear+CVD")
    return np.asarray(cspace_convert(np.asarray(linear_rgb, dtype=float), space, "sRGB1-linear"))


def vision_ucs(rgb: Any, severity: float = 100.0) -> np.ndarray:
    """CAM02-UCS coordinates of colours under each of :data:`VISIONS`.

    Returns
    -------
    numpy.ndarray
        ``(4, n, 3)``: normal, protan, deutan, tritan.  The three simulations
        are stacked and converted to CAM02-UCS in a single call.
    """
    base = _rgb(rgb).reshape(-1, 3)
    stacked = np.stack([base] + [simulate_cvd(base, kind, severity) for kind in VISIONS[1:]])
    return srgb_to_ucs(stacked)


def ucs_distance(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Euclidean distance in CAM02-UCS (ΔE'), broadcasting over leading axes."""
    return np.sqrt(np.sum((np.asarray(a) - np.asarray(b)) ** 2, axis=-1))


def delta_e(rgb1: Any, rgb2: Any) -> np.ndarray:
    """CAM02-UCS ΔE' between sRGB1 colours (vectorised over pairs)."""
    both = srgb_to_ucs(np.stack([_rgb(rgb1), _rgb(rgb2)]))
    return ucs_distance(both[0], both[1])


def pairwise_delta_e(ucs: np.ndarray) -> np.ndarray:
    """ΔE' between every pair of colours: ``(..., n, 3)`` -> ``(..., n, n)``."""
    return ucs_distance(ucs[..., :, None, :], ucs[..., None, :, :])


def chroma(ucs: np.ndarray) -> np.ndarray:
    """Colourfulness in CAM02-UCS: the length of (a', b')."""
    return np.hypot(ucs[..., 1], ucs[..., 2])


# --------------------------------------------------------------------------
# luminance, contrast, lightness
# --------------------------------------------------------------------------


def relative_luminance(rgb: Any) -> np.ndarray:
    """WCAG 2.1 relative luminance of sRGB1 colours (``(..., 3)`` -> ``(...)``).

    Uses the W3C definition literally, including its 0.03928 threshold for
    the linear segment (IEC 61966-2-1 says 0.04045; the two agree to 1e-5).
    """
    c = _rgb(rgb)
    linear = np.where(c <= 0.03928, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return linear @ np.array([0.2126, 0.7152, 0.0722])


def contrast_ratio(fg: Any, bg: Any) -> np.ndarray:
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05), 1 to 21, never rounded."""
    la = relative_luminance(fg)
    lb = relative_luminance(bg)
    return (np.maximum(la, lb) + 0.05) / (np.minimum(la, lb) + 0.05)


def cie_lightness(rgb: Any) -> np.ndarray:
    """CIE 1976 L* (0–100) of sRGB1 colours, white point D65: the lightness a grayscale print keeps."""
    return np.asarray(cspace_convert(_rgb(rgb), "sRGB1", "CIELab"))[..., 0]


def to_grayscale(rgb: Any) -> np.ndarray:
    """sRGB1 grays with the same CIE L* as the given colours (``(..., 3)`` -> ``(..., 3)``)."""
    # Y of colorspacious' own sRGB -> XYZ matrix, so the gray has exactly the colour's L*
    y = np.asarray(cspace_convert(_rgb(rgb), "sRGB1", "XYZ100"))[..., 1] / 100.0
    gray = np.asarray(cspace_convert(np.repeat(y[..., None], 3, axis=-1), "sRGB1-linear", "sRGB1"))
    return np.clip(gray, 0.0, 1.0)


__all__ = [
    "VISIONS",
    "WHITE",
    "as_rgba",
    "blend_over",
    "check_severity",
    "chroma",
    "cie_lightness",
    "contrast_ratio",
    "delta_e",
    "pairwise_delta_e",
    "relative_luminance",
    "simulate_cvd",
    "simulate_cvd_linear",
    "srgb_to_ucs",
    "to_grayscale",
    "to_hex",
    "ucs_distance",
    "vision_ucs",
]

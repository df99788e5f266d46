"""Pictures for colour findings: a rendered figure beside what colour-blind and grayscale readers see.

One PNG per figure: the original, then its protan, deutan and tritan simulations
(Machado et al. 2009, through :mod:`figproof.science.colour`), and a grayscale
version when a grayscale finding exists, each under a label, two panels a row.
Composed with Pillow only (no pyplot), deterministically: the same render gives
the same bytes.
"""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from figproof.science import colour as cs

#: Rules whose findings call for the simulated views.
COLOUR_RULES = ("colormap-not-uniform", "colours-confusable-cvd", "colours-confusable-gray", "low-contrast")
GRAY_RULES = ("colours-confusable-gray",)

_LABEL_HEIGHT = 30
_GAP = 10
_FONT_SIZE = 18


def panel_needed(rule_ids: Iterable[str]) -> tuple[bool, bool]:
    """Whether a figure with findings of ``rule_ids`` gets a panel, and whether it shows grayscale."""
    ids = set(rule_ids)
    return bool(ids & set(COLOUR_RULES)), bool(ids & set(GRAY_RULES))


def _font(size: int) -> ImageFont.ImageFont | ImageFont.FreeTypeFont:
    try:
        return ImageFont.load_default(size=size)
    except (TypeError, OSError):  # Pillow without FreeType: the small bitmap default font
        return ImageFont.load_default()


def _map_colors(rgb: np.ndarray, convert: object) -> np.ndarray:
    """Apply a colour conversion to an image through its distinct colours only.

    A figure has far fewer distinct colours than pixels (flat faces, antialiased
    edges), so converting each once is much faster than converting every pixel.
    """
    flat = rgb.reshape(-1, 3)
    packed = (flat[:, 0].astype(np.uint32) << 16) | (flat[:, 1].astype(np.uint32) << 8) | flat[:, 2]
    unique, inverse = np.unique(packed, return_inverse=True)
    colors = np.stack([(unique >> 16) & 255, (unique >> 8) & 255, unique & 255], axis=1) / 255.0
    out = np.asarray(convert(colors))  # type: ignore[operator]
    out8 = np.clip(np.round(out * 255.0), 0, 255).astype(np.uint8)
    return out8[inverse.reshape(-1)].reshape(rgb.shape)


CVD_KINDS = ("protan", "deutan", "tritan")


def simulated_views(image: Image.Image, *, gray: bool, severity: float,
                    kinds: tuple[str, ...] = CVD_KINDS) -> list[tuple[str, Image.Image]]:
    """The labelled views of one RGB image: original, the simulated ``kinds`` (protan, deutan, tritan by
    default) and grayscale when ``gray``."""
    rgb = np.asarray(image.convert("RGB"), dtype=np.uint8)
    sev = cs.check_severity(severity)
    views = [("Original", image.convert("RGB"))]
    for kind, name in (("protan", "Protan"), ("deutan", "Deutan"), ("tritan", "Tritan")):
        if kind not in kinds:
            continue
        sim = _map_colors(rgb, lambda c, k=kind: cs.simulate_cvd(c, k, sev))
        views.append((f"{name} (simulated, severity {sev:g})", Image.fromarray(sim, "RGB")))
    if gray:
        views.append(("Grayscale (same CIE L*)", Image.fromarray(_map_colors(rgb, cs.to_grayscale), "RGB")))
    return views


def _flatten(path: Path, max_width: int) -> Image.Image:
    try:
        with Image.open(path) as opened:
            opened.load()
            image = opened.convert("RGBA")
    except OSError as exc:  # missing file or not an image
        raise ValueError(f"{path}: cannot read the rendered figure ({exc})") from exc
    # a transparent figure is shown on white, as colour_science assumes
    flat = Image.new("RGBA", image.size, (255, 255, 255, 255))
    flat.alpha_composite(image)
    flat = flat.convert("RGB")
    if flat.width > max_width:
        height = max(1, round(flat.height * max_width / flat.width))
        flat = flat.resize((max_width, height), Image.Resampling.LANCZOS)
    return flat


def write_cvd_panel(render_png: Path, out_png: Path, *, gray: bool = False, severity: float = 100.0,
                    max_width: int = 900) -> Path:
    """Write one PNG showing a rendered figure as normal, protan, deutan, tritan (and grayscale) readers see it.

    Parameters
    ----------
    render_png
        The figure as rendered by the child (any image Pillow reads; transparency is put on white).
    out_png
        Where to write the panel; parent folders are created.
    gray
        Add a grayscale view (when the figure has a colours-confusable-gray finding).
    severity
        Severity of the simulated deficiencies, 0–100 (ValueError outside).
    max_width
        Each view is scaled down to at most this many pixels wide.

    Returns
    -------
    pathlib.Path
        ``out_png``.

    Raises
    ------
    ValueError
        When ``render_png`` cannot be read as an image or ``severity`` lies outside 0–100.
    """
    cs.check_severity(severity)
    views = simulated_views(_flatten(Path(render_png), max_width), gray=gray, severity=severity)
    w, h = views[0][1].size
    cols = 2
    rows = (len(views) + cols - 1) // cols
    cell_h = _LABEL_HEIGHT + h
    sheet = Image.new("RGB", (cols * w + (cols + 1) * _GAP, rows * cell_h + (rows + 1) * _GAP), (255, 255, 255))
    draw = ImageDraw.Draw(sheet)
    font = _font(_FONT_SIZE)
    for k, (label, view) in enumerate(views):
        x = _GAP + (k % cols) * (w + _GAP)
        y = _GAP + (k // cols) * (cell_h + _GAP)
        draw.text((x + 4, y + 5), label, fill=(0, 0, 0), font=font)
        sheet.paste(view, (x, y + _LABEL_HEIGHT))
        # a thin frame shows where a white figure ends on the white sheet
        draw.rectangle((x - 1, y + _LABEL_HEIGHT - 1, x + w, y + _LABEL_HEIGHT + h), outline=(170, 170, 170))
    out = Path(out_png)
    out.parent.mkdir(parents=True, exist_ok=True)
    sheet.save(out, format="PNG")
    return out


__all__ = ["COLOUR_RULES", "GRAY_RULES", "panel_needed", "simulated_views", "write_cvd_panel"]

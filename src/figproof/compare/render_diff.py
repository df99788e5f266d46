"""Is a pixel difference only rendering?  Changes of anti-aliasing, text hinting or sub-pixel placement
(a different matplotlib or FreeType) against changes of content (a title, a bar, a point, an axis range).

A pixel of one image counts as changed only if it lies outside the range of colours found within
``radius`` pixels of it in the other image, by more than a slack that grows with that range (edges,
where anti-aliasing varies, get more slack than flat areas).  Rendering differences leave scattered
specks of small excess; a changed mark leaves at least one solid patch.  Each connected patch of changed
pixels is weighed by its summed excess in full-pixel units (255 = one pixel fully changed), and the
difference is rendering only when the heaviest patch weighs less than ``max_patch``.

Calibrated on matplotlib figures drawn with text anti-aliasing on and off and text hinting "auto" and
"none" (heaviest patch at most 1.6) against a one-letter title change (8.4), a moved point (47) and a
changed bar (over 1000); the limits are common practice.
"""

from __future__ import annotations

import numpy as np

RADIUS = 2  # pixels a glyph or an edge may move between renderings
SLACK = 16.0  # 0-255 levels of noise tolerated in flat areas
EDGE_SLACK = 0.25  # share of the local range added to the slack at edges
MAX_PATCH = 4.0  # full-pixel units: the heaviest changed patch of a rendering-only difference stays below
MAX_PIXELS = 25_000_000  # larger images are not analysed (the filters would need several copies of them)


def _excess(x: np.ndarray, y: np.ndarray, radius: int) -> np.ndarray:
    """How far each pixel of ``x`` lies outside the colours of its neighbourhood in ``y`` (0 when inside)."""
    from scipy.ndimage import maximum_filter, minimum_filter

    size = (2 * radius + 1, 2 * radius + 1, 1)
    hi = maximum_filter(y, size=size)
    lo = minimum_filter(y, size=size)
    slack = SLACK + EDGE_SLACK * (hi - lo).max(axis=-1, keepdims=True)
    return np.maximum(x - (hi + slack), (lo - slack) - x).clip(0).max(axis=-1)


def heaviest_patch(a: np.ndarray, b: np.ndarray, radius: int = RADIUS) -> float:
    """The weight (full-pixel units) of the heaviest connected patch of pixels changed beyond a small shift."""
    from scipy.ndimage import label, sum_labels

    x = a.astype(np.float32)
    y = b.astype(np.float32)
    if x.ndim == 2:
        x, y = x[..., None], y[..., None]
    excess = np.maximum(_excess(x, y, radius), _excess(y, x, radius))
    changed = excess > 0
    if not changed.any():
        return 0.0
    labels, n = label(changed, structure=np.ones((3, 3)))
    weights = sum_labels(excess, labels, index=np.arange(1, n + 1)) / 255.0
    return float(np.max(weights))


def rendering_only(a: np.ndarray, b: np.ndarray) -> bool | None:
    """True when two same-sized images differ only in rendering; None when too large to tell."""
    if a.shape != b.shape or a.shape[0] * a.shape[1] > MAX_PIXELS:
        return None
    return heaviest_patch(a, b) < MAX_PATCH


__all__ = ["MAX_PATCH", "heaviest_patch", "rendering_only"]

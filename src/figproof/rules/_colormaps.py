"""Judging a colour map from its sampled colours in CAM02-UCS: its shape and its defects.

A map is *cyclic* when its two ends look alike, *diverging* when its lightness J' turns
near the middle (rises then falls, or falls then rises, beyond the reversal limit), and
*sequential* otherwise; each shape has its own test (see :func:`judge_colormap`).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

from figproof.model.findings import Severity
from figproof.science import colour as cs


@dataclass(frozen=True, slots=True)
class MapProblem:
    """One defect of a colour map, as numbers; the rule turns it into a message."""

    kind: str  # reversal | centre-chroma | ends | cyclic-shape | steps
    shape: str  # sequential | diverging | cyclic
    severity: Severity  # error | warning
    value: float
    limit: float
    at: float = 0.0  # position in the map (0-1) where it happens
    low: float = 0.0
    high: float = 0.0


def drawdown(j: np.ndarray, rising: bool) -> tuple[float, int]:
    """Largest move of ``j`` against the given direction, and where it ends."""
    if j.size < 2:
        return 0.0, 0
    back = np.maximum.accumulate(j) - j if rising else j - np.minimum.accumulate(j)
    k = int(np.argmax(back))
    return float(back[k]), k


@functools.lru_cache(maxsize=512)
def judge_cached(data: bytes, rows: int, params: tuple[float, ...]) -> tuple[MapProblem, ...]:
    """Judge a colour map from its samples; cached on the sample bytes (pure: same input, same verdict)."""
    samples = np.frombuffer(data, dtype=float).reshape(rows, -1)
    return judge_colormap(samples, *params)


def judge_colormap(
    samples: np.ndarray,
    reversal: float = 5.0,
    centre_chroma: float = 20.0,
    ends_difference: float = 15.0,
    cyclic_ends: float = 5.0,
    centre_offset: float = 0.2,
    step_cv: float = 0.6,
    blocks: float = 32.0,
) -> tuple[MapProblem, ...]:
    """Classify a colour map from its sampled colours and list its defects.

    Parameters
    ----------
    samples
        ``(n, 3)`` or ``(n, 4)`` sRGB1 samples evenly spaced over the map (alpha ignored).
    reversal
        Largest tolerated move of lightness J' against its direction.
    centre_chroma
        Chroma at a diverging map's centre from which the map counts as a rainbow.
    ends_difference
        Largest tolerated J' difference between a diverging map's two ends.
    cyclic_ends
        ΔE' below which the two ends count as equal (a cyclic map).
    centre_offset
        How far from the middle (as a fraction of the map) a diverging map's turning point may lie.
    step_cv
        Largest tolerated coefficient of variation of ΔE' over ``blocks`` equal blocks.

    Returns
    -------
    tuple of MapProblem
        Empty when the map is fine.
    """
    arr = np.asarray(samples, dtype=float)
    if arr.ndim != 2 or arr.shape[1] < 3:
        return ()
    arr = arr[np.isfinite(arr[:, :3]).all(axis=1), :3]
    if arr.shape[0] < 3:
        return ()
    ucs = cs.srgb_to_ucs(np.clip(arr, 0.0, 1.0))
    j = ucs[:, 0]
    n = j.size
    pos = np.linspace(0.0, 1.0, n)
    problems: list[MapProblem] = []

    if float(cs.ucs_distance(ucs[0], ucs[-1])) < cyclic_ends:
        shape = "cyclic"
        # around a cycle a good map is V- or Λ-shaped in any phase: from its lightest
        # sample J' must fall to the darkest one and then rise back
        top = int(np.argmax(j))
        ring = np.roll(j[:-1], -top)
        bottom = int(np.argmin(ring))
        fall, k1 = drawdown(ring[: bottom + 1], rising=False)
        rise, k2 = drawdown(ring[bottom:], rising=True)
        worst, k = (fall, k1) if fall >= rise else (rise, bottom + k2)
        if worst > reversal:
            problems.append(MapProblem("cyclic-shape", shape, "error", worst, reversal,
                                       at=float(pos[(k + top) % (n - 1)]), low=float(j.min()), high=float(j.max())))
    else:
        ends_hi = max(j[0], j[-1])
        ends_lo = min(j[0], j[-1])
        centre: int | None = None
        peak, trough = int(np.argmax(j)), int(np.argmin(j))
        candidates = []
        if j[peak] - ends_hi > reversal and 0 < peak < n - 1:
            candidates.append((float(j[peak] - ends_hi), peak))
        if ends_lo - j[trough] > reversal and 0 < trough < n - 1:
            candidates.append((float(ends_lo - j[trough]), trough))
        for _, idx in sorted(candidates, reverse=True):
            if abs(pos[idx] - 0.5) <= centre_offset:
                centre = idx
                break
        if centre is not None:
            shape = "diverging"
            rises_first = bool(j[centre] > ends_hi)
            left, kl = drawdown(j[: centre + 1], rising=rises_first)
            right, kr = drawdown(j[centre:], rising=not rises_first)
            worst, k = (left, kl) if left >= right else (right, centre + kr)
            if worst > reversal:
                problems.append(MapProblem("reversal", shape, "error", worst, reversal, at=float(pos[k]),
                                           low=float(j.min()), high=float(j.max())))
            c = float(cs.chroma(ucs[centre]))
            if c >= centre_chroma:
                problems.append(MapProblem("centre-chroma", shape, "error", c, centre_chroma, at=float(pos[centre])))
            gap = float(abs(j[0] - j[-1]))
            if gap > ends_difference:
                problems.append(MapProblem("ends", shape, "warning", gap, ends_difference, low=float(j[0]),
                                           high=float(j[-1])))
        else:
            shape = "sequential"
            worst, k = drawdown(j, rising=bool(j[-1] >= j[0]))
            if worst > reversal:
                problems.append(MapProblem("reversal", shape, "error", worst, reversal, at=float(pos[k]),
                                           low=float(j[0]), high=float(j[-1])))

    # stepped maps repeat colours: measure evenness over their distinct steps only
    steps = cs.ucs_distance(ucs[1:], ucs[:-1])
    steps = steps[steps > 1e-9]
    nblocks = int(min(blocks, steps.size))
    if nblocks >= 2:
        sums = np.array([b.sum() for b in np.array_split(steps, nblocks)])
        mean = float(sums.mean())
        cv = float(sums.std() / mean) if mean > 0 else 0.0
        if cv > step_cv:
            problems.append(MapProblem("steps", shape, "warning", cv, step_cv))
    return tuple(problems)

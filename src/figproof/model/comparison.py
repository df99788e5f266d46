"""The verdict on a committed figure file against the regenerated one: plain data the reproducibility rules read.

The comparing itself (Pillow, file I/O) lives in :mod:`figproof.compare`; rules only see this record.
"""

from __future__ import annotations

import typing
from pathlib import Path
from typing import Literal

from figproof.model.records import Serialisable, model

RASTER_SUFFIXES = frozenset({".png", ".jpg", ".jpeg", ".tif", ".tiff", ".gif", ".bmp", ".webp"})
VECTOR_SUFFIXES = frozenset({".pdf", ".svg", ".eps", ".ps"})
# "rendering": the pixels differ only by small shifts of edges and text (anti-aliasing, hinting)
ComparisonStatus = Literal["same", "drift", "rendering", "size-mismatch", "missing-committed", "missing-regenerated",
                           "unreadable-committed", "unreadable-regenerated", "too-large"]
FileKind = Literal["raster", "vector", "other"]
STATUSES: tuple[ComparisonStatus, ...] = typing.get_args(ComparisonStatus)


@model
class OutputComparison(Serialisable):
    """The verdict on one committed figure file against its regenerated counterpart.

    ``path`` is the repo-relative path of the output (for a notebook's stored
    output, the notebook path with ``cell`` and ``output`` set).  ``rms`` is on
    the 0–255 scale (None when pixels were not compared).  ``sizes`` are
    ``(width, height)`` in pixels for rasters.  ``*_version`` are the matplotlib
    versions the files say they were made with, when they say so.
    """

    path: str
    kind: FileKind
    status: ComparisonStatus
    rms: float | None = None
    differing_pixels: int | None = None
    total_pixels: int | None = None
    committed_size: tuple[int, int] | None = None
    regenerated_size: tuple[int, int] | None = None
    committed_version: str | None = None
    regenerated_version: str | None = None
    tolerance: float = 0.0
    message: str = ""
    cell: int | None = None
    output: int | None = None


def kind_of(path: str | Path) -> FileKind:
    """Return ``"raster"``, ``"vector"`` or ``"other"`` from a file name's suffix."""
    suffix = Path(path).suffix.lower()
    if suffix in RASTER_SUFFIXES:
        return "raster"
    if suffix in VECTOR_SUFFIXES:
        return "vector"
    return "other"

"""SHA-256 of files, shared by the child's capture (which must bypass its own open hook) and the cache."""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from pathlib import Path
from typing import Any, BinaryIO


def file_sha256(path: Path, opener: Callable[..., Any] = open) -> str | None:
    """SHA-256 of a file's bytes, or None when it is not a readable regular file."""
    try:
        h = hashlib.sha256()
        fh: BinaryIO
        with opener(path, "rb") as fh:
            for chunk in iter(lambda: fh.read(1 << 20), b""):
                h.update(chunk)
        return h.hexdigest()
    except OSError:
        return None

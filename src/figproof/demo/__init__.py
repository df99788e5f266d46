"""The bundled demo: an invented lab repo (barley seedlings under salt stress) with honest and flawed figures."""

from __future__ import annotations

import shutil
from pathlib import Path

LAB = Path(__file__).resolve().parent / "lab"


def copy_demo(base: Path) -> Path:
    """Copy the demo lab repo into ``base/demo-lab`` (replacing an earlier copy) and return its path."""
    dest = base / "demo-lab"
    if dest.exists():
        shutil.rmtree(dest)
    shutil.copytree(LAB, dest, ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    return dest

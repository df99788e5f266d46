"""Time and memory of compare_output on PNGs of growing size (run: .venv/bin/python tests/bench/bench_compare.py).

Prints one line per size: megapixels, status, best of three wall times of the
comparison and of the change view, and the peak resident memory each adds (VmHWM)
in a fresh process that never held the test arrays, for a pair of RGB PNGs that
differ in one block; the last size (56 MP) is over the limit and not decoded.
"""

from __future__ import annotations

import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from PIL import Image

from figproof.compare.files import compare_output
from figproof.report.change_view import ChangeViewError, write_change_view


def _pair(folder: Path, width: int, height: int) -> tuple[Path, Path]:
    # smooth gradient (compresses well, so the files are quick to write) plus one changed block
    x = np.linspace(0, 255, width, dtype=np.float32)
    row = np.broadcast_to(x.astype(np.uint8)[None, :, None], (height, width, 3))
    a = np.ascontiguousarray(row)
    b = a.copy()
    b[: height // 10, : width // 10] = 0
    pa, pb = folder / f"c{width}.png", folder / f"r{width}.png"
    Image.fromarray(a).save(pa, compress_level=1)
    Image.fromarray(b).save(pb, compress_level=1)
    return pa, pb


def peak_mb() -> float:
    """High-water resident memory of this process: VmHWM (reset by exec, unlike ru_maxrss on Linux)."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def one(a: Path, b: Path, width: int, height: int) -> None:
    """Measure in a fresh process that never held the test arrays, so ru_maxrss is the comparison's own peak."""
    base = peak_mb()
    best = float("inf")
    for _ in range(3):
        start = time.perf_counter()
        result = compare_output(a, b, tolerance=0)
        best = min(best, time.perf_counter() - start)
    after_compare = peak_mb()
    start = time.perf_counter()
    try:
        write_change_view(a, b, a.parent / "changes.png")
    except ChangeViewError:  # over the pixel limit: no view, as in a check
        pass
    diff_s = time.perf_counter() - start
    after_diff = peak_mb()
    print(f"{width * height / 1e6:6.1f} MP  {result.status:10s}  compare {best:6.3f} s "
          f"(peak +{after_compare - base:5.0f} MB)  change view {diff_s:6.3f} s "
          f"(peak +{after_diff - base:5.0f} MB)  after imports {base:4.0f} MB", flush=True)


def main() -> None:
    if len(sys.argv) == 5:
        one(Path(sys.argv[1]), Path(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4]))
        return
    for width, height in ((640, 480), (1920, 1440), (4000, 3000), (8000, 6000), (8000, 7000)):
        with tempfile.TemporaryDirectory() as tmp:
            a, b = _pair(Path(tmp), width, height)
            subprocess.run([sys.executable, __file__, str(a), str(b), str(width), str(height)], check=True)


if __name__ == "__main__":
    main()

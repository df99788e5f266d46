"""Speed and memory of matching figures as submitted to regenerated ones (run: python tests/bench/bench_references.py).

For N references against M regenerated figures: M plots in four kinds drawn by matplotlib at 100 dpi (what a
check renders), and N references, half of them regenerated figures as a journal returns them (drawn at 300 dpi,
cropped by 3 pixels, JPEG quality 40) and half figures no script draws.  Prints, per (N, M), the seconds to read
and normalise the references, to normalise the regenerated figures, and to match them (best of three), the
verdicts (how many copies were reproduced as their own figure, how many figures no script draws were called
reproduced), and the peak resident memory (VmHWM) the work adds in a fresh process.  ``N M`` as arguments: that
size only.
"""

from __future__ import annotations

import io
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

SIZES = ((5, 10), (10, 40), (20, 100), (40, 200))
if len(sys.argv) == 3:  # N M: one size only
    SIZES = ((int(sys.argv[1]), int(sys.argv[2])),)


def peak_mb() -> float:
    """High-water resident memory of this process: VmHWM (reset by exec, unlike ru_maxrss on Linux)."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _draw(kind: int, seed: int, dpi: int) -> bytes:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    rng = np.random.default_rng(seed)
    fig, ax = plt.subplots(figsize=(4, 3), dpi=dpi)
    if kind == 0:
        ax.plot(np.arange(20), np.cumsum(rng.normal(size=20)), "o-")
    elif kind == 1:
        ax.bar(range(6), rng.uniform(1, 5, 6))
    elif kind == 2:
        ax.scatter(rng.normal(size=80), rng.normal(size=80))
    else:
        ax.hist(rng.normal(size=300), bins=20)
    ax.set_xlabel("time (h)")
    ax.set_ylabel("signal")
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    plt.close(fig)
    return buf.getvalue()


def make(folder: Path, n: int, m: int) -> None:
    """M regenerated renders in folder/renders, N references in folder/references."""
    from PIL import Image

    renders, refs = folder / "renders", folder / "references"
    renders.mkdir()
    refs.mkdir()
    for g in range(m):
        (renders / f"fig{g:03d}.png").write_bytes(_draw(g % 4, g, 100))
    for r in range(n):
        if r % 2 == 0:  # a regenerated figure as submitted and returned by the journal
            g = (r * 7) % m
            img = Image.open(io.BytesIO(_draw(g % 4, g, 300))).convert("RGB")
            img = img.crop((3, 3, img.width - 3, img.height - 3))
            img.save(refs / f"Figure {r + 1} (fig{g:03d}).jpg", "JPEG", quality=40)
        else:  # a figure no script draws
            (refs / f"Figure {r + 1}.png").write_bytes(_draw(r % 4, 10_000 + r, 300))


def one(folder: Path, n: int, m: int) -> None:
    from figproof.deposit.references import load_references, match, regenerated_picture

    base = peak_mb()
    start = time.perf_counter()
    refs, problems = load_references(folder / "references")
    load_s = time.perf_counter() - start
    start = time.perf_counter()
    regenerated = [p for p in (regenerated_picture(f.stem, f) for f in sorted((folder / "renders").iterdir()))
                   if p is not None]
    norm_s = time.perf_counter() - start
    best = float("inf")
    for _ in range(3):
        start = time.perf_counter()
        found = match(refs, regenerated)
        best = min(best, time.perf_counter() - start)
    verdicts = {v: sum(x.verdict == v for x in found) for v in ("reproduced", "differs", "not-found")}
    assert not problems and len(refs) == n and len(regenerated) == m
    copies = [x for x in found if "(fig" in x.reference]
    right = sum(x.verdict == "reproduced" and f"({x.regenerated})" in x.reference for x in copies)
    false = [x for x in found if "(fig" not in x.reference and x.verdict == "reproduced"]
    print(f"N={n:3d} M={m:4d}  read references {load_s:6.2f} s  normalise regenerated {norm_s:6.2f} s  "
          f"match {best:7.2f} s ({best / (n * m) * 1000:5.1f} ms per pair)  peak +{peak_mb() - base:4.0f} MB  "
          f"{verdicts}; copies reproduced as their own figure {right} of {len(copies)}, figures no script draws "
          f"called reproduced {len(false)} of {n - len(copies)}"
          + (f" (similarity {', '.join(f'{x.similarity:.2f}' for x in false)})" if false else ""), flush=True)


def main() -> None:
    if len(sys.argv) == 4:
        one(Path(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]))
        return
    for n, m in SIZES:
        with tempfile.TemporaryDirectory() as tmp:
            make(Path(tmp), n, m)
            subprocess.run([sys.executable, __file__, tmp, str(n), str(m)], check=True)


if __name__ == "__main__":
    main()

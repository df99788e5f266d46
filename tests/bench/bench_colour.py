"""Time the colour rules on a figure with 50 series and a 2000x2000 image (run: python tests/bench/bench_colour.py).

The figure has one axes with 50 lines in distinct colours (1225 pairs), 60 tick/label texts, and a second
axes with a 2000x2000 image mapped through jet plus its colorbar.  Prints the best of five runs per rule
(cold = first call, before the colour-map verdict cache is warm), and the time to write the simulated-views
panel for a 2000x2000 render.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/ for builders

from builders import axes, figure, line

from figproof.model.records import ColorMapping, Text
from figproof.rules import colour


def jet_samples() -> np.ndarray:
    """jet's piecewise-linear definition (matplotlib's _jet_data), sampled at 256 points without matplotlib."""
    t = np.linspace(0, 1, 256)
    r = np.interp(t, [0, 0.35, 0.66, 0.89, 1], [0, 0, 1, 1, 0.5])
    g = np.interp(t, [0, 0.125, 0.375, 0.64, 0.91, 1], [0, 0, 1, 1, 0, 0])
    b = np.interp(t, [0, 0.11, 0.34, 0.65, 1], [0.5, 1, 1, 0, 0])
    return np.stack([r, g, b, np.ones_like(t)], axis=1)


def model():
    hues = np.linspace(0, 1, 50, endpoint=False)
    # 50 colours around a hue circle at two lightness levels, so some pairs clash and some do not
    colors = [(0.5 + 0.4 * np.cos(2 * np.pi * h), 0.5 + 0.4 * np.cos(2 * np.pi * (h - 1 / 3)),
               0.5 + 0.4 * np.cos(2 * np.pi * (h + 1 / 3)) * (0.6 if k % 2 else 1.0), 1.0)
              for k, h in enumerate(hues)]
    lines = [line(np.arange(20) / 20, np.full(20, k / 50), color=c, label=f"series {k}", line_no=k + 1)
             for k, c in enumerate(colors)]
    texts = [Text(text=str(k), role="tick", color=(0.6, 0.6, 0.6, 1.0), in_axes=False) for k in range(60)]
    left = axes(lines=lines, texts=texts)
    image = ColorMapping(kind="image", name="jet", samples=jet_samples(), shape=(2000, 2000))
    bar = ColorMapping(kind="colorbar", name="jet", samples=jet_samples())
    right = axes(index=1, colormaps=[image, bar])
    return figure(left, right)


def best(fn, repeat: int = 5) -> tuple[float, float]:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return times[0], min(times)


def main() -> None:
    fig = model()
    total_hits = 0
    for r in colour.RULES:
        knobs = r.defaults()
        cold, warm = best(lambda r=r, knobs=knobs: list(r.check(fig, knobs)))
        hits = list(r.check(fig, knobs))
        total_hits += len(hits)
        print(f"{r.id:26s} first {cold * 1000:8.2f} ms   best of 5 {warm * 1000:8.2f} ms   {len(hits):4d} findings")
    print(f"{'all four rules':26s} {total_hits} findings on 50 series (1225 pairs) and a 2000x2000 image")

    from PIL import Image, ImageDraw

    from figproof.report.images import write_cvd_panel

    with tempfile.TemporaryDirectory() as tmp:
        render = Path(tmp) / "render.png"
        img = Image.new("RGB", (2000, 2000), (255, 255, 255))
        draw = ImageDraw.Draw(img)
        for k, c in enumerate(fig.axes[0].lines):
            rgb = tuple(round(v * 255) for v in c.color[:3])
            draw.line((0, 40 * k, 2000, 40 * k + 300), fill=rgb, width=5)
        img.save(render)
        for width in (900, 2000):
            t0 = time.perf_counter()
            write_cvd_panel(render, Path(tmp) / "panel.png", gray=True, severity=100, max_width=width)
            print(f"write_cvd_panel 2000x2000 render, views {width} px wide: {time.perf_counter() - t0:.2f} s")


if __name__ == "__main__":
    main()

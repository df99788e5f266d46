"""The change view of a drifted figure: regions, the parts named, the picture, the caption.

References: Pillow's ``ImageChops.difference(...).getbbox()`` (the bounding box of the non-zero difference)
for where a change lies; matplotlib's own ``get_window_extent`` for where a title and bars are drawn.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from PIL import Image, ImageChops

from figproof.model.records import Axes, BarSet, FigureModel, Text
from figproof.report.change_view import (
    FADE,
    MAX_SIDE,
    TINT,
    Change,
    ChangeViewError,
    analyse,
    read_on_white,
    render,
    write_change_view,
)


def _png(path: Path, pixels: np.ndarray) -> Path:
    Image.fromarray(pixels).save(path)
    return path


def _pillow_box(a: np.ndarray, b: np.ndarray) -> tuple[int, int, int, int] | None:
    return ImageChops.difference(Image.fromarray(a), Image.fromarray(b)).getbbox()


def test_two_separate_changes_are_two_regions_where_pillow_puts_them() -> None:
    a = np.full((120, 200, 3), 255, np.uint8)
    b = a.copy()
    b[10:30, 20:60] = (40, 90, 160)  # top left
    b[80:100, 150:190] = (200, 30, 30)  # bottom right
    change, _, _ = analyse(a, b)
    assert len(change.regions) == 2
    # each region's box equals Pillow's bounding box of the difference in that half of the image
    assert change.regions[0] == _pillow_box(a[:, :100], b[:, :100])
    x0, y0, x1, y1 = _pillow_box(a[:, 100:], b[:, 100:])
    assert change.regions[1] == (x0 + 100, y0, x1 + 100, y1)
    assert change.changed == 20 * 40 * 2
    assert change.total == 120 * 200
    assert change.parts == ("a region at the top left", "a region at the bottom right")
    assert change.caption() == "a region at the top left and a region at the bottom right changed; 7 % of pixels"


def test_glyphs_close_together_are_one_region() -> None:
    a = np.full((40, 100, 3), 255, np.uint8)
    b = a.copy()
    for x in range(10, 60, 6):  # letters 2 px wide with 4 px between them, as in a word
        b[15:25, x:x + 2] = 0
    change, _, _ = analyse(a, b)
    assert change.regions == (_pillow_box(a, b),)


def test_images_of_different_sizes_count_the_area_only_one_covers() -> None:
    a = np.full((10, 20, 3), 255, np.uint8)
    b = np.full((12, 16, 3), 255, np.uint8)
    change, base, mask = analyse(a, b)
    assert (change.width, change.height) == (20, 12)
    # the canvas is 20x12; the two images share 10x16; everything else is covered by only one of them
    assert change.changed == 20 * 12 - 10 * 16
    assert base.shape == (12, 20, 3) and mask.shape == (12, 20)


def test_a_large_figure_is_shrunk_but_keeps_one_changed_pixel() -> None:
    a = np.full((90, 2500, 3), 200, np.uint8)
    b = a.copy()
    b[40, 1234] = (230, 200, 200)
    change, base, mask = analyse(a, b)
    factor = -(-2500 // MAX_SIDE)  # 3
    assert base.shape[1] == -(-2500 // factor)
    assert mask.sum() == 1 and mask[40 // factor, 1234 // factor]
    assert change.changed == 1 and change.caption() == "a region at the centre changed; <1 % of pixels"


def test_the_view_fades_what_did_not_change_and_tints_what_did() -> None:
    a = np.full((50, 80, 3), 255, np.uint8)
    a[5:45, 5:15] = (0, 0, 0)  # unchanged black bar
    b = a.copy()
    b[20:30, 40:60] = (0, 0, 255)
    change, base, mask = analyse(a, b)
    view = np.asarray(render(change, base, mask, caption=False), dtype=int)
    assert view.shape == (50, 80, 3)
    # unchanged ink keeps FADE of its darkness: black becomes 255 · (1 − FADE)
    assert tuple(view[25, 10]) == (round(255 * (1 - FADE)),) * 3
    inside = view[25, 50]
    expected = np.rint(np.array([0, 0, 255]) * 0.45 + np.array(TINT) * 0.55)
    assert tuple(inside) == tuple(expected)
    # the outline is drawn in the tint just outside the changed block
    x0, y0, x1, y1 = change.regions[0]
    assert (x0, y0, x1, y1) == (40, 20, 60, 30)
    assert tuple(view[25, x0 - 3]) == TINT


def test_the_written_view_is_deterministic_and_has_a_caption(tmp_path: Path) -> None:
    a = np.full((200, 300, 3), 255, np.uint8)
    b = a.copy()
    b[85:115, 100:200] = 30
    ca, cb = _png(tmp_path / "c.png", a), _png(tmp_path / "r.png", b)
    first = write_change_view(ca, cb, tmp_path / "v1.png")
    write_change_view(ca, cb, tmp_path / "v2.png")
    assert (tmp_path / "v1.png").read_bytes() == (tmp_path / "v2.png").read_bytes()
    with Image.open(tmp_path / "v1.png") as img:
        assert img.width == 300 and img.height > 200  # the caption band sits under the figure
    assert first.caption() == "a region at the centre changed; 5 % of pixels"


def test_unreadable_and_transparent_files(tmp_path: Path) -> None:
    junk = tmp_path / "junk.png"
    junk.write_bytes(b"not an image" * 20)
    good = _png(tmp_path / "good.png", np.zeros((5, 5, 3), np.uint8))
    with pytest.raises(ChangeViewError, match=r"junk\.png"):
        write_change_view(junk, good, tmp_path / "out.png")
    assert not (tmp_path / "out.png").exists()
    clear = np.zeros((4, 4, 4), np.uint8)  # fully transparent: shown on white
    assert (read_on_white(_png(tmp_path / "clear.png", clear)) == 255).all()


def test_caption_wording() -> None:
    c = Change(width=10, height=10, changed=33, total=100, regions=((0, 0, 1, 1),), parts=("the title", "the bars"))
    assert c.caption() == "the title and the bars changed; 33 % of pixels"
    c = Change(width=10, height=10, changed=5, total=100, regions=((0, 0, 1, 1),) * 5, parts=())
    assert c.caption() == "5 regions of the figure changed; 5 % of pixels"
    assert Change(width=1, height=1, changed=0, total=1, regions=(), parts=()).caption() == "nothing changed"


def _bar_figure(title: str, color: str, dpi: float) -> tuple[np.ndarray, FigureModel]:
    """A real matplotlib bar chart and a model of it from matplotlib's own window extents (at dpi 100)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(4, 3), dpi=100)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    bars = ax.bar(["a", "b", "c"], [3, 5, 2], color=color)
    ax.set_title(title)
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()  # type: ignore[attr-defined]
    boxes = np.array([p.get_window_extent(renderer).extents for p in bars.patches])
    t = ax.title.get_window_extent(renderer).extents
    model = FigureModel(id="fig.py#1", script="fig.py", number=1, dpi=100, size_px=(400, 300), axes=(
        Axes(index=0, display_box=tuple(ax.get_window_extent(renderer).extents),
             bars=(BarSet(display_boxes=boxes),),
             texts=(Text(text=title, role="title", display_box=tuple(float(v) for v in t)),)),))
    import io

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return read_on_white(buf.getvalue()), model


@pytest.mark.parametrize("dpi", [100, 200])
def test_parts_are_named_from_the_model_at_any_dpi(dpi: float) -> None:
    committed, _ = _bar_figure("Root length, day 9", "#4c72b0", dpi)
    title_only, model = _bar_figure("Root length, day 10", "#4c72b0", dpi)
    both, _ = _bar_figure("Root length, day 10", "#8c8c8c", dpi)
    assert analyse(committed, title_only, model)[0].parts == ("the title",)
    change = analyse(committed, both, model)[0]
    assert change.parts == ("the title", "the bars")
    assert change.caption().startswith("the title and the bars changed; ")


def test_a_cropped_file_is_described_by_position() -> None:
    # a file saved with a tight bounding box has another shape than the figure: parts cannot be placed
    a = np.full((100, 100, 3), 255, np.uint8)
    b = a.copy()
    b[5:10, 40:60] = 0
    model = FigureModel(id="f#1", script="f.py", number=1, size_px=(640, 480))
    assert analyse(a, b, model)[0].parts == ("a region at the top centre",)

"""The simulated-views panel, on PNGs drawn with Pillow (no matplotlib)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from colorspacious import cspace_convert
from PIL import Image, ImageDraw

from figproof.report import images

RED, GREEN, BLUE = (214, 39, 40), (44, 160, 44), (31, 119, 180)  # matplotlib's tab:red, tab:green, tab:blue


def fake_render(path: Path, size: tuple[int, int] = (320, 240), mode: str = "RGB") -> Path:
    """A small 'figure': white face, an axes frame and three coloured series."""
    img = Image.new(mode, size, (255, 255, 255, 0) if mode == "RGBA" else (255, 255, 255))
    d = ImageDraw.Draw(img)
    w, h = size
    d.rectangle((40, 20, w - 20, h - 40), outline=(0, 0, 0))
    d.line((50, h - 60, w - 40, 40), fill=RED, width=6)
    d.line((50, 40, w - 40, h - 60), fill=GREEN, width=6)
    d.ellipse((w // 2 - 20, h // 2 - 20, w // 2 + 20, h // 2 + 20), fill=BLUE)
    img.save(path)
    return path


def load(path: Path) -> Image.Image:
    with Image.open(path) as opened:
        return opened.copy()


def pixel_at(sheet: Image.Image, view: int, xy: tuple[int, int], size: tuple[int, int]) -> tuple[int, ...]:
    w, h = size
    x = images._GAP + (view % 2) * (w + images._GAP) + xy[0]
    y = images._GAP + (view // 2) * (images._LABEL_HEIGHT + h + images._GAP) + images._LABEL_HEIGHT + xy[1]
    return sheet.getpixel((x, y))


def test_panel_layout_and_simulated_colours(tmp_path: Path) -> None:
    render = fake_render(tmp_path / "fig.png")
    out = images.write_cvd_panel(render, tmp_path / "out" / "fig-cvd.png", gray=False, severity=100)
    sheet = load(out)
    w, h = 320, 240
    assert sheet.size == (2 * w + 3 * images._GAP, 2 * (images._LABEL_HEIGHT + h) + 3 * images._GAP)
    centre = (w // 2, h // 2)  # the blue disc
    assert pixel_at(sheet, 0, centre, (w, h)) == BLUE
    # each simulated view matches colorspacious' Machado simulation of that pixel (the reference)
    for view, cvd in [(1, "protanomaly"), (2, "deuteranomaly"), (3, "tritanomaly")]:
        ref = cspace_convert(np.array(BLUE) / 255, {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}, "sRGB1")
        expected = np.clip(np.round(np.clip(ref, 0, 1) * 255), 0, 255)
        assert np.abs(np.array(pixel_at(sheet, view, centre, (w, h))) - expected).max() <= 1, cvd
    # white stays white in every view (Machado et al. 2009: the matrices keep the achromatic axis)
    for view in range(4):
        assert pixel_at(sheet, view, (5, 5), (w, h)) == (255, 255, 255)


def test_red_and_green_series_meet_for_deutan_readers(tmp_path: Path) -> None:
    # common practice: tab:red and tab:green look alike to deutan readers; the panel must show that
    canvas = Image.new("RGB", (100, 50), (255, 255, 255))
    ImageDraw.Draw(canvas).rectangle((0, 0, 49, 49), fill=RED)
    ImageDraw.Draw(canvas).rectangle((50, 0, 99, 49), fill=GREEN)
    canvas.save(tmp_path / "rg.png")
    sheet = load(images.write_cvd_panel(tmp_path / "rg.png", tmp_path / "rg-cvd.png"))
    normal = np.subtract(pixel_at(sheet, 0, (25, 25), (100, 50)), pixel_at(sheet, 0, (75, 25), (100, 50)))
    deutan = np.subtract(pixel_at(sheet, 2, (25, 25), (100, 50)), pixel_at(sheet, 2, (75, 25), (100, 50)))
    assert np.abs(deutan).sum() < np.abs(normal).sum() / 3


def test_gray_view_and_transparent_render(tmp_path: Path) -> None:
    render = fake_render(tmp_path / "fig.png", mode="RGBA")  # transparent background: shown on white
    sheet = load(images.write_cvd_panel(render, tmp_path / "g.png", gray=True, severity=60))
    w, h = 320, 240
    assert sheet.size[1] == 3 * (images._LABEL_HEIGHT + h) + 4 * images._GAP
    gray = pixel_at(sheet, 4, (w // 2, h // 2), (w, h))
    assert gray[0] == gray[1] == gray[2]
    # CIE L* of the gray equals that of tab:blue (colorspacious CIELab as reference)
    lstar = cspace_convert(np.array(gray) / 255, "sRGB1", "CIELab")[0]
    assert lstar == pytest.approx(cspace_convert(np.array(BLUE) / 255, "sRGB1", "CIELab")[0], abs=0.5)
    assert pixel_at(sheet, 0, (5, 5), (w, h)) == (255, 255, 255)


def test_wide_renders_are_scaled_down(tmp_path: Path) -> None:
    render = fake_render(tmp_path / "wide.png", size=(2000, 500))
    sheet = load(images.write_cvd_panel(render, tmp_path / "wide-cvd.png", max_width=400))
    assert sheet.size[0] == 2 * 400 + 3 * images._GAP


def test_same_render_gives_same_bytes(tmp_path: Path) -> None:
    render = fake_render(tmp_path / "fig.png")
    a = images.write_cvd_panel(render, tmp_path / "a.png").read_bytes()
    b = images.write_cvd_panel(render, tmp_path / "b.png").read_bytes()
    assert a == b


def test_bad_input(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="cannot read"):
        images.write_cvd_panel(tmp_path / "missing.png", tmp_path / "x.png")
    (tmp_path / "junk.png").write_bytes(b"not a png")
    with pytest.raises(ValueError, match="cannot read"):
        images.write_cvd_panel(tmp_path / "junk.png", tmp_path / "x.png")
    render = fake_render(tmp_path / "fig.png")
    with pytest.raises(ValueError, match="between 0 and 100"):
        images.write_cvd_panel(render, tmp_path / "x.png", severity=101)
    # a palette-mode PNG and a 1x1 image still work
    Image.new("P", (1, 1)).save(tmp_path / "tiny.png")
    assert images.write_cvd_panel(tmp_path / "tiny.png", tmp_path / "tiny-cvd.png").exists()


def test_panel_needed() -> None:
    assert images.panel_needed(["colours-confusable-cvd", "bars-for-continuous"]) == (True, False)
    assert images.panel_needed(["colours-confusable-gray"]) == (True, True)
    assert images.panel_needed(["points-hidden"]) == (False, False)

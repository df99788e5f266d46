"""Comparison of committed and regenerated figure files, against outside references.

References used here:
- Pillow's ``ImageChops.difference`` (absolute per-channel difference) for the pixel comparison.
- ``matplotlib.testing.compare`` (``calculate_rms`` and ``compare_images``) for the RMS definition:
  "a color value difference, where 255 is the maximal difference".
- matplotlib's documented reproducibility controls: SOURCE_DATE_EPOCH (reproducible PDF/PS output
  since matplotlib 2.1, SVG date since 3.3) and ``rcParams["svg.hashsalt"]`` (fixed SVG ids).
"""

from __future__ import annotations

import base64
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
from PIL import Image, ImageChops, PngImagePlugin

from figproof.compare.files import (
    OutputComparison,
    compare_image_bytes,
    compare_output,
    load_pixels,
    notebook_png_outputs,
    pixel_difference,
    recorded_version,
    rms_difference,
)

# The same figure drawn by a separate interpreter under the child's settings (Agg, fixed date, fixed salt).
_DRAW = textwrap.dedent(
    """
    import sys
    import matplotlib
    matplotlib.rcParams["svg.hashsalt"] = sys.argv[2]
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots(figsize=(4, 3))
    ax.scatter([1, 2, 3, 4], [float(sys.argv[3]), 1.5, 3.2, 2.7])
    ax.plot([1, 2, 3, 4], [2.1, 1.6, 3.0, 2.8])
    ax.set_title("growth by day")
    for ext in ("png", "pdf", "svg", "eps"):
        fig.savefig(f"{sys.argv[1]}/growth.{ext}")
    """
)


def _draw(folder: Path, *, epoch: str = "1700000000", salt: str = "figproof", first_value: str = "2.0") -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    env = {k: v for k, v in os.environ.items() if not k.startswith("MPL")}
    env.update(MPLBACKEND="Agg", SOURCE_DATE_EPOCH=epoch)
    subprocess.run([sys.executable, "-c", _DRAW, str(folder), salt, first_value], check=True, env=env, timeout=120)
    return folder


@pytest.fixture(scope="module")
def drawn(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    base = tmp_path_factory.mktemp("drawn")
    return {
        "a": _draw(base / "a"),
        "b": _draw(base / "b"),
        "later": _draw(base / "later", epoch="1600000000"),
        "salted": _draw(base / "salted", salt="another-salt"),
        "changed": _draw(base / "changed", first_value="2.2"),  # one data value corrected
    }


@pytest.mark.parametrize("ext", ["png", "pdf", "svg", "eps"])
def test_two_processes_give_identical_bytes(drawn: dict[str, Path], ext: str) -> None:
    # matplotlib docs: with SOURCE_DATE_EPOCH and svg.hashsalt fixed, output is byte-for-byte reproducible.
    a = (drawn["a"] / f"growth.{ext}").read_bytes()
    b = (drawn["b"] / f"growth.{ext}").read_bytes()
    assert a == b
    result = compare_output(drawn["a"] / f"growth.{ext}", drawn["b"] / f"growth.{ext}", tolerance=0)
    assert result.status == "same"


def test_pdf_differing_only_in_creation_date_is_same(drawn: dict[str, Path]) -> None:
    a = (drawn["a"] / "growth.pdf").read_bytes()
    later = (drawn["later"] / "growth.pdf").read_bytes()
    assert a != later and b"/CreationDate" in a  # the control: the raw bytes do differ
    result = compare_output(drawn["a"] / "growth.pdf", drawn["later"] / "growth.pdf", tolerance=0)
    assert result.status == "same"
    assert result.kind == "vector"


def test_eps_differing_only_in_creation_date_is_same(drawn: dict[str, Path]) -> None:
    assert (drawn["a"] / "growth.eps").read_bytes() != (drawn["later"] / "growth.eps").read_bytes()
    assert compare_output(drawn["a"] / "growth.eps", drawn["later"] / "growth.eps", tolerance=0).status == "same"


def test_svg_differing_only_in_ids_is_same(drawn: dict[str, Path]) -> None:
    a = (drawn["a"] / "growth.svg").read_bytes()
    salted = (drawn["salted"] / "growth.svg").read_bytes()
    assert a != salted  # a different svg.hashsalt gives different marker/clip-path ids
    result = compare_output(drawn["a"] / "growth.svg", drawn["salted"] / "growth.svg", tolerance=0)
    assert result.status == "same"
    assert "ids" in result.message


def test_pdf_from_older_matplotlib_producer_is_same_and_version_read(drawn: dict[str, Path], tmp_path: Path) -> None:
    import matplotlib

    data = (drawn["a"] / "growth.pdf").read_bytes()
    now = matplotlib.__version__.encode()
    assert b"pdf backend v" + now in data
    # A shorter producer string shifts every later xref offset; the drawing is the same.
    old = tmp_path / "growth.pdf"
    old.write_bytes(data.replace(b"pdf backend v" + now, b"pdf backend v3.7.1").replace(b"Matplotlib v" + now,
                                                                                        b"Matplotlib v3.7.1"))
    result = compare_output(old, drawn["a"] / "growth.pdf", tolerance=0)
    assert result.status == "same"
    assert result.committed_version == "3.7.1"
    assert result.regenerated_version == matplotlib.__version__


def test_recorded_versions_match_running_matplotlib(drawn: dict[str, Path]) -> None:
    import matplotlib

    for ext in ("png", "pdf", "svg", "eps"):
        assert recorded_version(drawn["a"] / f"growth.{ext}") == matplotlib.__version__, ext


@pytest.mark.parametrize("ext", ["png", "pdf", "svg", "eps"])
def test_changed_data_value_is_drift(drawn: dict[str, Path], ext: str) -> None:
    result = compare_output(drawn["a"] / f"growth.{ext}", drawn["changed"] / f"growth.{ext}", tolerance=0)
    assert result.status == "drift"
    if ext == "png":
        assert result.rms is not None and result.rms > 0
        assert 0 < (result.differing_pixels or 0) < 1000  # one marker of a 400x300 figure moved


# ---------------------------------------------------------------------------- rasters


def _png(path: Path, pixels: np.ndarray, software: str | None = None) -> Path:
    info = None
    if software is not None:
        info = PngImagePlugin.PngInfo()
        info.add_text("Software", software)
    Image.fromarray(pixels).save(path, pnginfo=info)
    return path


def _pair(tmp_path: Path, seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)  # invented test images
    a = rng.integers(0, 256, (40, 60, 3), dtype=np.uint8)
    b = a.copy()
    b[5:15, 10:30] = rng.integers(0, 256, (10, 20, 3), dtype=np.uint8)
    return a, b


def test_pixel_difference_matches_imagechops(tmp_path: Path) -> None:
    a, b = _pair(tmp_path)
    # Pillow reference: ImageChops.difference returns |a - b| per channel.
    reference = np.asarray(ImageChops.difference(Image.fromarray(a), Image.fromarray(b)))
    assert np.array_equal(pixel_difference(a, b), reference)
    result = compare_output(_png(tmp_path / "c.png", a), _png(tmp_path / "r.png", b), tolerance=0)
    assert result.status == "drift"
    assert result.differing_pixels == int(np.count_nonzero(reference.any(axis=-1)))
    assert result.total_pixels == 40 * 60


def test_identical_pixels_match_imagechops_bbox(tmp_path: Path) -> None:
    a, _ = _pair(tmp_path)
    # RGB file vs the same pixels stored as opaque RGBA: Pillow sees no difference after conversion
    rgba = np.concatenate([a, np.full((*a.shape[:2], 1), 255, np.uint8)], axis=-1)
    ca, cb = _png(tmp_path / "c.png", a), _png(tmp_path / "r.png", rgba)
    with Image.open(ca) as ia, Image.open(cb) as ib:
        bbox = ImageChops.difference(ia.convert("RGB"), ib.convert("RGB")).getbbox()
    assert bbox is None
    assert compare_output(ca, cb, tolerance=0).status == "same"


def test_rms_matches_matplotlib_calculate_rms(tmp_path: Path) -> None:
    from matplotlib.testing.compare import calculate_rms

    a, b = _pair(tmp_path)
    # calculate_rms subtracts in the given dtype, so hand it signed integers (as its caller does via floats)
    reference = calculate_rms(a.astype(np.int32), b.astype(np.int32))
    rms, _ = rms_difference(a, b)
    assert rms == pytest.approx(reference, rel=1e-12)
    result = compare_output(_png(tmp_path / "c.png", a), _png(tmp_path / "r.png", b), tolerance=0)
    assert result.rms == pytest.approx(reference, rel=1e-12)


def test_rms_matches_matplotlib_compare_images_with_alpha(tmp_path: Path) -> None:
    from matplotlib.testing.compare import compare_images

    rng = np.random.default_rng(11)
    a = rng.integers(0, 256, (30, 50, 4), dtype=np.uint8)
    b = np.clip(a.astype(int) + rng.integers(-20, 21, a.shape), 0, 255).astype(np.uint8)
    ca, cb = _png(tmp_path / "expected.png", a), _png(tmp_path / "actual.png", b)
    reference = compare_images(str(ca), str(cb), tol=0, in_decorator=True)
    assert reference is not None
    result = compare_output(ca, cb, tolerance=0)
    assert result.rms == pytest.approx(reference["rms"], rel=1e-9)
    # matplotlib's tolerance semantics: equal-or-below tol passes
    assert compare_output(ca, cb, tolerance=reference["rms"] + 1e-9).status == "same"
    assert compare_output(ca, cb, tolerance=reference["rms"] * 0.5).status == "drift"


def test_rms_in_blocks_equals_one_pass(monkeypatch: pytest.MonkeyPatch) -> None:
    import figproof.compare.files as compare

    rng = np.random.default_rng(5)
    a = rng.integers(0, 256, (97, 31, 3), dtype=np.uint8)
    b = rng.integers(0, 256, (97, 31, 3), dtype=np.uint8)
    whole = float(np.sqrt(((a.astype(float) - b) ** 2).mean()))  # calculate_rms's formula
    monkeypatch.setattr(compare, "_ROWS_PER_BLOCK_PIXELS", 100)  # forces 4-row blocks
    rms, differing = rms_difference(a, b)
    assert rms == pytest.approx(whole, rel=1e-12)
    assert differing == int(np.count_nonzero((a != b).any(axis=-1)))


def test_size_mismatch_reports_both_sizes(tmp_path: Path) -> None:
    a = np.zeros((48, 64, 3), np.uint8)
    b = np.zeros((60, 80, 3), np.uint8)
    result = compare_output(_png(tmp_path / "c.png", a), _png(tmp_path / "r.png", b), tolerance=0)
    assert result.status == "size-mismatch"
    assert result.committed_size == (64, 48)
    assert result.regenerated_size == (80, 60)


def test_png_software_chunk_version(tmp_path: Path) -> None:
    # The text matplotlib's Agg backend writes (seen in its PNG output; see the drawn fixture test too).
    path = _png(tmp_path / "c.png", np.zeros((4, 4, 3), np.uint8), "Matplotlib version3.7.1, https://matplotlib.org/")
    assert recorded_version(path) == "3.7.1"
    assert recorded_version(_png(tmp_path / "n.png", np.zeros((4, 4, 3), np.uint8))) is None


# ---------------------------------------------------------------------------- bad input


def test_zero_byte_png_is_unreadable(tmp_path: Path) -> None:
    good = _png(tmp_path / "r.png", np.zeros((4, 4, 3), np.uint8))
    empty = tmp_path / "c.png"
    empty.write_bytes(b"")
    assert compare_output(empty, good, tolerance=0).status == "unreadable-committed"
    assert compare_output(good, empty, tolerance=0).status == "unreadable-regenerated"


def test_undecodable_and_truncated_png_are_unreadable(tmp_path: Path) -> None:
    good = _png(tmp_path / "r.png", np.random.default_rng(1).integers(0, 256, (64, 64, 3), dtype=np.uint8))
    junk = tmp_path / "junk.png"
    junk.write_bytes(b"this is not an image at all" * 10)
    truncated = tmp_path / "cut.png"
    truncated.write_bytes(good.read_bytes()[: good.stat().st_size // 2])
    for bad in (junk, truncated):
        result = compare_output(bad, good, tolerance=0)
        assert result.status == "unreadable-committed", bad
        assert result.message


def test_truncated_pdf_and_empty_svg_are_unreadable(drawn: dict[str, Path], tmp_path: Path) -> None:
    data = (drawn["a"] / "growth.pdf").read_bytes()
    cut = tmp_path / "growth.pdf"
    cut.write_bytes(data[: len(data) // 2])
    assert compare_output(cut, drawn["a"] / "growth.pdf", tolerance=0).status == "unreadable-committed"
    empty = tmp_path / "growth.svg"
    empty.write_bytes(b"")
    assert compare_output(drawn["a"] / "growth.svg", empty, tolerance=0).status == "unreadable-regenerated"


def test_missing_files(tmp_path: Path) -> None:
    good = _png(tmp_path / "r.png", np.zeros((4, 4, 3), np.uint8))
    assert compare_output(tmp_path / "none.png", good, tolerance=0).status == "missing-committed"
    assert compare_output(good, tmp_path / "none.png", tolerance=0).status == "missing-regenerated"


def test_huge_image_is_not_decoded(tmp_path: Path) -> None:
    # A 1-bit 8000x7000 PNG (56 megapixels) is small on disk but over the 50-megapixel limit.
    big = Image.new("1", (8000, 7000), 0)
    a = tmp_path / "c.png"
    big.save(a, optimize=True)
    big.putpixel((10, 10), 1)
    b = tmp_path / "r.png"
    big.save(b, optimize=True)
    result = compare_output(a, b, tolerance=0)
    assert result.status == "too-large"
    assert result.committed_size == (8000, 7000)
    assert compare_output(a, a, tolerance=0).status == "same"  # identical bytes need no decoding


def test_notebook_png_outputs(tmp_path: Path) -> None:
    import nbformat

    a, b = _pair(tmp_path)
    png = _png(tmp_path / "c.png", a).read_bytes()
    encoded = base64.b64encode(png).decode()
    nb = nbformat.v4.new_notebook()
    nb.cells = [
        nbformat.v4.new_markdown_cell("# growth"),
        nbformat.v4.new_code_cell("plot()", outputs=[
            nbformat.v4.new_output("display_data", data={"image/png": encoded, "text/plain": "<Figure>"}),
            nbformat.v4.new_output("stream", name="stdout", text="done"),
        ]),
        nbformat.v4.new_code_cell("x = 1"),
        nbformat.v4.new_code_cell("plot()", outputs=[
            nbformat.v4.new_output("execute_result", data={"image/png": "not base64 !!"}, execution_count=3),
        ]),
    ]
    # round trip through nbformat's writer, as a committed notebook would be stored
    stored = nbformat.reads(nbformat.writes(nb), as_version=4)
    found = notebook_png_outputs(stored)
    assert found == {1: [png]}
    result = compare_image_bytes(found[1][0], _png(tmp_path / "r.png", b).read_bytes(), tolerance=0,
                                 path="analysis/fig2.ipynb", cell=1, output=0)
    assert result.status == "drift" and result.cell == 1
    assert compare_image_bytes(found[1][0], png, tolerance=0, path="nb.ipynb").status == "same"
    assert compare_image_bytes(b"", png, tolerance=0, path="nb.ipynb").status == "unreadable-committed"


def test_notebook_png_outputs_odd_input() -> None:
    assert notebook_png_outputs({}) == {}
    assert notebook_png_outputs({"cells": "nope"}) == {}
    assert notebook_png_outputs({"cells": [None, {"cell_type": "code", "outputs": [{"output_type": "display_data",
                                                                                    "data": None}]}]}) == {}


def test_comparison_round_trips_json(tmp_path: Path) -> None:
    c = OutputComparison(path="figures/a.png", kind="raster", status="drift", rms=1.5, committed_size=(4, 3),
                         regenerated_size=(4, 3))
    assert OutputComparison.from_json(c.to_json()) == c


def test_load_pixels_palette_becomes_rgb(tmp_path: Path) -> None:
    img = Image.new("P", (5, 5), 0)
    img.putpalette([10, 20, 30] * 256)
    path = tmp_path / "p.png"
    img.save(path)
    assert load_pixels(path).shape == (5, 5, 3)  # as matplotlib.testing.compare._load_image converts


def test_pillow_decompression_bomb_limits(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Pillow warns above Image.MAX_IMAGE_PIXELS and refuses above twice that (Pillow docs, Image.open).
    a = _png(tmp_path / "c.png", np.zeros((30, 50, 3), np.uint8))  # 1500 px
    b = _png(tmp_path / "r.png", np.full((30, 50, 3), 9, np.uint8))
    monkeypatch.setattr(Image, "MAX_IMAGE_PIXELS", 1000)  # 1500 > 1000: warning only; figproof decides size
    assert compare_output(a, b, tolerance=0).status == "drift"
    monkeypatch.setattr(Image, "MAX_IMAGE_PIXELS", 500)  # 1500 > 2 × 500: Pillow refuses to open
    result = compare_output(a, b, tolerance=0)
    assert result.status == "too-large"

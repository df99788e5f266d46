"""Matching submitted figures to regenerated ones: SSIM checked against scikit-image, robust to what journals do.

scikit-image's ``structural_similarity`` (with ``gaussian_weights=True, sigma=1.5, use_sample_covariance=False``,
the settings its documentation gives for matching Wang et al. 2004) is the oracle for figproof's SSIM; it is a
test-only dependency.  The figures are drawn here by matplotlib, then resized, cropped, JPEG-compressed and set
in margins as a journal's submission system does.
"""

from __future__ import annotations

import io
import sys

import numpy as np
import pytest
from PIL import Image

from figproof.deposit.references import (
    ReferenceError,
    load_references,
    match,
    matched_regenerated,
    pdf_pages,
    picture,
    ssim,
    trim,
)


def _draw(kind: str, seed: int = 0, dpi: int = 100, fmt: str = "png") -> bytes:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    rng = np.random.default_rng(seed)
    fig, ax = plt.subplots(figsize=(4, 3), dpi=dpi)
    if kind == "growth":
        ax.plot(np.arange(20), np.cumsum(rng.normal(size=20)), "o-")
    elif kind == "doses":
        ax.bar(range(5), rng.uniform(1, 5, 5))
    elif kind == "cells":
        ax.scatter(rng.normal(size=60), rng.normal(size=60))
    else:
        ax.hist(rng.normal(size=300), bins=20)
    ax.set_xlabel("time (h)")
    ax.set_ylabel("signal")
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt)
    plt.close(fig)
    return buf.getvalue()


def _img(data: bytes) -> Image.Image:
    img = Image.open(io.BytesIO(data))
    img.load()
    return img


def _jpeg(img: Image.Image, quality: int) -> Image.Image:
    buf = io.BytesIO()
    img.convert("RGB").save(buf, "JPEG", quality=quality)
    return _img(buf.getvalue())


def _in_margins(img: Image.Image, m: int) -> Image.Image:
    page = Image.new("RGB", (img.width + 2 * m, img.height + 3 * m), "white")
    page.paste(img.convert("RGB"), (m, m))
    return page


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_ssim_equals_scikit_image(seed) -> None:
    skimage_metrics = pytest.importorskip("skimage.metrics", reason="scikit-image is the test-only SSIM oracle")
    rng = np.random.default_rng(seed)
    a = rng.uniform(size=(64, 80))
    b = np.clip(a + rng.normal(scale=0.1 * (seed + 1), size=a.shape), 0, 1)
    expected = skimage_metrics.structural_similarity(a, b, data_range=1.0, gaussian_weights=True, sigma=1.5,
                                                     use_sample_covariance=False)
    assert ssim(a, b) == pytest.approx(expected, abs=1e-12)
    assert ssim(a, a) == pytest.approx(1.0)


def test_ssim_on_real_figures_equals_scikit_image() -> None:
    skimage_metrics = pytest.importorskip("skimage.metrics", reason="scikit-image is the test-only SSIM oracle")
    a = picture("a", _img(_draw("growth"))).grey
    b = picture("b", _jpeg(_img(_draw("growth")), 30)).grey
    expected = skimage_metrics.structural_similarity(a, b, data_range=1.0, gaussian_weights=True, sigma=1.5,
                                                     use_sample_covariance=False)
    assert ssim(a, b) == pytest.approx(expected, abs=1e-12)


def test_trim_removes_margins_and_says_which_edges_the_ink_reaches() -> None:
    img = Image.new("RGB", (100, 80), "white")
    img.paste((0, 0, 0), (20, 10, 60, 79))
    cut, edges = trim(img)
    assert cut.size == (40, 69) and edges == (False, False, False, True)


def test_references_as_a_journal_returns_them_match_their_regenerated_figures(tmp_path) -> None:
    regenerated = [picture(f"{kind}.py#1", _img(_draw(kind))) for kind in ("growth", "doses", "cells", "spread")]
    growth, doses, cells = (_img(_draw(k)) for k in ("growth", "doses", "cells"))
    submitted = {
        "fig1_resized.png": growth.resize((260, 195), Image.Resampling.BICUBIC),
        "fig1_print.tif": _img(_draw("growth", dpi=300)),
        "fig2.jpg": _jpeg(doses, 30),
        "fig3_cropped.png": cells.crop((3, 3, cells.width - 3, cells.height - 3)),
        "fig4_margins.jpg": _jpeg(_in_margins(growth.resize((300, 225)), 60), 50),
        "fig5_unknown.png": _img(_draw("growth", seed=7)),  # no script draws this one
    }
    for name, img in submitted.items():
        img.convert("RGB").save(tmp_path / name)
    references, problems = load_references(tmp_path)
    assert problems == []
    got = {m.reference: (m.verdict, m.regenerated) for m in match(references, regenerated)}
    assert got == {
        "fig1_resized.png": ("reproduced", "growth.py#1"),
        "fig1_print.tif": ("reproduced", "growth.py#1"),
        "fig2.jpg": ("reproduced", "doses.py#1"),
        "fig3_cropped.png": ("reproduced", "cells.py#1"),
        "fig4_margins.jpg": ("reproduced", "growth.py#1"),
        "fig5_unknown.png": ("not-found", got["fig5_unknown.png"][1]),
    }
    matched = matched_regenerated(match(references, regenerated))
    assert set(matched) == {"growth.py#1", "doses.py#1", "cells.py#1"}  # spread.py#1 matches no reference


def test_with_nothing_regenerated_every_reference_is_not_found(tmp_path) -> None:
    _img(_draw("growth")).save(tmp_path / "fig1.png")
    references, _ = load_references(tmp_path)
    (m,) = match(references, [])
    assert (m.verdict, m.regenerated, m.similarity) == ("not-found", None, 0.0)


def test_a_corrupt_reference_is_one_line_and_the_others_still_load(tmp_path) -> None:
    (tmp_path / "broken.png").write_bytes(b"\x89PNG\r\n\x1a\n not really")
    _img(_draw("doses")).save(tmp_path / "fig2.png")
    references, problems = load_references(tmp_path)
    assert [r.label for r in references] == ["fig2.png"]
    (problem,) = problems
    assert problem.startswith("broken.png: not a readable image") and "\n" not in problem


def test_pdf_pages_are_rendered_with_pypdfium2(tmp_path) -> None:
    pytest.importorskip("pypdfium2", reason="PDF references need pypdfium2 (the 'pdf' extra)")
    (tmp_path / "figure1.pdf").write_bytes(_draw("growth", fmt="pdf"))
    references, problems = load_references(tmp_path)
    assert problems == [] and [r.label for r in references] == ["figure1.pdf"]
    (m,) = match(references, [picture("growth.py#1", _img(_draw("growth"))),
                              picture("doses.py#1", _img(_draw("doses")))])
    assert (m.verdict, m.regenerated) == ("reproduced", "growth.py#1")


def test_without_pypdfium2_a_pdf_reference_names_the_extra(tmp_path, monkeypatch) -> None:
    (tmp_path / "figure1.pdf").write_bytes(b"%PDF-1.4\n")
    monkeypatch.setitem(sys.modules, "pypdfium2", None)  # as if it were not installed
    with pytest.raises(ReferenceError, match=r"^figure1\.pdf: PDF references need the optional extra 'pdf' "
                                             r"\(pip install 'figproof\[pdf\]'\), or export the page as PNG$"):
        pdf_pages(tmp_path / "figure1.pdf")


# --------------------------------------------------------------------------- the change view

GROWTH_T = list(range(8))
GROWTH_OD = [0.05, 0.09, 0.18, 0.35, 0.61, 0.88, 1.02, 1.08]


def _growth(od: list[float], dpi: int = 100) -> tuple[Image.Image, list[tuple[float, float]]]:
    """The growth curve and where matplotlib puts each point (image pixels, top-left origin; its transData)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(4, 3), dpi=dpi)
    ax.plot(GROWTH_T, od, "o-")
    ax.set_xlabel("time (h)")
    ax.set_ylabel("OD600")
    ax.set_ylim(0, 1.15)
    fig.canvas.draw()
    height = fig.bbox.height
    where = [(float(x), float(height - y)) for x, y in ax.transData.transform(list(zip(GROWTH_T, od, strict=True)))]
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    plt.close(fig)
    return _img(buf.getvalue()), where


def test_a_reference_as_a_journal_returns_it_shows_no_change(tmp_path) -> None:
    from figproof.deposit.references import change_view

    page, _ = _growth(GROWTH_OD)
    submitted, _ = _growth(GROWTH_OD, dpi=300)
    returned = _jpeg(submitted.crop((3, 3, submitted.width - 3, submitted.height - 3)).resize((700, 525)), 40)
    placed, change = change_view(picture("Figure 1.jpg", returned), page, tmp_path / "view.png")
    assert placed.size == page.size and change.changed == 0 and change.caption() == "nothing changed"


def test_a_moved_point_is_outlined_where_matplotlib_put_it_in_both_figures(tmp_path) -> None:
    from figproof.deposit.references import change_view

    moved = list(GROWTH_OD)
    moved[5] = 0.5
    page, now = _growth(GROWTH_OD)
    submitted, then = _growth(moved, dpi=300)
    _, change = change_view(picture("Figure 1.png", submitted), page, tmp_path / "view.png")
    assert change.regions, "the moved point is a changed region"
    was = (then[5][0] / 3, then[5][1] / 3)  # drawn at 300 dpi, the regenerated figure at 100
    assert all(any(x0 <= x <= x1 and y0 <= y <= y1 for x0, y0, x1, y1 in change.regions)
               for x, y in (now[5], was)), (change.regions, now[5], was)
    # the unchanged points are not outlined: only the point and its two line segments differ
    assert not any(x0 <= x <= x1 and y0 <= y <= y1 for x0, y0, x1, y1 in change.regions for x, y in now[:3])
    with Image.open(tmp_path / "view.png") as view:
        assert view.width == page.width  # the product's change view of the regenerated figure, caption below


def test_a_bar_chart_of_other_data_is_not_reproduced_though_ssim_alone_would_say_so() -> None:
    from figproof.deposit.references import REPRODUCED, changed_share, similarity

    regenerated = [picture("doses.py#1", _img(_draw("doses"))), picture("growth.py#1", _img(_draw("growth")))]
    # five bars of other heights in the same style, drawn at print resolution (seed 27: invented data whose
    # grey 128-px SSIM with the regenerated bars is above the threshold)
    other = picture("Figure 2.png", _img(_draw("doses", seed=27, dpi=300)))
    copy = picture("Figure 2 (q30).jpg", _jpeg(_img(_draw("doses")), 30))
    assert similarity(other, regenerated[0]) >= REPRODUCED  # SSIM alone would call it reproduced
    assert changed_share(copy, regenerated[0]) < 0.025 < changed_share(other, regenerated[0])
    (m,) = match([other], regenerated)
    assert (m.verdict, m.regenerated) == ("differs", "doses.py#1")
    (m,) = match([copy], regenerated)
    assert (m.verdict, m.regenerated) == ("reproduced", "doses.py#1")


def test_a_figure_cut_by_its_own_canvas_and_cropped_when_submitted_is_still_reproduced() -> None:
    from figproof.deposit.references import MAX_CHANGED, changed_share

    # seed 28 (invented data) makes tick labels wide enough to run off the canvas at 100 dpi: the regenerated
    # figure's ink reaches the left and bottom edges; the submitted copy was drawn at 300 dpi, cropped by
    # 3 pixels and JPEG-compressed, as a journal returns it
    regenerated = picture("growth.py#1", _img(_draw("growth", seed=28)))
    big = _img(_draw("growth", seed=28, dpi=300)).convert("RGB")
    submitted = picture("Figure 1.jpg", _jpeg(big.crop((3, 3, big.width - 3, big.height - 3)), 40))
    assert regenerated.edges[0] and regenerated.edges[3]
    assert changed_share(submitted, regenerated) <= MAX_CHANGED
    (m,) = match([submitted], [regenerated, picture("doses.py#1", _img(_draw("doses")))])
    assert (m.verdict, m.regenerated) == ("reproduced", "growth.py#1")

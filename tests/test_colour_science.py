"""colour_science against published standards and the reference implementation (colorspacious)."""

from __future__ import annotations

import numpy as np
import pytest
from colorspacious import cspace_convert, deltaE

from figproof.science import colour as cs


def rgb(hex_: str) -> np.ndarray:
    return np.array([int(hex_[i : i + 2], 16) / 255.0 for i in (1, 3, 5)])


# --- WCAG 2.1 (W3C Recommendation 2018), relative luminance and contrast ratio -------------------


@pytest.mark.parametrize(
    ("fg", "bg", "expected"),
    [
        ("#000000", "#FFFFFF", 21.0),  # WCAG 2.1: the maximum ratio, black on white
        # #777 on white is 4.48:1 and fails 4.5:1: no rounding up, as the WCAG working group agreed in 2016
        # (D. MacDonald, "WCAG reaches consensus on threshold colours", davidmacd.com/test/check-color.html)
        ("#777777", "#FFFFFF", 4.478),
        ("#767676", "#FFFFFF", 4.542),  # the widely quoted 4.54:1 of #767676 on white, the lightest gray passing
        # yellow on white, WCAG 2.1's formula worked by hand: L = 0.2126 + 0.7152 = 0.9278, 1.05 / 0.9778 = 1.074
        ("#FFFF00", "#FFFFFF", 1.074),
        ("#FFFFFF", "#FFFFFF", 1.0),  # WCAG 2.1: identical colours give 1:1
    ],
)
def test_wcag_contrast_ratio(fg: str, bg: str, expected: float) -> None:
    assert float(cs.contrast_ratio(rgb(fg), rgb(bg))) == pytest.approx(expected, abs=5e-4)
    # the ratio is symmetric in its arguments (WCAG 2.1: L1 is the lighter colour)
    assert float(cs.contrast_ratio(rgb(bg), rgb(fg))) == pytest.approx(expected, abs=5e-4)


def test_wcag_ratio_is_not_rounded() -> None:
    # WCAG 2.1 success criterion 1.4.3: #777777 on white (4.478) fails 4.5:1 and must not round up to it
    ratio = float(cs.contrast_ratio(rgb("#777777"), rgb("#FFFFFF")))
    assert 4.47 < ratio < 4.5


def test_wcag_relative_luminance_of_primaries() -> None:
    # WCAG 2.1 definition: L = 0.2126 R + 0.7152 G + 0.0722 B of linearised sRGB
    lum = cs.relative_luminance(np.eye(3))
    np.testing.assert_allclose(lum, [0.2126, 0.7152, 0.0722])
    assert float(cs.relative_luminance([1.0, 1.0, 1.0])) == pytest.approx(1.0)
    assert float(cs.relative_luminance([0.0, 0.0, 0.0])) == 0.0


# --- Machado, Oliveira & Fernandes 2009 (IEEE TVCG 15(6)) -----------------------------------------


def test_machado_deuteranomaly_matrix_row() -> None:
    # Machado et al. 2009, severity 1.0 deuteranomaly matrix, first row (0.367322, 0.860646, -0.227968):
    # simulating the linear-RGB primaries gives the matrix's columns, so its first row is out[:, 0]
    out = cs.simulate_cvd_linear(np.eye(3), "deutan", 100)
    np.testing.assert_allclose(out[:, 0], [0.367322, 0.860646, -0.227968], atol=1e-6)


def test_machado_protanomaly_matrix_row() -> None:
    # Machado et al. 2009, severity 1.0 protanomaly matrix, first row (0.152286, 1.052583, -0.204868)
    # (the published table as colorspacious carries it, colorspacious.machado_et_al_2009_matrix)
    out = cs.simulate_cvd_linear(np.eye(3), "protan", 100)
    np.testing.assert_allclose(out[:, 0], [0.152286, 1.052583, -0.204868], atol=1e-6)


def test_simulation_matches_colorspacious_and_clips() -> None:
    colors = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.3, 0.6, 0.9]])
    for kind, name in [("protan", "protanomaly"), ("deutan", "deuteranomaly"), ("tritan", "tritanomaly")]:
        # colorspacious is the reference implementation of the Machado simulation
        ref = cspace_convert(colors, {"name": "sRGB1+CVD", "cvd_type": name, "severity": 70}, "sRGB1")
        np.testing.assert_allclose(cs.simulate_cvd(colors, kind, 70), np.clip(ref, 0, 1), atol=1e-12)
        out = cs.simulate_cvd(colors, kind, 100)
        assert out.min() >= 0.0 and out.max() <= 1.0


def test_severity_zero_is_normal_vision_and_range_is_checked() -> None:
    colors = np.array([[0.8, 0.2, 0.1], [0.1, 0.5, 0.3]])
    # Machado et al. 2009: severity 0 is the identity matrix
    np.testing.assert_allclose(cs.simulate_cvd(colors, "deutan", 0), colors, atol=1e-12)
    with pytest.raises(ValueError, match="between 0 and 100"):
        cs.simulate_cvd(colors, "deutan", 120)
    with pytest.raises(ValueError, match="unknown"):
        cs.simulate_cvd(colors, "achromat", 50)


# --- CAM02-UCS (Luo, Cui & Li 2006) via colorspacious ---------------------------------------------


def test_delta_e_matches_colorspacious() -> None:
    a = np.array([[0.84, 0.15, 0.16], [0.1, 0.1, 0.1], [0.9, 0.9, 0.2]])
    b = np.array([[0.17, 0.63, 0.17], [0.12, 0.1, 0.1], [0.2, 0.3, 0.9]])
    # colorspacious.deltaE is the reference CAM02-UCS ΔE'
    np.testing.assert_allclose(cs.delta_e(a, b), deltaE(a, b), rtol=1e-12)
    ucs = cs.srgb_to_ucs(np.concatenate([a, b]))
    pair = cs.pairwise_delta_e(ucs)
    np.testing.assert_allclose(np.diag(pair[:3, 3:]), deltaE(a, b), rtol=1e-12)
    np.testing.assert_allclose(pair, pair.T)


def test_vision_ucs_batches_all_four_visions() -> None:
    colors = np.array([[0.84, 0.15, 0.16], [0.17, 0.63, 0.17]])
    out = cs.vision_ucs(colors, 100)
    assert out.shape == (4, 2, 3)
    ref = cspace_convert(colors, "sRGB1", "CAM02-UCS")
    np.testing.assert_allclose(out[0], ref)
    deut = cspace_convert(np.clip(cspace_convert(colors, {"name": "sRGB1+CVD", "cvd_type": "deuteranomaly",
                                                        "severity": 100}, "sRGB1"), 0, 1), "sRGB1", "CAM02-UCS")
    np.testing.assert_allclose(out[2], deut)


def test_tab_red_green_collapse_for_deutan() -> None:
    # common practice: matplotlib's tab:red (#d62728) against tab:green (#2ca02c) fails for deutan readers
    # (ΔE' about 5); both stay far apart for normal vision
    out = cs.vision_ucs(np.array([rgb("#d62728"), rgb("#2ca02c")]), 100)
    d = cs.ucs_distance(out[:, 0], out[:, 1])
    assert d[0] > 40
    assert 3 < d[2] < 7


def test_gray_equals_achromatic_ucs() -> None:
    # CAM02-UCS of a neutral gray has (almost) zero a', b' (Luo et al. 2006: hue-free axis)
    ucs = cs.srgb_to_ucs([0.5, 0.5, 0.5])
    assert float(cs.chroma(ucs)) < 2.0


# --- CIE L* ----------------------------------------------------------------------------------------


def test_cie_lightness_reference_points() -> None:
    # CIE 1976: white is L* 100, black L* 0; sRGB #777777 has Y = 0.1844, so L* = 116 * 0.1844^(1/3) - 16
    # = 50.0 (worked by hand from CIE 15:2004's L* formula);
    # colorspacious' IEC 61966-2-1 matrix puts white at Y 99.998, hence the tolerance
    lstar = cs.cie_lightness(np.array([[1, 1, 1], [0, 0, 0], rgb("#777777")]))
    np.testing.assert_allclose(lstar[:2], [100.0, 0.0], atol=0.01)
    assert lstar[2] == pytest.approx(50.0, abs=0.5)
    # colorspacious' CIELab is the reference for the whole conversion
    np.testing.assert_allclose(cs.cie_lightness([0.2, 0.5, 0.7]), cspace_convert([0.2, 0.5, 0.7], "sRGB1", "CIELab")[0])


def test_grayscale_keeps_luminance() -> None:
    colors = np.array([[1.0, 0.0, 0.0], [0.0, 0.6, 0.2], [0.3, 0.3, 0.9]])
    gray = cs.to_grayscale(colors)
    assert np.allclose(gray[:, 0], gray[:, 1]) and np.allclose(gray[:, 1], gray[:, 2])
    # same tolerance reason as above: colorspacious' white has Y 99.998, so a gray's Y is 0.002% short
    np.testing.assert_allclose(cs.cie_lightness(gray), cs.cie_lightness(colors), atol=0.01)


# --- parsing and alpha ------------------------------------------------------------------------------


def test_as_rgba_reads_tuples_hex_none_and_arrays() -> None:
    np.testing.assert_allclose(cs.as_rgba((1, 0, 0)), [[1, 0, 0, 1]])
    np.testing.assert_allclose(cs.as_rgba("#00ff0080"), [[0, 1, 0, 128 / 255]])
    np.testing.assert_allclose(cs.as_rgba("#0f0"), [[0, 1, 0, 1]])
    np.testing.assert_allclose(cs.as_rgba("none"), [[0, 0, 0, 0]])
    per_point = np.tile([0.2, 0.4, 0.6, 0.5], (7, 1))
    assert cs.as_rgba(per_point).shape == (7, 4)
    assert cs.as_rgba(np.array([[0.1, 0.2, 0.3]])).shape == (1, 4)


def test_as_rgba_bad_input_gives_nan_rows_not_errors() -> None:
    out = cs.as_rgba([(1.0, 0.0), "not a colour", (np.nan, 0, 0, 1), "#12345z", (0.5, 0.5, 0.5)])
    assert np.isnan(out[:4]).all()
    np.testing.assert_allclose(out[4], [0.5, 0.5, 0.5, 1.0])
    assert cs.as_rgba(np.zeros((3, 5))).shape == (0, 4)
    # out-of-range floats are clipped to the sRGB gamut
    np.testing.assert_allclose(cs.as_rgba((1.4, -0.2, 0.5, 2.0)), [[1.0, 0.0, 0.5, 1.0]])


def test_blend_over_background() -> None:
    # alpha compositing (Porter & Duff 1984 "over"): 50% black over white is mid gray in stored sRGB values
    np.testing.assert_allclose(cs.blend_over((0, 0, 0, 0.5), (1, 1, 1)), [[0.5, 0.5, 0.5]])
    np.testing.assert_allclose(cs.blend_over("none", (0.2, 0.3, 0.4)), [[0.2, 0.3, 0.4]])
    # a translucent background is seen on white first
    np.testing.assert_allclose(cs.blend_over((0, 0, 0, 0), (0, 0, 0, 0.5)), [[0.5, 0.5, 0.5]])


def test_out_of_gamut_and_nan_inputs_do_not_crash() -> None:
    weird = np.array([[2.0, -1.0, 0.5], [np.nan, 0.2, 0.2], [np.inf, 0, 0]])
    assert np.isfinite(cs.srgb_to_ucs(weird)).all()
    assert np.isfinite(cs.vision_ucs(weird)).all()
    assert np.isfinite(cs.contrast_ratio(weird, [1, 1, 1])).all()


def test_to_hex() -> None:
    assert cs.to_hex([1.0, 0.5, 0.0, 0.3]) == "#ff8000"

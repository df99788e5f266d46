"""Colour rules: colour maps, colour pairs under colour-vision deficiency and in grayscale, contrast.

The colours each rule measures are collected in :mod:`figproof.rules._series` (its module
docstring says which marks count as series); colour maps are judged in
:mod:`figproof.rules._colormaps`; every formula lives in :mod:`figproof.science.colour`.
"""

from __future__ import annotations

import dataclasses
import hashlib
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from figproof.model.findings import Detail, Hit, Severity
from figproof.model.records import ColorMapping, FigureModel, Source
from figproof.rules._colormaps import MapProblem, judge_cached, judge_colormap
from figproof.rules._series import (
    AxesPairs,
    Series,
    axes_pairs,
    axes_series,
    palette_colors,
    series_name,
)
from figproof.rules.base import Knob, Knobs, rule
from figproof.rules.contrast import is_large_text, low_contrast
from figproof.science import colour as cs

# --------------------------------------------------------------------------
# colormap-not-uniform
# --------------------------------------------------------------------------

_MAP_KNOBS = (
    Knob(name="reversal", default=5.0, minimum=0.0,
         help="largest tolerated move of lightness J' (CAM02-UCS) against the map's direction"),
    Knob(name="centre_chroma", default=20.0, minimum=0.0,
         help="chroma at a diverging map's centre from which it counts as a rainbow"),
    Knob(name="ends_difference", default=15.0, minimum=0.0,
         help="largest tolerated J' difference between the two ends of a diverging map (warning)"),
    Knob(name="cyclic_ends", default=5.0, minimum=0.0,
         help="CAM02-UCS ΔE' below which a map's two ends count as equal (a cyclic map)"),
    Knob(name="centre_offset", default=0.2, minimum=0.0, maximum=0.5,
         help="how far from the middle (fraction of the map) a diverging map may turn"),
    Knob(name="step_cv", default=0.6, minimum=0.0,
         help="largest tolerated coefficient of variation of ΔE' over equal blocks (warning)"),
    Knob(name="blocks", default=32.0, minimum=2.0, help="number of equal blocks for the step evenness"),
    Knob(name="palette_max_colors", default=20.0, minimum=0.0,
         help="a map with at most this many colours, not ordered in lightness, is a categorical palette"),
)

def _map_message(cm: ColorMapping, p: MapProblem) -> str:
    name = f"colour map '{cm.name}'" if cm.name else "an unnamed colour map"
    where = {"image": "an image", "mesh": "a mesh", "scatter": "a scatter", "contour": "a contour set",
             "colorbar": "a colorbar"}.get(cm.kind, cm.kind)
    head = f"{name} (used by {where})"
    if p.kind == "reversal" and p.shape == "sequential":
        return (f"{head} goes from lightness J' {p.low:.0f} to {p.high:.0f} but reverses by {p.value:.1f} "
                f"around {p.at:.0%} of its range (limit {p.limit:g})")
    if p.kind == "reversal":
        return (f"{head} turns in lightness near its middle like a diverging map, but one half reverses by "
                f"{p.value:.1f} around {p.at:.0%} of its range (limit {p.limit:g})")
    if p.kind == "centre-chroma":
        return (f"{head} rises and falls in lightness about a coloured centre, chroma {p.value:.1f} at "
                f"{p.at:.0%} of its range where a diverging map's centre is neutral (below {p.limit:g}), "
                f"so it reads as a rainbow")
    if p.kind == "ends":
        return (f"{head} is diverging with ends of unequal lightness, J' {p.low:.0f} and {p.high:.0f} "
                f"(difference {p.value:.1f}, limit {p.limit:g})")
    if p.kind == "cyclic-shape":
        return (f"{head} is cyclic but not V- or Λ-shaped in lightness: J' reverses by {p.value:.1f} around "
                f"{p.at:.0%} of the cycle (limit {p.limit:g})")
    return (f"{head} changes colour at a very uneven rate: the coefficient of variation of ΔE' over equal "
            f"blocks is {p.value:.2f} (limit {p.limit:g})")


@rule(
    "colormap-not-uniform",
    severity="error",
    confidence="likely",
    knobs=_MAP_KNOBS,
    why="""
        Readers judge the size of a value by the lightness of its colour. A colour map whose lightness
        rises and falls (jet, rainbow, hsv, turbo and most "spectral" maps) draws bright bands and
        sharp edges where the data change smoothly, and hides real gradients where its lightness is
        flat; it also collapses to an unreadable sequence in grayscale and for colour-blind readers.
        figproof judges every colour map the figure actually uses from its own sampled colours, not
        its name, in the perceptually uniform CAM02-UCS space: a sequential map must keep lightness
        J' moving one way, a diverging map must run monotonically from a neutral centre to each end,
        a cyclic map must be V- or Λ-shaped around its cycle, and the colour should change at an even
        perceptual rate.
    """,
    fix="""
        For ordered values use a perceptually uniform sequential map: `cmap="viridis"` (the default),
        "cividis", "magma", "plasma", "inferno", or a ColorBrewer map such as "Blues". For values
        above and below a meaningful centre use a diverging map ("RdBu_r", "coolwarm", "PuOr") with
        `norm=matplotlib.colors.TwoSlopeNorm(vcenter=...)`. For angles or phases use "twilight". For
        categories use a qualitative palette with few colours and check it with
        colours-confusable-cvd.
    """,
    sources=(
        "Luo M.R., Cui G., Li C. (2006) Uniform colour spaces based on CIECAM02 colour appearance model. Color "
        "Research & Application 31(4): 320-330, doi:10.1002/col.20227 (CAM02-UCS).",
        "Borland D., Taylor R.M. II (2007) Rainbow color map (still) considered harmful. IEEE Computer Graphics "
        "and Applications 27(2): 14-17.",
        "matplotlib documentation, 'Choosing Colormaps in Matplotlib': perceptually uniform sequential maps "
        "(viridis, plasma, inferno, magma, cividis; made by N.J. Smith, S. van der Walt and, for viridis, "
        "E. Firing, the default map since matplotlib 2.0) have lightness rising monotonically.",
        "Nuñez J.R., Anderton C.R., Renslow R.S. (2018) Optimizing colormaps with consideration for color vision "
        "deficiency to enable accurate interpretation of scientific data. PLOS ONE 13(7): e0199239 (cividis).",
        "Moreland K. (2009) Diverging color maps for scientific visualization. Advances in Visual Computing "
        "(ISVC 2009), Springer, doi:10.1007/978-3-642-10520-3_9 (a neutral centre between two hues).",
        "Thresholds (J' reversal 5, centre chroma 20, ends 15, step CV 0.6 over 32 blocks): common practice.",
    ),
    bad="""
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        import numpy as np
        y, x = np.mgrid[-2:2:200j, -2:2:200j]
        field = np.exp(-(x**2 + y**2))
        fig, ax = plt.subplots()
        image = ax.imshow(field, cmap="jet")
        fig.colorbar(image, ax=ax, label="signal (a.u.)")
        fig.savefig("signal.png")
    """,
    good="""
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        import numpy as np
        y, x = np.mgrid[-2:2:200j, -2:2:200j]
        field = np.exp(-(x**2 + y**2))
        fig, ax = plt.subplots()
        image = ax.imshow(field, cmap="viridis")
        fig.colorbar(image, ax=ax, label="signal (a.u.)")
        fig.savefig("signal.png")
    """,
)
def colormap_not_uniform(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """A colour map whose lightness is not monotonic or not perceptually even is used for continuous values."""
    params = tuple(float(knobs[k.name]) for k in _MAP_KNOBS if k.name != "palette_max_colors")
    reported: set[str] = set()
    # judge image/mesh/scatter maps before colorbars, so a finding points at the plotting call
    entries = [(ax, cm) for ax in figure.axes for cm in ax.colormaps]
    entries.sort(key=lambda e: e[1].kind == "colorbar")
    for ax, cm in entries:
        if cm.is_rgb or palette_colors(cm, knobs["palette_max_colors"]).shape[0]:
            continue  # RGB images have no map; few unordered colours are a palette (judged as pairs)
        samples = np.ascontiguousarray(np.asarray(cm.samples, dtype=float))
        if samples.ndim != 2 or samples.shape[0] < 3 or samples.shape[1] < 3:
            continue
        digest = hashlib.sha256(samples.tobytes()).hexdigest()[:12]
        if digest in reported:
            continue
        reported.add(digest)
        problems = list(judge_cached(samples.tobytes(), samples.shape[0], params))
        # one finding per map: its errors, or (when it has none) its warnings; a map that fails
        # outright needs replacing, so its lesser defects would only add noise
        worst = [p for p in problems if p.severity == "error"] or problems
        if not worst:
            continue
        texts = [_map_message(cm, p) for p in worst]
        head = texts[0][: texts[0].index(")") + 1]
        message = "; and it ".join([texts[0]] + [t[len(head) + 1:] for t in texts[1:]])
        yield Hit(message=message, source=cm.source, axes=ax.index,
                  severity=None if worst[0].severity == "error" else worst[0].severity,
                  key=f"map:{digest}:" + ",".join(p.kind for p in worst))


# --------------------------------------------------------------------------
# colours-confusable-cvd
# --------------------------------------------------------------------------

_SERIES_KNOBS = (
    Knob(name="palette_max_colors", default=20.0, minimum=0.0,
         help="a colour map with at most this many colours, not ordered in lightness, counts as a palette"),
    Knob(name="max_colors", default=20.0, minimum=2.0,
         help="an artist with more distinct colours than this encodes a continuous variable and is skipped"),
)


@rule(
    "colours-confusable-cvd",
    severity="error",
    confidence="likely",
    knobs=(
        Knob(name="cvd_severity", default=100.0, minimum=0.0, maximum=100.0,
             help="severity of the simulated deficiency, 0 (normal vision) to 100 (dichromacy)"),
        Knob(name="delta_e", default=10.0, minimum=0.0,
             help="CAM02-UCS ΔE' below which two colours count as confusable"),
        Knob(name="hue_chroma", default=20.0, minimum=0.0,
             help="a'b' distance of a pair in normal vision from which its hue difference matters"),
        Knob(name="hue_lost", default=5.0, minimum=0.0,
             help="a'b' distance under simulation below which that hue difference counts as lost"),
        Knob(name="lightness_left", default=15.0, minimum=0.0,
             help="J' difference below which a pair whose hue difference is lost is hard to tell apart"),
        *_SERIES_KNOBS,
    ),
    why="""
        About 8% of men and 0.4% of women of European ancestry have a red-green colour-vision
        deficiency (protan or deutan); tritan vision is much rarer. In most review chains someone cannot
        tell a red series from a green one, and a legend that relies on that difference leaves them
        guessing which curve is which. figproof takes the colours a reader must tell apart in each axes:
        series and hue levels named by a legend, or told apart by colour alone (not bars that stand
        under their own tick labels, slices labelled directly, colours that step along a lightness
        ramp, which encode an ordered value, or pairs that also differ in line style, marker, hatch or a
        line at least twice as wide), blends them over the axes background, simulates protan,
        deutan and tritan vision with the Machado et al. (2009) model and measures every pair's
        perceptual distance ΔE' in CAM02-UCS. Pairs closer than the limit for normal, protan or deutan
        vision are errors; for tritan vision, or when a pair loses its hue difference and keeps too
        little lightness difference, they are warnings. All clashing pairs of one axes are one finding,
        worst first.
    """,
    fix="""
        Choose a palette designed for colour-blind readers, such as Okabe & Ito's
        ["#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000"],
        or matplotlib's "tableau-colorblind10" style (`plt.style.use("tableau-colorblind10")`). Make
        the two clashing series differ in lightness as well as hue, and add a second cue: a different
        marker, line style or direct labels next to the data.
    """,
    sources=(
        "Machado G.M., Oliveira M.M., Fernandes L.A.F. (2009) A physiologically-based model for simulation of "
        "color vision deficiency. IEEE Transactions on Visualization and Computer Graphics 15(6): 1291-1298 "
        "(via colorspacious 'sRGB1+CVD').",
        "Luo M.R., Cui G., Li C. (2006) Uniform colour spaces based on CIECAM02 colour appearance model. Color "
        "Research & Application 31(4): 320-330 (CAM02-UCS colour difference ΔE', via colorspacious).",
        "Okabe M., Ito K. (2002, revised 2008) Color Universal Design (CUD): how to make figures and "
        "presentations that are friendly to colorblind people. J*Fly web page, jfly.uni-koeln.de/color "
        "(sections 9 and 10: colours easier to tell apart and a set of eight that both colour-blind and other "
        "readers tell apart; the hex codes in the fix are that set as commonly quoted, from memory).",
        "Birch J. (2012) Worldwide prevalence of red-green color deficiency. Journal of the Optical Society of "
        "America A 29(3): 313-320 (about 8% of men and 0.4% of women of European Caucasian populations).",
        "ΔE' limit 10, the a'b' limits 20/5 and the J' 15 left: common practice.",
    ),
    bad="""
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        import numpy as np
        days = np.arange(10)
        fig, ax = plt.subplots()
        ax.plot(days, 2.0 + 0.3 * days, color="tab:red", label="treated")
        ax.plot(days, 2.0 + 0.1 * days, color="tab:green", label="control")
        ax.legend()
        fig.savefig("growth.png")
    """,
    good="""
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        import numpy as np
        days = np.arange(10)
        fig, ax = plt.subplots()
        ax.plot(days, 2.0 + 0.3 * days, color="#E69F00", label="treated")
        ax.plot(days, 2.0 + 0.1 * days, color="#0072B2", label="control")
        ax.legend()
        fig.savefig("growth.png")
    """,
)
def colours_confusable_cvd(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """Two colours that must be told apart in one axes collapse under simulated protan, deutan or tritan vision."""
    groups = axes_pairs(figure, knobs)
    if not groups:
        return
    severity = cs.check_severity(min(max(float(knobs["cvd_severity"]), 0.0), 100.0))
    # every colour of the figure goes through one simulation/conversion batch
    sizes = [g.rgb.shape[0] for g in groups]
    ucs_all = cs.vision_ucs(np.concatenate([g.rgb for g in groups]), severity)
    start = 0
    for g, size in zip(groups, sizes, strict=True):
        ucs = ucs_all[:, start : start + size]
        start += size
        clashes = sorted(_cvd_clashes(g, ucs, knobs), key=lambda c: (_RANK[c.severity], c.distance))
        if clashes:
            yield _pairs_hit(g, clashes, "cvd")


@dataclass(frozen=True, slots=True)
class _Clash:
    """One clashing pair of an axes: how bad, in plain words and numbers."""

    severity: Severity
    distance: float
    message: str
    source: Source | None
    key: str


_RANK = {"error": 0, "warning": 1, "note": 2}
_READERS = {"protan": "red-green colour blindness", "deutan": "red-green colour blindness",
            "tritan": "blue-yellow colour blindness"}


def _cvd_clashes(g: AxesPairs, ucs: np.ndarray, knobs: Knobs) -> Iterator[_Clash]:
    de = cs.pairwise_delta_e(ucs)  # (4, n, n)
    ab = cs.pairwise_delta_e(ucs[..., 1:])  # distance in the a'b' plane: hue and chroma only
    limit = float(knobs["delta_e"])
    for i, j in g.pairs:
        a, b = g.series[i], g.series[j]
        names = f"{series_name(a, g.hexes[i])} and {series_name(b, g.hexes[j])}"
        d = {v: float(de[k, i, j]) for k, v in enumerate(cs.VISIONS)}
        source = b.source or a.source
        key = f"{g.hexes[i]}/{g.hexes[j]}"
        strict = [v for v in ("normal", "protan", "deutan") if d[v] < limit]
        if strict:
            if "normal" in strict:
                yield _Clash("error", d["normal"], f"{names} are hard to tell apart even with normal colour vision "
                             f"(colour difference ΔE' {d['normal']:.1f} in CAM02-UCS, below {limit:g})", source,
                             f"{key}/normal")
                continue
            worst = min(strict, key=lambda v: d[v])
            also = [f"{v} {d[v]:.1f}" for v in strict if v != worst]
            extra = f"; {', '.join(also)} for the other form" if also else ""
            yield _Clash("error", d[worst], f"{names} look the same to readers with {_READERS[worst]} "
                         f"(simulated {worst} vision: colour difference ΔE' {d[worst]:.1f}{extra}, "
                         f"below {limit:g})", source, f"{key}/{worst}")
            continue
        if d["tritan"] < limit:
            yield _Clash("warning", d["tritan"], f"{names} look alike to readers with {_READERS['tritan']} "
                         f"(simulated tritan vision: colour difference ΔE' {d['tritan']:.1f}, below {limit:g})", source,
                         f"{key}/tritan")
            continue
        normal_ab = float(ab[0, i, j])
        if normal_ab < knobs["hue_chroma"]:
            continue
        # the pair keeps its lightness difference; only when too little lightness is left is that a problem
        lost = [(float(ab[k, i, j]), v) for k, v in enumerate(cs.VISIONS)
                if k and ab[k, i, j] < knobs["hue_lost"]
                and abs(float(ucs[k, i, 0] - ucs[k, j, 0])) < knobs["lightness_left"]]
        if lost:
            value, v = min(lost)
            k = cs.VISIONS.index(v)
            left = abs(float(ucs[k, i, 0] - ucs[k, j, 0]))
            yield _Clash("warning", left, f"{names} differ only a little in lightness for readers with {_READERS[v]}: "
                         f"their hue difference is lost under simulated {v} vision (a'b' distance "
                         f"{normal_ab:.1f} drops to {value:.1f}) and "
                         f"the lightness difference left, J' {left:.1f}, is below {knobs['lightness_left']:g}",
                         source, f"{key}/hue-{v}")


def _pairs_hit(g: AxesPairs, clashes: list[_Clash], what: str) -> Hit:
    """One finding per axes: the worst pair in words, how many more clash, every pair as a detail."""
    head = clashes[0]
    rest = len(clashes) - 1
    more = f"; {rest} more pair{'s' * (rest != 1)} of this axes clash{'es' * (rest == 1)}" if rest else ""
    hexes = sorted({h for c in clashes for h in c.key.split("/")[:2]})
    return Hit(message=head.message + more, source=head.source, axes=g.axes,
               severity=None if head.severity == "error" else head.severity,
               key=f"{what}:{','.join(hexes)}",
               details=tuple(Detail(message=c.message, source=c.source, axes=g.axes) for c in clashes))


# --------------------------------------------------------------------------
# colours-confusable-gray
# --------------------------------------------------------------------------


@rule(
    "colours-confusable-gray",
    severity="note",
    confidence="likely",
    opt_in=True,
    knobs=(
        Knob(name="lightness_difference", default=8.0, minimum=0.0,
             help="CIE L* difference below which two colours look alike in grayscale"),
        *_SERIES_KNOBS,
    ),
    why="""
        Figures are printed in black and white, photocopied, and read on e-ink screens, and readers with
        achromatopsia see no hue at all. Two series that differ only in hue become the same gray. The
        lightness a grayscale rendering keeps is CIE L*; figproof compares it for every pair of colours
        that must be told apart in one axes, after blending them over the axes background.
        On screen, colours of clearly different hue (blue and red) are told apart by every reader even at
        one lightness, and colour-vision deficiency is `colours-confusable-cvd`'s business; so this rule
        is opt-in, for figures bound for grayscale print (a thesis, a journal that prints in black and
        white): give it a severity in figproof.toml to turn it on.
    """,
    fix="""
        Make the series differ in lightness (a light and a dark colour, as in the ColorBrewer or Okabe &
        Ito palettes), or add a cue that survives grayscale: markers, line styles, hatching, or direct
        labels.
    """,
    sources=(
        "CIE 15:2004 Colorimetry, CIE 1976 L* (via colorspacious 'CIELab', D65).",
        "L* difference 8: common practice.",
    ),
    bad="""
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.bar([0, 1], [3, 5], color="tab:blue", label="2023")
        ax.bar([0.4, 1.4], [4, 6], width=0.4, color="tab:red", label="2024")
        ax.legend()
        fig.savefig("counts.png")
    """,
    good="""
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.bar([0, 1], [3, 5], color="#0072B2", label="2023")
        ax.bar([0.4, 1.4], [4, 6], width=0.4, color="#E69F00", label="2024")
        ax.legend()
        fig.savefig("counts.png")
    """,
)
def colours_confusable_gray(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """Two colours that must be told apart in one axes have nearly the same lightness in grayscale."""
    groups = axes_pairs(figure, knobs)
    if not groups:
        return
    lightness = cs.cie_lightness(np.concatenate([g.rgb for g in groups]))
    limit = float(knobs["lightness_difference"])
    start = 0
    for g in groups:
        lstar = lightness[start : start + g.rgb.shape[0]]
        start += g.rgb.shape[0]
        clashes = []
        for i, j in g.pairs:
            gap = float(abs(lstar[i] - lstar[j]))
            if gap < limit:
                a, b = g.series[i], g.series[j]
                clashes.append(_Clash(
                    "note", gap, f"{series_name(a, g.hexes[i])} and {series_name(b, g.hexes[j])} look alike in "
                    f"grayscale print (lightness CIE L* {lstar[i]:.1f} and {lstar[j]:.1f}, difference {gap:.1f}, "
                    f"below {limit:g})", b.source or a.source, f"{g.hexes[i]}/{g.hexes[j]}"))
        if clashes:
            hit = _pairs_hit(g, sorted(clashes, key=lambda c: c.distance), "gray")
            yield dataclasses.replace(hit, severity=None)


__all__ = ["RULES", "MapProblem", "Series", "axes_series", "is_large_text", "judge_colormap", "low_contrast",
           "palette_colors"]

RULES = (colormap_not_uniform, colours_confusable_cvd, colours_confusable_gray, low_contrast)

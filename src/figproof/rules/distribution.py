"""Rules about showing the distribution: binned dot plots, small-n summaries, multimodal boxes, error-bar types.

Each rule prefers the data the script handed to matplotlib or loaded from
disk (``FigureModel.samples``, ``calls`` and ``tables``); a finding built on
them is "certain".  Without them a rule falls back to what was drawn, or
stays silent when the drawn marks cannot settle the question.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from figproof.model.findings import Confidence, Detail, Hit, Severity
from figproof.model.records import Axes, Box, ErrorBars, FigureModel, Source, Violin
from figproof.rules._observations import (
    Group,
    drawn_near,
    finite,
    fmt,
    group_label,
    groups_centred,
    half_width,
    matched,
    recorded_groups,
    rectilinear,
    shown,
    where,
)
from figproof.rules.bars import bars_for_continuous
from figproof.rules.base import Knob, Knobs, pct, rule
from figproof.science.dip import dip_test

# The fewest distinct values that can show a lattice (two or three gaps fit a lattice by chance).
_MIN_LATTICE_VALUES = 4
# Largest divisor of the smallest gap tried when looking for the lattice step (gaps 2 and 3 -> step 1).
_MAX_DIVISOR = 6


# --------------------------------------------------------------------------
# dots-binned
# --------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Lattice:
    step: float
    origin: float  # smallest plotted value (a lattice node)
    offset: str  # "zero" | "half" | "other": where the nodes sit relative to multiples of the step
    round_step: bool
    nodes: int
    distinct: int


def _is_round(step: float) -> bool:
    """A step of 1, 2, 2.5 or 5 times a power of ten (the steps people choose for bins and scales)."""
    if not (step > 0 and math.isfinite(step)):
        return False
    mantissa = step / 10 ** math.floor(math.log10(step))
    return any(abs(mantissa - r) <= 1e-6 * r for r in (1.0, 2.0, 2.5, 5.0, 10.0))


def _find_lattice(values: np.ndarray, knobs: Knobs) -> _Lattice | None:
    """The regular lattice the values sit on, if they sit on one (see dots-binned)."""
    n = values.size
    if n < knobs["min_n"]:
        return None
    distinct = np.unique(values)
    if distinct.size < _MIN_LATTICE_VALUES or distinct.size / n > knobs["max_unique_share"]:
        return None
    gaps = np.diff(distinct)
    span = float(distinct[-1] - distinct[0])
    smallest = float(gaps.min())
    if not (span > 0 and smallest > 0):
        return None
    for divisor in range(1, _MAX_DIVISOR + 1):
        step = smallest / divisor
        ratios = gaps / step
        # approximate common divisor: every gap within 1% of a whole number of steps
        if np.all(np.abs(ratios - np.round(ratios)) <= 0.01):
            break
    else:
        return None
    nodes = round(span / step)
    step = span / nodes  # least-error step from the two ends
    if distinct.size / (nodes + 1) < knobs["min_occupancy"]:
        return None
    frac = (float(distinct[0]) / step) % 1.0
    tol = 1e-3
    offset = "zero" if min(frac, 1 - frac) <= tol else "half" if abs(frac - 0.5) <= tol else "other"
    return _Lattice(step=step, origin=float(distinct[0]), offset=offset, round_step=_is_round(step),
                    nodes=nodes + 1, distinct=int(distinct.size))


def _affine_equal(plotted: np.ndarray, column: np.ndarray) -> bool:
    """The plotted values are the column's values, maybe after a change of unit (plotted = a + b * column)."""
    if plotted.size != column.size or plotted.size < 2:
        return False
    p = np.sort(plotted)
    c = np.sort(column)
    if np.ptp(c) == 0:
        return bool(np.ptp(p) == 0)
    for flip in (False, True):
        cc = -c[::-1] if flip else c
        b = (p[-1] - p[0]) / (cc[-1] - cc[0])
        a = p[0] - b * cc[0]
        if np.allclose(a + b * cc, p, rtol=1e-9, atol=1e-9 * max(float(np.ptp(p)), 1e-300)):
            return True
    return False


def _snaps_to(lattice: _Lattice, plotted: np.ndarray, column: np.ndarray) -> bool:
    """Snapping the column to the lattice's nearest nodes gives the plotted count at every node."""
    if column.size != plotted.size:
        return False
    top = lattice.nodes - 1
    # Half-way values go up, as np.histogram puts a value on an inner edge in the bin to its right;
    # the outer edges belong to the end bins.
    k_col = np.clip(np.floor((column - lattice.origin) / lattice.step + 0.5), 0, top).astype(np.int64)
    k_plot = np.clip(np.round((plotted - lattice.origin) / lattice.step), 0, top).astype(np.int64)
    diff = np.abs(np.bincount(k_col, minlength=top + 1) - np.bincount(k_plot, minlength=top + 1)).sum() // 2
    # allow one value in a hundred to land in the neighbouring bin through rounding on an edge
    return bool(diff <= max(1, plotted.size // 100))


def _value_sets(ax: Axes, axis: str) -> list[tuple[str, np.ndarray, Source | None]]:
    """Candidate point groups for one coordinate of an axes: all markers pooled, then each point set."""
    log = (ax.x if axis == "x" else ax.y).scale == "log"
    sets: list[tuple[str, np.ndarray, Source | None]] = []
    for i, ps in enumerate(ax.points):
        v = finite(ps.x if axis == "x" else ps.y)
        if log:
            v = np.log10(v[v > 0])  # a lattice on a log axis is regular in log10 of the value
        sets.append((f"points:{i}", v, ps.source))
    if len(sets) > 1:
        pooled = np.concatenate([v for _, v, _ in sets])
        return [("points:all", pooled, sets[0][2]), *sets]
    return sets


@rule(
    "dots-binned",
    severity="warning",
    confidence="likely",
    why="""
        A dot plot or strip plot promises one dot per observation at its measured value. When the values
        were first binned (for example from `np.histogram` bin centres), every dot in a bin is drawn at
        the bin's centre: the reader sees a tidy lattice, cannot tell how the values spread inside a bin,
        and reads a precision the figure does not have. Ties and gaps in the plot then come from the bin
        edges, not from the data.
    """,
    fix="""
        Plot the measured values themselves and spread overlapping dots sideways instead of along the value
        axis: a jittered strip plot, a swarm (beeswarm) plot, or seaborn's `stripplot`/`swarmplot` with the
        raw column. If you want a binned display, draw a histogram, whose bars say openly that values were
        binned. Data that really are discrete (integer counts, Likert scores, instrument resolution) are
        fine as they are.
    """,
    sources=(
        "Wilkinson L. (1999) Dot plots. The American Statistician 53(3): 276-281 (abstract: programs that "
        "reproduce dot plots by simple histogram binning misplace the dots; the paper places each dot near its "
        "value).",
        "Weissgerber T.L., Milic N.M., Winham S.J., Garovic V.D. (2015) Beyond bar and line graphs: time for a "
        "new data presentation paradigm. PLOS Biology 13(4): e1002128 (show the individual values).",
        "Common practice: dot plots of integers or Likert scores are not binned.",
    ),
    knobs=(
        Knob(name="min_n", default=10, help="Fewest points in a set before a lattice is looked for.", minimum=4),
        Knob(name="max_unique_share", default=0.5, help="Largest share of distinct values among the points.",
             minimum=0, maximum=1),
        Knob(name="min_occupancy", default=0.3,
             help="Smallest share of lattice nodes between the extremes that hold a point.", minimum=0, maximum=1),
    ),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np

        rng = np.random.default_rng(7)
        mass = rng.normal(24.0, 3.0, 60)  # body mass of 60 mice, weighed to 0.01 g
        counts, edges = np.histogram(mass, bins=10)
        centres = (edges[:-1] + edges[1:]) / 2
        x = np.repeat(centres, counts)  # every mouse drawn at its bin centre
        y = np.concatenate([np.arange(1, c + 1) for c in counts])
        fig, ax = plt.subplots()
        ax.scatter(x, y)
        ax.set_xlabel("body mass (g)")
        ax.set_ylabel("mice")
        fig.savefig("mass.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np

        rng = np.random.default_rng(7)
        groups = {"control": rng.normal(24.0, 3.0, 30), "fasted": rng.normal(21.0, 3.0, 30)}
        fig, ax = plt.subplots()
        for i, mass in enumerate(groups.values()):
            ax.scatter(i + rng.uniform(-0.15, 0.15, mass.size), mass, alpha=0.7)
            ax.hlines(np.median(mass), i - 0.3, i + 0.3, color="black")
        ax.set_xticks([0, 1], list(groups))
        ax.set_ylabel("body mass (g)")
        fig.savefig("mass.png")
    """,
)
def dots_binned(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """A dot or strip plot whose dots sit on a regular lattice (bin centres) instead of the measured values."""
    columns = [(name, t.path, finite(col)) for t in figure.tables for name, col in t.columns.items()]
    for ax in figure.axes:
        if not rectilinear(ax) or not ax.points:
            continue
        for axis in ("x", "y"):
            meta = ax.x if axis == "x" else ax.y
            if meta.categorical or meta.dates:
                continue
            for key, values, source in _value_sets(ax, axis):
                lattice = _find_lattice(values, knobs)
                if lattice is None:
                    continue
                hit = _binned_hit(ax, axis, key, values, source, lattice, columns)
                if hit is not None:
                    yield hit
                break  # one verdict per coordinate: the pooled set, or the first lattice set


def _binned_hit(ax: Axes, axis: str, key: str, values: np.ndarray, source: Source | None, lattice: _Lattice,
                columns: list[tuple[str, str, np.ndarray]]) -> Hit | None:
    """The finding for a lattice, judged against the loaded columns when they tell."""
    log = " (log10)" if (ax.x if axis == "x" else ax.y).scale == "log" else ""
    fact = (f"the {axis} values{log} of {values.size} points take only {lattice.distinct} distinct values, "
            f"on a lattice of step {fmt(lattice.step)}")
    for _name, _path, col in columns:
        if _affine_equal(values, col):
            return None  # the plotted values are the measured ones: truly discrete data
    for name, path, col in columns:
        if np.unique(col).size > lattice.distinct and _snaps_to(lattice, values, col):
            return Hit(message=f"{fact}, while column '{name}' in {path} has {np.unique(col).size} distinct "
                               f"values that round to exactly these points", source=source, axes=ax.index,
                       confidence="certain", key=f"{axis}:{key}")
    if not lattice.round_step:
        return Hit(message=f"{fact} (like bin centres)", source=source, axes=ax.index, confidence="likely",
                   key=f"{axis}:{key}")
    if lattice.offset == "zero":
        return None  # round values at round multiples: a measuring resolution or a score
    place = "halfway between" if lattice.offset == "half" else "off"
    return Hit(message=f"{fact}, {place} multiples of the step (like bin centres)", source=source,
               axes=ax.index, confidence="possible", key=f"{axis}:{key}")


# --------------------------------------------------------------------------
# summary-hides-small-n and box-hides-modes
# --------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Summary:
    """One drawn summary (box, violin or bar) with the raw group it stands for, when known."""

    kind: str  # box | violin | bar
    position: float
    vertical: bool
    n: int | None
    values: np.ndarray | None
    source: Source | None
    fliers: np.ndarray | None = None
    inferred: bool = False  # n found by matching the bar to a loaded group's mean


def _sample_values(figure: FigureModel, mark: Box | Violin) -> np.ndarray | None:
    if mark.sample is None or not 0 <= mark.sample < len(figure.samples):
        return None
    return finite(figure.samples[mark.sample].values)


def _summaries(figure: FigureModel, ax: Axes) -> list[_Summary]:
    """Boxes, violins and summary bars of an axes with their group sizes (None when unknown)."""
    out: list[_Summary] = []
    for box in ax.boxes:
        values = _sample_values(figure, box)
        n = box.n if box.n is not None else (values.size if values is not None else None)
        out.append(_Summary("box", box.position, box.orientation != "horizontal", n, values, box.source,
                            fliers=finite(box.fliers)))
    for v in ax.violins:
        values = _sample_values(figure, v)
        n = v.n if v.n is not None else (values.size if values is not None else None)
        out.append(_Summary("violin", v.position, v.orientation != "horizontal", n, values, v.source))
    groups: list[Group] | None = None
    for bars in ax.bars:
        if bars.origin == "hist":
            continue
        for p, h, b in zip(bars.positions, bars.heights, bars.bottoms, strict=False):
            if not (math.isfinite(p) and math.isfinite(h)) or b != 0:
                continue  # stacked segments are parts of a whole, not group summaries
            if groups is None:
                groups = [g for g in recorded_groups(figure, ax.index) if g.origin != "call"]
            matches = groups_centred(groups, float(h), "mean")
            sizes = {g.values.size for g in matches}
            if len(sizes) == 1:
                g = matches[0]
                out.append(_Summary("bar", float(p), bars.orientation != "horizontal", g.values.size, g.values,
                                    bars.source, inferred=g.origin == "table"))
    return out


def _positions(ax: Axes) -> list[float]:
    pos = [b.position for b in ax.boxes] + [v.position for v in ax.violins]
    for bars in ax.bars:
        pos.extend(finite(bars.positions).tolist())
    for eb in ax.errorbars:
        pos.extend(finite(eb.positions).tolist())
    return pos


@rule(
    "summary-hides-small-n",
    severity="warning",
    confidence="likely",
    why="""
        A box plot, violin or bar drawn for a handful of observations shows a summary that the data cannot
        support: with fewer than about ten values, quartiles, densities and means move a lot from one
        sample to the next, and the same box can come from very different data. The reader cannot see
        how few values there were, nor whether one of them drives the picture.
    """,
    fix="""
        Draw every observation as a point (a strip or swarm plot), optionally over a thin box or with a line
        at the median; state n in the caption or axis label. At n below five, show the points alone.
    """,
    sources=(
        "Krzywinski M., Altman N. (2014) Visualizing samples with box plots. Nature Methods 11: 119-120, "
        "doi:10.1038/nmeth.2813 (a box plot needs at least n = 5; below that, show the individual points).",
        "Weissgerber T.L., Milic N.M., Winham S.J., Garovic V.D. (2015) Beyond bar and line graphs: time for a "
        "new data presentation paradigm. PLOS Biology 13(4): e1002128 (summaries hide the data of "
        "small-sample studies).",
        "Common practice: n < 10 is a small group; 80% of the observations drawn counts as showing them.",
    ),
    knobs=(
        Knob(name="small_n", default=10, help="Groups smaller than this are warned about.", minimum=1),
        Knob(name="note_n", default=10, help="Groups from small_n up to below this get a note (off by default).",
             minimum=1),
        Knob(name="shown_share", default=0.8,
             help="Share of a group's observations drawn as points that counts as showing the data.",
             minimum=0, maximum=1),
    ),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np

        rng = np.random.default_rng(3)
        groups = [rng.normal(m, 1.0, 6) for m in (5.0, 6.0, 6.5)]  # six animals per genotype
        fig, ax = plt.subplots()
        ax.boxplot(groups)
        ax.set_xticks([1, 2, 3], ["wild type", "knockout", "rescue"])
        ax.set_ylabel("grip strength (N)")
        fig.savefig("grip.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np

        rng = np.random.default_rng(3)
        groups = [rng.normal(m, 1.0, 6) for m in (5.0, 6.0, 6.5)]  # six animals per genotype
        fig, ax = plt.subplots()
        ax.boxplot(groups, showfliers=False)
        for i, g in enumerate(groups, start=1):
            ax.scatter(i + rng.uniform(-0.1, 0.1, g.size), g, zorder=3)
        ax.set_xticks([1, 2, 3], ["wild type", "knockout", "rescue"])
        ax.set_ylabel("grip strength (N)")
        fig.savefig("grip.png")
    """,
)
def summary_hides_small_n(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """Boxes, violins or bars that summarise small groups without drawing their points."""
    small, note_n, share = int(knobs["small_n"]), int(knobs["note_n"]), float(knobs["shown_share"])
    # bars that bars-for-continuous reports are one problem with one fix (draw the observations):
    # their small groups are not reported a second time
    summarising = {h.axes for h in bars_for_continuous.check(figure, bars_for_continuous.defaults())}
    for ax in figure.axes:
        if not rectilinear(ax):
            continue
        half = half_width(_positions(ax))
        found: dict[tuple[str, Severity, Confidence], list[tuple[_Summary, int, Confidence]]] = {}
        for s in _summaries(figure, ax):
            if s.n is None or s.n <= 0 or s.n >= note_n or (s.kind == "bar" and ax.index in summarising):
                continue
            drawn = shown(ax, s.values, s.n, s.position, half, s.vertical, s.fliers)
            if drawn >= share * s.n:
                continue
            severity: Severity = "warning" if s.n < small else "note"
            confidence: Confidence = "certain" if s.n < 5 else "likely" if s.n < small else "possible"
            if s.inferred:  # n came from matching a bar height to a loaded group's mean
                confidence = "likely" if confidence == "certain" else "possible"
            found.setdefault((s.kind, severity, confidence), []).append((s, drawn, confidence))
        # one finding per kind of summary, severity and confidence in an axes, not one per box
        for (kind, severity, _), items in found.items():
            yield _small_n_hit(ax, kind, severity, sorted(items, key=lambda item: item[0].position))


def _small_n_hit(ax: Axes, kind: str, severity: Severity, items: list[tuple[_Summary, int, Confidence]]) -> Hit:
    confidence = items[0][2]
    first = items[0][0]
    if len(items) == 1:
        s, drawn, _ = items[0]
        assert s.n is not None  # only groups of known size are judged
        message = (f"the {kind} at {where(s.vertical, s.position, ax)} summarises n = {s.n} values and draws "
                   f"{pct(drawn, s.n)} of them as points")
    else:
        axis = "x" if first.vertical else "y"
        labels = [group_label(ax, s.vertical, s.position) for s, _, _ in items]
        places = f"at {axis} = " + ", ".join(fmt(s.position) for s, _, _ in items)
        if all(labels):
            places = ", ".join(f"'{lab}'" for lab in labels)  # readers know the groups by their tick labels
        sizes = sorted({s.n for s, _, _ in items if s.n is not None})
        n_text = f"n = {sizes[0]}" if len(sizes) == 1 else f"n = {sizes[0]} to {sizes[-1]}"
        total = sum(s.n or 0 for s, _, _ in items)
        drawn = sum(d for _, d, _ in items)
        plural = "es" if kind == "box" else "s"
        message = (f"{len(items)} {kind}{plural} ({places}) summarise {n_text} values each and draw "
                   f"{pct(drawn, total)} of their values as points")
    return Hit(message=message, source=first.source, axes=ax.index, severity=severity, confidence=confidence,
               key=f"{kind}:{severity}:" + ",".join(fmt(s.position) for s, _, _ in items))


def _has_violin(ax: Axes, box: Box, half: float) -> bool:
    return any(abs(v.position - box.position) <= half for v in ax.violins)


@rule(
    "box-hides-modes",
    severity="warning",
    confidence="possible",
    why="""
        A box plot shows five numbers. Two clusters of values (two strains, two response strategies, a
        subgroup that failed) give a box that looks like one wide, well-behaved group: the gap between the
        modes falls inside the box and the reader never sees it. figproof runs Hartigan's dip test on the
        values behind each box and reports boxes whose data are clearly multimodal.
    """,
    fix="""
        Show the distribution: draw the points over the box (strip or swarm plot), or use a violin or a
        histogram per group. If the modes have a known cause, split the group by it.
    """,
    sources=(
        "Hartigan J.A., Hartigan P.M. (1985) The dip test of unimodality. Annals of Statistics 13(1): 70-84, "
        "doi:10.1214/aos/1176346577.",
        "Hartigan P.M. (1985) Algorithm AS 217: computation of the dip statistic to test for unimodality. "
        "Applied Statistics 34: 320-325.",
        "Hintze J.L., Nelson R.D. (1998) Violin plots: a box plot-density trace synergism. The American "
        "Statistician 52(2): 181-184, doi:10.1080/00031305.1998.10480559 (a box plot shows centre, spread, "
        "asymmetry and outliers; the density trace adds the shape, such as two modes).",
    ),
    knobs=(
        Knob(name="min_n", default=20, help="Fewest observations behind a box before the dip test is run.",
             minimum=4),
        Knob(name="min_unique", default=10, help="Fewest distinct values before the dip test is run.", minimum=2),
        Knob(name="alpha", default=0.05, help="Dip-test p-value below which a box is reported.", minimum=0,
             maximum=1),
        Knob(name="strong_alpha", default=0.01, help="P-value below which the finding is 'likely'.", minimum=0,
             maximum=1),
        Knob(name="shown_share", default=0.8,
             help="Share of the observations drawn as points that counts as showing the data.",
             minimum=0, maximum=1),
    ),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np

        rng = np.random.default_rng(11)
        # reaction times of 80 participants who used one of two strategies
        latency = np.concatenate([rng.normal(220.0, 15.0, 40), rng.normal(340.0, 15.0, 40)])
        fig, ax = plt.subplots()
        ax.boxplot([latency])
        ax.set_xticks([1], ["all participants"])
        ax.set_ylabel("reaction time (ms)")
        fig.savefig("latency.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np

        rng = np.random.default_rng(11)
        latency = np.concatenate([rng.normal(220.0, 15.0, 40), rng.normal(340.0, 15.0, 40)])
        fig, ax = plt.subplots()
        ax.violinplot([latency])
        ax.boxplot([latency], widths=0.1)
        ax.set_xticks([1], ["all participants"])
        ax.set_ylabel("reaction time (ms)")
        fig.savefig("latency.png")
    """,
)
def box_hides_modes(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """A box plot of a group whose values are clearly multimodal (Hartigan's dip test)."""
    for ax in figure.axes:
        if not rectilinear(ax) or not ax.boxes:
            continue
        half = half_width(_positions(ax))
        for box in ax.boxes:
            values = _sample_values(figure, box)
            if values is None or values.size < knobs["min_n"] or np.unique(values).size < knobs["min_unique"]:
                continue
            vertical = box.orientation != "horizontal"
            if _has_violin(ax, box, half):
                continue
            if shown(ax, values, values.size, box.position, half, vertical, finite(box.fliers)) \
                    >= knobs["shown_share"] * values.size:
                continue
            test = dip_test(values)
            if test.pvalue >= knobs["alpha"]:
                continue
            p = "p ≤ 0.001" if test.pvalue <= 0.001 else f"p = {test.pvalue:.3f}"  # the table's floor
            yield Hit(message=f"the values behind the box at {where(vertical, box.position, ax)} are multimodal: "
                              f"Hartigan's dip {test.dip:.3f}, {p}, n = {test.n}",
                      source=box.source, axes=ax.index,
                      confidence="likely" if test.pvalue < knobs["strong_alpha"] else "possible",
                      key=f"box:{fmt(box.position)}")


# --------------------------------------------------------------------------
# errorbars-ambiguous
# --------------------------------------------------------------------------

# Families of what an error bar can show; a bar's type is the set of families whose half-lengths match.
_SD, _SEM, _CI, _PI, _BOOT = "SD", "SEM", "95% CI", "percentile interval", "bootstrap CI"
_PERCENTILE_WIDTHS = (50.0, 80.0, 90.0, 95.0, 99.0, 100.0)
# 68% is left out: a 68% bootstrap CI is about ±1 SEM and would be mistaken for inexact SEM bars.
_BOOT_LEVELS = (95.0, 90.0, 99.0)


def _close(drawn: float, want: float, rtol: float) -> bool:
    return abs(drawn - want) <= rtol * abs(want) + 1e-12 * max(abs(want), 1e-300)


def _identify(values: np.ndarray, center: float, below: float, above: float, rtol: float,
              boot_rtol: float) -> tuple[str, ...]:
    """What the half-lengths below/above the centre are, for this group; () when nothing matches."""
    n = values.size
    sd1 = float(np.std(values, ddof=1))
    sd0 = float(np.std(values, ddof=0))
    if sd0 == 0:
        return ()
    sem = sd1 / math.sqrt(n)
    from scipy.special import stdtrit  # imported here: scipy.stats alone costs half a second at start-up

    t = float(stdtrit(n - 1, 0.975))
    symmetric = {
        f"{_SD} (ddof 1)": sd1,
        f"{_SD} (ddof 0)": sd0,
        f"{_SEM}": sem,
        f"{_SEM} (ddof 0)": sd0 / math.sqrt(n),
        f"{_CI} (t)": t * sem,
        f"{_CI} (1.96 SEM)": 1.96 * sem,
        # seaborn's errorbar=("sd", 2) and ("se", 2): a scale on the SD or SEM
        f"2 {_SD} (ddof 1)": 2.0 * sd1,
        f"2 {_SEM}": 2.0 * sem,
    }
    found = [name for name, h in symmetric.items() if _close(below, h, rtol) and _close(above, h, rtol)]
    for w in _PERCENTILE_WIDTHS:
        lo, hi = np.percentile(values, [(100 - w) / 2, 100 - (100 - w) / 2])
        scale = max(hi - center, center - lo, 1e-300)
        if abs(below - (center - lo)) <= rtol * scale and abs(above - (hi - center)) <= rtol * scale:
            found.append(f"{w:g}% {_PI}")
    if found:
        return tuple(found)
    # The percentile bootstrap CI of the mean, without resampling: the bootstrap distribution of the mean
    # has mean x̄, standard deviation sd0/sqrt(n) and skewness m3/(sd0^3 sqrt(n)) exactly, so its quantiles
    # follow from the Cornish-Fisher expansion.  A resampled CI scatters around these by Monte Carlo error,
    # hence the looser tolerance.
    from scipy.special import ndtri

    m3 = float(np.mean((values - values.mean()) ** 3))
    gamma = m3 / (sd0**3 * math.sqrt(n))
    scale = sd0 / math.sqrt(n)
    mean = float(values.mean())
    for level in _BOOT_LEVELS:
        z = float(ndtri(0.5 + level / 200))
        q_hi = mean + scale * (z + gamma * (z * z - 1) / 6)
        q_lo = mean + scale * (-z + gamma * (z * z - 1) / 6)
        if _close(below, center - q_lo, boot_rtol) and _close(above, q_hi - center, boot_rtol):
            return (f"{level:g}% {_BOOT}",)
    return ()


def _describe(kind: str) -> str:
    """How a bar type reads in a message: '±1 SEM', 'a 95% CI (t)', 'the 90% percentile interval'."""
    if " or " in kind:
        return f"either {kind}"
    if kind.startswith((_SD, _SEM)):
        return f"±1 {kind}"
    if kind.startswith((f"2 {_SD}", f"2 {_SEM}")):
        return f"±{kind}"
    if _BOOT in kind:
        return f"a {kind} of the mean (to within resampling error)"
    if kind.startswith(_CI):
        return f"a {kind}"
    return f"the {kind}"


def _family(labels: tuple[str, ...]) -> str:
    """A readable type: one family (with its variant when only one variant matches), or the ambiguity."""
    families = sorted({lab.split(" (")[0] if "percentile" not in lab else lab for lab in labels})
    if len(families) == 1 and len(labels) == 1:
        return labels[0]
    return " or ".join(families)


@rule(
    "errorbars-ambiguous",
    former_ids=("errorbars-sem",),  # renamed in 0.x: the rule reports SD, CI and percentile bars too
    severity="note",
    confidence="certain",
    why="""
        Error bars can show the spread of the data (SD, a percentile interval) or the uncertainty of a mean
        (SEM, a confidence interval), and readers cannot tell which unless told. SEM bars are the shortest
        of these (SD divided by the square root of n), so they make small groups look precise and
        differences look clear; with few observations and no points shown, the reader cannot recover the
        spread. figproof works out what the bars show from the data behind them and reports it, so the
        caption can say it.
    """,
    fix="""
        Say in the legend or caption what the bars show and give n. Prefer showing the observations
        themselves; for inference, draw a 95% confidence interval rather than ±1 SEM. If SEM bars stay,
        draw the points too when n is small.
    """,
    sources=(
        "Cumming G., Fidler F., Vaux D.L. (2007) Error bars in experimental biology. Journal of Cell Biology "
        "177(1): 7-11 (rule 1: say what the error bars are; rule 2: give n; rule 4: for n = 3, plot the "
        "points; rules 5-6: SE bars stand in for a 95% CI only from n = 10 on).",
        "Krzywinski M., Altman N. (2013) Error bars. Nature Methods 10: 921-922 (be clear which measure of "
        "uncertainty an error bar shows: s.d., s.e.m. or CI).",
        "SEM bars for n < 10 without the points drawn: the n = 10 of Cumming et al. (2007), rules 5-6.",
    ),
    knobs=(
        Knob(name="rtol", default=0.005, help="Relative tolerance when matching half-lengths to a statistic.",
             minimum=0),
        Knob(name="bootstrap_rtol", default=0.1,
             help="Relative tolerance for a resampled bootstrap interval (it carries Monte Carlo error).",
             minimum=0),
        Knob(name="small_n", default=10, help="SEM bars of groups smaller than this, without points, warn.",
             minimum=1),
        Knob(name="shown_share", default=0.8,
             help="Share of a group's observations drawn as points that counts as showing the data.",
             minimum=0, maximum=1),
    ),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        import pandas as pd

        rng = np.random.default_rng(5)
        pd.DataFrame({dose: rng.normal(mean, 2.0, 6).round(2)
                      for dose, mean in [("control", 10.0), ("low dose", 12.0), ("high dose", 15.0)]}
                     ).to_csv("wells.csv", index=False)
        wells = pd.read_csv("wells.csv")  # six wells per dose
        fig, ax = plt.subplots()
        ax.errorbar(range(3), wells.mean(), yerr=wells.sem(), fmt="o", capsize=4)
        ax.set_xticks(range(3), wells.columns)
        ax.set_ylabel("signal (a.u.)")
        fig.savefig("wells.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np
        import pandas as pd

        rng = np.random.default_rng(5)
        pd.DataFrame({dose: rng.normal(mean, 2.0, 6).round(2)
                      for dose, mean in [("control", 10.0), ("low dose", 12.0), ("high dose", 15.0)]}
                     ).to_csv("wells.csv", index=False)
        wells = pd.read_csv("wells.csv")  # six wells per dose
        fig, ax = plt.subplots()
        for i, dose in enumerate(wells.columns):
            ax.scatter(i + rng.uniform(-0.1, 0.1, len(wells)), wells[dose], alpha=0.8)
            ax.hlines(wells[dose].median(), i - 0.25, i + 0.25, color="black")
        ax.set_xticks(range(3), wells.columns)
        ax.set_ylabel("signal (a.u.)")
        fig.savefig("wells.png")
    """,
)
def errorbars_ambiguous(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """What the error bars show (SD, SEM, CI or percentile interval), and SEM bars on small groups without points."""
    rtol, boot_rtol = float(knobs["rtol"]), float(knobs["bootstrap_rtol"])
    small, share = int(knobs["small_n"]), float(knobs["shown_share"])
    for ax in figure.axes:
        if not rectilinear(ax) or not ax.errorbars:
            continue
        recorded = recorded_groups(figure, ax.index)
        half = half_width(_positions(ax))
        found = [h for k, eb in enumerate(ax.errorbars)
                 for h in _errorbar_hits(ax, k, eb, recorded, half, rtol, boot_rtol, small, share)]
        if len(found) == 1:
            yield found[0]
        elif found:
            # one finding per axes: the error-bar sets of one plot are one caption to write
            found.sort(key=lambda h: 0 if h.severity == "warning" else 1)
            head = found[0]
            yield Hit(message=f"{head.message}; and {len(found) - 1} more error-bar set"
                              f"{'s' * (len(found) > 2)} in this axes",
                      source=head.source, axes=ax.index, severity=head.severity, confidence=head.confidence,
                      key="errorbars:axes", details=tuple(Detail(message=h.message, source=h.source, axes=ax.index)
                                                          for h in found))


def _errorbar_hits(ax: Axes, k: int, eb: ErrorBars, recorded: list[Group], half: float, rtol: float, boot_rtol: float,
                   small: int, share: float) -> Iterator[Hit]:
    """One finding per error-bar set: the type of each bar whose raw group is known, and SEM on small n."""
    vertical = eb.orientation != "horizontal"
    kinds: list[str] = []
    sizes: list[int] = []
    unmatched = 0
    ambiguous_group = 0
    sem_hidden: list[int] = []
    approximate = False
    m = min(eb.positions.size, eb.centers.size, eb.lower.size, eb.upper.size)
    for i in range(m):
        p, c = float(eb.positions[i]), float(eb.centers[i])
        below, above = c - float(eb.lower[i]), float(eb.upper[i]) - c
        if not all(math.isfinite(v) for v in (p, c, below, above)) or (below <= 0 and above <= 0):
            continue
        near = drawn_near(ax, p, half, vertical)
        candidates = recorded + ([Group(near, "points", "points")] if near.size >= 2 else [])
        groups = [g for g in groups_centred(candidates, c, "mean") + groups_centred(candidates, c, "median")
                  if np.ptp(g.values) > 0]  # a group without spread cannot be behind a bar with length
        if not groups:
            continue  # no raw data behind this bar: nothing can be said about it
        answers = {(g.values.size, _identify(g.values, c, below, above, rtol, boot_rtol)) for g in groups}
        answers = {a for a in answers if a[1]} or answers
        if len(answers) != 1:
            ambiguous_group += 1
            continue
        n, labels = answers.pop()
        if not labels:
            unmatched += 1
            continue
        kind = _family(labels)
        approximate |= _BOOT in kind
        kinds.append(kind)
        sizes.append(n)
        if kind.startswith(_SEM) and n < small:
            values = next(g.values for g in groups if g.values.size == n)
            if matched(values, near) < share * n:
                sem_hidden.append(n)
    total = len(kinds) + unmatched + ambiguous_group
    if not kinds:
        return  # nothing known about any bar: a note saying so would tell the reader nothing
    parts: list[str] = []
    for kind in dict.fromkeys(kinds):
        ns = [s for s, kk in zip(sizes, kinds, strict=True) if kk == kind]
        if total == 1:
            parts.append(f"the one shows {_describe(kind)} (n = {ns[0]})")
            continue
        share_text = f"all {total}" if len(ns) == total else pct(len(ns), total)
        parts.append(f"{share_text} show {_describe(kind)} (n = {', '.join(map(str, ns))})")
    if unmatched:
        parts.append(f"{unmatched} match none of SD, SEM, 95% CI, a percentile interval or a bootstrap CI "
                     f"of their data")
    if ambiguous_group:
        parts.append(f"{ambiguous_group} centre on more than one recorded group with different answers")
    message = "error bars: " + "; ".join(parts)
    severity: Severity | None = None
    if sem_hidden:
        severity = "warning"
        message += (f"; {len(sem_hidden)} SEM bar{'s' if len(sem_hidden) > 1 else ''} on n < {small} "
                    f"without the points drawn")
    confidence: Confidence = "likely" if approximate or unmatched or ambiguous_group else "certain"
    yield Hit(message=message, source=eb.source, axes=ax.index, severity=severity, confidence=confidence,
              key=f"errorbars:{k}")


RULES = (dots_binned, summary_hides_small_n, box_hides_modes, errorbars_ambiguous)

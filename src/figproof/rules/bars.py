"""Bar charts that summarise continuous measurements."""

from __future__ import annotations

import re
from collections.abc import Iterator

import numpy as np

from figproof.model.findings import Confidence, Hit, Severity
from figproof.model.records import Axes, BarSet, FigureModel, LoadedTable
from figproof.rules.base import Knob, Knobs, rule

# value-axis labels that say the bars are counts or shares (common practice: bars suit counts and proportions)
COUNT_LABEL = re.compile(
    r"\b(count|counts|number|no\.|n\b|frequency|freq|percent|percentage|proportion|fraction|share|"
    r"occurrences|cases|individuals|events|%)", re.IGNORECASE)


def _is_whole(values: np.ndarray, atol: float = 1e-9) -> bool:
    finite = values[np.isfinite(values)]
    return bool(finite.size) and bool(np.all(np.abs(finite - np.round(finite)) <= atol))


def _looks_like_histogram(bars: BarSet) -> bool:
    """Adjacent equal-width bins with no gaps (a histogram drawn with ax.bar or pandas)."""
    if bars.positions.size < 3:
        return False
    order = np.argsort(bars.positions)
    pos, width = bars.positions[order], bars.widths[order]
    if not np.allclose(width, width[0], rtol=1e-6):
        return False
    return bool(np.allclose(np.diff(pos), width[0], rtol=1e-6))


def _stacks_to_whole(ax: Axes) -> bool:
    """Stacked bars whose stacks sum to 1 or 100 at every position (shares)."""
    stacked = [b for b in ax.bars if b.origin != "hist"]
    if len(stacked) < 2 or not any(np.any(b.bottoms != 0) for b in stacked):
        return False
    tops: dict[float, float] = {}
    for b in stacked:
        for p, bottom, h in zip(b.positions, b.bottoms, b.heights, strict=False):
            key = round(float(p), 9)
            tops[key] = max(tops.get(key, 0.0), float(bottom + h))
    totals = np.array(list(tops.values()))
    return bool(np.allclose(totals, 1.0, atol=1e-6) or np.allclose(totals, 100.0, atol=1e-4))


def _value_label(ax: Axes, bars: BarSet) -> str:
    return ax.y.label if bars.orientation == "vertical" else ax.x.label


def _errorbars_on_tops(ax: Axes, bars: BarSet) -> int:
    """How many bars carry an error bar centred on their top."""
    tops = bars.bottoms + bars.heights
    hits = 0
    for eb in ax.errorbars:
        if eb.orientation != bars.orientation or eb.positions.size == 0:
            continue
        for p, top in zip(bars.positions, tops, strict=False):
            near = np.isclose(eb.positions, p, atol=1e-6 + 0.05 * float(np.nanmax(bars.widths)))
            if np.any(near & np.isclose(eb.centers, top, rtol=1e-6, atol=1e-9)):
                hits += 1
    return hits


def _group_means(table: LoadedTable, heights: np.ndarray, rtol: float) -> str | None:
    """Name the column whose group means equal the bar heights, e.g. ``'value' by 'group'``."""
    groupers = dict(table.groups)
    for name, col in table.columns.items():
        finite = col[np.isfinite(col)]
        if 1 < np.unique(finite).size <= 20 and _is_whole(finite):
            groupers.setdefault(name, col)
    want = heights[np.isfinite(heights)]
    if want.size < 2:
        return None
    for vname, values in table.columns.items():
        if _is_whole(values):
            continue
        for gname, codes in groupers.items():
            if gname == vname or codes.size != values.size:
                continue
            means = []
            for code in np.unique(codes[np.isfinite(codes.astype(float))]):
                if code < 0:
                    continue
                sel = values[(codes == code) & np.isfinite(values)]
                if sel.size:
                    means.append(sel.mean())
            if len(means) < want.size:
                continue
            means_arr = np.asarray(means)
            if all(np.any(np.isclose(means_arr, h, rtol=rtol, atol=1e-12)) for h in want):
                return f"'{vname}' by '{gname}' in {table.path}"
    return None


def _sample_means(figure: FigureModel, heights: np.ndarray, rtol: float) -> str | None:
    """Name the recorded groups (e.g. the ones seaborn aggregated) whose means equal the bar heights."""
    sizes = []
    for h in heights:
        match = [s for s in figure.samples if s.values.size > 1 and not _is_whole(s.values)
                 and np.isclose(np.nanmean(s.values), h, rtol=rtol, atol=1e-12)]
        if not match:
            return None
        sizes.append(int(np.isfinite(match[0].values).sum()))
    return "the values the plotting call aggregated (n = " + ", ".join(map(str, sizes)) + ")"


@rule(
    "bars-for-continuous",
    severity="error",
    confidence="likely",
    knobs=(
        Knob(name="mean_rtol", default=1e-6, minimum=0.0, maximum=0.1,
             help="relative tolerance when matching bar heights to group means of loaded data"),
    ),
    why="""
        A bar shows one number per group. For continuous measurements (weights, concentrations, times) it hides
        how many observations there were, how they spread, whether there are outliers or clusters, and it
        invites the reader to compare the bar areas, which mean nothing for a mean. Very different data sets
        (a tight cluster, two clusters, one outlier) give the same bar and error bar.
        Bars are the right mark for counts and proportions, where the bar's length from zero is the value.
    """,
    fix="""
        Show the observations: a dot or strip plot (jittered or beeswarm) with the mean or median marked, a
        box plot with the points overlaid for larger groups, or a violin plot with points. Keep bars for
        counts, totals and proportions.
    """,
    sources=(
        "Weissgerber T.L., Milic N.M., Winham S.J., Garovic V.D. (2015) Beyond bar and line graphs: time for a "
        "new data presentation paradigm. PLOS Biology 13(4): e1002128, doi:10.1371/journal.pbio.1002128 (many "
        "different distributions give the same bar graph; show the observations in small-sample studies).",
        "Common practice: bars suit counts and proportions; continuous data are shown as points.",
    ),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        rng = np.random.default_rng(1)
        groups = {"control": rng.normal(4.2, 0.8, 12), "treated": rng.normal(5.1, 1.1, 12)}
        means = [v.mean() for v in groups.values()]
        sems = [v.std(ddof=1) / np.sqrt(v.size) for v in groups.values()]
        fig, ax = plt.subplots()
        ax.bar(list(groups), means, yerr=sems, capsize=4)
        ax.set_ylabel("leaf area (cm²)")
        fig.savefig("leaf_area.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np
        rng = np.random.default_rng(1)
        groups = {"control": rng.normal(4.2, 0.8, 12), "treated": rng.normal(5.1, 1.1, 12)}
        fig, ax = plt.subplots()
        for i, values in enumerate(groups.values()):
            ax.scatter(i + rng.uniform(-0.15, 0.15, values.size), values, s=20)
            ax.hlines(np.median(values), i - 0.25, i + 0.25, color="black")
        ax.set_xticks(range(len(groups)), list(groups))
        ax.set_ylabel("leaf area (cm²)")
        fig.savefig("leaf_area.png")
    """,
)
def bars_for_continuous(figure: FigureModel, knobs: Knobs) -> Iterator[Hit]:
    """Bar marks that summarise continuous measurements."""
    for ax in figure.axes:
        if ax.projection != "rectilinear" or ax.is_colorbar or _stacks_to_whole(ax):
            continue
        # one finding per axes: grouped bars (one set per hue level) are one chart to the reader
        summaries = [b for b in ax.bars if _may_summarise(ax, b)]
        if summaries and not _one_value_each(figure, summaries):
            yield _judge(figure, ax, summaries, knobs)


def _one_value_each(figure: FigureModel, sets: list[BarSet]) -> bool:
    """seaborn bars whose every group held a single value: each bar is that value, not a summary of several."""
    if not all(b.origin == "seaborn" for b in sets):
        return False
    singles = np.array([float(s.values[0]) for s in figure.samples
                        if s.origin == "seaborn-estimate" and s.values.size == 1 and np.isfinite(s.values[0])])
    if singles.size == 0:
        return False
    heights = np.concatenate([b.heights[np.isfinite(b.heights)] for b in sets])
    return bool(all(np.isclose(singles, h, rtol=1e-9, atol=1e-12).any() for h in heights))


def _may_summarise(ax: Axes, bars: BarSet) -> bool:
    """Bars that are neither a histogram nor counts or shares by their values or their axis label."""
    heights = bars.heights[np.isfinite(bars.heights)]
    if heights.size == 0 or bars.origin == "hist" or _looks_like_histogram(bars) or _is_whole(heights):
        return False
    label = _value_label(ax, bars)
    return not (label and COUNT_LABEL.search(label))


def _judge(figure: FigureModel, ax: Axes, sets: list[BarSet], knobs: Knobs) -> Hit:
    heights = np.concatenate([b.heights[np.isfinite(b.heights)] for b in sets])
    evidence: list[str] = []
    confidence: Confidence = "possible"
    severity: Severity | None = "note"
    rtol = float(knobs["mean_rtol"])
    matched = next((m for m in (_group_means(t, heights, rtol) for t in figure.tables) if m), None)
    matched = matched or _sample_means(figure, heights, rtol)
    if matched:
        evidence.append(f"their heights equal the group means of {matched}")
        confidence, severity = "certain", None
    with_err = sum(_errorbars_on_tops(ax, b) for b in sets)
    if with_err:
        evidence.append(f"{with_err} carry error bars centred on their tops")
        if confidence != "certain":
            confidence, severity = "likely", None
    if any(b.origin == "seaborn" for b in sets):
        evidence.append("seaborn's barplot draws an estimate (the mean by default) of each group")
        if confidence != "certain":
            confidence, severity = "likely", None
    if not evidence:
        evidence.append("the heights are not whole numbers")
    n = heights.size
    noun = "bar" if n == 1 else "bars"
    if len(sets) > 1:
        noun += f" in {len(sets)} groups"
    where = f"axes {ax.index + 1}" + (f" ('{ax.title}')" if ax.title else "")
    message = f"{where}: {n} {noun} look like a summary of continuous measurements: " + "; ".join(evidence)
    if severity == "note":
        message += " (one value per category may be a single measurement; then accept this finding)"
    return Hit(message=message, source=sets[0].source, axes=ax.index, confidence=confidence, severity=severity,
               key="bars")


RULES = (bars_for_continuous,)

"""The honest redraw: a summary (bars of means, boxes of small or multimodal groups) drawn again as its values.

Where the model carries the values behind a summary — the raw values a box
plot's statistics were computed from, or the loaded table column whose group
means are the bar heights — every value is drawn as a point (jittered
sideways with a fixed seed, so the picture is the same on every run) beside
the mean with its 95 % confidence interval (t distribution), or for a box
plot the median with the interquartile range.  The same drawing is given as
matplotlib code: reading the script's own table from the repo when the
table can be read back exactly as the script read it, otherwise with the
captured values written out.  The code is complete and runs from the repo
root as it is.

The picture is drawn with matplotlib's object interface (no pyplot in this
process); a test runs every generated snippet and compares what it draws
with the picture's points.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from figproof.model.findings import Finding
from figproof.model.records import Axes, FigureModel, LoadedTable
from figproof.report import html

REDRAW_RULES = ("bars-for-continuous", "summary-hides-small-n", "box-hides-modes", "errorbars-ambiguous")
SMALL_N = 10  # error bars on groups smaller than this are redrawn (common practice: show every point at small n)
MAX_LITERAL_VALUES = 4000  # more captured values than this are not written out in code
JITTER = 0.18
SEED = 0
_POINT_COLOUR = "#3b3b3b"
_CENTRE_COLOUR = "#b2182b"
_READERS = {"pandas.read_csv": "read_csv", "pandas.read_table": "read_table"}


@dataclass(frozen=True, slots=True, kw_only=True)
class TableSource:
    """Where the groups come from in a table the script loaded: ``value`` per level of ``group``."""

    path: str
    reader: str  # pandas function name
    value: str
    group: str
    levels: tuple[object, ...]  # in the figure's order


@dataclass(frozen=True, slots=True, kw_only=True)
class Groups:
    """The values behind one axes' summary, in the order the figure draws the groups."""

    values: tuple[np.ndarray, ...]
    labels: tuple[str, ...]
    statistic: str  # "mean" | "median"
    value_label: str
    group_label: str
    table: TableSource | None = None

    @property
    def interval(self) -> str:
        return ("median with the interquartile range" if self.statistic == "median"
                else "mean with its 95 % confidence interval (t distribution)")


# --------------------------------------------------------------------------
# finding the values
# --------------------------------------------------------------------------


def _tick_label(ax: Axes, position: float, vertical: bool) -> str:
    ticks = (ax.x if vertical else ax.y).ticks
    for pos, label in ticks:
        if abs(pos - position) < 1e-9 * max(1.0, abs(position)) and label:
            return label
    return f"{position:g}"


def _from_boxes(figure: FigureModel, ax: Axes) -> Groups | None:
    items = sorted([b for b in list(ax.boxes) + list(ax.violins) if b.sample is not None], key=lambda b: b.position)
    index = [int(b.sample) for b in items if b.sample is not None]
    if not items or any(i >= len(figure.samples) for i in index):
        return None
    values = tuple(np.asarray(figure.samples[i].values, dtype=np.float64) for i in index)
    values = tuple(v[np.isfinite(v)] for v in values)
    if any(v.size == 0 for v in values):
        return None
    vertical = items[0].orientation == "vertical"
    return Groups(values=values, labels=tuple(_tick_label(ax, b.position, vertical) for b in items),
                  statistic="median", value_label=(ax.y if vertical else ax.x).label,
                  group_label=(ax.x if vertical else ax.y).label)


def _groupers(table: LoadedTable) -> dict[str, np.ndarray]:
    out = {name: np.asarray(codes) for name, codes in table.groups.items()}
    for name, col in table.columns.items():
        ok = col[np.isfinite(col)]
        # integer columns with few levels group rows as text columns do (common practice: coded groups)
        if ok.size and 1 < np.unique(ok).size <= 50 and np.all(ok == np.round(ok)):
            out.setdefault(name, np.asarray(col))
    return out


def _match_table(table: LoadedTable, centres: np.ndarray) -> tuple[str, str, list[float], list[np.ndarray]] | None:
    """A value column and a grouping whose group means equal ``centres`` one to one, in their order."""
    for vname, values in table.columns.items():
        values = np.asarray(values, float)
        if values.size == 0 or np.all(values[np.isfinite(values)] == np.round(values[np.isfinite(values)])):
            continue
        for gname, codes in _groupers(table).items():
            if gname == vname or codes.size != values.size:
                continue
            codes_f = codes.astype(float)
            levels = [lv for lv in np.unique(codes_f[np.isfinite(codes_f)]) if not (lv < 0 and gname in table.groups)]
            means = {}
            for lv in levels:
                sel = values[(codes_f == lv) & np.isfinite(values)]
                if sel.size:
                    means[float(lv)] = sel
            chosen: list[float] = []
            for c in centres:
                hits = [lv for lv, v in means.items() if math.isclose(v.mean(), c, rel_tol=1e-6, abs_tol=1e-12)]
                if len(hits) != 1 or hits[0] in chosen:
                    break
                chosen.append(hits[0])
            else:
                return vname, gname, chosen, [means[lv] for lv in chosen]
    return None


def _read_back(root: Path, table: LoadedTable, vname: str, gname: str, codes: list[float],
               expected: list[np.ndarray]) -> TableSource | None:
    """Read the table as the generated code will; keep it only when it gives exactly the captured groups."""
    reader = _READERS.get(table.reader)
    if reader is None or table.truncated:
        return None
    try:
        import pandas as pd

        frame = getattr(pd, reader)(root / table.path)
        column = frame[gname]
        values = pd.to_numeric(frame[vname], errors="raise")
    except Exception:  # noqa: BLE001 - any failure to read it back means: write the values out instead
        return None
    if gname in table.groups:
        factor_codes, uniques = pd.factorize(column)  # as the child coded text columns
        levels: list[object] = [uniques[int(c)] for c in codes]
        level_values = [values[factor_codes == int(c)].dropna().to_numpy(float) for c in codes]
        levels = [lv.item() if hasattr(lv, "item") else lv for lv in levels]
    else:
        levels = [int(c) if float(c).is_integer() else float(c) for c in codes]
        level_values = [values[column == lv].dropna().to_numpy(float) for lv in levels]
    if not all(isinstance(lv, (str, int, float)) for lv in levels):
        return None
    if len(level_values) != len(expected) or not all(
            a.shape == b.shape and np.array_equal(a, b) for a, b in zip(level_values, expected, strict=True)):
        return None
    return TableSource(path=table.path, reader=reader, value=vname, group=gname, levels=tuple(levels))


def _from_centres(figure: FigureModel, ax: Axes, root: Path | None) -> Groups | None:
    """Bars (or points with error bars) whose heights are group means of a loaded table or of recorded samples."""
    vertical = True
    if ax.bars:
        bars = ax.bars[0]
        vertical = bars.orientation == "vertical"
        positions = np.concatenate([np.asarray(b.positions, float) for b in ax.bars])
        centres = np.concatenate([np.asarray(b.bottoms, float) + np.asarray(b.heights, float) for b in ax.bars])
    elif ax.errorbars:
        eb = ax.errorbars[0]
        vertical = eb.orientation == "vertical"
        positions, centres = np.asarray(eb.positions, float), np.asarray(eb.centers, float)
    else:
        return None
    order = np.argsort(positions, kind="stable")
    positions, centres = positions[order], centres[order]
    if centres.size < 1 or not np.all(np.isfinite(centres)):
        return None
    labels = tuple(_tick_label(ax, p, vertical) for p in positions)
    value_label, group_label = (ax.y if vertical else ax.x).label, (ax.x if vertical else ax.y).label
    for table in figure.tables:
        found = _match_table(table, centres)
        if found is None:
            continue
        vname, gname, codes, values = found
        source = _read_back(root, table, vname, gname, codes, values) if root is not None else None
        return Groups(values=tuple(values), labels=labels, statistic="mean", value_label=value_label or vname,
                      group_label=group_label or gname, table=source)
    samples = []
    for c in centres:
        match = [s for s in figure.samples if s.values.size > 1
                 and math.isclose(float(np.nanmean(s.values)), c, rel_tol=1e-6, abs_tol=1e-12)]
        if not match:
            return None
        v = np.asarray(match[0].values, float)
        samples.append(v[np.isfinite(v)])
    return Groups(values=tuple(samples), labels=labels, statistic="mean", value_label=value_label,
                  group_label=group_label)


def groups_behind(figure: FigureModel, finding: Finding, root: Path | None = None) -> Groups | None:
    """The values behind the summary ``finding`` is about, or None when the model does not carry them."""
    if finding.rule not in REDRAW_RULES:
        return None
    ax = next((a for a in figure.axes if a.index == finding.axes), None)
    if ax is None:
        return None
    groups = _from_boxes(figure, ax) or _from_centres(figure, ax, root)
    if groups is None:
        return None
    if finding.rule == "errorbars-ambiguous" and min(v.size for v in groups.values) >= SMALL_N:
        return None
    return groups


# --------------------------------------------------------------------------
# the drawing, once as a picture and once as code
# --------------------------------------------------------------------------


def centre_and_interval(values: np.ndarray, statistic: str) -> tuple[float, float, float]:
    """(centre, low, high): the mean with its 95 % t interval, or the median with the quartiles."""
    if statistic == "median":
        low, high = np.percentile(values, [25, 75])
        return float(np.median(values)), float(low), float(high)
    from scipy import stats

    mean = float(values.mean())
    if values.size < 2:
        return mean, mean, mean
    half = float(stats.t.ppf(0.975, values.size - 1) * values.std(ddof=1) / np.sqrt(values.size))
    return mean, mean - half, mean + half


def jittered(groups: Groups) -> list[np.ndarray]:
    """The sideways positions of every point, from the same seeded generator the code uses."""
    rng = np.random.default_rng(SEED)
    return [i + rng.uniform(-JITTER, JITTER, v.size) for i, v in enumerate(groups.values)]


def draw(groups: Groups, out_png: Path, *, dpi: float = 100.0) -> Path:
    """Draw the redraw as a PNG (matplotlib's object interface, Agg canvas)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=_figsize(groups), dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    for x, values in zip(jittered(groups), groups.values, strict=True):
        ax.scatter(x, values, s=16, color=_POINT_COLOUR, alpha=0.7, linewidths=0, zorder=2)
    for i, values in enumerate(groups.values):
        centre, low, high = centre_and_interval(values, groups.statistic)
        ax.errorbar(i + 0.32, centre, yerr=[[centre - low], [high - centre]], fmt="o", color=_CENTRE_COLOUR,
                    capsize=3, zorder=3)
    ax.set_xticks(range(len(groups.values)), list(groups.labels))
    ax.set_xlabel(groups.group_label)
    ax.set_ylabel(groups.value_label)
    ax.set_title(_title(groups), fontsize=9)
    fig.tight_layout()
    out_png.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(out_png, format="png", metadata={"Software": None})
    return out_png


def _figsize(groups: Groups) -> tuple[float, float]:
    return (max(3.6, 1.0 + 0.9 * len(groups.values)), 3.2)


def _title(groups: Groups) -> str:
    centre = "median and interquartile range" if groups.statistic == "median" else "mean and 95 % CI"
    return f"every value; {centre}"


def _literal(values: np.ndarray) -> str:
    return "np.array([" + ", ".join(repr(float(v)) for v in values) + "])"


def code(groups: Groups, figure_id: str) -> str:
    """Complete matplotlib code that draws the redraw; run it from the repo root."""
    lines = [f"# Every value behind the summary in {figure_id}, with the {groups.interval}.",
             "# Run from the repo root. The jitter uses a fixed seed, so every run draws the same picture.",
             "import matplotlib.pyplot as plt", "import numpy as np"]
    if groups.table is not None:
        lines.append("import pandas as pd")
    if groups.statistic == "mean":
        lines.append("from scipy import stats")
    lines.append("")
    t = groups.table
    if t is not None:
        lines += [f"table = pd.{t.reader}({t.path!r})",
                  f"levels = {list(t.levels)!r}  # the groups in the order the figure draws them"]
        lines.append(f"groups = [table.loc[table[{t.group!r}] == level, {t.value!r}].dropna().to_numpy(float) "
                     f"for level in levels]")
    else:
        lines.append("groups = [")
        lines += [f"    {_literal(v)}," for v in groups.values]
        lines.append("]")
    lines.append(f"labels = {list(groups.labels)!r}")
    lines += ["",
              f"rng = np.random.default_rng({SEED})",
              f"fig, ax = plt.subplots(figsize={_figsize(groups)!r})",
              "for i, values in enumerate(groups):",
              f"    ax.scatter(i + rng.uniform(-{JITTER}, {JITTER}, values.size), values, s=16, "
              f"color={_POINT_COLOUR!r}, alpha=0.7,",
              "               linewidths=0, zorder=2)",
              "for i, values in enumerate(groups):"]
    if groups.statistic == "median":
        lines += ["    centre = np.median(values)",
                  "    low, high = np.percentile(values, [25, 75])  # the interquartile range"]
    else:
        lines += ["    centre = values.mean()",
                  "    # 95 % confidence interval of the mean (t distribution)",
                  "    half = stats.t.ppf(0.975, values.size - 1) * values.std(ddof=1) / np.sqrt(values.size) "
                  "if values.size > 1 else 0.0",
                  "    low, high = centre - half, centre + half"]
    lines += [f"    ax.errorbar(i + 0.32, centre, yerr=[[centre - low], [high - centre]], fmt=\"o\", "
              f"color={_CENTRE_COLOUR!r}, capsize=3,",
              "                zorder=3)",
              "ax.set_xticks(range(len(groups)), labels)",
              f"ax.set_xlabel({groups.group_label!r})",
              f"ax.set_ylabel({groups.value_label!r})",
              f"ax.set_title({_title(groups)!r}, fontsize=9)",
              "fig.tight_layout()",
              "plt.show()", ""]
    return "\n".join(lines)


def redraws_for(figure: FigureModel, findings: Sequence[Finding], img: Path, root: Path | None) -> list[html.Redraw]:
    """One redraw per axes whose summary findings carry their values, attached to the first such finding."""
    out: list[html.Redraw] = []
    done: set[int | None] = set()
    for k, f in enumerate(findings):
        if f.accepted is not None or f.axes in done or f.figure != figure.id:
            continue
        groups = groups_behind(figure, f, root)
        if groups is None:
            continue
        if sum(v.size for v in groups.values) > MAX_LITERAL_VALUES and groups.table is None:
            continue
        done.add(f.axes)
        safe = "".join(c if c.isalnum() else "_" for c in figure.id)
        target = draw(groups, img / f"{safe}-axes{f.axes}-redraw.png")
        out.append(html.Redraw(finding=k, src=f"img/{target.name}", code=code(groups, figure.id),
                               interval=groups.interval))
    return out


__all__ = ["REDRAW_RULES", "Groups", "TableSource", "centre_and_interval", "code", "draw", "groups_behind",
           "jittered", "redraws_for"]

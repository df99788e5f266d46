"""Run rules about reproducibility: do the committed figures still come out of the scripts, and from which data.

These rules read what the pipeline put in :class:`~figproof.model.context.RunContext`
(file comparisons, the second runs of ``--twice``, the repo inventory) and the
file events the child recorded.  They compare nothing themselves and touch no
file: :mod:`figproof.compare.files` did the I/O before the rules run.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from pathlib import PurePosixPath

import numpy as np

from figproof.model.comparison import OutputComparison
from figproof.model.context import RunContext, files_read, is_figure_output, is_repo_path
from figproof.model.findings import Hit
from figproof.model.records import FigureModel, FileEvent, ScriptRun, Source
from figproof.rules._inputs import explained_probe, not_found
from figproof.rules.base import Knob, Knobs, pct, rule

_GOOD_PLOT = """
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots()
    ax.plot([1, 2, 3], [2.0, 1.5, 3.0], marker="o")
    ax.set_xlabel("day")
    ax.set_ylabel("growth (mm)")
    fig.savefig("growth.png")
"""


def _where(source: Source | None) -> str:
    return f" at {source}" if source is not None else ""


def _run_index(run: ScriptRun, context: RunContext) -> int:
    for i, other in enumerate(context.runs):
        if other.path == run.path:
            return i
    return len(context.runs)


def _writers(context: RunContext) -> dict[str, list[int]]:
    """Repo files written in this check → indices (execution order) of the runs that wrote them."""
    out: dict[str, list[int]] = {}
    for i, run in enumerate(context.runs):
        for ev in run.events:
            if ev.action in ("save", "write") and ev.inside_repo and is_repo_path(ev.path):
                out.setdefault(ev.path, []).append(i)
    return out


def _saves(run: ScriptRun) -> dict[str, list[FileEvent]]:
    """Repo-relative figure outputs of a run (save events, then figure outputs) in first-save order."""
    out: dict[str, list[FileEvent]] = {}
    for ev in run.events:
        if is_figure_output(ev):
            out.setdefault(ev.path, []).append(ev)
    for fig in run.figures:
        for path in fig.outputs:
            if is_repo_path(path) and path not in out:
                out[path] = [FileEvent(action="save", path=path, source=fig.source)]
    return out


def _saves_of(context: RunContext, script: str) -> dict[str, list[FileEvent]]:
    run = next((r for r in context.runs if r.path == script), None)
    return _saves(run) if run is not None else {}


def _rms_text(c: OutputComparison) -> str:
    if c.rms is None:
        return ""
    if c.differing_pixels is not None and c.total_pixels:
        return f"{pct(c.differing_pixels, c.total_pixels)} pixels differ, RMS {c.rms:.2f} of 255"
    return f"RMS {c.rms:.2f} of 255"


def _size_text(size: tuple[int, int] | None) -> str:
    return f"{size[0]}×{size[1]} px" if size else "an unknown size"


# --------------------------------------------------------------------------
# figure-drift
# --------------------------------------------------------------------------


def _drift_hit(c: OutputComparison, run: ScriptRun, source: Source | None, running: str) -> Hit | None:
    what = f"{c.path}" if c.cell is None else f"the stored image {c.output or 0} of cell {c.cell}"
    made_with = c.committed_version
    now = running or c.regenerated_version or ""
    env = bool(made_with and now and made_with != now)
    env_text = (f"; the committed file was made with matplotlib {made_with} and this run used {now}, "
                f"so the environment differs and the figure may not be stale") if env else ""
    key = f"{c.path}#{c.cell}.{c.output}" if c.cell is not None else c.path
    if c.status == "drift":
        detail = _rms_text(c) or "its content differs after dropping dates and producer fields"
        if env and c.kind == "vector":
            # another matplotlib writes the same figure as other PDF/SVG bytes: no telling a changed figure
            # from a changed writer without rasterising both
            return Hit(message=f"{what} was written by matplotlib {made_with} and this run used {now}, which writes "
                               f"vector files differently, so figproof cannot tell whether the figure changed; "
                               f"regenerate it to compare",
                       source=source, severity="note", confidence="possible", key=f"{key}:environment")
        if env:
            return Hit(message=f"{what} differs from what {run.path} draws now ({detail}){env_text}",
                       source=source, severity="warning", confidence="possible", key=f"{key}:environment")
        return Hit(message=f"{what} is stale: {run.path} now draws it differently ({detail})",
                   source=source, key=f"{key}:stale")
    if c.status == "rendering":
        cause = f" (the committed file was made with matplotlib {made_with}, this run used {now})" if env else ""
        return Hit(message=f"{what} differs from what {run.path} draws now only in how text and edges are "
                           f"rasterised (anti-aliasing, hinting, sub-pixel placement){cause}: every mark, text and "
                           f"axis is where it was, so the figure is not stale ({c.differing_pixels} of "
                           f"{c.total_pixels} pixels differ by small shifts)",
                   source=source, severity="note", confidence="likely", key=f"{key}:rendering")
    if c.status == "size-mismatch":
        sizes = f"is {_size_text(c.committed_size)} but {run.path} now draws it at {_size_text(c.regenerated_size)}"
        if env:
            return Hit(message=f"{what} {sizes}{env_text}", source=source, severity="warning",
                       confidence="possible", key=f"{key}:size-environment")
        return Hit(message=f"{what} {sizes}", source=source, key=f"{key}:size")
    if c.status == "unreadable-committed":
        return Hit(message=f"the committed {what} cannot be read as an image or document ({c.message}), "
                           f"so it cannot be compared with what {run.path} draws",
                   source=source, severity="warning", confidence="certain", key=f"{key}:unreadable")
    if c.status == "unreadable-regenerated":
        return Hit(message=f"{run.path} wrote {what}, but the file it wrote cannot be read ({c.message})",
                   source=source, confidence="certain", key=f"{key}:unreadable-regenerated")
    if c.status == "too-large":
        return Hit(message=f"{what} was compared by bytes only and they differ ({c.message})",
                   source=source, severity="warning", confidence="possible", key=f"{key}:too-large")
    # same, missing-committed (a new output nobody committed), missing-regenerated: nothing to say here
    return None


@rule(
    "figure-drift",
    severity="error",
    confidence="likely",
    scope="run",
    knobs=(Knob(name="tolerance", default=0.0, minimum=0.0, maximum=255.0,
                help="largest RMS pixel difference (0–255 scale) still accepted as the same raster figure"),),
    why="""
        A committed figure that its script no longer draws means the paper shows something the code and data
        in the repo do not produce: the figure is stale, or the data or code changed after it was made.
        Rasters are compared pixel by pixel (exact first, then the RMS difference on the 0–255 scale);
        vector files byte for byte after dropping dates, producer strings and generated ids. Text rendering
        changes between matplotlib and FreeType releases: when every changed pixel of a raster is explained
        by a shift of at most two pixels or an anti-aliasing change of the pixels around it, the content is
        the same and the finding is a note saying so; a changed title, bar, point or axis range still
        drifts. When the committed file records a different matplotlib version than the running one, the
        finding says so: "environment differs" is not "figure is stale". A committed file that two
        scripts write is one finding naming both (the last to run leaves its version); each script's own
        version is compared with the committed file.
    """,
    fix="""
        Open the diff image linked in the report. If the new drawing is right, regenerate and commit the
        figure; if not, find what changed in the data or the code since the figure was committed. If only the
        matplotlib version differs, pin the version the figures were made with, or regenerate them all.
        A small anti-aliasing difference can be accepted with `tolerance` (an RMS on the 0–255 scale).
    """,
    sources=(
        "matplotlib.testing.compare: RMS of the pixel difference, a colour value difference where 255 is the "
        "maximum; matplotlib's own image tests use it with a tolerance.",
        "matplotlib documentation: SOURCE_DATE_EPOCH and rcParams['svg.hashsalt'] make PDF, PS and SVG output "
        "reproducible.",
    ),
    # Examples: the test harness commits the good script's output first, then runs bad at the same path.
    bad="""
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.plot([1, 2, 3], [2.0, 1.5, 3.4], marker="o")  # the third value was corrected after committing
        ax.set_xlabel("day")
        ax.set_ylabel("growth (mm)")
        fig.savefig("growth.png")
    """,
    good=_GOOD_PLOT,
)
def figure_drift(run: ScriptRun, context: RunContext, knobs: Knobs) -> Iterator[Hit]:
    """A committed figure file differs from what its script draws now.

    The ``tolerance`` knob is applied where the images are compared (the comparison calls a
    difference within it "same"); the pipeline reads it with :func:`figproof.rules.knob_value`.
    """
    for path, saves in _saves(run).items():
        last = saves[-1].source
        if len(saves) > 1:
            lines = ", ".join(str(s.source.line) for s in saves if s.source is not None and s.source.line)
            at = f" (lines {lines})" if lines else ""
            yield Hit(message=f"{run.path} saves {path} {len(saves)} times{at}; only the last save is compared "
                              f"with the committed file",
                      source=last, severity="note", confidence="certain", key=f"{path}:saved-twice")
        writers = [w for w in context.written_by().get(path, ()) if path in _saves_of(context, w)]
        if len(writers) > 1 and writers[0] == run.path and path in context.comparisons:
            yield Hit(message=f"{path} is written by {len(writers)} scripts ({', '.join(writers)}); the last to run "
                              f"leaves its version, and each is compared with the committed file on its own",
                      source=last, severity="warning", confidence="certain", key=f"{path}:writers")
        c = context.other_writers.get(run.path, {}).get(path) or context.comparisons.get(path)
        if c is None:
            continue
        hit = _drift_hit(c, run, last, context.running_version)
        if hit is not None:
            yield hit
    for c in context.notebook_comparisons.get(run.path, ()):
        hit = _drift_hit(c, run, Source(path=run.path, cell=c.cell), context.running_version)
        if hit is not None:
            yield hit


# --------------------------------------------------------------------------
# input-missing
# --------------------------------------------------------------------------


@rule(
    "input-missing",
    severity="error",
    confidence="certain",
    scope="run",
    why="""
        A figure drawn from a file that is not in the repo cannot be regenerated by anyone else: the data were
        never committed, were renamed, or live only on the author's machine. When scripts depend on each
        other, a script that reads a file another script writes later in the run draws from a stale copy
        (or from nothing on a fresh checkout).
    """,
    fix="""
        Commit the file (or a script that downloads or derives it), or correct the path at the line named in
        the finding. For scripts that depend on each other, state the order in `[tool.figproof]` so the
        script that writes a file runs before the one that reads it.
    """,
    sources=("Common practice: a repo that accompanies a paper holds every input its figures are drawn from.",),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        growth = np.loadtxt("data/growth_2023.csv", delimiter=",")
        fig, ax = plt.subplots()
        ax.plot(growth[:, 0], growth[:, 1], marker="o")
        fig.savefig("growth.png")
    """,
    good=_GOOD_PLOT,
)
def input_missing(run: ScriptRun, context: RunContext, knobs: Knobs) -> Iterator[Hit]:
    """A script reads a file that is not in the repo, or one that a later script writes."""
    here = _run_index(run, context)
    writers = _writers(context)
    seen: set[tuple[str, str]] = set()
    for ev in run.events:
        if ev.action not in ("read", "missing", "probe") or not ev.inside_repo or not is_repo_path(ev.path):
            continue
        if ev.action == "probe" and not explained_probe(run, ev):
            continue
        later = [context.runs[i].path for i in writers.get(ev.path, ()) if i > here and i < len(context.runs)]
        later = [p for p in dict.fromkeys(later) if p != run.path]
        missing = not_found(run, ev)
        if not missing and not later:
            continue
        mark = (ev.path, str(ev.source))
        if mark in seen:
            continue
        seen.add(mark)
        read = _read_verb(ev)
        if missing and later:
            yield Hit(message=f"{ev.path} {read}{_where(ev.source)} before {later[0]}, which runs later, "
                              f"writes it, so it is not there yet",
                      source=ev.source, key=f"{ev.path}:order")
        elif missing:
            earlier = [context.runs[i].path for i in writers.get(ev.path, ()) if i < here]
            by = f" ({earlier[0]} writes it earlier in this run)" if earlier else ""
            found = "no file in the repo matches it" if ev.operation == "glob.glob" else "is not in the repo"
            yield Hit(message=f"{ev.path} {read}{_where(ev.source)} but {found}{by}",
                      source=ev.source, key=ev.path)
        else:
            yield Hit(message=f"{ev.path} is read{_where(ev.source)} before {later[0]}, which runs later, "
                              f"rewrites it, so {run.path} drew from the committed copy",
                      source=ev.source, severity="warning", confidence="likely", key=f"{ev.path}:order")


# --------------------------------------------------------------------------
# input-outside-repo
# --------------------------------------------------------------------------


def _is_url(path: str) -> bool:
    return "://" in path


def _read_verb(ev: FileEvent) -> str:
    """'is read', or for an existence check the failure is about, what the script did."""
    if ev.action != "probe":
        return "is read"
    return "is looked for" if ev.operation == "glob.glob" else "is checked for"


def _outside_message(run: ScriptRun, ev: FileEvent, where: str) -> str:
    """What a read outside the repo reached for: a URL, a symbolic link in the repo that leads out, a path in
    the home folder, any other path (shown as the script wrote it: a leading ~ is kept)."""
    read = _read_verb(ev)
    if _is_url(ev.path):
        return f"{ev.path} {read}{where} over the network"
    gone = " (it does not exist here)" if not_found(run, ev) else ""
    if ev.link:
        gone = " (where it leads does not exist here)" if gone else ""
        return (f"{ev.path}, {read.removeprefix('is ')}{where}, is a symbolic link in the repo that leads "
                f"outside it, to {ev.link}{gone}")
    kind = "the absolute path" if ev.path.startswith(("/", "\\")) or ev.path[1:3] == ":\\" else "the path"
    home = " in the home folder," if ev.home else ""
    return f"{kind} {ev.path} {read}{where},{home} outside the repo{gone}"


@rule(
    "input-outside-repo",
    severity="error",
    confidence="certain",
    scope="run",
    why="""
        A script that reads an absolute path, a file outside the repo, a file git does not track or the
        network depends on something a fresh checkout does not have: the figure reproduces only on the
        author's machine, or only while a server keeps the same data. Network access is off during a check,
        so such a read is reported here instead of as an unexplained crash. Writes outside the repo are
        refused during a check and reported by write-outside-copy.
    """,
    fix="""
        Copy the file into the repo (or commit a script that fetches it and records its checksum) and read it
        with a path relative to the repo. Commit untracked inputs with `git add`. If the network is truly
        needed, allow it in `[tool.figproof]` and pin what is downloaded.
    """,
    sources=("Common practice: a figure's inputs travel with the repo, addressed by relative paths.",),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        growth = np.loadtxt("/srv/lab-share/growth.csv", delimiter=",")
        fig, ax = plt.subplots()
        ax.plot(growth[:, 0], growth[:, 1], marker="o")
        fig.savefig("growth.png")
    """,
    good=_GOOD_PLOT,
)
def input_outside_repo(run: ScriptRun, context: RunContext, knobs: Knobs) -> Iterator[Hit]:
    """A script reads an absolute path, a file outside the repo or untracked by git, or tries the network."""
    here = _run_index(run, context)
    writers = _writers(context)
    own_writes = {ev.path for ev in run.events if ev.action in ("save", "write")}
    tracked = frozenset(context.inventory.tracked)
    seen: set[tuple[str, str, str]] = set()
    for ev in run.events:
        mark = (ev.action, ev.path, str(ev.source))
        if mark in seen:
            continue
        seen.add(mark)
        where = _where(ev.source)
        if ev.action == "network":
            target = f" {ev.path}" if ev.path else ""
            yield Hit(message=f"{run.path} tries to connect to{target or ' the network'}{where}, "
                              f"and network access is off during a check",
                      source=ev.source, key=f"network:{ev.path}")
        elif ev.action in ("read", "missing", "probe") and (not ev.inside_repo or not is_repo_path(ev.path)):
            if ev.action == "probe" and not explained_probe(run, ev):
                continue
            yield Hit(message=_outside_message(run, ev, where), source=ev.source, key=f"read:{ev.path}")
        elif (ev.action == "read" and ev.exists and context.inventory.is_git and tracked
              and ev.path not in tracked and ev.path not in own_writes
              and not any(i <= here for i in writers.get(ev.path, ()))):
            # Files written by a later script are input-missing's business (ordering), not untracked data.
            if any(i > here for i in writers.get(ev.path, ())):
                continue
            yield Hit(message=f"{ev.path} is read{where} but git does not track it",
                      source=ev.source, severity="warning", confidence="likely", key=f"untracked:{ev.path}")


# --------------------------------------------------------------------------
# figure-orphan
# --------------------------------------------------------------------------


@rule(
    "figure-orphan",
    severity="warning",
    confidence="likely",
    scope="run",
    why="""
        A committed figure that no script writes has no code behind it: it was drawn by hand, by a script
        that was deleted, or under another name. Nobody can say which data it shows or regenerate it.
        The whole repo is needed to decide this, so the finding is computed once per check (attached to the
        first script run) and located at the figure file itself. A check that runs only some scripts
        (`--changed-files`, `--changed-since`, `--shard`, `exclude`) judges a file only when it knows what
        the other scripts write: from their last run in the result cache, or from the literal file names
        their code saves to. Otherwise the file is listed as not judged, and `figproof merge` judges the
        shards of a check together.
    """,
    fix="""
        Add the script that draws the figure (or fix the output path of the script that should), or delete
        the file if the paper no longer uses it. Figures that are not meant to be generated (photos,
        diagrams) belong outside the configured figure folders, or in `exclude`.
    """,
    sources=("Common practice: every figure in a reproducible paper repo is written by a script in it.",),
    # Example: the harness commits growth.png (the good script's output); bad writes a different name.
    bad="""
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.plot([1, 2, 3], [2.0, 1.5, 3.0], marker="o")
        ax.set_xlabel("day")
        ax.set_ylabel("growth (mm)")
        fig.savefig("growth_v2.png")
    """,
    good=_GOOD_PLOT,
)
def figure_orphan(run: ScriptRun, context: RunContext, knobs: Knobs) -> Iterator[Hit]:
    """A committed figure file that no script writes."""
    if not context.runs or run.path != context.runs[0].path:
        return  # evaluated once per check, when the engine visits the first run
    used = set(context.written_by())
    used |= {path for r in context.runs for path in files_read(r)}
    unknown = [s for s, known in context.unrun.items() if known is None]
    known_names = {PurePosixPath(p).name for known in context.unrun.values() for p in known or ()}
    for known in context.unrun.values():
        used.update(known or ())
    if any(r.status != "ok" for r in context.runs):
        return  # a script that did not finish may write them: its failure is the finding, once
    # only folders the scripts save figures into: images elsewhere (photos in data/, figures drawn with
    # other tools) are not outputs these scripts owe
    folders = {str(PurePosixPath(p).parent) for p in context.written_by()}
    kept = "is committed" if context.inventory.is_git else "is in the repo"  # not a git repo: nothing is committed
    for path in sorted(set(context.inventory.figure_files)):
        if path in used or unknown:
            continue  # a script that did not run in this check may write it: judged only over the scripts that ran
        name = PurePosixPath(path)
        if name.name in known_names or name.stem in known_names:
            continue  # a script that did not run saves a file of this name (maybe from another folder)
        if str(name.parent) not in folders:
            continue
        yield Hit(message=f"{path} {kept} but no script wrote it in this run", source=Source(path=path), key=path)


# --------------------------------------------------------------------------
# output-nondeterministic
# --------------------------------------------------------------------------


def _equal(a: np.ndarray, b: np.ndarray) -> bool:
    a, b = np.asarray(a), np.asarray(b)
    if a.shape != b.shape:
        return False
    if a.dtype.kind in "fiu" and b.dtype.kind in "fiu":
        return bool(np.array_equal(a.astype(float), b.astype(float), equal_nan=True))
    return bool(np.array_equal(a, b))


def _differing(a: np.ndarray, b: np.ndarray) -> int:
    a, b = np.asarray(a, float).ravel(), np.asarray(b, float).ravel()
    same = (a == b) | (np.isnan(a) & np.isnan(b))
    return int(np.count_nonzero(~same))


def mark_differences(first: FigureModel, second: FigureModel) -> list[str]:
    """Phrases naming which marks of the same figure differ between two runs (empty when none do)."""
    found: list[str] = []
    if len(first.axes) != len(second.axes):
        return [f"{len(first.axes)} axes in one run and {len(second.axes)} in the other"]
    for ax1, ax2 in zip(first.axes, second.axes, strict=True):
        where = f"axes {ax1.index + 1}"  # axes count from 1 in messages, as everywhere
        if len(ax1.points) != len(ax2.points):
            found.append(f"a different number of point sets in {where}")
        for p1, p2 in zip(ax1.points, ax2.points, strict=False):
            if p1.x.shape != p2.x.shape or p1.y.shape != p2.y.shape:
                found.append(f"a different number of points in {where}")
                continue
            x_same, y_same = _equal(p1.x, p2.x), _equal(p1.y, p2.y)
            n = int(p1.x.size)
            if not x_same and y_same:
                found.append(f"the x positions of {pct(_differing(p1.x, p2.x), n)} points in {where} differ while "
                             f"their y values agree, as an unseeded random jitter does")
            elif x_same and not y_same:
                found.append(f"the y positions of {pct(_differing(p1.y, p2.y), n)} points in {where} differ while "
                             f"their x values agree, as an unseeded random jitter does")
            elif not x_same and not y_same:
                found.append(f"the positions of points in {where} differ")
        for l1, l2 in zip(ax1.lines, ax2.lines, strict=False):
            if not (_equal(l1.x, l2.x) and _equal(l1.y, l2.y)):
                found.append(f"a line in {where} has different values")
                break
        for b1, b2 in zip(ax1.bars, ax2.bars, strict=False):
            if not (_equal(b1.heights, b2.heights) and _equal(b1.positions, b2.positions)):
                found.append(f"bar heights in {where} differ")
                break
        for e1, e2 in zip(ax1.errorbars, ax2.errorbars, strict=False):
            if not (_equal(e1.lower, e2.lower) and _equal(e1.upper, e2.upper)):
                found.append(f"error-bar ends in {where} differ, as a bootstrap interval without a seed does")
                break
    return found


def _cause(phrases: Sequence[str]) -> str:
    if phrases:
        return "; " + "; ".join(dict.fromkeys(phrases))
    return "; the usual cause is unseeded random numbers, such as a jitter or a bootstrap"


@rule(
    "output-nondeterministic",
    severity="warning",
    confidence="likely",
    scope="run",
    why="""
        A script that draws a different figure each time it runs cannot be checked against its committed
        figure, and the published figure is one draw among many. The usual cause is an unseeded random
        jitter of points (or a bootstrap confidence interval) drawn with a fresh random state on every run.
        Found by running each script twice in fresh sandboxes (`--twice`).
    """,
    fix="""
        Seed every random generator the script uses, e.g. `rng = np.random.default_rng(2024)` and draw the
        jitter from `rng`; for seaborn, pass `seed=` to the plotting call that bootstraps.
    """,
    sources=("Common practice: seeded random number generators make a figure reproducible run to run.",),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        growth = np.array([2.1, 2.4, 1.9, 2.8, 3.1, 2.6])
        jitter = np.random.default_rng().uniform(-0.1, 0.1, growth.size)
        fig, ax = plt.subplots()
        ax.scatter(jitter, growth)
        ax.set_ylabel("growth (mm)")
        fig.savefig("growth.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np
        growth = np.array([2.1, 2.4, 1.9, 2.8, 3.1, 2.6])
        jitter = np.random.default_rng(2024).uniform(-0.1, 0.1, growth.size)
        fig, ax = plt.subplots()
        ax.scatter(jitter, growth)
        ax.set_ylabel("growth (mm)")
        fig.savefig("growth.png")
    """,
)
def output_nondeterministic(run: ScriptRun, context: RunContext, knobs: Knobs) -> Iterator[Hit]:
    """Two runs of the same script draw different output."""
    second = context.second_runs.get(run.path)
    compared = context.rerun_comparisons.get(run.path, ())
    if second is None and not compared:
        return
    script = Source(path=run.path)
    if second is not None and second.status != run.status:
        yield Hit(message=f"{run.path} ended {run.status} in one run and {second.status} in the other",
                  source=script, key="status")
        return
    figures2 = {f.id: f for f in second.figures} if second is not None else {}
    differences = {f.id: mark_differences(f, figures2[f.id]) for f in run.figures if f.id in figures2}
    by_output = {path: f for f in run.figures for path in f.outputs}
    by_id = {f.id: f for f in run.figures}
    reported: set[str] = set()
    for c in compared:
        if c.status in ("same", "missing-committed", "unreadable-committed", "unreadable-regenerated"):
            continue
        # a comparison is of a saved file (keyed by its path) or of a figure's rendering (keyed by figure id)
        fig = by_output.get(c.path) or by_id.get(c.path)
        label = f"figure {c.path}" if c.path in by_id else c.path
        phrases = differences.get(fig.id, []) if fig is not None else []
        if fig is not None:
            reported.add(fig.id)
        if c.status == "missing-regenerated":
            detail = "it was saved in the first run only"
        elif c.status == "size-mismatch":
            detail = f"{_size_text(c.committed_size)} in one run, {_size_text(c.regenerated_size)} in the other"
        else:
            detail = _rms_text(c) or "its content differs after dropping dates and ids"
        yield Hit(message=f"{label} differs between two runs of {run.path} ({detail}){_cause(phrases)}",
                  source=fig.source if fig is not None and fig.source is not None else script, key=c.path)
    if second is not None and len(run.figures) != len(second.figures):
        n = len(run.figures)
        yield Hit(message=f"{run.path} creates {n} figure{'s' * (n != 1)} in one run and {len(second.figures)} "
                          f"in the other", source=script, key="figures")
    for fig in run.figures:
        phrases = differences.get(fig.id, [])
        if phrases and fig.id not in reported:
            yield Hit(message=f"figure {fig.id} draws different marks in two runs{_cause(phrases)}",
                      source=fig.source or script, key=f"marks:{fig.id}")
    if second is not None:
        first_inputs = {ev.path: ev.sha256 for ev in run.events if ev.action == "read" and ev.sha256}
        for ev in second.events:
            before = first_inputs.get(ev.path)
            if ev.action == "read" and ev.sha256 and before and before != ev.sha256:
                yield Hit(message=f"{ev.path} had different contents in the two runs of {run.path}, "
                                  f"so its figures were drawn from different data",
                          source=ev.source or script, key=f"input:{ev.path}")
                first_inputs.pop(ev.path)


RULES = (figure_drift, input_missing, input_outside_repo, figure_orphan, output_nondeterministic)

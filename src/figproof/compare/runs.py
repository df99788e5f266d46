"""Parent-side comparisons that feed the reproducibility rules (file I/O lives here, not in rules).

- committed figure file vs the file the script regenerated (``figure-drift``);
- a notebook's stored image outputs vs the figures its re-executed cells drew;
- first vs second run of the same script with ``--twice`` (``output-nondeterministic``).
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path

from figproof.compare.files import OutputComparison, compare_image_bytes, compare_output, notebook_png_outputs
from figproof.model.context import is_figure_output
from figproof.model.records import ScriptRun
from figproof.run.execute import artifact_folder


def saved_outputs(run: ScriptRun) -> list[str]:
    """Repo-relative figure files a run saved, in order, without repeats."""
    seen: dict[str, None] = {}
    for ev in run.events:
        if is_figure_output(ev):
            seen.setdefault(ev.path, None)
    return list(seen)


def committed_vs_regenerated(runs: Sequence[ScriptRun], root: Path, artifacts: Path,
                             tolerance: float) -> dict[str, OutputComparison]:
    """Compare every saved output that also exists in the user's repo (the report draws the change views)."""
    out: dict[str, OutputComparison] = {}
    for run in runs:
        regenerated = artifact_folder(artifacts, run.path) / "regenerated"
        for path in saved_outputs(run):
            committed = root / path
            if path in out or not committed.is_file():
                continue
            out[path] = compare_output(committed, regenerated / path, tolerance=tolerance, path=path, shifts=True)
    return out


def other_writers(runs: Sequence[ScriptRun], root: Path, artifacts: Path,
                  tolerance: float) -> dict[str, dict[str, OutputComparison]]:
    """For a committed file that several scripts write: each later writer's own file against the committed one.

    Keyed by script, then path (the first writer's comparison is in :func:`committed_vs_regenerated`).
    """
    first: dict[str, str] = {}
    out: dict[str, dict[str, OutputComparison]] = {}
    for run in runs:
        regenerated = artifact_folder(artifacts, run.path) / "regenerated"
        for path in saved_outputs(run):
            writer = first.setdefault(path, run.path)
            committed = root / path
            if writer == run.path or not committed.is_file():
                continue
            out.setdefault(run.path, {})[path] = compare_output(committed, regenerated / path, tolerance=tolerance,
                                                                path=path, shifts=True)
    return out


def notebook_outputs(runs: Sequence[ScriptRun], root: Path, artifacts: Path,
                     tolerance: float) -> dict[str, tuple[OutputComparison, ...]]:
    """Stored ``image/png`` outputs of each notebook cell vs the figures that cell drew now, in order."""
    out: dict[str, tuple[OutputComparison, ...]] = {}
    for run in runs:
        if not run.path.endswith(".ipynb") or run.status != "ok":
            continue
        try:
            stored = notebook_png_outputs(json.loads((root / run.path).read_text(encoding="utf-8")))
        except (OSError, ValueError):
            continue
        folder = artifact_folder(artifacts, run.path) / "renders"
        found: list[OutputComparison] = []
        for index, images in sorted(stored.items()):
            cell = index + 1  # notebook_png_outputs counts from 0; findings count cells from 1
            drawn = [f for f in run.figures if f.source is not None and f.source.cell == cell and f.inline_render]
            for k, (png, fig) in enumerate(zip(images, drawn, strict=False)):
                try:
                    fresh = (folder / str(fig.inline_render)).read_bytes()
                except OSError:
                    continue
                found.append(compare_image_bytes(png, fresh, tolerance=tolerance, path=run.path, cell=cell,
                                                 output=k + 1, shifts=True))
        if found:
            out[run.path] = tuple(found)
    return out


def first_vs_second(first: Sequence[ScriptRun], second: Sequence[ScriptRun], artifacts1: Path,
                    artifacts2: Path) -> dict[str, tuple[OutputComparison, ...]]:
    """Each output (and each figure rendering) of a script's first run against its second run."""
    again = {r.path: r for r in second}
    out: dict[str, tuple[OutputComparison, ...]] = {}
    for run in first:
        other = again.get(run.path)
        if other is None or run.status != "ok" or other.status != "ok":
            continue
        a, b = artifact_folder(artifacts1, run.path), artifact_folder(artifacts2, run.path)
        found = [compare_output(a / "regenerated" / p, b / "regenerated" / p, tolerance=0.0, path=p)
                 for p in saved_outputs(run)]
        for fig in run.figures:
            if fig.render and not fig.outputs:  # figures never saved: compare their renderings
                found.append(compare_output(a / "renders" / fig.render, b / "renders" / fig.render,
                                            tolerance=0.0, path=fig.id))
        if found:
            out[run.path] = tuple(found)
    return out

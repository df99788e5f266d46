"""Provenance manifest: for every figure file, the script that wrote it and the inputs it was drawn from.

The manifest is plain JSON-ready data with a deterministic order (figures and
scripts sorted by path, inputs sorted by path), so the same repo state gives the
same manifest byte for byte when written with ``sort_keys=True``.
"""

from __future__ import annotations

import platform
import sys
from collections.abc import Iterable, Mapping
from importlib import metadata
from typing import Any

from figproof import __version__
from figproof.model.context import RunContext, is_figure_output, is_repo_path
from figproof.model.records import FileEvent, ScriptRun, Source

MANIFEST_SCHEMA = 1
_PACKAGES = (("matplotlib", "matplotlib"), ("numpy", "numpy"), ("pandas", "pandas"), ("pillow", "Pillow"))


def _version(distribution: str) -> str | None:
    try:
        return metadata.version(distribution)
    except metadata.PackageNotFoundError:
        return None


def environment_fingerprint(freetype: str | None = None) -> dict[str, Any]:
    """Versions that change how figures come out: Python, matplotlib and its FreeType, numpy, pandas, Pillow.

    FreeType is the library matplotlib rasterises text with; a different
    FreeType version moves glyph pixels, so it belongs in the fingerprint.
    Package versions come from the installed distributions' metadata (no
    import of pandas or pyplot needed).
    """
    env: dict[str, Any] = {
        "python": platform.python_version(),
        "python_implementation": platform.python_implementation(),
        "platform": platform.platform(),
        "machine": platform.machine(),
        "byteorder": sys.byteorder,
    }
    for key, dist in _PACKAGES:
        env[key] = _version(dist)
    if freetype:  # as the child reported it: saves importing matplotlib here
        env["freetype"] = freetype
        return env
    try:
        from matplotlib import ft2font  # the compiled text backend; importing it does not import pyplot

        env["freetype"] = getattr(ft2font, "__freetype_version__", None)
    except ImportError:
        env["freetype"] = None
    return env


def _inputs(events: Iterable[FileEvent], writers: Mapping[str, tuple[str, ...]], reader: str,
            cell: int | None = None) -> list[dict[str, Any]]:
    """Distinct files read (up to notebook cell ``cell`` when given), sorted by path."""
    found: dict[str, dict[str, Any]] = {}
    for ev in events:
        if ev.action not in ("read", "missing"):
            continue
        if cell is not None and ev.source is not None and ev.source.cell is not None and ev.source.cell > cell:
            continue
        entry = found.setdefault(ev.path, {"path": ev.path, "sha256": None, "inside_repo": bool(ev.inside_repo),
                                           "exists": True})
        if ev.action == "missing" or not ev.exists:
            entry["exists"] = False
        if ev.sha256 and entry["sha256"] is None:
            entry["sha256"] = ev.sha256
        upstream = [w for w in writers.get(ev.path, ()) if w != reader]
        if upstream:
            entry["written_by"] = upstream
    return [found[k] for k in sorted(found)]


def _source_json(source: Source | None, script: str) -> dict[str, Any]:
    """The saving line; ``file`` names the helper module it lies in when that is not the script."""
    if source is None:
        return {"line": None, "cell": None}
    out: dict[str, Any] = {"line": source.line, "cell": source.cell}
    if source.path and source.path != script:
        out["file"] = source.path
    return out


def build_manifest(
    runs: Iterable[ScriptRun],
    context: RunContext,
    *,
    git_commit: str | None,
    environment: Mapping[str, Any],
    date: str | None = None,
) -> dict[str, Any]:
    """The provenance manifest of one check.

    Parameters
    ----------
    runs
        The script runs, in execution order.
    context
        The check's context: comparisons give each figure's verdict against its committed file.
    git_commit
        The checked repo's HEAD commit (None when not a git repo).
    environment
        Usually :func:`environment_fingerprint` of the child's interpreter.
    date
        The check's date as the caller decided it (ISO 8601 from SOURCE_DATE_EPOCH when set).

    Returns
    -------
    dict
        ``{"schema", "tool", "git_commit", "date", "environment", "figures", "scripts"}``;
        every figure file entry names its script, the saving line and notebook cell,
        the figure id, the inputs with SHA-256, and the comparison status.
    """
    runs = tuple(runs)
    writers = context.written_by() if context.runs else RunContext(runs=runs).written_by()
    figures: dict[str, dict[str, Any]] = {}
    scripts: list[dict[str, Any]] = []
    for run in runs:
        owner = {p: f.id for f in run.figures for p in f.outputs}
        outputs: list[str] = []
        for ev in run.events:
            if not is_figure_output(ev):
                continue
            outputs.append(ev.path)
            cell = ev.source.cell if ev.source is not None else None
            entry = {
                "path": ev.path,
                "script": run.path,
                **_source_json(ev.source, run.path),
                "figure": owner.get(ev.path),
                "format": ev.format,
                "inputs": _inputs(run.events, writers, run.path, cell),
            }
            comparison = context.comparisons.get(ev.path)
            if comparison is not None:
                entry["comparison"] = {"status": comparison.status, "rms": comparison.rms,
                                       "committed_version": comparison.committed_version}
            # The last save wins, as on disk; earlier writers are kept so a clash is visible.
            previous = figures.get(ev.path)
            if previous is not None:
                entry["also_written_by"] = sorted({*previous.get("also_written_by", []), previous["script"]}
                                                  - {run.path})
            figures[ev.path] = entry
        for fig in run.figures:  # outputs known from the figure model but without a save event
            for path in fig.outputs:
                if is_repo_path(path) and path not in figures:
                    outputs.append(path)
                    figures[path] = {"path": path, "script": run.path, **_source_json(fig.source, run.path),
                                     "figure": fig.id,
                                     "format": path.rsplit(".", 1)[-1].lower() if "." in path else None,
                                     "inputs": _inputs(run.events, writers, run.path)}
        scripts.append({
            "path": run.path,
            "status": run.status,
            "inputs": _inputs(run.events, writers, run.path),
            "outputs": sorted(set(outputs)),
        })
    for entry in figures.values():
        if not entry.get("also_written_by"):
            entry.pop("also_written_by", None)
    return {
        "schema": MANIFEST_SCHEMA,
        "tool": {"name": "figproof", "version": __version__},
        "git_commit": git_commit,
        "date": date,
        "environment": {k: environment[k] for k in sorted(environment)},
        "figures": [figures[k] for k in sorted(figures)],
        "scripts": sorted(scripts, key=lambda s: s["path"]),
    }


def provenance_rows(manifest: Mapping[str, Any]) -> list[tuple[str, str, str]]:
    """(figure, script with cell/line, inputs) rows for a "figure → script → inputs" table."""
    rows: list[tuple[str, str, str]] = []
    for fig in manifest.get("figures", ()):
        where = fig["script"]
        at = fig.get("file")  # saved by a helper module the script imports
        line = f"{at}:{fig['line']}" if at and fig.get("line") is not None else at
        if fig.get("cell") is not None:
            where += f" cell {fig['cell']}"
        if line:
            where += f" (at {line})"
        elif fig.get("line") is not None:
            where += f":{fig['line']}"
        inputs = ", ".join(i["path"] + ("" if i.get("exists", True) else " (missing)") for i in fig["inputs"])
        rows.append((fig["path"], where, inputs or "—"))
    return rows


__all__ = ["MANIFEST_SCHEMA", "build_manifest", "environment_fingerprint", "provenance_rows"]

"""What run-scope rules may know beyond one script's run: the repo inventory and the other runs."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import PurePosixPath
from types import MappingProxyType

from figproof.model.comparison import OutputComparison, kind_of
from figproof.model.records import FileEvent, ScriptRun


def _empty_mapping() -> Mapping:
    return MappingProxyType({})


def is_repo_path(path: str) -> bool:
    """True for a repo-relative POSIX path (not absolute, no ``..``, not a URL)."""
    if not path or "://" in path or (len(path) > 1 and path[1] == ":"):
        return False
    pure = PurePosixPath(path)
    return not pure.is_absolute() and ".." not in pure.parts


def is_figure_output(ev: FileEvent) -> bool:
    """A savefig output, or any other write of an image/PDF/SVG/PS file (e.g. Pillow ``Image.save``)."""
    if not ev.inside_repo or not is_repo_path(ev.path):
        return False
    return ev.action == "save" or (ev.action == "write" and kind_of(ev.path) != "other")


def files_written(run: ScriptRun) -> set[str]:
    """Repo-relative files a run saved or wrote (file events and the figures' recorded outputs)."""
    out = {ev.path for ev in run.events
           if ev.action in ("save", "write") and ev.inside_repo and is_repo_path(ev.path)}
    out.update(path for fig in run.figures for path in fig.outputs if is_repo_path(path))
    return out


def files_read(run: ScriptRun) -> set[str]:
    """Repo-relative files a run read."""
    return {ev.path for ev in run.events if ev.action == "read" and ev.inside_repo and is_repo_path(ev.path)}


@dataclass(frozen=True, slots=True, kw_only=True)
class Inventory:
    """Files of the checked repo, as discovery found them (repo-relative POSIX paths)."""

    scripts: tuple[str, ...] = ()
    data_files: tuple[str, ...] = ()
    figure_files: tuple[str, ...] = ()  # committed figure files (png, svg, pdf, jpg, tif, eps)
    tracked: tuple[str, ...] = ()  # every file git tracks (empty when not a git repo)
    is_git: bool = False
    excluded: tuple[str, ...] = ()  # figure scripts that `exclude` keeps from running
    # repo modules that draw only when a script calls them: (module, the figure scripts that import it); not run
    helpers: tuple[tuple[str, tuple[str, ...]], ...] = ()


@dataclass(frozen=True, slots=True, kw_only=True)
class RunContext:
    """Read-only facts shared by all run-scope rules of one check.

    ``runs`` are in execution order (the order the config states, else config
    order): rules use it to tell a read of a file an earlier script wrote (fine)
    from a read of a file a later script writes (reported).

    ``comparisons``: committed figure file vs regenerated file, keyed by the
    repo-relative output path (only paths that exist in the user's repo).
    ``notebook_comparisons``: a notebook's stored ``image/png`` outputs vs the
    re-executed cell's figures, keyed by notebook path.
    ``second_runs`` / ``rerun_comparisons``: with ``--twice``, the second run of
    each script and the comparison of each output of the first run with the same
    output of the second run (first run as "committed"), keyed by script path; a
    comparison's ``path`` is the saved file's repo path, or the figure id when it
    compares the two runs' renderings of a figure that was not saved.
    ``running_version``: the matplotlib version the children ran with.
    ``unrun``: the figure scripts this check did not run (not selected by ``--changed-files``,
    ``--changed-since`` or ``--shard``, or kept out by ``exclude``), each with the repo files it is known to
    write or read (from its last cached run, or the literal names its code saves to), or None when
    nobody can tell what it writes.
    """

    inventory: Inventory = field(default_factory=Inventory)
    runs: tuple[ScriptRun, ...] = ()
    comparisons: Mapping[str, OutputComparison] = field(default_factory=_empty_mapping)
    notebook_comparisons: Mapping[str, tuple[OutputComparison, ...]] = field(default_factory=_empty_mapping)
    second_runs: Mapping[str, ScriptRun] = field(default_factory=_empty_mapping)
    rerun_comparisons: Mapping[str, tuple[OutputComparison, ...]] = field(default_factory=_empty_mapping)
    running_version: str = ""
    unrun: Mapping[str, tuple[str, ...] | None] = field(default_factory=_empty_mapping)
    # a committed file several scripts write: each later writer's own comparison, by script then path
    other_writers: Mapping[str, Mapping[str, OutputComparison]] = field(default_factory=_empty_mapping)

    def written_by(self) -> dict[str, tuple[str, ...]]:
        """Repo-relative files each run saved or wrote, keyed by file, scripts in execution order."""
        out: dict[str, list[str]] = {}
        for run in self.runs:
            for ev in run.events:
                if ev.action in ("save", "write") and ev.inside_repo and is_repo_path(ev.path):
                    scripts = out.setdefault(ev.path, [])
                    if run.path not in scripts:
                        scripts.append(run.path)
            for fig in run.figures:
                for path in fig.outputs:
                    if not is_repo_path(path):
                        continue
                    scripts = out.setdefault(path, [])
                    if run.path not in scripts:
                        scripts.append(run.path)
        return {k: tuple(v) for k, v in sorted(out.items())}

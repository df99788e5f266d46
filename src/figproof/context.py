"""What run-scope rules may know beyond one script's run: the repo inventory and the other runs."""

from __future__ import annotations

from dataclasses import dataclass, field

from figproof.model import ScriptRun


@dataclass(frozen=True, slots=True, kw_only=True)
class Inventory:
    """Files of the checked repo, as discovery found them (repo-relative POSIX paths)."""

    scripts: tuple[str, ...] = ()
    data_files: tuple[str, ...] = ()
    figure_files: tuple[str, ...] = ()  # committed figure files (png, svg, pdf, jpg, tif, eps)
    tracked: tuple[str, ...] = ()  # every file git tracks (empty when not a git repo)
    is_git: bool = False


@dataclass(frozen=True, slots=True, kw_only=True)
class RunContext:
    """Read-only facts shared by all run-scope rules of one check."""

    inventory: Inventory = field(default_factory=Inventory)
    runs: tuple[ScriptRun, ...] = ()

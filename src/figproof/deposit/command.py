"""``figproof check DEPOSIT``: check a deposited archive or a plain folder as a data editor would.

The deposit is unpacked safely (:mod:`figproof.deposit.unpack`) into its own temporary folder, checked with
every file counting as committed, reported, and removed.
"""

from __future__ import annotations

import shutil
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

from figproof.deposit.unpack import DepositError, deposit_name, is_archive, opened
from figproof.model.records import ScriptRun
from figproof.pipeline import Checked, CheckOptions, check
from figproof.report.write import ReportRequest, final_line, write_reports

# exit codes, as figproof.cli.ExitCode names them (this module may not import the command line)
PASSED, FAILED = 0, 1

Progress = Callable[[ScriptRun, int, int], None]


@dataclass(frozen=True, slots=True, kw_only=True)
class DepositRun:
    """What the command line asks of a deposit check (built by :mod:`figproof.cli`)."""

    paths: tuple[Path, ...]
    reports: ReportRequest
    jobs: int | None = None
    twice: bool = False
    quiet: bool = False


def wanted(paths: Sequence[Path], deposit_flag: bool) -> bool:
    """Whether ``figproof check`` was asked to check a deposit rather than a repo."""
    return deposit_flag or any(is_archive(p) for p in paths)


def check_one(path: Path, run: DepositRun, progress: Progress | None = None) -> Checked:
    """Unpack (or open) one deposit and check it; the caller writes the reports and removes the artifacts."""
    with opened(path) as root:
        wanted_paths = (run.reports.images, run.reports.json, run.reports.markdown)
        skip = tuple(s for s in (_inside(root, p) for p in wanted_paths if p is not None) if s)
        options = CheckOptions(jobs=run.jobs, skip_copy=skip, twice=run.twice, cache=False, renders=True,
                               deposit=True)
        return check(root, options, progress=progress)


def _inside(root: Path, p: Path) -> str | None:
    try:
        return p.resolve().relative_to(root.resolve()).parts[0]
    except (ValueError, IndexError):
        return None


def run(request: DepositRun, progress: Progress | None = None) -> int:
    """Check the deposit named on the command line; return the exit code."""
    paths = list(request.paths) or [Path(".")]
    for p in paths:
        if not p.exists():
            raise DepositError(f"{p}: no such file or folder")
    if len(paths) != 1:
        raise DepositError("check takes one deposit per call")
    checked = check_one(paths[0], request, progress)
    try:
        text = write_reports(checked, request.reports, shown_root=deposit_name(paths[0].resolve()))
    finally:
        shutil.rmtree(checked.artifacts, ignore_errors=True)
    if not request.quiet:
        print(text)
        print(final_line(checked.result), file=sys.stderr)
    return PASSED if checked.result.summary.passed else FAILED


__all__ = ["DepositRun", "check_one", "run", "wanted"]

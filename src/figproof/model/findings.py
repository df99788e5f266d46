"""Findings and the result of one check: what rules report and what reporters render."""

from __future__ import annotations

import typing
from dataclasses import dataclass
from typing import Literal

from figproof.model.records import ScriptRun, Serialisable, Source, model

Severity = Literal["error", "warning", "note"]
Confidence = Literal["certain", "likely", "possible"]
SEVERITIES: tuple[Severity, ...] = typing.get_args(Severity)
CONFIDENCES: tuple[Confidence, ...] = typing.get_args(Confidence)


def renamed_note(old: str, new: str) -> str:
    """The deprecation note for a former rule id (config tables, allow comments, accepted entries, explain)."""
    return f"rule id '{old}' is now '{new}'; the old id still works in this 0.x series, rename it"


@model
class Detail(Serialisable):
    """One occurrence inside a grouped hit: a clashing pair, one panel, one script."""

    message: str
    source: Source | None = None
    axes: int | None = None


@model
class Hit(Serialisable):
    """What a rule yields: one fact with its counted evidence.

    The engine turns a hit into a :class:`Finding` by adding the rule id, the
    rule's default severity/confidence (unless the hit overrides them), the
    figure id and a fallback location.  ``key`` is a short stable detail
    (e.g. ``"bars:0"``) that makes fingerprints survive unrelated edits.

    One hit is one cause.  A rule that finds the same cause several times in
    one axes (say five clashing colour pairs) yields one hit whose
    ``details`` list each occurrence, worst first.  Hits of one figure with
    the same key in several axes become one finding naming the panels; hits
    with the same non-empty ``group`` become one finding across the whole
    check (one missing package named by several scripts).
    """

    message: str
    source: Source | None = None
    axes: int | None = None
    confidence: Confidence | None = None
    severity: Severity | None = None
    key: str = ""
    details: tuple[Detail, ...] = ()
    group: str = ""
    cause: Source | None = None  # another line that brought the problem about (the set_ylim that clips)


@model
class Instance(Serialisable):
    """One located occurrence of a finding's cause (JSON ``instances``, SARIF related locations)."""

    message: str
    path: str
    line: int | None = None
    cell: int | None = None
    figure: str | None = None
    axes: int | None = None


@model
class Finding(Serialisable):
    """One reported problem, located in the user's code."""

    rule: str
    severity: Severity
    confidence: Confidence
    path: str
    line: int | None = None
    cell: int | None = None
    figure: str | None = None
    axes: int | None = None
    message: str
    help: str = ""
    fingerprint: str = ""
    accepted: str | None = None  # the reason, when an allow comment or accepted-findings entry covers it
    accepted_by: str | None = None  # "comment" (inline allow) or "file" (accepted-findings entry)
    instances: tuple[Instance, ...] = ()  # every occurrence this one finding stands for, worst first
    cause_line: int | None = None  # a line of the same file that brought it about; an allow comment there counts
    script: str | None = None  # the script or notebook whose run it comes from (the location may be in a helper)

    def sort_key(self) -> tuple[str, int, str, str]:
        return (self.path, self.line or 0, self.rule, self.message)


@dataclass(frozen=True, slots=True, kw_only=True)
class Summary:
    scripts: int
    figures: int
    errors: int
    warnings: int
    notes: int
    accepted: int
    passed: bool


@dataclass(frozen=True, slots=True, kw_only=True)
class TreeChange:
    """A path of the user's repo that changed while the scripts ran (the isolation did not hold)."""

    path: str  # repo-relative POSIX
    change: str  # what changed, in plain words ("file removed", "permissions 644 → 0")


@dataclass(frozen=True, slots=True, kw_only=True)
class CheckResult:
    """Everything one ``figproof check`` produced; reporters render it, policy decided ``passed``."""

    root: str
    version: str
    runs: tuple[ScriptRun, ...]
    findings: tuple[Finding, ...]
    summary: Summary
    fail_on: str = "error"
    notes: tuple[str, ...] = ()
    not_run: tuple[str, ...] = ()  # figure scripts a partial check did not run (selection, shard, exclude)
    helpers: tuple[tuple[str, tuple[str, ...]], ...] = ()  # repo modules not run: (module, figure scripts using it)
    # findings a partial check cannot judge alone (orphans a script that did not run may write); merge judges them
    pending: tuple[Finding, ...] = ()
    tree_changes: tuple[TreeChange, ...] = ()  # the working-tree guard's differences: the check fails

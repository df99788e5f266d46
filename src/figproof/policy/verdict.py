"""Pass or fail: severities from config, accepted findings, and the fail-on threshold.

This is the one place that decides; reporters only render the decision.
"""

from __future__ import annotations

from collections.abc import Sequence

from figproof.model.findings import SEVERITIES, Finding, Summary
from figproof.model.records import ScriptRun

_RANK: dict[str, int] = {s: i for i, s in enumerate(SEVERITIES)}  # error 0, warning 1, note 2


def crosses(severity: str, fail_on: str) -> bool:
    """True when a finding of ``severity`` fails a build configured with ``fail_on``."""
    if fail_on == "never":
        return False
    return _RANK[severity] <= _RANK[fail_on]


def summarise(runs: Sequence[ScriptRun], findings: Sequence[Finding], fail_on: str, *,
              tree_changed: bool = False) -> Summary:
    """Count open findings by severity and decide whether the check passed (never when the user's working
    tree changed during the check, whatever ``fail_on`` says)."""
    open_ = [f for f in findings if f.accepted is None]
    accepted = len(findings) - len(open_)
    counts = {s: sum(1 for f in open_ if f.severity == s) for s in SEVERITIES}
    return Summary(
        scripts=len(runs),
        figures=sum(len(r.figures) for r in runs),
        errors=counts["error"],
        warnings=counts["warning"],
        notes=counts["note"],
        accepted=accepted,
        passed=not tree_changed and not any(crosses(f.severity, fail_on) for f in open_),
    )

"""GitLab code-quality report (``--gitlab FILE``): the JSON array GitLab's merge requests read.

The fields are those GitLab documents for the code-quality report format (a
subset of the open Code Climate issue spec): ``description``, ``check_name``,
``fingerprint``, ``severity`` and ``location.path`` / ``location.lines.begin``.
GitLab drops every issue whose fingerprint it has already seen in the report,
so fingerprints are made unique here, and they do not contain the line number,
so an issue keeps its identity when unrelated lines move.
"""

from __future__ import annotations

import json
from collections import Counter
from typing import Any

from figproof.model.findings import CheckResult, Finding
from figproof.rules import fingerprint as rule_fingerprint

# GitLab's severities are info, minor, major, critical, blocker.  figproof has three levels;
# "critical"/"blocker" are left for security-grade problems (common practice among linters that
# write this format), so a build-failing figproof error is "major".
SEVERITY = {"error": "major", "warning": "minor", "note": "info"}


def _description(f: Finding) -> str:
    if f.cell is None:
        return f.message
    where = f"cell {f.cell}" + (f", line {f.line}" if f.line is not None else "")
    return f"{f.message} ({where})"


def render(result: CheckResult) -> str:
    """Render the open (not accepted) findings as a GitLab code-quality JSON array.

    Parameters
    ----------
    result
        The finished check.

    Returns
    -------
    str
        Deterministic JSON text (sorted keys, two-space indent, trailing newline).

    Notes
    -----
    GitLab requires a line, so a finding without one points at line 1 of its file; a notebook
    finding points at line 1 of the .ipynb file and names the cell and line in its description.
    """
    issues: list[dict[str, Any]] = []
    seen: Counter[str] = Counter()
    for f in sorted(result.findings, key=Finding.sort_key):
        if f.accepted is not None:
            continue  # the format has no notion of an accepted issue
        fp = f.fingerprint or rule_fingerprint(f.rule, f.path, f.figure, f.axes, f.message)
        seen[fp] += 1
        if seen[fp] > 1:
            # Same rule, place and detail twice (e.g. two identical figures): keep both visible.
            fp = f"{fp}-{seen[fp]}"
        line = f.line if f.cell is None and f.line is not None and f.line >= 1 else 1
        issues.append({
            "type": "issue",
            "description": _description(f),
            "check_name": f.rule,
            "fingerprint": fp,
            "severity": SEVERITY.get(f.severity, "minor"),
            "location": {"path": f.path, "lines": {"begin": line}},
        })
    return json.dumps(issues, sort_keys=True, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


__all__ = ["SEVERITY", "render"]

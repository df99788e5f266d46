"""GitHub Actions workflow-command annotations (``::error file=...,line=...,title=...::message``).

The escaping follows the runner's workflow-command syntax as implemented in
GitHub's actions/toolkit (``@actions/core``, ``command.ts``): in the message
(data) ``%``, ``\\r`` and ``\\n`` are percent-encoded; property values also
encode ``:`` and ``,``, which would otherwise end the value.  ``%`` goes first
so that the other escapes are not encoded twice.
"""

from __future__ import annotations

from collections.abc import Iterable

from figproof.model.findings import SEVERITIES, CheckResult, Finding

# Workflow commands know error, warning and notice; figproof's "note" is a notice.
COMMANDS = {"error": "error", "warning": "warning", "note": "notice"}
_PLURAL = {"error": "errors", "warning": "warnings", "note": "notes"}


def escape_data(text: str) -> str:
    """Escape a workflow-command message."""
    return text.replace("%", "%25").replace("\r", "%0D").replace("\n", "%0A")


def escape_property(text: str) -> str:
    """Escape a workflow-command property value (also ``:`` and ``,``)."""
    return escape_data(text).replace(":", "%3A").replace(",", "%2C")


def command(name: str, message: str, properties: Iterable[tuple[str, str]] = ()) -> str:
    """Format one workflow command; properties keep their given order."""
    props = ",".join(f"{key}={escape_property(value)}" for key, value in properties)
    return f"::{name}{' ' + props if props else ''}::{escape_data(message)}"


def _annotation(f: Finding) -> str:
    props: list[tuple[str, str]] = [("file", f.path)]
    message = f.message
    if f.cell is not None:
        # A cell's line is not a line of the .ipynb file: name it in the message, not in `line=`.
        where = f"cell {f.cell}" + (f", line {f.line}" if f.line is not None else "")
        message = f"{where}: {message}"
    elif f.line is not None and f.line >= 1:
        props.append(("line", str(f.line)))
    props.append(("title", f"figproof {f.rule} ({f.confidence})"))
    return command(COMMANDS.get(f.severity, "warning"), message, props)


def annotation_lines(result: CheckResult, *, cap_per_level: int = 50) -> list[str]:
    """Workflow-command lines for the open (not accepted) findings of ``result``.

    Parameters
    ----------
    result
        The finished check.
    cap_per_level
        At most this many annotations per severity (GitHub shows only a limited number
        per step); a last ``notice`` line says how many were left out and where to look.

    Returns
    -------
    list[str]
        One workflow command per line, in report order (errors first, then warnings, then notes).
    """
    cap = max(0, cap_per_level)
    open_findings = sorted((f for f in result.findings if f.accepted is None), key=Finding.sort_key)
    lines: list[str] = []
    left_out: list[str] = []
    for severity in SEVERITIES:
        group = [f for f in open_findings if f.severity == severity]
        lines.extend(_annotation(f) for f in group[:cap])
        if len(group) > cap:
            left_out.append(f"{len(group) - cap} {_PLURAL[severity]}")
    if left_out:
        lines.append(command(
            "notice",
            f"{', '.join(left_out)} not annotated (at most {cap} per level); the full list is in the figproof report",
            [("title", "figproof")],
        ))
    return lines


__all__ = ["COMMANDS", "annotation_lines", "command", "escape_data", "escape_property"]

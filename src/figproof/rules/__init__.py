"""All rules, and the engine that applies them to runs.

Rules are pure: importing this package must not import matplotlib.pyplot
(a test asserts it).  Each family module ends with ``RULES = (...)``.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterable, Mapping
from typing import Literal

from figproof.model.context import RunContext
from figproof.model.findings import Finding, Hit, Severity
from figproof.model.records import ScriptRun, Source
from figproof.rules import axes, bars, colour, distribution, reproduce, run, visibility
from figproof.rules.base import Rule

RULES: tuple[Rule, ...] = (axes.RULES + bars.RULES + colour.RULES + distribution.RULES + run.RULES + reproduce.RULES
                          + visibility.RULES)


def by_id() -> dict[str, Rule]:
    """Rules keyed by id, in catalogue order."""
    return {r.id: r for r in RULES}


def knob_value(settings: Mapping[str, tuple[object, Mapping[str, float]]], rule_id: str, name: str) -> float:
    """A rule's knob as configured, else the rule's own default (the one place a default is written).

    For the few knobs used outside their rule: the drift tolerance applied when images are compared,
    the simulated colour-vision severity of the report's panels.
    """
    default = {k.name: k.default for k in by_id()[rule_id].knobs}[name]
    chosen = settings.get(rule_id)
    return float(chosen[1].get(name, default)) if chosen is not None else default


def fingerprint(rule_id: str, path: str, figure: str | None, axes: int | None, key: str) -> str:
    """A finding's identity that survives unrelated edits (no line number in it)."""
    text = "\x1f".join([rule_id, path, figure or "", "" if axes is None else str(axes), key])
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _finding(r: Rule, hit: Hit, *, fallback: Source, figure: str | None, severity: Severity | None) -> Finding:
    """``severity`` is the user's configured one: it wins over the hit's own, which wins over the default."""
    src = hit.source or fallback
    return Finding(
        rule=r.id,
        severity=severity or hit.severity or r.severity,
        confidence=hit.confidence or r.confidence,
        path=src.path,
        line=src.line,
        cell=src.cell,
        figure=figure,
        axes=hit.axes,
        message=hit.message,
        help=r.summary,
        fingerprint=fingerprint(r.fingerprint_id, src.path, figure, hit.axes, hit.key or hit.message),
    )


def apply(
    runs: Iterable[ScriptRun],
    context: RunContext,
    settings: Mapping[str, tuple[Severity | Literal["off"] | None, Mapping[str, float]]] | None = None,
) -> list[Finding]:
    """Run every enabled rule; ``settings`` maps rule id to (severity or "off", knob overrides)."""
    settings = settings or {}
    found: list[Finding] = []
    for r in RULES:
        severity, overrides = settings.get(r.id, (None, {}))
        if severity == "off":
            continue
        sev = severity
        knobs = {**r.defaults(), **overrides}
        for run_ in runs:
            script = Source(path=run_.path)
            if r.scope == "run":
                for hit in r.check(run_, context, knobs):
                    found.append(_finding(r, hit, fallback=script, figure=None, severity=sev))
                continue
            for fig in run_.figures:
                fallback = fig.source or script
                for hit in r.check(fig, knobs):
                    found.append(_finding(r, hit, fallback=fallback, figure=fig.id, severity=sev))
    return sorted(found, key=Finding.sort_key)


__all__ = ["RULES", "apply", "by_id", "fingerprint", "knob_value"]

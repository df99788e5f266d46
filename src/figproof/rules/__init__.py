"""All rules, and the engine that applies them to runs.

Rules are pure: importing this package must not import matplotlib.pyplot
(a test asserts it).  Each family module ends with ``RULES = (...)``.
"""

from __future__ import annotations

import dataclasses
import hashlib
import re
from collections.abc import Collection, Iterable, Mapping
from typing import Literal

from figproof.model.context import RunContext
from figproof.model.findings import Detail, Finding, Hit, Instance, Severity
from figproof.model.records import FigureModel, ScriptRun, Source
from figproof.rules import axes, bars, colour, distribution, environment, reproduce, run, visibility
from figproof.rules.base import Rule

RULES: tuple[Rule, ...] = (axes.RULES + bars.RULES + colour.RULES + distribution.RULES + run.RULES
                          + environment.RULES + reproduce.RULES + visibility.RULES)


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


_RANK = {"error": 0, "warning": 1, "note": 2}


def _instances(hit: Hit, fallback: Source, figure: str | None) -> tuple[Instance, ...]:
    details = hit.details or (Detail(message=hit.message, source=hit.source, axes=hit.axes),)
    out = []
    for d in details:
        src = d.source or hit.source or fallback
        out.append(Instance(message=d.message, path=src.path, line=src.line, cell=src.cell, figure=figure,
                            axes=d.axes if d.axes is not None else hit.axes))
    return tuple(out)


def _finding(r: Rule, hit: Hit, *, fallback: Source, figure: str | None, severity: Severity | None,
             script: str | None = None) -> Finding:
    """``severity`` is the user's configured one: it wins over the hit's own, which wins over the default."""
    src = hit.source or fallback
    return Finding(
        script=script,
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
        instances=_instances(hit, fallback, figure),
        cause_line=hit.cause.line if hit.cause is not None and (hit.cause.path, hit.cause.cell) == (src.path, src.cell)
        else None,
    )


def panel_name(figure: FigureModel | None, axes: int | None) -> str:
    """'axes 2 ("Drug A")': how messages name a panel (axes count from 1 for readers)."""
    if axes is None:
        return "the figure"
    title = ""
    if figure is not None and 0 <= axes < len(figure.axes):
        title = figure.axes[axes].title.strip()
    return f"axes {axes + 1}" + (f" ('{title[:40]}')" if title else "")


def _names(items: list[str], limit: int = 6) -> str:
    shown = items[:limit]
    rest = len(items) - len(shown)
    text = ", ".join(shown[:-1]) + (" and " if len(shown) > 1 else "") + shown[-1] if shown else ""
    return text + (f" and {rest} more" if rest > 0 else "")


def _merge(found: list[Finding], suffix: str) -> Finding:
    """One finding for several of the same cause: the worst one's words, every instance kept."""
    found = sorted(found, key=lambda f: (_RANK.get(f.severity, 3), f.sort_key()))
    head = found[0]
    instances = tuple(i for f in found for i in f.instances)
    return dataclasses.replace(head, message=f"{head.message} ({suffix})", instances=instances)


def apply(
    runs: Iterable[ScriptRun],
    context: RunContext,
    settings: Mapping[str, tuple[Severity | Literal["off"] | None, Mapping[str, float]]] | None = None,
    only: Collection[str] | None = None,
) -> list[Finding]:
    """Run every enabled rule (or the rules in ``only``); ``settings`` maps rule id to (severity or "off", knobs).

    An opt-in rule runs only when ``settings`` gives it a severity or ``only`` names it.

    Hits are grouped so each cause is reported once (see :class:`figproof.model.findings.Hit`).
    """
    settings = settings or {}
    runs = list(runs)
    found: list[Finding] = []
    for r in RULES:
        if only is not None and r.id not in only:
            continue
        severity, overrides = settings.get(r.id, (None, {}))
        if severity == "off" or (r.opt_in and severity is None and only is None):
            continue
        sev = severity
        knobs = {**r.defaults(), **overrides}
        grouped: dict[str, list[tuple[Finding, str]]] = {}
        for run_ in runs:
            script = Source(path=run_.path)
            if r.scope == "run":
                for hit in r.check(run_, context, knobs):
                    f = _finding(r, hit, fallback=script, figure=None, severity=sev, script=run_.path)
                    if hit.group:
                        grouped.setdefault(hit.group, []).append((f, run_.path))
                    else:
                        found.append(f)
                continue
            for fig in run_.figures:
                fallback = fig.source or script
                per_figure: dict[str, list[Finding]] = {}
                for hit in r.check(fig, knobs):
                    f = _finding(r, hit, fallback=fallback, figure=fig.id, severity=sev, script=run_.path)
                    if hit.group:
                        grouped.setdefault(hit.group, []).append((f, fig.id))
                    else:
                        per_figure.setdefault(cause(hit), []).append(f)
                for same in per_figure.values():
                    found.extend(_merge_same(fig, same))
        for items in grouped.values():
            where = sorted({w for _, w in items})
            if len(items) == 1:
                found.append(items[0][0])
            else:
                noun = "scripts" if r.scope == "run" else "figures"
                counted = f"{len(where)} {noun}"
                # a message that counts them already ("install openpyxl to ... of 8 scripts") is followed by names
                said = all(re.search(rf"(?<!\d){counted}\b", f.message) for f, _ in items)
                merged = _merge([f for f, _ in items], _names(where) if said else f"{counted}: {_names(where)}")
                if len({f.script for f, _ in items}) > 1:  # one cause across scripts: no one script owns it
                    merged = dataclasses.replace(merged, script=None)
                found.append(merged)
    return sorted(found, key=Finding.sort_key)


_NUMBER = re.compile(r"[-+]?\d+(?:\.\d+)?")


def cause(hit: Hit) -> str:
    """What makes two hits of one rule the same cause: their key and their words, numbers aside."""
    return f"{hit.key}\x1f{_NUMBER.sub('#', hit.message)}"


def _merge_same(figure: FigureModel, same: list[Finding]) -> list[Finding]:
    """Findings of one rule and figure with one key: one per figure, naming the panels when several."""
    if len(same) == 1:
        return same
    panels = sorted({f.axes for f in same if f.axes is not None})
    if len(panels) >= 2:
        names = [panel_name(figure, a) for a in panels]
        return [_merge(same, f"the same in {len(panels)} panels: {_names(names)}")]
    head = sorted(same, key=lambda f: (_RANK.get(f.severity, 3), f.sort_key()))[0]
    return [dataclasses.replace(head, instances=tuple(i for f in same for i in f.instances))]


__all__ = ["RULES", "apply", "by_id", "fingerprint", "knob_value", "panel_name"]

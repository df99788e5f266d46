"""The rule record and its decorator.

A rule is one small function plus its documentation.  The decorator builds a
frozen :class:`Rule` and registers nothing: each family module lists its rules
in a ``RULES`` tuple and :mod:`figproof.rules` concatenates them.
"""

from __future__ import annotations

import inspect
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field

from figproof.model.findings import CONFIDENCES, SEVERITIES, Confidence, Hit, Severity

Knobs = Mapping[str, float]


@dataclass(frozen=True, slots=True, kw_only=True)
class Knob:
    """A numeric setting of a rule, configurable under ``[tool.figproof.rules.<id>]``."""

    name: str
    default: float
    help: str
    minimum: float | None = None
    maximum: float | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Rule:
    """A check with its id, documentation, defaults and worked Bad/Good examples.

    ``scope`` is ``"figure"`` (``check(figure, knobs)``) or ``"run"``
    (``check(run, context, knobs)``, with the run context).  ``bad`` and ``good``
    are complete figure scripts: the test suite runs them through the child
    process and requires that ``bad`` raises the rule and ``good`` does not.
    """

    id: str
    summary: str
    why: str
    fix: str
    sources: tuple[str, ...]
    severity: Severity
    confidence: Confidence
    scope: str
    knobs: tuple[Knob, ...]
    bad: str
    good: str
    check: Callable[..., Iterator[Hit]] = field(repr=False)
    former_ids: tuple[str, ...] = ()  # ids this rule had before, oldest first; still accepted, with a note
    opt_in: bool = False  # runs only when the config gives it a severity (or a caller asks for it by id)

    def defaults(self) -> dict[str, float]:
        return {k.name: k.default for k in self.knobs}

    @property
    def fingerprint_id(self) -> str:
        """The id fingerprints are built from: the first id the rule had, so a rename keeps accepted findings."""
        return self.former_ids[0] if self.former_ids else self.id


def rule(
    id: str,
    *,
    severity: Severity,
    confidence: Confidence,
    why: str,
    fix: str,
    sources: tuple[str, ...],
    bad: str,
    good: str,
    scope: str = "figure",
    knobs: tuple[Knob, ...] = (),
    former_ids: tuple[str, ...] = (),
    opt_in: bool = False,
) -> Callable[[Callable[..., Iterator[Hit]]], Rule]:
    """Turn a check function into a :class:`Rule`; its docstring's first line is the summary."""
    if severity not in SEVERITIES:
        raise ValueError(f"rule {id}: unknown severity {severity!r}")
    if confidence not in CONFIDENCES:
        raise ValueError(f"rule {id}: unknown confidence {confidence!r}")
    if scope not in ("figure", "run"):
        raise ValueError(f"rule {id}: unknown scope {scope!r}")

    def wrap(fn: Callable[..., Iterator[Hit]]) -> Rule:
        doc = inspect.getdoc(fn) or ""
        summary = doc.splitlines()[0].strip() if doc else id
        return Rule(
            id=id,
            summary=summary,
            why=inspect.cleandoc(why),
            fix=inspect.cleandoc(fix),
            sources=sources,
            severity=severity,
            confidence=confidence,
            scope=scope,
            knobs=knobs,
            bad=inspect.cleandoc(bad) + "\n",
            good=inspect.cleandoc(good) + "\n",
            check=fn,
            former_ids=former_ids,
            opt_in=opt_in,
        )

    return wrap


def counted(part: int, whole: int, singular: str = "", plural: str = "") -> str:
    """'9 of 24 points (38%)': the count, the noun (if any), then the share."""
    share = 100.0 * part / whole if whole else 0.0
    noun = singular if whole == 1 else plural
    return f"{part} of {whole}{' ' + noun if noun else ''} ({share:.0f}%)"


def pct(part: int, whole: int) -> str:
    """Format a share for messages: ``"9 of 24 (38%)"``."""
    return counted(part, whole)


def renamed_ids(catalogue: Mapping[str, Rule]) -> dict[str, str]:
    """Former rule id → current id, over a catalogue."""
    return {old: r.id for r in catalogue.values() for old in r.former_ids}


__all__ = ["Knob", "Knobs", "Rule", "counted", "pct", "renamed_ids", "rule"]

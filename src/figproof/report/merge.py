"""Merging the JSON reports of the shards of one check (``figproof merge``) into one report with one verdict.

The shards' scripts and findings are joined, the summary is counted again, committed figures that no shard's
scripts wrote are judged over all shards together, and pass or fail is decided by :mod:`figproof.policy.verdict`.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from typing import Any

from figproof.model.findings import SEVERITIES
from figproof.policy.verdict import crosses
from figproof.report.json import SCHEMA

_COUNT_KEYS = {"error": "errors", "warning": "warnings", "note": "notes"}


class MergeError(ValueError):
    """Reports that cannot be merged; the message is one line naming the report."""


def _load(text: str, n: int | str) -> dict[str, Any]:
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise MergeError(f"report {n}: not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})") from None
    if not isinstance(data, dict):
        raise MergeError(f"report {n}: expected a figproof JSON report (an object)")
    if data.get("schema") != SCHEMA:
        raise MergeError(f"report {n}: report schema {data.get('schema')!r}, "
                         f"this figproof merges schema {SCHEMA}")
    for key, kind in (("scripts", list), ("findings", list), ("summary", dict)):
        if not isinstance(data.get(key), kind):
            raise MergeError(f"report {n}: '{key}' must be a {kind.__name__}")
    if not isinstance(data["summary"].get("passed"), bool):
        raise MergeError(f"report {n}: 'summary.passed' must be true or false")
    return data


def _same(reports: list[dict[str, Any]], key: str) -> Any:
    values = [r.get(key) for r in reports]
    for n, v in enumerate(values[1:], start=2):
        if v != values[0]:
            raise MergeError(f"report {n}: '{key}' is {v!r} but report 1 has {values[0]!r}; "
                             "merge reports of one check only")
    return values[0]


def _finding_order(f: Any) -> tuple[str, int, str, str]:
    if not isinstance(f, dict):
        return ("", 0, "", "")
    line = f.get("line")
    return (str(f.get("path", "")), line if isinstance(line, int) else 0,
            str(f.get("rule", "")), str(f.get("message", "")))


def _figures(scripts: list[Any], reports: list[dict[str, Any]]) -> int:
    if scripts and all(isinstance(s, dict) and isinstance(s.get("figures"), list) for s in scripts):
        return sum(len(s["figures"]) for s in scripts)
    # Reports that do not list figures per script: trust each shard's own count.
    return sum(r["summary"].get("figures", 0) for r in reports if isinstance(r["summary"].get("figures"), int))


def merge_reports(json_texts: Sequence[str], names: Sequence[str] | None = None) -> dict[str, Any]:
    """Combine JSON reports (schema 2) of the shards of one check into one report with one verdict.

    Scripts and findings are concatenated (findings re-sorted by path, line, rule); summary counts
    are recomputed from them; ``passed`` is true only if every shard passed.  Reports must share
    schema, tool, root and any other top-level setting; a script may appear in one report only.

    Raises
    ------
    MergeError
        With a one-line message naming the report (1-based) and the fault.
    """
    if not json_texts:
        raise MergeError("nothing to merge: give the JSON reports of the shards")
    labels = list(names) if names is not None else [str(n) for n in range(1, len(json_texts) + 1)]
    reports = [_load(t, label) for label, t in zip(labels, json_texts, strict=True)]
    merged: dict[str, Any] = {"schema": SCHEMA}
    for key in ("tool", "root"):
        if any(key in r for r in reports):
            merged[key] = _same(reports, key)

    scripts: list[Any] = []
    owner: dict[str, int] = {}
    for n, r in enumerate(reports, start=1):
        for s in r["scripts"]:
            path = s.get("path") if isinstance(s, dict) else None
            if isinstance(path, str):
                if path in owner:
                    raise MergeError(f"report {n}: script {path!r} is also in report {owner[path]}; shards overlap")
                owner[path] = n
            scripts.append(s)
    scripts.sort(key=lambda s: str(s.get("path", "")) if isinstance(s, dict) else "")
    ran = set(owner)
    not_run = sorted({s for r in reports for s in _strings(r.get("not_run")) if s not in ran})
    findings, pending = _judge_orphans(reports, not_run)
    findings.sort(key=_finding_order)

    # Other top-level keys (e.g. a fail-on setting) must agree, except lists, which are joined.
    for key in sorted({k for r in reports for k in r} - {"schema", "tool", "root", "scripts", "findings", "summary",
                                                          "not_run", "pending"}):
        values = [r[key] for r in reports if key in r]
        if all(isinstance(v, list) for v in values):
            joined: list[Any] = []
            for v in values:
                joined.extend(x for x in v if x not in joined)
            merged[key] = joined
        else:
            merged[key] = _same([r for r in reports if key in r], key)

    summary: dict[str, Any] = {
        "scripts": len(scripts),
        "figures": _figures(scripts, reports),
        **{_COUNT_KEYS[sev]: 0 for sev in SEVERITIES},
    }
    accepted = 0
    for f in findings:
        if isinstance(f, dict) and f.get("accepted"):
            accepted += 1
        elif isinstance(f, dict) and f.get("severity") in _COUNT_KEYS:
            summary[_COUNT_KEYS[f["severity"]]] += 1
    if accepted or any("accepted" in r["summary"] for r in reports):
        summary["accepted"] = accepted
    fail_on = merged.get("fail_on")
    if fail_on in (*SEVERITIES, "never"):  # the verdict over the merged findings (orphans judged again)
        summary["passed"] = not any(isinstance(f, dict) and not f.get("accepted")
                                    and f.get("severity") in SEVERITIES
                                    and crosses(f["severity"], fail_on)
                                    for f in findings)
    else:
        summary["passed"] = all(r["summary"]["passed"] for r in reports)
    merged.update(scripts=scripts, findings=findings, summary=summary)
    if not_run:
        merged.update(not_run=not_run, pending=sorted(pending, key=_finding_order))
    return merged


def _strings(value: Any) -> list[str]:
    return [v for v in value if isinstance(v, str)] if isinstance(value, list) else []


def _judge_orphans(reports: list[dict[str, Any]], not_run: list[str]) -> tuple[list[Any], list[Any]]:
    """Findings of all shards with orphans judged over the union of their scripts; and what stays pending.

    A shard reports a committed figure that its own scripts did not write either as a finding (when it
    knew what the other scripts write) or as pending.  Over the union it is an orphan only when every
    shard saw it so; while some figure script ran in no shard (``not_run``), it stays pending.
    """
    def view(r: dict[str, Any]) -> dict[tuple[str, str], Any]:
        out = {}
        for f in [*r["findings"], *(r.get("pending") or [])]:
            if isinstance(f, dict) and f.get("rule") == "figure-orphan":
                out[(str(f.get("path")), str(f.get("fingerprint")))] = f
        return out

    views = [view(r) for r in reports]
    common = set(views[0]).intersection(*views[1:])
    others = [f for r in reports for f in r["findings"]
              if not (isinstance(f, dict) and f.get("rule") == "figure-orphan")]
    orphans: dict[tuple[str, str], Any] = {}
    for key in sorted(common):
        # the shard whose view says scripts did not finish has the more careful wording
        candidates = [v[key] for v in views]
        orphans[key] = next((c for c in candidates if c.get("confidence") == "possible"), candidates[0])
    decided = {key for r in reports for f in r["findings"] if isinstance(f, dict)
               and (key := (str(f.get("path")), str(f.get("fingerprint")))) in orphans}
    if not not_run:
        return others + list(orphans.values()), []
    findings = others + [f for k, f in orphans.items() if k in decided]
    return findings, [f for k, f in orphans.items() if k not in decided]


__all__ = ["MergeError", "merge_reports"]

"""SARIF 2.1.0 output (the OASIS standard that code-hosting platforms ingest).

One run; the driver lists every rule of the catalogue with its summary, why,
fix and default level; each finding becomes one result located in the repo, its instances
(when one finding stands for several occurrences of a cause) its related locations
(``uriBaseId`` ``REPOROOT``).  Notebook lines count inside a cell, not inside
the .ipynb file, so a notebook result carries no region: its cell and line
go into the message instead.  Accepted findings stay in the log as
suppressed results, so a platform shows them as dismissed rather than new.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from typing import Any
from urllib.parse import quote

from figproof.model.findings import CheckResult, Finding, Instance
from figproof.rules.base import Rule

SCHEMA_URI = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
BASE_ID = "REPOROOT"
FINGERPRINT_KEY = "figproof/v1"

# SARIF's result.level has exactly these three failure levels (SARIF 2.1.0 §3.27.10).
LEVELS = {"error": "error", "warning": "warning", "note": "note"}

# "precision" is the rule property code-scanning platforms read to rank how sure a tool is.
PRECISION = {"certain": "very-high", "likely": "high", "possible": "medium"}


def _uri(path: str) -> str:
    """A repo-relative POSIX path as a relative URI reference (spaces and the like percent-encoded)."""
    return quote(path.replace("\\", "/"), safe="/-._~")


def _where(f: Finding) -> str:
    if f.cell is None:
        return ""
    line = f", line {f.line}" if f.line is not None else ""
    return f"cell {f.cell}{line}"


def _descriptor(r: Rule) -> dict[str, Any]:
    return {
        "id": r.id,
        "shortDescription": {"text": r.summary},
        "fullDescription": {"text": r.why},
        # The fix text uses backticks for code, so it is also valid markdown.
        "help": {"text": r.fix, "markdown": r.fix},
        # SARIF 2.1.0 section 3.50.3: an opt-in rule is not enabled unless configured
        "defaultConfiguration": {"level": LEVELS.get(r.severity, "warning"),
                                 **({"enabled": False} if r.opt_in else {})},
        "properties": {
            "confidence": r.confidence,
            "precision": PRECISION.get(r.confidence, "medium"),
            "scope": r.scope,
            "sources": list(r.sources),
            "tags": ["figproof", r.scope],
        },
    }


def _related(k: int, i: Instance) -> dict[str, Any]:
    """One instance of a grouped finding as a SARIF related location (SARIF 2.1.0 §3.27.22)."""
    physical: dict[str, Any] = {"artifactLocation": {"uri": _uri(i.path), "uriBaseId": BASE_ID}}
    if i.cell is None and i.line is not None and i.line >= 1:
        physical["region"] = {"startLine": i.line}
    text = i.message if i.cell is None else f"{i.message} (cell {i.cell}" + (f", line {i.line})" if i.line else ")")
    return {"id": k, "physicalLocation": physical, "message": {"text": text}}


def _result(f: Finding, index: dict[str, int]) -> dict[str, Any]:
    where = _where(f)
    text = f"{f.message} ({where})" if where else f.message
    physical: dict[str, Any] = {"artifactLocation": {"uri": _uri(f.path), "uriBaseId": BASE_ID}}
    if f.cell is None and f.line is not None and f.line >= 1:
        physical["region"] = {"startLine": f.line}
    props: dict[str, Any] = {"confidence": f.confidence}
    for name in ("figure", "axes", "cell"):
        value = getattr(f, name)
        if value is not None:
            props[name] = value
    if f.cell is not None and f.line is not None:
        props["cellLine"] = f.line
    if f.script is not None and f.script != f.path:  # located in a helper module this script ran
        props["script"] = f.script
    out: dict[str, Any] = {
        "ruleId": f.rule,
        "level": LEVELS.get(f.severity, "warning"),
        "message": {"text": text},
        "locations": [{"physicalLocation": physical}],
        "properties": props,
    }
    related = [_related(k, i) for k, i in enumerate(f.instances) if len(f.instances) > 1]
    if related:
        out["relatedLocations"] = related
    if f.rule in index:
        out["ruleIndex"] = index[f.rule]
    if f.fingerprint:
        out["partialFingerprints"] = {FINGERPRINT_KEY: f.fingerprint}
    if f.accepted is not None:
        # An allow comment lives in the analysed file; an accepted-findings entry lives outside it.
        kind = "inSource" if f.accepted_by == "comment" else "external"
        out["suppressions"] = [{"kind": kind, "status": "accepted", "justification": f.accepted}]
    return out


def render(result: CheckResult, rules: Sequence[Rule]) -> str:
    """Render ``result`` as a SARIF 2.1.0 log with one run.

    Parameters
    ----------
    result
        The finished check (findings already carry policy severities and acceptance).
    rules
        The rule catalogue to describe in ``tool.driver.rules`` (usually ``figproof.rules.RULES``).

    Returns
    -------
    str
        Deterministic JSON text (sorted keys, two-space indent, trailing newline).
    """
    descriptors = [_descriptor(r) for r in rules]
    index = {r.id: i for i, r in enumerate(rules)}
    findings = sorted(result.findings, key=Finding.sort_key)
    s = result.summary
    run: dict[str, Any] = {
        "tool": {"driver": {"name": "figproof", "version": result.version, "rules": descriptors}},
        "originalUriBaseIds": {
            BASE_ID: {"description": {"text": f"The root of the checked repository ({result.root})."}}
        },
        "results": [_result(f, index) for f in findings],
        "invocations": [
            {
                "executionSuccessful": True,
                "toolExecutionNotifications": [
                    {"level": "note", "message": {"text": note}} for note in result.notes
                ],
            }
        ],
        "properties": {
            "passed": s.passed,
            "failOn": result.fail_on,
            "summary": {
                "scripts": s.scripts,
                "figures": s.figures,
                "errors": s.errors,
                "warnings": s.warnings,
                "notes": s.notes,
                "accepted": s.accepted,
            },
        },
    }
    log = {"$schema": SCHEMA_URI, "version": "2.1.0", "runs": [run]}
    return json.dumps(log, sort_keys=True, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


__all__ = ["BASE_ID", "FINGERPRINT_KEY", "LEVELS", "SCHEMA_URI", "render"]

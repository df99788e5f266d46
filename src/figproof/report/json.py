"""The JSON report (schema 2): the contract other tools read.  See docs/json-report.md."""

from __future__ import annotations

import json
from typing import Any

from figproof.model.findings import CheckResult, Finding, Instance
from figproof.model.records import ScriptRun

SCHEMA = 2  # 2: every finding lists its instances (one finding per cause)


def _script(run: ScriptRun, timings: bool) -> dict[str, Any]:
    inputs: dict[str, str | None] = {}
    for ev in run.events:
        if ev.action == "read":
            inputs.setdefault(ev.path, ev.sha256)
    out: dict[str, Any] = {
        "path": run.path,
        "status": run.status,
        "working_dir": run.working_dir,
        "inputs": [{"path": p, "sha256": h} for p, h in sorted(inputs.items())],
        "figures": [{"id": f.id, "outputs": list(f.outputs), "axes": len(f.axes)} for f in run.figures],
        "isolation": list(run.isolation),
        "notes": list(run.notes),
    }
    if run.error is not None:
        out["error"] = {"kind": run.error.kind, "type": run.error.type, "message": run.error.message,
                        "line": run.error.source.line if run.error.source else None}
    if timings:
        out["seconds"] = round(run.seconds, 2)
    return out


def _instance(i: Instance) -> dict[str, Any]:
    out: dict[str, Any] = {"message": i.message, "path": i.path, "line": i.line, "figure": i.figure, "axes": i.axes}
    if i.cell is not None:
        out["cell"] = i.cell
    return out


def finding_json(f: Finding) -> dict[str, Any]:
    out: dict[str, Any] = {
        "rule": f.rule, "severity": f.severity, "confidence": f.confidence, "path": f.path, "line": f.line,
        "figure": f.figure, "axes": f.axes, "message": f.message, "help": f.help, "fingerprint": f.fingerprint,
    }
    if f.cell is not None:
        out["cell"] = f.cell
    if f.script is not None and f.script != f.path:  # located in a helper module the script ran
        out["script"] = f.script
    out["instances"] = [_instance(i) for i in f.instances]
    if f.accepted is not None:
        out["accepted"] = f.accepted
    return out


def report_dict(result: CheckResult, *, timings: bool = False) -> dict[str, Any]:
    s = result.summary
    out: dict[str, Any] = {
        "schema": SCHEMA,
        "tool": {"name": "figproof", "version": result.version},
        "root": result.root,
        "fail_on": result.fail_on,
        "scripts": [_script(r, timings) for r in result.runs],
        "findings": [finding_json(f) for f in result.findings],
        "summary": {"scripts": s.scripts, "figures": s.figures, "errors": s.errors, "warnings": s.warnings,
                    "notes": s.notes, "accepted": s.accepted, "passed": s.passed},
        "notes": list(result.notes),
        "working_tree_changes": [{"path": c.path, "change": c.change} for c in result.tree_changes],
    }
    if result.helpers:  # repo modules not run on their own: the scripts that import them ran
        out["helpers"] = [{"path": h, "used_by": list(users)} for h, users in result.helpers]
    if result.not_run:  # a partial check: which figure scripts did not run, and what it could not judge alone
        out["not_run"] = list(result.not_run)
        out["pending"] = [finding_json(f) for f in result.pending]
    return out


def render(result: CheckResult, *, timings: bool = False) -> str:
    """Serialise ``result`` deterministically (sorted keys, no NaN)."""
    return json.dumps(report_dict(result, timings=timings), sort_keys=True, allow_nan=False, indent=2) + "\n"

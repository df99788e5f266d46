"""Merging the JSON reports (schema 2, docs/json-report.md) of the shards of one check into one report."""

from __future__ import annotations

import json

import pytest

from figproof.report.merge import MergeError, merge_reports


def _report(scripts: list[str], findings: list[dict], passed: bool, **extra: object) -> str:
    data = {
        "schema": 2, "tool": {"name": "figproof", "version": "0.1.0"}, "root": ".",
        "scripts": [{"path": p, "status": "ok", "seconds": 1.0, "inputs": [],
                     "figures": [{"id": f"{p}#1", "outputs": [], "axes": 1}]} for p in scripts],
        "findings": findings,
        "summary": {"scripts": len(scripts), "figures": len(scripts),
                    "errors": sum(f["severity"] == "error" for f in findings),
                    "warnings": sum(f["severity"] == "warning" for f in findings),
                    "notes": sum(f["severity"] == "note" for f in findings), "passed": passed},
        **extra,
    }
    return json.dumps(data)


def _finding(path: str, severity: str, line: int = 1, **kw: object) -> dict:
    return {"rule": "points-hidden", "severity": severity, "confidence": "likely", "path": path,
            "line": line, "figure": f"{path}#1", "axes": 0, "message": "m", "help": "h", **kw}


def test_merge_recomputes_summary_and_verdict() -> None:
    a = _report(["z.py", "a.py"], [_finding("z.py", "error"), _finding("a.py", "note", 5)], passed=False,
                notes=["cache reused for a.py"])
    b = _report(["m.py"], [_finding("m.py", "warning"), _finding("m.py", "error", 2, accepted="published")],
                passed=True, notes=["cache reused for a.py", "m.py slow"])
    merged = merge_reports([a, b])
    assert [s["path"] for s in merged["scripts"]] == ["a.py", "m.py", "z.py"]
    assert [(f["path"], f["line"]) for f in merged["findings"]] == [("a.py", 5), ("m.py", 1), ("m.py", 2), ("z.py", 1)]
    assert merged["summary"] == {"scripts": 3, "figures": 3, "errors": 1, "warnings": 1, "notes": 1,
                                 "accepted": 1, "passed": False}
    assert merged["notes"] == ["cache reused for a.py", "m.py slow"]
    assert merged["tool"] == {"name": "figproof", "version": "0.1.0"} and merged["schema"] == 2
    assert merge_reports([_report(["a.py"], [], True), _report(["b.py"], [], True)])["summary"]["passed"] is True


def test_merge_of_one_report_keeps_its_content() -> None:
    text = _report(["a.py"], [_finding("a.py", "warning")], passed=True)
    merged = merge_reports([text])
    original = json.loads(text)
    assert merged["scripts"] == original["scripts"] and merged["findings"] == original["findings"]
    assert merged["summary"] == original["summary"]


@pytest.mark.parametrize(("texts", "expected"), [
    ([], "nothing to merge"),
    (["{"], "report 1: not valid JSON"),
    (["[]"], "report 1: expected a figproof JSON report"),
    ([_report(["a.py"], [], True), json.dumps({**json.loads(_report(["b.py"], [], True)), "schema": 1})],
     "report 2: report schema 1, this figproof merges schema 2"),
    ([_report(["a.py"], [], True), _report(["a.py"], [], True)], "script 'a.py' is also in report 1"),
    ([_report(["a.py"], [], True),
      json.dumps({**json.loads(_report(["b.py"], [], True)), "tool": {"name": "figproof", "version": "0.2.0"}})],
     "report 2: 'tool'"),
    ([_report(["a.py"], [], True, fail_on="error"), _report(["b.py"], [], True, fail_on="warning")],
     "report 2: 'fail_on'"),
    ([json.dumps({"schema": 2, "scripts": [], "findings": [], "summary": {}})], "'summary.passed'"),
])
def test_merge_rejects_mismatched_or_broken_reports(texts: list[str], expected: str) -> None:
    with pytest.raises(MergeError) as info:
        merge_reports(texts)
    assert expected in str(info.value) and "\n" not in str(info.value)

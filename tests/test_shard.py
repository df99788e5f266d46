"""Shard selection and merging of JSON reports (schema 2: DESIGN.md's schema 1 plus each finding's instances)."""

from __future__ import annotations

import json

import pytest
from scipy import stats

from figproof.discover.shard import ShardError, merge_reports, parse_shard, select_shard

SCRIPTS = [f"figures/panel_{i:03d}.py" for i in range(1000)]


@pytest.mark.parametrize(("spec", "expected"), [
    ("3/2", "K must be between 1 and N=2 (got 3)"),
    ("0/2", "K must be between 1 and N=2 (got 0)"),
    ("1/0", "N must be at least 1 (got 0)"),
    ("junk", "expected K/N"),
    ("", "expected K/N"),
    ("-1/2", "expected K/N"),
    ("1.5/3", "expected K/N"),
    ("1/2/3", "expected K/N"),
])
def test_bad_specs_are_one_line_errors(spec: str, expected: str) -> None:
    with pytest.raises(ShardError) as info:
        select_shard(SCRIPTS, spec)
    assert expected in str(info.value) and "\n" not in str(info.value)


def test_spec_tolerates_spaces() -> None:
    assert parse_shard(" 2 / 4 ") == (2, 4)


def test_shards_partition_the_scripts_in_order() -> None:
    shards = [select_shard(SCRIPTS, f"{k}/4") for k in range(1, 5)]
    assert sorted(s for shard in shards for s in shard) == sorted(SCRIPTS)
    for shard in shards:
        assert shard == [s for s in SCRIPTS if s in set(shard)]  # given order kept
    assert select_shard(SCRIPTS, "1/1") == SCRIPTS


def test_shares_are_uniform() -> None:
    counts = [len(select_shard(SCRIPTS, f"{k}/4")) for k in range(1, 5)]
    # Pearson's chi-square goodness of fit against equal shares (scipy.stats.chisquare):
    # a fair hash leaves p far above 0.001.
    assert stats.chisquare(counts).pvalue > 1e-3


def test_adding_scripts_moves_no_existing_script() -> None:
    before = set(select_shard(SCRIPTS[:600], "3/5"))
    after = set(select_shard(SCRIPTS, "3/5"))
    assert before == after & set(SCRIPTS[:600])


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
    with pytest.raises(ShardError) as info:
        merge_reports(texts)
    assert expected in str(info.value) and "\n" not in str(info.value)

"""SARIF output, validated against the official OASIS SARIF 2.1.0 JSON schema.

Source of the schema: tests/data/sarif/sarif-schema-2.1.0.json (OASIS SARIF TC, 2.1.0 Errata 01;
see NOTICE.md beside it).  Level names and suppression kinds are from the SARIF 2.1.0 spec
(§3.27.10 result.level, §3.35 suppression).
"""

from __future__ import annotations

import json
from pathlib import Path
from urllib.parse import unquote

import jsonschema
import pytest

from figproof.model.findings import CheckResult, Finding, Summary
from figproof.report import sarif
from figproof.rules import RULES
from figproof.rules.base import Rule

SCHEMA = json.loads((Path(__file__).parent / "data" / "sarif" / "sarif-schema-2.1.0.json").read_text("utf-8"))


def _figure_rule() -> Rule:
    return Rule(
        id="bars-for-continuous",
        summary="Bars summarise continuous measurements.",
        why="Bars hide the distribution.",
        fix="Plot the points with `ax.scatter`.",
        sources=("Weissgerber et al. 2015, PLoS Biol 13:e1002128",),
        severity="error",
        confidence="likely",
        scope="figure",
        knobs=(),
        bad="",
        good="",
        check=lambda figure, knobs: iter(()),
    )


def _finding(**kw: object) -> Finding:
    base = dict(rule="bars-for-continuous", severity="error", confidence="likely", path="figures/growth.py",
                line=14, figure="figures/growth.py#1", axes=0, message="3 bars show means of 40 values",
                fingerprint="0123456789abcdef")
    base.update(kw)
    return Finding(**base)  # type: ignore[arg-type]


def _result(findings: list[Finding], notes: tuple[str, ...] = ()) -> CheckResult:
    errors = sum(f.severity == "error" and f.accepted is None for f in findings)
    return CheckResult(root=".", version="0.1.0", runs=(), findings=tuple(findings), notes=notes,
                       summary=Summary(scripts=2, figures=3, errors=errors, warnings=0, notes=0,
                                       accepted=sum(f.accepted is not None for f in findings),
                                       passed=errors == 0))


FINDINGS = [
    _finding(),
    _finding(rule="script-fails", severity="warning", confidence="certain", path="my figs/old plot.py",
             line=None, figure=None, axes=None, message="my figs/old plot.py raised KeyError: 'dose'",
             fingerprint="fedcba9876543210"),
    _finding(path="analysis/fig2.ipynb", line=3, cell=4, severity="note", fingerprint="1111111111111111"),
    _finding(line=30, accepted="n is 200 per group; bars are counts", accepted_by="comment",
             fingerprint="2222222222222222"),
    _finding(line=40, accepted="legacy figure, kept as published", accepted_by="file",
             fingerprint="3333333333333333"),
]
RULESET = (_figure_rule(), *RULES)


def _log(findings: list[Finding] = FINDINGS, notes: tuple[str, ...] = ()) -> dict:
    return json.loads(sarif.render(_result(findings, notes), RULESET))


def test_output_validates_against_official_schema() -> None:
    log = _log(notes=("figures/slow.py was skipped: cached result reused",))
    jsonschema.Draft4Validator(SCHEMA, format_checker=jsonschema.FormatChecker()).validate(log)
    assert log["version"] == "2.1.0"
    assert len(log["runs"]) == 1


def test_empty_result_validates() -> None:
    jsonschema.Draft4Validator(SCHEMA).validate(_log([]))


def test_schema_is_live() -> None:
    # Guard against a validator that accepts anything: a level outside SARIF's enum must be rejected.
    log = _log()
    log["runs"][0]["results"][0]["level"] = "fatal"
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft4Validator(SCHEMA).validate(log)


def test_driver_describes_rules() -> None:
    driver = _log()["runs"][0]["tool"]["driver"]
    assert driver["name"] == "figproof" and driver["version"] == "0.1.0"
    first = driver["rules"][0]
    assert first["id"] == "bars-for-continuous"
    assert first["shortDescription"]["text"] == "Bars summarise continuous measurements."
    assert first["fullDescription"]["text"] == "Bars hide the distribution."
    assert first["help"]["text"] == "Plot the points with `ax.scatter`."
    assert first["defaultConfiguration"]["level"] == "error"
    assert [r["id"] for r in driver["rules"]] == [r.id for r in RULESET]


def test_results_levels_locations_fingerprints() -> None:
    run = _log()["runs"][0]
    by_fp = {r["partialFingerprints"]["figproof/v1"]: r for r in run["results"]}
    script = by_fp["0123456789abcdef"]
    assert script["level"] == "error"
    loc = script["locations"][0]["physicalLocation"]
    assert loc["artifactLocation"] == {"uri": "figures/growth.py", "uriBaseId": "REPOROOT"}
    assert loc["region"] == {"startLine": 14}
    assert run["tool"]["driver"]["rules"][script["ruleIndex"]]["id"] == script["ruleId"]

    failed = by_fp["fedcba9876543210"]
    assert failed["level"] == "warning"
    uri = failed["locations"][0]["physicalLocation"]["artifactLocation"]["uri"]
    assert " " not in uri and unquote(uri) == "my figs/old plot.py"
    assert "region" not in failed["locations"][0]["physicalLocation"]  # no line known


def test_notebook_result_names_cell_and_line_in_message() -> None:
    result = {r["partialFingerprints"]["figproof/v1"]: r for r in _log()["runs"][0]["results"]}["1111111111111111"]
    assert result["level"] == "note"
    loc = result["locations"][0]["physicalLocation"]
    assert loc["artifactLocation"]["uri"] == "analysis/fig2.ipynb"
    # A cell's line number is not a line of the .ipynb file, so no region may claim it.
    assert "region" not in loc
    assert result["message"]["text"].endswith("(cell 4, line 3)")


def test_accepted_findings_are_suppressions() -> None:
    results = {r["partialFingerprints"]["figproof/v1"]: r for r in _log()["runs"][0]["results"]}
    assert "suppressions" not in results["0123456789abcdef"]
    assert results["2222222222222222"]["suppressions"] == [
        {"kind": "inSource", "status": "accepted", "justification": "n is 200 per group; bars are counts"}]
    assert results["3333333333333333"]["suppressions"][0]["kind"] == "external"


def test_deterministic_and_sorted() -> None:
    a = sarif.render(_result(FINDINGS), RULESET)
    b = sarif.render(_result(list(reversed(FINDINGS))), RULESET)
    assert a == b
    paths = [r["locations"][0]["physicalLocation"]["artifactLocation"]["uri"] for r in json.loads(a)["runs"][0]["results"]]
    assert paths == sorted(paths, key=unquote)


def test_unknown_rule_has_no_rule_index() -> None:
    log = _log([_finding(rule="not-in-catalogue")])
    jsonschema.Draft4Validator(SCHEMA).validate(log)
    assert "ruleIndex" not in log["runs"][0]["results"][0]

"""GitLab code-quality report against the fields GitLab documents.

Source (from memory of GitLab's docs, "Code Quality report format", docs.gitlab.com
ci/testing/code_quality): the report is a JSON array of objects with required
description (string), check_name (string), fingerprint (string, unique per issue),
severity (one of info, minor, major, critical, blocker), location.path (repo-relative)
and location.lines.begin (integer line).  GitLab keeps only the first issue of a
repeated fingerprint, hence the uniqueness check.
"""

from __future__ import annotations

import json

from figproof.model.findings import CheckResult, Finding, Summary
from figproof.report import gitlab

GITLAB_SEVERITIES = {"info", "minor", "major", "critical", "blocker"}


def _f(**kw: object) -> Finding:
    base = dict(rule="axis-clips-data", severity="error", confidence="certain", path="figures/dose.py", line=21,
                figure="figures/dose.py#1", axes=0, message="4 of 30 error-bar ends lie above the y-limit 2.5",
                fingerprint="aaaaaaaaaaaaaaaa")
    base.update(kw)
    return Finding(**base)  # type: ignore[arg-type]


def _render(findings: list[Finding]) -> list[dict]:
    result = CheckResult(root=".", version="0.1.0", runs=(), findings=tuple(findings),
                         summary=Summary(scripts=1, figures=1, errors=1, warnings=0, notes=0, accepted=0,
                                         passed=False))
    return json.loads(gitlab.render(result))


def _check_documented_fields(issue: dict) -> None:
    assert isinstance(issue["description"], str) and issue["description"]
    assert isinstance(issue["check_name"], str) and issue["check_name"]
    assert isinstance(issue["fingerprint"], str) and issue["fingerprint"]
    assert issue["severity"] in GITLAB_SEVERITIES
    assert isinstance(issue["location"]["path"], str) and not issue["location"]["path"].startswith("/")
    begin = issue["location"]["lines"]["begin"]
    assert isinstance(begin, int) and begin >= 1


def test_fields_and_severity_mapping() -> None:
    issues = _render([
        _f(), _f(severity="warning", path="b.py", fingerprint="b" * 16), _f(severity="note", path="c.py", fingerprint="c" * 16),
        _f(path="nb/fig.ipynb", cell=2, line=7, fingerprint="d" * 16),
        _f(rule="figure-orphan", path="figures/old.png", line=None, figure=None, axes=None, fingerprint="e" * 16,
           severity="warning", message="figures/old.png is committed but no script writes it"),
    ])
    assert isinstance(issues, list) and len(issues) == 5
    for issue in issues:
        _check_documented_fields(issue)
    by_path = {i["location"]["path"]: i for i in issues}
    assert by_path["figures/dose.py"]["severity"] == "major"
    assert by_path["b.py"]["severity"] == "minor"
    assert by_path["c.py"]["severity"] == "info"
    assert by_path["figures/dose.py"]["location"]["lines"]["begin"] == 21
    assert by_path["figures/dose.py"]["check_name"] == "axis-clips-data"
    nb = by_path["nb/fig.ipynb"]
    assert nb["location"]["lines"]["begin"] == 1 and nb["description"].endswith("(cell 2, line 7)")
    assert by_path["figures/old.png"]["location"]["lines"]["begin"] == 1


def test_fingerprint_ignores_line_and_is_unique() -> None:
    moved = _render([_f(line=90)])[0]
    assert moved["fingerprint"] == _render([_f(line=21)])[0]["fingerprint"]
    twice = _render([_f(line=21), _f(line=40)])
    assert len({i["fingerprint"] for i in twice}) == 2


def test_missing_fingerprint_gets_a_stable_one() -> None:
    a = _render([_f(fingerprint="", line=3)])[0]["fingerprint"]
    b = _render([_f(fingerprint="", line=300)])[0]["fingerprint"]
    assert a and a == b


def test_accepted_findings_left_out_and_empty_is_array() -> None:
    assert _render([_f(accepted="kept as published", accepted_by="file")]) == []
    assert _render([]) == []

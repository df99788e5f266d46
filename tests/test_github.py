"""GitHub Actions annotations: escaping round trip and per-level caps.

The escape table is GitHub's workflow-command syntax as implemented in actions/toolkit
(packages/core/src/command.ts, escapeData/escapeProperty), recalled from memory: data escapes
% \\r \\n; properties additionally escape : and ,.  The decoder below is the inverse, written
independently of figproof's encoder.
"""

from __future__ import annotations

import re

import pytest

from figproof.model.findings import CheckResult, Finding, Summary
from figproof.report.github import annotation_lines, escape_data, escape_property

_LINE = re.compile(r"^::(?P<cmd>[a-z]+)(?: (?P<props>[^:]*))?::(?P<data>.*)$", re.DOTALL)


def _unescape(text: str, *, prop: bool) -> str:
    table = {"%0D": "\r", "%0A": "\n", "%25": "%"}
    if prop:
        table.update({"%3A": ":", "%2C": ","})
    # Decode left to right in one pass so "%253A" becomes "%3A", not ":".
    return re.sub(r"%(?:0D|0A|25|3A|2C)", lambda m: table.get(m.group(0), m.group(0)), text)


def decode(line: str) -> tuple[str, dict[str, str], str]:
    """Parse one workflow command as the runner would."""
    assert "\n" not in line and "\r" not in line, "a command must stay on one line"
    m = _LINE.match(line)
    assert m, line
    props: dict[str, str] = {}
    if m.group("props"):
        for part in m.group("props").split(","):
            key, _, value = part.partition("=")
            props[key] = _unescape(value, prop=True)
    return m.group("cmd"), props, _unescape(m.group("data"), prop=False)


def _f(**kw: object) -> Finding:
    base = dict(rule="points-hidden", severity="warning", confidence="likely", path="figures/a.py", line=3,
                message="9 of 24 points (38%) lie above the y-limit 40 and are not drawn")
    base.update(kw)
    return Finding(**base)  # type: ignore[arg-type]


def _result(findings: list[Finding]) -> CheckResult:
    return CheckResult(root=".", version="0.1.0", runs=(), findings=tuple(findings),
                       summary=Summary(scripts=1, figures=1, errors=0, warnings=0, notes=0, accepted=0,
                                       passed=True))


NASTY = ["100%", "a\nb\r\nc", "x: y, z", "%0A literal", "%253A", "::error::inject", "ünïcode, 5 µm"]


@pytest.mark.parametrize("text", NASTY)
def test_escape_round_trip(text: str) -> None:
    assert _unescape(escape_data(text), prop=False) == text
    assert _unescape(escape_property(text), prop=True) == text
    assert not set(escape_property(text)) & {":", ",", "\n", "\r"}


def test_annotation_round_trip_with_awkward_path_and_message() -> None:
    f = _f(path="figs/dose, 10:1/plot %.py", message="50% of bars\nhide: the data, really", severity="error")
    [line] = annotation_lines(_result([f]))
    cmd, props, data = decode(line)
    assert cmd == "error"
    assert props == {"file": "figs/dose, 10:1/plot %.py", "line": "3", "title": "figproof points-hidden (likely)"}
    assert data == "50% of bars\nhide: the data, really"


def test_levels_and_notebooks() -> None:
    lines = annotation_lines(_result([
        _f(severity="note"), _f(severity="error", path="b.py"),
        _f(path="nb/fig2.ipynb", cell=5, line=2, severity="warning"),
        _f(accepted="published figure", accepted_by="file"),
    ]))
    decoded = [decode(line) for line in lines]
    assert [d[0] for d in decoded] == ["error", "warning", "notice"]  # accepted finding is not annotated
    _, props, data = decoded[1]
    assert props["file"] == "nb/fig2.ipynb" and "line" not in props
    assert data.startswith("cell 5, line 2: ")


def test_cap_per_level_and_left_out_line() -> None:
    findings = [_f(severity="error", line=i) for i in range(1, 8)] + [_f(severity="note", line=i) for i in range(1, 4)]
    lines = annotation_lines(_result(findings), cap_per_level=5)
    decoded = [decode(line) for line in lines]
    assert sum(d[0] == "error" for d in decoded) == 5
    assert sum(d[0] == "notice" for d in decoded) == 4  # 3 notes + the summary line
    cmd, props, data = decoded[-1]
    assert cmd == "notice" and props == {"title": "figproof"}
    assert data.startswith("2 errors not annotated")
    # The first lines of each level are kept, in report order.
    assert [d[1]["line"] for d in decoded[:5]] == ["1", "2", "3", "4", "5"]


def test_no_findings_no_lines() -> None:
    assert annotation_lines(_result([])) == []

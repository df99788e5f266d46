"""One finding per cause: pairs of one axes, the same problem in several panels, one report entry each.

The colours are matplotlib's tab10 red, green, olive and orange; which pairs collapse for deutan readers
follows from the Machado et al. (2009) simulation in colorspacious, as the colour rule tests check.
"""

from __future__ import annotations

import json
from importlib import resources

import jsonschema
import numpy as np

from figproof import rules
from figproof.model.context import RunContext
from figproof.model.findings import CheckResult, Summary
from figproof.report import json as json_report
from figproof.report import markdown, sarif
from tests.builders import axes, figure, line, run


def _rgba(hex_: str) -> tuple[float, float, float, float]:
    return (int(hex_[1:3], 16) / 255, int(hex_[3:5], 16) / 255, int(hex_[5:7], 16) / 255, 1.0)


def _panel(index: int, *colors: str, title: str = "") -> object:
    marks = [line([0, 1], [i, i + 1], color=_rgba(c), label=f"strain {i + 1}", line_no=10 + i)
             for i, c in enumerate(colors)]
    ax = axes(index=index, lines=marks)
    return type(ax)(**{**{f: getattr(ax, f) for f in ax.__dataclass_fields__}, "title": title})


def _cvd(found: list) -> list:
    return [f for f in found if f.rule == "colours-confusable-cvd"]


def test_clashing_pairs_of_one_axes_are_one_finding_listing_each_pair() -> None:
    # tab:red, tab:green, tab:orange: red/green and orange/green collapse for deutan readers
    fig = figure(_panel(0, "#d62728", "#2ca02c", "#ff7f0e", "#2ca02d"))
    found = _cvd(rules.apply([run(fig)], RunContext()))
    assert len(found) == 1
    f = found[0]
    assert len(f.instances) >= 2 and "more pair" in f.message
    assert f.instances[0].message in f.message  # the worst pair leads, in the finding's own words
    assert all(i.figure == "fig.py#1" and i.axes == 0 for i in f.instances)


def test_the_same_clash_in_three_panels_is_one_finding_naming_them() -> None:
    fig = figure(*[_panel(k, "#d62728", "#2ca02c", title=f"site {k + 1}") for k in range(3)])
    found = _cvd(rules.apply([run(fig)], RunContext()))
    assert len(found) == 1
    f = found[0]
    assert "the same in 3 panels: axes 1 ('site 1'), axes 2 ('site 2') and axes 3 ('site 3')" in f.message
    assert sorted(i.axes for i in f.instances) == [0, 1, 2]


def test_different_clashes_in_two_panels_stay_two_findings() -> None:
    fig = figure(_panel(0, "#d62728", "#2ca02c"), _panel(1, "#1f77b4", "#1f78b5"))
    found = _cvd(rules.apply([run(fig)], RunContext()))
    assert len(found) == 2 and all(len(f.instances) == 1 for f in found)


def _result(found: list) -> CheckResult:
    return CheckResult(root=".", version="0", runs=(), findings=tuple(found),
                       summary=Summary(scripts=1, figures=1, errors=len(found), warnings=0, notes=0, accepted=0,
                                       passed=False))


def test_json_report_lists_instances_and_validates_against_the_shipped_schema() -> None:
    fig = figure(*[_panel(k, "#d62728", "#2ca02c") for k in range(2)])
    result = _result(rules.apply([run(fig)], RunContext()))
    data = json.loads(json_report.render(result))
    schema = json.loads(resources.files("figproof").joinpath("schema/report.schema.json").read_text("utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.Draft202012Validator(schema).validate(data)
    grouped = [f for f in data["findings"] if f["rule"] == "colours-confusable-cvd"]
    assert data["schema"] == 2 and len(grouped) == 1 and len(grouped[0]["instances"]) == 2


def test_sarif_has_one_result_per_finding_with_related_locations() -> None:
    fig = figure(*[_panel(k, "#d62728", "#2ca02c") for k in range(2)])
    result = _result(_cvd(rules.apply([run(fig)], RunContext())))
    log = json.loads(sarif.render(result, rules.RULES))
    results = log["runs"][0]["results"]
    assert len(results) == 1
    related = results[0]["relatedLocations"]
    assert [r["id"] for r in related] == [0, 1]
    assert all(r["physicalLocation"]["artifactLocation"]["uri"] == "fig.py" for r in related)


def test_markdown_shows_one_row_for_a_grouped_finding() -> None:
    fig = figure(*[_panel(k, "#d62728", "#2ca02c") for k in range(4)])
    text = markdown.render(_result(_cvd(rules.apply([run(fig)], RunContext()))))
    rows = [r for r in text.splitlines() if "colours-confusable-cvd" in r and r.startswith("| `")]
    assert len(rows) == 1 and "the same in 4 panels" in rows[0]


def test_a_single_finding_is_its_own_instance() -> None:
    fig = figure(_panel(0, "#d62728", "#2ca02c"))
    (f,) = _cvd(rules.apply([run(fig)], RunContext()))
    assert len(f.instances) == 1 and f.instances[0].line == f.line and np.isfinite(f.instances[0].line)

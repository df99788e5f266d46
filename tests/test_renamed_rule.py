"""A renamed rule id: `errorbars-sem` became `errorbars-ambiguous` (it reports SD, CI and percentile bars too).

The old id keeps working in config tables, allow comments, the accepted-findings file and `figproof explain`,
each time with a note, and findings keep their fingerprints so accepted findings still match.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from figproof import cli, rules
from figproof.config import ConfigError, load_config
from figproof.model.context import Inventory
from figproof.model.findings import Finding
from figproof.pipeline import accept_findings
from figproof.policy.accept import parse_allow_comments
from figproof.rules.base import renamed_ids

OLD, NEW = "errorbars-sem", "errorbars-ambiguous"


def _finding(path: str = "figs/a.py", line: int = 2) -> Finding:
    return Finding(rule=NEW, severity="note", confidence="certain", path=path, line=line, figure=f"{path}#1",
                   axes=0, message="error bars: the one shows ±1 SEM (n = 6)",
                   fingerprint=rules.fingerprint(rules.by_id()[NEW].fingerprint_id, path, f"{path}#1", 0, "errorbars:0"))


def test_the_catalogue_knows_the_old_id_as_the_new_one() -> None:
    assert renamed_ids(rules.by_id()) == {OLD: NEW}
    assert OLD not in rules.by_id()


def test_fingerprints_are_built_from_the_first_id_so_accepted_findings_survive_the_rename() -> None:
    # a finding accepted before the rename was fingerprinted with the old id
    before = rules.fingerprint(OLD, "figs/a.py", "figs/a.py#1", 0, "errorbars:0")
    assert _finding().fingerprint == before


def test_config_table_under_the_old_id_applies_to_the_new_rule_with_a_note(tmp_path: Path) -> None:
    (tmp_path / "figproof.toml").write_text(f'[rules.{OLD}]\nseverity = "warning"\nsmall-n = 5\n', encoding="utf-8")
    config = load_config(tmp_path, rules=rules.by_id())
    assert config.rules[NEW].severity == "warning"
    assert config.rules[NEW].knobs == {"small_n": 5.0}
    (note,) = config.notes
    assert f"'{OLD}' is now '{NEW}'" in note and note.startswith("figproof.toml [rules.errorbars-sem]")


def test_config_naming_both_ids_is_an_error(tmp_path: Path) -> None:
    (tmp_path / "figproof.toml").write_text(f'[rules.{OLD}]\nseverity = "off"\n[rules.{NEW}]\nseverity = "note"\n',
                                            encoding="utf-8")
    with pytest.raises(ConfigError, match="same rule"):
        load_config(tmp_path, rules=rules.by_id())


def test_allow_comment_with_the_old_id_accepts_the_finding_and_notes_the_rename() -> None:
    text = "x = 1\nax.errorbar(x, y, yerr=e)  # figproof: allow errorbars-sem -- the caption says SEM, n = 6\n"
    allows, problems = parse_allow_comments(text, rules.by_id().keys(), renamed_ids(rules.by_id()))
    assert [a.rule for a in allows[2]] == [NEW]
    assert problems == [f"line 2: rule id '{OLD}' is now '{NEW}'; the old id still works in this 0.x series, "
                        f"rename it"]


def test_accepted_entry_with_the_old_id_still_accepts_with_a_note(tmp_path: Path) -> None:
    f = _finding()
    (tmp_path / ".figproof-accepted.json").write_text(json.dumps(
        {"schema": 1, "accepted": [{"rule": OLD, "path": f.path, "fingerprint": f.fingerprint,
                                    "reason": "caption says SEM"}]}), encoding="utf-8")
    config = load_config(tmp_path, rules=rules.by_id())
    (marked,), notes = accept_findings([f], config, Inventory())
    assert marked.accepted == "caption says SEM" and marked.accepted_by == "file"
    assert notes == [f".figproof-accepted.json: rule id '{OLD}' is now '{NEW}'; the old id still works in this "
                     f"0.x series, rename it (`figproof accept` rewrites the file)"]


def test_explain_accepts_the_old_id(capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["explain", OLD]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"Note: rule id '{OLD}' is now '{NEW}'")
    assert f"\n{NEW}: What the error bars show" in out


def test_counts_in_the_verdict_line_agree_in_number() -> None:
    from figproof.model.findings import CheckResult, Summary
    from figproof.report.write import final_line

    summary = Summary(scripts=1, figures=1, errors=1, warnings=0, notes=1, accepted=0, passed=False)
    line = final_line(CheckResult(root=".", version="0", runs=(), findings=(), summary=summary))
    assert line.endswith("FAILED (1 error, 0 warnings, 1 note, 0 accepted)")

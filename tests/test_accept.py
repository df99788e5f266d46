"""Inline allow comments, the accepted-findings file, and applying both to findings."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import nbformat
import pytest

from figproof.model.findings import Finding
from figproof.policy.accept import (
    AcceptedFileError,
    Entry,
    allow_key,
    apply_acceptance,
    load_accepted,
    notebook_allow_comments,
    parse_allow_comments,
    write_accepted,
)
from figproof.rules import fingerprint

KNOWN = {"bars-for-continuous", "points-hidden", "axis-clips-data"}

SCRIPT = '''\
import matplotlib.pyplot as plt
fig, ax = plt.subplots()
ax.bar([0, 1], [3.2, 4.1])  # figproof: allow bars-for-continuous -- heights are counts of colonies
# figproof: allow points-hidden, axis-clips-data -- the outlier is shown in panel b
ax.scatter(x, y)
ax.plot(t, v)  # figproof: allow axis-clips-data -- zoomed on purpose
ax.plot(t, w)
label = "# figproof: allow points-hidden -- inside a string, not a comment"
'''


def _f(rule: str = "bars-for-continuous", line: int | None = 3, path: str = "figs/a.py",
       cell: int | None = None, key: str = "bars:0") -> Finding:
    return Finding(rule=rule, severity="error", confidence="likely", path=path, line=line, cell=cell,
                   figure=f"{path}#1", axes=0, message=f"{rule} at {line}",
                   fingerprint=fingerprint(rule, path, f"{path}#1", 0, key))


def test_parse_same_line_and_line_above() -> None:
    allows, problems = parse_allow_comments(SCRIPT, KNOWN)
    assert problems == []
    assert [(a.rule, a.own_line) for a in allows[3]] == [("bars-for-continuous", False)]
    assert allows[3][0].reason == "heights are counts of colonies"
    assert [a.rule for a in allows[4]] == ["points-hidden", "axis-clips-data"] and allows[4][0].own_line
    assert 8 not in allows  # text inside a string literal is not a comment


@pytest.mark.parametrize(("text", "expected"), [
    ("ax.bar(x, y)  # figproof: allow bars-for-continuous\n", "line 1: allow comment for bars-for-continuous has no reason"),
    ("ax.bar(x, y)  # figproof: allow bars-for-continuous --   \n", "has no reason"),
    ("ax.bar(x, y)  # figproof: allow bars-for-continous -- counts\n", "unknown rule 'bars-for-continous' (did you mean 'bars-for-continuous'?)"),
    ("ax.bar(x, y)  # figproof: allow -- counts\n", "line 1: allow comment names no rule"),
    ("\n\nax.bar(x, y)  # figproof: alow bars-for-continuous -- counts\n", "line 3: unknown figproof directive 'alow"),
])
def test_parse_problems_are_one_line(text: str, expected: str) -> None:
    allows, problems = parse_allow_comments(text, KNOWN)
    assert allows == {}
    assert len(problems) == 1 and expected in problems[0] and "\n" not in problems[0]


def test_partly_wrong_list_keeps_valid_ids() -> None:
    allows, problems = parse_allow_comments("x = 1  # figproof: allow points-hidden, nope -- why\n", KNOWN)
    assert [a.rule for a in allows[1]] == ["points-hidden"]
    assert problems == ["line 1: allow comment names unknown rule 'nope'"]


def test_tabs_and_tight_spacing() -> None:
    allows, problems = parse_allow_comments("x = 1  #figproof:allow\tpoints-hidden --jittered\n", KNOWN)
    assert problems == [] and allows[1][0].reason == "jittered"


def test_untokenizable_source_still_scanned() -> None:
    text = "ax.bar(x, y  # figproof: allow bars-for-continuous -- counts\n"  # unclosed bracket
    allows, problems = parse_allow_comments(text, KNOWN)
    assert problems == [] and allows[1][0].rule == "bars-for-continuous"


def test_apply_inline_rules() -> None:
    allows, _ = parse_allow_comments(SCRIPT, KNOWN)
    by_path = {allow_key("figs/a.py", None): allows}
    findings = [
        _f(line=3),                                    # trailing comment on the plotting line
        _f("points-hidden", line=5, key="p"),          # comment alone on the line above
        _f("axis-clips-data", line=5, key="c"),
        _f("axis-clips-data", line=7, key="c2"),       # line above has a *trailing* comment: not for line 7
        _f("points-hidden", line=3, key="p3"),         # same line, other rule
        _f(line=None, key="nl"),                       # no line: cannot be accepted inline
        _f(line=3, path="figs/b.py"),                  # other file
    ]
    out, stale = apply_acceptance(findings, by_path, [])
    assert [f.accepted_by for f in out] == ["comment", "comment", "comment", None, None, None, None]
    assert out[0].accepted == "heights are counts of colonies"
    assert stale == []


def test_apply_file_entries_by_fingerprint_not_line() -> None:
    old = _f(line=3)
    entries = [Entry(rule=old.rule, path=old.path, fingerprint=old.fingerprint, reason="published in 2019")]
    moved = _f(line=57)  # unrelated edits moved the call down
    out, stale = apply_acceptance([moved], {}, entries)
    assert out[0].accepted == "published in 2019" and out[0].accepted_by == "file"
    assert stale == []
    other = _f(line=3, key="bars:1")  # a different bar set in the same figure is a new finding
    out, stale = apply_acceptance([other], {}, entries)
    assert out[0].accepted is None and stale == entries


def test_one_entry_accepts_one_finding() -> None:
    f = _f()
    e = Entry(rule=f.rule, path=f.path, fingerprint=f.fingerprint, reason="ok")
    out, stale = apply_acceptance([f, _f(line=9)], {}, [e])
    assert [x.accepted for x in out] == ["ok", None]
    out, stale = apply_acceptance([f], {}, [e, e])
    assert stale == [e]


def test_entry_redundant_with_comment_is_not_stale() -> None:
    allows, _ = parse_allow_comments(SCRIPT, KNOWN)
    f = _f(line=3)
    e = Entry(rule=f.rule, path=f.path, fingerprint=f.fingerprint, reason="file reason")
    out, stale = apply_acceptance([f], {"figs/a.py": allows}, [e])
    assert out[0].accepted_by == "comment" and stale == []


def test_notebook_cells_keyed_by_cell() -> None:
    # The notebook is built with nbformat (the reference implementation of the .ipynb format).
    nb = nbformat.v4.new_notebook()
    nb.cells = [
        nbformat.v4.new_markdown_cell("# figproof: allow points-hidden -- markdown is not code"),
        nbformat.v4.new_code_cell("import numpy as np\nax.scatter(x, y)  # figproof: allow points-hidden -- jittered copy in fig 3"),
        nbformat.v4.new_code_cell("%matplotlib inline\nax.bar(x, y)  # figproof: allow bars-for-continuous"),
    ]
    allows, problems = notebook_allow_comments("nb/fig2.ipynb", nbformat.writes(nb), KNOWN)
    assert list(allows) == ["nb/fig2.ipynb#cell=2"]
    assert problems == ["cell 3, line 2: allow comment for bars-for-continuous has no reason "
                        "(expected `# figproof: allow <rule-id> -- <reason>`)"]
    hit = _f("points-hidden", line=2, path="nb/fig2.ipynb", cell=2, key="p")
    miss = _f("points-hidden", line=2, path="nb/fig2.ipynb", cell=1, key="p")
    out, _ = apply_acceptance([hit, miss], allows, [])
    assert [f.accepted for f in out] == ["jittered copy in fig 3", None]


def test_unreadable_notebook_is_one_problem() -> None:
    allows, problems = notebook_allow_comments("nb/x.ipynb", "{not json", KNOWN)
    assert allows == {} and len(problems) == 1 and "\n" not in problems[0]


def test_write_load_round_trip_keeps_edited_reasons(tmp_path: Path) -> None:
    path = tmp_path / ".figproof-accepted.json"
    assert load_accepted(path) == []
    a, b = _f(line=3), _f("points-hidden", line=8, key="p")
    commented = dataclasses.replace(_f("axis-clips-data", line=9, key="c"), accepted="x", accepted_by="comment")
    written = write_accepted([b, a, commented], path)
    assert [e.rule for e in written] == ["bars-for-continuous", "points-hidden"]  # comment-accepted left out
    assert load_accepted(path) == written
    data = json.loads(path.read_text())
    data["accepted"][0]["reason"] = "counts, checked by the PI"
    path.write_text(json.dumps(data))
    again = write_accepted([a, b], path)
    assert again[0].reason == "counts, checked by the PI"
    first = path.read_text()
    write_accepted([b, a], path)
    assert path.read_text() == first


@pytest.mark.parametrize(("content", "expected"), [
    ("{", "not valid JSON (line 1, column 2"),
    ("[]", "expected a JSON object"),
    ('{"schema": 2, "accepted": []}', "'schema' must be 1 (got 2)"),
    ('{"schema": 1, "accepted": {}}', "'accepted' must be a list"),
    ('{"schema": 1, "accepted": [{"rule": "r", "path": "p", "reason": "x"}]}', "entry 1 needs a non-empty string 'fingerprint'"),
    ('{"schema": 1, "accepted": [{"rule": "r", "path": "p", "fingerprint": "f", "reason": ""}]}', "'reason'"),
    ('{"schema": 1, "accepted": [7]}', "entry 1 is not an object"),
])
def test_malformed_file_is_one_line_error_and_is_not_overwritten(tmp_path: Path, content: str, expected: str) -> None:
    path = tmp_path / "accepted.json"
    path.write_text(content)
    with pytest.raises(AcceptedFileError) as info:
        load_accepted(path)
    message = str(info.value)
    assert expected in message and str(path) in message and "\n" not in message
    with pytest.raises(AcceptedFileError):
        write_accepted([_f()], path)
    assert path.read_text() == content

"""Accepting findings: inline allow comments and the accepted-findings file.

An inline comment ``# figproof: allow <rule-id> -- <reason>`` accepts the
finding of that rule on the same line, or on the next line when the comment
stands on a line of its own; the line that caused a finding (the ``set_ylim``
that clips points) counts as well as the line that drew the marks.  A comment
that accepts no finding is stale, and the check says so in a note.  Several ids may be given, separated by commas.
The reason is required: it is shown in the report.

The accepted-findings file (JSON, default ``.figproof-accepted.json``) lets an
old repo adopt figproof and fail only on new problems.  Each entry matches by
rule, path and the finding's fingerprint, which holds no line number, so it
survives unrelated edits.  Entries that match nothing any more are stale and
are reported.

Notebooks: allow comments are read per code cell, and line numbers count
inside the cell (as Finding.line does for a notebook).  The lookup key for a
cell is :func:`allow_key` ``(path, cell)``, i.e. ``"analysis/fig2.ipynb#cell=3"``;
for a script the key is its path.  Cells are numbered as ``Finding.cell``
numbers them: the position in the notebook's list of cells, counting from 1,
markdown cells included.
"""

from __future__ import annotations

import dataclasses
import difflib
import io
import json
import os
import re
import tempfile
import tokenize
from collections.abc import Collection, Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from figproof.model.findings import Finding, renamed_note
from figproof.notebook import NotebookError, code_cells

DEFAULT_PATH = ".figproof-accepted.json"
FILE_SCHEMA = 1
DEFAULT_REASON = "accepted with `figproof accept` when the repo adopted figproof"

_DIRECTIVE = re.compile(r"#\s*figproof\s*:\s*(?P<body>.*)$", re.IGNORECASE)
_USAGE = "`# figproof: allow <rule-id> -- <reason>`"


@dataclass(frozen=True, slots=True, kw_only=True)
class Allow:
    """One rule accepted by an inline comment; ``own_line`` when the comment is alone on its line."""

    rule: str
    reason: str
    line: int
    own_line: bool


@dataclass(frozen=True, slots=True, kw_only=True)
class Entry:
    """One entry of the accepted-findings file."""

    rule: str
    path: str
    fingerprint: str
    reason: str
    message: str = ""  # what the finding said when accepted, for the humans reading the file

    def key(self) -> tuple[str, str, str]:
        return (self.rule, self.path, self.fingerprint)


class AcceptedFileError(ValueError):
    """A malformed accepted-findings file; the message is one line naming the file and the fault."""


def allow_key(path: str, cell: int | None) -> str:
    """The key of ``allow_by_path`` for a script (its path) or a notebook cell."""
    return path if cell is None else f"{path}#cell={cell}"


# --------------------------------------------------------------------------
# inline allow comments
# --------------------------------------------------------------------------


def _comments(text: str) -> list[tuple[int, str, bool]]:
    """(line, comment text, alone on its line) for every comment in ``text``."""
    lines = text.splitlines()
    try:
        found = []
        for tok in tokenize.generate_tokens(io.StringIO(text).readline):
            if tok.type == tokenize.COMMENT:
                row, col = tok.start
                before = lines[row - 1][:col] if row - 1 < len(lines) else ""
                found.append((row, tok.string, not before.strip()))
        return found
    except (tokenize.TokenError, SyntaxError):
        # Code that does not tokenize (a half-edited file, cell magics): fall back to a line scan,
        # which may also see a '#' inside a string; the script will fail to run anyway.
        found = []
        for row, line in enumerate(lines, start=1):
            at = line.find("#")
            while at >= 0 and not _DIRECTIVE.match(line[at:]):
                at = line.find("#", at + 1)
            if at >= 0:
                found.append((row, line[at:], not line[:at].strip()))
        return found


def _unknown(rule: str, known: Collection[str]) -> str:
    close = difflib.get_close_matches(rule, sorted(known), n=1)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    return f"allow comment names unknown rule '{rule}'{hint}"


def parse_allow_comments(text: str, known_rules: Collection[str],
                         renamed: Mapping[str, str] | None = None) -> tuple[dict[int, list[Allow]], list[str]]:
    """Find the inline allow comments of one script or notebook cell.

    Parameters
    ----------
    text
        Python source.
    known_rules
        Rule ids that may be named.
    renamed
        Former rule id → current id: a former id accepts the current rule, with a problem noting the rename.

    Returns
    -------
    allows, problems
        ``allows`` maps the comment's 1-based line to the rules it accepts; ``problems`` are
        one-line messages starting ``"line N: "`` (the caller puts the path in front).
        A comment with a problem accepts nothing, except the valid ids of a partly wrong list.
    """
    allows: dict[int, list[Allow]] = {}
    problems: list[str] = []
    for row, comment, own_line in _comments(text):
        m = _DIRECTIVE.match(comment)
        if not m:
            continue
        body = m.group("body").strip()
        verb, rest = ([*re.split(r"\s+", body, maxsplit=1), ""])[:2]
        if verb.lower() != "allow":
            problems.append(f"line {row}: unknown figproof directive '{body}' (expected {_USAGE})")
            continue
        names, dashes, reason = rest.partition("--")
        rules = [r for r in re.split(r"[,\s]+", names.strip()) if r]
        reason = reason.strip()
        if not rules:
            problems.append(f"line {row}: allow comment names no rule (expected {_USAGE})")
            continue
        if not dashes or not reason:
            problems.append(f"line {row}: allow comment for {', '.join(rules)} has no reason (expected {_USAGE})")
            continue
        for r in rules:
            if renamed and r in renamed:
                problems.append(f"line {row}: {renamed_note(r, renamed[r])}")
                r = renamed[r]
            if r not in known_rules:
                problems.append(f"line {row}: {_unknown(r, known_rules)}")
                continue
            allows.setdefault(row, []).append(Allow(rule=r, reason=reason, line=row, own_line=own_line))
    return allows, problems


def notebook_allow_comments(
    path: str, notebook_text: str, known_rules: Collection[str], renamed: Mapping[str, str] | None = None
) -> tuple[dict[str, dict[int, list[Allow]]], list[str]]:
    """Allow comments of every code cell of a notebook, keyed by :func:`allow_key` ``(path, cell)``.

    Returns
    -------
    allows, problems
        Problems start ``"cell C, line N: "``; an unreadable notebook gives one problem and no allows.
    """
    try:
        cells = code_cells(notebook_text)
    except NotebookError as exc:
        return {}, [f"cannot read the notebook for allow comments ({exc})"]
    out: dict[str, dict[int, list[Allow]]] = {}
    problems: list[str] = []
    for cell in cells:
        allows, cell_problems = parse_allow_comments(cell.source, known_rules, renamed)
        if allows:
            out[allow_key(path, cell.number)] = allows
        problems.extend(f"cell {cell.number}, {p}" for p in cell_problems)
    return out, problems


def _inline_allow(f: Finding, allow_by_path: Mapping[str, Mapping[int, list[Allow]]]) -> Allow | None:
    if f.line is None:
        return None
    allows = allow_by_path.get(allow_key(f.path, f.cell), {})
    # The finding's own line, then the line that caused it (the set_ylim that clips the points).
    # A comment on the line above counts only when it stands alone: a trailing comment there
    # belongs to that line's own code.
    for line in (f.line, f.cause_line):
        if line is None:
            continue
        above = [a for a in allows.get(line - 1, []) if a.own_line]
        for a in (*allows.get(line, []), *above):
            if a.rule == f.rule:
                return a
    return None


def unused_allows(findings: Iterable[Finding], allow_by_path: Mapping[str, Mapping[int, list[Allow]]],
                  skip_rules: Collection[str] = ()) -> list[tuple[str, Allow]]:
    """Allow comments that accepted none of ``findings`` (marked by :func:`apply_acceptance`): stale ones.

    Returns (allow key, allow) pairs in file and line order; rules in ``skip_rules`` (switched off) are left out.
    """
    used = set()
    for f in findings:
        if f.accepted_by == "comment":
            allow = _inline_allow(f, allow_by_path)
            if allow is not None:
                used.add((allow_key(f.path, f.cell), allow.line, allow.rule))
    out = []
    for key in sorted(allow_by_path):
        for line in sorted(allow_by_path[key]):
            out += [(key, a) for a in allow_by_path[key][line]
                    if (key, a.line, a.rule) not in used and a.rule not in skip_rules]
    return out


# --------------------------------------------------------------------------
# the accepted-findings file
# --------------------------------------------------------------------------


def _entry(data: Any, n: int, path: str) -> Entry:
    if not isinstance(data, dict):
        raise AcceptedFileError(f"{path}: entry {n} is not an object")
    values: dict[str, str] = {}
    for name in ("rule", "path", "fingerprint", "reason"):
        value = data.get(name)
        if not isinstance(value, str) or not value.strip():
            raise AcceptedFileError(f"{path}: entry {n} needs a non-empty string '{name}' (got {value!r})")
        values[name] = value
    message = data.get("message", "")
    if not isinstance(message, str):
        raise AcceptedFileError(f"{path}: entry {n}: 'message' must be a string (got {message!r})")
    return Entry(message=message, **values)


def load_accepted(path: str | os.PathLike[str], renamed: Mapping[str, str] | None = None) -> list[Entry]:
    """Read the accepted-findings file; a missing file accepts nothing.

    ``renamed`` maps former rule ids to current ones: such entries are read under the current id
    (fingerprints are built from a rule's first id, so they still match).

    Raises
    ------
    AcceptedFileError
        With a one-line message naming the file and what is wrong with it.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        return []
    except (OSError, UnicodeDecodeError) as exc:
        raise AcceptedFileError(f"{p}: cannot read the accepted-findings file ({exc})") from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise AcceptedFileError(f"{p}: not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})") from None
    if not isinstance(data, dict):
        raise AcceptedFileError(f"{p}: expected a JSON object with 'schema' and 'accepted'")
    if data.get("schema") != FILE_SCHEMA:
        raise AcceptedFileError(f"{p}: 'schema' must be {FILE_SCHEMA} (got {data.get('schema')!r})")
    entries = data.get("accepted")
    if not isinstance(entries, list):
        raise AcceptedFileError(f"{p}: 'accepted' must be a list (got {type(entries).__name__})")
    read = [_entry(e, n, str(p)) for n, e in enumerate(entries, start=1)]
    return [dataclasses.replace(e, rule=renamed[e.rule]) if renamed and e.rule in renamed else e for e in read]


def write_accepted(
    findings: Iterable[Finding], path: str | os.PathLike[str], *, reason: str = DEFAULT_REASON,
    renamed: Mapping[str, str] | None = None,
) -> list[Entry]:
    """Write today's findings as the accepted-findings file (what ``figproof accept`` does).

    Findings accepted by an inline comment are left out (the comment already accepts them).
    Reasons edited into an existing file are kept for entries that still match.  The file is
    replaced atomically, and an existing malformed file is left untouched (the error is raised).

    Returns
    -------
    list[Entry]
        The entries written, in file order.
    """
    p = Path(path)
    kept: dict[tuple[str, str, str], list[str]] = {}
    for e in load_accepted(p, renamed):
        kept.setdefault(e.key(), []).append(e.reason)
    entries = []
    for f in sorted(findings, key=Finding.sort_key):
        if f.accepted_by == "comment" or not f.fingerprint:
            continue
        old = kept.get((f.rule, f.path, f.fingerprint))
        why = old.pop(0) if old else (f.accepted if f.accepted_by == "file" and f.accepted else reason)
        entries.append(Entry(rule=f.rule, path=f.path, fingerprint=f.fingerprint, reason=why, message=f.message))
    entries.sort(key=lambda e: (e.path, e.rule, e.fingerprint, e.message))
    doc = {"schema": FILE_SCHEMA, "accepted": [dataclasses.asdict(e) for e in entries]}
    text = json.dumps(doc, sort_keys=True, indent=2, allow_nan=False, ensure_ascii=False) + "\n"
    p.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", dir=p.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as out:
            out.write(text)
        os.replace(tmp, p)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return entries


# --------------------------------------------------------------------------
# applying both
# --------------------------------------------------------------------------


def apply_acceptance(
    findings: Iterable[Finding],
    allow_by_path: Mapping[str, Mapping[int, list[Allow]]],
    entries: Iterable[Entry],
) -> tuple[list[Finding], list[Entry]]:
    """Mark accepted findings and find stale entries.

    Parameters
    ----------
    findings
        Findings of this check, in any order (the order is kept).
    allow_by_path
        Inline allows keyed by :func:`allow_key`: from :func:`parse_allow_comments` for scripts,
        :func:`notebook_allow_comments` for notebooks.
    entries
        The accepted-findings file, from :func:`load_accepted`.

    Returns
    -------
    findings, stale
        Findings with ``accepted`` set to the reason and ``accepted_by`` to ``"comment"`` or
        ``"file"``; entries that matched no finding.  An entry accepts one finding: two findings
        with the same rule, path and fingerprint need two entries.
    """
    out = list(findings)
    order = list(entries)
    pool: dict[tuple[str, str, str], list[int]] = {}
    for n, e in enumerate(order):
        pool.setdefault(e.key(), []).append(n)

    # Inline comments first: they are the more specific statement.
    covered: set[tuple[str, str, str]] = set()
    for i, f in enumerate(out):
        if f.accepted is not None:
            covered.add((f.rule, f.path, f.fingerprint))
            continue
        allow = _inline_allow(f, allow_by_path)
        if allow is not None:
            out[i] = dataclasses.replace(f, accepted=allow.reason, accepted_by="comment")
            covered.add((f.rule, f.path, f.fingerprint))
    for i, f in enumerate(out):
        if f.accepted is None and f.fingerprint:
            free = pool.get((f.rule, f.path, f.fingerprint))
            if free:
                e = order[free.pop(0)]
                out[i] = dataclasses.replace(f, accepted=e.reason, accepted_by="file")
    # An entry whose finding is now accepted by a comment is redundant, not stale.
    unused = sorted(n for left in pool.values() for n in left)
    stale = [order[n] for n in unused if order[n].key() not in covered]
    return out, stale


__all__ = [
    "DEFAULT_PATH",
    "AcceptedFileError",
    "Allow",
    "Entry",
    "allow_key",
    "apply_acceptance",
    "load_accepted",
    "notebook_allow_comments",
    "parse_allow_comments",
    "unused_allows",
    "write_accepted",
]

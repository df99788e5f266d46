"""The replication report of one deposit (markdown and JSON) and the index of several.

What a data editor reads: the verdict per figure first, then the environment (what the scripts need and what
stopped them), the manuscript's figures against the regenerated ones, the regenerated figures, the run log per
script, the provenance (inputs with SHA-256, versions), and a closing paragraph to paste into a letter to the
authors.  The renderers are pure: :class:`Replication` in, text out.
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from figproof.deposit.environment import Cause, Survey
from figproof.deposit.references import Match
from figproof.model.findings import Finding
from figproof.model.records import ScriptRun

SCHEMA = 1


@dataclass(frozen=True, slots=True, kw_only=True)
class Regenerated:
    """A figure a script drew in this check."""

    id: str  # "<script>#<n>"
    script: str
    outputs: tuple[str, ...] = ()
    reference: str | None = None  # the reference it reproduces or resembles


@dataclass(frozen=True, slots=True, kw_only=True)
class ChangeView:
    """A reference that differs: the change view's files (names within the report's image folder) and caption."""

    image: str  # the change view: the regenerated figure faded, what differs from the reference tinted
    view: str  # the same without its caption band (the HTML page writes the caption)
    submitted: str  # the reference as placed on the regenerated figure's page
    regenerated: str  # the regenerated figure as rendered
    caption: str  # what changed, in plain words ("the lines changed; 2 % of pixels")


#: The folder beside the markdown and JSON reports that holds the change views.
CHANGES = "changes"


@dataclass(frozen=True, slots=True, kw_only=True)
class Replication:
    """Everything one deposit's replication report says."""

    deposit: str  # the name shown (the archive's name without suffix)
    sha256: str | None  # of the archive; None for a folder
    version: str  # figproof's
    survey: Survey
    causes: tuple[Cause, ...]
    runs: tuple[ScriptRun, ...]
    matches: tuple[Match, ...] = ()
    references_asked: bool = False  # --reference was given
    reference_problems: tuple[str, ...] = ()
    regenerated: tuple[Regenerated, ...] = ()
    change_views: Mapping[str, ChangeView] = field(default_factory=dict)  # reference → its change view
    findings: tuple[Finding, ...] = ()  # figproof's other findings
    environment: Mapping[str, Any] = field(default_factory=dict)  # versions (report.provenance fingerprint)
    pictures: Mapping[str, str] = field(default_factory=dict)  # reference or figure id → its image (HTML report)

    @property
    def failed(self) -> tuple[ScriptRun, ...]:
        return tuple(r for r in self.runs if r.status not in ("ok", "skipped"))

    @property
    def reproduced(self) -> bool:
        """Every script ran and, when references were given, every one was reproduced."""
        if self.failed or (self.references_asked and not self.matches):
            return False
        return all(m.verdict == "reproduced" for m in self.matches)


def _n(count: int, word: str) -> str:
    return f"{count} {word}{'s' * (count != 1)}"


def _cell(text: str) -> str:
    return text.replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def _list(items: Sequence[str], limit: int = 12) -> str:
    shown = ", ".join(f"`{_cell(i)}`" for i in items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")


def headline(rep: Replication) -> str:
    """The one-sentence verdict."""
    if rep.references_asked:
        counts = {v: sum(m.verdict == v for m in rep.matches) for v in ("reproduced", "differs", "not-found")}
        total = len(rep.matches)
        if not total:
            return "No figures to compare: the reference folder holds no readable figure file."
        parts = [f"{counts['reproduced']} of {_n(total, 'figure')} reproduced"]
        if counts["differs"]:
            parts.append(f"{counts['differs']} differ{'s' * (counts['differs'] == 1)}")
        if counts["not-found"]:
            parts.append(f"{counts['not-found']} not found among the regenerated figures")
        return "; ".join(parts) + "."
    ran = len(rep.runs) - len(rep.failed)
    return f"{ran} of {_n(len(rep.runs), 'figure script')} ran; {len(rep.failed)} failed (no reference figures " \
           f"were given to compare with)."


def _cause_of(rep: Replication) -> dict[str, Cause]:
    return {s: c for c in rep.causes for s in c.scripts}


def unexplained(rep: Replication) -> list[str]:
    """Scripts that failed for no environmental cause (a bug, missing data)."""
    causes = _cause_of(rep)
    return [r.path for r in rep.failed if r.path not in causes]


def other_findings(rep: Replication) -> list[Finding]:
    """figproof's open findings besides the failures the environment section explains."""
    return [f for f in rep.findings if f.accepted is None and f.rule not in ("script-fails", "environment-mismatch")]


def _environment(rep: Replication) -> list[str]:
    s = rep.survey
    lines = ["## Environment", ""]
    if rep.causes:
        lines += ["What stopped scripts here, one line per cause:", ""]
        lines += [f"- **{_cell(c.verdict)}**: {_list(c.scripts)}" for c in rep.causes]
        lines.append("")
    other = unexplained(rep)
    if other:
        lines += [f"{_n(len(other), 'script')} failed for a reason that is not the environment (see the run "
                  f"log): {_list(other)}.", ""]
    missing = [i for i in s.missing if not any(c.kind == "package-missing" and c.key == i.distribution
                                               for c in rep.causes)]
    if missing:
        lines += ["Packages the scripts import or need that are not installed here (no script has failed on them "
                  "yet, or the script failed earlier):", ""]
        lines += [f"- `{_cell(i.distribution)}` (import `{i.module}`): {_list(i.scripts)}" for i in missing]
        lines.append("")
    if s.python2 and not any(c.kind == "python2-only" for c in rep.causes):
        lines += [f"- Python 2 syntax in {_list([p.path for p in s.python2])}", ""]
    unmet = [a for a in s.asks if not a.met]
    if s.asks:
        lines.append(f"The deposit's requirement files ask for {_n(len(s.asks), 'version')}; "
                     f"{len(s.asks) - len(unmet)} {'is' if len(s.asks) - len(unmet) == 1 else 'are'} met here.")
        lines.append("")
    if unmet:
        lines += ["| file | asks for | installed here |", "|---|---|---|"]
        lines += [f"| `{_cell(a.file)}` | `{_cell(a.requirement)}` | {a.installed or 'not installed'} |" for a in unmet]
        lines.append("")
    lines += [f"- {_cell(n)}" for n in s.notes]
    if s.imports:
        rows = [f"| `{i.module}` | {_cell(i.distribution)} | {i.installed or '**missing**'} | {len(i.scripts)} |"
                for i in s.imports]
        lines += ["<details><summary>What the scripts import</summary>", "",
                  "| import | distribution | installed here | scripts |", "|---|---|---|---|", *rows, "",
                  "</details>", ""]
    return lines


_VERDICT_WORDS = {"reproduced": "reproduced", "differs": "**differs**", "not-found": "**not found**"}


def _references(rep: Replication) -> list[str]:
    if not rep.references_asked:
        return []
    lines = ["## Figures as submitted", ""]
    if rep.matches:
        lines += ["| figure as submitted | verdict | closest regenerated figure | similarity | change view |",
                  "|---|---|---|---|---|"]
        for m in rep.matches:
            cv = rep.change_views.get(m.reference)
            view = f"[what changed]({CHANGES}/{cv.image}): {_cell(cv.caption)}" if cv is not None else "—"
            closest = f"`{_cell(m.regenerated)}`" if m.regenerated else "—"
            lines.append(f"| `{_cell(m.reference)}` | {_VERDICT_WORDS[m.verdict]} | {closest} | "
                         f"{m.similarity:.2f} | {view} |")
        lines += ["", "Similarity is the structural similarity (SSIM) of the two figures in grey after trimming "
                      "margins and scaling to a common size: 0.80 or more counts as reproduced "
                      "when, laid over the regenerated figure, no more than 2.5 % of its pixels differ.", ""]
    lines += [f"- {_cell(p)}" for p in rep.reference_problems]
    if rep.reference_problems:
        lines.append("")
    return lines


def _regenerated(rep: Replication) -> list[str]:
    if not rep.regenerated:
        return []
    lines = ["## Regenerated figures", ""]
    head = "| figure | drawn by | saved as |" + (" matches |" if rep.references_asked else "")
    lines += [head, "|---|---|---|" + ("---|" if rep.references_asked else "")]
    for g in rep.regenerated:
        row = f"| `{_cell(g.id)}` | `{_cell(g.script)}` | {_list(list(g.outputs)) or '—'} |"
        if rep.references_asked:
            row += f" {'`' + _cell(g.reference) + '`' if g.reference else 'no reference'} |"
        lines.append(row)
    lines.append("")
    return lines


def _run_log(rep: Replication) -> list[str]:
    causes = _cause_of(rep)
    lines = ["## Run log", "", "| script | status | figures | cause | error |", "|---|---|---|---|---|"]
    for r in rep.runs:
        error = f"{r.error.type}: {r.error.message}" if r.error and r.error.type else (r.error.kind if r.error else "")
        cause = causes[r.path].kind if r.path in causes else ("—" if r.status == "ok" else "not environmental")
        lines.append(f"| `{_cell(r.path)}` | {r.status} | {len(r.figures)} | {cause} | {_cell(error[:300])} |")
    lines.append("")
    for r in rep.failed:
        tail = (r.stderr_tail or "").strip()
        if tail:
            lines += [f"<details><summary>{_cell(r.path)}: last lines of its error output</summary>", "", "```",
                      tail[-3000:].replace("```", "'''"), "```", "", "</details>", ""]
    return lines


def inputs(runs: Sequence[ScriptRun]) -> list[tuple[str, str]]:
    """(input file, SHA-256) for every file inside the deposit a script read, sorted."""
    seen: dict[str, str] = {}
    for r in runs:
        for ev in r.events:
            if ev.action == "read" and ev.inside_repo and ev.sha256:
                seen.setdefault(ev.path, ev.sha256)
    return sorted(seen.items())


def _provenance(rep: Replication) -> list[str]:
    env = rep.environment
    versions = ", ".join(f"{name} {env[key]}" for key, name in (
        ("python", "Python"), ("matplotlib", "matplotlib"), ("freetype", "FreeType"), ("numpy", "numpy"),
        ("pandas", "pandas"), ("pillow", "Pillow")) if env.get(key))
    lines = ["## Provenance", ""]
    what = f"archive SHA-256 `{rep.sha256}`" if rep.sha256 else "a folder (no archive)"
    lines += [f"Deposit `{_cell(rep.deposit)}`: {what}. Checked by figproof {rep.version}"
              + (f" with {versions}." if versions else "."), ""]
    rows = inputs(rep.runs)
    if rows:
        lines += ["| input | SHA-256 |", "|---|---|", *[f"| `{_cell(p)}` | `{h}` |" for p, h in rows], ""]
    return lines


def _findings(rep: Replication) -> list[str]:
    shown = other_findings(rep)
    if not shown:
        return []
    lines = ["## Other findings", "", f"figproof's figure checks found {_n(len(shown), 'problem')} in the figures "
             f"that were drawn (they do not change the replication verdict):", "",
             "| where | rule | what figproof found |", "|---|---|---|"]
    lines += [f"| `{_cell(f.path)}{':' + str(f.line) if f.line else ''}` | {f.rule} | {_cell(f.message)} |"
              for f in shown]
    lines.append("")
    return lines


def letter(rep: Replication) -> str:
    """A paragraph for a letter to the authors."""
    env = rep.environment
    py = f"Python {env['python']}" if env.get("python") else "Python 3"
    out = [f"We re-ran the {_n(len(rep.runs), 'figure script')} of the deposit with {py}"
           + (f" and matplotlib {env['matplotlib']}" if env.get("matplotlib") else "") + "."]
    if rep.references_asked and rep.matches:
        good = [m for m in rep.matches if m.verdict == "reproduced"]
        bad = [m for m in rep.matches if m.verdict != "reproduced"]
        out.append(f"{len(good)} of the {_n(len(rep.matches), 'figure')} as submitted "
                   f"{'was' if len(good) == 1 else 'were'} reproduced.")
        if bad:
            out.append("We could not reproduce " + ", ".join(m.reference for m in bad) + ".")
    if rep.causes:
        out.append("Scripts failed for these reasons: " + "; ".join(
            f"{c.verdict} ({', '.join(c.scripts[:6])}{' ...' if len(c.scripts) > 6 else ''})" for c in rep.causes)
            + ".")
    other = unexplained(rep)
    if other:
        out.append(f"{', '.join(other)} failed with an error in the code itself (the run log gives it).")
    if rep.reproduced:
        out.append("No changes are needed for the figures to be reproduced.")
    else:
        out.append("Could you update the deposit (code, data or a list of the package versions used) so that "
                   "every figure can be regenerated from it?")
    return " ".join(out)


def render_markdown(rep: Replication) -> str:
    """The replication report in markdown."""
    lines = [f"# Replication report: {rep.deposit}", "", f"**{'Reproduced' if rep.reproduced else 'Not reproduced'}"
             f": {headline(rep)}**", ""]
    lines += _environment(rep)
    lines += _references(rep)
    lines += _regenerated(rep)
    lines += _run_log(rep)
    lines += _provenance(rep)
    lines += _findings(rep)
    lines += ["## For the letter to the authors", "", letter(rep), ""]
    return "\n".join(lines)


def report_dict(rep: Replication) -> dict[str, Any]:
    """The replication report as JSON-ready data."""
    s = rep.survey
    causes = _cause_of(rep)
    return {
        "schema": SCHEMA,
        "tool": {"name": "figproof", "version": rep.version},
        "deposit": rep.deposit,
        "sha256": rep.sha256,
        "reproduced": rep.reproduced,
        "headline": headline(rep),
        "environment": {
            "causes": [{"kind": c.kind, "key": c.key, "verdict": c.verdict, "scripts": list(c.scripts)}
                       for c in rep.causes],
            "imports": [{"module": i.module, "distribution": i.distribution, "installed": i.installed,
                         "scripts": list(i.scripts)} for i in s.imports],
            "readers": [{"module": i.module, "distribution": i.distribution, "installed": i.installed,
                         "suffixes": list(i.suffixes), "scripts": list(i.scripts)} for i in s.readers],
            "python2": [{"path": p.path, "cell": p.cell, "line": p.line, "syntax": p.syntax} for p in s.python2],
            "requirements": [{"file": a.file, "requirement": a.requirement, "installed": a.installed, "met": a.met}
                             for a in s.asks],
            "notes": list(s.notes),
            "versions": dict(rep.environment),
        },
        "references": [{"reference": m.reference, "verdict": m.verdict, "regenerated": m.regenerated,
                        "similarity": m.similarity, **_view_json(rep.change_views.get(m.reference))}
                       for m in rep.matches] if rep.references_asked else None,
        "reference_problems": list(rep.reference_problems),
        "regenerated": [{"id": g.id, "script": g.script, "outputs": list(g.outputs), "reference": g.reference}
                        for g in rep.regenerated],
        "scripts": [{"path": r.path, "status": r.status, "figures": len(r.figures),
                     "cause": causes[r.path].kind if r.path in causes else None,
                     "error": ({"type": r.error.type, "message": r.error.message, "kind": r.error.kind}
                               if r.error else None)} for r in rep.runs],
        "inputs": [{"path": p, "sha256": h} for p, h in inputs(rep.runs)],
        "findings": [{"rule": f.rule, "path": f.path, "line": f.line, "message": f.message}
                     for f in other_findings(rep)],
        "letter": letter(rep),
    }


def _view_json(cv: ChangeView | None) -> dict[str, str | None]:
    if cv is None:
        return {"change_view": None, "change_caption": None}
    return {"change_view": f"{CHANGES}/{cv.image}", "change_caption": cv.caption}


def render_json(rep: Replication) -> str:
    return json.dumps(report_dict(rep), sort_keys=True, allow_nan=False, indent=2) + "\n"


@dataclass(frozen=True, slots=True, kw_only=True)
class IndexEntry:
    """One deposit of a batch: its report folder, or why it could not be checked."""

    deposit: str
    folder: str | None = None  # the report folder, relative to the index
    headline: str = ""
    reproduced: bool = False
    problem: str | None = None  # a deposit that could not be unpacked or checked
    html: str | None = None  # the deposit's HTML report, relative to the index


def render_index(entries: Sequence[IndexEntry]) -> str:
    """The index of a batch, in markdown."""
    done = [e for e in entries if e.problem is None]
    good = sum(e.reproduced for e in done)
    lines = ["# Replication reports", "", f"{good} of {_n(len(entries), 'deposit')} reproduced; "
             f"{len(entries) - len(done)} could not be checked.", "",
             "| deposit | verdict | report |", "|---|---|---|"]
    for e in entries:
        if e.problem is not None:
            lines.append(f"| `{_cell(e.deposit)}` | **not checked**: {_cell(e.problem)} | — |")
        else:
            verdict = ("reproduced" if e.reproduced else "**not reproduced**") + f": {_cell(e.headline)}"
            link = f"{e.folder}/replication.md"
            page = f", [the visual report]({e.html})" if e.html else ""
            lines.append(f"| `{_cell(e.deposit)}` | {verdict} | [{link}]({link}){page} |")
    lines.append("")
    return "\n".join(lines)


def index_json(entries: Sequence[IndexEntry]) -> str:
    data = {"schema": SCHEMA, "deposits": [{"deposit": e.deposit, "folder": e.folder, "headline": e.headline,
                                            "reproduced": e.reproduced, "problem": e.problem, "html": e.html}
                                           for e in entries]}
    return json.dumps(data, sort_keys=True, allow_nan=False, indent=2) + "\n"


__all__ = ["CHANGES", "ChangeView", "IndexEntry", "Regenerated", "Replication", "headline", "index_json", "inputs",
           "letter", "other_findings", "render_index", "render_json", "render_markdown", "report_dict", "unexplained"]

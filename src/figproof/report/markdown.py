"""The markdown summary: what a scientist reads in the CI log or the job summary page."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from figproof.model.findings import CheckResult, Finding
from figproof.model.records import ScriptRun

STEP_SUMMARY_LIMIT = 1024 * 1024  # GitHub rejects job summaries over 1 MiB
_ISOLATION = {"repo-overlay": "ran on an overlay of the read-only repo (nothing copied)",
              "repo-reflink": "ran on copy-on-write clones of the repo", "repo-copy": "ran on a copy of the repo",
              "kernel-write-confinement": "kernel write confinement (Landlock)",
              "kernel-network-block": "kernel network block (Landlock)",
              "python-write-guard": "Python write guard (audit hooks)",
              "memory-cap": "memory cap", "network-off": "network off"}


def _cell(text: str) -> str:
    return text.replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def where(f: Finding) -> str:
    cell = f" cell {f.cell}" if f.cell is not None else ""
    line = f":{f.line}" if f.line else ""
    return f"{f.path}{cell}{line}"


def _headline(result: CheckResult) -> str:
    s = result.summary
    counts = f"{s.errors} error{'s' * (s.errors != 1)}, {s.warnings} warning{'s' * (s.warnings != 1)}, " \
             f"{s.notes} note{'s' * (s.notes != 1)}"
    scope = f"{s.figures} figure{'s' * (s.figures != 1)} from {s.scripts} script{'s' * (s.scripts != 1)}"
    verdict = "PASSED" if s.passed else "FAILED"
    return f"## figproof {verdict}: {counts} in {scope}"


def _threshold(result: CheckResult) -> str:
    if result.fail_on == "never":
        return "the build never fails (fail-on = never)"
    levels = {"error": "errors", "warning": "warnings or errors", "note": "any finding"}
    return f"the build fails on {levels[result.fail_on]}"


def isolation_words(runs: tuple[ScriptRun, ...]) -> str:
    """The layers in force for these runs, in words ("kernel write confinement (Landlock), ..., time limit")."""
    # how the repo was shown: every method some run used; the other layers: only when every run had them
    seen = [tag for tag in _ISOLATION if runs and (any if tag.startswith("repo-") else all)(
        tag in r.isolation for r in runs if r.isolation)]
    # the parent enforces the time limit on every run, so it is in force whenever a script ran
    return ", ".join([*(_ISOLATION[t] for t in seen), *(["time limit"] if runs else [])]) or "none recorded"


def _tree_changes(result: CheckResult) -> list[str]:
    """The loudest part of the report: the user's own files changed while the scripts ran."""
    changes = result.tree_changes
    if not changes:
        return []
    lines = [f"> **Error: the working tree changed during the check.** {len(changes)} path(s) of your repo are "
             f"not as they were before the first script ran; figproof's isolation did not hold for them, so "
             f"this check fails whatever `fail-on` says. Compare them with git (`git status`, `git diff`) and "
             f"read the findings of the scripts that ran.", ">"]
    lines += [f"> - `{_cell(c.path)}`: {_cell(c.change)}" for c in changes[:50]]
    if len(changes) > 50:
        lines.append(f"> - and {len(changes) - 50} more (all are listed in the JSON report)")
    return [*lines, ""]


def _findings_table(findings: list[Finding], images: Mapping[str, str], captions: Mapping[str, str]) -> list[str]:
    rows = ["| where | rule | severity | what figproof found |", "|---|---|---|---|"]
    for f in findings:
        msg = _cell(f.message)
        if f.figure and f.figure in images and f.rule.startswith(("colo", "low-contrast")):
            msg += f" ([simulated views]({images[f.figure]}))"
        if f.rule == "figure-drift":
            drifted = [p for p in images if "#" not in p and p in f.message]
            if drifted:
                said = f": {_cell(captions[drifted[0]])}" if drifted[0] in captions else ""
                msg += f" ([what changed]({images[drifted[0]]}){said})"
        ran = f" (run of `{_cell(f.script)}`)" if f.script is not None and f.script != f.path else ""
        rows.append(f"| `{_cell(where(f))}`{ran} | {f.rule} | {f.severity} ({f.confidence}) | {msg} |")
    return rows


def _scripts_table(runs: tuple[ScriptRun, ...], timings: bool) -> list[str]:
    head = "| script | status | figures | ran from |" + (" seconds |" if timings else "")
    rows = [head, "|---|---|---|---|" + ("---|" if timings else "")]
    for r in runs:
        status: str = r.status
        if r.error is not None and r.error.type:
            status += f": {r.error.type}"
        ran_from = "repo root" if r.working_dir == "root" else "its own folder"
        row = f"| `{_cell(r.path)}` | {_cell(status)} | {len(r.figures)} | {ran_from} |"
        if timings:
            row += f" {r.seconds:.1f} |"
        rows.append(row)
    return rows


def _helpers(result: CheckResult) -> list[str]:
    """Repo modules that draw only when a script calls them: not run, listed with the scripts that use them."""
    if not result.helpers:
        return []
    lines = ["Helper modules (not run on their own; their figures and failures are the importing scripts'):", ""]
    for path, users in result.helpers:
        shown = ", ".join(f"`{_cell(u)}`" for u in users[:10]) + (f" and {len(users) - 10} more"
                                                                   if len(users) > 10 else "")
        lines.append(f"- `{_cell(path)}`, used by {shown or 'no figure script that ran'}")
    return [*lines, ""]


def partial_notes(result: CheckResult) -> list[str]:
    """What a partial check did not run, and the committed figures it could not judge alone."""
    if not result.not_run:
        return []
    not_run = result.not_run
    shown = ", ".join(f"`{s}`" for s in not_run[:10]) + (f" and {len(not_run) - 10} more" if len(not_run) > 10 else "")
    total = result.summary.scripts + len(not_run)
    out = [f"partial check: {len(not_run)} of {total} figure scripts did not run ({shown})"]
    n = len(result.pending)
    if n:
        them = "them" if n != 1 else "it"
        out.append(f"{n} committed figure{'s' * (n != 1)} that no script of this check wrote or read "
                   f"{'were' if n != 1 else 'was'} not judged as orphan{'s' * (n != 1)}: a script that did not run "
                   f"may write {them} (`figproof merge` judges the shards of a check together)")
    return out


def _provenance(manifest: Mapping[str, Any]) -> list[str]:
    from figproof.report.provenance import provenance_rows

    env = manifest.get("environment", {})
    parts = [f"commit `{str(manifest['git_commit'])[:12]}`" if manifest.get("git_commit") else "not a git commit"]
    if manifest.get("date"):
        parts.append(str(manifest["date"]))
    versions = ", ".join(f"{name} {env[key]}" for key, name in (
        ("python", "Python"), ("matplotlib", "matplotlib"), ("freetype", "FreeType"), ("numpy", "numpy"),
        ("pandas", "pandas"), ("pillow", "Pillow")) if env.get(key))
    if versions:
        parts.append(versions)
    rows = provenance_rows(manifest)
    lines = ["### Figure files and their inputs", "", "; ".join(parts) + ".", ""]
    if rows:
        lines += ["| figure file | drawn by | from inputs |", "|---|---|---|"]
        lines += [f"| `{_cell(f)}` | `{_cell(s)}` | {_cell(i)} |" for f, s, i in rows]
        lines.append("")
    return lines


def render(result: CheckResult, *, images: Mapping[str, str] | None = None, timings: bool = False,
           rule_summaries: Mapping[str, str] | None = None, provenance: Mapping[str, Any] | None = None,
           captions: Mapping[str, str] | None = None, visual: str | None = None,
           visual_where: str | None = None) -> str:
    """Render the summary; ``images`` maps figure ids / output paths to relative image links, ``captions``
    output paths to what their change view says changed; ``visual`` links the HTML report (``visual_where``
    says where to find it when the link is not the page itself)."""
    images = images or {}
    lines = [_headline(result), "", *_tree_changes(result)]
    lines.append(f"figproof {result.version} re-ran the figure scripts of `{result.root}`; {_threshold(result)}. "
                 f"Isolation: {isolation_words(result.runs)}.")
    lines.append("")
    if visual:
        found_at = f" ({visual_where})" if visual_where else ""
        lines += [f"The figures with their findings marked on them: [visual report]({visual}){found_at}.", ""]
    open_ = [f for f in result.findings if f.accepted is None]
    accepted = [f for f in result.findings if f.accepted is not None]
    if open_:
        lines += ["### Findings", "", *_findings_table(open_, images, captions or {}), ""]
    else:
        lines += ["No open findings.", ""]
    if accepted:
        lines += [f"<details><summary>{len(accepted)} accepted finding{'s' * (len(accepted) != 1)}</summary>", ""]
        lines += ["| where | rule | reason |", "|---|---|---|"]
        lines += [f"| `{_cell(where(f))}` | {f.rule} | {_cell(f.accepted or '')} |" for f in accepted]
        lines += ["", "</details>", ""]
    if result.runs:
        lines += ["### Scripts", "", *_scripts_table(result.runs, timings), ""]
    lines += _helpers(result)
    if provenance is not None:
        lines += _provenance(provenance)
    notes = partial_notes(result) + list(result.notes) + [f"`{r.path}`: {n}" for r in result.runs for n in r.notes]
    if notes:
        lines += ["### Notes", ""] + [f"- {_cell(n)}" for n in notes] + [""]
    rules_seen = sorted({f.rule for f in open_})
    if rules_seen:
        lines += ["### What to do", ""]
        for rid in rules_seen:
            summary = (rule_summaries or {}).get(rid, "")
            lines.append(f"- **{rid}**: {summary} Run `figproof explain {rid}` for why it matters and how to fix it.")
        lines.append("")
    return "\n".join(lines)


def fit(text: str, limit: int = STEP_SUMMARY_LIMIT) -> str:
    """Cut ``text`` to at most ``limit`` bytes at a line boundary, with a note saying so."""
    data = text.encode("utf-8")
    if len(data) <= limit:
        return text
    note = "\n\n*figproof: this summary was cut to fit the 1 MiB limit; the JSON report has every finding.*\n"
    room = limit - len(note.encode("utf-8"))
    cut = data[:room].decode("utf-8", "ignore")
    cut = cut[: cut.rfind("\n")] if "\n" in cut else cut
    return cut + note

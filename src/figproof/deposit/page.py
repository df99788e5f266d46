"""The replication report as a page of figproof's visual report (HTML), and the page of a batch's index.

The same page as ``figproof check --html`` writes (:mod:`figproof.report.html`: its style, its verdict header,
its figure cards and its change-view switch), opening offline with no external file but the images in ``img/``
beside it.  In the order of the markdown report: the verdict, the environment, the figures as submitted (each
beside the regenerated figure it resembles most, and the change view of one that differs, with a switch to the
figure as submitted and the regenerated one), the regenerated figures, the run log per script, the provenance,
figproof's other findings and the paragraph for the letter to the authors.  Pure: text out.
"""

from __future__ import annotations

from collections.abc import Sequence

from figproof.deposit.replication import (
    IndexEntry,
    Replication,
    headline,
    inputs,
    letter,
    other_findings,
    unexplained,
)
from figproof.report.html import banner, chip, document, switch
from figproof.report.html import escape as _e
from figproof.report.markdown import isolation_words

#: The folder beside the page that holds its images.
IMAGES = "img"

_VERDICT = {"reproduced": ("clean", "reproduced"), "differs": ("error", "differs"),
            "not-found": ("error", "not found")}


def _n(count: int, word: str) -> str:
    return f"{count} {word}{'s' * (count != 1)}"


def _codes(items: Sequence[str]) -> str:
    return ", ".join(f"<code>{_e(i)}</code>" for i in items)


def _img(rep: Replication, key: str, alt: str) -> str:
    name = rep.pictures.get(key)
    return (f'<img src="{IMAGES}/{_e(name)}" alt="{_e(alt)}" loading="lazy">' if name
            else '<div class="noimg">not rendered</div>')


def _table(head: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    """A table; cells are HTML."""
    th = "".join(f"<th>{_e(h)}</th>" for h in head)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in row) + "</tr>" for row in rows)
    return f'<table class="plain"><thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>'


def _header(rep: Replication) -> str:
    counts = {v: sum(m.verdict == v for m in rep.matches) for v in ("reproduced", "differs", "not-found")}
    chips = ""
    if rep.references_asked:
        chips += chip("note", counts["reproduced"], "reproduced")
        chips += chip("error", counts["differs"], "differ") + chip("error", counts["not-found"], "not found")
    chips += chip("warning", len(rep.failed), f"of {_n(len(rep.runs), 'script')} failed")
    facts = [_e(headline(rep)), f"figproof {_e(rep.version)}"]
    if rep.sha256:
        facts.append(f"archive SHA-256 <code>{_e(rep.sha256[:16])}</code>…")
    facts.append(f"isolation: {_e(isolation_words(rep.runs))}")
    word = "REPRODUCED" if rep.reproduced else "NOT REPRODUCED"
    return banner(word, rep.reproduced, f"Replication report for <code>{_e(rep.deposit)}</code>", chips, facts)


def _environment(rep: Replication) -> str:
    s = rep.survey
    parts = ['<section class="loose" id="environment"><h2>Environment</h2>']
    if rep.causes:
        items = "".join(f"<li><b>{_e(c.verdict)}</b>: {_codes(c.scripts)}</li>" for c in rep.causes)
        parts.append(f"<p>What stopped scripts here, one line per cause:</p><ul>{items}</ul>")
    other = unexplained(rep)
    if other:
        parts.append(f"<p>{_e(_n(len(other), 'script'))} failed for a reason that is not the environment (see the "
                     f"run log): {_codes(other)}.</p>")
    caused = {c.key for c in rep.causes if c.kind == "package-missing"}
    missing = [i for i in s.missing if i.distribution not in caused]
    if missing:
        items = "".join(f"<li><code>{_e(i.distribution)}</code> (import <code>{_e(i.module)}</code>): "
                        f"{_codes(i.scripts)}</li>" for i in missing)
        parts.append("<p>Packages the scripts import or need that are not installed here (no script has failed "
                     f"on them yet, or the script failed earlier):</p><ul>{items}</ul>")
    if s.python2 and not any(c.kind == "python2-only" for c in rep.causes):
        parts.append(f"<p>Python 2 syntax in {_codes([p.path for p in s.python2])}.</p>")
    if s.asks:
        met = sum(a.met for a in s.asks)
        parts.append(f"<p>The deposit's requirement files ask for {_e(_n(len(s.asks), 'version'))}; {met} "
                     f"{'is' if met == 1 else 'are'} met here.</p>")
        unmet = [a for a in s.asks if not a.met]
        if unmet:
            parts.append(_table(("file", "asks for", "installed here"),
                                [(f"<code>{_e(a.file)}</code>", f"<code>{_e(a.requirement)}</code>",
                                  _e(a.installed or "not installed")) for a in unmet]))
    parts += [f"<p>{_e(n)}</p>" for n in s.notes]
    if s.imports:
        rows = [(f"<code>{_e(i.module)}</code>", _e(i.distribution), _e(i.installed) if i.installed
                 else "<b>missing</b>", str(len(i.scripts))) for i in s.imports]
        parts.append("<details><summary>What the scripts import</summary>"
                     + _table(("import", "distribution", "installed here", "scripts"), rows) + "</details>")
    parts.append("</section>")
    return "".join(parts)


def _references(rep: Replication) -> str:
    if not rep.references_asked:
        return ""
    parts = ['<section class="loose" id="references"><h2>Figures as submitted</h2>']
    if rep.matches:
        parts.append("<p>Similarity is the structural similarity (SSIM) of the two figures in grey after trimming "
                     "margins and scaling to a common size: 0.80 or more counts as reproduced "
                     "when, laid over the regenerated figure, no more than 2.5 % of its pixels differ.</p>")
    for n, m in enumerate(rep.matches):
        badge, word = _VERDICT[m.verdict]
        closest = (f"closest regenerated figure <code>{_e(m.regenerated)}</code>, similarity {m.similarity:.2f}"
                   if m.regenerated else "nothing was regenerated")
        pair = (f'<div class="row"><figure>{_img(rep, m.reference, m.reference + " as submitted")}'
                f"<figcaption>as submitted</figcaption></figure>")
        if m.regenerated:
            pair += (f"<figure>{_img(rep, m.regenerated, m.regenerated + ' regenerated')}"
                     f"<figcaption>regenerated: <code>{_e(m.regenerated)}</code></figcaption></figure>")
        pair += "</div>"
        cv = rep.change_views.get(m.reference)
        view = ""
        if cv is not None:
            views = (("changes", "what changed", f"{IMAGES}/{cv.view}"),
                     ("submitted", "as submitted", f"{IMAGES}/{cv.submitted}"),
                     ("regenerated", "regenerated now", f"{IMAGES}/{cv.regenerated}"))
            view = switch(f"reference-{n}", f"Change view of <code>{_e(m.reference)}</code>",
                          f"Against the figure as submitted: {cv.caption}", views, m.reference,
                          "What changed: the regenerated figure faded, what differs from the figure as submitted "
                          "in orange, each region outlined.")
        parts.append(f'<section class="figure" data-section><h3><code>{_e(m.reference)}</code> '
                     f'<span class="badge {badge}">{word}</span></h3><p>{closest}</p>'
                     f'<div class="vision">{pair}</div>{view}</section>')
    parts += [f"<p>{_e(p)}</p>" for p in rep.reference_problems]
    parts.append("</section>")
    return "".join(parts)


def _regenerated(rep: Replication) -> str:
    if not rep.regenerated:
        return ""
    cards = []
    for g in rep.regenerated:
        if rep.references_asked:
            badge = (f'<span class="badge clean">matches {_e(g.reference)}</span>' if g.reference
                     else '<span class="badge note">no reference</span>')
        else:
            badge = ""
        saved = _codes(list(g.outputs)) or "not saved to a file"
        cards.append(f'<div class="card">{_img(rep, g.id, g.id + " as drawn")}<span class="cap">'
                     f"<code>{_e(g.id)}</code>saved as {saved} {badge}</span></div>")
    return (f'<section class="loose" id="regenerated"><h2>Regenerated figures</h2><div class="grid">{"".join(cards)}'
            f"</div></section>")


def _run_log(rep: Replication) -> str:
    causes = {s: c for c in rep.causes for s in c.scripts}
    rows = []
    for r in rep.runs:
        error = f"{r.error.type}: {r.error.message}" if r.error and r.error.type else (r.error.kind if r.error else "")
        cause = causes[r.path].kind if r.path in causes else ("—" if r.status == "ok" else "not environmental")
        rows.append((f"<code>{_e(r.path)}</code>", _e(r.status), str(len(r.figures)), _e(cause), _e(error[:300])))
    tails = []
    for r in rep.failed:
        tail = (r.stderr_tail or "").strip()
        if tail:
            tails.append(f"<details><summary>{_e(r.path)}: last lines of its error output</summary>"
                         f'<pre class="code"><code>{_e(tail[-3000:])}</code></pre></details>')
    return (f'<section class="loose" id="run-log"><h2>Run log</h2>'
            f'{_table(("script", "status", "figures", "cause", "error"), rows)}{"".join(tails)}</section>')


def _provenance(rep: Replication) -> str:
    env = rep.environment
    versions = ", ".join(f"{name} {_e(env[key])}" for key, name in (
        ("python", "Python"), ("matplotlib", "matplotlib"), ("freetype", "FreeType"), ("numpy", "numpy"),
        ("pandas", "pandas"), ("pillow", "Pillow")) if env.get(key))
    what = f"archive SHA-256 <code>{_e(rep.sha256)}</code>" if rep.sha256 else "a folder (no archive)"
    text = (f"<p>Deposit <code>{_e(rep.deposit)}</code>: {what}. Checked by figproof {_e(rep.version)}"
            + (f" with {versions}." if versions else ".") + "</p>")
    rows = [(f"<code>{_e(p)}</code>", f'<code class="sha">{_e(h)}</code>') for p, h in inputs(rep.runs)]
    table = _table(("input", "SHA-256"), rows) if rows else "<p>No input files were read.</p>"
    return f'<section class="loose prov" id="provenance"><h2>Provenance</h2>{text}{table}</section>'


def _findings(rep: Replication) -> str:
    shown = other_findings(rep)
    if not shown:
        return ""
    rows = [(f"<code>{_e(f.path)}{':' + str(f.line) if f.line else ''}</code>", _e(f.rule), _e(f.message))
            for f in shown]
    return (f'<section class="loose" id="findings"><h2>Other findings</h2><p>figproof\'s figure checks found '
            f"{_e(_n(len(shown), 'problem'))} in the figures that were drawn (they do not change the replication "
            f"verdict):</p>{_table(('where', 'rule', 'what figproof found'), rows)}</section>")


def render(rep: Replication) -> str:
    """The replication report of one deposit as a whole HTML page (deterministic for the same input)."""
    body = (f"{_header(rep)}<main>{_environment(rep)}{_references(rep)}{_regenerated(rep)}{_run_log(rep)}"
            f"{_provenance(rep)}{_findings(rep)}"
            f'<section class="loose" id="letter"><h2>For the letter to the authors</h2>'
            f'<blockquote class="letter">{_e(letter(rep))}</blockquote></section></main>'
            f"<footer>Written by figproof {_e(rep.version)}; the markdown and JSON reports say the same.</footer>")
    word = "reproduced" if rep.reproduced else "not reproduced"
    return document(f"figproof: {word} · {rep.deposit}", body)


def render_index(entries: Sequence[IndexEntry]) -> str:
    """The index of a batch as a page linking each deposit's page."""
    done = [e for e in entries if e.problem is None]
    good = sum(e.reproduced for e in done)
    rows = []
    for e in entries:
        if e.problem is not None:
            rows.append((f"<code>{_e(e.deposit)}</code>", f"<b>not checked</b>: {_e(e.problem)}", "—"))
            continue
        verdict = ("reproduced" if e.reproduced else "<b>not reproduced</b>") + f": {_e(e.headline)}"
        links = [f'<a href="{_e(e.folder)}/replication.md">markdown</a>' if e.folder else ""]
        if e.html:
            links.insert(0, f'<a href="{_e(e.html)}">visual report</a>')
        rows.append((f"<code>{_e(e.deposit)}</code>", verdict, ", ".join(x for x in links if x)))
    all_good = good == len(entries)
    chips = chip("note", good, "reproduced") + chip("error", len(done) - good, "not reproduced") \
        + chip("warning", len(entries) - len(done), "not checked")
    body = (banner("REPRODUCED" if all_good else "NOT REPRODUCED", all_good, "Replication reports", chips,
                   [f"{good} of {_e(_n(len(entries), 'deposit'))} reproduced"])
            + f'<main><section class="loose"><h2>Deposits</h2>'
              f'{_table(("deposit", "verdict", "report"), rows)}</section></main>')
    return document("figproof: replication reports", body)


__all__ = ["IMAGES", "render", "render_index"]

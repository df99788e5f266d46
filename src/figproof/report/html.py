"""The HTML report: one self-contained page a person reads beside the figures.

Front: the verdict, the counts and a grid of every figure as drawn, each
badged with its worst open finding.  Then one section per figure: the
rendered figure with each finding outlined on it and numbered to the list
beside it, the simulated colour-vision and grayscale views where a colour
finding asks for them, the change view of a drifted figure file with a switch
between it, the committed file and the regenerated one, the honest redraw
with the code that draws it, where the figure came from (script:line, inputs
with SHA-256) and the allow comment to paste.  Findings tied to no drawn
figure (a crashed script, a missing input) are listed after the figures.

The page uses no network, no framework and no external file but the images
beside it: inline CSS, a few lines of plain JavaScript for the filters (rule,
severity, script, accepted findings) and for the change-view switch.  This
module renders text only; :mod:`figproof.report.write` writes the files.
"""

from __future__ import annotations

import html
import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from figproof.model.findings import CheckResult, Finding
from figproof.report.markdown import isolation_words

Box = tuple[float, float, float, float]
_RANK = {"error": 0, "warning": 1, "note": 2}


@dataclass(frozen=True, slots=True, kw_only=True)
class View:
    """One picture of a figure besides the rendering: a simulated vision, a change view, a file."""

    label: str
    src: str  # link relative to the page


@dataclass(frozen=True, slots=True, kw_only=True)
class Drift:
    """A drifted figure file: its change view, the committed and regenerated files, and the caption."""

    path: str
    changes: str
    committed: str
    regenerated: str
    caption: str


@dataclass(frozen=True, slots=True, kw_only=True)
class Redraw:
    """The honest redraw of a summary: a picture drawn from the same values and the code that draws it."""

    finding: int  # index into the figure's findings
    src: str
    code: str
    interval: str  # what the interval shows, in words


@dataclass(frozen=True, slots=True, kw_only=True)
class FigureEntry:
    """One drawn figure with everything its section shows."""

    id: str
    script: str
    where: str  # script:line that created the figure
    image: str | None  # the rendering, relative to the page
    image_size: tuple[int, int]  # its pixel size
    model_size: tuple[float, float]  # the model's display size (what mark boxes are in)
    findings: tuple[Finding, ...] = ()
    boxes: tuple[tuple[Box, ...], ...] = ()  # per finding
    vision: tuple[View, ...] = ()
    drifts: tuple[Drift, ...] = ()
    redraws: tuple[Redraw, ...] = ()
    inputs: tuple[tuple[str, str], ...] = ()  # (path, sha256)
    outputs: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True, kw_only=True)
class Page:
    result: CheckResult
    figures: tuple[FigureEntry, ...] = ()
    provenance: Mapping[str, Any] = field(default_factory=dict)


def _e(text: object) -> str:
    return html.escape(str(text), quote=True)


escape = _e  # text made safe for HTML, quotes included


def where(f: Finding) -> str:
    cell = f" cell {f.cell}" if f.cell is not None else ""
    line = f":{f.line}" if f.line else ""
    return f"{f.path}{cell}{line}"


def allow_comment(f: Finding) -> str:
    """The comment that accepts ``f`` when put on its line or the line above."""
    return f"# figproof: allow {f.rule} -- <why this figure is right as it is>"


def worst(findings: Sequence[Finding]) -> Finding | None:
    open_ = [f for f in findings if f.accepted is None]
    return min(open_, key=lambda f: (_RANK[f.severity], f.rule)) if open_ else None


def _anchor(figure_id: str) -> str:
    return "fig-" + "".join(c if c.isalnum() else "-" for c in figure_id)


# --------------------------------------------------------------------------
# pieces
# --------------------------------------------------------------------------


def _attrs(f: Finding) -> str:
    return (f'data-finding data-rule="{_e(f.rule)}" data-severity="{_e(f.severity)}" '
            f'data-script="{_e(f.script or f.path)}" data-accepted="{"yes" if f.accepted else "no"}"')


def _header(result: CheckResult, provenance: Mapping[str, Any]) -> str:
    s = result.summary
    verdict = "passed" if s.passed else "failed"
    chips = [("error", s.errors, "errors"), ("warning", s.warnings, "warnings"), ("note", s.notes, "notes"),
             ("accepted", s.accepted, "accepted")]
    chip_html = "".join(chip(k, n, label) for k, n, label in chips)
    commit = provenance.get("git_commit")
    facts = [f"{s.figures} figure{'s' * (s.figures != 1)} from {s.scripts} script{'s' * (s.scripts != 1)}",
             f"figproof {_e(result.version)}"]
    if commit:
        facts.append(f"commit <code>{_e(str(commit)[:12])}</code>")
    if provenance.get("date"):
        facts.append(_e(provenance["date"]))
    facts.append(f"isolation: {_e(isolation_words(result.runs))}")
    return banner(verdict.upper(), s.passed, f"figproof report for <code>{_e(result.root)}</code>", chip_html,
                  facts)


def banner(word: str, good: bool, title: str, chips: str, facts: Sequence[str]) -> str:
    """The page's verdict header: the word in large letters, a title (HTML), chips (HTML) and facts (HTML)."""
    kind = "passed" if good else "failed"
    return (f'<header class="verdict {kind}"><div class="word">{_e(word)}</div>'
            f'<div class="what"><h1>{title}</h1>'
            f'<p class="chips">{chips}</p><p class="facts">{" · ".join(facts)}</p></div></header>')


def chip(kind: str, count: int, label: str) -> str:
    return f'<span class="chip {_e(kind)}"><b>{count}</b> {_e(label)}</span>'


def _filters(result: CheckResult) -> str:
    rules = sorted({f.rule for f in result.findings})
    # a finding in a helper module is filed under the script that ran it
    scripts = sorted({f.script or f.path for f in result.findings} | {r.path for r in result.runs})

    def options(values: Sequence[str]) -> str:
        return "".join(f'<option value="{_e(v)}">{_e(v)}</option>' for v in values)

    return ('<form id="filters" class="filters" aria-label="filter findings">'
            f'<label>rule <select name="rule"><option value="">any</option>{options(rules)}</select></label>'
            '<label>severity <select name="severity"><option value="">any</option>'
            f'{options(["error", "warning", "note"])}</select></label>'
            f'<label>script <select name="script"><option value="">any</option>{options(scripts)}</select></label>'
            '<label class="tick"><input type="checkbox" name="accepted"> show accepted findings</label>'
            '<output id="shown" aria-live="polite"></output></form>')


def _card(fig: FigureEntry) -> str:
    bad = worst(fig.findings)
    n_open = sum(f.accepted is None for f in fig.findings)
    badge = (f'<span class="badge {bad.severity}">{_e(bad.severity)}: {_e(bad.rule)}'
             f'{f" +{n_open - 1}" if n_open > 1 else ""}</span>' if bad
             else '<span class="badge clean">no findings</span>')
    img = (f'<img src="{_e(fig.image)}" alt="{_e(fig.id)} as drawn" loading="lazy">' if fig.image
           else '<div class="noimg">not rendered</div>')
    rules = " ".join(sorted({f.rule for f in fig.findings}))
    sev = " ".join(sorted({f.severity for f in fig.findings if f.accepted is None}))
    return (f'<a class="card" href="#{_anchor(fig.id)}" data-card data-script="{_e(fig.script)}" '
            f'data-rules="{_e(rules)}" data-severities="{_e(sev)}">{img}'
            f'<span class="cap"><code>{_e(fig.id)}</code>{badge}</span></a>')


def _marks_svg(fig: FigureEntry) -> str:
    """Outlines over the rendering: model display boxes scaled to the image's pixels (y flipped).

    Findings that point at the same place (three findings about one set of bars) share one outline,
    labelled with all their numbers and drawn in the colour of the worst of them.
    """
    width, height = fig.image_size
    mw, mh = fig.model_size
    sx, sy = (width / mw if mw else 1.0), (height / mh if mh else 1.0)
    places: dict[tuple[int, int, int, int], list[tuple[int, Finding]]] = {}
    for k, (f, boxes) in enumerate(zip(fig.findings, fig.boxes, strict=True), start=1):
        if f.accepted is not None:
            continue
        for x0, y0, x1, y1 in boxes:
            key = (round(x0 * sx), round(height - y1 * sy), round(max(2.0, (x1 - x0) * sx)),
                   round(max(2.0, (y1 - y0) * sy)))
            places.setdefault(key, []).append((k, f))
    parts = []
    for (left, top, w, h), found in places.items():
        lead = min((f for _, f in found), key=lambda f: _RANK[f.severity])
        numbers = ",".join(dict.fromkeys(str(k) for k, _ in found))
        rules = " ".join(sorted({f.rule for _, f in found}))
        sevs = " ".join(sorted({f.severity for _, f in found}))
        r = 9 + 4 * (len(numbers) - 1) // 2
        parts.append(
            f'<g class="mark {lead.severity}" data-mark data-rules="{_e(rules)}" data-severities="{_e(sevs)}" '
            f'data-n="{numbers}"><rect class="halo" x="{left}" y="{top}" width="{w}" height="{h}"/>'
            f'<rect class="line" x="{left}" y="{top}" width="{w}" height="{h}"/>'
            f'<rect class="tag" x="{left - r}" y="{top - 9}" width="{2 * r}" height="18" rx="9"/>'
            f'<text x="{left}" y="{top + 4}">{numbers}</text></g>')
    return (f'<svg class="marks" viewBox="0 0 {width} {height}" preserveAspectRatio="none" '
            f'aria-hidden="true">{"".join(parts)}</svg>')


def _finding_item(k: int, f: Finding, redraw: Redraw | None) -> str:
    extra = ""
    if redraw is not None:
        extra = (f'<details class="redraw" open><summary>Honest redraw: every value, {_e(redraw.interval)}'
                 f'</summary><img src="{_e(redraw.src)}" alt="redraw of the summary from its own values">'
                 f'<p>Drawn from the values the script plotted; the code below draws it again (run it from the '
                 f'repo root):</p><pre class="code"><code>{_e(redraw.code)}</code></pre></details>')
    return (f'<li class="finding {f.severity}" {_attrs(f)} value="{k}">'
            f'<p class="head"><span class="sev {f.severity}">{_e(f.severity)}</span> <b>{_e(f.rule)}</b> '
            f'<span class="conf">({_e(f.confidence)})</span> <code class="at">{_e(where(f))}</code></p>'
            f'<p class="msg">{_e(f.message)}</p>'
            f'<p class="allow">To accept it, put on that line or the line above: '
            f'<code>{_e(allow_comment(f))}</code></p>{extra}</li>')


def _accepted_list(findings: Sequence[Finding]) -> str:
    items = "".join(f'<li {_attrs(f)}><b>{_e(f.rule)}</b> <code>{_e(where(f))}</code>: {_e(f.message)} '
                    f'<i>accepted: {_e(f.accepted)}</i></li>' for f in findings)
    return (f'<details class="accepted"><summary>{len(findings)} accepted finding{"s" * (len(findings) != 1)}'
            f'</summary><ul>{items}</ul></details>')


def _drift(d: Drift, n: int) -> str:
    views = (("changes", "what changed", d.changes), ("committed", "committed file", d.committed),
             ("regenerated", "regenerated now", d.regenerated))
    return switch(f"drift-{n}", f"Drift of <code>{_e(d.path)}</code>", d.caption, views, d.path,
                  "What changed: the regenerated figure faded, changed pixels in orange, each changed region "
                  "outlined.")


def switch(name: str, title: str, caption: str, views: Sequence[tuple[str, str, str]], alt: str,
           legend: str) -> str:
    """Pictures of one figure with a switch between them in place: ``views`` are (key, label, src), the first
    shown; ``title`` is HTML, ``caption``, ``alt`` and ``legend`` are text."""
    radios = "".join(f'<label><input type="radio" name="{_e(name)}" value="{_e(key)}"{" checked" * (i == 0)}> '
                     f'{_e(label)}</label>' for i, (key, label, _) in enumerate(views))
    imgs = "".join(f'<img data-view="{_e(key)}" src="{_e(src)}" alt="{_e(alt)}: {_e(label)}"'
                   f'{" hidden" * (i != 0)}>' for i, (key, label, src) in enumerate(views))
    return (f'<div class="drift" data-switch><h3>{title}</h3>'
            f'<p class="caption">{_e(caption)}.</p><div class="switch" role="radiogroup">{radios}</div>'
            f'<div class="views">{imgs}</div><p class="legend">{_e(legend)}</p></div>')


def _vision(views: Sequence[View]) -> str:
    cells = "".join(f'<figure><img src="{_e(v.src)}" alt="{_e(v.label)}"><figcaption>{_e(v.label)}</figcaption>'
                    f'</figure>' for v in views)
    return f'<details class="vision"><summary>As colour-blind and grayscale readers see it</summary>' \
           f'<div class="row">{cells}</div></details>'


def _provenance(fig: FigureEntry) -> str:
    rows = "".join(f"<tr><td><code>{_e(p)}</code></td><td><code class=\"sha\">{_e(h or 'not hashed')}</code></td>"
                   f"</tr>" for p, h in fig.inputs)
    outputs = ", ".join(f"<code>{_e(o)}</code>" for o in fig.outputs) or "not saved to a file"
    table = (f'<table><thead><tr><th>input</th><th>SHA-256</th></tr></thead><tbody>{rows}</tbody></table>'
             if rows else "<p>No input files were read.</p>")
    return (f'<details class="prov"><summary>Where it came from</summary><p>Drawn by <code>{_e(fig.where)}</code>; '
            f'saved as {outputs}.</p>{table}</details>')


def _figure_section(fig: FigureEntry, drift_start: int) -> str:
    open_ = [(k, f) for k, f in enumerate(fig.findings, start=1) if f.accepted is None]
    accepted = [f for f in fig.findings if f.accepted is not None]
    redraws = {r.finding: r for r in fig.redraws}
    stage = (f'<div class="stage"><img src="{_e(fig.image)}" width="{fig.image_size[0]}" '
             f'height="{fig.image_size[1]}" alt="{_e(fig.id)} with its findings marked">{_marks_svg(fig)}</div>'
             if fig.image else '<p class="noimg">This figure was not rendered.</p>')
    items = "".join(_finding_item(k, f, redraws.get(k - 1)) for k, f in open_)
    listing = f'<ol class="findings">{items}</ol>' if items else '<p class="clean">No open findings.</p>'
    more = "".join(_drift(d, drift_start + i) for i, d in enumerate(fig.drifts))
    if fig.vision:
        more += _vision(fig.vision)
    more += _provenance(fig)
    if accepted:
        more += _accepted_list(accepted)
    return (f'<section class="figure" id="{_anchor(fig.id)}" data-section data-script="{_e(fig.script)}">'
            f'<h2><code>{_e(fig.id)}</code></h2><div class="pair">{stage}<div class="side">{listing}</div></div>'
            f'{more}</section>')


def _loose(findings: Sequence[Finding]) -> str:
    open_ = [f for f in findings if f.accepted is None]
    accepted = [f for f in findings if f.accepted is not None]
    if not findings:
        return ""
    items = "".join(_finding_item(k, f, None) for k, f in enumerate(open_, start=1))
    body = f'<ol class="findings">{items}</ol>' if items else ""
    if accepted:
        body += _accepted_list(accepted)
    return (f'<section class="loose" id="not-drawn" data-section><h2>Findings not tied to a drawn figure</h2>'
            f'{body}</section>')


# --------------------------------------------------------------------------
# the page
# --------------------------------------------------------------------------


def render(page: Page) -> str:
    """The whole page as one HTML5 document (deterministic for the same input)."""
    result = page.result
    on_figures = {f.fingerprint + f.message for fig in page.figures for f in fig.findings}
    loose = [f for f in result.findings if f.fingerprint + f.message not in on_figures]
    grid = "".join(_card(fig) for fig in page.figures)
    sections, drift_n = [], 0
    for fig in page.figures:
        sections.append(_figure_section(fig, drift_n))
        drift_n += len(fig.drifts)
    total = sum(1 for f in result.findings if f.accepted is None)
    meta = json.dumps({"open": total}, sort_keys=True)
    body = (f"{_header(result, page.provenance)}<main>{_filters(result)}"
            f'<section id="overview"><h2>Figures</h2><div class="grid">{grid or "<p>No figures were drawn.</p>"}'
            f"</div></section>{''.join(sections)}{_loose(loose)}</main>"
            f'<footer>Marks are placed from the figure model figproof recorded while the script drew; '
            f'numbers match the list beside each figure. <script type="application/json" id="counts">{meta}</script>'
            f"</footer>")
    return document(f"figproof: {'passed' if result.summary.passed else 'failed'} · {result.root}", body)


def document(title: str, body: str) -> str:
    """A whole HTML5 page around ``body`` (HTML): figproof's style and script inline, no external file but the
    images it links, a content security policy that allows nothing else."""
    return (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; img-src 'self' data:; "
        "style-src 'unsafe-inline'; script-src 'unsafe-inline'\">"
        f"<title>{_e(title)}</title><style>{_CSS}</style></head><body>{body}<script>{_JS}</script></body></html>\n"
    )


_CSS = """
:root{--ink:#1d2330;--paper:#fbfaf7;--line:#d9d4c7;--error:#b3261e;--warning:#9a5b00;--note:#35598f;
--ok:#2f6b3a;--tint:#c43e00;font-family:system-ui,-apple-system,"Segoe UI",sans-serif;color:var(--ink);
background:var(--paper)}
body{margin:0}main{max-width:1180px;margin:0 auto;padding:0 20px 40px}
code{font-family:ui-monospace,"DejaVu Sans Mono",monospace;font-size:.9em}
header.verdict{display:flex;gap:24px;align-items:center;padding:22px 28px;border-bottom:4px solid var(--line)}
header.failed{background:#f6e7e4;border-color:var(--error)}header.passed{background:#e6f1e6;border-color:var(--ok)}
.word{font-size:2.6rem;font-weight:800;letter-spacing:.06em}.failed .word{color:var(--error)}
.passed .word{color:var(--ok)}h1{font-size:1.15rem;margin:0 0 6px}.facts{margin:4px 0 0;color:#555}
.chips{margin:0}.chip{display:inline-block;margin-right:8px;padding:2px 10px;border-radius:3px;
background:#fff;border:1px solid var(--line)}.chip.error b{color:var(--error)}.chip.warning b{color:var(--warning)}
.chip.note b{color:var(--note)}
.filters{position:sticky;top:0;z-index:3;display:flex;flex-wrap:wrap;gap:14px;align-items:center;padding:10px 0;
background:var(--paper);border-bottom:1px solid var(--line)}.filters select{max-width:260px}
#shown{color:#555;margin-left:auto}
.grid{display:grid;grid-template-columns:repeat(auto-fill,minmax(220px,1fr));gap:14px}
.card{display:block;background:#fff;border:1px solid var(--line);color:inherit;text-decoration:none;padding:8px}
.card img{width:100%;height:160px;object-fit:contain;background:#fff}.card .cap{display:block;font-size:.82rem}
.card .cap code{display:block;margin:4px 0;overflow-wrap:anywhere}
.badge{display:inline-block;padding:1px 7px;border-radius:2px;color:#fff;font-size:.78rem}
.badge.error,.sev.error{background:var(--error)}.badge.warning,.sev.warning{background:var(--warning)}
.badge.note,.sev.note{background:var(--note)}.badge.clean{background:var(--ok)}
.sev{color:#fff;padding:0 6px;border-radius:2px;font-size:.8rem;text-transform:uppercase}
section.figure,section.loose{margin-top:34px;padding-top:8px;border-top:2px solid var(--ink)}
h2{font-size:1.1rem}.pair{display:grid;grid-template-columns:minmax(0,3fr) minmax(0,2fr);gap:22px;
align-items:start}@media (max-width:860px){.pair{grid-template-columns:1fr}}
.stage{position:relative;background:#fff;border:1px solid var(--line)}
.stage img{display:block;width:100%;height:auto}.stage svg{position:absolute;inset:0;width:100%;height:100%}
.mark rect{fill:none;vector-effect:non-scaling-stroke}.mark .halo{stroke:#fff;stroke-width:6}
.mark .line{stroke-width:2.5;stroke-dasharray:7 3}.mark.error .line{stroke:var(--error)}
.mark.warning .line{stroke:var(--warning)}.mark.note .line{stroke:var(--note)}
.mark .tag{stroke:#fff;stroke-width:2}.mark.error .tag{fill:var(--error)}.mark.warning .tag{fill:var(--warning)}
.mark.note .tag{fill:var(--note)}.mark text{fill:#fff;font:bold 12px system-ui,sans-serif;text-anchor:middle}
ol.findings{margin:0;padding-left:26px}ol.findings li{margin-bottom:14px}ol.findings li::marker{font-weight:700}
li.error::marker{color:var(--error)}li.warning::marker{color:var(--warning)}li.note::marker{color:var(--note)}
.head,.msg,.allow{margin:2px 0}.conf{color:#666}.allow{font-size:.85rem;color:#444}
.allow code{background:#efece4;padding:1px 4px;overflow-wrap:anywhere}
pre.code{background:#1f2430;color:#f3efe3;padding:10px;overflow:auto;font-size:.8rem;max-height:340px}
.redraw img{max-width:100%;border:1px solid var(--line);background:#fff}
details{margin-top:12px}summary{cursor:pointer;font-weight:600}
.vision .row{display:flex;flex-wrap:wrap;gap:10px}.vision figure{margin:0;width:calc(50% - 5px)}
.vision img{width:100%;border:1px solid var(--line)}figcaption{font-size:.82rem;color:#555}
.drift{margin-top:16px;padding:10px;background:#fff;border-left:5px solid var(--tint)}
.drift h3{margin:0 0 4px;font-size:1rem}.caption{margin:0 0 6px;font-weight:600}.switch label{margin-right:14px}
.views img{max-width:100%;border:1px solid var(--line);margin-top:6px}.legend{font-size:.82rem;color:#555}
.prov table{border-collapse:collapse;font-size:.85rem}.prov td,.prov th{border:1px solid var(--line);
padding:3px 8px;text-align:left}.sha{font-size:.78rem}
table.plain{border-collapse:collapse;font-size:.85rem;margin:8px 0}table.plain td,table.plain th{
border:1px solid var(--line);padding:3px 8px;text-align:left;vertical-align:top}table.plain th{background:#efece4}
blockquote.letter{margin:8px 0;padding:12px 16px;background:#fff;border-left:5px solid var(--note)}
footer{max-width:1180px;margin:30px auto;padding:0 20px;color:#666;font-size:.85rem}
[hidden]{display:none!important}
"""

# Filters and the change-view switch; the page works without them (everything is shown).
_JS = """
(function(){
  var form=document.getElementById('filters');
  function apply(){
    if(!form){return;}
    var rule=form.rule.value, sev=form.severity.value, script=form.script.value, acc=form.accepted.checked;
    var shown=0, all=0;
    document.querySelectorAll('[data-finding]').forEach(function(el){
      var ok=(!rule||el.dataset.rule===rule)&&(!sev||el.dataset.severity===sev)&&
             (!script||el.dataset.script===script)&&(acc||el.dataset.accepted==='no'||el.closest('details'));
      el.hidden=!ok;
      if(el.tagName==='LI'&&el.dataset.accepted==='no'){all++; if(ok){shown++;}}
    });
    document.querySelectorAll('[data-mark]').forEach(function(m){
      m.style.display=((!rule||m.dataset.rules.split(' ').indexOf(rule)>=0)&&
                 (!sev||m.dataset.severities.split(' ').indexOf(sev)>=0))?'':'none';
    });
    document.querySelectorAll('details.accepted').forEach(function(d){d.open=acc;});
    var narrowed=rule||sev;
    document.querySelectorAll('[data-section]').forEach(function(sec){
      var has=sec.querySelector('li[data-finding]:not([hidden])');
      sec.hidden=(script&&sec.dataset.script&&sec.dataset.script!==script)||(narrowed&&!has);
    });
    document.querySelectorAll('[data-card]').forEach(function(c){
      var ok=(!script||c.dataset.script===script)&&(!rule||c.dataset.rules.split(' ').indexOf(rule)>=0)&&
             (!sev||c.dataset.severities.split(' ').indexOf(sev)>=0);
      c.hidden=!ok;
    });
    document.getElementById('shown').textContent='showing '+shown+' of '+all+' open findings';
  }
  if(form){form.addEventListener('change',apply); apply();}
  document.querySelectorAll('[data-switch]').forEach(function(box){
    box.addEventListener('change',function(ev){
      box.querySelectorAll('img[data-view]').forEach(function(img){img.hidden=img.dataset.view!==ev.target.value;});
    });
  });
})();
"""

__all__ = ["Drift", "FigureEntry", "Page", "Redraw", "View", "allow_comment", "banner", "chip", "document", "escape",
           "render", "switch", "worst"]

"""Write docs/rules/*.md from the rule records: ``python -m figproof.docgen docs/rules``.

The pages are generated so they cannot drift from the code; a test checks
that the committed pages equal what this module writes.
"""

from __future__ import annotations

import sys
from pathlib import Path

from figproof.rules import RULES
from figproof.rules.base import Rule


def rule_page(r: Rule) -> str:
    """The markdown page of one rule."""
    lines = [f"# {r.id}", "", r.summary, "",
             f"Default severity: **{r.severity}**; scope: {r.scope} ("
             + ("judged from the drawn figure" if r.scope == "figure" else "judged from the run of the script")
             + ")." + (f" **Opt-in**: it runs only when the config gives it a severity (`severity = \"{r.severity}\"` "
                       f"under `[tool.figproof.rules.{r.id}]`)." if r.opt_in else ""), ""]
    if r.former_ids:
        lines += ["Formerly " + ", ".join(f"`{old}`" for old in r.former_ids)
                  + ": the old id is still accepted in config tables, allow comments and the accepted-findings "
                  "file, with a note.", ""]
    lines += ["## Why it matters", "", r.why, "", "## How to fix it", "", r.fix, ""]
    if r.knobs:
        lines += ["## Settings", "", f"Under `[tool.figproof.rules.{r.id}]`:", "",
                  "| key | default | meaning |", "|---|---|---|"]
        for k in r.knobs:
            bounds = ""
            if k.minimum is not None or k.maximum is not None:
                bounds = f" (from {k.minimum:g})" if k.maximum is None else \
                    f" ({k.minimum:g} to {k.maximum:g})" if k.minimum is not None else f" (up to {k.maximum:g})"
            lines.append(f"| `{k.name.replace('_', '-')}` | {k.default:g} | {k.help}{bounds} |")
        lines.append("")
    lines += ["`severity` (error, warning, note or off) changes how findings of this rule count.", ""]
    lines += ["## Example that raises it", "", "```python", r.bad.rstrip(), "```", "",
              "## Example that does not", "", "```python", r.good.rstrip(), "```", "", "## Sources", ""]
    lines += [f"- {s}" for s in r.sources]
    return "\n".join(lines) + "\n"


def index_page() -> str:
    lines = ["# Rules", "", "| rule | default severity | what it finds |", "|---|---|---|"]
    lines += [f"| [{r.id}]({r.id}.md) | {r.severity}{' (opt-in)' if r.opt_in else ''} | {r.summary} |" for r in RULES]
    return "\n".join(lines) + "\n"


def pages() -> dict[str, str]:
    """File name → content for every generated page."""
    out = {f"{r.id}.md": rule_page(r) for r in RULES}
    out["README.md"] = index_page()
    return out


def main(argv: list[str] | None = None) -> int:
    folder = Path((argv or sys.argv[1:] or ["docs/rules"])[0])
    folder.mkdir(parents=True, exist_ok=True)
    for name, text in pages().items():
        (folder / name).write_text(text, encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

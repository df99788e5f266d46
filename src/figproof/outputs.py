"""Write the reports a check was asked for: files, images, and the CI job summary.

Reporters in :mod:`figproof.report` render text; this module puts it where
the user asked (and only there: never into the checked repo unless a path
given on the command line points into it).
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

from figproof.pipeline import Checked
from figproof.report import json as json_report
from figproof.report import markdown


def _write(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")


def step_summary_path() -> Path | None:
    """$GITHUB_STEP_SUMMARY, when running in GitHub Actions."""
    value = os.environ.get("GITHUB_STEP_SUMMARY")
    return Path(value) if value else None


def write_reports(checked: Checked, args: argparse.Namespace, *, shown_root: str | None = None) -> str:
    """Write every requested report; return the markdown summary for stdout."""
    from dataclasses import replace

    from figproof.rules import by_id

    result = checked.result if shown_root is None else replace(checked.result, root=shown_root)
    images: dict[str, str] = {}
    if args.images:
        images = write_images(checked, Path(args.images), Path(args.markdown).parent if args.markdown else None)
    summaries = {rid: r.summary for rid, r in by_id().items()}
    text = markdown.render(result, images=images, timings=args.timings, rule_summaries=summaries)
    if args.markdown:
        _write(Path(args.markdown), text)
    if args.json:
        _write(Path(args.json), json_report.render(result, timings=args.timings))
    summary = step_summary_path()
    if summary is not None:
        with open(summary, "a", encoding="utf-8") as fh:
            fh.write(markdown.fit(text) + "\n")
    return text


def _link(image: Path, relative_to: Path | None) -> str:
    base = relative_to if relative_to is not None else Path.cwd()
    return Path(os.path.relpath(image.resolve(), base.resolve())).as_posix()


def write_images(checked: Checked, folder: Path, relative_to: Path | None) -> dict[str, str]:
    """Images for findings; returns figure id / output path → link relative to the markdown file.

    Figures with colour findings get a panel of simulated views (protan, deutan, tritan, and
    grayscale for gray findings).
    """
    from figproof.execute import artifact_folder
    from figproof.report.images import panel_needed, write_cvd_panel

    folder.mkdir(parents=True, exist_ok=True)
    by_figure: dict[str, set[str]] = {}
    for f in checked.result.findings:
        if f.figure and f.accepted is None:
            by_figure.setdefault(f.figure, set()).add(f.rule)
    severity = checked.config.rules.get("colours-confusable-cvd")
    cvd = float(severity.knobs.get("cvd_severity", 100.0)) if severity is not None else 100.0
    links: dict[str, str] = {}
    for run in checked.result.runs:
        for fig in run.figures:
            needed, gray = panel_needed(by_figure.get(fig.id, ()))
            if not needed or fig.render is None:
                continue
            render = artifact_folder(checked.artifacts, run.path) / "renders" / fig.render
            out = folder / f"{fig.id.replace('/', '__').replace('#', '-figure-')}-colour-vision.png"
            try:
                write_cvd_panel(render, out, gray=gray, severity=cvd)
            except (OSError, ValueError):
                continue
            links[fig.id] = _link(out, relative_to)
    return links

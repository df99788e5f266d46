"""Write the reports a check was asked for: files, images, the CI job summary, terminal progress.

Reporters in :mod:`figproof.report` render text; this module puts it where
the user asked (and only there: never into the checked repo unless a path
given on the command line points into it).  It reads the environment
variables of the conventions it follows: GITHUB_ACTIONS,
GITHUB_STEP_SUMMARY, NO_COLOR and SOURCE_DATE_EPOCH.
"""

from __future__ import annotations

import json
import os
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC
from pathlib import Path
from typing import Any, TextIO

from figproof.model.findings import CheckResult, Finding, Summary, TreeChange
from figproof.model.records import ScriptRun
from figproof.pipeline import Checked
from figproof.report import github, gitlab, markdown, sarif
from figproof.report import json as json_report
from figproof.rules import knob_value


class OutputError(Exception):
    """A report path that cannot be written (a folder where a file is asked, no permission); one line."""


def check_outputs(request: ReportRequest) -> None:
    """Refuse, before anything runs, report paths of the wrong kind: a folder for a file, a file for a folder.

    Raises
    ------
    OutputError
        Naming the option and the path.
    """
    files = {"--markdown": request.markdown, "--json": request.json, "--sarif": request.sarif,
             "--gitlab": request.gitlab, "--provenance": request.provenance}
    for flag, path in files.items():
        if path is not None and path.is_dir():
            raise OutputError(f"{flag} {path}: is a folder; give the name of the file to write")
        if path is not None and _blocked_by_file(path):
            raise OutputError(f"{flag} {path}: a file stands where its folder should be")
    folders = {"--images": (request.images, "the images"), "--html": (request.html, "the visual report")}
    for flag, (folder, what) in folders.items():
        if folder is not None and folder.exists() and not folder.is_dir():
            raise OutputError(f"{flag} {folder}: is a file; give a folder for {what}")
        if folder is not None and _blocked_by_file(folder):
            raise OutputError(f"{flag} {folder}: a file stands where its folder should be")


def _blocked_by_file(path: Path) -> bool:
    return any(parent.exists() and not parent.is_dir() for parent in path.parents)


def _why(exc: OSError) -> str:
    return exc.strerror or type(exc).__name__


def _write(path: Path, text: str) -> None:
    """Write a report whole or not at all: a temporary file in the same folder, then renamed over ``path``.

    An interrupted or failed write leaves the previous report (or none), never half of one.
    """
    from figproof.run.resources import EnvironmentProblem, free_space, human_size, is_space_error

    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        try:
            tmp.write_text(text, encoding="utf-8")
            os.replace(tmp, path)
        finally:
            if tmp.exists():
                tmp.unlink()
    except OSError as exc:
        if is_space_error(exc):
            free = free_space(path.parent)
            room = f" ({human_size(free)} free, {human_size(len(text.encode()))} needed)" if free is not None else ""
            raise EnvironmentProblem(f"no space left in {path.parent} to write the report {path.name}{room}; "
                                     f"free some space or write the report elsewhere") from None
        raise OutputError(f"{path}: cannot write the report ({_why(exc)}); choose a writable path") from None


def write_text(path: Path, text: str) -> None:
    """Write a report file whole or not at all (for reports rendered outside this module)."""
    _write(path, text)


def step_summary_path() -> Path | None:
    """$GITHUB_STEP_SUMMARY, when running in GitHub Actions."""
    value = os.environ.get("GITHUB_STEP_SUMMARY")
    return Path(value) if value else None


@dataclass(frozen=True, slots=True, kw_only=True)
class ReportRequest:
    """Which reports to write and where (None: not written); built by the command line."""

    markdown: Path | None = None
    json: Path | None = None
    sarif: Path | None = None
    gitlab: Path | None = None
    provenance: Path | None = None
    images: Path | None = None  # folder for figure images; asking for it makes the children keep renders
    html: Path | None = None  # folder for the visual report (index.html and img/); also needs renders
    timings: bool = False  # run times in the reports (they then vary from run to run)
    annotations: bool = True  # GitHub workflow annotations on stdout, when running in GitHub Actions


def write_reports(checked: Checked, request: ReportRequest, *, shown_root: str | None = None) -> str:
    """Write every requested report; return the markdown summary for stdout."""
    from dataclasses import replace

    from figproof.rules import by_id

    result = checked.result if shown_root is None else replace(checked.result, root=shown_root)
    images: dict[str, str] = {}
    captions: dict[str, str] = {}
    if request.images is not None:
        images, captions = write_images(checked, request.images,
                                        request.markdown.parent if request.markdown else None)
    summaries = {rid: r.summary for rid, r in by_id().items()}
    manifest = provenance_manifest(checked)
    visual = None
    if request.html is not None:
        from figproof.report.visual import write_html

        page = request.html / "index.html"
        _write(page, write_html(checked, request.html, manifest))
        visual = _link(page, request.markdown.parent if request.markdown else None)
    text = markdown.render(result, images=images, timings=request.timings, rule_summaries=summaries,
                           provenance=manifest, captions=captions, visual=visual)
    if request.provenance is not None:
        _write(request.provenance, json.dumps(manifest, sort_keys=True, allow_nan=False, indent=2) + "\n")
    if request.markdown is not None:
        _write(request.markdown, text)
    if request.json is not None:
        _write(request.json, json_report.render(result, timings=request.timings))
    if request.sarif is not None:
        _write(request.sarif, sarif.render(result, tuple(by_id().values())))
    if request.gitlab is not None:
        _write(request.gitlab, gitlab.render(result))
    if os.environ.get("GITHUB_ACTIONS") == "true" and request.annotations:
        for line in github.annotation_lines(result):
            print(line)
    summary = step_summary_path()
    if summary is not None:
        shown = text
        run_page = github_run_page()
        if visual and run_page:
            # the job summary cannot open a file of the run: it links the run's page, which lists the artifacts
            shown = markdown.render(result, images=images, timings=request.timings, rule_summaries=summaries,
                                    provenance=manifest, captions=captions, visual=run_page,
                                    visual_where=f"{visual} in this run's report artifact")
        with open(summary, "a", encoding="utf-8") as fh:
            fh.write(markdown.fit(shown) + "\n")
    return text


def github_run_page() -> str | None:
    """The page of this GitHub Actions run (it lists the run's artifacts), from the variables Actions sets."""
    server, repo, run = (os.environ.get(k) for k in ("GITHUB_SERVER_URL", "GITHUB_REPOSITORY", "GITHUB_RUN_ID"))
    return f"{server}/{repo}/actions/runs/{run}#artifacts" if server and repo and run else None


def _link(image: Path, relative_to: Path | None) -> str:
    base = relative_to if relative_to is not None else Path.cwd()
    return Path(os.path.relpath(image.resolve(), base.resolve())).as_posix()


def check_date(root: Path) -> str | None:
    """The date a check reports: SOURCE_DATE_EPOCH when set, else the date of the checked commit."""
    from datetime import datetime

    from figproof.discover.gitrepo import head_date

    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch and epoch.strip().isdigit():
        return datetime.fromtimestamp(int(epoch), tz=UTC).isoformat()
    return head_date(root)


def provenance_manifest(checked: Checked) -> dict[str, Any]:
    """Which script drew each figure file from which inputs, the commit and the environment."""
    from figproof.discover.gitrepo import head_commit
    from figproof.report.provenance import build_manifest, environment_fingerprint

    root = checked.config.root
    freetype = next((r.freetype for r in checked.result.runs if r.freetype), None)
    return build_manifest(checked.result.runs, checked.context, git_commit=head_commit(root),
                          environment=environment_fingerprint(freetype), date=check_date(root))


def write_images(checked: Checked, folder: Path, relative_to: Path | None) -> tuple[dict[str, str], dict[str, str]]:
    """Images for findings; returns figure id / output path → link relative to the markdown file, and
    output path → the caption of its change view.

    Figures with colour findings get a panel of simulated views (protan, deutan, tritan, and
    grayscale for gray findings); committed raster figures that drifted get a change view.
    """
    from figproof.report.images import panel_needed, write_cvd_panel
    from figproof.run.execute import artifact_folder

    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"{folder}: cannot write the images ({_why(exc)}); choose a writable folder") from None
    by_figure: dict[str, set[str]] = {}
    for f in checked.result.findings:
        if f.figure and f.accepted is None:
            by_figure.setdefault(f.figure, set()).add(f.rule)
    cvd = knob_value(checked.config.rules, "colours-confusable-cvd", "cvd_severity")
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
    from figproof.report.visual import change_views

    captions: dict[str, str] = {}
    for path, (out, change) in change_views(checked, folder).items():
        links[path] = _link(out, relative_to)
        captions[path] = change.caption()
    return links, captions


def use_colour(stream: TextIO) -> bool:
    """Colour only on a terminal, and never when NO_COLOR is set (https://no-color.org)."""
    return stream.isatty() and not os.environ.get("NO_COLOR")


def final_line(result: CheckResult, cached: int = 0) -> str:
    """The one-line verdict printed to stderr after the summary."""
    s = result.summary
    counts = ", ".join(f"{n} {word}{'s' * (n != 1)}" for n, word in
                       ((s.errors, "error"), (s.warnings, "warning"), (s.notes, "note")))
    text = f"figproof: {'passed' if s.passed else 'FAILED'} ({counts}, {s.accepted} accepted)"
    if cached:
        text += f"; {cached} of {s.scripts} script results from the cache"
    if use_colour(sys.stderr):
        text = f"\033[{32 if s.passed else 31}m{text}\033[0m"
    return text


def progress_printer(*, quiet: bool, verbose: bool,
                     stream: TextIO | None = None) -> Callable[[ScriptRun, int, int], None] | None:
    """A progress callback: an updating line on a terminal, a line per script with --verbose, else nothing."""
    out = stream or sys.stderr
    if quiet or not (verbose or out.isatty()):
        return None
    started = time.monotonic()
    live = out.isatty() and not verbose

    def report(run: ScriptRun, done: int, total: int) -> None:
        elapsed = time.monotonic() - started
        line = f"[{done}/{total}] {run.path}: {run.status} ({elapsed:.0f} s elapsed)"
        if live:
            out.write("\r\033[K" + line + ("\n" if done == total else ""))
        else:
            out.write(line + "\n")
        out.flush()

    return report


def write_merged(texts: list[str], request: ReportRequest, names: list[str] | None = None) -> tuple[str, bool]:
    """Merge shard reports and write the requested outputs; return the markdown and the verdict."""
    from figproof.report.merge import merge_reports
    from figproof.rules import by_id

    merged = merge_reports(texts, names)
    result = result_from_json(merged)
    text = markdown.render(result, rule_summaries={rid: r.summary for rid, r in by_id().items()})
    text += f"\nMerged from {len(texts)} reports; per-script details are in the shards' JSON reports.\n"
    if request.json is not None:
        _write(request.json, json.dumps(merged, sort_keys=True, allow_nan=False, indent=2) + "\n")
    if request.markdown is not None:
        _write(request.markdown, text)
    if request.sarif is not None:
        _write(request.sarif, sarif.render(result, tuple(by_id().values())))
    if request.gitlab is not None:
        _write(request.gitlab, gitlab.render(result))
    return text, result.summary.passed


def result_from_json(data: dict[str, Any]) -> CheckResult:
    """A CheckResult without run details, rebuilt from a (merged) JSON report."""
    keys = set(Finding.__dataclass_fields__)
    findings = tuple(Finding.from_json({k: v for k, v in f.items() if k in keys}) for f in data["findings"])
    s = data["summary"]
    summary = Summary(scripts=s["scripts"], figures=s["figures"], errors=s["errors"], warnings=s["warnings"],
                      notes=s["notes"], accepted=s.get("accepted", 0), passed=s["passed"])
    pending = tuple(Finding.from_json({k: v for k, v in f.items() if k in keys}) for f in data.get("pending", ()))
    return CheckResult(root=data.get("root", "."), version=data["tool"]["version"], runs=(), findings=findings,
                       summary=summary, fail_on=data.get("fail_on", "error"), notes=tuple(data.get("notes", [])),
                       not_run=tuple(data.get("not_run", ())), pending=pending,
                       helpers=tuple((str(h["path"]), tuple(h["used_by"])) for h in data.get("helpers", ())),
                       tree_changes=tuple(TreeChange(path=c["path"], change=c["change"])
                                          for c in data.get("working_tree_changes", [])))


"""Command line: ``figproof check | demo | rules | explain``.

``main(argv) -> int`` is testable in process; nothing below this module calls
``sys.exit``.
"""

from __future__ import annotations

import argparse
import enum
import shutil
import sys
import tempfile
import textwrap
import traceback
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

from figproof import __version__

if TYPE_CHECKING:
    from figproof.model.records import ScriptRun
    from figproof.pipeline import Checked
    from figproof.report.write import ReportRequest
    from figproof.rules.base import Rule


class ExitCode(enum.IntEnum):
    """figproof's documented exit codes."""

    PASSED = 0
    FAILED = 1  # a finding crossed the fail-on threshold
    USAGE = 2  # bad command line, config or path
    INTERNAL = 3  # a bug in figproof: please report it with the traceback
    ENVIRONMENT = 4  # the machine lacks room, a writable temp folder, open files or processes
    DEPOSIT_REFUSED = 5  # a deposit could not be unpacked: a refused member, a bomb, an unreadable archive
    INTERRUPTED = 130  # stopped by SIGINT (Ctrl-C): 128 + 2, as shells report it
    TERMINATED = 143  # stopped by SIGTERM (a cancelled CI job, `timeout`): 128 + 15


class UsageError(Exception):
    """A mistake in how figproof was called; the message is one line."""


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (also read by tests that check the CI examples use real flags)."""
    parser = argparse.ArgumentParser(
        prog="figproof",
        description="Re-run a repo's figure scripts headlessly and check what they drew.",
    )
    parser.add_argument("--version", action="version", version=f"figproof {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    check = sub.add_parser("check", help="check a repo (default: the current folder)")
    check.add_argument("paths", nargs="*", metavar="PATH",
                       help="repo folder to check (default: .); a deposit: an archive (.zip, .tar.gz, .tgz, ...) "
                            "or a folder; with --changed-files, the changed files")
    check.add_argument("--deposit", action="store_true",
                       help="check PATH as a deposit (every file counts as committed, git is not asked) and write "
                            "a replication report; implied for archives, --reference, --report-dir and several PATHs")
    check.add_argument("--reference", metavar="DIR",
                       help="deposits: the manuscript's figures as submitted (PNG, TIFF, JPEG, PDF pages), matched "
                            "to the regenerated figures")
    check.add_argument("--report-dir", metavar="DIR",
                       help="deposits: write one replication report folder per deposit and an index into DIR")
    _report_flags(check)
    _run_flags(check)

    demo = sub.add_parser("demo", help="copy the bundled demo lab repo to a temporary folder and check it")
    demo.add_argument("--keep", metavar="DIR", help="copy the demo repo to DIR instead of a temporary folder")

    sub.add_parser("rules", help="list the rules")
    explain = sub.add_parser("explain", help="why a rule matters, how to fix it, its sources")
    explain.add_argument("rule", help="rule id, e.g. bars-for-continuous")

    accept = sub.add_parser("accept", help="check the repo and accept every finding it has today "
                                           "(writes the accepted-findings file)")
    accept.add_argument("path", nargs="?", default=".", help="repo folder (default: .)")
    accept.add_argument("--jobs", type=int, metavar="N", help="scripts run at once")

    merge = sub.add_parser("merge", help="combine JSON reports of shards into one report with one verdict")
    merge.add_argument("reports", nargs="+", metavar="REPORT.json", help="JSON reports written by --json")
    merge.add_argument("--json", metavar="FILE", help="write the merged JSON report")
    merge.add_argument("--markdown", metavar="FILE", help="write the merged markdown summary")
    merge.add_argument("--sarif", metavar="FILE", help="write the merged SARIF 2.1.0 log")
    merge.add_argument("--gitlab", metavar="FILE", help="write a merged GitLab code-quality report")
    merge.add_argument("--quiet", action="store_true", help="print nothing but errors")
    return parser


def _report_flags(p: argparse.ArgumentParser) -> None:
    p.add_argument("--json", metavar="FILE", help="write the JSON report (schema 2)")
    p.add_argument("--markdown", metavar="FILE", help="write the markdown summary")
    p.add_argument("--sarif", metavar="FILE", help="write a SARIF 2.1.0 log (for code-scanning dashboards)")
    p.add_argument("--gitlab", metavar="FILE", help="write a GitLab code-quality report")
    p.add_argument("--images", metavar="DIR",
                   help="write figure images for findings (simulated colour-vision views, change views of drifted "
                        "figures)")
    p.add_argument("--html", metavar="DIR",
                   help="write the visual report to DIR/index.html: the figures with their findings marked, "
                        "change views of drifted figures, honest redraws of summaries (opens offline)")
    p.add_argument("--provenance", metavar="FILE",
                   help="write a JSON manifest: each figure file, the script that drew it, its inputs' SHA-256, "
                        "the commit and the environment")
    p.add_argument("--timings", action="store_true", help="add run times to the reports (they then vary)")
    noise = p.add_mutually_exclusive_group()
    noise.add_argument("--quiet", action="store_true", help="print nothing but errors")
    noise.add_argument("--verbose", action="store_true", help="print a line per script as it finishes")


def _run_flags(p: argparse.ArgumentParser) -> None:
    p.add_argument("--jobs", type=int, metavar="N", help="scripts run at once (default: config, else CPUs)")
    p.add_argument("--no-cache", action="store_true",
                   help="re-run every script even when nothing it depends on changed")
    p.add_argument("--twice", action="store_true",
                   help="run every script twice and report output that differs between the runs")
    p.add_argument("--shard", metavar="K/N", help="check only the K-th of N stable shares of the scripts")
    p.add_argument("--changed-files", action="store_true",
                   help="the PATHs are changed files (as pre-commit passes them): check the figure scripts "
                        "among them and the scripts that read them")
    p.add_argument("--changed-since", metavar="REF",
                   help="check only scripts changed since the git REF, or that read a file changed since it")


def main(argv: Sequence[str] | None = None) -> int:
    """Run figproof; return the exit code."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse exits on --help and on errors
        return ExitCode.PASSED if exc.code == 0 else ExitCode.USAGE
    if args.command is None:
        parser.print_help()
        return ExitCode.USAGE
    jobs = getattr(args, "jobs", None)
    if jobs is not None and jobs < 1:  # as `jobs` in the config: a whole number of scripts at once
        print(f"figproof: --jobs must be a positive whole number (got {jobs})", file=sys.stderr)
        return ExitCode.USAGE
    from figproof.deposit.unpack import DepositError
    from figproof.interrupt import Interrupted, stop_on_signals
    from figproof.report.write import OutputError
    from figproof.run.resources import EnvironmentProblem

    try:
        commands = {"check": cmd_check, "demo": cmd_demo, "rules": cmd_rules, "explain": cmd_explain,
                    "accept": cmd_accept, "merge": cmd_merge}
        with stop_on_signals():
            try:
                return commands[args.command](args)
            except (Interrupted, KeyboardInterrupt) as exc:
                return _stopped(exc)
    except (UsageError, OutputError) as exc:
        print(f"figproof: {exc}", file=sys.stderr)
        return ExitCode.USAGE
    except EnvironmentProblem as exc:
        print(f"figproof: {exc}", file=sys.stderr)
        return ExitCode.ENVIRONMENT
    except DepositError as exc:
        print(f"figproof: {exc}", file=sys.stderr)
        return ExitCode.DEPOSIT_REFUSED
    except Exception:  # noqa: BLE001 - the one place that turns a figproof bug into exit code 3
        traceback.print_exc()
        print("figproof: internal error (a bug in figproof); please report it with the traceback above",
              file=sys.stderr)
        return ExitCode.INTERNAL


def _stopped(exc: BaseException) -> int:
    """After a signal: remove what this process still owns in the temp folder and say so in one line."""
    from figproof.interrupt import Interrupted
    from figproof.run.scratch import sweep_stale

    sweep_stale(also_mine=True)  # anything a clean-up step missed (interrupted between making and recording)
    name = exc.name if isinstance(exc, Interrupted) else "SIGINT"
    print(f"\nfigproof: stopped by {name}; its child processes were ended and its temporary folders removed; "
          f"no report was left half-written", file=sys.stderr)
    return exc.exit_code if isinstance(exc, Interrupted) else ExitCode.INTERRUPTED


def cmd_rules(args: argparse.Namespace) -> int:
    from figproof.rules import RULES

    width = max(len(r.id) for r in RULES)
    for r in RULES:
        print(f"{r.id:<{width}}  {'opt-in' if r.opt_in else r.severity:<7}  {r.summary}")
    if any(r.opt_in for r in RULES):
        print(f"\nopt-in: runs only when figproof.toml gives the rule a severity, for example "
              f"[rules.{next(r.id for r in RULES if r.opt_in)}] severity = \"note\"")
    return ExitCode.PASSED


def _opt_in_words(r: Rule) -> str:
    if not r.opt_in:
        return ""
    return (f" Opt-in: it runs only when figproof.toml gives it a severity ([rules.{r.id}] "
            f"severity = \"{r.severity}\").")


def explain_text(rule_id: str) -> str:
    """The text ``figproof explain RULE`` prints."""
    from figproof.model.findings import renamed_note
    from figproof.rules import by_id
    from figproof.rules.base import renamed_ids

    catalogue = by_id()
    renamed = renamed_ids(catalogue)
    note = []
    if rule_id in renamed:
        note = [f"Note: {renamed_note(rule_id, renamed[rule_id])}.", ""]
        rule_id = renamed[rule_id]
    if rule_id not in catalogue:
        raise UsageError(f"unknown rule {rule_id!r}; `figproof rules` lists them")
    r = catalogue[rule_id]
    head = f"Default severity: {r.severity}. Scope: {r.scope}." + _opt_in_words(r)
    out = [*note, f"{r.id}: {r.summary}", "", head, "",
           "Why it matters", textwrap.fill(r.why, 88), "", "How to fix it", textwrap.fill(r.fix, 88), ""]
    if r.knobs:
        out.append(f"Settings ([tool.figproof.rules.{r.id}])")
        out += [f"  {k.name.replace('_', '-')} = {k.default:g}   {k.help}" for k in r.knobs]
        out.append("")
    out.append("Sources")
    out += [textwrap.fill(s, 88, initial_indent="  - ", subsequent_indent="    ") for s in r.sources]
    return "\n".join(out) + "\n"


def cmd_explain(args: argparse.Namespace) -> int:
    print(explain_text(args.rule), end="")
    return ExitCode.PASSED


def _one_line_errors() -> tuple[type[Exception], ...]:
    from figproof.config import ConfigError
    from figproof.discover.gitrepo import GitError
    from figproof.discover.inventory import DiscoveryError
    from figproof.discover.shard import ShardError
    from figproof.policy.accept import AcceptedFileError
    from figproof.report.merge import MergeError

    return (ConfigError, DiscoveryError, AcceptedFileError, GitError, ShardError, MergeError)


def _progress(args: argparse.Namespace) -> Callable[[ScriptRun, int, int], None] | None:
    from figproof.report.write import progress_printer

    return progress_printer(quiet=getattr(args, "quiet", False), verbose=getattr(args, "verbose", False))


def report_request(args: argparse.Namespace) -> ReportRequest:
    """The reports the command line asks for."""
    from figproof.report.write import ReportRequest

    def path(name: str) -> Path | None:
        value = getattr(args, name, None)
        return Path(value) if value else None

    return ReportRequest(markdown=path("markdown"), json=path("json"), sarif=path("sarif"), gitlab=path("gitlab"),
                         provenance=path("provenance"), images=path("images"), html=path("html"),
                         timings=getattr(args, "timings", False), annotations=not getattr(args, "quiet", False))


def do_check(path: Path, args: argparse.Namespace, request: ReportRequest, **option_overrides: object) -> Checked:
    """Run the pipeline for ``path`` with the command line's options; returns a Checked."""
    from figproof.pipeline import CheckOptions, check

    if not path.exists():
        raise UsageError(f"{path}: no such file or folder")
    skip = tuple(_inside(path, p) for p in (request.images, request.json, request.markdown, request.html)
                 if p is not None)
    options = CheckOptions(jobs=getattr(args, "jobs", None), skip_copy=tuple(s for s in skip if s),
                           shard=getattr(args, "shard", None), changed_since=getattr(args, "changed_since", None),
                           twice=getattr(args, "twice", False), cache=not getattr(args, "no_cache", False),
                           renders=request.images is not None or request.html is not None
                           or getattr(args, "twice", False),
                           **option_overrides)  # type: ignore[arg-type]
    try:
        return check(path, options, progress=_progress(args))
    except _one_line_errors() as exc:
        raise UsageError(str(exc)) from None


def run_check(path: Path, args: argparse.Namespace, request: ReportRequest, *, shown_root: str | None = None,
              changed: tuple[str, ...] | None = None) -> int:
    """Check ``path`` and write the reports of ``request``."""
    from figproof.report.write import check_outputs, final_line, write_reports

    check_outputs(request)
    checked = do_check(path, args, request, changed=changed)
    if changed is not None and not checked.result.runs and path.is_file():
        shutil.rmtree(checked.artifacts, ignore_errors=True)
        raise UsageError(f"{path}: not a figure script, and no figure script reads or imports it")
    try:
        text = write_reports(checked, request, shown_root=shown_root)
    finally:
        shutil.rmtree(checked.artifacts, ignore_errors=True)
    if not getattr(args, "quiet", False):
        print(text)
        print(final_line(checked.result, checked.cached), file=sys.stderr)
    return ExitCode.PASSED if checked.result.summary.passed else ExitCode.FAILED


def _inside(root: Path, p: Path) -> str | None:
    try:
        return p.resolve().relative_to(root.resolve()).parts[0]
    except (ValueError, IndexError):
        return None


def cmd_check(args: argparse.Namespace) -> int:
    from figproof.deposit import command as deposit

    paths = tuple(Path(p) for p in args.paths)
    if not args.changed_files and deposit.wanted(paths, args.deposit, args.reference, args.report_dir):
        request = deposit.DepositRun(paths=paths, reports=report_request(args), jobs=args.jobs, twice=args.twice,
                                     quiet=args.quiet, reference=Path(args.reference) if args.reference else None,
                                     report_dir=Path(args.report_dir) if args.report_dir else None)
        problem = deposit.usage_problem(request)
        if problem is not None:
            raise UsageError(problem)
        try:
            return deposit.run(request, _progress(args))
        except _one_line_errors() as exc:
            raise UsageError(str(exc)) from None
    if args.changed_files:
        from figproof.config import ConfigError, load_config
        from figproof.rules import by_id

        try:
            root = load_config(Path("."), rules=by_id()).root
        except ConfigError as exc:
            raise UsageError(str(exc)) from None
        changed = tuple(_repo_relative(root, Path(p)) for p in args.paths)
        return run_check(Path("."), args, report_request(args), changed=tuple(c for c in changed if c))
    if len(args.paths) > 1:
        raise UsageError("check takes one repo folder or file (use --changed-files to pass changed files)")
    path = Path(args.paths[0] if args.paths else ".")
    if path.is_file():
        # a script: check it (with the scripts that read what it writes); a data file or helper module:
        # the scripts that read or import it
        from figproof.config import ConfigError, load_config
        from figproof.rules import by_id

        try:
            root = load_config(path, rules=by_id()).root
        except ConfigError as exc:
            raise UsageError(str(exc)) from None
        rel = _repo_relative(root, path)
        if rel is None:
            raise UsageError(f"{path}: not inside the repo at {root}")
        return run_check(path, args, report_request(args), changed=(rel,))
    return run_check(path, args, report_request(args))


def _repo_relative(root: Path, p: Path) -> str | None:
    try:
        return p.resolve().relative_to(root.resolve()).as_posix()
    except ValueError:
        return None


def cmd_demo(args: argparse.Namespace) -> int:
    from figproof.demo import copy_demo
    from figproof.report.write import ReportRequest

    base = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="figproof-demo-"))
    try:
        repo = copy_demo(base)
    except OSError as exc:
        raise UsageError(f"--keep {base}: cannot copy the demo repo there "
                         f"({exc.strerror or type(exc).__name__}); choose a writable folder") from None
    reports = base / "figproof-report"
    request = ReportRequest(json=reports / "figproof.json", markdown=reports / "summary.md",
                            images=reports / "images", sarif=reports / "figproof.sarif",
                            provenance=reports / "provenance.json", html=reports / "html")
    code = run_check(repo, args, request, shown_root="demo-lab")
    verdict = "failed, as it is meant to" if code == ExitCode.FAILED else f"ended with exit code {int(code)}"
    print(f"The demo lab repo is in {repo}; its check {verdict} (a check of your repo would exit {int(code)}; "
          f"the demo itself exits 0).")
    print(f"Reports: {reports}/summary.md, {reports}/figproof.json, {reports}/figproof.sarif, "
          f"images in {reports}/images")
    print(f"Visual report (open it in a browser): {reports}/html/index.html")
    return ExitCode.PASSED


def cmd_accept(args: argparse.Namespace) -> int:
    from figproof.policy.accept import write_accepted
    from figproof.report.write import ReportRequest
    from figproof.rules import by_id
    from figproof.rules.base import renamed_ids

    checked = do_check(Path(args.path), args, ReportRequest())
    shutil.rmtree(checked.artifacts, ignore_errors=True)
    target = checked.config.accepted_path()
    try:
        entries = write_accepted(checked.result.findings, target, renamed=renamed_ids(by_id()))
    except OSError as exc:
        raise UsageError(f"{target}: cannot write the accepted-findings file "
                         f"({exc.strerror or type(exc).__name__}); make the repo writable") from None
    n = len(entries)
    print(f"figproof: {target.name} now accepts {n} finding{'s' * (n != 1)}; commit it, and only new problems "
          f"will fail the build")
    return ExitCode.PASSED


def cmd_merge(args: argparse.Namespace) -> int:
    from figproof.report.merge import MergeError
    from figproof.report.write import write_merged

    texts = []
    for name in args.reports:
        try:
            texts.append(Path(name).read_text(encoding="utf-8"))
        except OSError as exc:
            raise UsageError(f"{name}: cannot read the report ({exc.strerror})") from None
    try:
        text, passed = write_merged(texts, report_request(args), list(args.reports))
    except MergeError as exc:
        raise UsageError(str(exc)) from None
    if not args.quiet:
        print(text)
    return ExitCode.PASSED if passed else ExitCode.FAILED


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

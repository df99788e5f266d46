"""One check, end to end: config → discover → execute → rules → policy → result.

The reporters in :mod:`figproof.report` render the :class:`CheckResult`;
:mod:`figproof.cli` decides where the output goes.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, replace
from pathlib import Path, PurePosixPath

from figproof import __version__, rules
from figproof.compare.runs import committed_vs_regenerated, first_vs_second, notebook_outputs, other_writers
from figproof.config import Config, load_config
from figproof.discover.gitrepo import changed_since
from figproof.discover.imports import import_edges
from figproof.discover.inventory import choose_working_dir, discover
from figproof.discover.outputs import saved_names
from figproof.discover.shard import select_shard
from figproof.model.context import Inventory, RunContext
from figproof.model.findings import CheckResult, Finding, renamed_note
from figproof.model.records import ScriptRun
from figproof.policy.accept import (
    Allow,
    allow_key,
    apply_acceptance,
    load_accepted,
    notebook_allow_comments,
    parse_allow_comments,
    unused_allows,
)
from figproof.policy.verdict import summarise
from figproof.rules.base import renamed_ids
from figproof.run import treeguard
from figproof.run.cache import CachingRunner, prune, recorded_dependencies, recorded_uses
from figproof.run.execute import Options, Runner, Task, execute_all
from figproof.run.pool import default_runner
from figproof.run.scratch import make_scratch, remove_tree, sweep_stale


@dataclass(frozen=True, slots=True, kw_only=True)
class CheckOptions:
    """Per-invocation choices that are not repo config."""

    artifacts: Path | None = None  # where run records go (a temporary folder when None)
    jobs: int | None = None
    scripts: tuple[str, ...] | None = None  # restrict to these repo-relative scripts
    changed: tuple[str, ...] | None = None  # check only scripts among / reading these repo-relative files
    changed_since: str | None = None  # a git ref: check only what changed since it
    shard: str | None = None  # "K/N"
    twice: bool = False  # run every script a second time to find nondeterministic output
    cache: bool = False  # reuse results of scripts whose script, inputs and environment did not change
    skip_copy: tuple[str, ...] = ()
    renders: bool = True  # keep each figure's pixels: needed for image panels and --twice, costs a full draw
    deposit: bool = False  # a deposit, not a repo: the config must lie inside it, and every file counts as committed


@dataclass(frozen=True, slots=True, kw_only=True)
class Checked:
    """A finished check: the result, the config and inventory it used, and where its artifacts are."""

    result: CheckResult
    config: Config
    inventory: Inventory
    context: RunContext
    artifacts: Path
    cached: int = 0  # scripts whose result came from the cache


def plan(config: Config, inventory: Inventory, only: tuple[str, ...] | None = None) -> list[Task]:
    """Tasks in execution order, each with its working-directory mode resolved."""
    scripts = [s for s in inventory.scripts if only is None or s in only]
    return [Task(script=s, working_dir=choose_working_dir(config.root, s, config.working_dir)) for s in scripts]


def select_scripts(config: Config, inventory: Inventory, options: CheckOptions) -> tuple[str, ...] | None:
    """The scripts this check runs (None: all), after --changed-files / --changed-since and --shard."""
    chosen: list[str] | None = list(options.scripts) if options.scripts is not None else None
    changed = options.changed
    if options.changed_since is not None:
        changed = tuple(changed_since(config.root, options.changed_since)) + tuple(changed or ())
    if changed is not None:
        recorded = recorded_dependencies(config.cache_path())
        picked = scripts_touched_by(config.root, inventory.scripts, changed, recorded)
        chosen = [s for s in picked if chosen is None or s in chosen]
    if options.shard is not None:
        chosen = select_shard(chosen if chosen is not None else list(inventory.scripts), options.shard)
    return None if chosen is None else tuple(chosen)


def scripts_touched_by(root: Path, scripts: tuple[str, ...], changed: tuple[str, ...],
                       recorded: dict[str, set[str]] | None = None) -> list[str]:
    """Scripts that changed, or that depend on a changed file.

    A script's dependencies are what it read and imported when it last ran (from the result cache,
    ``recorded``); a script never run before is picked when it imports a changed repo module (directly or
    through other repo modules), or when its code names a changed file by path or file name, a selection
    heuristic until its first run records what it really reads.
    """
    changed_set = set(changed)
    data = [c for c in changed_set if c not in scripts]
    recorded = recorded or {}
    modules = [c for c in data if c.endswith(".py")]
    importing = _importing(root, scripts, modules) if modules else set()
    picked = []
    for script in scripts:
        if script in changed_set:
            picked.append(script)
        elif script in recorded:
            if recorded[script] & changed_set:
                picked.append(script)
        elif script in importing or (data and _names_any(root / script, data)):
            picked.append(script)
    return picked


def _importing(root: Path, scripts: tuple[str, ...], modules: list[str]) -> set[str]:
    """The scripts that import one of ``modules``, directly or through other repo modules."""
    importers: dict[str, list[str]] = {}
    for f, deps in import_edges(root, scripts).items():
        for dep in deps:
            importers.setdefault(dep, []).append(f)
    reached: set[str] = set()
    queue = list(modules)
    while queue:
        for user in importers.get(queue.pop(), ()):
            if user not in reached:
                reached.add(user)
                queue.append(user)
    return reached & set(scripts)


def _names_any(path: Path, files: list[str]) -> bool:
    try:
        text = path.read_text(encoding="utf-8", errors="replace")
    except OSError:
        return False
    return any(f in text or PurePosixPath(f).name in text for f in files)


def check(path: Path, options: CheckOptions | None = None, *, runner: Runner | None = None,
          progress: Callable[[ScriptRun, int, int], None] | None = None) -> Checked:
    """Check the repo at ``path``.

    Raises
    ------
    figproof.config.ConfigError, figproof.discover.inventory.DiscoveryError, figproof.policy.accept.AcceptedFileError
        For configuration, discovery and accepted-file problems (the CLI turns them into exit code 2).
    figproof.run.resources.EnvironmentProblem
        When the machine lacks room, permissions, open files or processes (exit code 4).
    """
    options = options or CheckOptions()
    config = load_config(path, rules=rules.by_id())
    if options.deposit and config.root != path.resolve():
        config = Config(root=path.resolve())  # a config above an unpacked deposit is not the deposit's
    inventory = discover(config, use_git=not options.deposit)
    sweep_stale()  # what killed checks left in the temp folder (only folders whose owner is gone)
    artifacts = options.artifacts or make_scratch("figproof-run-")
    try:
        return _check(path, config, inventory, options, artifacts, runner, progress)
    except BaseException:
        if options.artifacts is None:  # a check that does not finish leaves no run records behind
            remove_tree(artifacts)
        raise


def _check(path: Path, config: Config, inventory: Inventory, options: CheckOptions, artifacts: Path,
           runner: Runner | None, progress: Callable[[ScriptRun, int, int], None] | None) -> Checked:
    tasks = plan(config, inventory, select_scripts(config, inventory, options))
    exec_options = Options(root=config.root, artifacts=artifacts, timeout=config.timeout,
                           memory_limit=config.memory_limit, network=config.network,
                           jobs=options.jobs or config.jobs, skip_copy=(*options.skip_copy, config.cache_dir),
                           renders=options.renders or options.twice)
    selected = options.scripts is not None or options.changed is not None or options.changed_since is not None \
        or options.shard is not None
    guarded = treeguard.snapshot(config.root, skip=(config.cache_dir,))
    with _runners(config, options, runner) as (active, bare):
        runs = tuple(execute_all(tasks, exec_options, runner=active, progress=progress))
        second = None
        if options.twice:
            # the second run must really run: never from the cache
            again = replace(exec_options, artifacts=artifacts / "second-run")
            second = (again.artifacts, execute_all([Task(script=r.path, working_dir=r.working_dir) for r in runs],
                                                   again, runner=bare))
    tree_changes = treeguard.compare(guarded, treeguard.snapshot(config.root, skip=(config.cache_dir,)))
    # whether a result came from the cache is told on the terminal, not in reports (they stay byte-identical)
    cached = len(active.answered) if isinstance(active, CachingRunner) else 0
    if options.cache and not selected:
        prune(config.cache_path(), inventory.scripts)
    runs, shared_notes = lift_shared_notes(runs)
    not_run = tuple(t for t in (*inventory.scripts, *inventory.excluded) if t not in {task.script for task in tasks})
    context = build_context(config, inventory, runs, artifacts, second, unrun_uses(config, not_run))
    findings = rules.apply(runs, context, config.rules)
    pending = pending_findings(runs, context, config, findings)
    findings, notes = accept_findings([*findings, *pending], config, inventory, ran={t.script for t in tasks},
                                     finished={r.path for r in runs if r.status == "ok"})
    later = {f.fingerprint for f in pending}
    pending = [f for f in findings if f.fingerprint in later]
    findings = [f for f in findings if f.fingerprint not in later]
    notes = [*config.notes, *shared_notes, *notes]
    if not inventory.scripts and inventory.helpers:
        n = len(inventory.helpers)
        notes.append(f"no figure scripts found: the {n} module{'s' * (n != 1)} that draw{'s' * (n == 1)} "
                     f"{'are helpers' if n != 1 else 'is a helper'} that only tests or other helpers import")
    elif not inventory.scripts:
        notes.append("no figure scripts found (no .py or .ipynb file imports matplotlib, seaborn or pandas plotting)")
    summary = summarise(runs, findings, config.fail_on, tree_changed=bool(tree_changes))
    result = CheckResult(root=_shown_root(config.root, path), version=__version__, runs=runs,
                         findings=tuple(findings), summary=summary, fail_on=config.fail_on, notes=tuple(notes),
                         not_run=not_run, pending=tuple(pending), helpers=inventory.helpers,
                         tree_changes=tree_changes)
    return Checked(result=result, config=config, inventory=inventory, context=context, artifacts=artifacts,
                   cached=cached)


@contextmanager
def _runners(config: Config, options: CheckOptions, runner: Runner | None) -> Iterator[tuple[Runner, Runner]]:
    """(runner for the check, runner that never uses the cache); both shut down on exit."""
    if options.cache:
        cache = CachingRunner(runner or default_runner, config.cache_path())
        with cache:
            yield cache, _Lazy(cache.inner, cache.stop)
        return
    bare = runner or default_runner()
    try:
        yield bare, bare
    finally:
        close = getattr(bare, "close", None)
        if runner is None and callable(close):
            close()


class _Lazy:
    """A runner built on first use (so an all-cached check never starts the warm pool)."""

    def __init__(self, make: Callable[[], Runner], stop: Callable[[], None]) -> None:
        self._make = make
        self.stop = stop  # stops the runner if it was built

    def run(self, task: Task, options: Options) -> ScriptRun:
        return self._make().run(task, options)


def lift_shared_notes(runs: tuple[ScriptRun, ...]) -> tuple[tuple[ScriptRun, ...], list[str]]:
    """A note about the result cache's folder that several runs carry word for word (an unwritable cache),
    said once for the check; notes about a script's own run stay with it."""
    counts: dict[str, int] = {}
    for r in runs:
        for note in dict.fromkeys(r.notes):
            if note.startswith("result cache "):
                counts[note] = counts.get(note, 0) + 1
    shared = [n for n, c in counts.items() if c > 1]
    if not shared:
        return runs, []
    lifted = tuple(replace(r, notes=tuple(n for n in r.notes if n not in shared)) for r in runs)
    return lifted, [f"{n} ({counts[n]} scripts)" for n in shared]


def unrun_uses(config: Config, not_run: tuple[str, ...]) -> dict[str, tuple[str, ...] | None]:
    """What each script that did not run writes or reads: its last cached run, else the names its code saves to."""
    if not not_run:
        return {}
    recorded = recorded_uses(config.cache_path(), config.root)
    out: dict[str, tuple[str, ...] | None] = {}
    for script in not_run:
        known = recorded.get(script)
        out[script] = tuple(sorted(known)) if known is not None else saved_names(config.root, script)
    return out


def pending_findings(runs: tuple[ScriptRun, ...], context: RunContext, config: Config,
                     findings: list[Finding]) -> list[Finding]:
    """Orphans judged over the scripts that ran alone, which this partial check could not confirm.

    ``figproof merge`` confirms those that no other shard's scripts wrote or read.
    """
    if not any(known is None for known in context.unrun.values()):
        return []
    alone = replace(context, unrun={})
    seen = {f.fingerprint for f in findings}
    return [f for f in rules.apply(runs, alone, config.rules, only=("figure-orphan",)) if f.fingerprint not in seen]


def build_context(config: Config, inventory: Inventory, runs: tuple[ScriptRun, ...], artifacts: Path,
                  second: tuple[Path, list[ScriptRun]] | None,
                  unrun: dict[str, tuple[str, ...] | None] | None = None) -> RunContext:
    """Everything run-scope rules need: comparisons with committed files and, with --twice, the second run."""
    tolerance = rules.knob_value(config.rules, "figure-drift", "tolerance")
    second_runs: dict[str, ScriptRun] = {}
    reruns: dict = {}
    if second is not None:
        second_artifacts, again = second
        second_runs = {r.path: r for r in again}
        reruns = first_vs_second(runs, again, artifacts, second_artifacts)
    return RunContext(
        inventory=inventory, runs=runs,
        comparisons=committed_vs_regenerated(runs, config.root, artifacts, tolerance),
        notebook_comparisons=notebook_outputs(runs, config.root, artifacts, tolerance),
        second_runs=second_runs, rerun_comparisons=reruns, running_version=matplotlib_version(),
        unrun=unrun or {}, other_writers=other_writers(runs, config.root, artifacts, tolerance))


@functools.cache
def matplotlib_version() -> str:
    """The matplotlib version the children run with (same environment), without importing it (read once)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("matplotlib")
    except PackageNotFoundError:
        return ""


def accept_findings(findings: list[Finding], config: Config, inventory: Inventory,
                    ran: set[str] | None = None, finished: set[str] | None = None) -> tuple[list[Finding], list[str]]:
    """Apply inline allow comments and the accepted-findings file; return findings and notes about problems.

    ``ran``: the scripts a partial check ran (None: all of them); an accepted entry is called stale only
    when this check could have produced its finding.  ``finished``: the scripts that ran to the end (None:
    all); an allow comment is called stale only in one of them.
    """
    catalogue = rules.by_id()
    known = catalogue.keys()
    renamed = renamed_ids(catalogue)
    allows: dict[str, dict[int, list[Allow]]] = {}
    notes: list[str] = []
    for path in sorted(set(inventory.scripts) | {f.path for f in findings}):
        file = config.root / path
        try:
            text = file.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError):
            continue
        if path.endswith(".ipynb"):
            found, problems = notebook_allow_comments(path, text, known, renamed)
            allows.update(found)
        else:
            per_line, problems = parse_allow_comments(text, known, renamed)
            if per_line:
                allows[allow_key(path, None)] = per_line
        notes += [f"{path}, {p}" for p in problems]
    entries = load_accepted(config.accepted_path())  # AcceptedFileError: one line, the CLI exits 2
    former = sorted({e.rule for e in entries if e.rule in renamed})
    notes += [f"{config.accepted_file}: {renamed_note(old, renamed[old])} (`figproof accept` rewrites the file)"
              for old in former]
    entries = [replace(e, rule=renamed[e.rule]) if e.rule in renamed else e for e in entries]
    marked, stale = apply_acceptance(findings, allows, entries)
    ran_all = set(inventory.scripts) if ran is None else ran
    partial = bool(set(inventory.scripts) - ran_all)
    off = [rid for rid, settings in config.rules.items() if settings.severity == "off"]
    for key, allow in unused_allows(marked, allows, off):
        path, _, cell = key.partition("#cell=")
        if (partial and path not in ran_all) or (finished is not None and path not in finished):
            continue  # a script this check did not run, or that failed: its findings were not all looked for
        where = f"{path}, cell {cell}, line {allow.line}" if cell else f"{path}, line {allow.line}"
        notes.append(f"{where}: allow comment for {allow.rule} matches no finding (stale); remove it")
    if partial:
        stale = [e for e in stale if e.path in ran_all]
    notes += [f"{config.accepted_file}: entry for {e.rule} in {e.path} matches no finding any more (stale)"
              for e in stale]
    return sorted(marked, key=Finding.sort_key), notes


def _shown_root(root: Path, asked: Path) -> str:
    """The checked root as the user named it (never an absolute path of this machine in reports)."""
    try:
        rel = root.resolve().relative_to(Path.cwd().resolve())
        return rel.as_posix() or "."
    except ValueError:
        return root.name or "."

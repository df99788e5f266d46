"""Run figure scripts in contained child processes, in parallel, and collect their runs.

Containment (best effort, not a security boundary):

- each script runs on a temporary copy of the repo, so the user's working
  tree is never written; a copy serves the next script only after whatever
  the script changed in it has been put back (see :mod:`figproof.run.sandbox`);
- the child starts in a new session; on timeout the parent kills the whole
  process group (SIGTERM, a short grace, SIGKILL, reap), and after a normal
  exit it kills what the script left behind in that group;
- stdout/stderr go to files, never pipes, so a grandchild holding them open
  cannot hang figproof; the child caps what it writes;
- stdin is closed; the memory cap and the network block are set inside the
  child (see :mod:`figproof.child.main`).

A :class:`Runner` runs one task.  :class:`FreshInterpreter` starts a new
Python for every script; a warm pool of pre-imported workers can replace it
without changing callers of :func:`execute_all`.

Stopping: when the check is interrupted (a signal raises in the main thread
while :func:`execute_all` waits), the runner's ``stop()`` kills every child's
process group at once, no further task starts, and the sandboxes are deleted
before the interruption goes on up to the command line.  A runner that is
stopped refuses new tasks with :class:`Stopped`.

The machine's trouble is not the script's: a sandbox that cannot be made, a
child that cannot be started, or a run lost while the temp folder is full
raises :class:`figproof.run.resources.EnvironmentProblem`, which ends the check
with one line instead of a finding against the script.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
from collections.abc import Callable, Iterable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Protocol

from figproof.model.records import ErrorKind, FileEvent, ScriptError, ScriptRun, WorkingDir, load_run
from figproof.run.resources import EnvironmentProblem, describe_os_error, free_space, human_size, is_environment_error
from figproof.run.sandbox import SandboxPool

ENVIRONMENT_EXIT = 75  # the child's exit status when the machine, not the script, stopped it (EX_TEMPFAIL)
ENVIRONMENT_MARK = "figproof-environment: "  # the child's stderr line that says what was missing
FULL_BYTES = 1 << 20  # a lost run with less room than this left in the temp folder was lost to a full disk
_SPACE_MESSAGE = ("[Errno 28]", "[Errno 122]")  # ENOSPC, EDQUOT as a script's OSError reads


class Stopped(RuntimeError):
    """The runner was stopped (the check is being interrupted); no new child is started."""

GRACE_SECONDS = 1.0
TAIL_BYTES = 4000
_SIGNAL_NAMES = {getattr(signal, n): n for n in ("SIGSEGV", "SIGABRT", "SIGBUS", "SIGFPE", "SIGILL", "SIGKILL",
                                                  "SIGTERM") if hasattr(signal, n)}


@dataclass(frozen=True, slots=True, kw_only=True)
class Task:
    """One script to run: repo-relative path and the working directory mode chosen for it."""

    script: str
    working_dir: WorkingDir = "root"


@dataclass(frozen=True, slots=True, kw_only=True)
class Options:
    """How to run tasks; ``artifacts`` receives one folder per script (model, renders, regenerated files)."""

    root: Path
    artifacts: Path
    timeout: float = 120.0
    memory_limit: int = 4096
    network: bool = False
    jobs: int = 1
    skip_copy: tuple[str, ...] = ()  # extra repo-relative folders not to copy (e.g. the report folder)
    renders: bool = True  # keep each figure's pixels (image panels, --twice); without, no figure is painted twice
    sandboxes: SandboxPool | None = None  # repo copies shared by the tasks of one check (one copy per task if None)


class Runner(Protocol):
    """Runs one task in a contained child and returns what it learnt; must be safe to call from threads."""

    def run(self, task: Task, options: Options) -> ScriptRun: ...


def child_env(mplconfig: Path) -> dict[str, str]:
    """Environment of the child: headless, deterministic, single-threaded maths."""
    env = dict(os.environ)
    for key in ("PYTHONSTARTUP", "PYTHONINSPECT", "MPLBACKEND", "DISPLAY", "WAYLAND_DISPLAY"):
        env.pop(key, None)
    src = str(Path(__file__).resolve().parents[2])
    env["PYTHONPATH"] = src + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    env.update({
        "MPLBACKEND": "Agg",
        "MPLCONFIGDIR": str(mplconfig),
        "SOURCE_DATE_EPOCH": os.environ.get("SOURCE_DATE_EPOCH", "0"),
        "PYTHONHASHSEED": "0",
        "TZ": "UTC",
        "PYTHONUNBUFFERED": "1",
        "PYTHONDONTWRITEBYTECODE": "1",
        "OMP_NUM_THREADS": "1",
        "OPENBLAS_NUM_THREADS": "1",
        "MKL_NUM_THREADS": "1",
        "NUMEXPR_NUM_THREADS": "1",
        "VECLIB_MAXIMUM_THREADS": "1",
    })
    return env


def _tail(path: Path) -> str:
    try:
        size = path.stat().st_size
        with open(path, "rb") as fh:
            fh.seek(max(0, size - TAIL_BYTES))
            return fh.read().decode("utf-8", "replace")
    except OSError:
        return ""


def _events(path: Path) -> tuple[FileEvent, ...]:
    out = []
    try:
        for line in path.read_text(encoding="utf-8").splitlines():
            try:
                out.append(FileEvent.from_json(json.loads(line)))
            except (ValueError, TypeError, KeyError):
                continue
    except OSError:
        pass
    return tuple(out)


def kill_group(proc: subprocess.Popen[bytes], grace: float = GRACE_SECONDS) -> None:
    """Terminate the child's whole process group, then reap the child."""
    for sig, wait in ((signal.SIGTERM, grace), (signal.SIGKILL, None)):
        try:
            os.killpg(proc.pid, sig)
        except (ProcessLookupError, PermissionError):
            break
        if wait is None:
            break
        try:
            proc.wait(timeout=wait)
            # the child is gone; its group may still hold grandchildren
            try:
                os.killpg(proc.pid, signal.SIGKILL)
            except (ProcessLookupError, PermissionError):
                pass
            break
        except subprocess.TimeoutExpired:
            continue
    try:
        proc.wait(timeout=5)
    except subprocess.TimeoutExpired:
        pass


@dataclass(frozen=True, slots=True, kw_only=True)
class Launch:
    """What a runner needs to start one child: its spec file, working folder, environment and output files."""

    spec: Path
    cwd: Path
    env: dict[str, str]
    stdout: Path
    stderr: Path


LaunchFn = Callable[[Launch, float], tuple[int | None, bool]]


def run_contained(task: Task, options: Options, launch: LaunchFn, mode: str) -> ScriptRun:
    """Prepare the sandbox for ``task``, start the child with ``launch`` and collect its run.

    ``launch(job, timeout)`` starts the child, waits at most ``timeout`` seconds, kills the child's process
    group and returns ``(exit code or -signal, timed_out)``.  Both runners share everything else, so the
    containment is the same whichever starts the process.
    """
    out = options.artifacts / _slug(task.script)
    try:
        if out.exists():
            shutil.rmtree(out)
        out.mkdir(parents=True)
    except OSError as exc:
        if is_environment_error(exc):
            problem = describe_os_error(exc, options.artifacts, f"keep the run of {task.script}")
            raise EnvironmentProblem(problem) from exc
        raise
    pool = options.sandboxes or SandboxPool(options.root, options.skip_copy, reuse=False)
    box = pool.acquire()
    try:
        sandbox = box.repo
        try:
            mplconfig = Path(tempfile.mkdtemp(prefix="mplconfig-", dir=box.base))  # never shared between scripts
            cwd = sandbox if task.working_dir == "root" else (sandbox / task.script).parent
            spec = {"script": task.script, "sandbox": str(sandbox), "cwd": str(cwd), "out": str(out),
                    "memory_limit": options.memory_limit, "network": options.network, "mode": mode,
                    "protect": [str(options.root.resolve())], "renders": options.renders,
                    "view": box.view_spec()}
            spec_path = box.base / "spec.json"
            spec_path.write_text(json.dumps(spec), encoding="utf-8")
        except OSError as exc:
            if is_environment_error(exc):
                raise EnvironmentProblem(describe_os_error(exc, box.base.parent, f"prepare {task.script}")) from exc
            raise
        # an overlay's folders exist only inside the child once it has mounted it: start beside the mount point
        job = Launch(spec=spec_path, cwd=cwd if box.method != "overlay" else box.launch_folder,
                     env=child_env(mplconfig), stdout=out / "stdout.txt", stderr=out / "stderr.txt")
        started = time.perf_counter()
        returncode, timed_out = launch(job, options.timeout)
        seconds = time.perf_counter() - started
        run = _collect(task, out, returncode, timed_out, seconds, options.timeout)
        _blame_environment(run, returncode, out, box.base)
        _keep_outputs(run, box.outputs, out / "regenerated")
    finally:
        pool.release(box)
        if options.sandboxes is None:
            pool.close()
    return run


class FreshInterpreter:
    """Start a new Python interpreter for every script (works everywhere; the slow but simple mode)."""

    name = "fresh-interpreter"

    def __init__(self, python: str | None = None) -> None:
        self.python = python or sys.executable
        self._lock = threading.Lock()
        self._live: set[subprocess.Popen[bytes]] = set()
        self._stopped = False

    def run(self, task: Task, options: Options) -> ScriptRun:
        """Run one script in a new interpreter."""
        if self._stopped:
            raise Stopped("the check is stopping")
        return run_contained(task, options, self._launch, self.name)

    def stop(self) -> None:
        """Kill every running child's process group now and start no more (the check is interrupted)."""
        with self._lock:
            self._stopped = True
            live = list(self._live)
        for proc in live:
            try:
                os.killpg(proc.pid, signal.SIGKILL)
            except (ProcessLookupError, PermissionError):
                pass

    def _launch(self, job: Launch, timeout: float) -> tuple[int | None, bool]:
        timed_out = False
        try:
            so, se = open(job.stdout, "wb"), open(job.stderr, "wb")  # noqa: SIM115 - closed by the with below
        except OSError as exc:
            if is_environment_error(exc):
                raise EnvironmentProblem(describe_os_error(exc, job.stdout.parent, "keep a script's output")) from exc
            raise
        with so, se:
            with self._lock:
                if self._stopped:
                    raise Stopped("the check is stopping")
                try:
                    proc = subprocess.Popen([self.python, "-m", "figproof.child.main", str(job.spec)],
                                            cwd=str(job.cwd), stdin=subprocess.DEVNULL, stdout=so, stderr=se,
                                            env=job.env, start_new_session=True)
                except OSError as exc:
                    if is_environment_error(exc):
                        problem = describe_os_error(exc, job.cwd, "start a process for a script")
                        raise EnvironmentProblem(problem) from exc
                    raise
                self._live.add(proc)
            try:
                try:
                    proc.wait(timeout=timeout)
                except subprocess.TimeoutExpired:
                    timed_out = True
                kill_group(proc)
            finally:
                with self._lock:
                    self._live.discard(proc)
        return proc.returncode, timed_out


def _collect(task: Task, out: Path, returncode: int | None, timed_out: bool, seconds: float,
             timeout: float) -> ScriptRun:
    stdout, stderr = _tail(out / "stdout.txt"), _tail(out / "stderr.txt")
    base: ScriptRun | None = None
    if (out / "run.json").exists() and not timed_out:
        try:
            base = load_run(out)
        except (ValueError, OSError, KeyError, TypeError) as exc:
            base = ScriptRun(path=task.script, status="failed", notes=(f"unreadable run record: {exc}",),
                             error=ScriptError(kind="no-report", message="the run record was unreadable"))
    if base is None:
        base = ScriptRun(path=task.script, status="failed", events=_events(out / "events.jsonl"),
                         error=_lost_error(returncode, timed_out, timeout, stderr))
        if timed_out:
            base = replace(base, status="timeout")
        elif base.error is not None and base.error.kind == "memory":
            base = replace(base, status="memory")
        base = replace(base, isolation=_isolation(out))
    return replace(base, seconds=round(seconds, 3), working_dir=task.working_dir, stdout_tail=stdout,
                   stderr_tail=stderr)


def _blame_environment(run: ScriptRun, returncode: int | None, out: Path, base: Path) -> None:
    """Raise EnvironmentProblem when the machine, not the script, ended the run (a full temp folder)."""
    error = run.error
    if error is None:
        return
    lost = error.kind == "no-report" or (error.kind == "signal" and returncode == -signal.SIGKILL)
    if error.kind == "no-report" and returncode == ENVIRONMENT_EXIT:
        said = next((ln[len(ENVIRONMENT_MARK):] for ln in run.stderr_tail.splitlines()
                     if ln.startswith(ENVIRONMENT_MARK)), "")
        if said:
            raise EnvironmentProblem(said)
    if error.kind == "exception" and error.message.startswith(_SPACE_MESSAGE):
        free = free_space(base)
        room = f" ({human_size(free)} free)" if free is not None else ""
        raise EnvironmentProblem(f"no space left in the temp folder {base.parent}{room}: {run.path} could not "
                                 f"write its files; free some space or point TMPDIR at a folder with more room")
    if lost:
        for folder in (out, base):
            free = free_space(folder)
            if free is not None and free < FULL_BYTES:
                raise EnvironmentProblem(f"no space left in the temp folder {base.parent} ({human_size(free)} "
                                         f"free): the run of {run.path} was lost; free some space or point TMPDIR "
                                         f"at a folder with more room")


def _isolation(out: Path) -> tuple[str, ...]:
    """Isolation the child set up before the user's code ran (written early, so it survives a lost run)."""
    try:
        tags = json.loads((out / "isolation.json").read_text(encoding="utf-8"))
        return tuple(str(t) for t in tags) if isinstance(tags, list) else ()
    except (OSError, ValueError):
        return ()


def _lost_error(returncode: int | None, timed_out: bool, timeout: float, stderr: str) -> ScriptError:
    if timed_out:
        return ScriptError(kind="timeout", message=f"stopped after {timeout:g} s")
    if returncode is not None and returncode < 0:
        name = _SIGNAL_NAMES.get(-returncode, f"signal {-returncode}")
        kind: ErrorKind = "memory" if "MemoryError" in stderr else "signal"
        return ScriptError(kind=kind, type=name, message=f"killed by {name}")
    if "MemoryError" in stderr:
        return ScriptError(kind="memory", type="MemoryError", message="ran out of memory")
    last = next((ln for ln in reversed(stderr.strip().splitlines()) if ln.strip()), "")
    return ScriptError(kind="no-report", message=f"exit status {returncode}" + (f"; {last[:200]}" if last else ""))


def _keep_outputs(run: ScriptRun, sandbox: Path, dest: Path) -> None:
    """Copy regenerated figure files out of the sandbox (``sandbox``: where its written files are) before it is
    deleted."""
    for ev in run.events:
        if ev.action != "save" or not ev.inside_repo:
            continue
        src = sandbox / ev.path
        if src.is_file():
            target = dest / ev.path
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(src, target)


def _slug(script: str) -> str:
    return script.replace("/", "__")


def artifact_folder(artifacts: Path, script: str) -> Path:
    """The folder holding one script's run record, renders and regenerated files under an artifacts root."""
    return artifacts / _slug(script)


def view_method() -> str:
    """How sandboxes show the repo: ``FIGPROOF_REPO_VIEW`` (copy | reflink | overlay), else ``auto``."""
    asked = os.environ.get("FIGPROOF_REPO_VIEW", "").strip().lower()
    return asked if asked in ("copy", "reflink", "overlay") else "auto"


def execute_all(tasks: Iterable[Task], options: Options, runner: Runner,
                progress: Callable[[ScriptRun, int, int], None] | None = None) -> list[ScriptRun]:
    """Run every task (``options.jobs`` at a time); results in task order; one failure never stops the rest.

    The caller owns ``runner`` (see :func:`figproof.run.pool.default_runner`) and closes it.
    """
    tasks = list(tasks)
    if not tasks:
        return []
    active = runner
    sandboxes = None
    if options.sandboxes is None:
        sandboxes = SandboxPool(options.root, options.skip_copy, jobs=options.jobs, method=view_method())
        options = replace(options, sandboxes=sandboxes)
        # how to show the repo is probed while a lazily built runner starts (the warm pool's imports take longer)
        threading.Thread(target=sandboxes.decide, name="figproof-view-probe", daemon=True).start()
    results: list[ScriptRun | None] = [None] * len(tasks)
    done = 0
    lock = threading.Lock()
    halt = threading.Event()  # set when the check stops: tasks not yet started are skipped
    trouble: list[EnvironmentProblem] = []

    def one(i: int) -> None:
        nonlocal done
        task = tasks[i]
        if halt.is_set():
            return
        try:
            run = active.run(task, options)
        except EnvironmentProblem as exc:  # the machine's trouble ends the check, it is no script's finding
            with lock:
                trouble.append(exc)
            halt.set()
            _stop(active)
            return
        except Stopped:
            return
        except Exception as exc:  # noqa: BLE001 - a broken sandbox for one script must not stop the others
            run = ScriptRun(path=task.script, status="failed", working_dir=task.working_dir,
                            error=ScriptError(kind="no-report", type=type(exc).__name__, message=str(exc)[:300]))
        if halt.is_set():
            return  # stopped while it ran: its run says nothing about the script
        with lock:
            results[i] = run
            done += 1
            if progress is not None:
                progress(run, done, len(tasks))

    executor = ThreadPoolExecutor(max_workers=max(1, options.jobs))
    try:
        futures = [executor.submit(one, i) for i in range(len(tasks))]
        for future in futures:
            future.result()
    except BaseException:
        # interrupted (a signal raised here, in the main thread): kill the children so the workers return
        halt.set()
        _stop(active)
        raise
    finally:
        executor.shutdown(wait=True, cancel_futures=True)
        if sandboxes is not None:
            sandboxes.close()
    if trouble:
        raise trouble[0]
    return [r for r in results if r is not None]


def _stop(runner: Runner) -> None:
    """Stop ``runner``'s children (runners without ``stop`` are left to finish)."""
    stop = getattr(runner, "stop", None)
    if callable(stop):
        stop()

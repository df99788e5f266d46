"""Warm worker pool: one server imports numpy, pandas, matplotlib and the capture code once, then forks a child
per script.

Parent side: :class:`WarmPool` (a :class:`figproof.run.execute.Runner`).  Server side: :mod:`figproof.child.server`.
They talk in JSON lines over the server's stdin/stdout pipes (never pickle: the children run untrusted code).

    parent → server   {"op": "run", "id": 3, "spec": ..., "cwd": ..., "env": {...}, "stdout": ..., "stderr": ...}
    server → parent   {"ready": true, "pid": 123}           once, after the imports
                      {"id": 3, "pid": 4567}                 the child was forked
                      {"id": 3, "exit": 0}                   the child ended (exit code, or -signal)

The server keeps one child forked ahead of time (a spare): it has already started its own session, dropped the
server's descriptors and reseeded numpy, and waits on a pipe for its request, so a script's run does not wait
for the fork; the next spare is forked while that script runs.  A spare that dies unused is replaced.

Each forked child gets the containment of a fresh interpreter (see :mod:`figproof.run.execute`): a new session,
stdin on /dev/null, stdout/stderr to files, the per-script environment, the sandbox copy as working folder;
:func:`figproof.child.main.main` then sets the memory cap and the network block and runs the script.  The server
never runs user code itself, so nothing a script changes (rcParams, pyplot figures, imported modules, cwd,
environment, sys.path, sys.argv) reaches the next script: each child starts from the server's pristine state.

When the server reaps a child it first kills the child's process group (its leader is still a zombie then,
so the group id cannot have been reused), which removes whatever the script left running.  The parent enforces
the timeout itself and kills the group directly, so a wedged server cannot stop a timeout.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO

from figproof.model.records import ScriptRun
from figproof.run.execute import (
    GRACE_SECONDS,
    FreshInterpreter,
    Launch,
    Options,
    Runner,
    Stopped,
    Task,
    child_env,
    run_contained,
)
from figproof.run.resources import EnvironmentProblem
from figproof.run.scratch import make_scratch, remove_tree

START_TIMEOUT = 60.0  # seconds for the server to import its libraries
FORK_TIMEOUT = 30.0  # seconds for the server to answer a run request with the child's pid


class PoolLost(RuntimeError):
    """The server stopped answering; the task is run again in a fresh interpreter."""


# --------------------------------------------------------------------------
# parent side
# --------------------------------------------------------------------------


@dataclass
class _Pending:
    started: threading.Event = field(default_factory=threading.Event)
    done: threading.Event = field(default_factory=threading.Event)
    pid: int | None = None
    exit: int | None = None
    lost: bool = False


class WarmPool:
    """Run each script in a child forked from a server that has already imported the plotting stack.

    Start it with :meth:`start` (False when fork is unavailable or the server does not come up: use
    :class:`figproof.run.execute.FreshInterpreter` then) and stop it with :meth:`close`; also a context manager.
    If the server dies during a check, the scripts it was running run again in fresh interpreters and the
    next script starts a new server.
    """

    name = "warm-pool"

    def __init__(self, python: str | None = None, start_timeout: float = START_TIMEOUT) -> None:
        self.python = python or sys.executable
        self.start_timeout = start_timeout
        self._proc: subprocess.Popen[bytes] | None = None
        self._tmp: Path | None = None
        self._lock = threading.Lock()
        self._pending: dict[int, _Pending] = {}
        self._next_id = 0
        self._ready = threading.Event()
        self._alive = False
        self._reader: threading.Thread | None = None
        self._start_lock = threading.Lock()
        self._gave_up = False  # the server could not start once: do not retry for every script
        self._stopped = False
        self._fallback = FreshInterpreter(self.python)

    # ---- life cycle ------------------------------------------------------

    def start(self) -> bool:
        """Start the server (again, if it died); True when it is ready to fork children."""
        with self._start_lock:
            if self._alive:
                return True
            if self._gave_up:
                return False
            if self._proc is not None:
                self.close()  # a server that died: reap it and its reader before starting another
            if os.name != "posix" or not hasattr(os, "fork") or sys.platform == "darwin":
                # macOS: system frameworks are not fork-safe once loaded; the fresh interpreter is the safe mode
                self._gave_up = True
                return False
            try:
                up = self._spawn()
            except BaseException:
                self.close()  # interrupted while the server imports: stop it and remove its folder
                raise
            if not up:
                self._gave_up = True
                self.close()
                return False
            return True

    def _spawn(self) -> bool:
        try:
            self._tmp = make_scratch("figproof-pool-")
        except EnvironmentProblem:
            return False  # the fresh interpreter then meets the same trouble and says so
        mplconfig = self._tmp / "mplconfig"
        mplconfig.mkdir()
        self._ready = threading.Event()
        try:
            with open(self._tmp / "server-stderr.txt", "wb") as err:
                self._proc = subprocess.Popen([self.python, "-m", "figproof.child.server"], cwd=str(self._tmp),
                                              stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=err,
                                              env=child_env(mplconfig), start_new_session=True)
        except OSError:
            return False
        self._alive = True
        self._reader = threading.Thread(target=self._read, args=(self._proc,), name="figproof-pool-reader",
                                        daemon=True)
        self._reader.start()
        return self._ready.wait(self.start_timeout) and self._alive

    def close(self) -> None:
        """Stop the server (it kills any child still running) and wait for it; safe to call twice."""
        proc, self._proc = self._proc, None
        if proc is not None:
            try:
                if proc.stdin is not None:
                    proc.stdin.close()  # end of requests: the server kills what is left and exits
            except OSError:
                pass
            try:
                proc.wait(timeout=5)
            except subprocess.TimeoutExpired:
                try:
                    os.killpg(proc.pid, signal.SIGKILL)
                except (ProcessLookupError, PermissionError):
                    pass
                proc.wait(timeout=5)
        if self._reader is not None:
            self._reader.join(timeout=5)
            self._reader = None
        if proc is not None and proc.stdout is not None:
            proc.stdout.close()
        self._alive = False
        self._cleanup()

    def __enter__(self) -> WarmPool:
        self.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _cleanup(self) -> None:
        if self._tmp is not None:
            remove_tree(self._tmp)
            self._tmp = None

    def stop(self) -> None:
        """Kill every running child's process group now and start no more (the check is interrupted);
        :meth:`close` then stops the server."""
        with self._lock:
            self._stopped = True
            pending = list(self._pending.values())
        for item in pending:
            if item.pid is not None:
                try:
                    os.killpg(item.pid, signal.SIGKILL)
                except (ProcessLookupError, PermissionError):
                    pass
        self._fallback.stop()

    # ---- running ---------------------------------------------------------

    def run(self, task: Task, options: Options) -> ScriptRun:
        """Run one script in a forked child; in a fresh interpreter when the server is not (or no longer) up."""
        if self._stopped:
            raise Stopped("the check is stopping")
        if not self._alive and not self.start():
            return self._fallback.run(task, options)
        try:
            return run_contained(task, options, self._launch, self.name)
        except PoolLost:
            run = self._fallback.run(task, options)
            return _with_note(run, "the warm worker pool stopped; this script ran in a fresh interpreter")

    def _launch(self, job: Launch, timeout: float) -> tuple[int | None, bool]:
        pending = self._submit(job)
        if not pending.started.wait(FORK_TIMEOUT) or pending.pid is None:
            raise PoolLost("the worker pool did not start the child")
        finished = pending.done.wait(timeout)
        if not finished:
            self._kill(pending, signal.SIGTERM)
            if not pending.done.wait(GRACE_SECONDS):
                self._kill(pending, signal.SIGKILL)
                pending.done.wait(5)
        if pending.lost:
            self._kill(pending, signal.SIGKILL)
            if finished:
                raise PoolLost("the worker pool stopped")
        return pending.exit, not finished

    def _kill(self, pending: _Pending, sig: int) -> None:
        if pending.pid is None or (pending.done.is_set() and not pending.lost):
            return  # reaped: the server has already cleared its group
        try:
            os.killpg(pending.pid, sig)
        except (ProcessLookupError, PermissionError):
            pass

    def _submit(self, job: Launch) -> _Pending:
        pending = _Pending()
        with self._lock:
            self._next_id += 1
            ident = self._next_id
            request = {"op": "run", "id": ident, "spec": str(job.spec), "cwd": str(job.cwd), "env": job.env,
                       "stdout": str(job.stdout), "stderr": str(job.stderr)}
            proc = self._proc
            if self._stopped:
                raise Stopped("the check is stopping")
            if proc is None or proc.stdin is None or not self._alive:
                raise PoolLost("the worker pool is not running")
            self._pending[ident] = pending
            try:
                proc.stdin.write((json.dumps(request) + "\n").encode("utf-8"))
                proc.stdin.flush()
            except (OSError, ValueError) as exc:
                del self._pending[ident]
                raise PoolLost(f"the worker pool is not running: {exc}") from exc
        return pending

    def _read(self, proc: subprocess.Popen[bytes]) -> None:
        stream: IO[bytes] | None = proc.stdout
        if stream is None:
            return
        for raw in stream:
            try:
                msg = json.loads(raw)
            except ValueError:
                continue
            if not isinstance(msg, dict):
                continue
            if "ready" in msg:
                if not msg.get("ready"):
                    break
                self._ready.set()
                continue
            with self._lock:
                pending = self._pending.get(msg.get("id", -1))
                if pending is None:
                    continue
                if "pid" in msg:
                    pending.pid = int(msg["pid"])
                    pending.started.set()
                if "exit" in msg:
                    pending.exit = int(msg["exit"])
                    del self._pending[msg["id"]]
                    pending.done.set()
        # end of stream: the server is gone; wake everyone still waiting
        with self._lock:
            self._alive = False
            for pending in self._pending.values():
                pending.lost = True
                pending.started.set()
                pending.done.set()
            self._pending.clear()
        self._ready.set()


def _with_note(run: ScriptRun, note: str) -> ScriptRun:
    from dataclasses import replace

    return replace(run, notes=(*run.notes, note))


def default_runner() -> Runner:
    """The warm pool where fork is safe and the pool starts; a fresh interpreter per script otherwise.

    ``FIGPROOF_RUNNER=fresh`` forces the fresh-interpreter mode (for debugging and benchmarks).
    """
    if os.environ.get("FIGPROOF_RUNNER", "").strip().lower() in ("fresh", "fresh-interpreter"):
        return FreshInterpreter()
    pool = WarmPool()
    return pool if pool.start() else FreshInterpreter()

"""Warm worker pool: one server imports numpy, pandas, matplotlib and the capture code once, then forks a child
per script.

Parent side: :class:`WarmPool` (a :class:`figproof.run.execute.Runner`).  Server side: ``python -m figproof.run.pool``.
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
import select
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, Any

from figproof.run.execute import GRACE_SECONDS, FreshInterpreter, Launch, Options, Task, child_env, run_contained
from figproof.model.records import ScriptRun

START_TIMEOUT = 60.0  # seconds for the server to import its libraries
FORK_TIMEOUT = 30.0  # seconds for the server to answer a run request with the child's pid
PRELOAD = ("numpy", "pandas", "matplotlib", "matplotlib.pyplot", "matplotlib.backends.backend_agg", "PIL.Image",
           "PIL.PngImagePlugin", "figproof.child.capture", "figproof.child.extract", "figproof.model.records", "figproof.child.main",
           "nbformat", "resource", "runpy", "pkgutil")


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
            if not self._spawn():
                self._gave_up = True
                self.close()
                return False
            return True

    def _spawn(self) -> bool:
        self._tmp = Path(tempfile.mkdtemp(prefix="figproof-pool-"))
        mplconfig = self._tmp / "mplconfig"
        mplconfig.mkdir()
        self._ready = threading.Event()
        try:
            with open(self._tmp / "server-stderr.txt", "wb") as err:
                self._proc = subprocess.Popen([self.python, "-m", "figproof.run.pool"], cwd=str(self._tmp),
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
            shutil.rmtree(self._tmp, ignore_errors=True)
            self._tmp = None

    # ---- running ---------------------------------------------------------

    def run(self, task: Task, options: Options) -> ScriptRun:
        """Run one script in a forked child; in a fresh interpreter when the server is not (or no longer) up."""
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


# --------------------------------------------------------------------------
# server side (runs in its own process; never runs user code itself)
# --------------------------------------------------------------------------


def _threads() -> int:
    try:
        return len(os.listdir("/proc/self/task"))
    except OSError:
        return threading.active_count()


def _send(fd: int, msg: dict[str, Any]) -> None:
    data = (json.dumps(msg) + "\n").encode("utf-8")
    while data:
        data = data[os.write(fd, data):]


def serve() -> int:
    """Server main loop: import the plotting stack, then fork a child per request until stdin closes."""
    import gc
    import importlib

    # the protocol keeps private copies of fds 0 and 1; anything a library prints goes to stderr instead
    proto_in, proto_out = os.dup(0), os.dup(1)
    devnull = os.open(os.devnull, os.O_RDONLY)
    os.dup2(devnull, 0)
    os.dup2(2, 1)
    os.close(devnull)
    for name in PRELOAD:
        try:
            importlib.import_module(name)
        except ImportError:
            continue  # pandas or nbformat may be absent; the child imports what the script needs
    import matplotlib

    matplotlib.use("Agg", force=True)
    _warm_up()
    if threading.active_count() > 1 or _threads() > 1:
        # fork copies only the calling thread; a library thread's locks could deadlock the child
        _send(proto_out, {"ready": False, "reason": f"{_threads()} threads after import"})
        return 1
    _set_subreaper()
    wake_r, wake_w = os.pipe()
    os.set_blocking(wake_w, False)
    signal.signal(signal.SIGCHLD, lambda *_: None)
    signal.set_wakeup_fd(wake_w)
    gc.collect()
    gc.freeze()  # keep the imported heap out of the children's collections: fewer copied pages
    rcfile = matplotlib.matplotlib_fname()
    fds = (proto_in, proto_out, wake_r, wake_w)
    children: dict[int, int] = {}  # pid -> request id
    spare = _Spare.fork(fds, rcfile)
    _send(proto_out, {"ready": True, "pid": os.getpid()})
    buffer = b""
    open_input = True
    while open_input or children:
        ready, _, _ = select.select([proto_in, wake_r] if open_input else [wake_r], [], [], 0.5)
        if wake_r in ready:
            try:
                os.read(wake_r, 4096)
            except BlockingIOError:
                pass
        if _reap(children, proto_out, spare.pid if spare else None):
            spare = None  # the spare died before it was used (killed from outside): fork another when needed
        if proto_in in ready:
            chunk = os.read(proto_in, 1 << 16)
            if not chunk:
                open_input = False
                if spare is not None:
                    spare.dismiss()
                    spare = None
                for pid in children:
                    _killpg(pid, signal.SIGKILL)
                continue
            buffer += chunk
            while b"\n" in buffer:
                line, buffer = buffer.split(b"\n", 1)
                try:
                    req = json.loads(line)
                except ValueError:
                    continue
                if isinstance(req, dict) and req.get("op") == "run":
                    child = spare if spare is not None and spare.hand(line) else None
                    if child is None:
                        pid = os.fork()
                        if pid == 0:
                            try:
                                _prepare_child(fds)
                                _run_child(req, rcfile)
                            finally:
                                os._exit(70)
                    else:
                        pid = child.pid
                    children[pid] = req["id"]
                    _send(proto_out, {"id": req["id"], "pid": pid})
                    # the next script's child is forked now, while this one runs
                    spare = _Spare.fork(fds, rcfile)
    return 0


class _Spare:
    """A child forked ahead of its request: it has set up everything that does not depend on the script and
    waits on a pipe for the request (one JSON line), so a run does not wait for the fork."""

    def __init__(self, pid: int, pipe: int) -> None:
        self.pid = pid
        self.pipe = pipe

    @classmethod
    def fork(cls, fds: tuple[int, ...], rcfile: str) -> _Spare | None:
        try:
            read_end, write_end = os.pipe()
            pid = os.fork()
        except OSError:
            return None  # no spare: requests fork their child directly
        if pid == 0:
            try:
                os.close(write_end)
                _prepare_child(fds)
                req = _await_request(read_end)
                if req is not None:
                    _run_child(req, rcfile)
                os._exit(0)
            finally:
                os._exit(70)
        os.close(read_end)
        return cls(pid, write_end)

    def hand(self, line: bytes) -> bool:
        """Give the spare its request; False when it is gone (the caller forks a child instead)."""
        try:
            data = line + b"\n"
            while data:
                data = data[os.write(self.pipe, data):]
            return True
        except OSError:
            try:
                os.kill(self.pid, signal.SIGKILL)  # reaped with the other children
            except OSError:
                pass
            return False
        finally:
            os.close(self.pipe)

    def dismiss(self) -> None:
        """No more requests: stop the spare and reap it (it never ran anything)."""
        try:
            os.close(self.pipe)
            os.kill(self.pid, signal.SIGKILL)
            os.waitpid(self.pid, 0)
        except OSError:
            pass


def _await_request(fd: int) -> dict[str, Any] | None:
    """In a spare: block until the server sends the request; None at end-of-file (the server is stopping)."""
    data = b""
    while True:
        chunk = os.read(fd, 1 << 16)
        if not chunk:
            break
        data += chunk
    os.close(fd)
    try:
        req = json.loads(data) if data.strip() else None
    except ValueError:
        return None
    return req if isinstance(req, dict) else None


def _warm_up() -> None:
    """Draw one throwaway figure so font files, glyph caches and lazily imported drawing code are loaded once.

    It is built without pyplot (no figure manager, no figure number taken) and changes no rcParams, so the
    children start as a fresh interpreter would, only with warm caches.
    """
    import io

    try:
        from matplotlib.figure import Figure

        fig = Figure(figsize=(2, 2), dpi=50)
        ax = fig.subplots()
        ax.plot([0, 1], [1, 0], marker="o", label="line")
        ax.scatter([0.5], [0.5])
        ax.bar([0.2], [0.4])
        ax.imshow([[0.0, 1.0]], extent=(0, 1, 0, 1))
        ax.set_title("title")
        ax.set_xlabel("x")
        ax.legend()
        fig.savefig(io.BytesIO(), format="png")
    except Exception:  # noqa: BLE001 - warming caches is an optimisation only
        pass


def _reap(children: dict[int, int], proto_out: int, spare: int | None = None) -> bool:
    """Reap ended children; kill each one's process group first, while its leader is still a zombie.

    Returns True when the unused spare child (pid ``spare``) was among them."""
    peek = getattr(os, "waitid", None)
    spare_gone = False
    while True:
        if peek is not None:
            try:
                info = peek(os.P_ALL, 0, os.WEXITED | os.WNOHANG | os.WNOWAIT)
            except ChildProcessError:
                return spare_gone
            if info is None:
                return spare_gone
            pid = info.si_pid
            if pid in children or pid == spare:
                _killpg(pid, signal.SIGKILL)
            try:
                _, status = os.waitpid(pid, 0)
            except ChildProcessError:
                continue
        else:
            try:
                pid, status = os.waitpid(-1, os.WNOHANG)
            except ChildProcessError:
                return spare_gone
            if pid == 0:
                return spare_gone
            if pid in children or pid == spare:
                _killpg(pid, signal.SIGKILL)
        spare_gone = spare_gone or pid == spare
        ident = children.pop(pid, None)
        if ident is not None:  # others are orphaned grandchildren adopted by this subreaper
            _send(proto_out, {"id": ident, "exit": os.waitstatus_to_exitcode(status)})


def _killpg(pid: int, sig: int) -> None:
    try:
        os.killpg(pid, sig)
    except (ProcessLookupError, PermissionError):
        pass


def _set_subreaper() -> None:
    """On Linux, adopt orphaned grandchildren so they are reaped here, not left as zombies under a poor init."""
    if not sys.platform.startswith("linux"):
        return
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(36, 1, 0, 0, 0)  # PR_SET_CHILD_SUBREAPER, from <linux/prctl.h>
    except (OSError, AttributeError):
        pass


def _prepare_child(fds: tuple[int, ...]) -> None:
    """In a forked child, before its request is known: a session of its own, no server descriptors or signal
    handlers, stdin on /dev/null, fresh random state."""
    import numpy as np

    os.setsid()
    signal.set_wakeup_fd(-1)
    signal.signal(signal.SIGCHLD, signal.SIG_DFL)
    for fd in fds:
        os.close(fd)
    stdin = os.open(os.devnull, os.O_RDONLY)
    os.dup2(stdin, 0)
    os.close(stdin)
    np.random.seed()  # numpy's global generator was seeded once in the server; `random` reseeds at fork itself


def _run_child(req: dict[str, Any], rcfile: str) -> None:
    """In the forked child: contain the process like a fresh interpreter, then run the script."""
    import io
    import time

    stdout = os.open(req["stdout"], os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
    stderr = os.open(req["stderr"], os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
    for src, dest in ((stdout, 1), (stderr, 2)):
        os.dup2(src, dest)
        os.close(src)
    # the same text streams a PYTHONUNBUFFERED interpreter would have
    sys.stdin = sys.__stdin__ = io.TextIOWrapper(io.FileIO(0, "r", closefd=False), encoding="utf-8")
    sys.stdout = sys.__stdout__ = io.TextIOWrapper(io.FileIO(1, "w", closefd=False), encoding="utf-8",
                                                   errors="backslashreplace", write_through=True)
    sys.stderr = sys.__stderr__ = io.TextIOWrapper(io.FileIO(2, "w", closefd=False), encoding="utf-8",
                                                   errors="backslashreplace", write_through=True)
    os.environ.clear()
    os.environ.update(req["env"])
    if hasattr(time, "tzset"):
        time.tzset()
    os.chdir(req["cwd"])
    # `python -m` puts the working folder first on sys.path; mimic the fresh interpreter
    sys.path[0] = req["cwd"]
    _fresh_state(rcfile)
    from figproof.child import main as child

    child.main([req["spec"]])


def _fresh_state(server_rcfile: str) -> None:
    """Undo what sharing the server's memory would otherwise share between scripts."""
    import warnings

    import matplotlib

    # matplotlib reads a matplotlibrc in the working folder at import; the server imported it elsewhere
    rcfile = matplotlib.matplotlib_fname()
    if rcfile != server_rcfile:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            matplotlib.rcParams.update(matplotlib.rc_params_from_file(rcfile, use_default_template=False))


if __name__ == "__main__":
    sys.exit(serve())

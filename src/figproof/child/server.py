"""The warm pool's server: imports the heavy libraries once, then forks one contained child per script.

Started by :class:`figproof.run.pool.WarmPool` as ``python -m figproof.child.server``; the protocol and the
containment each child gets are described there.  This module runs in its own process and never runs user code
itself: every script runs in a forked child, through :func:`figproof.child.main.main`.
"""

from __future__ import annotations

import json
import os
import select
import signal
import sys
import threading
from pathlib import Path
from typing import Any

# imported once in the server, so no child pays for them: the plotting stack, and every module of the child's
# own (the write guard, the kernel layer and the repo view among them: importing them costs about 10 ms per
# script otherwise; importing installs nothing, the child does that for itself)
PRELOAD = ("numpy", "pandas", "matplotlib", "matplotlib.pyplot", "matplotlib.backends.backend_agg", "PIL.Image",
           "PIL.PngImagePlugin", "figproof.child.capture", "figproof.child.extract", "figproof.model.records",
           "figproof.child.main", "figproof.child.audit", "figproof.child.landlock", "figproof.child.backdrop",
           "figproof.child.view", "tempfile", "ctypes", "nbformat", "resource", "runpy", "pkgutil")


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
    sys.stdin = sys.__stdin__ = io.TextIOWrapper(io.FileIO(0, "r", closefd=False), encoding="utf-8")  # type: ignore[misc]  # the forked child replaces its streams
    sys.stdout = sys.__stdout__ = io.TextIOWrapper(io.FileIO(1, "w", closefd=False), encoding="utf-8",  # type: ignore[misc]
                                                   errors="backslashreplace", write_through=True)
    sys.stderr = sys.__stderr__ = io.TextIOWrapper(io.FileIO(2, "w", closefd=False), encoding="utf-8",  # type: ignore[misc]
                                                   errors="backslashreplace", write_through=True)
    os.environ.clear()
    os.environ.update(req["env"])
    if hasattr(time, "tzset"):
        time.tzset()
    os.chdir(req["cwd"])
    # `python -m` puts the working folder first on sys.path; mimic the fresh interpreter
    sys.path[0] = req["cwd"]
    from figproof.child import main as child

    child.enter_view(child.Spec.read(Path(req["spec"])))  # an overlay moves the working folder onto the mount
    _fresh_state(rcfile)
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

"""Inside the child: the portable write guard (PEP 578 audit hooks) and the reporter of refused writes.

Every file-mutating audit event Python raises (the "Audit events table" of the Python documentation: ``open``
for writing, ``os.remove``, ``os.rename``, ``os.rmdir``, ``os.mkdir``, ``os.chmod``, ``os.chown``,
``os.truncate``, ``os.symlink``, ``os.link``, ``os.utime``, ``os.setxattr``, ``shutil.rmtree``, ``shutil.move``,
...) on a path outside the copy of the repo and the run's own temp folder is refused with PermissionError and
recorded as a ``blocked-write`` event at the user's file:line.

Calls into the C library through ctypes raise no audit event per call, so :func:`guard_ctypes` wraps the
functions ctypes hands out: a call that would change a file outside the copy is refused before it runs, or,
when the kernel layer (:mod:`figproof.child.landlock`) is active, let through and recorded when the kernel
refused it.  A subprocess's own calls are out of Python's sight: a command line naming the user's repo is
recorded so the report can say what the kernel layer held back.

An audit hook cannot be removed and sees every event in the process, so :func:`_hook` returns at once for
events it does not handle.  Like the rest of the isolation this is best effort (native code may skip it);
the kernel layer and the parent's working-tree guard are the other layers.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from figproof.model.records import FileEvent

_WRITE_FLAGS = os.O_WRONLY | os.O_RDWR | os.O_CREAT | os.O_TRUNC | os.O_APPEND
DEVICES = ("/dev/null", "/dev/zero", "/dev/full", "/dev/tty", "/dev/random", "/dev/urandom")
DEVICE_FOLDERS = ("/dev/pts", "/dev/shm")
REFUSAL = "figproof: "  # start of every refusal message (script-fails leaves these to write-outside-copy)

# event -> (what it does, [(path argument, dir_fd argument or None, follows a final symbolic link)])
_PathArg = tuple[int, int | None, bool]
_EVENTS: dict[str, tuple[str, tuple[_PathArg, ...]]] = {
    "os.remove": ("remove", ((0, 1, False),)),
    "os.rename": ("rename", ((0, 2, False), (1, 3, False))),
    "os.rmdir": ("remove the folder", ((0, 1, False),)),
    "os.mkdir": ("create the folder", ((0, 2, False),)),
    "os.chmod": ("change the permissions of", ((0, 2, True),)),
    "os.chown": ("change the owner of", ((0, 3, True),)),
    "os.truncate": ("truncate", ((0, None, True),)),
    "os.symlink": ("create a link at", ((1, 2, False),)),
    "os.link": ("create a link at", ((1, 3, False),)),
    "os.utime": ("change the time stamps of", ((0, 3, True),)),
    "os.setxattr": ("change the extended attributes of", ((0, None, True),)),
    "os.removexattr": ("change the extended attributes of", ((0, None, True),)),
    "os.chflags": ("change the flags of", ((0, None, True),)),
    "os.lchflags": ("change the flags of", ((0, None, False),)),
    "shutil.rmtree": ("remove the tree", ((0, 1, False),)),
    "shutil.move": ("move", ((0, None, False), (1, None, False))),
    "shutil.copyfile": ("copy onto", ((1, None, True),)),
    "shutil.copytree": ("copy a tree onto", ((1, None, False),)),
    "shutil.copymode": ("change the permissions of", ((1, None, True),)),
    "shutil.copystat": ("change the permissions of", ((1, None, True),)),
    "shutil.chown": ("change the owner of", ((0, None, True),)),
    "shutil.unpack_archive": ("unpack an archive into", ((1, None, False),)),
}

# C library functions that change files, with the positions of their path arguments and an "at" dir fd
_NATIVE: dict[str, tuple[str, tuple[int, ...], int | None]] = {
    "unlink": ("remove", (0,), None), "unlinkat": ("remove", (1,), 0), "remove": ("remove", (0,), None),
    "rmdir": ("remove the folder", (0,), None), "mkdir": ("create the folder", (0,), None),
    "mkdirat": ("create the folder", (1,), 0), "rename": ("rename", (0, 1), None),
    "renameat": ("rename", (1, 3), 0), "renameat2": ("rename", (1, 3), 0),
    "truncate": ("truncate", (0,), None), "truncate64": ("truncate", (0,), None),
    "chmod": ("change the permissions of", (0,), None), "fchmodat": ("change the permissions of", (1,), 0),
    "chown": ("change the owner of", (0,), None), "lchown": ("change the owner of", (0,), None),
    "fchownat": ("change the owner of", (1,), 0), "link": ("create a link at", (1,), None),
    "symlink": ("create a link at", (1,), None), "utime": ("change the time stamps of", (0,), None),
    "utimes": ("change the time stamps of", (0,), None), "creat": ("write", (0,), None),
    "creat64": ("write", (0,), None), "mknod": ("create", (0,), None), "mkfifo": ("create", (0,), None),
}
_NATIVE_OPEN = {"open": (0, 1, None), "open64": (0, 1, None), "openat": (1, 2, 0), "openat64": (1, 2, 0),
                "fopen": (0, 1, None), "fopen64": (0, 1, None)}
_AT_FDCWD = -100  # <fcntl.h> on Linux
# events that start another program: (index of its command line, index of its working folder or None)
_COMMANDS = {"subprocess.Popen": (1, 2), "os.system": (0, None), "os.posix_spawn": (1, None),
             "os.exec": (1, None)}


@dataclass
class Confinement:
    """Where the child may write: the copy, the run's temp folder and a few device files (never the user's repo)."""

    roots: tuple[str, ...]  # real paths of the folders writing is allowed beneath
    protect: tuple[str, ...] = ()  # real paths never written, even beneath a root
    kernel: bool = False  # the kernel layer holds the same limits (ctypes calls are then observed, not refused)
    _prefixes: tuple[str, ...] = field(default=(), repr=False)

    def __post_init__(self) -> None:
        self._prefixes = tuple(r.rstrip(os.sep) + os.sep for r in (*self.roots, *DEVICE_FOLDERS))

    @classmethod
    def beneath(cls, folders: Sequence[Path], protect: Sequence[Path] = ()) -> Confinement:
        return cls(roots=tuple(os.path.realpath(f) for f in folders),
                   protect=tuple(os.path.realpath(p) for p in protect))

    def allows(self, real: str) -> bool:
        """Whether writing the resolved path ``real`` is allowed."""
        if any(real == p or real.startswith(p.rstrip(os.sep) + os.sep) for p in self.protect):
            return False
        return real in DEVICES or real in self.roots or real.startswith(self._prefixes)


def _fd_path(fd: int) -> str | None:
    """The file an open descriptor refers to (Linux); None for pipes, sockets or where /proc is missing."""
    try:
        target = os.readlink(f"/proc/self/fd/{fd}")
    except OSError:
        return None
    return target if os.path.isabs(target) else None


def resolve(path: Any, dir_fd: Any = None, *, follow: bool = True) -> str | None:
    """The real path an operation on ``path`` touches; None when it is not a path figproof can place."""
    if isinstance(path, int):
        return _fd_path(path)
    if isinstance(path, (str, bytes, os.PathLike)):
        text = os.fsdecode(path)
    else:
        return None
    if not text:
        return None
    if not os.path.isabs(text) and isinstance(dir_fd, int) and dir_fd >= 0:
        folder = _fd_path(dir_fd)
        if folder is None:
            return None
        text = os.path.join(folder, text)
    text = os.path.abspath(text)
    if follow:
        return os.path.realpath(text)
    head, tail = os.path.split(text)
    return os.path.join(os.path.realpath(head), tail) if tail else os.path.realpath(text)


def _writes(mode: Any, flags: Any) -> bool:
    if isinstance(mode, str):
        return any(c in mode for c in "wax+")
    return isinstance(flags, int) and bool(flags & _WRITE_FLAGS)


def _shown(path: Any) -> str:
    if isinstance(path, int):
        return _fd_path(path) or f"file descriptor {path}"
    try:
        return os.fsdecode(path)
    except TypeError:
        return str(path)


Record = Callable[[FileEvent], None]
SourceOf = Callable[[], Any]


@dataclass
class _Guard:
    confinement: Confinement
    record: Record
    source: SourceOf
    busy: bool = False

    def refuse(self, verb: str, path: Any, real: str, *, by_kernel: bool = False) -> PermissionError:
        shown = _shown(path)
        self.record(FileEvent(action="blocked-write", path=shown, inside_repo=False, exists=os.path.lexists(real),
                              source=self.source(), operation=verb + (" (kernel)" if by_kernel else "")))
        return PermissionError(f"{REFUSAL}{verb} {shown} is refused: it is outside the copy of the repo the "
                               f"script runs on")

    def command(self, args: tuple[Any, ...], at: int, cwd_at: int | None) -> None:
        """Record a command line that names the user's repo: Python cannot see what the program does there."""
        line, cwd = args[at], (args[cwd_at] if cwd_at is not None else None)
        self.busy = True
        try:
            named = command_paths(line, cwd, self.confinement.protect)
            if named:
                text = os.fsdecode(line) if isinstance(line, (str, bytes)) else " ".join(
                    os.fsdecode(a) for a in line if isinstance(a, (str, bytes, os.PathLike)))
                self.record(FileEvent(action="subprocess", path=named[0], inside_repo=False,
                                      source=self.source(), operation=text[:200]))
        finally:
            self.busy = False

    def check(self, verb: str, path: Any, dir_fd: Any, follow: bool) -> None:
        real = resolve(path, dir_fd, follow=follow)
        if real is not None and not self.confinement.allows(real):
            raise self.refuse(verb, path, real)


def install(confinement: Confinement, record: Record, source: SourceOf) -> None:
    """Add the audit hook (for good: hooks cannot be removed) and guard ctypes' functions."""
    guard = _Guard(confinement, record, source)
    events = _EVENTS

    def hook(event: str, args: tuple[Any, ...]) -> None:
        if guard.busy:
            return
        if event == "open":
            if not _writes(args[1], args[2]):
                return
            todo: tuple[str, tuple[_PathArg, ...]] = ("write", ((0, None, True),))
        else:
            found = events.get(event)
            if found is None:
                if event in _COMMANDS:
                    guard.command(args, *_COMMANDS[event])
                return
            todo = found
        guard.busy = True
        try:
            verb, spots = todo
            for index, fd_index, follow in spots:
                dir_fd = args[fd_index] if fd_index is not None and fd_index < len(args) else None
                guard.check(verb, args[index], dir_fd, follow)
        finally:
            guard.busy = False

    sys.addaudithook(hook)
    guard_ctypes(guard)


def guard_ctypes(guard: _Guard) -> None:
    """Make every C function ctypes loads from now on check its path arguments (see the module docstring)."""
    import ctypes

    original_init = ctypes.CDLL.__init__

    def init(self: Any, *args: Any, **kwargs: Any) -> None:
        original_init(self, *args, **kwargs)
        self._FuncPtr = _guarded_type(self._FuncPtr, guard)

    ctypes.CDLL.__init__ = init  # type: ignore[method-assign]
    for lib in (ctypes.cdll, ctypes.pydll):  # the loaders keep CDLLs made before the hook
        lib.__dict__.clear()


def _guarded_type(base: type, guard: _Guard) -> type:
    class Guarded(base):
        _flags_ = base._flags_  # type: ignore[attr-defined]  # ctypes requires both on a function type
        _restype_ = base._restype_  # type: ignore[attr-defined]

        def __call__(self, *args: Any) -> Any:
            name = getattr(self, "__name__", "")
            spots = _native_spots(name, args)
            if not spots or guard.busy:
                return super().__call__(*args)
            verb, targets = spots
            outside = [(p, r) for p, r in targets if r is not None and not guard.confinement.allows(r)]
            if not outside:
                return super().__call__(*args)
            if not guard.confinement.kernel:
                raise guard.refuse(verb, outside[0][0], outside[0][1])
            # the kernel refuses every change out there: let the call meet it, and report what it refused
            present = [_present(verb, r) for _, r in outside]
            result = super().__call__(*args)
            failed = result in (0, None) if name.startswith("fopen") else result == -1
            if failed and any(present):
                p, r = outside[present.index(True)]
                guard.busy = True
                try:
                    guard.refuse(verb, p, r, by_kernel=True)
                finally:
                    guard.busy = False
            return result

    Guarded.__name__ = base.__name__
    return Guarded


_CREATES = ("write", "create the folder", "create", "create a link at")


def _present(verb: str, real: str) -> bool:
    """Whether a failure of ``verb`` on ``real`` can only be the refusal (the file, or its folder, is there)."""
    return os.path.lexists(real) or (verb in _CREATES and os.path.isdir(os.path.dirname(real)))


def _text_arg(value: Any) -> Any:
    if isinstance(value, (str, bytes)):
        return value
    raw = getattr(value, "value", None)  # c_char_p, create_string_buffer(...)
    return raw if isinstance(raw, (str, bytes)) else None


def _native_spots(name: str, args: tuple[Any, ...]) -> tuple[str, list[tuple[Any, str | None]]] | None:
    """What a C call does and the real paths it touches, or None when it does not change files."""
    positions: tuple[int, ...]
    if name in _NATIVE_OPEN:
        path_at, mode_at, fd_at = _NATIVE_OPEN[name]
        if len(args) <= mode_at:
            return None
        mode = args[mode_at]
        if isinstance(mode, bytes):
            mode = mode.decode("latin-1")
        if not _writes(mode if isinstance(mode, str) else None, mode if isinstance(mode, int) else None):
            return None
        verb, positions = "write", (path_at,)
    elif name in _NATIVE:
        verb, positions, fd_at = _NATIVE[name]
    else:
        return None
    dir_fd = args[fd_at] if fd_at is not None and fd_at < len(args) else None
    if not isinstance(dir_fd, int) or dir_fd == _AT_FDCWD:
        dir_fd = None
    targets = []
    for at in positions:
        text = _text_arg(args[at]) if at < len(args) else None
        if text is not None:
            targets.append((text, resolve(text, dir_fd, follow=verb == "write")))
    return verb, targets


def command_paths(args: Any, cwd: Any, protect: Sequence[str]) -> list[str]:
    """Arguments of a command line that name a path in the user's repo (a subprocess may write there)."""
    if isinstance(args, (str, bytes)):
        words = os.fsdecode(args).split()
    elif isinstance(args, Sequence):
        words = [os.fsdecode(a) for a in args if isinstance(a, (str, bytes, os.PathLike))]
    else:
        return []
    base = os.fsdecode(cwd) if isinstance(cwd, (str, bytes, os.PathLike)) else os.getcwd()
    found = []
    for word in words[1:]:
        if not word.startswith(("/", "~", ".")):
            continue
        real = os.path.realpath(os.path.join(base, os.path.expanduser(word)))
        if any(real == p or real.startswith(p.rstrip(os.sep) + os.sep) for p in protect):
            found.append(word)
    return found

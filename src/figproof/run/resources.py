"""What figproof needs from the machine (room in the temp folder, open files, new processes) and the one-line
errors it gives when the machine runs out of one.

These failures are figproof's own trouble, never a finding against a script: a check that cannot copy the repo
because the temp folder is full stops with :class:`EnvironmentProblem` (exit code 4) naming the folder and what
was needed.
"""

from __future__ import annotations

import errno
import os
import shutil
from pathlib import Path

# errors that come from the machine, not from the script or figproof's code
SPACE_ERRNOS = frozenset({errno.ENOSPC, errno.EDQUOT})
ENVIRONMENT_ERRNOS = SPACE_ERRNOS | {errno.EROFS, errno.EACCES, errno.EPERM, errno.EMFILE, errno.ENFILE,
                                     errno.EAGAIN, errno.ENOMEM, errno.ENOENT, errno.ENOTDIR}


class EnvironmentProblem(Exception):
    """The machine lacks something figproof needs; the message is one line naming the folder or the limit."""


def human_size(n: int) -> str:
    """Bytes as a short figure with a binary unit: ``1.3 GiB``."""
    size = float(n)
    for unit in ("bytes", "KiB", "MiB", "GiB", "TiB"):
        if size < 1024 or unit == "TiB":
            return f"{int(size)} bytes" if unit == "bytes" else f"{size:.1f} {unit}"
        size /= 1024
    return f"{n} bytes"  # pragma: no cover - the loop always returns


def free_space(folder: Path) -> int | None:
    """Bytes an unprivileged user may still write on the file system holding ``folder``; None if unknown."""
    try:
        st = os.statvfs(folder)
    except (OSError, AttributeError):
        return None
    return st.f_bavail * st.f_frsize


def is_space_error(exc: BaseException) -> bool:
    """Whether ``exc`` says a file system is full (no space left, or the user's quota)."""
    return isinstance(exc, OSError) and exc.errno in SPACE_ERRNOS


def is_environment_error(exc: BaseException) -> bool:
    """Whether ``exc`` is the machine's refusal (full disk, no permission, too many files or processes)."""
    if isinstance(exc, OSError) and exc.errno in ENVIRONMENT_ERRNOS:
        return True
    # shutil.copytree gathers the errors of single files into one Error holding (source, target, why) tuples
    if isinstance(exc, shutil.Error) and exc.args and isinstance(exc.args[0], list):
        return any(_tuple_is_space(item) for item in exc.args[0])
    return False


def _tuple_is_space(item: object) -> bool:
    return isinstance(item, tuple) and len(item) == 3 and any(
        text in str(item[2]) for text in ("No space left", "Disk quota exceeded"))


def describe_os_error(exc: BaseException, folder: Path, doing: str, needed: int | None = None) -> str:
    """One line saying what figproof could not do in ``folder`` and why, with the room needed when known."""
    code = getattr(exc, "errno", None)
    space = is_space_error(exc) or (code is None and is_environment_error(exc))
    if space:
        free = free_space(folder)
        room = f" ({human_size(free)} free" + (f", {human_size(needed)} needed)" if needed else ")") \
            if free is not None else ""
        return (f"no space left in {folder} to {doing}{room}; free some space or point TMPDIR at a folder with "
                f"more room")
    if code in (errno.EMFILE, errno.ENFILE):
        return (f"too many open files to {doing} in {folder}; raise the limit (ulimit -n) or run fewer jobs "
                f"(--jobs)")
    if code in (errno.EAGAIN, errno.ENOMEM) and "process" in doing:
        return f"the system refused to start a process to {doing}; run fewer jobs (--jobs) or free memory"
    if code in (errno.EACCES, errno.EPERM, errno.EROFS):
        return f"{folder} is not writable, so figproof cannot {doing}; point TMPDIR at a folder you can write"
    if code in (errno.ENOENT, errno.ENOTDIR):
        return f"{folder} is not a folder, so figproof cannot {doing}; point TMPDIR at an existing folder"
    reason = getattr(exc, "strerror", None) or (str(exc).splitlines() or [type(exc).__name__])[0]
    return f"cannot {doing} in {folder}: {reason}"

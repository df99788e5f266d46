"""Inside the child, before any user code: mount the overlay view of the repo (see :mod:`figproof.run.view`).

``python -m figproof.child.view LOWER UPPER WORK MERGED`` is the parent's probe: it mounts once and says by its
exit status whether the overlay works here.
"""

from __future__ import annotations

import ctypes
import errno
import os
import sys
from pathlib import Path

_CLONE_NEWNS = 0x00020000  # <linux/sched.h>
_CLONE_NEWUSER = 0x10000000
_MS_NOSUID, _MS_NODEV, _MS_REC, _MS_PRIVATE = 0x2, 0x4, 0x4000, 0x40000  # <linux/mount.h>
_CAP_VERSION_3 = 0x20080522  # <linux/capability.h>
_UNSAFE_IN_OPTIONS = (",", ":", "\\", "\n")  # overlay's option string cannot carry these in a path
PROBE_NAME = ".figproof-probe"  # the whiteout the parent's probe puts in the upper layer


class ViewError(OSError):
    """The overlay could not be set up in the child."""


def overlay_options(lower: Path, upper: Path, work: Path, *, userns: bool) -> str | None:
    """The overlay mount's option string; None when a path holds a character the option syntax cannot carry."""
    paths = [str(lower), str(upper), str(work)]
    if any(ch in p for p in paths for ch in _UNSAFE_IN_OPTIONS):
        return None
    options = f"lowerdir={paths[0]},upperdir={paths[1]},workdir={paths[2]}"
    # in a user namespace overlayfs keeps its bookkeeping in user.* extended attributes (trusted.* needs root)
    return options + (",userxattr" if userns else "")


def _libc() -> ctypes.CDLL:
    return ctypes.CDLL(None, use_errno=True)


def _check(result: int, what: str) -> None:
    if result != 0:
        code = ctypes.get_errno()
        raise ViewError(code, f"{what}: {os.strerror(code)}")


def enter_overlay(lower: str, upper: str, work: str, merged: str) -> None:
    """In the child, before any user code: a private mount namespace with the overlay mounted on ``merged``.

    Must run while the process has a single thread (``unshare`` of a user namespace requires it).  Raises
    :class:`ViewError` when the kernel refuses a step.
    """
    libc = _libc()
    userns = os.geteuid() != 0
    uid, gid = os.getuid(), os.getgid()
    _check(libc.unshare(_CLONE_NEWNS | (_CLONE_NEWUSER if userns else 0)), "unshare")
    if userns:
        # the same ids inside as outside, so files keep their owner and the script sees its own uid
        for name, text in (("setgroups", "deny"), ("uid_map", f"{uid} {uid} 1"), ("gid_map", f"{gid} {gid} 1")):
            with open(f"/proc/self/{name}", "w", encoding="ascii") as fh:
                fh.write(text)
    # nothing mounted here may reach the parent's namespace (a shared / would propagate it)
    _check(libc.mount(b"none", b"/", None, _MS_REC | _MS_PRIVATE, None), "making mounts private")
    options = overlay_options(Path(lower), Path(upper), Path(work), userns=userns)
    if options is None:
        raise ViewError(errno.EINVAL, "a sandbox path cannot be written in the overlay's options")
    _check(libc.mount(b"overlay", os.fsencode(merged), b"overlay", _MS_NOSUID | _MS_NODEV, options.encode()),
           "mounting the overlay")
    if userns:
        _drop_capabilities(libc)


def _drop_capabilities(libc: ctypes.CDLL) -> None:
    """Give up the capabilities the new user namespace granted: the script needs none of them."""
    header = (ctypes.c_uint32 * 2)(_CAP_VERSION_3, 0)
    data = (ctypes.c_uint32 * 6)()  # effective, permitted, inheritable for two 32-bit words: all zero
    _check(libc.capset(header, data), "dropping capabilities")


def _probe_main(argv: list[str]) -> int:
    """``python -m figproof.child.view LOWER UPPER WORK MERGED``: mount, look, report by exit status."""
    lower, upper, work, merged = argv
    try:
        enter_overlay(lower, upper, work, merged)
        seen = set(os.listdir(merged))
    except OSError as exc:
        print(f"overlay refused: {exc}", file=sys.stderr)
        return 1
    if PROBE_NAME in seen or not seen >= set(os.listdir(lower)) - {PROBE_NAME}:
        print("overlay mounted but does not show the repo", file=sys.stderr)
        return 1
    return 0



if __name__ == "__main__":
    sys.exit(_probe_main(sys.argv[1:]))

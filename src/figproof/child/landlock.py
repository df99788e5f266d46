"""Inside the child, before any user code: kernel write confinement with Landlock (Linux 5.13 and later).

Three system calls, as the kernel's Landlock userspace API documents them (Documentation/userspace-api/
landlock.rst and <linux/landlock.h>): ``landlock_create_ruleset`` makes a ruleset that *handles* the write
rights (each handled right is denied unless a rule allows it), ``landlock_add_rule`` allows them beneath a
few folders, and ``landlock_restrict_self`` enforces the ruleset on this process and everything it starts
(the restriction can never be lifted).  Reads stay allowed everywhere.  From ABI 4 the ruleset can also
handle TCP bind and connect; with no rule allowing any port, the network is off for the script's native
code and its subprocesses too.

What Landlock does not cover (the Python hooks and the parent's working-tree guard do): chmod, chown,
setxattr and utime are not restricted by any ABI so far; ABI 1 refuses every rename or link across folders
(there is no REFER right to allow it), and truncation of an existing file is handled from ABI 3.  Device
ioctls (ABI 5's IOCTL_DEV) are left alone on purpose: they change no file, and GPU drivers need them.
"""

from __future__ import annotations

import ctypes
import os
import platform
import sys
from collections.abc import Sequence
from dataclasses import dataclass

# system call numbers: the same on x86_64 and aarch64 (<asm/unistd.h>, <asm-generic/unistd.h>)
_SYSCALLS = {"x86_64": (444, 445, 446), "aarch64": (444, 445, 446), "arm64": (444, 445, 446)}
_CREATE_RULESET_VERSION = 1 << 0
_RULE_PATH_BENEATH = 1
_PR_SET_NO_NEW_PRIVS = 38  # <linux/prctl.h>
_O_PATH = getattr(os, "O_PATH", 0o10000000)

# filesystem rights, <linux/landlock.h> (bit, first ABI that knows it)
FS_WRITE_FILE = 1 << 1
FS_REMOVE_DIR = 1 << 4
FS_REMOVE_FILE = 1 << 5
FS_MAKE_CHAR = 1 << 6
FS_MAKE_DIR = 1 << 7
FS_MAKE_REG = 1 << 8
FS_MAKE_SOCK = 1 << 9
FS_MAKE_FIFO = 1 << 10
FS_MAKE_BLOCK = 1 << 11
FS_MAKE_SYM = 1 << 12
FS_REFER = 1 << 13  # ABI 2
FS_TRUNCATE = 1 << 14  # ABI 3
FS_IOCTL_DEV = 1 << 15  # ABI 5
NET_BIND_TCP = 1 << 0  # ABI 4
NET_CONNECT_TCP = 1 << 1  # ABI 4

_FILE_RIGHTS = FS_WRITE_FILE | FS_TRUNCATE | FS_IOCTL_DEV  # the only rights a rule on a file (not a folder) may hold


class _RulesetAttr(ctypes.Structure):
    _fields_ = [("handled_access_fs", ctypes.c_uint64), ("handled_access_net", ctypes.c_uint64)]


class _PathBeneathAttr(ctypes.Structure):
    _pack_ = 1  # __attribute__((packed)) in <linux/landlock.h>
    _fields_ = [("allowed_access", ctypes.c_uint64), ("parent_fd", ctypes.c_int32)]


@dataclass(frozen=True, slots=True)
class Outcome:
    """What the kernel layer put in force: ABI version (0 = none), whether writes and TCP are confined, a note."""

    abi: int = 0
    writes: bool = False
    network: bool = False
    note: str = ""


def write_rights(abi: int) -> int:
    """The write rights a ruleset of Landlock ABI ``abi`` handles."""
    rights = (FS_WRITE_FILE | FS_REMOVE_DIR | FS_REMOVE_FILE | FS_MAKE_CHAR | FS_MAKE_DIR | FS_MAKE_REG
              | FS_MAKE_SOCK | FS_MAKE_FIFO | FS_MAKE_BLOCK | FS_MAKE_SYM)
    if abi >= 2:
        rights |= FS_REFER
    if abi >= 3:
        rights |= FS_TRUNCATE
    # FS_IOCTL_DEV (ABI 5) is left unhandled: it guards devices, not files, and handling it would refuse the
    # ioctls GPU and other device drivers need
    return rights


def _libc() -> ctypes.CDLL:
    return ctypes.CDLL(None, use_errno=True)


def _numbers() -> tuple[int, int, int] | None:
    if not sys.platform.startswith("linux"):
        return None
    return _SYSCALLS.get(platform.machine().lower())


def abi_version() -> int:
    """The Landlock ABI the running kernel offers; 0 when it has none (not Linux, too old, or disabled)."""
    numbers = _numbers()
    if numbers is None:
        return 0
    libc = _libc()
    libc.syscall.restype = ctypes.c_long
    version = libc.syscall(ctypes.c_long(numbers[0]), None, ctypes.c_size_t(0),
                           ctypes.c_uint32(_CREATE_RULESET_VERSION))
    return int(version) if version > 0 else 0


def confine(writable: Sequence[str], devices: Sequence[str], *, block_tcp: bool) -> Outcome:
    """Allow writing only beneath ``writable`` (folders) and to ``devices`` (files) for the rest of this
    process's life; with ``block_tcp`` (ABI 4 and later) refuse every TCP bind and connect.

    Must run while the process has one thread: Landlock restricts the calling thread and what it starts.
    Returns what was put in force; never raises (the Python layer stays, and the note says why).
    """
    numbers = _numbers()
    if numbers is None:
        return Outcome(note="kernel write confinement needs Linux (Landlock)")
    abi = abi_version()
    if abi == 0:
        return Outcome(note="kernel write confinement is not available here (Landlock absent or disabled)")
    libc = _libc()
    libc.syscall.restype = ctypes.c_long
    create, add_rule, restrict = numbers
    handled = write_rights(abi)
    attr = _RulesetAttr(handled_access_fs=handled, handled_access_net=(
        NET_BIND_TCP | NET_CONNECT_TCP if block_tcp and abi >= 4 else 0))
    size = ctypes.sizeof(_RulesetAttr) if abi >= 4 else ctypes.sizeof(ctypes.c_uint64)
    ruleset = libc.syscall(ctypes.c_long(create), ctypes.byref(attr), ctypes.c_size_t(size), ctypes.c_uint32(0))
    if ruleset < 0:
        return Outcome(abi=abi, note=f"Landlock refused a ruleset: {os.strerror(ctypes.get_errno())}")
    try:
        for path, rights in [*((p, handled) for p in writable), *((d, handled & _FILE_RIGHTS) for d in devices)]:
            _allow(libc, add_rule, int(ruleset), path, rights)
        if libc.prctl(_PR_SET_NO_NEW_PRIVS, 1, 0, 0, 0) != 0:
            return Outcome(abi=abi, note=f"no_new_privs refused: {os.strerror(ctypes.get_errno())}")
        if libc.syscall(ctypes.c_long(restrict), ctypes.c_int(int(ruleset)), ctypes.c_uint32(0)) != 0:
            return Outcome(abi=abi, note=f"Landlock refused to restrict: {os.strerror(ctypes.get_errno())}")
    finally:
        os.close(int(ruleset))
    return Outcome(abi=abi, writes=True, network=bool(attr.handled_access_net))


def _allow(libc: ctypes.CDLL, add_rule: int, ruleset: int, path: str, rights: int) -> None:
    """Allow ``rights`` beneath ``path``; a path that is missing here is skipped (nothing to write there)."""
    try:
        fd = os.open(path, _O_PATH | os.O_CLOEXEC)
    except OSError:
        return
    try:
        if not os.path.isdir(path):
            rights &= _FILE_RIGHTS
        rule = _PathBeneathAttr(allowed_access=rights, parent_fd=fd)
        libc.syscall(ctypes.c_long(add_rule), ctypes.c_int(ruleset), ctypes.c_int(_RULE_PATH_BENEATH),
                     ctypes.byref(rule), ctypes.c_uint32(0))
    finally:
        os.close(fd)

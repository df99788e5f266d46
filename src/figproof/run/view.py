"""A script's view of the repo without copying it (parent side; the child mounts it, see
:mod:`figproof.child.view`): an overlay of the read-only repo, or copy-on-write clones.

Three methods, tried in this order for each check (:func:`choose_method`):

``overlay`` (Linux, where the kernel lets an unprivileged user mount overlayfs in a user namespace, 5.11+)
    The child starts in a new user and mount namespace and mounts an overlay on an empty folder: the repo is the
    read-only lower layer, a fresh folder of the sandbox the writable upper layer.  Whatever the script writes,
    renames or deletes lands in the upper layer (a deleted file becomes a "whiteout" there); the overlay never
    writes to the lower layer, so the user's files are untouched and nothing is copied until the script writes
    it.  The mount exists only in the child's namespace and goes when its last process ends; the parent reads
    the files the script wrote from the upper layer and deletes it.  Folders a copy would leave out (``.git``,
    virtual environments, caches, the report folder) are hidden by whiteouts made in the upper layer before the
    mount.  When run as root the child makes only a mount namespace (no user namespace), so files of other
    owners stay readable as they are to root.
``reflink``
    The repo is copied file by file with ``FICLONE`` (btrfs, XFS, bcachefs, ...): each copy shares its blocks
    with the repo's file until one of them is written, so a large data file costs no room per job.
``copy``
    A full copy (the fallback everywhere else).

The sandbox records the method; the child tags its run with it (``repo-overlay``, ``repo-reflink``,
``repo-copy``) and the report says which was used.  ``FIGPROOF_REPO_VIEW=copy`` (or ``reflink``, ``overlay``)
forces one method, for benchmarks and for a file system where the overlay misbehaves.
"""

from __future__ import annotations

import errno
import os
import shutil
import stat
import subprocess
import sys
from collections.abc import Callable, Sequence
from pathlib import Path

METHODS = ("overlay", "reflink", "copy")
FICLONE = 0x40049409  # _IOW(0x94, 9, int) in <linux/fs.h>
PROBE_TIMEOUT = 20.0


def hidden_entries(root: Path, ignore: Callable[[str, list[str]], set[str]]) -> list[str]:
    """Repo-relative POSIX paths a copy would leave out (``ignore`` is the copy's ignore function)."""
    out: list[str] = []
    pending = [""]
    while pending:
        rel = pending.pop()
        folder = root / rel if rel else root
        try:
            names = sorted(os.listdir(folder))
        except OSError:
            continue
        left_out = ignore(str(folder), names)
        for name in names:
            path = f"{rel}/{name}" if rel else name
            if name in left_out:
                out.append(path)
            elif (folder / name).is_dir() and not (folder / name).is_symlink():
                pending.append(path)
    return sorted(out)


def make_upper(root: Path, upper: Path, hidden: Sequence[str]) -> None:
    """Fill an empty upper layer with whiteouts for ``hidden`` (so the view lacks them as a copy would).

    Folders made on the way take the repo folder's permissions and times, so the view shows the repo's.
    """
    made: list[str] = []
    for path in hidden:
        parts = path.split("/")
        for i in range(1, len(parts)):
            folder = "/".join(parts[:i])
            if not (upper / folder).is_dir():
                (upper / folder).mkdir()
                made.append(folder)
        # a whiteout is a character device with number 0/0 (unprivileged since Linux 5.8)
        os.mknod(upper / path, stat.S_IFCHR, os.makedev(0, 0))
    for folder in ["", *made][::-1]:  # deepest first: making entries changes the parent's times
        src = os.stat(root / folder if folder else root)
        target = upper / folder if folder else upper
        os.chmod(target, stat.S_IMODE(src.st_mode))
        os.utime(target, ns=(src.st_atime_ns, src.st_mtime_ns))


def probe_overlay(root: Path, scratch: Path, python: str | None = None) -> str:
    """Try the overlay once, as a child would (in a short-lived process); return "" when it works, else why not.

    ``scratch`` is an empty folder on the temp file system; it is left empty again.
    """
    if not sys.platform.startswith("linux"):
        return "overlays need Linux"
    upper, work, merged = scratch / "upper", scratch / "work", scratch / "merged"
    try:
        for p in (upper, work, merged):
            p.mkdir()
        os.mknod(upper / ".figproof-probe", stat.S_IFCHR, os.makedev(0, 0))
        src = str(Path(__file__).resolve().parent.parent)
        env = dict(os.environ, PYTHONPATH=src + (os.pathsep + os.environ["PYTHONPATH"]
                                                  if os.environ.get("PYTHONPATH") else ""))
        done = subprocess.run([python or sys.executable, "-m", "figproof.child.view", str(root), str(upper), str(work),
                               str(merged)], stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                              stderr=subprocess.PIPE, env=env, timeout=PROBE_TIMEOUT, check=False)
        if done.returncode != 0:
            lines = done.stderr.decode("utf-8", "replace").strip().splitlines()
            return lines[-1] if lines else f"the probe ended with status {done.returncode}"
        return ""
    except (OSError, subprocess.SubprocessError) as exc:
        return f"{type(exc).__name__}: {exc}"
    finally:
        from figproof.run.scratch import remove_tree

        for p in (upper, work, merged):
            remove_tree(p)


class Cloner:
    """A ``copy_function`` for :func:`shutil.copytree` that clones files (``FICLONE``) where the file system
    can, and copies them otherwise; counts both, and stops trying after the first refusal."""

    def __init__(self, try_clone: bool = True) -> None:
        self.try_clone = try_clone and sys.platform.startswith("linux")
        self.cloned = 0
        self.copied = 0

    def __call__(self, src: str, dst: str) -> str:
        if self.try_clone and not os.path.islink(src) and self._clone(src, dst):
            self.cloned += 1
            return dst
        shutil.copy2(src, dst, follow_symlinks=False)
        self.copied += 1
        return dst

    def _clone(self, src: str, dst: str) -> bool:
        import fcntl

        try:
            with open(src, "rb") as fin:
                if not stat.S_ISREG(os.fstat(fin.fileno()).st_mode):
                    return False
                with open(dst, "xb") as fout:
                    try:
                        fcntl.ioctl(fout.fileno(), FICLONE, fin.fileno())
                    except OSError as exc:
                        if exc.errno in (errno.ENOSPC, errno.EDQUOT):
                            raise
                        self.try_clone = False  # EXDEV, EOPNOTSUPP, EINVAL: this file system pair cannot
                        fout.close()
                        os.unlink(dst)
                        return False
        except FileExistsError:
            return False
        shutil.copystat(src, dst, follow_symlinks=False)
        return True


"""Sandbox copies of the repo, reused from one script to the next after a check that nothing changed.

Every script runs on a view of the repo, never on the user's files: where the platform allows an overlay or
clones (see the end of this docstring), else a copy (:func:`copy_repo`).
Copying the whole repo for every script costs more than many figure scripts take to run, so a
:class:`SandboxPool` keeps the copies: when a script has ended (and its process group has been killed), the
copy is compared with a snapshot taken when it was made — every entry's type, inode, size, permissions,
modification and status-change times (``lstat``) — and whatever the script added, changed or removed is put
back from the repo.  Only then is the copy handed to the next script.

Why the snapshot cannot miss a change: the status-change time (``st_ctime``) is set by the kernel on every
write, rename, chmod or ``utime`` and no unprivileged call can set it back.  A change made within the same
clock tick as the snapshot could still carry the same time stamp, so a copy is handed out only once the
file-system clock (``CLOCK_REALTIME_COARSE`` on Linux) has moved past the newest time stamp in its
snapshot.  The pool keeps up to two copies per parallel job, so one copy's clock tick passes while the
other is in use.  On a file system whose time stamps are whole milliseconds or coarser (FAT, some network
file systems) that guarantee does not hold, and every copy is used once and deleted.

A restore that fails for any reason (a permission the script removed, a repo file that disappeared meanwhile)
deletes the copy; the next script gets a fresh one.  Processes that escaped the script's process group (see
docs/safety.md) could still change a copy after the check; like the rest of the isolation this is best
effort, not a security boundary.

Where the platform allows, a pool gives each script a view of the repo instead of a copy (see
:mod:`figproof.run.view`): an overlay whose upper layer is thrown away after each script, or copy-on-write clones.
Every sandbox folder is made by :func:`figproof.run.scratch.make_scratch`, so one left by a killed check is swept
by the next.  A full temp folder raises :class:`figproof.run.resources.EnvironmentProblem` naming the folder, the
repo's size and the free space: never a failure of the script.
"""

from __future__ import annotations

import os
import shutil
import stat
import sys
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from figproof.run.resources import EnvironmentProblem, describe_os_error, free_space, human_size, is_environment_error
from figproof.run.scratch import MARKER, make_scratch, remove_tree
from figproof.run.view import Cloner, hidden_entries, make_upper, probe_overlay

COPY_IGNORE = (".git", ".hg", ".svn", ".venv", "venv", "__pycache__", "node_modules", ".figproof-cache",
               ".pytest_cache", ".mypy_cache", ".ipynb_checkpoints", ".tox", ".nox", "*.egg-info")
_COARSE_CLOCK = 5  # CLOCK_REALTIME_COARSE in <linux/time.h>: the clock Linux stamps files with
FINE_STAMPS_NS = 1_000_000  # time stamps all multiples of this (1 ms) mean a coarse file system: no reuse

Stamp = tuple[int, int, int, int, int, int]  # file type, inode, size, mode, mtime_ns, ctime_ns
Snapshot = dict[str, Stamp]  # repo-relative POSIX path -> stamp


def copy_repo(root: Path, dest: Path, skip: Sequence[str] = (), *, top: Path | None = None,
              copier: Callable[[str, str], object] = shutil.copy2) -> None:
    """Copy the repo (or one folder of it, with ``top`` the repo) to ``dest`` without VCS folders, virtual
    environments, caches and the repo-relative folders in ``skip``; ``copier`` copies one file."""
    shutil.copytree(root, dest, ignore=copy_ignore(root, skip, top=top), symlinks=True, copy_function=copier)


def copy_ignore(root: Path, skip: Sequence[str] = (), *, top: Path | None = None
                ) -> Callable[[str, list[str]], set[str]]:
    """The ignore function of :func:`copy_repo` (names in a folder a copy leaves out)."""
    skipped = {((top or root) / s).resolve() for s in skip}

    def ignore(folder: str, names: list[str]) -> set[str]:
        base = Path(folder)
        out = set(shutil.ignore_patterns(*COPY_IGNORE)(folder, names))
        for n in names:
            p = base / n
            if p.resolve() in skipped or (p.is_dir() and (p / "pyvenv.cfg").exists()):
                out.add(n)
        return out

    return ignore


def repo_size(root: Path, skip: Sequence[str] = ()) -> int:
    """Bytes a full copy of the repo takes (regular files only, as :func:`copy_repo` copies them)."""
    ignore = copy_ignore(root, skip)
    total = 0
    pending = [root]
    while pending:
        folder = pending.pop()
        try:
            names = os.listdir(folder)
        except OSError:
            continue
        left_out = ignore(str(folder), names)
        for name in names:
            if name in left_out:
                continue
            try:
                st = os.lstat(folder / name)
            except OSError:
                continue
            if stat.S_ISDIR(st.st_mode):
                pending.append(folder / name)
            elif stat.S_ISREG(st.st_mode):
                total += st.st_size
    return total


def _now_ns() -> int:
    """The clock file time stamps come from (coarse on Linux), in nanoseconds."""
    if sys.platform.startswith("linux"):
        try:
            return time.clock_gettime_ns(_COARSE_CLOCK)
        except OSError:
            pass
    return time.time_ns()


def scan(top: Path) -> Snapshot:
    """``lstat`` every entry under ``top`` (symbolic links are not followed)."""
    out: Snapshot = {}
    pending = [""]
    while pending:
        rel = pending.pop()
        with os.scandir(os.path.join(top, rel) if rel else top) as entries:
            for entry in entries:
                path = f"{rel}/{entry.name}" if rel else entry.name
                st = entry.stat(follow_symlinks=False)
                out[path] = (stat.S_IFMT(st.st_mode), st.st_ino, st.st_size, st.st_mode, st.st_mtime_ns,
                             st.st_ctime_ns)
                if stat.S_ISDIR(st.st_mode):
                    pending.append(path)
    return out


def _is_dir(stamp: Stamp) -> bool:
    return stat.S_ISDIR(stamp[0])


def _covered(path: str, done: set[str]) -> bool:
    """Whether ``path`` lies inside a folder already handled as a whole."""
    parts = path.split("/")
    return any("/".join(parts[:i]) in done for i in range(1, len(parts)))


def restore(copy: Path, source: Path, snapshot: Snapshot, skip: Sequence[str] = (), *,
            copier: Callable[[str, str], object] = shutil.copy2) -> Snapshot:
    """Make ``copy`` match ``snapshot`` again, copying changed or missing entries from the repo ``source``.

    ``skip`` are the repo-relative folders the copy was made without (see :func:`copy_repo`); ``copier`` copies
    one file (a clone where the file system can).  Returns the new snapshot (entries put back have new inodes
    and times).  Raises OSError when the copy
    cannot be restored; the caller then throws it away.
    """
    now = scan(copy)
    if now == snapshot:
        return snapshot
    handled: set[str] = set()  # folders removed or re-copied whole
    for path in sorted(now):  # parents sort before their contents
        if handled and _covered(path, handled):
            continue
        old, new = snapshot.get(path), now[path]
        if old is not None and old == new:
            continue
        target = copy / path
        if old is not None and _is_dir(old) and _is_dir(new) and old[1] == new[1]:
            # the same folder: its own times change with its entries, which are checked one by one
            if old[3] != new[3]:
                os.chmod(target, stat.S_IMODE(old[3]))
            continue
        _remove(target, new)
        if old is not None:
            _put_back(source, path, target, old, skip, copier)
        if _is_dir(new) or (old is not None and _is_dir(old)):
            handled.add(path)
    for path in sorted(snapshot):
        if path not in now and not (handled and _covered(path, handled)):
            _put_back(source, path, copy / path, snapshot[path], skip, copier)
            if _is_dir(snapshot[path]):
                handled.add(path)
    after = scan(copy)
    if after.keys() != snapshot.keys():
        raise OSError("the sandbox copy could not be restored (the repo changed while it was checked)")
    return after


def _remove(target: Path, stamp: Stamp) -> None:
    if _is_dir(stamp):
        remove_tree(target)
    else:
        try:
            target.unlink()
        except PermissionError:
            os.chmod(target.parent, 0o700)
            target.unlink()


def _put_back(root: Path, path: str, dest: Path, stamp: Stamp, skip: Sequence[str],
              copier: Callable[[str, str], object] = shutil.copy2) -> None:
    src = root / path
    if _is_dir(stamp):
        copy_repo(src, dest, skip, top=root, copier=copier)
    elif stat.S_ISLNK(stamp[0]):
        os.symlink(os.readlink(src), dest)
    else:
        copier(str(src), str(dest))


@dataclass(eq=False)
class Sandbox:
    """One private folder: the repo copy (``repo``) and room beside it for per-run scratch files."""

    base: Path
    snapshot: Snapshot = field(default_factory=dict)
    fence: int = 0  # newest time stamp in the snapshot; hand out only when the clock has passed it
    method: str = "copy"  # how ``repo`` shows the repo: copy | reflink | overlay (see figproof.run.view)
    lower: Path | None = None  # overlay: the repo, read-only

    @property
    def repo(self) -> Path:
        """Where the script sees the repo (for an overlay: the mount point, empty outside the child)."""
        return self.base / "repo"

    @property
    def upper(self) -> Path:
        """The overlay's writable layer: what the script wrote, as the parent sees it."""
        return self.base / "upper"

    @property
    def outputs(self) -> Path:
        """Where the parent reads files the script wrote into the repo."""
        return self.upper if self.method == "overlay" else self.repo

    @property
    def launch_folder(self) -> Path:
        """A folder the child can start in (an overlay's folders exist only once the child has mounted it)."""
        return self.base if self.method == "overlay" else self.repo

    def view_spec(self) -> dict[str, str]:
        """What the child needs to set up its view of the repo (the ``view`` of its spec)."""
        if self.method != "overlay" or self.lower is None:
            return {"method": self.method}
        return {"method": "overlay", "lower": str(self.lower), "upper": str(self.upper),
                "work": str(self.base / "work"), "merged": str(self.repo)}


class SandboxPool:
    """Views of one repo for the scripts of one check; thread-safe; a context manager (deletes them).

    ``acquire`` returns a sandbox that matches the repo; ``release`` puts it back (restored) or deletes it.
    ``skip`` are repo-relative folders left out of the views; ``reuse=False`` makes a new copy every time.
    ``method`` is ``copy``, ``reflink``, ``overlay``, or ``auto`` (the first of those the platform allows,
    decided on the first ``acquire``; :attr:`method` then tells which).
    """

    def __init__(self, root: Path, skip: Sequence[str] = (), *, jobs: int = 1, reuse: bool = True,
                 method: str = "copy", python: str | None = None) -> None:
        if method not in ("auto", "copy", "reflink", "overlay"):
            raise ValueError(f"unknown repo view method {method!r}")
        self.root = root
        self.skip = tuple(skip)
        self.method = method
        self.jobs = max(1, jobs)
        self._limit = 2 * self.jobs
        self._reuse = reuse
        self._python = python
        self._lock = threading.Lock()
        self._method_lock = threading.Lock()
        self._idle: list[Sandbox] = []
        self._count = 0
        self._hidden: list[str] | None = None  # overlay: repo paths a copy would leave out
        self._size: int | None = None  # bytes of a full copy (computed when needed)
        self.made = 0  # sandboxes made, for benchmarks and tests
        self.restored = 0  # entries put back after scripts changed them
        self.why_not_overlay = ""  # with method auto: why the overlay was not used

    def acquire(self) -> Sandbox:
        """A sandbox no script has changed (made now, or restored after its last use)."""
        self.decide()
        with self._lock:
            box = self._pick()
        if box is None:
            box = self._new()
        wait = box.fence - _now_ns()
        while wait >= 0:  # at most one tick of the file-system clock
            time.sleep(wait / 1e9 + 1e-4)
            wait = box.fence - _now_ns()
        return box

    def decide(self) -> None:
        """Resolve ``auto`` (once; thread-safe): the overlay when a probe mount works, else clones or copies.

        Called by the first ``acquire``; calling it earlier (in a thread while the runner starts) hides the
        probe's cost.  Failures to make the probe's folder are left for ``acquire`` to report.
        """
        with self._method_lock:
            if self.method != "auto":
                return
            try:
                probe = make_scratch()
            except EnvironmentProblem:
                return
            try:
                self.why_not_overlay = probe_overlay(self.root.resolve(), probe, self._python)
            finally:
                remove_tree(probe)
            self.method = "overlay" if not self.why_not_overlay else "reflink"

    def _pick(self) -> Sandbox | None:
        if not self._idle:
            self._count += 1
            return None
        now = _now_ns()
        ready = [b for b in self._idle if b.fence < now]
        if not ready and self._count < self._limit:
            self._count += 1
            return None  # a new copy rather than waiting for a clock tick
        box = min(ready or self._idle, key=lambda b: b.fence)
        self._idle.remove(box)
        return box

    def _new(self) -> Sandbox:
        try:
            base = make_scratch()
        except EnvironmentProblem:
            with self._lock:
                self._count -= 1
            raise
        box = Sandbox(base=base, method=self.method)
        try:
            if box.method == "overlay":
                self._new_overlay(box)
            else:
                self._new_copy(box)
        except BaseException as exc:
            remove_tree(base)
            with self._lock:
                self._count -= 1
            if isinstance(exc, Exception) and is_environment_error(exc):
                raise self._no_room(exc) from None
            raise
        with self._lock:
            self.made += 1
        box.fence = _fence(box.snapshot)
        return box

    def _new_overlay(self, box: Sandbox) -> None:
        if self._hidden is None:
            self._hidden = hidden_entries(self.root, copy_ignore(self.root, self.skip))
        for name in ("repo", "upper", "work"):
            (box.base / name).mkdir()
        make_upper(self.root, box.upper, self._hidden)
        box.lower = self.root.resolve()

    def _new_copy(self, box: Sandbox) -> None:
        if box.method == "copy":
            needed = self._repo_size()
            free = free_space(box.base)
            if free is not None and needed > free:
                raise EnvironmentProblem(self._room_message(box.base.parent, needed, free))
        cloner = Cloner(try_clone=box.method == "reflink")
        copy_repo(self.root, box.repo, self.skip, copier=cloner)
        if box.method == "reflink" and cloner.copied and not cloner.cloned:
            # the temp folder's file system cannot clone the repo's files: plain copies from now on
            with self._method_lock:
                self.method = "copy"
            box.method = "copy"
        box.snapshot = scan(box.repo) if self._reuse else {}

    def _repo_size(self) -> int:
        if self._size is None:
            self._size = repo_size(self.root, self.skip)
        return self._size

    def _room_message(self, temp: Path, needed: int, free: int) -> str:
        return (f"no space left in the temp folder {temp} for a copy of the repo {self.root.name}: "
                f"{human_size(needed)} needed per job ({self.jobs} job{'s' * (self.jobs != 1)}), "
                f"{human_size(free)} free; free some space, use --jobs 1, or point TMPDIR at a larger disk")

    def _no_room(self, exc: BaseException) -> EnvironmentProblem:
        """The one-line error for a sandbox that could not be made (``exc`` came from the machine)."""
        if isinstance(exc, EnvironmentProblem):
            return exc
        folder = self.base_folder()
        text = describe_os_error(exc, folder, "make a sandbox of the repo")
        if "no space" in text:
            free = free_space(folder) or 0
            text = self._room_message(folder, self._repo_size(), free)
        return EnvironmentProblem(text)

    def base_folder(self) -> Path:
        """The folder sandboxes are made in."""
        from figproof.run.scratch import temp_root

        return temp_root()

    def release(self, box: Sandbox) -> None:
        """Restore ``box`` for the next script, or delete it when that is not possible."""
        keep = self._reuse and box.method != "overlay" and not _coarse_stamps(box.snapshot)
        if keep:
            try:
                before = box.snapshot
                box.snapshot = restore(box.repo, self.root, before, self.skip,
                                       copier=Cloner(try_clone=box.method == "reflink"))
                changed = sum(1 for p, s in box.snapshot.items() if before.get(p) != s)
                box.fence = max(box.fence, _fence(box.snapshot))
                with self._lock:
                    self.restored += changed
            except OSError:
                keep = False
        _clear_scratch(box)
        with self._lock:
            if keep:
                self._idle.append(box)
                return
            self._count -= 1
        remove_tree(box.base)

    def close(self) -> None:
        """Delete every idle sandbox (sandboxes still in use are deleted when released after this)."""
        with self._lock:
            idle, self._idle = self._idle, []
            self._reuse = False
            self._count -= len(idle)
        for box in idle:
            remove_tree(box.base)

    def __enter__(self) -> SandboxPool:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _fence(snapshot: Snapshot) -> int:
    return max((s[5] for s in snapshot.values()), default=0)


def _coarse_stamps(snapshot: Snapshot) -> bool:
    """Whether the file system keeps only whole milliseconds (or worse): reuse is not safe there."""
    return bool(snapshot) and all(s[5] % FINE_STAMPS_NS == 0 for s in snapshot.values())


def _clear_scratch(box: Sandbox) -> None:
    """Remove the per-run files beside the copy (spec, matplotlib config folder)."""
    try:
        names = [n for n in os.listdir(box.base) if n not in ("repo", MARKER)]
    except OSError:
        return
    for name in names:
        path = box.base / name
        if path.is_dir() and not path.is_symlink():
            remove_tree(path)
        else:
            try:
                path.unlink()
            except OSError:
                pass

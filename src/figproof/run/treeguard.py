"""The parent's working-tree guard: did anything change the user's repo while the scripts ran?

Before the first script and after the last, every file, folder and symbolic link of the repo is ``lstat``-ed
(links are not followed).  Any write changes a file's ctime, which no unprivileged process can set back, so
comparing type, inode, size, permissions, mtime and ctime catches every change, including ones made by
native code or a subprocess that the child's layers did not see.  Where only the time stamps differ, the
file is hashed and compared with what git has committed for it, so the report can say whether its content
changed.  ``.git/objects`` is skipped (git adds objects without changing what is checked out); ``.git`` refs,
``HEAD`` and the index are watched.  figproof's own result cache is skipped: the parent writes it.
"""

from __future__ import annotations

import hashlib
import os
import stat
import subprocess
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from figproof.model.findings import TreeChange

Stamp = tuple[int, int, int, int, int, int]  # file type, inode, size, mode, mtime_ns, ctime_ns
_SKIP_ALWAYS = (".git/objects",)


@dataclass(frozen=True, slots=True)
class TreeSnapshot:
    root: Path
    stamps: dict[str, Stamp]


def snapshot(root: Path, skip: Sequence[str] = ()) -> TreeSnapshot:
    """``lstat`` every entry under ``root`` except the repo-relative folders in ``skip`` (and .git/objects)."""
    skipped = {s.strip("/") for s in (*_SKIP_ALWAYS, *skip) if s.strip("/")}
    # folders holding a skipped entry change their entry list when figproof writes it: their time stamps
    # are not compared (what else they hold still is)
    holders = {str(Path(s).parent) for s in skipped} | {str(p) for s in skipped for p in Path(s).parents}
    stamps: dict[str, Stamp] = {}
    pending = [""]
    while pending:
        rel = pending.pop()
        try:
            entries = list(os.scandir(os.path.join(root, rel) if rel else root))
        except OSError:
            continue  # an unreadable folder: its stamp is still compared
        for entry in entries:
            path = f"{rel}/{entry.name}" if rel else entry.name
            if path in skipped:
                continue
            try:
                st = entry.stat(follow_symlinks=False)
            except OSError:
                continue
            times = (0, 0) if path in holders else (st.st_mtime_ns, st.st_ctime_ns)
            stamps[path] = (stat.S_IFMT(st.st_mode), st.st_ino, 0 if path in holders else st.st_size,
                            stat.S_IMODE(st.st_mode), *times)
            if stat.S_ISDIR(st.st_mode):
                pending.append(path)
    return TreeSnapshot(root=root, stamps=stamps)


def compare(before: TreeSnapshot, after: TreeSnapshot) -> tuple[TreeChange, ...]:
    """What differs between two snapshots of the same repo, sorted by path."""
    out = []
    for path in sorted(set(before.stamps) | set(after.stamps)):
        old, new = before.stamps.get(path), after.stamps.get(path)
        if old == new:
            continue
        out.append(TreeChange(path=path, change=_describe(after.root, path, old, new)))
    return tuple(out)


def _kind(stamp: Stamp) -> str:
    return "folder" if stat.S_ISDIR(stamp[0]) else "link" if stat.S_ISLNK(stamp[0]) else "file"


def _describe(root: Path, path: str, old: Stamp | None, new: Stamp | None) -> str:
    if old is None:
        return f"{_kind(new)} added" if new is not None else "changed"
    if new is None:
        return f"{_kind(old)} removed"
    if old[0] != new[0]:
        return f"{_kind(old)} replaced by a {_kind(new)}"
    if old[1] != new[1]:
        return f"{_kind(old)} replaced"
    what = []
    if old[2] != new[2]:
        what.append(f"size {old[2]} → {new[2]} bytes")
    if old[3] != new[3]:
        what.append(f"permissions {old[3]:o} → {new[3]:o}")
    if old[4] != new[4] and stat.S_ISDIR(new[0]):
        what.append("entries added or removed")
    elif not what and stat.S_ISREG(new[0]):
        same = _as_committed(root, path)
        what.append("time stamps changed, content as committed" if same
                    else "content rewritten" if same is False else "content or time stamps changed")
    return ", ".join(what) or "time stamps changed"


def _as_committed(root: Path, path: str) -> bool | None:
    """Whether the file's bytes equal git's index entry for it; None when that cannot be told."""
    try:
        listed = subprocess.run(["git", "-C", str(root), "ls-files", "-s", "--", path], capture_output=True,
                                text=True, timeout=10, check=False).stdout.split()
        data = (root / path).read_bytes()
    except (OSError, subprocess.SubprocessError):
        return None
    if len(listed) < 2 or len(listed[1]) != 40:
        return None  # untracked, or a repo with SHA-256 object ids
    blob = hashlib.sha1(b"blob %d\0" % len(data) + data).hexdigest()  # git's object id of a file's bytes
    return blob == listed[1]

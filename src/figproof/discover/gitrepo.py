"""The few git facts figproof needs, read through the ``git`` command line.

Every helper answers ``None`` when git is missing, the folder is not inside a
work tree, or git refuses (e.g. "dubious ownership" in a container): callers
then treat the folder as a plain directory.
"""

from __future__ import annotations

import os
import subprocess
from pathlib import Path

# git on a huge repo can be slow, but a hung git must not hang a check.
_GIT_TIMEOUT = 120.0


def _git(cwd: Path, *args: str) -> bytes | None:
    try:
        done = subprocess.run(
            ["git", "-C", str(cwd), *args],
            stdin=subprocess.DEVNULL,
            capture_output=True,
            timeout=_GIT_TIMEOUT,
            check=False,
        )
    except (OSError, subprocess.SubprocessError):
        return None
    return done.stdout if done.returncode == 0 else None


def toplevel(path: Path) -> Path | None:
    """The top folder of the git work tree holding ``path``, or None.

    Parameters
    ----------
    path
        A file or folder; a file is looked up from its parent folder.
    """
    folder = path if path.is_dir() else path.parent
    out = _git(folder, "rev-parse", "--show-toplevel")
    if out is None:
        return None
    text = os.fsdecode(out).strip()
    return Path(text).resolve() if text else None


def tracked_files(root: Path) -> list[str] | None:
    """Files git tracks under ``root``, relative to it (POSIX), or None when not a git work tree.

    Index entries whose file is missing from the working tree, and submodules
    (which are folders), are left out: only files that a check can read count.
    """
    if toplevel(root) is None:
        return None
    # -z: NUL-separated and never quoted, so any file name survives.
    out = _git(root, "ls-files", "-z", "--cached")
    if out is None:
        return None
    names = [os.fsdecode(raw) for raw in out.split(b"\0") if raw]
    return sorted({n for n in names if (root / n).is_file()})


class GitError(Exception):
    """A git question that git could not answer; the message is one line."""


def changed_since(root: Path, ref: str) -> list[str]:
    """Files under ``root`` that differ from the git ``ref`` (committed, staged or not), plus untracked ones.

    Raises
    ------
    GitError
        When ``root`` is not a git work tree or git does not know ``ref``.
    """
    if toplevel(root) is None:
        raise GitError(f"{root}: --changed-since needs a git work tree")
    if _git(root, "rev-parse", "--verify", "--quiet", f"{ref}^{{commit}}") is None:
        raise GitError(f"unknown git ref {ref!r} (try a branch, a tag or a commit id)")
    diff = _git(root, "diff", "-z", "--name-only", "--relative", ref, "--") or b""
    untracked = _git(root, "ls-files", "-z", "--others", "--exclude-standard") or b""
    names = {os.fsdecode(raw) for raw in (diff + b"\0" + untracked).split(b"\0") if raw}
    return sorted(names)


def head_commit(root: Path) -> str | None:
    """The commit id of HEAD, or None outside a git work tree."""
    out = _git(root, "rev-parse", "HEAD")
    return os.fsdecode(out).strip() if out else None


def head_date(root: Path) -> str | None:
    """The committer date of HEAD (ISO 8601), or None outside a git work tree."""
    out = _git(root, "log", "-1", "--format=%cI")
    return os.fsdecode(out).strip() or None if out else None


__all__ = ["GitError", "changed_since", "head_commit", "head_date", "toplevel", "tracked_files"]

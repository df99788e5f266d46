"""figproof's temporary folders: each carries a marker naming the process that owns it, so what a killed check
left behind is found and removed by the next one.

A folder made by :func:`make_scratch` holds ``.figproof-owner``: the owner's process id, its start time and the
boot it ran in.  :func:`sweep_stale` removes a ``figproof-*`` folder of the temp folder only when its marker
names a process that is gone — a process id no longer in use, or in use by a later process (another start time),
or one from an earlier boot.  A folder without a readable marker is never touched, nor is one whose owner runs.

The start time comes from ``/proc/PID/stat`` (field 22, clock ticks since boot) on Linux.  Elsewhere no start
time is recorded and a live process id counts as the owner: a recycled process id then keeps a stale folder
until that process ends, which errs on the side of keeping.

The temp folder is ``$TMPDIR`` when that is set (and must then be a writable folder: figproof never falls back
to another disk behind the user's back, as :func:`tempfile.gettempdir` would), else Python's choice.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from collections.abc import Callable
from pathlib import Path

from figproof.run.resources import EnvironmentProblem, describe_os_error

MARKER = ".figproof-owner"
PREFIX = "figproof-"  # every folder figproof makes in the temp folder starts so (the demo's copy excepted)
_BOOT_ID = "/proc/sys/kernel/random/boot_id"


def temp_root() -> Path:
    """The temp folder figproof works in; raises EnvironmentProblem when ``$TMPDIR`` is not a writable folder."""
    named = os.environ.get("TMPDIR")
    if not named:
        return Path(tempfile.gettempdir())
    path = Path(named)
    if not path.is_dir():
        what = "does not exist" if not os.path.lexists(path) else "is not a folder"
        raise EnvironmentProblem(f"temp folder {path} (TMPDIR) {what}; create it or point TMPDIR at a folder "
                                 f"with room for the repo")
    if not os.access(path, os.W_OK | os.X_OK):
        raise EnvironmentProblem(f"temp folder {path} (TMPDIR) is not writable; point TMPDIR at a folder you "
                                 f"can write")
    return path


def process_start(pid: int) -> int | None:
    """When process ``pid`` started (clock ticks since boot, Linux); None when unknown or the process is gone."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            text = fh.read().decode("ascii", "replace")
    except OSError:
        return None
    # the command name (field 2) is in parentheses and may itself hold spaces or ')': split after the last one
    fields = text[text.rfind(")") + 2:].split()
    try:
        return int(fields[19])  # field 22 of the whole line is the 20th after the name
    except (IndexError, ValueError):
        return None


def _boot_id() -> str | None:
    try:
        with open(_BOOT_ID, encoding="ascii") as fh:
            return fh.read().strip() or None
    except OSError:
        return None


def owner_record(pid: int | None = None) -> dict[str, object]:
    """What the marker holds for process ``pid`` (this process by default)."""
    pid = os.getpid() if pid is None else pid
    return {"pid": pid, "start": process_start(pid), "boot": _boot_id()}


def make_scratch(prefix: str = PREFIX, parent: Path | None = None) -> Path:
    """Make a private temp folder carrying this process's owner marker.

    Raises EnvironmentProblem (one line naming the folder) when the temp folder is missing, full or not
    writable, or no file can be opened.
    """
    where = temp_root() if parent is None else parent
    try:
        path = Path(tempfile.mkdtemp(prefix=prefix, dir=where))
    except OSError as exc:
        raise EnvironmentProblem(describe_os_error(exc, where, "make a temporary folder")) from None
    try:
        (path / MARKER).write_text(json.dumps(owner_record()), encoding="utf-8")
    except OSError as exc:
        remove_tree(path)
        raise EnvironmentProblem(describe_os_error(exc, where, "make a temporary folder")) from None
    return path


def read_owner(folder: Path) -> dict[str, object] | None:
    """The owner recorded in ``folder``'s marker; None when it has none or it cannot be read."""
    try:
        data = json.loads((folder / MARKER).read_text(encoding="utf-8"))
    except (OSError, ValueError, UnicodeDecodeError):
        return None
    if not isinstance(data, dict) or not isinstance(data.get("pid"), int) or isinstance(data.get("pid"), bool):
        return None
    return data


def owner_alive(owner: dict[str, object]) -> bool:
    """Whether the process a marker names still runs (the same process, not a later one with its id)."""
    pid = owner["pid"]
    assert isinstance(pid, int)
    boot = _boot_id()
    if boot is not None and owner.get("boot") not in (None, boot):
        return False  # made before the last reboot
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass  # another user's process with that id: it exists
    except OSError:
        return True
    start = owner.get("start")
    if start is None:
        return True  # no start time recorded (not Linux): a live id counts as the owner
    now = process_start(pid)
    return now is None or now == start


def mine(folder: Path) -> bool:
    """Whether ``folder``'s marker names this very process."""
    owner = read_owner(folder)
    return owner is not None and owner.get("pid") == os.getpid() and owner.get("start") == process_start(
        os.getpid())


def sweep_stale(parent: Path | None = None, *, also_mine: bool = False) -> list[Path]:
    """Remove the ``figproof-*`` folders of the temp folder whose owner is gone; return them, sorted.

    With ``also_mine`` the folders this process owns go too (used after an interruption, when every one of them
    is left over).  Folders without a marker, of a live owner, symbolic links and other users' folders stay.
    """
    try:
        where = temp_root() if parent is None else parent
        entries = list(os.scandir(where))
    except (OSError, EnvironmentProblem):
        return []
    removed = []
    uid = os.getuid() if hasattr(os, "getuid") else None
    for entry in entries:
        if not entry.name.startswith(PREFIX):
            continue
        try:
            if not entry.is_dir(follow_symlinks=False):
                continue
            if uid is not None and entry.stat(follow_symlinks=False).st_uid != uid:
                continue
        except OSError:
            continue
        folder = Path(entry.path)
        owner = read_owner(folder)
        if owner is None:
            continue
        if owner_alive(owner) and not (also_mine and mine(folder)):
            continue
        remove_tree(folder)
        if not os.path.lexists(folder):
            removed.append(folder)
    return sorted(removed)


def remove_tree(path: Path) -> None:
    """Delete a folder even when a script took away permissions inside it; never raises."""
    def allow(func: Callable[..., object], name: str, _exc: object) -> None:
        try:
            os.chmod(os.path.dirname(name), 0o700)
            if os.path.isdir(name) and not os.path.islink(name):
                os.chmod(name, 0o700)
            if func in (os.rmdir, os.unlink, os.remove):
                func(name)
            else:
                # rmtree could not open or list a folder (gone already, or no permission): try it once more
                shutil.rmtree(name, ignore_errors=True)
        except OSError:
            pass

    if os.path.lexists(path):
        shutil.rmtree(path, onerror=allow)

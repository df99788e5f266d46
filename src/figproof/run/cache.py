"""Result cache: a script whose code, inputs, settings and environment are unchanged is not run again.

:class:`CachingRunner` wraps any :class:`~figproof.run.execute.Runner`.  For each
task it looks for an entry in the cache folder (``cache-dir`` in the config,
``.figproof-cache/`` by default; a ``.gitignore`` holding ``*`` is written when
figproof creates it).  An entry is used only when all of these still match:

- the SHA-256 of the script (or notebook);
- the SHA-256 of every repo file the cached run read, and of every repo module
  the script imports (found by reading its code, see :mod:`figproof.discover.imports`);
  an input that was missing must still be missing, and so must any repo file
  that would shadow an imported package;
- the names in each folder the run read from (a script that globs ``data/*.csv``
  must see a new CSV);
- the run settings: timeout, memory limit, network, the files kept out of the
  sandbox copy, the task's working-folder mode, plus a fingerprint from the
  caller for anything else; and a run kept without figure renderings does not
  serve a check that needs them (``--images``, ``--twice``);
- the environment: Python, figproof (version and its own code), numpy, pandas,
  matplotlib, Pillow, and the set of installed distributions.

What is cached: runs that finished (``ok``) and failures that are a property of
the code — an exception, a non-zero ``sys.exit`` or a request for keyboard
input.  Timeouts, memory exhaustion, signals and lost runs depend on the
machine's load and limits, so they are run again every time.  A run that read a
file outside the repo by a relative path, or that used the network while it was
allowed, is not cached either: the cache cannot see what it depended on.

What is stored is the run, not its findings: rules, thresholds and accepted
findings are applied afresh on every check, so changing them needs no
invalidation.

Bad input: a cache folder that cannot be created, read or written, or an entry
that is corrupt, never stops a check.  The script is run as if there were no
cache, and the run carries a one-line note naming the folder; a corrupt entry
is replaced.  Only folders figproof created inside ``<cache>/runs/`` are ever
written or removed.

An interrupted check leaves no torn entry: an entry is written whole in a
temporary folder (marked with its owner, see :mod:`figproof.run.scratch`) and
renamed into place.  The temporary folder of a check that was killed is removed
by the next prune as soon as its owner is gone (unmarked ones after an hour).

Limits (best effort, like the isolation): files a script reaches without
Python's ``open`` (a C library opening a path itself) and files a glob would
newly match in a folder the run never read from are not seen.
"""

from __future__ import annotations

import hashlib
import json
import os
import platform
import re
import shutil
import sys
import tempfile
import threading
import time
from collections.abc import Callable, Iterable, Iterator, Mapping
from dataclasses import replace
from importlib import metadata
from pathlib import Path, PurePosixPath
from typing import Any, Literal

from figproof import __version__
from figproof.discover.imports import LocalImports, local_imports, search_folders
from figproof.hashing import file_sha256
from figproof.model.context import files_written
from figproof.model.records import ScriptRun, dump_run, load_run
from figproof.run.execute import Options, Runner, Task, artifact_folder
from figproof.run.scratch import MARKER, owner_alive, owner_record, read_owner

KEY_SCHEMA = 1
RUNS = "runs"  # entries live here, one folder per script: key.json + artifact/
KEY_FILE = "key.json"
ARTIFACT = "artifact"
CACHED_ERRORS = frozenset({"exception", "exit", "needs-input"})  # deterministic failures
STALE_TEMP_SECONDS = 3600.0  # unmarked temp folders older than this were left by an interrupted check
_PACKAGES = (("numpy", "numpy"), ("pandas", "pandas"), ("matplotlib", "matplotlib"), ("pillow", "Pillow"))
_TAG = "Signature: 8a477f597d28d172789f06886806bc55\n# figproof result cache; safe to delete.\n"


def _digest(data: Any) -> str:
    return hashlib.sha256(json.dumps(data, sort_keys=True, default=str).encode("utf-8")).hexdigest()




def _distributions() -> list[str]:
    """Names of the installed distributions' metadata folders (``name-version.dist-info``).

    Listing the folders is much faster than parsing every distribution's
    metadata, and the folder name carries the version.
    """
    found: set[str] = set()
    for entry in sys.path:
        try:
            with os.scandir(entry or ".") as it:
                found.update(e.name for e in it if e.name.endswith((".dist-info", ".egg-info")))
        except OSError:
            continue
    return sorted(found)


def _own_code() -> str:
    """Digest of figproof's own source: capture and extraction changes between releases must invalidate."""
    h = hashlib.sha256()
    package = Path(__file__).resolve().parents[1]
    for path in sorted(package.rglob("*.py")):
        h.update(path.relative_to(package).as_posix().encode())
        h.update(path.read_bytes())
    return h.hexdigest()


def environment_key() -> dict[str, Any]:
    """What in this interpreter changes how a script runs or draws, without importing any of it.

    Package versions come from installed metadata (no import of matplotlib or
    pandas); the FreeType version matplotlib draws text with is not included,
    because reading it means importing matplotlib (it ships with the wheel, so
    the matplotlib version stands for it).
    """
    env: dict[str, Any] = {
        "python": platform.python_version(),
        "implementation": platform.python_implementation(),
        "executable": sys.executable,
        "machine": platform.machine(),
        "figproof": __version__,
        "figproof_code": _own_code(),
        "distributions": _digest(_distributions()),
    }
    for key, dist in _PACKAGES:
        try:
            env[key] = metadata.version(dist)
        except metadata.PackageNotFoundError:
            env[key] = None
    return env


def run_settings(task: Task, options: Options, extra: str = "") -> dict[str, Any]:
    """The settings of one task that change its run (the caller adds anything else as ``extra``)."""
    return {"timeout": options.timeout, "memory_limit": options.memory_limit, "network": options.network,
            "skip_copy": sorted(options.skip_copy), "working_dir": task.working_dir, "extra": extra}


def cacheable(run: ScriptRun) -> bool:
    """Whether a run's outcome is a property of its code and inputs (so worth keeping)."""
    if run.status == "ok":
        return True
    return run.status == "failed" and run.error is not None and run.error.kind in CACHED_ERRORS


def entry_name(script: str) -> str:
    """Folder name of a script's entry: readable, and unique by a hash of the path."""
    readable = re.sub(r"[^A-Za-z0-9._-]+", "_", script)[-60:]
    return f"{readable}-{hashlib.sha256(script.encode('utf-8')).hexdigest()[:12]}"


def _safe_relative(path: str) -> bool:
    p = PurePosixPath(path)
    return bool(path) and not p.is_absolute() and ".." not in p.parts and "\\" not in path


class _Hasher:
    """File digests for one check, memoised on (size, mtime) so a file many scripts read is hashed once."""

    def __init__(self) -> None:
        self._known: dict[str, tuple[int, int, str | None]] = {}
        self._lock = threading.Lock()

    def sha256(self, path: Path) -> str | None:
        try:
            st = path.stat()
        except OSError:
            return None
        key = str(path)
        with self._lock:
            known = self._known.get(key)
        if known is not None and known[:2] == (st.st_size, st.st_mtime_ns):
            return known[2]
        digest = file_sha256(path)
        with self._lock:
            self._known[key] = (st.st_size, st.st_mtime_ns, digest)
        return digest


def _folder_names(folder: Path) -> str | None:
    try:
        return _digest(sorted(os.listdir(folder)))
    except OSError:
        return None


def dependencies(run: ScriptRun, root: Path, network_allowed: bool) -> tuple[dict[str, str | None], list[str]] | None:
    """Files the run read, ``path -> sha256`` (None: it was missing), and the folders they sit in.

    Paths are repo-relative, or absolute for files outside the repo.  Returns
    None when the run depended on something the cache cannot check.
    """
    files: dict[str, str | None] = {}
    written: set[str] = set()
    folders: set[str] = set()
    for ev in run.events:
        if ev.action in ("write", "save"):
            written.add(ev.path)  # later reads of this path see the script's own output
            continue
        if ev.action == "network" and network_allowed:
            return None
        if ev.action not in ("read", "missing", "probe") or ev.path in written:
            continue  # an existence check that found nothing: the result changes when the file appears
        if ev.inside_repo:
            if not _safe_relative(ev.path):
                return None
            folders.add(PurePosixPath(ev.path).parent.as_posix())
        elif not os.path.isabs(ev.path):
            return None  # relative to a sandbox that no longer exists
        if ev.action in ("missing", "probe") or not ev.exists:
            files.setdefault(ev.path, None)
        elif ev.sha256 is None:
            return None
        else:
            files.setdefault(ev.path, ev.sha256)
    return files, sorted(folders)


def _shown(folder: Path, root: Path) -> str:
    try:
        return folder.resolve().relative_to(root.resolve()).as_posix() or "."
    except (OSError, ValueError):
        return str(folder)


class CachingRunner:
    """A :class:`~figproof.run.execute.Runner` that answers from the result cache when nothing changed.

    Parameters
    ----------
    inner
        The runner for misses, or a no-argument factory that builds it on the
        first miss (so a check where every script hits never starts a pool).
    cache_dir
        The cache folder (``Config.cache_path()``).
    config_fingerprint
        A digest of any further settings that change a run; the timeout, memory
        limit, network, sandbox exclusions and working-folder mode are already
        taken from the task and options.
    environment
        The environment fingerprint; :func:`environment_key` of this
        interpreter by default (pass the child interpreter's when it differs).
    """

    def __init__(self, inner: Runner | Callable[[], Runner], cache_dir: Path, *, config_fingerprint: str = "",
                 environment: Mapping[str, Any] | None = None) -> None:
        # a class (e.g. FreshInterpreter) has a `run` attribute too, but it is a factory
        is_runner = hasattr(inner, "run") and not isinstance(inner, type)
        self._inner: Runner | None = inner if is_runner else None  # type: ignore[assignment]
        self._factory: Callable[[], Runner] | None = None if is_runner else inner  # type: ignore[assignment]
        self.cache_dir = Path(cache_dir)
        self.config_fingerprint = config_fingerprint
        self.environment = _digest(dict(environment if environment is not None else environment_key()))
        self.answered: set[str] = set()  # scripts whose run came from the cache in this check
        self._hasher = _Hasher()
        self._lock = threading.Lock()
        self._prepared: str | None = None  # "" once the folder is usable, else why not

    @property
    def name(self) -> str:
        """The inner runner's name (the cache is not an isolation mode)."""
        return str(getattr(self._inner, "name", "cached"))

    def inner(self) -> Runner:
        """The runner used for misses (built now if a factory was given)."""
        with self._lock:
            if self._inner is None:
                assert self._factory is not None
                self._inner = self._factory()
            return self._inner

    def stop(self) -> None:
        """Stop the inner runner's children if it was started (the check is interrupted)."""
        stop = getattr(self._inner, "stop", None)
        if callable(stop):
            stop()

    def close(self) -> None:
        """Close the inner runner if it was started."""
        close = getattr(self._inner, "close", None)
        if callable(close):
            close()

    def __enter__(self) -> CachingRunner:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # ---------------------------------------------------------------- run

    def run(self, task: Task, options: Options) -> ScriptRun:
        """Return the cached run of ``task`` when it is still valid, else run it and store the result."""
        root = options.root.resolve()
        entry = self.cache_dir / RUNS / entry_name(task.script)
        settings = _digest(run_settings(task, options, self.config_fingerprint))
        script_sha = file_sha256(root / task.script)
        notes: list[str] = []
        if self.cache_dir.exists() and not self.cache_dir.is_dir():
            notes.append(f"result cache {_shown(self.cache_dir, root)} is not a folder; ran the script without it")
            return self._note(self.inner().run(task, options), notes)
        key = self._read_key(entry)
        if key is False:
            notes.append(f"result cache entry {_shown(entry, root)} was unreadable; ran the script and replaced it")
        elif key is not None and self._valid(key, task, root, script_sha, settings) and (
                key.get("renders", True) or not options.renders):  # an entry without renders serves no panel
            run = self._restore(entry, task, options)
            if run is not None:
                with self._lock:
                    self.answered.add(task.script)
                return run
            notes.append(f"result cache entry {_shown(entry, root)} was unreadable; ran the script and replaced it")
        # decided before the run, so an edit made while it runs cannot be stored against the old result
        imports = script_imports(root, task)
        before = {p: self._hasher.sha256(root / p) for p in imports.files}
        run = self.inner().run(task, options)
        if script_sha is None or not cacheable(run):
            return self._note(run, notes)
        deps = dependencies(run, root, options.network)
        if deps is None:
            return self._note(run, notes)
        files, folders = deps
        for path in imports.absent:
            files.setdefault(path, None)
        for path, digest in before.items():
            if digest is None:
                return self._note(run, notes)
            files.setdefault(path, digest)
        key_data = {
            "schema": KEY_SCHEMA, "script": task.script, "script_sha256": script_sha, "settings": settings,
            "environment": self.environment, "status": run.status, "renders": options.renders,
            "files": [{"path": p, "sha256": files[p]} for p in sorted(files)],
            "folders": [{"path": f, "names": _folder_names(root / f)} for f in folders],
            "outputs": sorted(files_written(run)),  # for judging orphans when this script does not run
        }
        problem = self._store(entry, key_data, run, artifact_folder(options.artifacts, task.script))
        if problem:
            notes.append(f"result cache {_shown(self.cache_dir, root)} {problem}; the result was not stored")
        return self._note(run, notes)

    @staticmethod
    def _note(run: ScriptRun, notes: Iterable[str]) -> ScriptRun:
        notes = tuple(notes)
        return replace(run, notes=run.notes + notes) if notes else run

    @staticmethod
    def _read_key(entry: Path) -> dict[str, Any] | Literal[False] | None:
        """The entry's key; None when there is no entry, False when it is corrupt."""
        path = entry / KEY_FILE
        try:
            text = path.read_text(encoding="utf-8")
        except (FileNotFoundError, NotADirectoryError):
            return False if entry.is_dir() else None
        except (OSError, UnicodeDecodeError):
            return False
        try:
            key = json.loads(text)
        except ValueError:
            return False
        if not isinstance(key, dict) or not isinstance(key.get("files"), list) or not isinstance(
                key.get("folders"), list):
            return False
        return key

    def _valid(self, key: Mapping[str, Any], task: Task, root: Path, script_sha: str | None, settings: str) -> bool:
        if script_sha is None or (key.get("schema"), key.get("script"), key.get("script_sha256"),
                                  key.get("settings"), key.get("environment")) != (
                KEY_SCHEMA, task.script, script_sha, settings, self.environment):
            return False
        try:
            for item in key["files"]:
                path, digest = str(item["path"]), item["sha256"]
                if not (_safe_relative(path) or os.path.isabs(path)):
                    return False
                file = root / path if not os.path.isabs(path) else Path(path)
                if digest is None:
                    if os.path.lexists(file):
                        return False
                elif self._hasher.sha256(file) != digest:
                    return False
            for item in key["folders"]:
                path = str(item["path"])
                if not _safe_relative(path) and path != ".":
                    return False
                if _folder_names(root / path) != item["names"]:
                    return False
        except (KeyError, TypeError):
            return False
        return True

    def _restore(self, entry: Path, task: Task, options: Options) -> ScriptRun | None:
        """Copy the entry's artifact folder into place and load its run; None when it is unusable."""
        dest = artifact_folder(options.artifacts, task.script)
        try:
            if dest.exists():
                shutil.rmtree(dest)
            shutil.copytree(entry / ARTIFACT, dest)
            return load_run(dest)
        except (OSError, ValueError, KeyError, TypeError):
            shutil.rmtree(dest, ignore_errors=True)
            return None

    # -------------------------------------------------------------- store

    def _prepare(self) -> str:
        """Create the cache folder once; return "" when it is usable, else a short reason."""
        with self._lock:
            if self._prepared is not None:
                return self._prepared
            try:
                created = not self.cache_dir.exists()
                self.cache_dir.mkdir(parents=True, exist_ok=True)
                if created or not any(self.cache_dir.iterdir()):
                    # only a folder figproof made (or an empty one) gets the ignore-everything file
                    (self.cache_dir / ".gitignore").write_text("*\n", encoding="utf-8")
                    (self.cache_dir / "CACHEDIR.TAG").write_text(_TAG, encoding="utf-8")
                (self.cache_dir / RUNS).mkdir(exist_ok=True)
                self._prepared = "" if os.access(self.cache_dir / RUNS, os.W_OK | os.X_OK) else "is not writable"
            except OSError as exc:
                self._prepared = f"is not writable ({exc.strerror or type(exc).__name__})"
            return self._prepared

    def _store(self, entry: Path, key: Mapping[str, Any], run: ScriptRun, artifacts: Path) -> str:
        """Write the entry atomically (a temp folder renamed into place); return "" or what went wrong."""
        problem = self._prepare()
        if problem:
            return problem
        tmp: Path | None = None
        try:
            tmp = Path(tempfile.mkdtemp(prefix=".tmp-", dir=self.cache_dir / RUNS))
            # a check killed while it writes leaves this folder: the marker lets the next one remove it at once
            (tmp / MARKER).write_text(json.dumps(owner_record()), encoding="utf-8")
            if artifacts.is_dir():
                shutil.copytree(artifacts, tmp / ARTIFACT)
            dump_run(run, tmp / ARTIFACT)  # the final run: seconds and output tails included
            (tmp / KEY_FILE).write_text(json.dumps(key, sort_keys=True, indent=1), encoding="utf-8")
            (tmp / MARKER).unlink()
            if entry.exists():
                old = entry.with_name(f".old-{os.getpid()}-{threading.get_ident()}-{entry.name}")
                os.rename(entry, old)
                shutil.rmtree(old, ignore_errors=True)
            os.rename(tmp, entry)
            return ""
        except (OSError, ValueError, TypeError) as exc:
            if tmp is not None:
                shutil.rmtree(tmp, ignore_errors=True)
            return f"could not be written ({getattr(exc, 'strerror', None) or type(exc).__name__})"


def _recorded_keys(cache_dir: Path) -> Iterator[dict[str, Any]]:
    """The key of every cache entry, in the entries' order; entries whose key cannot be read are skipped."""
    runs = cache_dir / RUNS
    if not runs.is_dir():
        return
    for key_file in sorted(runs.glob(f"*/{KEY_FILE}")):
        try:
            key = json.loads(key_file.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if isinstance(key, dict):
            yield key


def _key_files(key: Mapping[str, Any]) -> list[str]:
    """The repo files a cache key records as the script's inputs (read, or imported repo modules)."""
    return [str(f["path"]) for f in key.get("files", ())]


def script_imports(root: Path, task: Task) -> LocalImports:
    """The repo modules a run of ``task`` may import, for its cache key: more is safe, fewer is a stale result.

    Besides the folders the child puts on ``sys.path`` (and figproof's own further entries: ``sys.path[0]`` is
    how figproof itself was started, not the child's), the repo root and a ``src/`` folder are searched: an
    editable install of the repo's own package imports from there without a ``sys.path`` entry.
    """
    root = root.resolve()
    extra = [*sys.path[1:], str(root), *([str(root / "src")] if (root / "src").is_dir() else [])]
    search = search_folders(root, task.script, task.working_dir, extra)
    cwd = root if task.working_dir == "root" else (root / task.script).parent
    return local_imports(root, task.script, search, bases=(cwd,))


def recorded_dependencies(cache_dir: Path) -> dict[str, set[str]]:
    """Repo files each cached script depended on when it last ran (inputs read, repo modules imported).

    Used to pick the scripts a changed data file affects; unreadable entries are skipped.
    """
    out: dict[str, set[str]] = {}
    for key in _recorded_keys(cache_dir):
        try:
            out.setdefault(str(key["script"]), set()).update(_key_files(key))
        except (KeyError, TypeError):
            continue
    return out


def recorded_uses(cache_dir: Path, root: Path) -> dict[str, frozenset[str]]:
    """Repo files each cached script wrote or read when it last ran, for scripts whose code is unchanged.

    Entries written before the cache recorded outputs, unreadable entries and entries of a script
    that changed since are left out (what the script writes now is not known).
    """
    out: dict[str, frozenset[str]] = {}
    for key in _recorded_keys(cache_dir):
        try:
            script, outputs = str(key["script"]), key["outputs"]
            if not _safe_relative(script) or file_sha256(root / script) != key["script_sha256"]:
                continue
            out[script] = frozenset([*map(str, outputs), *_key_files(key)])
        except (OSError, ValueError, KeyError, TypeError):
            continue
    return out


def prune(cache_dir: Path, keep_scripts: Iterable[str]) -> list[str]:
    """Remove the entries of scripts not in ``keep_scripts``, corrupt entries and stale temp folders.

    Only folders inside ``<cache_dir>/runs/`` are touched.  Returns the names of
    the removed folders, sorted; a cache folder that is missing or read-only
    gives an empty list or removes what it can.
    """
    runs = Path(cache_dir) / RUNS
    keep = {entry_name(s) for s in keep_scripts}
    removed: list[str] = []
    try:
        children = list(runs.iterdir())
    except OSError:
        return []
    now = time.time()
    for child in children:
        if not child.is_dir() or child.is_symlink():
            continue
        if child.name.startswith((".tmp-", ".old-")):
            owner = read_owner(child)
            try:
                stale = now - child.stat().st_mtime > STALE_TEMP_SECONDS or child.name.startswith(".old-") or (
                    owner is not None and not owner_alive(owner))
            except OSError:
                continue
            if not stale:
                continue  # another check may be writing it right now
        elif child.name in keep and isinstance(CachingRunner._read_key(child), dict):
            continue
        shutil.rmtree(child, ignore_errors=True)
        if not child.exists():
            removed.append(child.name)
    return sorted(removed)


__all__ = ["CachingRunner", "cacheable", "dependencies", "entry_name", "environment_key",
           "file_sha256", "prune", "recorded_dependencies", "run_settings"]

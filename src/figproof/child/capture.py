"""Hooks installed inside the child process before the user's code runs.

This is the only module (with :mod:`figproof.child.extract` and :mod:`figproof.child.main`)
that imports matplotlib.pyplot.  It records, while the script runs:

- every figure created (also ones the script closes or never saves);
- for every artist added to an Axes, the file:line of the user's code that
  made it (the first stack frame inside the repo), and whether seaborn or
  pandas plotting drew it;
- every savefig output and every file opened, with the user's line;
- raw numeric arguments of the main plotting calls, the groups handed to
  matplotlib's box/violin statistics helpers, and the numeric columns of
  tables the script loads.

Nothing here decides anything; :mod:`figproof.child.extract` turns the record into
the model after the script ends.
"""

from __future__ import annotations

import builtins
import functools
import importlib.abc
import importlib.machinery
import io
import json
import os
import re
import socket
import sys
import sysconfig
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import FrameType
from typing import Any, NamedTuple

import numpy as np

from figproof.hashing import file_sha256
from figproof.model.records import FileAction, FileEvent, Source

MAX_RECORDED_VALUES = 200_000  # per recorded array; keeps the child→parent message small
CELL_RE = re.compile(r"^(?P<path>.*)#cell=(?P<cell>\d+)$")
_LIB_MARKERS = (("seaborn", f"{os.sep}seaborn{os.sep}"), ("pandas", f"{os.sep}pandas{os.sep}plotting{os.sep}"))
_PLOT_CALLS = ("bar", "barh", "hist", "scatter", "plot", "errorbar", "boxplot", "violinplot", "imshow",
               "pcolormesh", "stem", "step", "fill_between")


class NetworkRefused(PermissionError):
    """Raised inside the child when a script tries the network while it is off."""


class RecordedCall(NamedTuple):
    """A plotting call's raw arrays, recorded while the script runs (extract keeps those of live axes)."""

    axes: Any
    name: str
    arrays: dict[str, np.ndarray]
    source: Source | None


class RecordedSample(NamedTuple):
    """Raw observations a statistics helper or a point call received."""

    values: np.ndarray
    origin: str
    source: Source | None


class RecordedStats(NamedTuple):
    """The statistics a box or violin plot drew from, with the artists it returned."""

    axes: Any
    stats: list[dict[str, Any]]
    artists: dict[str, Any]
    vertical: bool
    source: Source | None


class RecordedTable(NamedTuple):
    """A table the script loaded: numeric columns, text columns as group codes."""

    path: str
    reader: str
    columns: dict[str, np.ndarray]
    groups: dict[str, np.ndarray]
    truncated: bool
    source: Source | None


@dataclass
class Recorder:
    """Mutable record of one script run, owned by the child process only."""

    sandbox: Path
    script: str  # repo-relative
    events_path: Path | None = None
    protect: tuple[Path, ...] = ()  # the user's own repo: never written, even when it sits in the temp folder
    temp: Path | None = None  # the script's own temp folder (TMPDIR): what is there, the script wrote in this run
    figures: list[Any] = field(default_factory=list)
    figure_sources: dict[int, Source | None] = field(default_factory=dict)
    outputs: dict[int, list[str]] = field(default_factory=dict)
    calls: list[RecordedCall] = field(default_factory=list)
    samples: list[RecordedSample] = field(default_factory=list)
    boxplots: list[RecordedStats] = field(default_factory=list)
    violins: list[RecordedStats] = field(default_factory=list)
    tables: list[RecordedTable] = field(default_factory=list)
    events: list[FileEvent] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    drawn: set[int] = field(default_factory=set)  # figures fully drawn by a savefig and unchanged since
    notebook: bool = False  # running a notebook's cells (the inline display's rules apply)
    cell_drew: bool = False  # a figure was made in the current notebook cell
    cell_closes: bool = True  # the inline display closes figures on show and at the end of this cell
    close_all: Any = None  # closes every pyplot figure (set by the matplotlib hooks)
    _skip_dirs: tuple[str, ...] = ()
    _quiet: tuple[str, ...] = ()  # folders whose reads are the libraries' (or the script's own scratch) business
    _file_cache: dict[str, str | None] = field(default_factory=dict)
    _probed: set[tuple[str, str]] = field(default_factory=set)
    _busy: bool = False

    def __post_init__(self) -> None:
        here = str(Path(__file__).resolve().parents[1])
        paths = {sysconfig.get_paths().get(k, "") for k in ("purelib", "platlib", "stdlib")}
        self._skip_dirs = tuple(p for p in (here, *paths) if p)
        own = [self.temp, *_matplotlib_folders()]
        self._quiet = (*_SYSTEM, *(os.path.realpath(f).rstrip(os.sep) + os.sep for f in own if f is not None))

    # ---- locations -------------------------------------------------------

    def repo_path(self, filename: str) -> str | None:
        """Repo-relative POSIX path for a code file name, or None when it is not user code."""
        cached = self._file_cache.get(filename, "?")
        if cached != "?":
            return cached
        result: str | None = None
        raw = filename
        m = CELL_RE.match(filename)
        if m:
            raw = m.group("path")
        try:
            if not os.path.isabs(raw):
                raise ValueError(raw)  # "<frozen ...>", "<string>" and friends are not user files
            resolved = Path(raw).resolve()
            rel = resolved.relative_to(self.sandbox)
            if not str(resolved).startswith(self._skip_dirs) and "site-packages" not in rel.parts:
                result = rel.as_posix()
        except (ValueError, OSError):
            result = None
        self._file_cache[filename] = result
        return result

    def source_at(self, filename: str, line: int | None) -> Source | None:
        """The user's-code location of a code file name and line (notebook cells included), or None."""
        rel = self.repo_path(filename)
        if rel is None:
            return None
        m = CELL_RE.match(filename)
        return Source(path=rel, line=line, cell=int(m.group("cell")) if m else None)

    def user_source(self, depth: int = 2) -> tuple[Source | None, str]:
        """First stack frame in the user's code, and which plotting library (if any) sits between."""
        frame: FrameType | None = sys._getframe(depth)
        lib = ""
        while frame is not None:
            name = frame.f_code.co_filename
            src = self.source_at(name, frame.f_lineno)
            if src is not None:
                return src, lib
            if not lib:
                for label, marker in _LIB_MARKERS:
                    if marker in name:
                        lib = label
            frame = frame.f_back
        return None, lib

    def shown_text(self, text: str) -> str:
        """``text`` with the repo view's own folder taken out, so a message names repo-relative paths only
        (the view is a temporary folder that differs from run to run)."""
        for root in dict.fromkeys((str(self.sandbox), os.path.realpath(self.sandbox))):
            text = text.replace(root + os.sep, "").replace(root, ".")
        return text

    def scratch(self, resolved: Path) -> bool:
        """A path outside the repo that is not the script's input: the script's own temp folder, matplotlib's
        configuration and cache folders, the Python installation and system folders; never the user's repo, nor
        the rest of the temp folder (another program's files, or the run's folder beside the copy)."""
        if any(resolved == p or p in resolved.parents for p in self.protect):
            return False
        return str(resolved).startswith(self._quiet)

    def link_out(self, text: str) -> tuple[str, str] | None:
        """(the link's repo path, what it holds) when ``text`` lies in the repo but a symbolic link on the way
        leads out of it; None otherwise."""
        root = str(self.sandbox)
        here = os.path.abspath(text)
        if not here.startswith(root + os.sep):
            return None
        at = root
        for part in Path(here[len(root) + 1:]).parts:
            at = os.path.join(at, part)
            if os.path.islink(at):
                real = os.path.realpath(at)
                if real != root and not real.startswith(root + os.sep):
                    return Path(at).relative_to(root).as_posix(), os.readlink(at)
        return None

    def outside(self, shown: str, exists: bool, src: Source, action: FileAction = "read",
                operation: str = "") -> FileEvent:
        """The event of a read (or existence check) outside the repo: a link leading out is named as such."""
        found = None if shown.startswith("~") or "://" in shown else self.link_out(shown)
        link, target = found if found is not None else ("", "")
        home = shown.startswith("~") or (not link and "://" not in shown and _in_home(shown))
        return FileEvent(action=action, path=link or shown, inside_repo=False, exists=exists, source=src,
                         operation=operation, link=target, home=home)

    # ---- events ----------------------------------------------------------

    def event(self, ev: FileEvent) -> None:
        self.events.append(ev)
        if self.events_path is not None:
            # one line per event, flushed now: survives os._exit and crashes
            with _REAL_OPEN(self.events_path, "a", encoding="utf-8") as fh:
                fh.write(json.dumps(ev.to_json(), sort_keys=True) + "\n")

    def classify(self, path: Any) -> tuple[str, bool] | None:
        """(display path, inside repo) for a file path argument, or None when not a path."""
        if isinstance(path, int) or not isinstance(path, (str, bytes, os.PathLike)):
            return None
        text = os.fsdecode(path)
        if text.startswith(("http://", "https://", "ftp://", "s3://", "gs://")):
            return text, False
        if text.startswith("~"):
            return text, False  # Python does not expand it: never shown joined onto the working folder
        resolved = Path(text).resolve()
        try:
            rel = resolved.relative_to(self.sandbox).as_posix()
        except ValueError:
            return text, False
        return rel, True


_REAL_OPEN = builtins.open


def _record_read(rec: Recorder, resolved: Path, shown: str, inside: bool, src: Source) -> None:
    """A read of an existing file, with its SHA-256 (hashed without going through the open hook)."""
    rec._busy = True
    try:
        digest = file_sha256(resolved, _REAL_OPEN)
    finally:
        rec._busy = False
    event = FileEvent(action="read", path=shown, inside_repo=True, source=src) if inside \
        else rec.outside(shown, True, src)
    rec.event(replace(event, sha256=digest))


def _record_missing(rec: Recorder, shown: str, inside: bool, src: Source) -> None:
    rec.event(FileEvent(action="missing", path=shown, inside_repo=True, exists=False, source=src) if inside
              else rec.outside(shown, False, src, "missing"))


def _system_prefixes() -> tuple[str, ...]:
    import site

    # the Python installation, the user's own site-packages (packages read their data files from there)
    roots = {sys.prefix, sys.base_prefix, sys.exec_prefix, site.getusersitepackages()}
    system = ("/dev/", "/proc/", "/sys/", "/etc/", "/usr/", "/lib/", "/lib64/", "/var/lib/")
    return (*tuple(sorted(r.rstrip(os.sep) + os.sep for r in roots if r)), *system)


_SYSTEM = _system_prefixes()


def _in_home(text: str) -> bool:
    try:
        home = os.path.realpath(Path.home())
    except (KeyError, RuntimeError):  # no home folder known for this user
        return False
    return os.path.realpath(text).startswith(home.rstrip(os.sep) + os.sep)


def _matplotlib_folders() -> list[str]:
    """matplotlib's configuration and cache folders (its font list lives there; figproof points them at a
    folder of its own)."""
    import matplotlib

    return [matplotlib.get_configdir(), matplotlib.get_cachedir()]


def _address(target: Any) -> str:
    """A socket address as host:port (IPv6 hosts in brackets), anything else as text."""
    if isinstance(target, tuple) and len(target) >= 2 and isinstance(target[0], (str, bytes)):
        host = os.fsdecode(target[0]) if isinstance(target[0], bytes) else target[0]
        return f"[{host}]:{target[1]}" if ":" in host else f"{host}:{target[1]}"
    return os.fsdecode(target) if isinstance(target, bytes) else str(target)


# --------------------------------------------------------------------------
# file access, network, input
# --------------------------------------------------------------------------


def install_io_hooks(rec: Recorder, *, network: bool) -> None:
    """Record file opens, refuse writes outside the sandbox, refuse the network, close input()."""

    def guarded_open(file: Any, mode: str = "r", *args: Any, **kwargs: Any) -> Any:
        if rec._busy:
            return _REAL_OPEN(file, mode, *args, **kwargs)
        info = rec.classify(file)
        if info is None:
            return _REAL_OPEN(file, mode, *args, **kwargs)
        shown, inside = info
        writing = any(c in mode for c in "wax+")
        resolved = Path(os.fsdecode(file)).resolve()
        if not inside and rec.scratch(resolved):
            return _REAL_OPEN(file, mode, *args, **kwargs)  # scratch files in the temp folder are fine
        src, _ = rec.user_source(2)
        # a write outside the copy is refused (and recorded) by the audit hook of figproof.child.audit
        try:
            handle = _REAL_OPEN(file, mode, *args, **kwargs)
        except FileNotFoundError:
            if src is not None and not writing:
                _record_missing(rec, shown, inside, src)
            raise
        if src is not None:
            if writing:
                rec.event(FileEvent(action="write", path=shown, inside_repo=inside, source=src))
            elif resolved.is_file():
                _record_read(rec, resolved, shown, inside, src)
        return handle

    builtins.open = guarded_open
    io.open = guarded_open
    install_probe_hooks(rec)

    def closed_input(prompt: Any = "") -> str:
        src, _ = rec.user_source(2)
        rec.notes.append("needs-input")
        raise EOFError(f"figproof: the script asked for keyboard input at {src}; standard input is closed")

    builtins.input = closed_input

    if not network:
        def refuse(address: Any) -> NetworkRefused:
            src, _ = rec.user_source(3)
            target = _address(address)
            rec.event(FileEvent(action="network", path=target[:200], inside_repo=False, exists=False,
                                source=src))
            return NetworkRefused(f"figproof: network access is off during a check (tried to connect to "
                                  f"{target})")

        def connect(sock: Any, address: Any, *args: Any) -> Any:
            raise refuse(address)

        def create_connection(address: Any, *args: Any, **kwargs: Any) -> Any:
            raise refuse(address)

        def getaddrinfo(host: Any, port: Any = None, *args: Any, **kwargs: Any) -> Any:
            raise refuse((host, port) if port not in (None, "", 0) else host)

        socket.socket.connect = connect  # type: ignore[method-assign]  # a plain function stands in for the method
        socket.socket.connect_ex = connect  # type: ignore[method-assign]  # a plain function stands in for the method
        socket.create_connection = create_connection
        socket.getaddrinfo = getaddrinfo


MAX_PROBES = 200  # existence checks recorded per run (a script may probe many optional files)


def _probed(rec: Recorder, check: str, path: Any) -> None:
    """Record an existence check of the user's code that found nothing (see :func:`install_probe_hooks`)."""
    if rec._busy or len(rec._probed) >= MAX_PROBES:
        return
    if rec.repo_path(sys._getframe(2).f_code.co_filename) is None:
        return  # a library's own check: only the script's checks can explain its failure
    info = rec.classify(path)
    if info is None or "://" in info[0]:
        return
    shown, inside = info
    text = os.fsdecode(path)
    if check != "glob.glob" and _lexists(text):
        return  # there, but of the other kind (a folder for isfile): not a missing input
    if not inside and rec.scratch(Path(os.path.expanduser(text)).resolve()):
        return
    src, _ = rec.user_source(2)
    if src is None or (shown, str(src)) in rec._probed:
        return
    rec._probed.add((shown, str(src)))
    rec.event(FileEvent(action="probe", path=shown, inside_repo=True, exists=False, source=src, operation=check)
              if inside else rec.outside(shown, False, src, "probe", check))


def _lexists(text: str) -> bool:
    try:
        os.lstat(text)
    except (OSError, ValueError):
        return False
    return True


def install_probe_hooks(rec: Recorder) -> None:
    """Record the script's existence checks that find nothing (``os.path.exists``/``isfile``/``isdir``/
    ``lexists``, ``Path.exists``/``is_file``/``is_dir``, ``glob.glob``): a script that checks for its input and
    raises its own error is then still explained (the rules use a check only when the failure names its path)."""
    import glob
    import pathlib

    def wrap_os(name: str) -> None:
        real = getattr(os.path, name)

        @functools.wraps(real)
        def probe(path: Any) -> bool:
            found = real(path)
            if not found:
                _probed(rec, f"os.path.{name}", path)
            return bool(found)

        setattr(os.path, name, probe)

    def wrap_path(name: str) -> None:
        real = getattr(pathlib.Path, name)

        @functools.wraps(real)
        def probe(self: Any, *args: Any, **kwargs: Any) -> bool:
            found = real(self, *args, **kwargs)
            if not found:
                _probed(rec, f"Path.{name}", self)
            return bool(found)

        setattr(pathlib.Path, name, probe)

    for name in ("exists", "isfile", "isdir", "lexists"):
        wrap_os(name)
    for name in ("exists", "is_file", "is_dir"):
        wrap_path(name)
    real_glob = glob.glob

    @functools.wraps(real_glob)
    def probe_glob(pathname: Any, *args: Any, **kwargs: Any) -> list[Any]:
        found = real_glob(pathname, *args, **kwargs)
        if not found and isinstance(pathname, (str, bytes, os.PathLike)):
            _probed(rec, "glob.glob", os.path.join(os.fsdecode(kwargs.get("root_dir") or ""), os.fsdecode(pathname)))
        return found

    glob.glob = probe_glob


# --------------------------------------------------------------------------
# post-import hooks (pandas is patched only if the script imports it)
# --------------------------------------------------------------------------


class _PostImportFinder(importlib.abc.MetaPathFinder):
    def __init__(self, hooks: dict[str, Callable[[Any], None]]) -> None:
        self.hooks = hooks

    def find_spec(self, name: str, path: Any = None, target: Any = None) -> Any:
        if name not in self.hooks:
            return None
        hook = self.hooks.pop(name)
        spec = importlib.machinery.PathFinder.find_spec(name, path)
        if spec is None or spec.loader is None:
            return None
        real_exec = spec.loader.exec_module

        def exec_module(module: Any) -> None:
            real_exec(module)
            hook(module)

        spec.loader.exec_module = exec_module  # type: ignore[method-assign]
        return spec


MAX_GROUPS = 50


def _numeric_columns(obj: Any) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray], bool]:
    """Numeric columns, and low-cardinality text columns as integer codes, of a loaded table."""
    cols: dict[str, np.ndarray] = {}
    groups: dict[str, np.ndarray] = {}
    truncated = False
    try:
        import pandas as pd

        if isinstance(obj, pd.DataFrame):
            for name in obj.columns:
                series = obj[name]
                if getattr(series, "ndim", 1) != 1:
                    continue
                if pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series):
                    values = series.to_numpy(dtype=float, na_value=np.nan)
                    truncated |= values.size > MAX_RECORDED_VALUES
                    cols[str(name)] = values[:MAX_RECORDED_VALUES]
                elif series.nunique(dropna=True) <= MAX_GROUPS:
                    codes, _ = pd.factorize(series)
                    groups[str(name)] = codes[:MAX_RECORDED_VALUES].astype(np.int64)
            return cols, groups, truncated
    except ImportError:
        pass
    arr = np.asarray(obj) if isinstance(obj, np.ndarray) else None
    if arr is not None and arr.dtype.kind in "fiu" and arr.ndim in (1, 2):
        arr2 = arr.reshape(-1, 1) if arr.ndim == 1 else arr
        for j in range(min(arr2.shape[1], 64)):
            values = arr2[:, j].astype(float)
            truncated |= values.size > MAX_RECORDED_VALUES
            cols[str(j)] = values[:MAX_RECORDED_VALUES]
    return cols, groups, truncated


def _wrap_loader(rec: Recorder, module: Any, name: str) -> None:
    real = getattr(module, name, None)
    if real is None or getattr(real, "_figproof", False):
        return

    @functools.wraps(real)
    def loader(*args: Any, **kwargs: Any) -> Any:
        target = args[0] if args else next(iter(kwargs.values()), None)
        info = rec.classify(target)
        # some readers open files through openers bound before figproof's hooks: record the read here too
        if info is not None and not rec._busy:
            _record_load(rec, target, info)
        rec._busy, outer = True, rec._busy
        try:
            result = real(*args, **kwargs)
        finally:
            rec._busy = outer
        if info is not None:
            try:
                cols, groups, truncated = _numeric_columns(result)
            except Exception:  # noqa: BLE001 - recording must never break the user's script
                cols, groups, truncated = {}, {}, False
            if cols:
                src, _ = rec.user_source(2)
                rec.tables.append(RecordedTable(info[0], f"{module.__name__.split('.')[0]}.{name}", cols, groups,
                                                truncated, src))
        return result

    loader._figproof = True  # type: ignore[attr-defined]
    setattr(module, name, loader)


def _record_load(rec: Recorder, target: Any, info: tuple[str, bool]) -> None:
    # numpy's and pandas' readers expand a leading ~ (open() does not)
    resolved = Path(os.path.expanduser(os.fsdecode(target))).resolve()
    if not info[1] and rec.scratch(resolved):
        return
    src, _ = rec.user_source(3)
    if src is None:
        return
    if not resolved.exists():
        _record_missing(rec, info[0], info[1], src)
    elif resolved.is_file():
        _record_read(rec, resolved, info[0], info[1], src)


def install_loader_hooks(rec: Recorder) -> None:
    """Record numeric columns of tables loaded with numpy and pandas readers."""
    for name in ("load", "loadtxt", "genfromtxt"):
        _wrap_loader(rec, np, name)

    def patch_pandas(pd: Any) -> None:
        for name in ("read_csv", "read_table", "read_excel", "read_parquet", "read_feather", "read_json",
                     "read_fwf", "read_hdf", "read_pickle", "read_stata", "read_spss", "read_sas"):
            _wrap_loader(rec, pd, name)

    def patch_seaborn_stats(module: Any) -> None:
        _wrap_estimates(rec, module)

    hooks: dict[str, Callable[[Any], None]] = {}
    for name, hook in (("pandas", patch_pandas), ("seaborn._statistics", patch_seaborn_stats)):
        if name in sys.modules:
            hook(sys.modules[name])
        else:
            hooks[name] = hook
    if hooks:
        sys.meta_path.insert(0, _PostImportFinder(hooks))


MAX_ESTIMATE_SAMPLES = 500


def _wrap_estimates(rec: Recorder, module: Any) -> None:
    """Record the raw group values seaborn aggregates into a bar or point estimate (barplot, pointplot)."""
    cls = getattr(module, "EstimateAggregator", None)
    if cls is None or getattr(cls.__call__, "_figproof", False):
        return
    real = cls.__call__

    @functools.wraps(real)
    def call(self: Any, data: Any, var: str) -> Any:
        result = real(self, data, var)
        try:
            if len(rec.samples) < MAX_ESTIMATE_SAMPLES:
                values = _as_array(data[var])
                if values is not None:
                    rec.samples.append(RecordedSample(values, "seaborn-estimate", rec.user_source(2)[0]))
        except Exception:  # noqa: BLE001 - recording must never break the user's script
            pass
        return result

    call._figproof = True  # type: ignore[attr-defined]
    cls.__call__ = call


# --------------------------------------------------------------------------
# matplotlib hooks
# --------------------------------------------------------------------------


def _as_array(value: Any) -> np.ndarray | None:
    try:
        if isinstance(value, (str, bytes)) or value is None:
            return None
        arr = np.ma.asarray(value)
        if arr.dtype.kind not in "fiub" or arr.ndim > 2 or arr.size == 0:
            return None
        out = np.ma.filled(arr.astype(float), np.nan).ravel()
        return out[:MAX_RECORDED_VALUES]
    except Exception:  # noqa: BLE001 - odd user input must not break recording
        return None


def _record_arrays(name: str, args: tuple[Any, ...], kwargs: dict[str, Any]) -> dict[str, np.ndarray]:
    arrays: dict[str, np.ndarray] = {}
    positional = {
        "bar": ("x", "height", "width", "bottom"),
        "barh": ("y", "width", "height", "left"),
        "scatter": ("x", "y", "s", "c"),
        "errorbar": ("x", "y", "yerr", "xerr"),
        "fill_between": ("x", "y1", "y2"),
        "stem": ("x", "y"),
        "step": ("x", "y"),
    }.get(name, ())
    if name in ("hist", "boxplot", "violinplot"):
        data = args[0] if args else kwargs.get("x", kwargs.get("dataset"))
        groups = _groups(data)
        for i, g in enumerate(groups[:200]):
            arrays[f"x{i}"] = g
        return arrays
    if name == "plot":
        for i, a in enumerate(args[:3]):
            arr = _as_array(a)
            if arr is not None:
                arrays[f"arg{i}"] = arr
        return arrays
    if name in ("imshow", "pcolormesh"):
        return arrays
    for key, value in zip(positional, args, strict=False):
        arr = _as_array(value)
        if arr is not None:
            arrays[key] = arr
    for key in ("x", "y", "height", "width", "bottom", "left", "yerr", "xerr", "s", "c", "y1", "y2"):
        if key in kwargs:
            arr = _as_array(kwargs[key])
            if arr is not None:
                arrays[key] = arr
    return arrays


def _groups(data: Any) -> list[np.ndarray]:
    """Split hist/boxplot/violinplot data into its groups, as matplotlib does."""
    if data is None:
        return []
    try:
        if hasattr(data, "to_numpy") and getattr(data, "ndim", 1) == 2:
            data = data.to_numpy(dtype=float).T
        if isinstance(data, np.ndarray) and data.dtype != object:
            arr = np.asarray(data, float)
            if arr.ndim == 1:
                return [arr[:MAX_RECORDED_VALUES]]
            return [np.asarray(c, float)[:MAX_RECORDED_VALUES] for c in arr.T]
        seq = list(data)
        if seq and np.ndim(seq[0]) == 0:
            flat = _as_array(seq)
            return [flat] if flat is not None else []
        return [a for a in (_as_array(s) for s in seq) if a is not None]
    except Exception:  # noqa: BLE001
        return []


_AGG_FORMATS = frozenset({"png", "jpg", "jpeg", "tif", "tiff", "webp", "raw", "rgba"})


def drew_as_displayed(fig: Any, fname: Any, kwargs: dict[str, Any]) -> bool:
    """Whether a savefig that just returned left ``fig`` drawn exactly as drawing it on its own canvas would.

    That holds for a raster format (painted by Agg) at the figure's own dpi without a tight bounding box:
    vector formats lay out at 72 dpi, another dpi moves what is placed in pixels when drawn (legend
    entries, other offset boxes), and a tight bounding box shifts the figure while it is drawn.
    """
    import matplotlib

    fmt = kwargs.get("format")
    if not fmt and isinstance(fname, (str, os.PathLike)):
        fmt = Path(os.fsdecode(fname)).suffix.lstrip(".")
    fmt = str(fmt or matplotlib.rcParams["savefig.format"]).lower()
    dpi = kwargs.get("dpi") or matplotlib.rcParams["savefig.dpi"]
    bbox = kwargs.get("bbox_inches", matplotlib.rcParams["savefig.bbox"])
    try:
        same_dpi = dpi == "figure" or float(dpi) == float(fig.dpi)
    except (TypeError, ValueError):
        return False
    return fmt in _AGG_FORMATS and same_dpi and not bbox


def saved_name(fname: Any, fmt: Any) -> Any:
    """The file name savefig writes: without an extension and a ``format``, matplotlib appends
    ``rcParams["savefig.format"]`` (``FigureCanvasBase.print_figure``); a file object is returned as is."""
    import matplotlib

    if fmt is not None or not isinstance(fname, (str, os.PathLike)):
        return fname
    text = os.fspath(fname)
    if not isinstance(text, str) or os.path.splitext(text)[1][1:]:
        return fname
    return text.rstrip(".") + "." + str(matplotlib.rcParams["savefig.format"])


def install_matplotlib_hooks(rec: Recorder) -> None:
    """Pin the Agg backend and wrap the Axes/Figure methods that capture needs."""
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.axes
    import matplotlib.cbook
    import matplotlib.figure
    import matplotlib.pyplot as plt

    plt.switch_backend("agg")
    matplotlib.rcParams["svg.hashsalt"] = "figproof"

    def ignore_backend(*args: Any, **kwargs: Any) -> None:
        asked = str(args[0] if args else kwargs.get("backend", "?"))
        if asked.lower() != "agg":
            rec.notes.append(f"the script asked for the {asked} backend; figproof kept Agg")

    matplotlib.use = ignore_backend
    plt.switch_backend = ignore_backend
    real_close = plt.close

    def close_all() -> None:
        real_close("all")  # the recorder keeps its own references: closed figures are still extracted

    rec.close_all = close_all

    def show(*args: Any, **kwargs: Any) -> None:
        # A blocking show returns when the user has closed the windows, so the next pyplot call starts a new
        # figure: close them (they stay recorded).  A non-blocking show (block=False, or interactive mode
        # after plt.ion()) leaves them open.  In a notebook the inline display's show closes them.
        block = kwargs.get("block", args[0] if args else None)
        if rec.cell_closes if rec.notebook else (not matplotlib.is_interactive() if block is None else bool(block)):
            close_all()

    plt.show = show
    plt.pause = lambda *a, **k: None

    Axes = matplotlib.axes.Axes
    Figure = matplotlib.figure.Figure

    real_init = Figure.__init__

    @functools.wraps(real_init)
    def figure_init(self: Any, *args: Any, **kwargs: Any) -> None:
        real_init(self, *args, **kwargs)
        rec.figures.append(self)  # a strong reference keeps figures the script closes
        rec.cell_drew = True
        rec.figure_sources[id(self)] = rec.user_source(2)[0]

    Figure.__init__ = figure_init  # type: ignore[method-assign]

    real_savefig = Figure.savefig

    @functools.wraps(real_savefig)
    def savefig(self: Any, fname: Any, *args: Any, **kwargs: Any) -> Any:
        info = rec.classify(saved_name(fname, kwargs.get("format")))
        src, _ = rec.user_source(2)
        if info is not None:
            shown, inside = info
            if not inside and not rec.scratch(Path(os.fsdecode(fname)).resolve()):
                rec.event(FileEvent(action="blocked-write", path=shown, inside_repo=False, source=src,
                                    operation="save a figure to"))
                raise PermissionError(f"figproof: save a figure to {shown} is refused: it is outside the copy of "
                                      f"the repo the script runs on")
        rec._busy = True
        rec.drawn.discard(id(self))
        try:
            result = real_savefig(self, fname, *args, **kwargs)
        finally:
            rec._busy = False
        if drew_as_displayed(self, fname, kwargs):
            # restoring the figure's colours after saving marked it stale; clear that mark, so any later change
            # to any artist (it propagates up to the figure) shows as stale again
            self.stale = False
            rec.drawn.add(id(self))
        if info is not None:
            fmt = kwargs.get("format") or Path(info[0]).suffix.lstrip(".").lower() or "png"
            rec.outputs.setdefault(id(self), []).append(info[0])
            rec.event(FileEvent(action="save", path=info[0], inside_repo=info[1], format=fmt, source=src))
        return result

    Figure.savefig = savefig  # type: ignore[method-assign]

    def tag_source(method_name: str) -> None:
        real = getattr(Axes, method_name)

        @functools.wraps(real)
        def add(self: Any, artist: Any, *args: Any, **kwargs: Any) -> Any:
            if getattr(artist, "_figproof_source", None) is None:
                src, lib = rec.user_source(2)
                try:
                    artist._figproof_source = src
                    artist._figproof_lib = lib
                except AttributeError:
                    pass
            return real(self, artist, *args, **kwargs)

        setattr(Axes, method_name, add)

    def tag_limits(which: str) -> None:
        real = getattr(Axes, f"set_{which}lim")

        @functools.wraps(real)
        def set_lim(self: Any, *args: Any, **kwargs: Any) -> Any:
            # the user's own limits (auto=False, the default); autoscaling passes auto=None
            if kwargs.get("auto", False) is False:
                src, _ = rec.user_source(2)
                if src is not None:
                    setattr(self, f"_figproof_{which}lim_source", src)
            return real(self, *args, **kwargs)

        setattr(Axes, f"set_{which}lim", set_lim)

    tag_limits("x")
    tag_limits("y")

    for name in ("add_artist", "add_collection", "add_line", "add_patch", "add_image", "add_table",
                 "add_container", "_add_text"):
        if hasattr(Axes, name):
            tag_source(name)

    def tag_returned_text(owner: Any, method_name: str) -> None:
        """Titles and axis labels exist from the start; they belong to the line that set their text."""
        real = getattr(owner, method_name)

        @functools.wraps(real)
        def setter(self: Any, *args: Any, **kwargs: Any) -> Any:
            text = real(self, *args, **kwargs)
            src, lib = rec.user_source(2)
            try:
                text._figproof_source, text._figproof_lib = src, lib
            except AttributeError:
                pass
            return text

        setattr(owner, method_name, setter)

    for name in ("set_title", "set_xlabel", "set_ylabel"):
        tag_returned_text(Axes, name)
    tag_returned_text(Figure, "suptitle")

    def record_call(method_name: str) -> None:
        real = getattr(Axes, method_name)

        @functools.wraps(real)
        def call(self: Any, *args: Any, **kwargs: Any) -> Any:
            if rec._busy:
                return real(self, *args, **kwargs)
            src, lib = rec.user_source(2)
            rec._busy = True  # nested plotting calls (hist -> bar) are recorded once, as the outer call
            try:
                result = real(self, *args, **kwargs)
            finally:
                rec._busy = False
            try:
                # seaborn draws error bars and estimate lines with ax.plot: those are not observations
                if not (lib == "seaborn" and method_name == "plot"):
                    rec.calls.append(RecordedCall(self, method_name, _record_arrays(method_name, args, kwargs), src))
                if method_name == "hist":
                    _tag_hist(result)
            except Exception:  # noqa: BLE001
                pass
            return result

        setattr(Axes, method_name, call)

    for name in _PLOT_CALLS:
        if hasattr(Axes, name):
            record_call(name)

    real_bxp = Axes.bxp

    @functools.wraps(real_bxp)
    def bxp(self: Any, bxpstats: Any, positions: Any = None, *args: Any, **kwargs: Any) -> Any:
        result = real_bxp(self, bxpstats, positions, *args, **kwargs)
        vertical = _is_vertical(kwargs)
        try:
            stats = [dict(s) for s in bxpstats]
            if positions is None:
                positions = range(1, len(stats) + 1)
            for s, p in zip(stats, positions, strict=False):
                s["_position"] = float(p)
            rec.boxplots.append(RecordedStats(self, stats, result, vertical, rec.user_source(2)[0]))
        except Exception:  # noqa: BLE001
            pass
        return result

    Axes.bxp = bxp  # type: ignore[method-assign]

    real_violin = Axes.violin

    @functools.wraps(real_violin)
    def violin(self: Any, vpstats: Any, positions: Any = None, *args: Any, **kwargs: Any) -> Any:
        result = real_violin(self, vpstats, positions, *args, **kwargs)
        try:
            stats = [dict(s) for s in vpstats]
            if positions is None:
                positions = range(1, len(stats) + 1)
            for s, p in zip(stats, positions, strict=False):
                s["_position"] = float(p)
            rec.violins.append(RecordedStats(self, stats, result, _is_vertical(kwargs), rec.user_source(2)[0]))
        except Exception:  # noqa: BLE001
            pass
        return result

    Axes.violin = violin  # type: ignore[method-assign]

    def stats_helper(name: str, origin: str) -> None:
        real = getattr(matplotlib.cbook, name)

        @functools.wraps(real)
        def helper(X: Any, *args: Any, **kwargs: Any) -> Any:
            result = real(X, *args, **kwargs)
            src, _ = rec.user_source(2)
            for g in _groups(X):
                rec.samples.append(RecordedSample(g, origin, src))
            return result

        setattr(matplotlib.cbook, name, helper)

    stats_helper("boxplot_stats", "boxplot_stats")
    stats_helper("violin_stats", "violin_stats")


def _is_vertical(kwargs: dict[str, Any]) -> bool:
    if "orientation" in kwargs:
        return kwargs["orientation"] != "horizontal"
    return bool(kwargs.get("vert", True))


def _tag_hist(result: Any) -> None:
    patches = result[2] if isinstance(result, tuple) and len(result) == 3 else None
    containers = patches if isinstance(patches, list) else [patches]
    for c in containers:
        if c is None:
            continue
        try:
            c._figproof_hist = True
            for p in c:
                p._figproof_hist = True
        except (TypeError, AttributeError):
            pass

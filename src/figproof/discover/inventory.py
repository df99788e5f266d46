"""Find a repo's figure scripts, data files and committed figures.

By default a figure script is a ``.py`` or ``.ipynb`` file whose code imports
a plotting library (matplotlib, pylab, mpl_toolkits, seaborn, plotnine) or
imports pandas and calls its plotting API (``.plot``, ``.hist``,
``.boxplot``, ``pandas.plotting``).  Code is read, never run: scripts are
parsed with :mod:`ast` and notebooks are read as JSON.  Test files, virtual
environments, build folders and hidden folders are skipped.  When the repo is
a git work tree only tracked files count, since the check runs on what is
committed.  Explicit ``include`` globs replace the import test and the test
skipping (the folders above are always skipped: they never hold a lab's
figure scripts); ``exclude`` globs remove scripts either way.

Glob syntax, on repo-relative POSIX paths: ``*`` and ``?`` stay within one
path segment, ``**`` spans any number of segments, ``[abc]`` is a character
class; a pattern without ``/`` matches a name at any depth; a pattern that
matches a folder covers everything below it.
"""

from __future__ import annotations

import ast
import os
import re
from collections.abc import Iterable, Iterator
from functools import lru_cache
from pathlib import Path

from figproof.config import Config
from figproof.discover import gitrepo
from figproof.discover.imports import import_edges
from figproof.model.context import Inventory
from figproof.model.records import WorkingDir
from figproof.notebook import MATPLOTLIB_MAGIC, Cell, NotebookError, code_cells, python_source

SCRIPT_SUFFIXES = (".py", ".ipynb")
DATA_SUFFIXES = frozenset(
    [".csv", ".tsv", ".txt", ".dat", ".tab", ".xlsx", ".xls", ".xlsm", ".ods", ".json", ".jsonl", ".ndjson",
     ".parquet", ".feather", ".arrow", ".npy", ".npz", ".h5", ".hdf5", ".hdf", ".he5", ".nc", ".mat", ".pkl",
     ".pickle", ".sav", ".dta", ".xpt", ".sas7bdat", ".fits", ".fit", ".zip"]
)
FIGURE_SUFFIXES = frozenset(
    [".png", ".svg", ".svgz", ".pdf", ".jpg", ".jpeg", ".tif", ".tiff", ".eps", ".ps", ".gif", ".webp"]
)
# A compressed data file (results.csv.gz) is read by pandas and numpy as the inner format.
_COMPRESSION = frozenset([".gz", ".bz2", ".xz", ".zst"])

PLOT_MODULES = frozenset({"matplotlib", "pylab", "mpl_toolkits", "seaborn", "plotnine"})
# Attributes that, in code importing pandas, mean pandas' own plotting API (DataFrame.plot & co).
PANDAS_PLOT_ATTRS = frozenset({"plot", "plotting", "hist", "boxplot", "scatter_matrix"})

VENV_NAMES = frozenset({".venv", "venv", "env", ".env", "virtualenv"})
BUILD_NAMES = frozenset({"build", "dist", "site-packages", "node_modules", "__pycache__", "__pypackages__"})
TEST_DIRS = frozenset({"tests", "test"})
# Figure files under these top folders are documentation or test fixtures, not the paper's figures.
NON_FIGURE_DIRS = ("docs", "doc", "tests", "test")
# Text files that are project metadata rather than data.
_NOT_DATA = re.compile(
    r"^(requirements.*|constraints.*|license.*|licence.*|readme.*|changelog.*|cmakelists)\.txt$", re.I
)

_FALLBACK_IMPORT = re.compile(
    r"^[ \t]*(?:import|from)[ \t]+(?:matplotlib|pylab|mpl_toolkits|seaborn|plotnine|pandas\.plotting)\b"
    r"|^[ \t]*from[ \t]+pandas[ \t]+import[ \t]+[^\n]*\bplotting\b",
    re.M,
)
_NAMES = tuple(n.encode() for n in (*sorted(PLOT_MODULES), "pandas"))
_MAX_SOURCE_BYTES = 20 * 1024 * 1024  # bigger "scripts" are generated data, not figure code


class DiscoveryError(Exception):
    """Discovery cannot honour the config (an include pattern or order entry names nothing)."""


# --------------------------------------------------------------------------- globs


@lru_cache(maxsize=512)
def _glob_regex(pattern: str) -> re.Pattern[str]:
    pat = pattern.replace("\\", "/")
    while pat.startswith("./"):
        pat = pat[2:]
    pat = pat.rstrip("/")
    segments = pat.split("/")
    out: list[str] = []
    for i, seg in enumerate(segments):
        last = i == len(segments) - 1
        if seg == "**":
            out.append(".*" if last else "(?:[^/]+/)*")
            continue
        out.append(_segment(seg) + ("" if last else "/"))
    body = "".join(out)
    if "/" not in pat:
        body = "(?:.*/)?" + body  # a bare name matches at any depth
    return re.compile(body)


def _segment(seg: str) -> str:
    out: list[str] = []
    i = 0
    while i < len(seg):
        c = seg[i]
        if c == "*":
            out.append("[^/]*")
        elif c == "?":
            out.append("[^/]")
        elif c == "[":
            end = seg.find("]", i + 2 if seg[i + 1 : i + 2] in ("!", "^") else i + 1)
            if end == -1:
                out.append(re.escape(c))
            else:
                inner = seg[i + 1 : end]
                if inner[:1] in ("!", "^"):
                    inner = "^" + inner[1:]
                out.append("[" + inner.replace("\\", "\\\\") + "]")
                i = end
        else:
            out.append(re.escape(c))
        i += 1
    return "".join(out)


def glob_match(path: str, pattern: str) -> bool:
    """Whether a repo-relative POSIX ``path`` matches ``pattern`` (itself, or a folder above it)."""
    rx = _glob_regex(pattern)
    if rx.fullmatch(path):
        return True
    # A pattern naming a folder covers the files below it.
    return any(c == "/" and rx.fullmatch(path[:i]) for i, c in enumerate(path))


def _any_match(path: str, patterns: Iterable[str]) -> bool:
    return any(glob_match(path, p) for p in patterns)


# --------------------------------------------------------------------------- listing files


class _Skipper:
    """Decides which folders never count: hidden, virtual environments, build output."""

    def __init__(self, root: Path, names: Iterable[str] = ()) -> None:
        self.root = root
        # A tracked pyvenv.cfg marks its folder as an environment without a disk lookup.
        self._venv_markers = {n.rpartition("/")[0] for n in names if n.rpartition("/")[2] == "pyvenv.cfg"}
        self._cache: dict[str, bool] = {}

    def folder(self, rel: str) -> bool:
        """True when the repo-relative folder ``rel`` (not its parents) is to be skipped."""
        hit = self._cache.get(rel)
        if hit is None:
            name = rel.rsplit("/", 1)[-1]
            hit = (
                name.startswith(".")
                or name in VENV_NAMES
                or name in BUILD_NAMES
                or name.endswith(".egg-info")
                or rel in self._venv_markers
                or (self.root / rel / "pyvenv.cfg").is_file()
                or (self.root / rel / "conda-meta").is_dir()
            )
            self._cache[rel] = hit
        return hit

    def path(self, rel: str) -> bool:
        """True when any folder of the repo-relative file ``rel`` is skipped, or the file is hidden."""
        parts = rel.split("/")
        if parts[-1].startswith("."):
            return True
        return any(self.folder("/".join(parts[: i + 1])) for i in range(len(parts) - 1))


def _walk(root: Path) -> list[str]:
    skipper = _Skipper(root)
    found: list[str] = []
    for here, dirs, files in os.walk(root, onerror=None):
        rel_here = Path(here).relative_to(root).as_posix()
        prefix = "" if rel_here == "." else rel_here + "/"
        dirs[:] = [d for d in dirs if not skipper.folder(prefix + d)]
        found.extend(prefix + f for f in files if not f.startswith("."))
    return sorted(found)


def _is_test(rel: str) -> bool:
    parts = rel.split("/")
    name = parts[-1]
    stem = name.rsplit(".", 1)[0]
    return (
        any(p in TEST_DIRS for p in parts[:-1])
        or stem.startswith("test_")
        or stem.endswith("_test")
        or stem == "conftest"
    )


def _suffix(rel: str) -> str:
    """The lower-case format suffix, looking through a compression suffix (``.csv.gz`` is ``.csv``)."""
    name = rel.rsplit("/", 1)[-1].lower()
    stem, dot, ext = name.rpartition(".")
    if not dot or not stem:
        return ""
    if "." + ext in _COMPRESSION:
        inner, dot, ext2 = stem.rpartition(".")
        return "." + ext2 if dot and inner else ""
    return "." + ext


# --------------------------------------------------------------------------- reading code


def _tree_draws(tree: ast.AST) -> bool:
    uses_pandas = False
    plot_attr = False
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                top = alias.name.split(".")[0]
                if top in PLOT_MODULES or alias.name.startswith("pandas.plotting"):
                    return True
                uses_pandas |= top == "pandas"
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            top = node.module.split(".")[0]
            if top in PLOT_MODULES or node.module.startswith("pandas.plotting"):
                return True
            if node.module == "pandas" and any(a.name == "plotting" for a in node.names):
                return True
            uses_pandas |= top == "pandas"
        elif isinstance(node, ast.Attribute) and node.attr in PANDAS_PLOT_ATTRS:
            plot_attr = True
    return uses_pandas and plot_attr


def _parse(code: str | bytes) -> ast.AST | None:
    try:
        return ast.parse(code)
    except (SyntaxError, ValueError, RecursionError, MemoryError):
        return None


def code_draws(code: str | bytes) -> bool:
    """Whether Python source imports a plotting library or uses pandas plotting.

    Code that does not parse is scanned line by line for plotting imports, so a
    figure script with a syntax error is still found (and its run reports the error).
    """
    raw = code.encode("utf-8", "surrogatepass") if isinstance(code, str) else code
    if not any(name in raw for name in _NAMES):
        return False  # no plotting name anywhere: skip the parse (most non-figure modules)
    tree = _parse(code)
    if tree is not None:
        return _tree_draws(tree)
    text = code.decode("utf-8", "replace") if isinstance(code, bytes) else code
    return bool(_FALLBACK_IMPORT.search(text))


def notebook_cells(raw: bytes) -> list[str] | None:
    """The code cells of a notebook file as Python source (IPython lines blanked); None when unreadable."""
    try:
        return [python_source(c.source) for c in code_cells(raw)]
    except NotebookError:
        return None


def _notebook_draws(cells: list[Cell]) -> bool:
    # %matplotlib inline / %pylab set up plotting without a Python import
    return any(MATPLOTLIB_MAGIC.search(c.source) or code_draws(python_source(c.source)) for c in cells)


def _read(path: Path) -> bytes | None:
    try:
        if path.stat().st_size > _MAX_SOURCE_BYTES:
            return None
        return path.read_bytes()
    except OSError:
        return None


def _draws(path: Path) -> bool:
    raw = _read(path)
    if raw is None:
        return False
    if path.suffix == ".ipynb":
        try:
            return _notebook_draws(code_cells(raw))
        except NotebookError:
            return True  # a notebook that cannot be read is listed anyway: its run reports the damage
    return code_draws(raw)


# --------------------------------------------------------------------------- the repo's import graph

# Calls that draw or save a figure, by their last name (pyplot, Axes, Figure, seaborn, pandas, plotnine).
DRAW_CALLS = frozenset({
    "plot", "scatter", "bar", "barh", "hist", "hist2d", "imshow", "matshow", "pcolor", "pcolormesh", "contour",
    "contourf", "errorbar", "boxplot", "violinplot", "fill_between", "fill_betweenx", "stem", "step", "stairs",
    "pie", "hexbin", "quiver", "streamplot", "stackplot", "eventplot", "loglog", "semilogx", "semilogy",
    "figure", "subplots", "subplot", "subplot_mosaic", "add_subplot", "savefig", "show", "imsave",
    "heatmap", "lineplot", "scatterplot", "barplot", "histplot", "kdeplot", "ecdfplot", "catplot", "relplot",
    "displot", "pairplot", "jointplot", "lmplot", "regplot", "stripplot", "swarmplot", "countplot", "pointplot",
    "boxenplot", "clustermap", "scatter_matrix", "ggsave",
})


def _callee(node: ast.Call) -> str:
    func = node.func
    return func.id if isinstance(func, ast.Name) else func.attr if isinstance(func, ast.Attribute) else ""


def _is_main_guard(stmt: ast.stmt) -> bool:
    """``if __name__ == "__main__":``: the module is meant to be run."""
    test = stmt.test if isinstance(stmt, ast.If) else None
    return (isinstance(test, ast.Compare) and isinstance(test.left, ast.Name) and test.left.id == "__name__"
            and any(isinstance(c, ast.Constant) and c.value == "__main__" for c in test.comparators))


def draws_at_top_level(tree: ast.Module) -> bool:
    """Whether running the module draws: a drawing call outside its functions and classes, a call to one of
    its own functions that draws, or a ``__main__`` block (a module meant to be run is a script)."""
    functions = {s.name: s for s in tree.body if isinstance(s, (ast.FunctionDef, ast.AsyncFunctionDef))}
    drawing: set[str] = set()
    changed = True
    while changed:  # a function draws when it makes a drawing call or calls one of the module's drawing functions
        changed = False
        for name, fn in functions.items():
            calls = {_callee(n) for n in ast.walk(fn) if isinstance(n, ast.Call)}
            if name not in drawing and calls & (DRAW_CALLS | drawing):
                drawing.add(name)
                changed = True
    for stmt in tree.body:
        if isinstance(stmt, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef, ast.Import, ast.ImportFrom)):
            continue
        if _is_main_guard(stmt):
            return True
        if {_callee(n) for n in ast.walk(stmt) if isinstance(n, ast.Call)} & (DRAW_CALLS | drawing):
            return True
    return False


def _reaching(target: str, importers: dict[str, list[str]]) -> set[str]:
    """The files that import ``target``, directly or through others."""
    seen: set[str] = set()
    queue = [target]
    while queue:
        for user in importers.get(queue.pop(), ()):
            if user not in seen:
                seen.add(user)
                queue.append(user)
    return seen


class ImportGraph:
    """Which candidate files are figure scripts and which are helper modules, from the repo's own imports.

    A file draws when its own code imports a plotting library (see :func:`code_draws`).  A script is a figure
    script when it draws or imports (directly or through other repo modules) a repo module that draws.  A
    ``.py`` module that draws, that other candidates (or the repo's tests) import and that draws nothing when
    run on its own (:func:`draws_at_top_level`) is a helper: it is not run, the scripts that import it are.
    Code is read, never run; import cycles end where a module was already seen.
    """

    def __init__(self, root: Path, candidates: list[str], tests: Iterable[str] = ()) -> None:
        self.root = root
        self._own = {f: _draws(root / f) for f in candidates}
        # tests are never figure scripts, but a module they import is meant to be imported: a helper
        edges = import_edges(root, [*candidates, *tests])
        importers: dict[str, list[str]] = {}
        for f, deps in edges.items():
            for dep in deps:
                importers.setdefault(dep, []).append(f)
        # what draws, directly or through the modules it imports: walk the imports backwards from what draws
        drawing = {f for f in edges if self._draws(f)}
        queue = list(drawing)
        while queue:
            for user in importers.get(queue.pop(), ()):
                if user not in drawing:
                    drawing.add(user)
                    queue.append(user)
        self.scripts: list[str] = []
        helpers: list[str] = []
        for f in candidates:
            if f not in drawing:
                continue
            if f in importers and f.endswith(".py") and not self._runs_alone(f):
                helpers.append(f)
            else:
                self.scripts.append(f)
        script_set = set(self.scripts)
        # each helper with the figure scripts that import it, directly or through other repo modules
        self.helpers = tuple((h, tuple(sorted(_reaching(h, importers) & script_set))) for h in helpers)

    def _draws(self, rel: str) -> bool:
        own = self._own.get(rel)
        return _draws(self.root / rel) if own is None else own

    def _runs_alone(self, rel: str) -> bool:
        raw = _read(self.root / rel)
        tree = _parse(raw) if raw is not None else None
        return tree is None or (isinstance(tree, ast.Module) and draws_at_top_level(tree))


# --------------------------------------------------------------------------- discovery


def _scripts(config: Config, files: list[str], skip: _Skipper
             ) -> tuple[list[str], list[str], tuple[tuple[str, tuple[str, ...]], ...]]:
    """(figure scripts in run order, figure scripts that ``exclude`` keeps out, helper modules and their users)."""
    candidates = [f for f in files if f.endswith(SCRIPT_SUFFIXES) and not skip.path(f)]
    helpers: tuple[tuple[str, tuple[str, ...]], ...] = ()
    if config.include:
        chosen: set[str] = set()
        for pattern in config.include:
            hits = [f for f in candidates if glob_match(f, pattern)]
            if not hits:
                raise DiscoveryError(f"include pattern {pattern!r} matches no .py or .ipynb file under {config.root}")
            chosen.update(hits)
        picked = sorted(chosen)
    else:
        graph = ImportGraph(config.root, [f for f in candidates if not _is_test(f)],
                            [f for f in candidates if _is_test(f)])
        picked = graph.scripts
        helpers = graph.helpers
    excluded = [f for f in picked if _any_match(f, config.exclude)]
    picked = [f for f in picked if f not in excluded]
    return _ordered(config, picked, set(files)), excluded, helpers


def _ordered(config: Config, picked: list[str], files: set[str]) -> list[str]:
    """``order`` scripts first, in their order, even when they draw nothing (they may write data)."""
    first: list[str] = []
    for entry in config.order:
        if entry not in files:
            raise DiscoveryError(f"order entry {entry!r} is not a file in the repo at {config.root}")
        if entry not in first:
            first.append(entry)
    head = set(first)
    return first + [f for f in picked if f not in head]


def _own_files(config: Config) -> tuple[str, ...]:
    """figproof's own files in the repo, which are never data or figures."""
    out = []
    for name in (config.accepted_file, config.cache_dir):
        try:
            out.append((config.root / name).resolve().relative_to(config.root.resolve()).as_posix())
        except (ValueError, OSError):
            continue
    return tuple(out)


def _figure_file(config: Config, rel: str) -> bool:
    if config.figure_dirs:
        return _any_match(rel, config.figure_dirs)
    return rel.split("/", 1)[0] not in NON_FIGURE_DIRS


def iter_files(root: Path, *, use_git: bool = True) -> tuple[list[str], bool]:
    """All candidate files under ``root`` (repo-relative POSIX, sorted) and whether git listed them."""
    tracked = gitrepo.tracked_files(root) if use_git else None
    if tracked is None:
        return _walk(root), False
    return tracked, True


def discover(config: Config, *, use_git: bool = True) -> Inventory:
    """List the figure scripts, data files and committed figure files of ``config.root``.

    With ``use_git=False`` (a deposit) every file under the root counts as committed, even inside a git work tree.

    Returns
    -------
    Inventory
        Repo-relative POSIX paths: scripts (``order`` entries first, then sorted),
        data files and figure files (sorted; ``exclude`` removes figure files too), the tracked files
        when git is used, and the figure scripts ``exclude`` keeps from running.

    Raises
    ------
    DiscoveryError
        When an explicit include pattern matches no script, or an ``order`` entry is not a file.
    """
    root = config.root
    files, is_git = iter_files(root, use_git=use_git)
    skip = _Skipper(root, files)
    scripts, excluded, helpers = _scripts(config, files, skip)
    own = _own_files(config)
    visible = [f for f in files if not skip.path(f) and not any(f == o or f.startswith(o + "/") for o in own)]
    data = [f for f in visible if _suffix(f) in DATA_SUFFIXES and not _NOT_DATA.match(f.rsplit("/", 1)[-1])]
    figures = [f for f in visible if _suffix(f) in FIGURE_SUFFIXES and _figure_file(config, f)
               and not _any_match(f, config.exclude)]  # a photo or diagram in `exclude` is no orphan
    return Inventory(
        scripts=tuple(scripts),
        data_files=tuple(data),
        figure_files=tuple(figures),
        tracked=tuple(files) if is_git else (),
        is_git=is_git,
        excluded=tuple(f for f in excluded if f not in scripts),
        helpers=tuple((h, users) for h, users in helpers if h not in scripts),
    )


# --------------------------------------------------------------------------- working folder

_EXTENSION = re.compile(r"\.[A-Za-z][A-Za-z0-9]{0,7}$")


def _looks_like_path(text: str) -> bool:
    if not 0 < len(text) <= 255 or any(c in text for c in "\n\r\t\0*?<>|\"{}"):
        return False
    if text.startswith(("/", "\\", "~")) or "://" in text or re.match(r"^[A-Za-z]:", text):
        return False
    if not text.strip("./\\ "):
        return False
    return "/" in text or bool(_EXTENSION.search(text))


def _literals(trees: Iterable[ast.AST]) -> Iterator[str]:
    for tree in trees:
        for node in ast.walk(tree):
            if isinstance(node, ast.Constant) and isinstance(node.value, str) and _looks_like_path(node.value):
                yield node.value


def _resolves(base: Path, literal: str, root: Path) -> bool:
    try:
        target = (base / literal).resolve()
        target.relative_to(root)  # a path that leaves the repo will not exist in the check's copy
        return target.exists()
    except (ValueError, OSError, RuntimeError):
        return False


def choose_working_dir(root: Path, script: str, mode: str) -> WorkingDir:
    """Pick the folder a script runs in: ``"root"`` (the repo root) or ``"script"`` (its own folder).

    Parameters
    ----------
    root
        The repo root.
    script
        The script's repo-relative POSIX path.
    mode
        ``"root"`` or ``"script"`` force the answer; ``"auto"`` counts the string
        literals that look like relative file paths and resolve from each folder,
        and picks the folder where more resolve.  Ties go to the repo root for
        ``.py`` files and to the script's folder for notebooks (Jupyter starts a
        notebook's kernel in the notebook's folder).  A ``.py`` file that does not
        parse runs from the root; its run reports the error.
    """
    forced: dict[str, WorkingDir] = {"root": "root", "script": "script"}
    if mode in forced:
        return forced[mode]
    if mode != "auto":
        raise ValueError(f"working-dir mode must be 'auto', 'root' or 'script', not {mode!r}")
    notebook = script.endswith(".ipynb")
    tie: WorkingDir = "script" if notebook else "root"
    path = root / script
    raw = _read(path)
    if raw is None:
        return tie
    if notebook:
        cells = notebook_cells(raw)
        trees = [t for t in (_parse(c) for c in cells or []) if t is not None]
    else:
        tree = _parse(raw)
        if tree is None:
            return "root"
        trees = [tree]
    real_root = root.resolve()
    here = path.parent.resolve()
    if here == real_root:
        return tie
    from_root = from_script = 0
    for literal in sorted(set(_literals(trees))):
        from_root += _resolves(real_root, literal, real_root)
        from_script += _resolves(here, literal, real_root)
    if from_root != from_script:
        return "root" if from_root > from_script else "script"
    return tie


__all__ = [
    "DATA_SUFFIXES",
    "FIGURE_SUFFIXES",
    "PLOT_MODULES",
    "DiscoveryError",
    "choose_working_dir",
    "code_draws",
    "discover",
    "glob_match",
    "iter_files",
    "notebook_cells",
]

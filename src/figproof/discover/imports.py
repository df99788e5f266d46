"""Which files of the repo a figure script imports, found by reading its code (nothing is executed).

The child records the data files a script opens, but Python's import system
reads modules without going through ``open``, so a lab's own helper module
(``from plotting_style import apply``) is invisible to it.  The result cache
needs those files too: editing the helper must re-run every script that
imports it.  This module parses the script (or a notebook's code cells) with
:mod:`ast`, resolves each imported name the way Python's path finder would
against the folders the child puts on ``sys.path``, and follows the imports of
every repo module it finds.

It also lists the places where an imported name *could* appear inside the repo
but does not now (``numpy.py`` next to the script would shadow numpy), so a
file added later is noticed.
"""

from __future__ import annotations

import ast
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

from figproof.notebook import NotebookError, code_cells, python_source

MAX_MODULES = 500  # a repo with more local modules than this is unusual; stop following there


@dataclass(frozen=True, slots=True, kw_only=True)
class LocalImports:
    """Repo files a script imports (repo-relative POSIX) and repo paths whose later appearance would matter."""

    files: tuple[str, ...] = ()
    absent: tuple[str, ...] = ()


def search_folders(root: Path, script: str, working_dir: str, extra: Iterable[str] = ()) -> tuple[Path, ...]:
    """The folders inside ``root`` the child's ``sys.path`` starts with, in order.

    The child puts the script's folder first; ``python -m`` adds the working
    folder; ``extra`` are further ``sys.path`` entries (e.g. an editable install
    of the repo's own package under ``src/``), kept when they lie inside the repo.
    """
    root = root.resolve()
    script_dir = (root / script).parent
    cwd = root if working_dir == "root" else script_dir
    out: list[Path] = []
    for folder in (script_dir, cwd, *(Path(e) for e in extra if e)):
        try:
            folder = folder.resolve()
            folder.relative_to(root)
        except (OSError, ValueError):
            continue
        if folder not in out:
            out.append(folder)
    return tuple(out)


def code_of(path: Path) -> list[str]:
    """Source texts to parse: the file itself, or each code cell of a notebook (IPython lines blanked)."""
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return []
    if path.suffix != ".ipynb":
        return [text]
    try:
        return [python_source(c.source) for c in code_cells(text)]
    except NotebookError:
        return []


def _imported(tree: ast.AST) -> list[tuple[int, str, tuple[str, ...]]]:
    """(relative level, module, imported names) for each import statement."""
    found: list[tuple[int, str, tuple[str, ...]]] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(0, alias.name, ()) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            found.append((node.level, node.module or "", tuple(a.name for a in node.names if a.name != "*")))
    return found


def _find(parts: Sequence[str], folders: Sequence[Path]) -> tuple[list[Path], list[Path]]:
    """Files making up the module ``parts`` (package ``__init__`` files and the module), and candidates seen absent.

    Mirrors the path finder's order within one folder: a package directory,
    then ``name.py``; a folder without ``__init__.py`` is a namespace package
    and is used only when no folder holds a regular module.
    """
    absent: list[Path] = []
    namespace: Path | None = None
    for folder in folders:
        pkg, mod = folder / parts[0], folder / f"{parts[0]}.py"
        if (pkg / "__init__.py").is_file():
            return _descend([pkg / "__init__.py"], pkg, parts[1:], absent)
        if mod.is_file():
            return [mod], absent
        if pkg.is_dir() and namespace is None:
            namespace = pkg
        absent += [pkg, mod]
    if namespace is not None:
        return _descend([], namespace, parts[1:], absent)
    return [], absent


def _descend(files: list[Path], pkg: Path, rest: Sequence[str], absent: list[Path]) -> tuple[list[Path], list[Path]]:
    for name in rest:
        sub, mod = pkg / name, pkg / f"{name}.py"
        if (sub / "__init__.py").is_file():
            files.append(sub / "__init__.py")
            pkg = sub
        elif mod.is_file():
            files.append(mod)
            break
        elif sub.is_dir():
            pkg = sub
        else:
            absent += [sub, mod]
            break
    return files, absent


class ImportReader:
    """Parses each repo file once: its import statements and the folders it adds to ``sys.path`` by literal.

    Discovery asks about every script of a repo, and scripts share their modules; one reader serves them all.
    """

    def __init__(self) -> None:
        self._seen: dict[Path, tuple[list[tuple[int, str, tuple[str, ...]]], list[ast.expr]]] = {}
        # keyed by path strings: equal Path objects built apart compare slowly
        self._resolved: dict[tuple[str, tuple[str, ...]], tuple[tuple[tuple[Path, str], ...], frozenset[str]]] = {}

    def read(self, path: Path) -> tuple[list[tuple[int, str, tuple[str, ...]]], list[ast.expr]]:
        """(imports, the argument expressions of ``sys.path.insert``/``append`` calls) of a file or notebook."""
        hit = self._seen.get(path)
        if hit is None:
            found: list[tuple[int, str, tuple[str, ...]]] = []
            added: list[ast.expr] = []
            for text in code_of(path):
                try:
                    tree = ast.parse(text)
                except (SyntaxError, ValueError, RecursionError, MemoryError):
                    continue  # the run itself reports a script that does not parse
                found += _imported(tree)
                added += _path_additions(tree)
            hit = self._seen[path] = (found, added)
        return hit

    def resolve(self, current: Path, imported: list[tuple[int, str, tuple[str, ...]]], folders: tuple[Path, ...],
                root: Path) -> tuple[tuple[tuple[Path, str], ...], frozenset[str]]:
        """((repo file, repo-relative) pairs, absent candidates inside the repo, repo-relative) that ``current``'s
        imports name with these search folders (memoised)."""
        key = (str(current), tuple(map(str, folders)))
        done = self._resolved.get(key)
        if done is None:
            found, absent = _resolve(current, imported, folders, root)
            inside = frozenset(_rel(p, root) for p in absent if _inside(p, root))
            done = self._resolved[key] = (tuple((p, _rel(p, root)) for p in found), inside)
        return done


def _resolve(current: Path, imported: list[tuple[int, str, tuple[str, ...]]], folders: Sequence[Path],
             root: Path) -> tuple[list[Path], list[Path]]:
    found: list[Path] = []
    absent: list[Path] = []
    for level, module, names in imported:
        parts = [p for p in module.split(".") if p]
        if level:  # relative import inside a repo package
            base = current.parent
            for _ in range(level - 1):
                base = base.parent
            hits, missing = _descend([], base, parts, []) if parts else ([], [])
            pkg_dir: Path | None = base if not parts else None
        elif parts:
            hits, missing = _find(parts, folders)
            pkg_dir = None
        else:
            continue
        absent += missing
        if hits and hits[-1].name == "__init__.py":
            pkg_dir = hits[-1].parent
        if pkg_dir is not None:
            # `from pkg import name`: name may be a submodule of pkg
            for name in names:
                hits = hits + _descend([], pkg_dir, [name], [])[0]
        for hit in hits:
            hit = hit.resolve()
            if _inside(hit, root) and hit not in found:
                found.append(hit)
    return found, absent


def _path_additions(tree: ast.AST) -> list[ast.expr]:
    """The folder arguments of ``sys.path.insert(i, x)`` and ``sys.path.append(x)`` calls."""
    out: list[ast.expr] = []
    for node in ast.walk(tree):
        if not (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                and node.func.attr in ("insert", "append") and _dotted(node.func.value) == "sys.path"):
            continue
        args = node.args[1:] if node.func.attr == "insert" else node.args
        if len(args) == 1:
            out.append(args[0])
    return out


def _dotted(node: ast.AST) -> str:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        head = _dotted(node.value)
        return f"{head}.{node.attr}" if head else ""
    return ""


_PATH_WRAPPERS = frozenset({"str", "os.fspath", "Path", "pathlib.Path", "os.path.abspath", "os.path.realpath",
                            "os.path.normpath"})


def _folder_of(node: ast.AST, file: Path, bases: Sequence[Path]) -> list[Path]:
    """The folders a literal ``sys.path`` entry names: a string relative to the working folder (``bases``
    when that is not known), or built from ``__file__`` with ``os.path``/``pathlib``; [] for anything else."""
    if isinstance(node, ast.Constant) and isinstance(node.value, str):
        return [base / node.value for base in bases]
    if isinstance(node, ast.Name) and node.id == "__file__":
        return [file]
    if isinstance(node, ast.Attribute) and node.attr == "parent":
        return [p.parent for p in _folder_of(node.value, file, bases)]
    if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Div):
        right = node.right
        if isinstance(right, ast.Constant) and isinstance(right.value, str):
            return [p / right.value for p in _folder_of(node.left, file, bases)]
        return []
    if not isinstance(node, ast.Call):
        return []
    name = _dotted(node.func)
    if isinstance(node.func, ast.Attribute) and node.func.attr in ("resolve", "absolute") and not node.args:
        return _folder_of(node.func.value, file, bases)
    if name in _PATH_WRAPPERS and len(node.args) == 1:
        return _folder_of(node.args[0], file, bases)
    if name == "os.path.dirname" and len(node.args) == 1:
        return [p.parent for p in _folder_of(node.args[0], file, bases)]
    if name == "os.path.join" and node.args:
        heads = _folder_of(node.args[0], file, bases)
        tail = node.args[1:]
        if not all(isinstance(a, ast.Constant) and isinstance(a.value, str) for a in tail):
            return []
        return [h.joinpath(*(str(a.value) for a in tail if isinstance(a, ast.Constant))) for h in heads]
    return []


def local_imports(root: Path, script: str, folders: Sequence[Path], *, bases: Sequence[Path] = (),
                  reader: ImportReader | None = None) -> LocalImports:
    """Repo files ``script`` imports, directly or through other repo modules, without running anything.

    Parameters
    ----------
    root
        The repo root.
    script
        Repo-relative path of the script or notebook.
    folders
        Search folders from :func:`search_folders`.
    bases
        The folders a relative ``sys.path`` entry written as a literal (``sys.path.insert(0, "..")``) may be
        relative to: the script's working folder, or both candidates when it is not known (default: the
        repo root).  Folders added that way inside the repo are searched too.
    reader
        Parsed files to reuse across calls.

    Returns
    -------
    LocalImports
        Sorted repo-relative paths; imports of installed packages lead to no file
        (only to the absent repo paths that would shadow them).
    """
    root = root.resolve()
    reader = reader or ImportReader()
    bases = tuple(bases) or (root,)
    start = (root / script).resolve()
    folders = list(folders)
    seen: set[str] = {script}
    files: set[str] = set()
    absent: set[str] = set()
    queue = [start]
    while queue and len(files) < MAX_MODULES:
        current = queue.pop()
        imported, added = reader.read(current)
        _add_folders(folders, added, current, bases, root)
        hits, missing = reader.resolve(current, imported, tuple(folders), root)
        absent.update(missing)
        for hit, rel in hits:
            files.add(rel)
            if rel not in seen:
                seen.add(rel)
                queue.append(hit)
    files.discard(_rel(start, root) if _inside(start, root) else script)
    return LocalImports(files=tuple(sorted(files)), absent=tuple(sorted(absent)))


def _add_folders(folders: list[Path], added: list[ast.expr], current: Path, bases: tuple[Path, ...],
                 root: Path) -> None:
    """Append the repo folders that a file's literal ``sys.path`` entries name (in place, each once)."""
    for expr in added:
        for named in _folder_of(expr, current, bases):
            folder = _resolved(named)
            if folder is not None and _inside(folder, root) and folder.is_dir() and folder not in folders:
                folders.append(folder)


def _discovery_search(root: Path, script: str) -> tuple[list[Path], tuple[Path, ...]]:
    """Search folders and ``sys.path`` bases for a script whose working folder is not chosen yet.

    A ``src/`` layout's folder is searched too (the repo's package is imported from there once installed),
    and a literal relative ``sys.path`` entry may be relative to the repo root or the script's folder.
    """
    src = root / "src"
    folders = list(search_folders(root, script, "root", (str(src),) if src.is_dir() else ()))
    return folders, (root, (root / script).parent)


def import_edges(root: Path, scripts: Sequence[str]) -> dict[str, tuple[str, ...]]:
    """The repo's import graph as discovery sees it: repo file -> the repo files it imports directly.

    Each script's imports are resolved with its own search folders; a module reached from several
    scripts is followed once, with the folders of the first (scripts of one repo rarely see one module
    name resolve to different files).  Linear in the files and imports, whatever the depth of the graph.
    """
    root = root.resolve()
    reader = ImportReader()
    edges: dict[str, tuple[str, ...]] = {}
    for script in scripts:
        if script in edges:
            continue
        folders, bases = _discovery_search(root, script)
        queue = [(script, (root / script).resolve())]
        while queue:
            rel, current = queue.pop()
            if rel in edges:
                continue
            imported, added = reader.read(current)
            _add_folders(folders, added, current, bases, root)
            hits, _ = reader.resolve(current, imported, tuple(folders), root)
            edges[rel] = tuple(dict.fromkeys(r for _, r in hits if r != rel))
            queue += [(r, p) for p, r in hits if r not in edges]
    return edges


def _resolved(path: Path) -> Path | None:
    try:
        return path.resolve()
    except (OSError, RuntimeError):
        return None


def _inside(path: Path, root: Path) -> bool:
    try:
        path.relative_to(root)
        return True
    except ValueError:
        return False


def _rel(path: Path, root: Path) -> str:
    return path.relative_to(root).as_posix()


__all__ = ["ImportReader", "LocalImports", "code_of", "import_edges", "local_imports", "search_folders"]

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


def local_imports(root: Path, script: str, folders: Sequence[Path]) -> LocalImports:
    """Repo files ``script`` imports, directly or through other repo modules, without running anything.

    Parameters
    ----------
    root
        The repo root.
    script
        Repo-relative path of the script or notebook.
    folders
        Search folders from :func:`search_folders`.

    Returns
    -------
    LocalImports
        Sorted repo-relative paths; imports of installed packages lead to no file
        (only to the absent repo paths that would shadow them).
    """
    root = root.resolve()
    start = (root / script).resolve()
    seen: set[Path] = {start}
    files: set[Path] = set()
    absent: set[Path] = set()
    queue = [start]
    while queue and len(files) < MAX_MODULES:
        current = queue.pop()
        for text in code_of(current):
            try:
                tree = ast.parse(text)
            except (SyntaxError, ValueError):
                continue  # the run itself reports a script that does not parse
            for level, module, names in _imported(tree):
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
                absent.update(missing)
                if hits and hits[-1].name == "__init__.py":
                    pkg_dir = hits[-1].parent
                if pkg_dir is not None:
                    # `from pkg import name`: name may be a submodule of pkg
                    for name in names:
                        hits = hits + _descend([], pkg_dir, [name], [])[0]
                for hit in hits:
                    hit = hit.resolve()
                    if not _inside(hit, root):
                        continue
                    files.add(hit)
                    if hit not in seen:
                        seen.add(hit)
                        queue.append(hit)
    inside = {p for p in absent if _inside(p, root)}
    return LocalImports(files=tuple(sorted(_rel(p, root) for p in files if p != start)),
                        absent=tuple(sorted({_rel(p, root) for p in inside})))


def _inside(path: Path, root: Path) -> bool:
    try:
        path.relative_to(root)
        return True
    except ValueError:
        return False


def _rel(path: Path, root: Path) -> str:
    return path.relative_to(root).as_posix()


__all__ = ["LocalImports", "code_of", "local_imports", "search_folders"]

"""What a figure script saves, read from its code (nothing is executed).

Used for the scripts a check does not run (``--changed-files``, ``--shard``,
``exclude``): a committed figure is called an orphan only when no script could
have written it, so for a script that did not run figproof needs the names it
saves to.  The script and the repo modules it imports are parsed; every call of a
saving function (``savefig``, ``imsave``, ``save``, ...) must name its file with a
string literal, else nobody can tell what the script writes.
"""

from __future__ import annotations

import ast
from pathlib import Path

from figproof.discover.imports import code_of, local_imports, search_folders

# Calls that write a file named by their first argument (matplotlib, Pillow, numpy, plotly, imageio).
SAVE_CALLS = frozenset({"savefig", "imsave", "save", "print_figure", "write_image", "imwrite", "to_file"})


def _called_name(node: ast.Call) -> str | None:
    func = node.func
    if isinstance(func, ast.Attribute):
        return func.attr
    if isinstance(func, ast.Name):
        return func.id
    return None


def _target(node: ast.Call) -> ast.expr | None:
    if node.args:
        return node.args[0]
    for kw in node.keywords:
        if kw.arg in ("fname", "filename", "fp", "file", "path", "uri"):
            return kw.value
    return None


def _names_in(text: str) -> list[str] | None:
    """Literal file names the code saves to; None when a save names its file any other way."""
    try:
        tree = ast.parse(text)
    except (SyntaxError, ValueError, RecursionError, MemoryError):
        return None
    names: list[str] = []
    for node in ast.walk(tree):
        if not isinstance(node, ast.Call) or _called_name(node) not in SAVE_CALLS:
            continue
        target = _target(node)
        if isinstance(target, ast.Constant) and isinstance(target.value, str):
            names.append(target.value)
        else:
            return None
    return names


def saved_names(root: Path, script: str) -> tuple[str, ...] | None:
    """File names (as written in the code, sorted) that ``script`` and its repo modules save to.

    Returns None when that cannot be told: the code does not parse, or a save call names its file
    with anything but a string literal (a variable, an f-string, a loop over names).
    """
    paths = [root / script]
    folders = search_folders(root, script, "root")
    paths += [root / p for p in local_imports(root, script, folders).files]
    names: set[str] = set()
    for path in paths:
        texts = code_of(path)
        if not texts:
            return None
        for text in texts:
            found = _names_in(text)
            if found is None:
                return None
            names.update(found)
    return tuple(sorted(names))


__all__ = ["SAVE_CALLS", "saved_names"]

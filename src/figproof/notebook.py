"""The one reader of notebooks' code: discovery, import tracing, allow comments and the child all use it.

Cells are numbered from :data:`FIRST_CELL` by their position in the notebook, markdown cells included, so
a number names the same cell everywhere (reports, allow comments, the child's tracebacks).  IPython syntax
is not Python: :func:`python_source` blanks magics, shell escapes and help lines, keeping the line count so
a finding's line is the line the user sees in the cell.  Standard library only (the child imports it).
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass
from typing import Any

FIRST_CELL = 1
# %magic, !shell, ?name and name? lines (IPython's syntax, not Python's)
_IPYTHON_LINE = re.compile(r"^\s*([%!]|\?\w|\w+\?$)")
MATPLOTLIB_MAGIC = re.compile(r"^[ \t]*%(?:matplotlib|pylab)\b", re.M)


class NotebookError(ValueError):
    """The file is not a notebook figproof can read (not JSON, or no list of cells)."""


@dataclass(frozen=True, slots=True)
class Cell:
    """One code cell: its position (from :data:`FIRST_CELL`, all cells counted) and its source as written."""

    number: int
    source: str


def _cells_of(nb: Any) -> list[Any]:
    if not isinstance(nb, dict):
        raise NotebookError("the file holds no notebook object")
    cells = nb.get("cells")
    if cells is None and isinstance(nb.get("worksheets"), list) and nb["worksheets"]:
        first = nb["worksheets"][0]  # nbformat 3 keeps cells in worksheets, source under "input"
        cells = first.get("cells") if isinstance(first, dict) else None
    if not isinstance(cells, list):
        raise NotebookError("the notebook has no list of cells")
    return cells


def code_cells(data: bytes | str) -> list[Cell]:
    """The code cells of a notebook file's content.

    Raises
    ------
    NotebookError
        When the content is not JSON or holds no list of cells.
    """
    try:
        nb = json.loads(data)
    except (ValueError, RecursionError) as exc:
        raise NotebookError(f"not valid notebook JSON ({type(exc).__name__})") from None
    out: list[Cell] = []
    for number, cell in enumerate(_cells_of(nb), start=FIRST_CELL):
        if not isinstance(cell, dict) or cell.get("cell_type") != "code":
            continue
        src = cell.get("source", cell.get("input", ""))
        if isinstance(src, list):  # the format allows a source stored as a list of lines
            src = "".join(s for s in src if isinstance(s, str))
        if isinstance(src, str):
            out.append(Cell(number, src))
    return out


def python_source(source: str) -> str:
    """A cell's source with IPython-only lines blanked; a cell magic (``%%bash``) blanks the whole cell."""
    lines = source.splitlines()
    if lines and lines[0].lstrip().startswith("%%"):
        return "\n" * (len(lines) - 1)
    return "\n".join("" if _IPYTHON_LINE.match(line) else line for line in lines)


_BACKEND_MAGIC = re.compile(r"^[ \t]*%matplotlib[ \t]+(?P<backend>[\w.:/-]+)", re.M)
_CLOSE_SETTING = re.compile(r"(?:InlineBackend\.close_figures\s*=\s*|set_matplotlib_close\(\s*(?:close\s*=\s*)?)"
                            r"(?P<value>True|False)")


@dataclass(frozen=True, slots=True)
class InlineDisplay:
    """What Jupyter's inline display does at the end of a cell (matplotlib-inline's ``flush_figures``).

    ``inline``: the inline backend is on (the default; ``%matplotlib widget`` and the like turn it off).
    ``close_figures``: its ``InlineBackend.close_figures`` setting (default True; ``%config
    InlineBackend.close_figures = False`` or ``set_matplotlib_close(False)`` turn it off).
    """

    inline: bool = True
    close_figures: bool = True

    def after(self, source: str) -> InlineDisplay:
        """The settings once a cell with this source has run (the last statement of each kind wins)."""
        inline, close = self.inline, self.close_figures
        for m in _BACKEND_MAGIC.finditer(source):
            inline = m.group("backend").lower() in ("inline", "module://matplotlib_inline.backend_inline")
        for m in _CLOSE_SETTING.finditer(source):
            close = m.group("value") == "True"
        return InlineDisplay(inline=inline, close_figures=close)

    @property
    def closes(self) -> bool:
        """Whether figures drawn in a cell are shown and closed when the cell ends."""
        return self.inline and self.close_figures


def blanked_lines(source: str) -> int:
    """How many lines :func:`python_source` blanks in ``source``."""
    before = source.splitlines()
    after = python_source(source).split("\n")
    return sum(1 for i, line in enumerate(before) if line and (i >= len(after) or after[i] != line))


__all__ = ["FIRST_CELL", "MATPLOTLIB_MAGIC", "Cell", "InlineDisplay", "NotebookError", "blanked_lines", "code_cells",
           "python_source"]

"""Plain-data model of what a figure script drew and how its run went.

Everything here is a frozen, slotted, keyword-only dataclass that serialises
explicitly with ``to_json()`` / ``from_json()``.  Numeric arrays travel as
``.npy`` files next to the JSON (loaded with ``allow_pickle=False``), because
the child process that builds the model runs untrusted code and must never
hand the parent a pickle.

Coordinates: every mark carries its values in *data* coordinates and, where a
rule needs geometry, in *display* coordinates (pixels of the rendered figure,
origin bottom-left as in matplotlib).  Colours are RGBA floats in [0, 1].
"""

from __future__ import annotations

import dataclasses
import functools
import json
import types
import typing
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, ClassVar, Literal, TypeVar, dataclass_transform

import numpy as np

SCHEMA_VERSION = 1

RGBA = tuple[float, float, float, float]
Array = np.ndarray


# --------------------------------------------------------------------------
# serialisation
# --------------------------------------------------------------------------


class ArrayStore:
    """Keeps the arrays of one serialised model; on disk they are one uncompressed ``arrays.npz``.

    An .npz file is a zip of .npy files; it is read with ``allow_pickle=False``.
    """

    FILE = "arrays.npz"

    def __init__(self, folder: Path | None = None) -> None:
        self.folder = folder
        self.arrays: dict[str, np.ndarray] = {}
        self._archive: Any = None

    def put(self, array: np.ndarray) -> str:
        key = f"a{len(self.arrays)}"
        array = np.ascontiguousarray(array)
        if array.dtype == object:
            raise TypeError("object arrays cannot be serialised without pickle")
        self.arrays[key] = array
        return key

    def get(self, key: str) -> np.ndarray:
        if key not in self.arrays:
            if self.folder is None:
                raise KeyError(key)
            if self._archive is None:
                self._archive = np.load(self.folder / self.FILE, allow_pickle=False)
            self.arrays[key] = self._archive[key]
        return self.arrays[key]

    def save(self) -> None:
        """Write every array put so far to ``folder/arrays.npz``."""
        if self.folder is None:
            raise ValueError("this store has no folder")
        with open(self.folder / self.FILE, "wb") as fh:
            np.savez(fh, **self.arrays)  # type: ignore[arg-type]  # numpy's stub types **kwds as allow_pickle


def _encode(value: Any, store: ArrayStore) -> Any:
    if isinstance(value, np.ndarray):
        return {"$array": store.put(value)}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: _encode(getattr(value, f.name), store) for f in dataclasses.fields(value)}
    if isinstance(value, (list, tuple)):
        return [_encode(v, store) for v in value]
    if isinstance(value, Mapping):
        return {str(k): _encode(v, store) for k, v in value.items()}
    if isinstance(value, (np.floating, np.integer, np.bool_)):
        return value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return {"$float": repr(value)}
    return value


@functools.cache
def _hints(tp: type) -> dict[str, Any]:
    """Resolved field types of a model class (resolving them is slow; the classes never change)."""
    return typing.get_type_hints(tp)


def _decode(tp: Any, value: Any, store: ArrayStore) -> Any:
    if value is None:
        return None
    if isinstance(value, dict) and "$array" in value:
        return store.get(value["$array"])
    if isinstance(value, dict) and "$float" in value:
        return float(value["$float"])
    origin = typing.get_origin(tp)
    args = typing.get_args(tp)
    if origin in (typing.Union, types.UnionType):
        non_none = [a for a in args if a is not type(None)]
        return _decode(non_none[0], value, store) if len(non_none) == 1 else value
    if isinstance(tp, type) and dataclasses.is_dataclass(tp):
        hints = _hints(tp)
        return tp(**{k: _decode(hints[k], v, store) for k, v in value.items() if k in hints})
    if origin is tuple:
        if len(args) == 2 and args[1] is Ellipsis:
            return tuple(_decode(args[0], v, store) for v in value)
        if args:
            return tuple(_decode(a, v, store) for a, v in zip(args, value, strict=True))
        return tuple(value)
    if origin is list:
        return [_decode(args[0], v, store) for v in value]
    if origin is dict:
        return {k: _decode(args[1], v, store) for k, v in value.items()}
    return value


class Serialisable:
    """Mixin: explicit JSON round trip for the model's dataclasses."""

    __slots__ = ()

    def to_json(self, store: ArrayStore | None = None) -> dict[str, Any]:
        """Return a JSON-ready dict; arrays go to ``store`` (a fresh in-memory one if omitted)."""
        return _encode(self, store if store is not None else ArrayStore())

    @classmethod
    def from_json(cls, data: Mapping[str, Any], store: ArrayStore | None = None) -> Any:
        """Rebuild an instance from :meth:`to_json` output and the same store."""
        return _decode(cls, dict(data), store if store is not None else ArrayStore())


# The closed vocabularies of the model (JSON carries them as plain strings).
LineRole = Literal["data", "errorbar", "reference", "box", "violin"]  # reference: axhline/axvline
Orientation = Literal["vertical", "horizontal"]  # vertical: bars and error bars extend along y
ErrorBarOrigin = Literal["errorbar", "lines"]  # lines: seaborn draws its intervals as Line2D
ColorMappedKind = Literal["image", "mesh", "scatter", "contour", "colorbar"]
TextRole = Literal["title", "xlabel", "ylabel", "tick", "legend", "annotation", "text"]
PatchKind = Literal["legend", "legend-entry", "fill", "rectangle", "polygon", "other"]
Projection = Literal["rectilinear", "polar", "3d", "other"]
ErrorKind = Literal["exception", "timeout", "memory", "signal", "exit", "needs-input", "no-report"]
# probe: an existence check (os.path.exists, Path.is_file, glob.glob, ...) that found nothing
FileAction = Literal["read", "write", "save", "network", "missing", "blocked-write", "subprocess", "probe"]
RunStatus = Literal["ok", "failed", "timeout", "memory", "skipped"]
WorkingDir = Literal["root", "script"]

_T = TypeVar("_T")


@dataclass_transform(frozen_default=True, kw_only_default=True, field_specifiers=(field,))
def model(cls: type[_T]) -> type[_T]:
    """Make ``cls`` a frozen, slotted, keyword-only dataclass (the shape of every model record)."""
    return dataclass(frozen=True, slots=True, kw_only=True)(cls)


def _empty() -> np.ndarray:
    return np.zeros(0)


def _arr(default: Any = None) -> Any:
    return field(default_factory=_empty) if default is None else field(default=default)


# --------------------------------------------------------------------------
# where something came from
# --------------------------------------------------------------------------


@model
class Source(Serialisable):
    """A place in the user's code: repo-relative POSIX path, 1-based line, notebook cell index."""

    path: str
    line: int | None = None
    cell: int | None = None

    def __str__(self) -> str:
        cell = f" cell {self.cell}" if self.cell is not None else ""
        line = f":{self.line}" if self.line is not None else ""
        return f"{self.path}{cell}{line}"


# --------------------------------------------------------------------------
# marks
# --------------------------------------------------------------------------


@model
class PointSet(Serialisable):
    """Markers drawn at data positions: a scatter collection or the markers of a line.

    ``kind`` is ``"scatter"`` (a PathCollection, also seaborn strip/swarm) or
    ``"line"`` (markers on a Line2D).  ``sizes`` are marker areas in points²
    (one per point, or one for all).  ``facecolors``/``edgecolors`` are N×4 or 1×4.
    ``color_values`` holds the numbers mapped through a colour map (``c=``), if any.
    """

    kind: str
    x: Array = _arr()
    y: Array = _arr()
    px: Array = _arr()
    py: Array = _arr()
    sizes: Array = _arr()
    facecolors: Array = _arr()
    edgecolors: Array = _arr()
    alpha: float | None = None
    marker: str = "o"
    zorder: float = 1.0
    label: str = ""
    colormap: int | None = None  # index into Axes.colormaps when c= mapped values
    source: Source | None = None
    draw_order: int | None = None  # index among the axes' children: matplotlib draws equal z-orders in this order
    backdrops: Array = _arr()  # N×4: the colour beneath each marker (NaN: the axes face); empty when not measured


@model
class Line(Serialisable):
    """A Line2D: vertices in data and display coordinates, style and colour."""

    x: Array = _arr()
    y: Array = _arr()
    px: Array = _arr()
    py: Array = _arr()
    color: RGBA = (0.0, 0.0, 0.0, 1.0)
    linewidth: float = 1.0
    linestyle: str = "-"
    marker: str = ""
    markersize: float = 6.0
    zorder: float = 2.0
    label: str = ""
    role: LineRole = "data"
    source: Source | None = None


@model
class BarSet(Serialisable):
    """A group of bars (a BarContainer, or rectangles found in a row on a shared baseline).

    Values are along the value axis: vertical bars have ``positions`` on x and
    ``heights`` on y.  ``origin`` tells who made them: ``bar``, ``hist``,
    ``pandas``, ``seaborn``, ``rectangles``.
    """

    orientation: Orientation = "vertical"
    positions: Array = _arr()
    widths: Array = _arr()
    bottoms: Array = _arr()
    heights: Array = _arr()
    facecolors: Array = _arr()
    edgecolors: Array = _arr()
    display_boxes: Array = _arr()  # N×4: x0, y0, x1, y1 pixels
    origin: str = "bar"
    label: str = ""
    zorder: float = 1.0
    hatch: str = ""
    source: Source | None = None
    draw_order: int | None = None  # index among the axes' children: matplotlib draws equal z-orders in this order


@model
class ErrorBars(Serialisable):
    """Error bars: centre and both ends along the value axis, one per bar/point."""

    orientation: Orientation = "vertical"
    positions: Array = _arr()
    centers: Array = _arr()
    lower: Array = _arr()
    upper: Array = _arr()
    color: RGBA = (0.0, 0.0, 0.0, 1.0)
    origin: ErrorBarOrigin = "errorbar"
    source: Source | None = None


@model
class Box(Serialisable):
    """One box of a box plot along the value axis."""

    orientation: Orientation = "vertical"
    position: float = 0.0
    median: float = float("nan")
    q1: float = float("nan")
    q3: float = float("nan")
    whislo: float = float("nan")
    whishi: float = float("nan")
    fliers: Array = _arr()
    n: int | None = None  # sample size when the statistics call was recorded
    sample: int | None = None  # index into FigureModel.samples of the raw values
    source: Source | None = None


@model
class Violin(Serialisable):
    """One violin body: position and the value-axis extent of its density."""

    orientation: Orientation = "vertical"
    position: float = 0.0
    low: float = float("nan")
    high: float = float("nan")
    n: int | None = None
    sample: int | None = None
    source: Source | None = None


@model
class ColorMapping(Serialisable):
    """A colour map as used by an image, mesh, scatter ``c=``, contour set or colorbar.

    ``samples`` are 256×4 RGBA values sampled evenly over the map (for a
    ListedColormap with fewer colours, its ``n_colors`` tells how many are distinct).
    ``is_rgb`` marks images drawn without a colour map (RGB/RGBA arrays).
    """

    kind: ColorMappedKind
    name: str = ""
    samples: Array = _arr()
    n_colors: int = 256
    is_rgb: bool = False
    shape: tuple[int, ...] = ()
    vmin: float | None = None
    vmax: float | None = None
    source: Source | None = None


@model
class Text(Serialisable):
    """A visible text: labels, titles, tick labels, annotations, legend texts."""

    text: str
    role: TextRole = "text"
    color: RGBA = (0.0, 0.0, 0.0, 1.0)
    background: RGBA | None = None  # bbox patch face colour when the text has one
    fontsize: float = 10.0
    weight: str = "normal"
    display_box: tuple[float, float, float, float] = (0.0, 0.0, 0.0, 0.0)
    in_axes: bool = True
    source: Source | None = None
    backdrop: RGBA | None = None  # the opaque colour beneath the text (image cell, bar, patch), None: the face


@model
class Patch(Serialisable):
    """A filled shape other than a bar (legend frame, fill_between, polygons, rectangles)."""

    kind: PatchKind
    display_box: tuple[float, float, float, float] = (0.0, 0.0, 0.0, 0.0)
    facecolor: RGBA = (0.0, 0.0, 0.0, 0.0)
    edgecolor: RGBA = (0.0, 0.0, 0.0, 0.0)
    zorder: float = 1.0
    label: str = ""
    source: Source | None = None
    draw_order: int | None = None  # index among the axes' children: matplotlib draws equal z-orders in this order
    linestyle: str = "-"  # of the outline
    hatch: str = ""


@model
class Axis(Serialisable):
    """One axis of an Axes: its view limits, scale and label."""

    lim: tuple[float, float] = (0.0, 1.0)
    scale: str = "linear"
    label: str = ""
    inverted: bool = False
    categorical: bool = False
    dates: bool = False
    ticks: tuple[tuple[float, str], ...] = ()  # major tick positions with their labels, as drawn
    autoscaled: bool = True  # False when the script set the limits itself (set_xlim, set_ylim, seaborn's grids)
    shared: bool = False  # the limits are shared with a sibling axes (sharex/sharey)
    limit_source: Source | None = None  # the user's line that last set these view limits


@model
class Axes(Serialisable):
    """One Axes of a figure with everything drawn in it (only artists still attached after drawing)."""

    index: int
    display_box: tuple[float, float, float, float] = (0.0, 0.0, 1.0, 1.0)
    projection: Projection = "rectilinear"
    x: Axis = field(default_factory=Axis)
    y: Axis = field(default_factory=Axis)
    title: str = ""
    facecolor: RGBA = (1.0, 1.0, 1.0, 1.0)
    is_colorbar: bool = False
    points: tuple[PointSet, ...] = ()
    lines: tuple[Line, ...] = ()
    bars: tuple[BarSet, ...] = ()
    errorbars: tuple[ErrorBars, ...] = ()
    boxes: tuple[Box, ...] = ()
    violins: tuple[Violin, ...] = ()
    colormaps: tuple[ColorMapping, ...] = ()
    texts: tuple[Text, ...] = ()
    patches: tuple[Patch, ...] = ()
    legend_labels: tuple[str, ...] = ()
    legend_box: tuple[float, float, float, float] | None = None
    axis_on: bool = True  # False after ax.axis("off") / set_axis_off(): a picture or a pie, not a plot


# --------------------------------------------------------------------------
# what the script did: calls, data, figures
# --------------------------------------------------------------------------


@model
class Sample(Serialisable):
    """A group of raw values handed to a statistics helper (boxplot_stats, violin_stats) or a plotting call."""

    values: Array = _arr()
    origin: str = ""  # e.g. "boxplot_stats", "violin_stats", "bar"
    source: Source | None = None


@model
class PlotCall(Serialisable):
    """Raw numeric arguments of one plotting call (bar, scatter, plot, errorbar, hist, ...)."""

    name: str
    axes: int | None = None
    arrays: dict[str, Array] = field(default_factory=dict)
    source: Source | None = None


@model
class LoadedTable(Serialisable):
    """Numeric columns of a table or array the script loaded (size-capped)."""

    path: str
    reader: str
    columns: dict[str, Array] = field(default_factory=dict)
    truncated: bool = False
    source: Source | None = None
    groups: dict[str, Array] = field(default_factory=dict)  # text/category columns as integer codes (-1 = missing)


@model
class FigureModel(Serialisable):
    """One figure the script created, as drawn once after the script ended."""

    id: str  # "<script path>#<n>", n counting from 1 in creation order
    script: str
    number: int
    dpi: float = 100.0
    size_px: tuple[int, int] = (640, 480)
    facecolor: RGBA = (1.0, 1.0, 1.0, 1.0)
    axes: tuple[Axes, ...] = ()
    outputs: tuple[str, ...] = ()  # repo-relative paths the script saved this figure to
    samples: tuple[Sample, ...] = ()
    calls: tuple[PlotCall, ...] = ()
    tables: tuple[LoadedTable, ...] = ()  # tables the script loaded (shared by its figures)
    render: str | None = None  # path of a PNG rendering in the run's artifact folder
    source: Source | None = None
    notes: tuple[str, ...] = ()
    texts: tuple[Text, ...] = ()  # figure-level texts (suptitle, fig.text), background = figure face colour
    inline_render: str | None = None  # notebooks: a PNG rendered as the inline backend shows it (tight bbox)


@model
class ScriptError(Serialisable):
    """Why a script did not finish."""

    kind: ErrorKind
    type: str = ""
    message: str = ""
    source: Source | None = None  # the innermost frame in the user's code (maybe in a helper module)
    called_from: Source | None = None  # when ``source`` is in another file: the ran script's own innermost frame
    text: str = ""  # a SyntaxError's failing line as written (Python 2 code is recognised by it)


@model
class FileEvent(Serialisable):
    """A file (or network) access the child saw: what, where, and from which line."""

    action: FileAction
    path: str  # repo-relative when inside the repo, else as given
    inside_repo: bool = True
    exists: bool = True
    sha256: str | None = None
    format: str | None = None
    source: Source | None = None
    operation: str = ""  # blocked-write: what was refused ("remove", "rename", ...); subprocess: its command line;
    # probe: the existence check (os.path.exists, glob.glob, ...)
    link: str = ""  # a read through a symbolic link in the repo that leads out of it: what the link holds
    home: bool = False  # outside the repo: the path lies in the user's home folder (or starts with ~)


@model
class ScriptRun(Serialisable):
    """Everything figproof learnt from running one script or notebook."""

    SCHEMA: ClassVar[int] = SCHEMA_VERSION

    path: str
    status: RunStatus
    seconds: float = 0.0
    working_dir: WorkingDir = "root"
    error: ScriptError | None = None
    figures: tuple[FigureModel, ...] = ()
    events: tuple[FileEvent, ...] = ()
    stdout_tail: str = ""
    stderr_tail: str = ""
    isolation: tuple[str, ...] = ()  # e.g. "repo-overlay" (or -reflink, -copy), "memory-cap", "network-off"
    notes: tuple[str, ...] = ()
    freetype: str = ""  # the FreeType version matplotlib drew text with in the child


def dump_run(run: ScriptRun, folder: Path) -> Path:
    """Write ``run`` as ``run.json`` plus ``arrays.npz`` into ``folder``; return the JSON path."""
    folder.mkdir(parents=True, exist_ok=True)
    store = ArrayStore(folder)
    data = {"schema": SCHEMA_VERSION, "run": run.to_json(store)}
    store.save()
    path = folder / "run.json"
    path.write_text(json.dumps(data, sort_keys=True, allow_nan=False), encoding="utf-8")
    return path


def load_run(folder: Path) -> ScriptRun:
    """Read a run written by :func:`dump_run` (arrays loaded without pickle)."""
    data = json.loads((folder / "run.json").read_text(encoding="utf-8"))
    if data.get("schema") != SCHEMA_VERSION:
        raise ValueError(f"{folder / 'run.json'}: unsupported model schema {data.get('schema')!r}")
    return ScriptRun.from_json(data["run"], ArrayStore(folder))

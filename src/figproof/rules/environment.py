"""Scripts that fail because of the environment they run in, not their own code; one finding per cause.

Most figure scripts that stop on another machine stop for reasons outside the science: a package that machine
lacks (often the Excel reader pandas needs), code written for Python 2, a library API removed since, a pickle
bound to the library version that wrote it, a path on the author's computer.  :func:`failure_cause` recognises
these in a failed run's error (pure: the error's type, message and failing line), :func:`verdict` says what to
do in plain words, and the rule ``environment-mismatch`` reports one finding per cause for the whole check,
naming its scripts; ``script-fails`` then reports each of those failures as a note pointing at it.  Deposits
(:mod:`figproof.deposit.environment`) group their failures with the same functions.
"""

from __future__ import annotations

import re
from collections.abc import Collection, Iterator
from dataclasses import dataclass
from typing import Literal

from figproof.model.context import RunContext
from figproof.model.findings import Hit
from figproof.model.records import ScriptRun, Source
from figproof.rules.base import Knobs, rule

# Import names whose distribution has another name, for packages that are not installed (installed ones are
# looked up in importlib.metadata).  From memory of each project's install instructions.
IMPORT_TO_DIST = {
    "sklearn": "scikit-learn", "skimage": "scikit-image", "cv2": "opencv-python", "PIL": "Pillow",
    "yaml": "PyYAML", "bs4": "beautifulsoup4", "Bio": "biopython", "dateutil": "python-dateutil",
    "mpl_toolkits": "matplotlib", "docx": "python-docx", "pptx": "python-pptx", "Crypto": "pycryptodome",
    "serial": "pyserial", "igraph": "python-igraph", "osgeo": "GDAL", "umap": "umap-learn", "jwt": "PyJWT",
    "attr": "attrs", "tables": "tables", "netCDF4": "netCDF4", "mne": "mne", "nibabel": "nibabel",
    "statsmodels": "statsmodels", "Levenshtein": "python-Levenshtein", "magic": "python-magic",
    "dotenv": "python-dotenv", "fitz": "PyMuPDF", "google.protobuf": "protobuf", "sounddevice": "sounddevice",
    "wx": "wxPython", "gi": "PyGObject", "OpenGL": "PyOpenGL", "pymc3": "pymc3", "cartopy": "Cartopy",
    "shapely": "shapely", "odf": "odfpy", "mpl_scatter_density": "mpl-scatter-density", "xarray": "xarray",
}
# Readers pandas needs for a data format (pandas' "Optional dependencies" table of its installation guide).
READERS: dict[str, tuple[str, str]] = {  # suffix -> (import name, distribution)
    ".xlsx": ("openpyxl", "openpyxl"), ".xlsm": ("openpyxl", "openpyxl"), ".xls": ("xlrd", "xlrd"),
    ".ods": ("odf", "odfpy"), ".parquet": ("pyarrow", "pyarrow"), ".feather": ("pyarrow", "pyarrow"),
    ".h5": ("tables", "tables"), ".hdf5": ("tables", "tables"), ".hdf": ("tables", "tables"),
}
# Python 2 syntax that Python 3 refuses, looked for on the line compile() stops at.
# From memory of Python 3.0's "What's New" (print, except, backticks, <>, exec, octal and ur literals).
_PY2_SYNTAX: tuple[tuple[str, re.Pattern[str]], ...] = (
    ("print statement", re.compile(r"^\s*print(\s+[^\s(=.,)]|\s*$|\s*>>)")),
    ("except E, e", re.compile(r"^\s*except\s+[\w.]+\s*,\s*\w+\s*:")),
    ("backtick repr", re.compile(r"`[^`\n]+`")),
    ("<> operator", re.compile(r"<>")),
    ("exec statement", re.compile(r"^\s*exec\s+[\"'\w]")),
    ("raise E, msg", re.compile(r"^\s*raise\s+[\w.]+\s*,")),
    ("octal literal 0NNN", re.compile(r"(?<![\w.])0[0-7]+\b")),
    ("ur'' literal", re.compile(r"(?<![\w])ur[\"']", re.I)),
)
# pandas < 3 says "Missing optional dependency 'openpyxl'", pandas 3 "`Import openpyxl` failed"
_MISSING_OPTIONAL = re.compile(r"Missing optional dependency '([\w.\-]+)'|`Import ([\w.\-]+)` failed")
_NO_MODULE = re.compile(r"No module named '([\w.]+)'")
_ABSOLUTE = re.compile(r"'((?:/(?:Users|home|Volumes|mnt|media)/|[A-Za-z]:[\\/]|~/)[^']*)'")

#: The causes figproof recognises; ``author-path`` only in deposits (in a repo, input-outside-repo reports it).
CauseKind = Literal["package-missing", "python2-only", "api-removed", "pickle-version", "author-path"]


@dataclass(frozen=True, slots=True, kw_only=True)
class ApiChange:
    """A library API that a release removed or changed, recognised in an error message."""

    library: str
    pattern: re.Pattern[str]
    what: str  # plain words: what changed, in which release, what to use instead


# Removals seen in figure scripts, each matched on the error message.  Sources: pandas 2.0.0 release notes
# ("Removal of prior version deprecations/changes"), NumPy 1.24.0 release notes ("Expired deprecations": the
# aliases np.float, np.int, ... deprecated in 1.20), the NumPy 2.0 migration guide (removed namespace members),
# matplotlib 3.9.0 API changes (matplotlib.cm.get_cmap removed), matplotlib 3.6.0 API changes (the "seaborn"
# style names renamed "seaborn-v0_8"), seaborn 0.12 release notes (keyword-only data arguments).
API_CHANGES: tuple[ApiChange, ...] = (
    ApiChange(library="pandas", pattern=re.compile(r"'DataFrame' object has no attribute 'append'|"
                                                   r"'Series' object has no attribute 'append'"),
              what="pandas 2.0 removed DataFrame.append and Series.append (use pandas.concat)"),
    ApiChange(library="pandas", pattern=re.compile(r"object has no attribute 'iteritems'"),
              what="pandas 2.0 removed iteritems (use items)"),
    ApiChange(library="pandas", pattern=re.compile(r"unexpected keyword argument '(error_bad_lines|warn_bad_lines|"
                                                   r"squeeze|line_terminator|date_parser|infer_datetime_format|"
                                                   r"mangle_dupe_cols|prefix)'"),
              what="pandas 2.0 removed a reader/writer argument the script passes (see the pandas 2.0 release "
                   "notes for its replacement)"),
    ApiChange(library="pandas", pattern=re.compile(r"object has no attribute '(ix|as_matrix|get_value|set_value|"
                                                   r"sortlevel|select|lookup|swaplevel_|is_copy|ftypes)'"),
              what="pandas removed an accessor the script uses (.ix, .as_matrix, get_value, lookup ...; use .loc, "
                   ".iloc or .to_numpy)"),
    ApiChange(library="numpy", pattern=re.compile(r"module 'numpy' has no attribute '(float|int|bool|object|str|"
                                                  r"complex|long|unicode)'"),
              what="NumPy 1.24 removed the aliases np.float, np.int, np.bool, np.object, np.str (use float, int, "
                   "bool, object, str)"),
    ApiChange(library="numpy", pattern=re.compile(r"module 'numpy' has no attribute '(NaN|NAN|Inf|Infinity|PINF|NINF|"
                                                  r"float_|complex_|product|cumproduct|alltrue|sometrue|asfarray|"
                                                  r"round_|string_|unicode_|mat|Inf)'|"
                                                  r"`np\.\w+` was removed in the NumPy 2\.0 release"),
              what="NumPy 2.0 removed a namespace alias the script uses (np.NaN, np.Inf, np.float_, np.product ...; "
                   "see the NumPy 2.0 migration guide)"),
    ApiChange(library="matplotlib",
              pattern=re.compile(r"module 'matplotlib\.cm' has no attribute "
                                 r"'(get_cmap|register_cmap|unregister_cmap)'"),
              what="matplotlib 3.9 removed matplotlib.cm.get_cmap, register_cmap and unregister_cmap (use "
                   "matplotlib.colormaps[name] and matplotlib.colormaps.register)"),
    ApiChange(library="matplotlib", pattern=re.compile(r"'seaborn[\w-]*' (is )?not (found|a valid package style)"),
              what="matplotlib 3.6 renamed the 'seaborn' styles to 'seaborn-v0_8-...'"),
    ApiChange(library="matplotlib", pattern=re.compile(r"unexpected keyword argument '(normed|hold|b)'"),
              what="matplotlib removed an argument the script passes (normed= became density=; hold= and b= "
                   "are gone)"),
)


def python2_line(line: str, message: str = "") -> str | None:
    """What Python 2 syntax ``line`` holds (the line Python 3's compiler stopped at, and its message), or None."""
    if "Missing parentheses in call to 'print'" in message:
        return "print statement"
    if "Missing parentheses in call to 'exec'" in message:
        return "exec statement"
    for what, pattern in _PY2_SYNTAX:
        if pattern.search(line):
            return what
    return None


def distribution_name(module: str) -> str:
    """The distribution that usually provides import name ``module`` (the table; else the name itself)."""
    return IMPORT_TO_DIST.get(module, module)


def failure_cause(run: ScriptRun, python2: Collection[str] = ()) -> tuple[CauseKind, str] | None:
    """(kind, key) of the environmental cause of ``run``'s failure, or None when it is not environmental.

    ``python2``: paths of scripts a survey of their code found Python 2 syntax in (a deposit's); without it a
    ``SyntaxError`` counts when its failing line (or message) is Python 2 syntax.  A missing dotted module
    whose package is there (``No module named 'pandas.core.indexes.numeric'``: Python names the first part
    it cannot find, so ``pandas`` was found) is a pickle or module made with another version of the package.
    """
    err = run.error
    if run.status == "ok" or err is None:
        return None
    message = f"{err.type}: {err.message}"
    if err.type in ("SyntaxError", "IndentationError", "TabError") and (
            run.path in python2 or python2_line(err.text, err.message) is not None):
        return "python2-only", "python2"
    optional = _MISSING_OPTIONAL.search(message)
    if optional:
        return "package-missing", distribution_name((optional.group(1) or optional.group(2)).split(".")[0])
    missing = _NO_MODULE.search(message) if err.type in ("ModuleNotFoundError", "ImportError") else None
    if missing:
        module = missing.group(1)
        top = module.split(".")[0]
        if "." in module:
            return "pickle-version", top
        return "package-missing", distribution_name(top)
    for change in API_CHANGES:
        if change.pattern.search(message):
            return "api-removed", change.what
    if err.type in ("FileNotFoundError", "OSError", "IOError", "PermissionError") and _ABSOLUTE.search(message):
        return "author-path", "absolute"
    return None


def _scripts(n: int) -> str:
    return f"{n} script{'s' * (n != 1)}"


def reader_suffixes(distribution: str) -> tuple[str, ...]:
    """The data-file suffixes pandas needs ``distribution`` to read (``openpyxl``: ``.xlsx``), first one only."""
    return tuple(s for s, (_, dist) in READERS.items() if dist == distribution)[:1]


def verdict(kind: CauseKind, key: str, n: int, *, suffixes: tuple[str, ...] = (), installed: str | None = None
            ) -> str:
    """What to do about a cause of ``n`` failed scripts, in plain words.

    ``suffixes``: for a missing reader, the data files it reads (default: :func:`reader_suffixes`);
    ``installed``: for a version-bound pickle, the version of the package installed here, when known.
    """
    if kind == "package-missing":
        suffixes = suffixes or reader_suffixes(key)
        purpose = f"read the {'/'.join(suffixes)} inputs of" if suffixes else "run"
        return f"install {key} to {purpose} {_scripts(n)}"
    if kind == "python2-only":
        it = "it" if n == 1 else "them"
        return f"{_scripts(n)} {'is' if n == 1 else 'are'} Python 2 code, which Python 3 cannot run; run {it} " \
               f"with Python 2.7 or port {it} to Python 3"
    if kind == "api-removed":
        return f"{key}: this breaks {_scripts(n)}; install the library version the scripts were written for, or " \
               f"update the call"
    if kind == "pickle-version":
        here = f"the {installed}" if installed else "the one"
        return f"{_scripts(n)} load{'s' * (n == 1)} a pickle (or module) made with another version of {key} " \
               f"than {here} installed here; install the version the scripts were made with"
    return f"{_scripts(n)} read{'s' * (n == 1)} files by a path on the author's computer; the path must be " \
           f"made relative to the repo"


def reason(kind: CauseKind, key: str) -> str:
    """Why one script stops, for its script-fails note: "the package 'umap-learn' is not installed"."""
    return {
        "package-missing": f"the package '{key}' is not installed",
        "python2-only": "it is Python 2 code",
        "api-removed": key,
        "pickle-version": f"it needs another version of {key}",
        "author-path": "it reads a path on the author's computer",
    }[kind]


def repo_cause(run: ScriptRun) -> tuple[CauseKind, str] | None:
    """The cause ``environment-mismatch`` reports for ``run`` in a repo check (not the author's paths)."""
    found = failure_cause(run)
    return found if found is not None and found[0] != "author-path" else None


@rule(
    "environment-mismatch",
    severity="error",
    confidence="certain",
    scope="run",
    why="""
        A script that stops at an import, at Python 2 syntax or at a call a library has since removed says
        nothing about the figure: it says the environment differs from the author's. Reported once per
        cause for the whole check, with the scripts it stops, so that one missing Excel reader is one line
        to act on instead of a failure per script.
    """,
    fix="""
        Do what the finding says: install the missing package (and add it to the repo's requirements), run
        Python 2 code with Python 2.7 or port it (`print x` becomes `print(x)`), pin the library version
        the scripts were written for or update the removed call (the finding names its replacement).
    """,
    sources=("pandas 2.0.0, NumPy 1.24.0 and matplotlib 3.6.0 / 3.9.0 release notes and the NumPy 2.0 migration "
             "guide, for the removed APIs recognised in error messages.",
             "Python 3.0 \"What's New\", for the Python 2 syntax recognised at the failing line.",
             "pandas installation guide, \"Optional dependencies\", for the readers of data formats."),
    bad="""
        import matplotlib.pyplot as plt
        import lab_plate_reader_tools_absent
        fig, ax = plt.subplots()
        ax.plot([1, 2, 3], [2.0, 1.5, 3.0], marker="o")
        fig.savefig("growth.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.plot([1, 2, 3], [2.0, 1.5, 3.0], marker="o")
        fig.savefig("growth.png")
    """,
)
def environment_mismatch(run: ScriptRun, context: RunContext, knobs: Knobs) -> Iterator[Hit]:
    """A script fails because of the environment: a missing package, Python 2 code, a removed library API."""
    found = repo_cause(run)
    if found is None or run.error is None:
        return
    kind, key = found
    scripts = [r.path for r in context.runs if repo_cause(r) == found] or [run.path]
    source = run.error.called_from if (run.error.source is not None and run.error.source.path != run.path) \
        else run.error.source
    yield Hit(message=verdict(kind, key, len(set(scripts))), source=source or Source(path=run.path),
              confidence="certain" if kind in ("package-missing", "python2-only") else "likely",
              key=f"{kind}:{key}", group=f"environment:{kind}:{key}")


RULES = (environment_mismatch,)

__all__ = ["API_CHANGES", "IMPORT_TO_DIST", "READERS", "RULES", "ApiChange", "CauseKind", "distribution_name",
           "failure_cause", "python2_line", "reader_suffixes", "reason", "repo_cause", "verdict"]

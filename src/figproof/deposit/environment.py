"""The deposit's environment, explained before anything runs, and script failures grouped by environmental cause.

Most deposits that do not reproduce fail for reasons outside the science: a package this machine lacks (often
an Excel reader), code written for Python 2, an API a library has since removed, a pickle bound to the version
that wrote it, a path on the author's computer.  :func:`survey` reads the deposit (nothing is executed):

- what each script imports, mapped to distribution names (``importlib.metadata.packages_distributions`` for what
  is installed, a short table of import names that differ from their distribution for what is not), and which
  are missing here;
- which scripts are Python 2 only: they do not compile under Python 3 and the failing line is Python 2 syntax
  (a print statement, ``except E, e``, backticks, ``<>``, ``exec "..."``, a ``0777`` octal, ``ur""``);
- which readers pandas needs for the data files the scripts name (``.xlsx`` needs openpyxl, ``.parquet`` pyarrow);
- the versions a ``requirements*.txt``, ``environment.yml`` or ``pyproject.toml`` asks for against those
  installed (compared with ``packaging``'s specifiers, PEP 440).

:func:`causes` then sorts the failed runs by cause: one :class:`Cause` per missing package, per removed API,
per kind of problem, each naming its scripts and stating a verdict in plain words.
"""

from __future__ import annotations

import ast
import importlib.metadata
import importlib.util
import re
import sys
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Literal

from figproof.discover.imports import code_of
from figproof.model.records import ScriptRun

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
    ApiChange(library="matplotlib", pattern=re.compile(r"module 'matplotlib\.cm' has no attribute 'get_cmap'"),
              what="matplotlib 3.9 removed matplotlib.cm.get_cmap (use matplotlib.colormaps[name])"),
    ApiChange(library="matplotlib", pattern=re.compile(r"'seaborn[\w-]*' (is )?not (found|a valid package style)"),
              what="matplotlib 3.6 renamed the 'seaborn' styles to 'seaborn-v0_8-...'"),
    ApiChange(library="matplotlib", pattern=re.compile(r"unexpected keyword argument '(normed|hold|b)'"),
              what="matplotlib removed an argument the script passes (normed= became density=; hold= and b= "
                   "are gone)"),
)


@dataclass(frozen=True, slots=True, kw_only=True)
class Import:
    """A third-party module a script imports."""

    module: str  # top-level import name
    distribution: str
    installed: str | None  # the installed version, None when missing
    scripts: tuple[str, ...]
    suffixes: tuple[str, ...] = ()  # for a pandas reader: the data-file suffixes it is needed for


@dataclass(frozen=True, slots=True, kw_only=True)
class VersionAsk:
    """A version the deposit's requirements ask for, against what is installed."""

    file: str
    requirement: str
    distribution: str
    installed: str | None
    met: bool


@dataclass(frozen=True, slots=True, kw_only=True)
class Python2Script:
    path: str
    line: int
    syntax: str


@dataclass(frozen=True, slots=True, kw_only=True)
class Survey:
    """What the deposit needs, read before running anything."""

    imports: tuple[Import, ...] = ()
    python2: tuple[Python2Script, ...] = ()
    readers: tuple[Import, ...] = ()  # pandas readers the scripts' data files need
    asks: tuple[VersionAsk, ...] = ()
    notes: tuple[str, ...] = ()  # requirement lines figproof could not read

    @property
    def missing(self) -> tuple[Import, ...]:
        return tuple(i for i in (*self.imports, *self.readers) if i.installed is None)


@dataclass(frozen=True, slots=True, kw_only=True)
class Cause:
    """One environmental reason some scripts failed (or will fail), with the scripts it explains."""

    kind: CauseKind
    key: str  # the package, the API change, ... (stable, for grouping and sorting)
    verdict: str  # plain words, e.g. "install openpyxl to read the .xlsx inputs of 8 scripts"
    scripts: tuple[str, ...] = field(default=())


# --------------------------------------------------------------------------- distributions


def distribution_of(module: str, installed: Mapping[str, Sequence[str]] | None = None) -> str:
    """The distribution that provides import name ``module`` (installed, else the table, else the name)."""
    found = (installed if installed is not None else importlib.metadata.packages_distributions()).get(module)
    if found:
        return sorted(found)[0]
    return IMPORT_TO_DIST.get(module, module)


def installed_version(distribution: str) -> str | None:
    try:
        return importlib.metadata.version(distribution)
    except importlib.metadata.PackageNotFoundError:
        return None


def module_available(module: str) -> bool:
    """Whether ``import module`` would find it here (without importing it)."""
    try:
        return importlib.util.find_spec(module) is not None
    except (ImportError, ValueError):
        return False


# --------------------------------------------------------------------------- reading the scripts


def top_imports(sources: Iterable[str]) -> set[str]:
    """Top-level names of absolute imports in the parsed ``sources`` (sources that do not parse are skipped)."""
    names: set[str] = set()
    for text in sources:
        try:
            tree = ast.parse(text)
        except (SyntaxError, ValueError):
            continue
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                names.update(a.name.split(".")[0] for a in node.names)
            elif isinstance(node, ast.ImportFrom) and node.module and not node.level:
                names.add(node.module.split(".")[0])
    return names


def python2_syntax(source: str) -> tuple[int, str] | None:
    """(line, what) when ``source`` does not compile under Python 3 and the failing line is Python 2 syntax."""
    try:
        compile(source, "<deposit>", "exec", dont_inherit=True)
    except SyntaxError as exc:
        lines = source.splitlines()
        line = exc.lineno or 0
        text = lines[line - 1] if 0 < line <= len(lines) else (exc.text or "")
        if "Missing parentheses in call to 'print'" in (exc.msg or ""):
            return line, "print statement"
        for what, pattern in _PY2_SYNTAX:
            if pattern.search(text):
                return line, what
        return None
    except (ValueError, OverflowError):
        return None
    return None


def _local_modules(root: Path, scripts: Sequence[str]) -> set[str]:
    """Module names the deposit itself provides (a .py file or a package folder beside a script or at the root)."""
    names: set[str] = set()
    folders = {root} | {(root / s).parent for s in scripts}
    for folder in folders:
        try:
            entries = list(folder.iterdir())
        except OSError:
            continue
        for e in entries:
            if e.suffix == ".py":
                names.add(e.stem)
            elif e.is_dir() and (e / "__init__.py").is_file():
                names.add(e.name)
            elif e.is_dir() and e.name in ("src", "lib"):
                names.update(p.name for p in e.iterdir() if p.is_dir())
    return names


def survey(root: Path, scripts: Sequence[str], data_files: Sequence[str] = ()) -> Survey:
    """Read the deposit's scripts and requirement files (nothing is run); see the module docstring."""
    local = _local_modules(root, scripts)
    stdlib = set(sys.stdlib_module_names) | {"__future__"}
    users: dict[str, set[str]] = {}
    python2: list[Python2Script] = []
    texts: dict[str, str] = {}
    for script in scripts:
        try:
            sources = code_of(root / script)
        except (OSError, ValueError):
            continue
        texts[script] = "\n".join(sources)
        for module in top_imports(sources):
            if module not in stdlib and module not in local:
                users.setdefault(module, set()).add(script)
        if script.endswith(".py") and sources:
            found = python2_syntax(sources[0])
            if found is not None:
                python2.append(Python2Script(path=script, line=found[0], syntax=found[1]))
                for module in _py2_imports(sources[0]) - stdlib - local:
                    users.setdefault(module, set()).add(script)
    table = importlib.metadata.packages_distributions()
    imports = tuple(sorted((_import(m, sorted(s), table) for m, s in users.items()), key=lambda i: i.module))
    readers = _readers(texts, data_files, table)
    asks, notes = requirement_asks(root)
    return Survey(imports=imports, python2=tuple(python2), readers=readers, asks=asks, notes=notes)


def _py2_imports(source: str) -> set[str]:
    """Import names of a script that does not parse under Python 3, read line by line."""
    found = re.findall(r"^\s*(?:import|from)\s+([A-Za-z_]\w*)", source, re.M)
    return set(found)


def _import(module: str, scripts: list[str], table: Mapping[str, Sequence[str]]) -> Import:
    dist = distribution_of(module, table)
    available = module_available(module)
    version = installed_version(dist) if available else None
    if available and version is None:
        version = "installed"  # importable, but no distribution metadata names it (a vendored or bundled module)
    return Import(module=module, distribution=dist, installed=version, scripts=tuple(scripts))


def _readers(texts: Mapping[str, str], data_files: Sequence[str],
             table: Mapping[str, Sequence[str]]) -> tuple[Import, ...]:
    """pandas readers needed: a script names a data file (or a suffix) whose reader is an optional package."""
    needs: dict[tuple[str, str], set[str]] = {}
    seen: dict[str, set[str]] = {}
    names = {PurePosixPath(f).name: PurePosixPath(f).suffix.lower() for f in data_files}
    for script, text in texts.items():
        if "pandas" not in text and "pd." not in text:
            continue
        suffixes = {s for n, s in names.items() if n in text}
        suffixes |= {s for s in READERS if re.search(re.escape(s) + r"['\"]", text)}
        for suffix in suffixes & READERS.keys():
            module, dist = READERS[suffix]
            needs.setdefault((module, dist), set()).add(script)
            seen.setdefault(dist, set()).add(suffix)
    out = []
    for (module, dist), scripts in sorted(needs.items()):
        version = installed_version(dist) if module_available(module) else None
        out.append(Import(module=module, distribution=dist, installed=version, scripts=tuple(sorted(scripts)),
                          suffixes=tuple(sorted(seen[dist]))))
    return tuple(out)


# --------------------------------------------------------------------------- requirement files


def requirement_asks(root: Path) -> tuple[tuple[VersionAsk, ...], tuple[str, ...]]:
    """Versions asked for by requirements*.txt, environment.yml/.yaml and pyproject.toml at the deposit's top."""
    asks: list[VersionAsk] = []
    notes: list[str] = []
    for path in sorted(root.glob("requirements*.txt")):
        lines = _read_lines(path)
        asks += _asks(path.name, lines, notes)
    for name in ("environment.yml", "environment.yaml"):
        if (root / name).is_file():
            asks += _asks(name, _conda_lines(root / name, notes), notes)
    if (root / "pyproject.toml").is_file():
        asks += _asks("pyproject.toml", _pyproject_lines(root / "pyproject.toml", notes), notes)
    return tuple(asks), tuple(notes)


def _read_lines(path: Path) -> list[str]:
    try:
        return path.read_text(encoding="utf-8", errors="replace").splitlines()
    except OSError:
        return []


def _asks(file: str, lines: Iterable[str], notes: list[str]) -> list[VersionAsk]:
    from packaging.requirements import InvalidRequirement, Requirement
    from packaging.utils import canonicalize_name

    out = []
    for raw in lines:
        line = raw.split(" #", 1)[0].strip()
        if not line or line.startswith(("#", "-", "git+", "http:", "https:", "file:", ".")):
            continue
        if line.lower().startswith("python"):
            out += _python_ask(file, line)
            continue
        try:
            req = Requirement(line)
        except InvalidRequirement:
            notes.append(f"{file}: cannot read the requirement {line!r}")
            continue
        if req.marker is not None and not req.marker.evaluate():
            continue
        version = installed_version(req.name)
        met = version is not None and (not req.specifier or req.specifier.contains(version, prereleases=True))
        out.append(VersionAsk(file=file, requirement=str(req), distribution=canonicalize_name(req.name),
                              installed=version, met=met))
    return out


def _python_ask(file: str, line: str) -> list[VersionAsk]:
    from packaging.specifiers import InvalidSpecifier, SpecifierSet

    spec = line[len("python"):].strip()
    if not spec:
        return []
    here = ".".join(map(str, sys.version_info[:3]))
    try:
        met = SpecifierSet(spec).contains(here, prereleases=True)
    except InvalidSpecifier:
        return []
    return [VersionAsk(file=file, requirement=f"python{spec}", distribution="python", installed=here, met=met)]


def _conda_spec(item: str) -> str:
    """A conda match spec (``pandas=1.3``, ``numpy=1.21.2=py39h``) as a PEP 508 requirement."""
    item = item.split("::")[-1].strip()
    m = re.match(r"^([A-Za-z0-9_.\-]+)\s*(.*)$", item)
    if not m:
        return item
    name, rest = m.groups()
    rest = rest.strip()
    if rest.startswith("=") and not rest.startswith("=="):
        version = rest[1:].split("=")[0]  # conda's "=1.3" means 1.3.*; a build string may follow
        return f"{name}=={version}.*" if version.count(".") < 2 else f"{name}=={version}"
    if re.match(r"^[0-9]", rest):
        return f"{name}=={rest.split('=')[0]}"
    return f"{name}{rest}"


def _conda_lines(path: Path, notes: list[str]) -> list[str]:
    try:
        import yaml
    except ImportError:  # PyYAML is optional; read the list items by hand
        return [_conda_spec(m) for m in re.findall(r"^\s*-\s+([^\s#:]+(?:[ =<>!][^#\n]*)?)\s*$",
                                                      path.read_text(encoding="utf-8", errors="replace"), re.M)]
    try:
        data = yaml.safe_load(path.read_text(encoding="utf-8", errors="replace"))
    except (OSError, yaml.YAMLError) as exc:
        notes.append(f"{path.name}: not readable YAML ({str(exc).splitlines()[0]})")
        return []
    deps = data.get("dependencies", []) if isinstance(data, dict) else []
    out: list[str] = []
    for d in deps if isinstance(deps, list) else []:
        if isinstance(d, str):
            out.append(_conda_spec(d))
        elif isinstance(d, dict) and isinstance(d.get("pip"), list):
            out += [str(p) for p in d["pip"]]
    return out


def _pyproject_lines(path: Path, notes: list[str]) -> list[str]:
    import tomllib

    try:
        data = tomllib.loads(path.read_text(encoding="utf-8", errors="replace"))
    except (OSError, tomllib.TOMLDecodeError) as exc:
        notes.append(f"{path.name}: not readable TOML ({exc})")
        return []
    project = data.get("project", {})
    deps = project.get("dependencies", []) if isinstance(project, dict) else []
    out = [str(d) for d in deps if isinstance(d, str)] if isinstance(deps, list) else []
    python = project.get("requires-python") if isinstance(project, dict) else None
    if isinstance(python, str):
        out.append("python" + python)
    return out


# --------------------------------------------------------------------------- failures by cause


def failure_cause(run: ScriptRun, found: Survey) -> tuple[CauseKind, str] | None:
    """(kind, key) of the environmental cause of ``run``'s failure, or None when it is not environmental."""
    err = run.error
    if run.status == "ok" or err is None:
        return None
    message = f"{err.type}: {err.message}"
    if err.type == "SyntaxError" and any(p.path == run.path for p in found.python2):
        return "python2-only", "python2"
    optional = _MISSING_OPTIONAL.search(message)
    if optional:
        return "package-missing", distribution_of((optional.group(1) or optional.group(2)).split(".")[0])
    missing = _NO_MODULE.search(message) if err.type in ("ModuleNotFoundError", "ImportError") else None
    if missing:
        module = missing.group(1)
        top = module.split(".")[0]
        if "." in module and module_available(top):
            # the package is here but one of its modules is not: a pickle (or code) from another version of it
            return "pickle-version", top
        return "package-missing", distribution_of(top)
    for change in API_CHANGES:
        if change.pattern.search(message):
            return "api-removed", change.what
    if err.type in ("FileNotFoundError", "OSError", "IOError", "PermissionError") and _ABSOLUTE.search(message):
        return "author-path", "absolute"
    return None


def causes(runs: Sequence[ScriptRun], found: Survey) -> tuple[Cause, ...]:
    """One cause per missing package, removed API or kind of problem, naming the scripts it explains.

    Scripts that ran are not blamed; a missing package that the survey saw but no failure confirmed (the script
    ran, or was not run) is not a cause either.
    """
    groups: dict[tuple[CauseKind, str], list[str]] = {}
    for run in runs:
        found_cause = failure_cause(run, found)
        if found_cause is not None:
            groups.setdefault(found_cause, []).append(run.path)
    return tuple(_cause(kind, key, sorted(scripts), found) for (kind, key), scripts in sorted(groups.items()))


def _scripts(n: int) -> str:
    return f"{n} script{'s' * (n != 1)}"


def _cause(kind: CauseKind, key: str, scripts: list[str], found: Survey) -> Cause:
    n = len(scripts)
    if kind == "package-missing":
        suffixes = next((r.suffixes for r in found.readers if r.distribution == key and r.suffixes), ())
        suffixes = suffixes or tuple(s for s, (_, dist) in READERS.items() if dist == key)[:1]
        purpose = f"read the {'/'.join(suffixes)} inputs of" if suffixes else "run"
        verdict = f"install {key} to {purpose} {_scripts(n)}"
    elif kind == "python2-only":
        it = "it" if n == 1 else "them"
        verdict = f"{_scripts(n)} {'is' if n == 1 else 'are'} Python 2 code, which Python 3 cannot run; run {it} " \
                  f"with Python 2.7 or port {it} to Python 3"
    elif kind == "api-removed":
        verdict = f"{key}: this breaks {_scripts(n)}; install the library version the deposit was made with, or " \
                  f"update the call"
    elif kind == "pickle-version":
        version = installed_version(distribution_of(key)) or "?"
        verdict = f"{_scripts(n)} load{'s' * (n == 1)} a pickle (or module) made with another version of {key} " \
                  f"than the {version} installed here; install the version the deposit was made with"
    else:
        verdict = f"{_scripts(n)} read{'s' * (n == 1)} files by a path on the author's computer; the path must be " \
                  f"made relative to the deposit"
    return Cause(kind=kind, key=key, verdict=verdict, scripts=tuple(scripts))


__all__ = ["API_CHANGES", "IMPORT_TO_DIST", "READERS", "Cause", "Import", "Survey", "VersionAsk", "causes",
           "distribution_of", "failure_cause", "python2_syntax", "requirement_asks", "survey", "top_imports"]

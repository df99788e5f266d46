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

from figproof.discover.imports import code_of
from figproof.model.records import ScriptRun
from figproof.notebook import NotebookError, code_cells, python_source
from figproof.rules.environment import (
    API_CHANGES,
    IMPORT_TO_DIST,
    READERS,
    CauseKind,
    python2_line,
    verdict,
)
from figproof.rules.environment import failure_cause as _failure_cause


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
    cell: int | None = None  # the notebook's code cell, counted as figproof counts cells


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
        what = python2_line(text, exc.msg or "")
        return (line, what) if what is not None else None
    except (ValueError, OverflowError):
        return None
    return None


def python2_cells(text: str) -> tuple[int, int, str] | None:
    """(cell, line, what) for the first code cell of a notebook's ``text`` that is Python 2 only, else None.

    IPython's own lines (``%matplotlib inline``, ``!pip ...``) are blanked first, as when the notebook runs.
    """
    try:
        cells = code_cells(text)
    except NotebookError:
        return None
    for cell in cells:
        found = python2_syntax(python_source(cell.source))
        if found is not None:
            return cell.number, found[0], found[1]
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
        py2 = _python2(root, script, sources)
        if py2 is not None:
            python2.append(py2[0])
            for module in _py2_imports(py2[1]) - stdlib - local:
                users.setdefault(module, set()).add(script)
    table = importlib.metadata.packages_distributions()
    imports = tuple(sorted((_import(m, sorted(s), table) for m, s in users.items()), key=lambda i: i.module))
    readers = _readers(texts, data_files, table)
    asks, notes = requirement_asks(root)
    return Survey(imports=imports, python2=tuple(python2), readers=readers, asks=asks, notes=notes)


def _python2(root: Path, script: str, sources: Sequence[str]) -> tuple[Python2Script, str] | None:
    """The script (or notebook) as Python 2 only, with the source of its Python 2 code; None when it is not."""
    path = root / script
    if path.suffix == ".ipynb":
        try:
            found = python2_cells(path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError):
            return None
        if found is None:
            return None
        return Python2Script(path=script, line=found[1], syntax=found[2], cell=found[0]), "\n".join(sources)
    if not sources or not script.endswith(".py"):
        return None
    at = python2_syntax(sources[0])
    return (Python2Script(path=script, line=at[0], syntax=at[1]), sources[0]) if at is not None else None


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
    """(kind, key) of the environmental cause of ``run``'s failure, or None when it is not environmental.

    The classification of :func:`figproof.rules.environment.failure_cause` (the one a repo check reports), with
    the Python 2 scripts this survey found.
    """
    return _failure_cause(run, python2={p.path for p in found.python2})


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


def _cause(kind: CauseKind, key: str, scripts: list[str], found: Survey) -> Cause:
    suffixes = next((r.suffixes for r in found.readers if r.distribution == key and r.suffixes), ())
    installed = installed_version(distribution_of(key)) if kind == "pickle-version" else None
    text = verdict(kind, key, len(scripts), suffixes=suffixes, installed=installed or "?")
    return Cause(kind=kind, key=key, verdict=text, scripts=tuple(scripts))


__all__ = ["API_CHANGES", "IMPORT_TO_DIST", "READERS", "Cause", "Import", "Survey", "VersionAsk", "causes",
           "distribution_of", "failure_cause", "python2_syntax", "requirement_asks", "survey", "top_imports"]

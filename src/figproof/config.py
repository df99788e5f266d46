"""Read and validate figproof's configuration.

The configuration lives in ``figproof.toml`` (keys at the top level) or under
``[tool.figproof]`` in ``pyproject.toml``.  It is found by walking up from the
checked path: the first folder holding a ``figproof.toml``, or a
``pyproject.toml`` with a ``[tool.figproof]`` table, wins (``figproof.toml``
beats ``pyproject.toml`` in the same folder).  The walk stops at the top of
the git work tree, so a config above the repo never leaks in.  With no config,
the repo root is the git top-level folder, or else the checked folder itself.

Keys are kebab-case in TOML and snake_case in Python: ``working-dir`` is
``Config.working_dir``, and a rule knob ``max_share`` is written ``max-share``
in ``[tool.figproof.rules.<rule-id>]``.  Every mistake raises
:class:`ConfigError`, whose text is one line naming the file, the key and the
value.  No environment variable is read here.
"""

from __future__ import annotations

import difflib
import json
import math
import os
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import date, datetime, time
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal, NamedTuple, cast

from figproof.discover import gitrepo
from figproof.model.findings import SEVERITIES, Severity, renamed_note

if TYPE_CHECKING:  # the catalogue is handed in, so loading a config never imports the rules
    from figproof.rules.base import Rule

WORKING_DIRS = ("auto", "root", "script")
FAIL_ON = (*SEVERITIES, "never")
RULE_SEVERITIES = (*SEVERITIES, "off")
CONFIG_FILE = "figproof.toml"
PYPROJECT = "pyproject.toml"


class ConfigError(Exception):
    """A configuration mistake; ``str()`` is one line naming file, key and value.

    ``file`` is the config file as shown to the user, ``section`` the TOML table
    (``"tool.figproof"``, ``"tool.figproof.rules.script-fails"``, or None for
    the top level of ``figproof.toml`` and for errors about the file itself).
    """

    def __init__(self, file: str, message: str, *, section: str | None = None) -> None:
        self.file = file
        self.section = section
        self.message = message
        where = f"{file} [{section}]" if section else file
        super().__init__(f"{where}: {message}")


class RuleSettings(NamedTuple):
    """A rule's configured severity (None: the rule's default; "off": disabled) and knob overrides.

    A named tuple so that ``Config.rules`` can be passed straight to
    :func:`figproof.rules.apply`, which unpacks ``(severity, knobs)``.
    """

    severity: Severity | Literal["off"] | None = None
    knobs: dict[str, float] = {}  # noqa: RUF012 - shared default, never mutated: the loader builds a fresh dict per rule


def _cpu_count() -> int:
    # CPUs this process may use (a CI container's quota), not the machine's total.
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0)) or 1
    return os.cpu_count() or 1


@dataclass(frozen=True, slots=True, kw_only=True)
class Config:
    """figproof's settings for one checked repo (defaults when no config file exists).

    Paths in ``include``, ``exclude``, ``order`` and ``figure_dirs`` are
    repo-relative POSIX globs or paths; ``accepted_file`` and ``cache_dir`` are
    relative to ``root`` unless absolute.
    """

    root: Path
    source: Path | None = None  # the config file read, if any
    include: tuple[str, ...] = ()  # () = default discovery
    exclude: tuple[str, ...] = ()
    timeout: float = 120.0  # seconds per script
    memory_limit: int = 4096  # MiB per script
    jobs: int = field(default_factory=_cpu_count)
    working_dir: str = "auto"
    fail_on: str = "error"
    network: bool = False
    order: tuple[str, ...] = ()  # scripts run first, in this order
    figure_dirs: tuple[str, ...] = ()  # () = every committed figure outside docs/ and tests/
    accepted_file: str = ".figproof-accepted.json"
    cache_dir: str = ".figproof-cache"
    rules: dict[str, RuleSettings] = field(default_factory=dict)
    notes: tuple[str, ...] = ()  # things worth saying that are not errors (a former rule id in use)

    def accepted_path(self) -> Path:
        """The accepted-findings file as an absolute path."""
        return self.root / self.accepted_file

    def cache_path(self) -> Path:
        """The result-cache folder as an absolute path."""
        return self.root / self.cache_dir


# --------------------------------------------------------------------------- messages


def _show(value: Any) -> str:
    """A value as the user wrote it in TOML, shortened for a one-line message."""
    if isinstance(value, bool):
        text = "true" if value else "false"
    elif isinstance(value, (str, int, float)):
        text = repr(value)
    elif isinstance(value, (datetime, date, time)):
        text = value.isoformat()
    elif isinstance(value, list):
        text = "[" + ", ".join(_show(v) for v in value[:5]) + (", ..." if len(value) > 5 else "") + "]"
    elif isinstance(value, dict):
        text = "a table"
    else:
        text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


def _choices(options: tuple[str, ...]) -> str:
    return ", ".join(repr(o) for o in options)


def _unknown(kind: str, name: str, known: list[str]) -> str:
    """``unknown key 'x'`` with a hint: kebab-case spelling, or the closest known name."""
    hint = ""
    kebab = name.replace("_", "-")
    if kebab != name and kebab in known:
        hint = f" (TOML keys are kebab-case: {kebab!r})"
    else:
        close = difflib.get_close_matches(name, known, n=1)
        if close:
            hint = f" (did you mean {close[0]!r}?)"
    return f"unknown {kind} {name!r}{hint}"


class _Bad(Exception):
    """A value error inside one table; turned into a ConfigError by the caller."""


# --------------------------------------------------------------------------- value checks


def _is_number(value: Any) -> bool:
    # TOML booleans are Python bools, which are ints: never accept them as numbers.
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _positive_number(key: str, value: Any) -> float:
    if not _is_number(value) or not math.isfinite(value) or value <= 0:
        raise _Bad(f"{key!r} must be a positive number (got {_show(value)})")
    return float(value)


def _positive_int(key: str, value: Any) -> int:
    # JSON Schema's "integer" accepts 4.0, so the loader does too (the schema test holds both to it).
    if not _is_number(value) or not math.isfinite(value) or value != int(value) or value < 1:
        raise _Bad(f"{key!r} must be a positive whole number (got {_show(value)})")
    return int(value)


def _choice(key: str, value: Any, options: tuple[str, ...]) -> str:
    if not isinstance(value, str) or value not in options:
        raise _Bad(f"{key!r} must be one of {_choices(options)} (got {_show(value)})")
    return value


def _boolean(key: str, value: Any) -> bool:
    if not isinstance(value, bool):
        raise _Bad(f"{key!r} must be true or false (got {_show(value)})")
    return value


def _clean_path(text: str) -> str:
    text = text.replace("\\", "/")
    while text.startswith("./"):
        text = text[2:]
    return text


_DRIVE = re.compile(r"^[A-Za-z]:")
_DOTDOT = re.compile(r"(^|[/\\])\.\.([/\\]|$)")


def _relative(key: str, text: str, what: str) -> str:
    """A repo-relative POSIX path or glob; absolute paths and '..' cannot name repo files.

    The tests hold this check and the schema's ``relative-glob`` pattern to the same answers.
    """
    absolute = text.startswith(("/", "\\")) or _DRIVE.match(text)
    if absolute or _DOTDOT.search(text) or not text.strip("/\\."):
        raise _Bad(f"{key!r} entries must be {what}s relative to the repo root (got {_show(text)})")
    return _clean_path(text)


def _string_list(key: str, value: Any, what: str, *, unique: bool = False) -> tuple[str, ...]:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise _Bad(f"{key!r} must be a list of {what} strings (got {_show(value)})")
    items = tuple(_relative(key, v, what) for v in value)
    if unique:
        seen: set[str] = set()
        for item in items:
            if item in seen:
                raise _Bad(f"{key!r} lists {item!r} twice")
            seen.add(item)
    return items


def _scripts(key: str, paths: tuple[str, ...]) -> tuple[str, ...]:
    for p in paths:
        if not p.endswith((".py", ".ipynb")) or any(c in p for c in "*?["):
            raise _Bad(f"{key!r} entries must be script paths ending in .py or .ipynb (got {_show(p)})")
    return paths


def _file_name(key: str, value: Any) -> str:
    if not isinstance(value, str) or not value.strip():
        raise _Bad(f"{key!r} must be a non-empty path string (got {_show(value)})")
    return value


# TOML key -> (Config field, parser).  One table drives parsing, unknown-key hints and the schema test.
_KEYS: dict[str, tuple[str, Any]] = {
    "include": ("include", lambda k, v: _string_list(k, v, "glob")),
    "exclude": ("exclude", lambda k, v: _string_list(k, v, "glob")),
    "timeout": ("timeout", _positive_number),
    "memory-limit": ("memory_limit", _positive_int),
    "jobs": ("jobs", _positive_int),
    "working-dir": ("working_dir", lambda k, v: _choice(k, v, WORKING_DIRS)),
    "fail-on": ("fail_on", lambda k, v: _choice(k, v, FAIL_ON)),
    "network": ("network", _boolean),
    "order": ("order", lambda k, v: _scripts(k, _string_list(k, v, "path", unique=True))),
    "figure-dirs": ("figure_dirs", lambda k, v: _string_list(k, v, "glob")),
    "accepted-file": ("accepted_file", _file_name),
    "cache-dir": ("cache_dir", _file_name),
}
KEYS = (*_KEYS, "rules")


def _rule_settings(
    table: Mapping[str, Any], catalogue: Mapping[str, Rule], shown: str, section: str | None,
    notes: list[str], noted_as: str,
) -> dict[str, RuleSettings]:
    """Per-rule tables; a former rule id is read as the current one and noted in ``notes`` (as ``noted_as``)."""
    prefix = f"{section}.rules" if section else "rules"
    renamed = {old: r.id for r in catalogue.values() for old in r.former_ids}
    out: dict[str, RuleSettings] = {}
    for given in sorted(table):
        body = table[given]
        rule_id = renamed.get(given, given)
        if rule_id != given:
            if rule_id in table:
                raise ConfigError(shown, f"rule {given!r} and {rule_id!r} are the same rule (it was renamed); "
                                         f"keep only {rule_id!r}", section=prefix)
            notes.append(f"{noted_as} [{prefix}.{given}]: {renamed_note(given, rule_id)}")
        if rule_id not in catalogue:
            raise ConfigError(shown, _unknown("rule", rule_id, list(catalogue)), section=prefix)
        where = f"{prefix}.{rule_id}"
        if not isinstance(body, dict):
            raise ConfigError(shown, f"rule {rule_id!r} must be a table (got {_show(body)})", section=prefix)
        rule = catalogue[rule_id]
        by_toml = {k.name.replace("_", "-"): k for k in rule.knobs}
        severity: Severity | Literal["off"] | None = None
        knobs: dict[str, float] = {}
        for key in sorted(body):
            value = body[key]
            try:
                if key == "severity":
                    severity = cast(Severity | Literal["off"], _choice(key, value, RULE_SEVERITIES))
                    continue
                if key not in by_toml:
                    known = ["severity", *by_toml]
                    raise _Bad(_unknown("knob", key, known) if by_toml
                               else f"unknown knob {key!r} (this rule has no knobs)")
                spec = by_toml[key]
                if not _is_number(value) or not math.isfinite(value):
                    raise _Bad(f"{key!r} must be a number (got {_show(value)})")
                if spec.minimum is not None and value < spec.minimum:
                    raise _Bad(f"{key!r} must be at least {spec.minimum:g} (got {_show(value)})")
                if spec.maximum is not None and value > spec.maximum:
                    raise _Bad(f"{key!r} must be at most {spec.maximum:g} (got {_show(value)})")
                knobs[spec.name] = float(value)
            except _Bad as bad:
                raise ConfigError(shown, str(bad), section=where) from None
        out[rule_id] = RuleSettings(severity, knobs)
    return out


def parse(
    table: Mapping[str, Any],
    *,
    root: Path,
    source: Path | None = None,
    section: str | None = "tool.figproof",
    rules: Mapping[str, Rule],
) -> Config:
    """Validate one parsed TOML table into a :class:`Config`.

    Parameters
    ----------
    table
        The ``[tool.figproof]`` table, or the whole of ``figproof.toml``.
    root
        The repo root the config belongs to.
    source
        The file the table came from (for messages and ``Config.source``).
    section
        The table's name in messages; None for the top level of ``figproof.toml``.
    rules
        Rule catalogue keyed by id (:func:`figproof.rules.by_id`) that per-rule tables are checked against.
    """
    shown = _display(source) if source is not None else "configuration"
    values: dict[str, Any] = {}
    notes: list[str] = []
    for key in sorted(table):
        value = table[key]
        if key == "rules":
            if not isinstance(value, dict):
                raise ConfigError(shown, f"'rules' must be a table (got {_show(value)})", section=section)
            values["rules"] = _rule_settings(value, rules, shown, section, notes,
                                             source.name if source is not None else shown)
            continue
        if key not in _KEYS:
            hint = _unknown("key", key, list(KEYS))
            if key == "tool" and section is None:
                hint += f" ({CONFIG_FILE} holds the keys at its top level, without [tool.figproof])"
            raise ConfigError(shown, hint, section=section)
        name, check = _KEYS[key]
        try:
            values[name] = check(key, value)
        except _Bad as bad:
            raise ConfigError(shown, str(bad), section=section) from None
    return Config(root=root, source=source, notes=tuple(notes), **values)


# --------------------------------------------------------------------------- finding and reading files


def _display(path: Path) -> str:
    """The config file as the user knows it: relative to the working folder when inside it."""
    try:
        return Path(path).resolve().relative_to(Path.cwd().resolve()).as_posix()
    except (ValueError, OSError):
        return str(path)


def _read_toml(path: Path) -> dict[str, Any]:
    shown = _display(path)
    try:
        raw = path.read_bytes()
    except OSError as err:
        raise ConfigError(shown, f"cannot read the file ({err.strerror or err})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as err:
        raise ConfigError(shown, f"invalid TOML: not UTF-8 text (byte {err.start})") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        message = " ".join(str(err).split())  # one line, whatever tomllib's wording
        raise ConfigError(shown, f"invalid TOML: {message}") from None


def find_config(path: Path) -> tuple[Path, Path | None, dict[str, Any] | None, str | None]:
    """Locate the config for ``path``: ``(root, config file, table, section)``.

    ``table`` and ``config file`` are None when no config was found; the
    section is ``"tool.figproof"`` for pyproject.toml and None for figproof.toml.
    """
    start = path.resolve()
    folder = start if start.is_dir() else start.parent
    top = gitrepo.toplevel(folder)
    for here in (folder, *folder.parents):
        own = here / CONFIG_FILE
        if own.is_file():
            return here, own, _read_toml(own), None
        project = here / PYPROJECT
        if project.is_file():
            data = _read_toml(project)
            tool = data.get("tool")
            if isinstance(tool, dict) and "figproof" in tool:
                table = tool["figproof"]
                if not isinstance(table, dict):
                    raise ConfigError(_display(project), f"'tool.figproof' must be a table (got {_show(table)})")
                return here, project, table, "tool.figproof"
        if top is not None and here == top:
            break
    return (top if top is not None else folder), None, None, None


def load_config(path: Path, *, rules: Mapping[str, Rule]) -> Config:
    """Find, read and validate the config that governs ``path``.

    Parameters
    ----------
    path
        The checked repo folder (or a file in it).
    rules
        Rule catalogue to validate per-rule tables against (:func:`figproof.rules.by_id`).

    Raises
    ------
    ConfigError
        When the path does not exist, or the config is unreadable, not TOML, or invalid.
    """
    if not path.exists():
        raise ConfigError(_display(path), "no such file or folder")
    root, source, table, section = find_config(path)
    if table is None:
        return Config(root=root)
    return parse(table, root=root, source=source, section=section, rules=rules)


# --------------------------------------------------------------------------- JSON schema


def config_schema(rules: Mapping[str, Rule]) -> dict[str, Any]:
    """The shipped JSON schema, with each known rule's table and knob bounds filled in.

    The file ``figproof/schema/config.schema.json`` describes rule tables
    generically (any kebab-case id, numeric knobs) so editors can use it as is;
    this function narrows it to the installed rule catalogue.
    """
    schema = json.loads(resources.files("figproof").joinpath("schema/config.schema.json").read_text("utf-8"))
    severity = {"$ref": "#/$defs/rule-severity"}
    props: dict[str, Any] = {}
    for rule_id, rule in rules.items():
        knob_props: dict[str, Any] = {"severity": severity}
        for k in rule.knobs:
            spec: dict[str, Any] = {"type": "number", "description": k.help}
            if k.minimum is not None:
                spec["minimum"] = k.minimum
            if k.maximum is not None:
                spec["maximum"] = k.maximum
            knob_props[k.name.replace("_", "-")] = spec
        props[rule_id] = {
            "type": "object",
            "description": rule.summary,
            "properties": knob_props,
            "additionalProperties": False,
        }
        for old in rule.former_ids:  # still accepted, with a note
            props[old] = {**props[rule_id], "description": f"Former id of {rule_id}: {rule.summary}",
                          "deprecated": True}
    schema["properties"]["rules"] = {
        "type": "object",
        "description": "Per-rule severity and knobs, by rule id.",
        "properties": props,
        "additionalProperties": False,
    }
    return schema


__all__ = [
    "CONFIG_FILE",
    "FAIL_ON",
    "KEYS",
    "PYPROJECT",
    "RULE_SEVERITIES",
    "WORKING_DIRS",
    "Config",
    "ConfigError",
    "RuleSettings",
    "config_schema",
    "find_config",
    "load_config",
    "parse",
]

"""Config loading: where it is found, what it accepts, how it says no, and its JSON schema."""

from __future__ import annotations

import json
import shutil
import subprocess
import tomllib
from collections.abc import Iterator
from importlib import resources
from pathlib import Path
from typing import Any

import pytest

from figproof import config as config_mod
from figproof import rules as rules_pkg
from figproof.config import (
    KEYS,
    Config,
    ConfigError,
    RuleSettings,
    config_schema,
    load_config,
)
from figproof.model.context import RunContext
from figproof.model.findings import Hit
from figproof.model.records import ScriptError, ScriptRun
from figproof.rules.base import Knob, Knobs, Rule, rule

jsonschema = pytest.importorskip("jsonschema", reason="jsonschema (test extra) validates the shipped config schema")


# A rule with knobs, only for exercising knob validation (the shipped catalogue may have none yet).
@rule(
    "spread-check",
    severity="warning",
    confidence="likely",
    why="Test fixture.",
    fix="Test fixture.",
    sources=("Test fixture.",),
    bad="import matplotlib\n",
    good="import matplotlib\n",
    knobs=(
        Knob(name="max_share", default=0.5, help="largest share", minimum=0.0, maximum=1.0),
        Knob(name="min_points", default=3, help="fewest points", minimum=1),
        Knob(name="scale", default=2.0, help="unbounded"),
    ),
)
def _spread_check(figure: Any, knobs: Knobs) -> Iterator[Hit]:
    """Fixture rule."""
    yield from ()


TEST_RULES: dict[str, Rule] = {_spread_check.id: _spread_check}


def write(folder: Path, name: str, text: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def pyproject(folder: Path, body: str) -> Path:
    return write(folder, "pyproject.toml", "[project]\nname = 'lab'\n\n[tool.figproof]\n" + body)


def error_of(folder: Path, rules: dict[str, Rule] | None = None) -> str:
    with pytest.raises(ConfigError) as info:
        load_config(folder, rules=rules if rules is not None else TEST_RULES)
    text = str(info.value)
    assert "\n" not in text
    return text


# --------------------------------------------------------------------------- finding the config


def test_no_config_uses_defaults_and_the_checked_folder(tmp_path: Path) -> None:
    cfg = load_config(tmp_path, rules=rules_pkg.by_id())
    assert cfg == Config(root=tmp_path.resolve(), jobs=cfg.jobs)
    assert cfg.source is None
    assert (cfg.timeout, cfg.memory_limit, cfg.working_dir, cfg.fail_on) == (120.0, 4096, "auto", "error")
    assert cfg.jobs >= 1 and cfg.network is False
    assert cfg.accepted_path() == tmp_path.resolve() / ".figproof-accepted.json"
    assert cfg.cache_path() == tmp_path.resolve() / ".figproof-cache"


def test_found_by_walking_up_and_root_is_its_folder(tmp_path: Path) -> None:
    pyproject(tmp_path, "timeout = 30\n")
    deep = tmp_path / "analysis" / "figures"
    deep.mkdir(parents=True)
    script = write(deep, "growth.py", "import matplotlib\n")
    for start in (deep, script):
        cfg = load_config(start, rules=rules_pkg.by_id())
        assert cfg.root == tmp_path.resolve()
        assert cfg.source == tmp_path.resolve() / "pyproject.toml"
        assert cfg.timeout == 30.0


def test_figproof_toml_beats_pyproject_in_the_same_folder(tmp_path: Path) -> None:
    pyproject(tmp_path, "timeout = 30\n")
    write(tmp_path, "figproof.toml", "timeout = 7\n")
    cfg = load_config(tmp_path, rules=rules_pkg.by_id())
    assert cfg.source == tmp_path.resolve() / "figproof.toml"
    assert cfg.timeout == 7.0


def test_pyproject_without_the_table_is_passed_over(tmp_path: Path) -> None:
    pyproject(tmp_path, "jobs = 1\n")
    inner = tmp_path / "sub"
    write(inner, "pyproject.toml", "[project]\nname = 'inner'\n")
    cfg = load_config(inner, rules=rules_pkg.by_id())
    assert cfg.root == tmp_path.resolve() and cfg.jobs == 1


needs_git = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")


@needs_git
def test_walk_stops_at_the_git_top_level(tmp_path: Path) -> None:
    write(tmp_path, "figproof.toml", "timeout = 5\n")  # above the repo: must not apply
    repo = tmp_path / "repo"
    (repo / "figures").mkdir(parents=True)
    subprocess.run(["git", "init", "-q", str(repo)], check=True)
    cfg = load_config(repo / "figures", rules=rules_pkg.by_id())
    assert cfg.root == repo.resolve()
    assert cfg.source is None and cfg.timeout == 120.0


def test_missing_path_is_a_config_error(tmp_path: Path) -> None:
    text = error_of(tmp_path / "nowhere")
    assert "nowhere" in text and "no such file or folder" in text


# --------------------------------------------------------------------------- values


def test_every_key_kebab_case_to_snake_case(tmp_path: Path) -> None:
    pyproject(
        tmp_path,
        """
include = ["figures/**/*.py", "./notebooks/*.ipynb"]
exclude = ["figures/scratch_*.py"]
timeout = 45.5
memory-limit = 2048
jobs = 3
working-dir = "script"
fail-on = "warning"
network = true
order = ["prep/make_data.py", "figures/growth.py"]
figure-dirs = ["figures", "paper/fig*"]
accepted-file = "ci/accepted.json"
cache-dir = "/tmp/figproof-cache"

[tool.figproof.rules.spread-check]
severity = "off"
max-share = 0.25
min-points = 5
""",
    )
    cfg = load_config(tmp_path, rules=TEST_RULES)
    assert cfg.include == ("figures/**/*.py", "notebooks/*.ipynb")
    assert cfg.exclude == ("figures/scratch_*.py",)
    assert (cfg.timeout, cfg.memory_limit, cfg.jobs) == (45.5, 2048, 3)
    assert (cfg.working_dir, cfg.fail_on, cfg.network) == ("script", "warning", True)
    assert cfg.order == ("prep/make_data.py", "figures/growth.py")
    assert cfg.figure_dirs == ("figures", "paper/fig*")
    assert cfg.accepted_file == "ci/accepted.json"
    assert cfg.cache_path() == Path("/tmp/figproof-cache")  # absolute paths stay absolute
    assert cfg.rules == {"spread-check": RuleSettings("off", {"max_share": 0.25, "min_points": 5.0})}


def test_figproof_toml_holds_keys_at_top_level(tmp_path: Path) -> None:
    write(tmp_path, "figproof.toml", 'fail-on = "never"\n[rules.spread-check]\nscale = 9\n')
    cfg = load_config(tmp_path, rules=TEST_RULES)
    assert cfg.fail_on == "never"
    assert cfg.rules["spread-check"] == RuleSettings(None, {"scale": 9.0})


def test_the_example_message_names_file_key_and_value(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    pyproject(tmp_path, "timeout = -3\n")
    assert error_of(tmp_path) == "pyproject.toml [tool.figproof]: 'timeout' must be a positive number (got -3)"


def test_figproof_toml_messages_have_no_table_prefix(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    write(tmp_path, "figproof.toml", 'working-dir = "here"\n')
    assert error_of(tmp_path) == "figproof.toml: 'working-dir' must be one of 'auto', 'root', 'script' (got 'here')"


def test_file_outside_the_working_folder_is_shown_in_full(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    elsewhere = tmp_path / "cwd"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    repo = tmp_path / "repo"
    pyproject(repo, "jobs = 0\n")
    text = error_of(repo)
    assert text.startswith(str((repo / "pyproject.toml").resolve()) + " [tool.figproof]: 'jobs'")


@pytest.mark.parametrize(
    ("body", "expected"),
    [
        ("timeout = 0\n", "'timeout' must be a positive number (got 0)"),
        ('timeout = "60"\n', "'timeout' must be a positive number (got '60')"),
        ("timeout = true\n", "'timeout' must be a positive number (got true)"),
        ("timeout = nan\n", "'timeout' must be a positive number (got nan)"),
        ("timeout = inf\n", "'timeout' must be a positive number (got inf)"),
        ("jobs = 2.5\n", "'jobs' must be a positive whole number (got 2.5)"),
        ("jobs = 0\n", "'jobs' must be a positive whole number (got 0)"),
        ("memory-limit = false\n", "'memory-limit' must be a positive whole number (got false)"),
        ('fail-on = "errors"\n', "'fail-on' must be one of 'error', 'warning', 'note', 'never' (got 'errors')"),
        ('network = "no"\n', "'network' must be true or false (got 'no')"),
        ('include = "figures/*.py"\n', "'include' must be a list of glob strings (got 'figures/*.py')"),
        ("include = [1]\n", "'include' must be a list of glob strings (got [1])"),
        ('include = ["/abs/*.py"]\n', "'include' entries must be globs relative to the repo root (got '/abs/*.py')"),
        ('exclude = ["../x.py"]\n', "'exclude' entries must be globs relative to the repo root (got '../x.py')"),
        ('figure-dirs = [""]\n', "'figure-dirs' entries must be globs relative to the repo root (got '')"),
        ('order = ["a.py", "./a.py"]\n', "'order' lists 'a.py' twice"),
        ('order = ["data.csv"]\n', "'order' entries must be script paths ending in .py or .ipynb (got 'data.csv')"),
        ('order = ["figs/*.py"]\n', "'order' entries must be script paths ending in .py or .ipynb (got 'figs/*.py')"),
        ('cache-dir = " "\n', "'cache-dir' must be a non-empty path string (got ' ')"),
        ("accepted-file = 2024-01-01\n", "'accepted-file' must be a non-empty path string (got 2024-01-01)"),
        ("timeout_s = 5\n", "unknown key 'timeout_s' (did you mean 'timeout'?)"),
        ("working_dir = 'root'\n", "unknown key 'working_dir' (TOML keys are kebab-case: 'working-dir')"),
        ("colour = 1\n", "unknown key 'colour'"),
        ("rules = 3\n", "'rules' must be a table (got 3)"),
    ],
)
def test_bad_values(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, body: str, expected: str) -> None:
    monkeypatch.chdir(tmp_path)
    pyproject(tmp_path, body)
    assert error_of(tmp_path) == f"pyproject.toml [tool.figproof]: {expected}"


def test_whole_number_floats_count_as_integers_like_json_schema(tmp_path: Path) -> None:
    # JSON Schema 2020-12 (Validation, section 6.1.1 "type"): "integer" matches any number with a zero fractional part.
    pyproject(tmp_path, "jobs = 2.0\nmemory-limit = 512.0\n")
    cfg = load_config(tmp_path, rules=rules_pkg.by_id())
    assert (cfg.jobs, cfg.memory_limit) == (2, 512)
    assert isinstance(cfg.jobs, int) and isinstance(cfg.memory_limit, int)


@pytest.mark.parametrize(
    ("table", "body", "expected"),
    [
        ("spread-checks", "severity = 'note'\n", "[tool.figproof.rules]: unknown rule 'spread-checks' (did you mean 'spread-check'?)"),
        ("spread-check", "severity = 'fatal'\n", "[tool.figproof.rules.spread-check]: 'severity' must be one of 'error', 'warning', 'note', 'off' (got 'fatal')"),
        ("spread-check", "max_share = 0.2\n", "[tool.figproof.rules.spread-check]: unknown knob 'max_share' (TOML keys are kebab-case: 'max-share')"),
        ("spread-check", "max-shares = 0.2\n", "[tool.figproof.rules.spread-check]: unknown knob 'max-shares' (did you mean 'max-share'?)"),
        ("spread-check", "max-share = 1.5\n", "[tool.figproof.rules.spread-check]: 'max-share' must be at most 1 (got 1.5)"),
        ("spread-check", "min-points = 0\n", "[tool.figproof.rules.spread-check]: 'min-points' must be at least 1 (got 0)"),
        ("spread-check", "scale = 'big'\n", "[tool.figproof.rules.spread-check]: 'scale' must be a number (got 'big')"),
        ("spread-check", "scale = true\n", "[tool.figproof.rules.spread-check]: 'scale' must be a number (got true)"),
        ("spread-check", "scale = -inf\n", "[tool.figproof.rules.spread-check]: 'scale' must be a number (got -inf)"),
    ],
)
def test_bad_rule_tables(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, table: str, body: str, expected: str) -> None:
    monkeypatch.chdir(tmp_path)
    pyproject(tmp_path, f"[tool.figproof.rules.{table}]\n{body}")
    assert error_of(tmp_path) == f"pyproject.toml {expected}"


def test_rule_table_must_be_a_table(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    pyproject(tmp_path, "rules = { spread-check = 2 }\n")
    assert error_of(tmp_path) == "pyproject.toml [tool.figproof.rules]: rule 'spread-check' must be a table (got 2)"


def test_rule_without_knobs_says_so(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    pyproject(tmp_path, "[tool.figproof.rules.script-fails]\nlimit = 3\n")
    text = error_of(tmp_path, rules=rules_pkg.by_id())
    assert text == "pyproject.toml [tool.figproof.rules.script-fails]: unknown knob 'limit' (this rule has no knobs)"


def test_tool_table_in_figproof_toml_gets_a_hint(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    write(tmp_path, "figproof.toml", "[tool.figproof]\ntimeout = 3\n")
    assert error_of(tmp_path).startswith("figproof.toml: unknown key 'tool' (figproof.toml holds the keys at its top level")


def test_tool_figproof_that_is_not_a_table(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    write(tmp_path, "pyproject.toml", "[tool]\nfigproof = 1\n")
    assert error_of(tmp_path) == "pyproject.toml: 'tool.figproof' must be a table (got 1)"


def test_invalid_toml_carries_tomllib_message_on_one_line(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    text = "[tool.figproof]\ntimeout = \n"
    write(tmp_path, "pyproject.toml", text)
    # Reference: the standard library's own TOML parser message for the same text.
    with pytest.raises(tomllib.TOMLDecodeError) as ref:
        tomllib.loads(text)
    assert error_of(tmp_path) == f"pyproject.toml: invalid TOML: {ref.value}"


def test_non_utf8_and_unreadable_files(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    (tmp_path / "figproof.toml").write_bytes(b"timeout = 3 # caf\xe9\n")
    assert error_of(tmp_path) == "figproof.toml: invalid TOML: not UTF-8 text (byte 17)"
    (tmp_path / "figproof.toml").unlink()
    (tmp_path / "figproof.toml").mkdir()  # a folder by that name is not a config file: passed over
    assert load_config(tmp_path, rules=rules_pkg.by_id()).source is None


def test_rule_settings_plug_into_the_rule_engine(tmp_path: Path) -> None:
    pyproject(tmp_path, "[tool.figproof.rules.script-fails]\nseverity = 'warning'\n")
    cfg = load_config(tmp_path, rules=rules_pkg.by_id())
    failed = ScriptRun(path="figures/growth.py", status="failed", error=ScriptError(kind="exception", type="KeyError"))
    found = rules_pkg.apply([failed], RunContext(), cfg.rules)
    assert [(f.rule, f.severity) for f in found] == [("script-fails", "warning")]
    off = RuleSettings("off", {})
    assert rules_pkg.apply([failed], RunContext(), {"script-fails": off}) == []


# --------------------------------------------------------------------------- JSON schema


def shipped_schema() -> dict[str, Any]:
    text = resources.files("figproof").joinpath("schema/config.schema.json").read_text("utf-8")
    return json.loads(text)


def schema_accepts(schema: dict[str, Any], table: dict[str, Any]) -> bool:
    return not list(jsonschema.Draft202012Validator(schema).iter_errors(table))


def test_shipped_schema_is_valid_draft_2020_12() -> None:
    schema = shipped_schema()
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.Draft202012Validator.check_schema(config_schema(rules_pkg.by_id()))
    assert set(schema["properties"]) == set(KEYS)


def test_schema_defaults_match_the_loader_defaults(tmp_path: Path) -> None:
    props = shipped_schema()["properties"]
    cfg = Config(root=tmp_path)
    for key, (name, _check) in config_mod._KEYS.items():
        if "default" in props[key]:
            assert props[key]["default"] == getattr(cfg, name), key


# Each case: the [tool.figproof] body, whether it is valid.  The loader and both schemas must agree.
GENERAL_CASES = [
    ("", True),
    ("timeout = 0.5\njobs = 4\nmemory-limit = 1\n", True),
    ("jobs = 4.0\n", True),
    ('include = ["**/*.py", "figures"]\nexclude = ["scratch_*"]\n', True),
    ('order = ["prep/make.py", "fig.ipynb"]\n', True),
    ('working-dir = "root"\nfail-on = "never"\nnetwork = false\n', True),
    ('figure-dirs = ["paper/figures"]\naccepted-file = "a.json"\ncache-dir = ".c"\n', True),
    ("timeout = -3\n", False),
    ("timeout = 0\n", False),
    ('timeout = "2"\n', False),
    ("jobs = 1.5\n", False),
    ("jobs = 0\n", False),
    ("memory-limit = true\n", False),
    ('working-dir = "cwd"\n', False),
    ('fail-on = "off"\n', False),
    ("network = 1\n", False),
    ('include = "x.py"\n', False),
    ('include = ["/etc/*.py"]\n', False),
    ('include = ["a/../b.py"]\n', False),
    ('include = ["C:/lab/x.py"]\n', False),
    ('exclude = [".."]\n', False),
    ('exclude = ["./"]\n', False),
    ('order = ["a.py", "a.py"]\n', False),
    ('order = ["a.txt"]\n', False),
    ('order = ["*.py"]\n', False),
    ('cache-dir = ""\n', False),
    ("accepted-file = 3\n", False),
    ("unknown = 1\n", False),
    ("rules = 3\n", False),
    ("[tool.figproof.rules.spread-check]\nseverity = 'fatal'\n", False),
    ("[tool.figproof.rules.spread-check]\nmax-share = 'x'\n", False),
    ("[tool.figproof.rules.Spread_Check]\nseverity = 'note'\n", False),
]
# Cases only the catalogue-aware schema (config_schema) can judge: the shipped file allows any rule id and knob.
CATALOGUE_CASES = [
    ("[tool.figproof.rules.spread-check]\nseverity = 'note'\nmax-share = 1\nmin-points = 10\nscale = -4\n", True),
    ("[tool.figproof.rules.spread-check]\nmax-share = 1.01\n", False),
    ("[tool.figproof.rules.spread-check]\nmin-points = 0.5\n", False),
    ("[tool.figproof.rules.spread-check]\nbogus = 1\n", False),
    ("[tool.figproof.rules.other-rule]\nseverity = 'note'\n", False),
]


def loader_accepts(tmp_path: Path, body: str) -> bool:
    pyproject(tmp_path, body)
    try:
        load_config(tmp_path, rules=TEST_RULES)
    except ConfigError:
        return False
    return True


def table_of(body: str) -> dict[str, Any]:
    return tomllib.loads("[tool.figproof]\n" + body)["tool"]["figproof"]


@pytest.mark.parametrize(("body", "valid"), GENERAL_CASES)
def test_loader_and_schemas_agree(tmp_path: Path, body: str, valid: bool) -> None:
    table = table_of(body)
    assert loader_accepts(tmp_path, body) is valid
    assert schema_accepts(shipped_schema(), table) is valid
    assert schema_accepts(config_schema(TEST_RULES), table) is valid


@pytest.mark.parametrize(("body", "valid"), CATALOGUE_CASES)
def test_loader_and_catalogue_schema_agree(tmp_path: Path, body: str, valid: bool) -> None:
    table = table_of(body)
    assert loader_accepts(tmp_path, body) is valid
    assert schema_accepts(config_schema(TEST_RULES), table) is valid
    if valid:
        assert schema_accepts(shipped_schema(), table)  # the generic file never rejects what the loader takes


def test_catalogue_schema_covers_the_real_rules() -> None:
    schema = config_schema(rules_pkg.by_id())
    former = {old for r in rules_pkg.RULES for old in r.former_ids}  # renamed ids stay valid, marked deprecated
    assert set(schema["properties"]["rules"]["properties"]) == set(rules_pkg.by_id()) | former
    assert all(schema["properties"]["rules"]["properties"][old]["deprecated"] for old in former)
    assert schema_accepts(schema, {"rules": {"script-fails": {"severity": "note"}}})

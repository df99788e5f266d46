"""The CI and pre-commit examples parse, and every figproof command in them uses real flags.

The flags are read from ``figproof.cli.build_parser()`` when the CLI module exists; until then
from the list below, which must name only what the CLI is meant to accept.  The pre-commit files
are also validated by pre-commit's own loader (``pre_commit.clientlib``) when it is installed.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import os
import re
import shlex
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
import yaml

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "action_examples"
HOOKS = ROOT / ".pre-commit-hooks.yaml"

# A fixed flag table for testing the command scanner itself; the examples are checked against the real parser.
FALLBACK_FLAGS: dict[str, set[str]] = {
    "check": {"--json", "--sarif", "--markdown", "--images", "--gitlab", "--changed-files", "--changed-since",
              "--shard", "--quiet", "--verbose"},
    "merge": {"--json", "--sarif", "--markdown", "--gitlab"},
    "accept": set(),
    "demo": set(),
    "rules": set(),
    "explain": set(),
}

COMMAND_KEYS = {"run", "script", "before_script", "after_script", "entry"}
_OPERATORS = {"||", "&&", ";", "|", "&"}


def known_flags() -> dict[str, set[str]]:
    """Subcommand -> long options, from figproof's real argument parser."""
    from figproof.cli import build_parser

    found: dict[str, set[str]] = {}
    for action in build_parser()._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                found[name] = {o for a in sub._actions for o in a.option_strings if o.startswith("--")}
    return found


def _shell_commands(text: str) -> list[list[str]]:
    """figproof invocations (token lists) in a piece of shell."""
    text = re.sub(r"\\\n", " ", text)
    # GitHub replaces ${{ expr }} before the shell runs; stand in one word for it.
    text = re.sub(r"\$\{\{\s*([\w.\-]+)\s*\}\}", r"__\1__", text)
    commands = []
    for line in text.splitlines():
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        lexer = shlex.shlex(line, posix=True, punctuation_chars=True)
        lexer.whitespace_split = True
        lexer.commenters = "#"
        current: list[str] = []
        for tok in [*lexer, ";"]:
            if tok in _OPERATORS:
                if current and current[0] == "figproof":
                    commands.append(current)
                current = []
            else:
                current.append(tok)
    return commands


def _yaml_commands(node: Any) -> list[list[str]]:
    found: list[list[str]] = []
    if isinstance(node, dict):
        for key, value in node.items():
            if key in COMMAND_KEYS:
                for text in value if isinstance(value, list) else [value]:
                    if isinstance(text, str):
                        found.extend(_shell_commands(text))
            else:
                found.extend(_yaml_commands(value))
    elif isinstance(node, list):
        for item in node:
            found.extend(_yaml_commands(item))
    return found


def _option(tokens: list[str], flag: str) -> str:
    return tokens[tokens.index(flag) + 1]


def _load(path: Path) -> Any:
    return yaml.safe_load(path.read_text(encoding="utf-8"))


YAML_FILES = sorted([*EXAMPLES.glob("*.yml"), *EXAMPLES.glob("*.yaml"), HOOKS])
SHELL_FILES = sorted(EXAMPLES.glob("*.sh"))


def test_examples_exist() -> None:
    names = {p.name for p in EXAMPLES.iterdir()}
    assert {"github-workflow.yml", "github-sharded-workflow.yml", "gitlab-ci.yml", "gitlab-ci-sharded.yml",
            "pre-commit-config.yaml", "plain-ci.sh"} <= names
    # Every example is covered by one of the checks below.
    assert {p.name for p in EXAMPLES.iterdir() if p.suffix != ".md"} == {p.name for p in [*YAML_FILES, *SHELL_FILES] if p.parent == EXAMPLES}


@pytest.mark.parametrize("path", [*YAML_FILES, *SHELL_FILES], ids=lambda p: p.name)
def test_commands_use_known_subcommands_and_flags(path: Path) -> None:
    commands = _shell_commands(path.read_text("utf-8")) if path.suffix == ".sh" else _yaml_commands(_load(path))
    assert commands, f"{path.name} names no figproof command"
    assert _unknown(commands, known_flags()) == [], path.name


def _unknown(commands: list[list[str]], flags: dict[str, set[str]]) -> list[str]:
    """Subcommands and long options of ``commands`` that ``flags`` does not know."""
    bad = []
    for tokens in commands:
        sub = next((t for t in tokens[1:] if not t.startswith("-")), None)
        if sub not in flags:
            bad.append(f"subcommand {sub!r} in {shlex.join(tokens)}")
            continue
        bad.extend(f"figproof {sub} {tok}" for tok in tokens[1:]
                   if tok.startswith("--") and tok.split("=", 1)[0] not in flags[sub])
    return bad


def test_checker_catches_unknown_names() -> None:
    commands = _shell_commands("x=1; figproof check --json=a.json --bogus . && figproof frobnicate || true\n")
    assert [c[1] for c in commands] == ["check", "frobnicate"]
    assert _unknown(commands, FALLBACK_FLAGS) == ["figproof check --bogus", "subcommand 'frobnicate' in figproof frobnicate"]


def test_github_workflow_uploads_what_it_writes() -> None:
    doc = _load(EXAMPLES / "github-workflow.yml")
    [check] = _yaml_commands(doc)
    assert check[:2] == ["figproof", "check"]
    for flag in ("--sarif", "--json", "--markdown", "--images", "--html"):
        assert _option(check, flag).startswith("figproof-report/")
    steps = doc["jobs"]["figproof"]["steps"]
    uses = {s.get("uses", "").split("@")[0]: s for s in steps}
    assert uses["github/codeql-action/upload-sarif"]["with"]["sarif_file"] == _option(check, "--sarif")
    assert uses["actions/upload-artifact"]["with"]["path"].rstrip("/") == "figproof-report"
    # Reports must be uploaded even when the check fails the build.
    assert uses["github/codeql-action/upload-sarif"]["if"] == "always()"
    assert doc["permissions"]["security-events"] == "write"


def test_gitlab_job_declares_its_code_quality_report() -> None:
    doc = _load(EXAMPLES / "gitlab-ci.yml")
    [check] = _yaml_commands(doc)
    assert doc["figproof"]["artifacts"]["reports"]["codequality"] == _option(check, "--gitlab")
    assert doc["figproof"]["artifacts"]["when"] == "always"


def test_sharded_examples_shard_and_merge() -> None:
    gh = _load(EXAMPLES / "github-sharded-workflow.yml")
    commands = _yaml_commands(gh)
    subs = [c[1] for c in commands]
    assert subs == ["check", "merge"]
    shards = gh["jobs"]["check"]["strategy"]["matrix"]["shard"]
    n = len(shards)
    assert _option(commands[0], "--shard") == f"__matrix.shard__/{n}"
    assert shards == list(range(1, n + 1))  # --shard is 1-based
    merged_inputs = [t for t in commands[1][2:] if t.endswith(".json") and not t.startswith("figproof-report")]
    assert len(merged_inputs) == n
    gl = _load(EXAMPLES / "gitlab-ci-sharded.yml")
    gl_commands = _yaml_commands(gl)
    assert [c[1] for c in gl_commands] == ["check", "merge"]
    assert _option(gl_commands[0], "--shard") == "$CI_NODE_INDEX/$CI_NODE_TOTAL"  # GitLab numbers nodes from 1


def test_hooks_are_system_hooks_and_match_the_example_config() -> None:
    hooks = {h["id"]: h for h in _load(HOOKS)}
    assert set(hooks) == {"figproof", "figproof-full"}
    assert all(h["language"] == "system" for h in hooks.values())
    assert hooks["figproof"]["entry"] == "figproof check --changed-files" and hooks["figproof"]["pass_filenames"]
    assert hooks["figproof-full"]["entry"] == "figproof check" and not hooks["figproof-full"]["pass_filenames"]
    assert set(hooks["figproof-full"]["stages"]) == {"manual", "pre-push"}
    local = {h["id"]: h for h in _load(EXAMPLES / "pre-commit-config.yaml")["repos"][0]["hooks"]}
    for hook_id, hook in hooks.items():
        for key in ("entry", "language", "pass_filenames", "stages", "require_serial"):
            assert local[hook_id][key] == hook[key], (hook_id, key)


def test_pre_commit_accepts_the_files() -> None:
    clientlib = pytest.importorskip("pre_commit.clientlib", reason="needs the pre-commit package")
    manifest = clientlib.load_manifest(str(HOOKS))
    assert [h["id"] for h in manifest] == ["figproof", "figproof-full"]
    config = clientlib.load_config(str(EXAMPLES / "pre-commit-config.yaml"))
    assert config["repos"][0]["repo"] == "local"


@pytest.mark.parametrize("path", SHELL_FILES, ids=lambda p: p.name)
def test_shell_examples_parse(path: Path) -> None:
    sh = shutil.which("sh")
    if sh is None:
        pytest.skip("needs a POSIX sh")
    subprocess.run([sh, "-n", str(path)], check=True)


GOOD_SCRIPT = ("import matplotlib.pyplot as plt\nfig, ax = plt.subplots()\nax.plot([1, 2, 3], [2, 4, 5])\n"
               "fig.savefig('figures/growth.png')\n")
BROKEN_SCRIPT = ("import matplotlib.pyplot as plt\nvalues = [1.0, 2.0]\nfig, ax = plt.subplots()\n"
                 "ax.plot(values, values[5])\n")


class _Lab:
    """A throwaway git repo with the example pre-commit config, run through the real pre-commit."""

    def __init__(self, tmp_path: Path) -> None:
        if shutil.which("git") is None:
            pytest.skip("needs git")
        pytest.importorskip("pre_commit", reason="needs the pre-commit package")
        if importlib.util.find_spec("figproof.cli") is None:
            pytest.skip("needs figproof.cli (the command the hooks run)")
        bindir = Path(sys.executable).parent
        if not (bindir / "figproof").exists():
            pytest.skip("needs the figproof console script next to the test interpreter")
        self.env = {**os.environ, "PATH": f"{bindir}{os.pathsep}{os.environ.get('PATH', '')}",
                    "PRE_COMMIT_HOME": str(tmp_path / "pre-commit-home"),
                    "GIT_AUTHOR_NAME": "lab", "GIT_AUTHOR_EMAIL": "lab@example.org",
                    "GIT_COMMITTER_NAME": "lab", "GIT_COMMITTER_EMAIL": "lab@example.org"}
        for name in ("GITHUB_ACTIONS", "GITHUB_STEP_SUMMARY"):
            self.env.pop(name, None)
        self.repo = tmp_path / "lab"
        (self.repo / "figures").mkdir(parents=True)
        (self.repo / ".pre-commit-config.yaml").write_text((EXAMPLES / "pre-commit-config.yaml").read_text("utf-8"))
        self.run("git", "init", "-q")

    def run(self, *args: str) -> subprocess.CompletedProcess[str]:
        return subprocess.run(args, cwd=self.repo, env=self.env, capture_output=True, text=True, timeout=300)

    def add(self, name: str, text: str) -> None:
        (self.repo / name).write_text(text)
        self.run("git", "add", name)

    def hook(self, *args: str) -> subprocess.CompletedProcess[str]:
        return self.run(sys.executable, "-m", "pre_commit", "run", *args)


@pytest.mark.slow
def test_full_hook_through_real_pre_commit(tmp_path: Path) -> None:
    """The manual/pre-push hook checks the whole repo: a broken script fails it."""
    lab = _Lab(tmp_path)
    lab.add("figures/growth.py", GOOD_SCRIPT)
    ok = lab.hook("figproof-full", "--hook-stage", "manual")
    assert ok.returncode == 0, ok.stdout + ok.stderr
    lab.add("figures/broken.py", BROKEN_SCRIPT)
    failed = lab.hook("figproof-full", "--hook-stage", "manual")
    assert failed.returncode != 0
    assert "script-fails" in failed.stdout + failed.stderr


@pytest.mark.slow
def test_fast_hook_through_real_pre_commit(tmp_path: Path) -> None:
    """The commit hook checks the staged scripts: a staged broken script fails it, a good one passes."""
    if "--changed-files" not in known_flags().get("check", set()):
        pytest.skip("figproof check has no --changed-files yet (issue 6)")
    lab = _Lab(tmp_path)
    lab.add("figures/growth.py", GOOD_SCRIPT)
    ok = lab.hook("figproof", "--files", "figures/growth.py")
    assert ok.returncode == 0, ok.stdout + ok.stderr
    lab.add("figures/broken.py", BROKEN_SCRIPT)
    failed = lab.hook("figproof", "--files", "figures/broken.py")
    assert failed.returncode != 0
    assert "script-fails" in failed.stdout + failed.stderr

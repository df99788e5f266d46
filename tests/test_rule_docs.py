"""Every rule's documented examples really behave as documented.

Each rule carries a Bad and a Good example script. Both are run through the
real child process in a small repo: Bad must raise the rule, Good must not.
The repo first holds the files the Good example writes, as committed figures,
so the reproducibility rules have something to compare with.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from figproof.docgen import pages
from figproof.pipeline import CheckOptions, check
from figproof.rules import RULES
from figproof.rules.base import Rule
from figproof.run.execute import Runner

DOCS = Path(__file__).resolve().parents[1] / "docs" / "rules"


def _repo(tmp_path: Path, name: str, script: str, committed: Path | None, rule: Rule | None = None) -> Path:
    repo = tmp_path / name
    repo.mkdir()
    # an opt-in rule is turned on the way its documentation says: by giving it a severity
    on = f'\n[rules.{rule.id}]\nseverity = "{rule.severity}"\n' if rule is not None and rule.opt_in else ""
    (repo / "figproof.toml").write_text("timeout = 60\n" + on)
    if committed is not None:
        shutil.copytree(committed, repo, dirs_exist_ok=True)
    (repo / "fig.py").write_text(script)
    return repo


def _regenerated(tmp_path: Path, script: str, runner: Runner) -> Path:
    """Run the Good example once and keep the files it saves (they become the committed figures)."""
    repo = _repo(tmp_path, "first", script, None)
    artifacts = tmp_path / "artifacts"
    check(repo, CheckOptions(artifacts=artifacts), runner=runner)
    out = artifacts / "fig.py" / "regenerated"
    return out if out.exists() else tmp_path / "none"


def _rules_found(repo: Path, rule_id: str, runner: Runner) -> list:
    twice = rule_id == "output-nondeterministic"
    options = CheckOptions(twice=True) if twice else CheckOptions()
    result = check(repo, options, runner=runner).result
    return [f for f in result.findings if f.rule == rule_id]


@pytest.mark.slow
@pytest.mark.parametrize("rule", RULES, ids=lambda r: r.id)
def test_bad_raises_and_good_does_not(rule, tmp_path: Path, warm_runner: Runner) -> None:
    committed = _regenerated(tmp_path, rule.good, warm_runner)
    bad = _rules_found(_repo(tmp_path, "bad", rule.bad, committed, rule), rule.id, warm_runner)
    assert bad, f"{rule.id}: the Bad example raised nothing"
    good = _rules_found(_repo(tmp_path, "good", rule.good, committed, rule), rule.id, warm_runner)
    assert not good, f"{rule.id}: the Good example raised {[f.message for f in good]}"


def test_rule_pages_are_current() -> None:
    """docs/rules/ is generated from the rule records (python -m figproof.docgen docs/rules)."""
    for name, text in pages().items():
        path = DOCS / name
        assert path.exists() and path.read_text(encoding="utf-8") == text, f"regenerate docs/rules ({name})"
    assert {p.name for p in DOCS.glob("*.md")} == set(pages())


def test_every_rule_is_documented() -> None:
    for r in RULES:
        assert r.summary and r.why and r.fix and r.sources, r.id
        assert r.id == r.id.lower() and " " not in r.id


def test_readme_lists_exactly_the_rules() -> None:
    readme = (DOCS.parents[1] / "README.md").read_text(encoding="utf-8")
    listed = [line.split("`")[1] for line in readme.splitlines() if line.startswith("| [`")]
    assert listed == [r.id for r in RULES]

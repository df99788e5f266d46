"""The parent's working-tree guard: any change to the user's repo during a check is named and fails it."""

from __future__ import annotations

import json
import os
import subprocess
import textwrap
from pathlib import Path

import pytest

from figproof import cli
from figproof.run import treeguard


def git(repo: Path, *args: str) -> None:
    subprocess.run(["git", "-C", str(repo), *args], check=True, capture_output=True,
                   env={**os.environ, "GIT_AUTHOR_NAME": "lab", "GIT_AUTHOR_EMAIL": "lab@example.org",
                        "GIT_COMMITTER_NAME": "lab", "GIT_COMMITTER_EMAIL": "lab@example.org"})


def lab_repo(root: Path) -> Path:
    for rel, text in {"data/a.csv": "x,y\n1,2\n", "data/b.csv": "x,y\n3,4\n", "notes.txt": "keep\n",
                      "tidy/old.txt": "old\n"}.items():
        (root / rel).parent.mkdir(parents=True, exist_ok=True)
        (root / rel).write_text(text)
    git(root, "init", "-q")
    git(root, "add", "-A")
    git(root, "commit", "-qm", "lab data")
    return root


def test_every_kind_of_change_is_named(tmp_path: Path) -> None:
    repo = lab_repo(tmp_path / "repo")
    before = treeguard.snapshot(repo)
    (repo / "data" / "a.csv").unlink()
    (repo / "data" / "b.csv").write_text("x,y\n3,5\n")  # same size, new bytes
    (repo / "notes.txt").chmod(0o600)
    (repo / "new.txt").write_text("planted\n")
    st = (repo / "tidy" / "old.txt").stat()
    (repo / "tidy" / "old.txt").write_text("old\n")  # rewritten with its own bytes and time stamps put back
    os.utime(repo / "tidy" / "old.txt", ns=(st.st_atime_ns, st.st_mtime_ns))
    changes = {c.path: c.change for c in treeguard.compare(before, treeguard.snapshot(repo))}
    assert changes["data/a.csv"] == "file removed"
    assert changes["data/b.csv"] == "content rewritten"
    assert changes["notes.txt"] == "permissions 644 → 600"
    assert changes["new.txt"] == "file added"
    assert changes["tidy/old.txt"] == "time stamps changed, content as committed"
    assert changes["data"] == "entries added or removed" and "" not in changes


def test_an_untouched_tree_compares_equal_and_skips_git_objects(tmp_path: Path) -> None:
    repo = lab_repo(tmp_path / "repo")
    (repo / "out").mkdir()
    before = treeguard.snapshot(repo, skip=("out/.figproof-cache",))
    (repo / "data" / "a.csv").read_bytes()  # reading changes nothing the guard compares
    (tmp_path / "loose.txt").write_text("a new object\n")
    git(repo, "hash-object", "-w", str(tmp_path / "loose.txt"))  # git adds to .git/objects
    (repo / "out" / ".figproof-cache").mkdir(parents=True)  # figproof's own cache (made before the snapshot)
    assert not any(p.startswith((".git/objects", "out/.figproof-cache")) for p in before.stamps)
    assert ".git/HEAD" in before.stamps and ".git/index" in before.stamps
    # the folder holding the cache gained an entry: not a change of the user's files
    assert treeguard.compare(before, treeguard.snapshot(repo, skip=("out/.figproof-cache",))) == ()


@pytest.mark.slow
def test_a_change_that_gets_past_the_child_fails_the_check_loudly(tmp_path: Path) -> None:
    """chmod is a change no Landlock ABI restricts, and Python's hooks do not see a program's own calls: the
    tree guard is what catches it."""
    repo = lab_repo(tmp_path / "repo")
    (repo / "pyproject.toml").write_text('[tool.figproof]\nfail-on = "never"\n')
    (repo / "fig.py").write_text(textwrap.dedent(f"""
        import subprocess
        import matplotlib.pyplot as plt
        subprocess.run(["chmod", "600", {str(repo / 'data' / 'a.csv')!r}], check=True)
        plt.plot([1, 2])
    """))
    git(repo, "add", "-A")
    git(repo, "commit", "-qm", "figure")
    report, summary = tmp_path / "report.json", tmp_path / "summary.md"
    try:
        code = cli.main(["check", str(repo), "--no-cache", "--quiet", "--json", str(report),
                         "--markdown", str(summary)])
    finally:
        (repo / "data" / "a.csv").chmod(0o644)
    data = json.loads(report.read_text())
    assert data["working_tree_changes"] == [{"path": "data/a.csv", "change": "permissions 644 → 600"}]
    assert code == 1 and data["summary"]["passed"] is False  # although fail-on = "never"
    text = summary.read_text()
    assert text.index("the working tree changed during the check") < text.index("### Scripts")
    assert "`data/a.csv`: permissions 644 → 600" in text

"""Scripts that reach back into the user's own repo by absolute path: every attempt is refused and reported.

One fixture repo holds a script per way of changing a file (each Python mutator, ctypes calling the C
library, a symbolic link in the repo that leads out, a write into the home folder) beside an honest
script.  One check runs them all.  Each test asserts its part: the user's tree is byte-identical afterwards
(every file hashed), a `write-outside-copy` finding names the script's line 3, the honest script is still
checked, and the check fails with exit code 1 (README, "Exit codes").
"""

from __future__ import annotations

import hashlib
import json
import os
import textwrap
import uuid
from pathlib import Path

import pytest

from figproof import cli
from figproof.child import landlock

pytestmark = pytest.mark.skipif(not Path("/proc/self/fd").exists(),
                                reason="the hostile scripts use POSIX calls and the guard reads /proc (Linux)")
KERNEL = landlock.abi_version() > 0  # Landlock present and enabled (this project's CI machine has ABI 7)

HEAD = ("import ctypes, os, pathlib, shutil, subprocess\n"
        "import matplotlib.pyplot as plt; REPO, OUT = {repo!r}, {out!r}\n")
# each call is line 3 of its script; REPO is the user's repo (not the copy the script runs on)
ESCAPES = {
    "remove.py": "os.remove(REPO + '/data/input.csv')",
    "unlink.py": "os.unlink(REPO + '/data/input.csv')",
    "path_unlink.py": "pathlib.Path(REPO, 'data', 'input.csv').unlink()",
    "rename.py": "os.rename(REPO + '/data/input.csv', REPO + '/data/moved.csv')",
    "replace.py": "os.replace(REPO + '/README.md', REPO + '/data/input.csv')",
    "truncate.py": "os.truncate(REPO + '/data/input.csv', 0)",
    "chmod.py": "os.chmod(REPO + '/data/input.csv', 0)",
    "rmtree.py": "shutil.rmtree(REPO + '/data')",
    "move.py": "shutil.move(REPO + '/data', REPO + '/elsewhere')",
    "os_open.py": "os.close(os.open(REPO + '/README.md', os.O_WRONLY | os.O_TRUNC))",
    "symlink.py": "os.symlink('/etc/hostname', REPO + '/data/planted')",
    "mkdir.py": "os.mkdir(REPO + '/new_folder')",
    "utime.py": "os.utime(REPO + '/README.md', (0, 0))",
    "write_open.py": "open(REPO + '/README.md', 'w').write('gone')",
    "ctypes_unlink.py": "ctypes.CDLL(None).unlink((REPO + '/data/input.csv').encode())",
    "link_out.py": "open('out_link.txt', 'w').write('through the link')",
    "home.py": "open(OUT, 'w').write('escaped')",
}
if KERNEL:
    # only the kernel layer holds a program Python does not run: without it `rm` would delete the test's repo
    ESCAPES["subprocess_rm.py"] = "subprocess.run(['rm', '-rf', REPO], check=False)"
HONEST = """
import matplotlib.pyplot as plt
fig, ax = plt.subplots()
ax.plot([1, 2, 3], [2, 4, 3])
ax.set_xlabel("day")
ax.set_ylabel("growth (mm)")
fig.savefig("honest.png")
"""
FILES = {"data/input.csv": "a,b\n1,2\n", "README.md": "the lab's figures\n", "keep/notes.txt": "keep me\n"}


def tree(root: Path) -> dict[str, tuple[int, str]]:
    """Every entry under ``root``: its mode and the SHA-256 of its bytes (a link's target text for links)."""
    out = {}
    for path in sorted(root.rglob("*")):
        st = path.lstat()
        if path.is_symlink():
            data = os.readlink(path).encode()
        elif path.is_file():
            data = path.read_bytes()
        else:
            data = b""
        out[path.relative_to(root).as_posix()] = (st.st_mode, hashlib.sha256(data).hexdigest())
    return out


class Checked:
    def __init__(self, repo: Path, before: dict[str, tuple[int, str]], code: int, report: dict[str, object],
                 outside: Path, home_file: Path) -> None:
        self.repo, self.before, self.code, self.report = repo, before, code, report
        self.outside, self.home_file = outside, home_file


@pytest.fixture(scope="module")
def checked(tmp_path_factory: pytest.TempPathFactory) -> Checked:
    top = tmp_path_factory.mktemp("escapes")
    repo, outside = top / "repo", top / "outside.txt"
    outside.write_text("a file beside the repo\n")
    home_file = Path.home() / f".figproof-escape-{uuid.uuid4().hex}.txt"
    for rel, text in FILES.items():
        (repo / rel).parent.mkdir(parents=True, exist_ok=True)
        (repo / rel).write_text(text)
    (repo / "out_link.txt").symlink_to(outside)  # committed link that leads out of the repo
    head = HEAD.format(repo=str(repo), out=str(home_file))
    for name, call in ESCAPES.items():
        (repo / name).write_text(head + call + "\n")
    (repo / "honest.py").write_text(textwrap.dedent(HONEST))
    before = tree(repo)
    report = top / "report.json"
    try:
        code = cli.main(["check", str(repo), "--no-cache", "--quiet", "--json", str(report)])
    finally:
        escaped = home_file.exists()
        home_file.unlink(missing_ok=True)
    assert not escaped, "a script wrote into the home folder"
    return Checked(repo, before, code, json.loads(report.read_text()), outside, home_file)


def _findings(checked: Checked, script: str) -> list[dict[str, object]]:
    return [f for f in checked.report["findings"] if f["path"] == script]  # type: ignore[union-attr, index]


def test_users_tree_is_byte_identical(checked: Checked) -> None:
    after = tree(checked.repo)
    assert {k for k in after if after.get(k) != checked.before.get(k)} == set()
    assert set(after) == set(checked.before)
    assert checked.outside.read_text() == "a file beside the repo\n"


@pytest.mark.parametrize("script", sorted(ESCAPES))
def test_each_escape_is_a_finding_at_its_line(checked: Checked, script: str) -> None:
    found = [f for f in _findings(checked, script) if f["rule"] == "write-outside-copy"]
    assert [f["line"] for f in found] == [3], _findings(checked, script)
    assert "outside the copy of the repo" in str(found[0]["message"])
    # the refusal is the one cause: no second finding says the script failed with PermissionError
    assert not [f for f in _findings(checked, script) if f["rule"] == "script-fails"]


def test_the_message_shows_the_path_the_script_asked_for(checked: Checked) -> None:
    [f] = [f for f in _findings(checked, "home.py") if f["rule"] == "write-outside-copy"]
    assert str(checked.home_file) in str(f["message"])
    [f] = [f for f in _findings(checked, "rmtree.py") if f["rule"] == "write-outside-copy"]
    assert f"remove the tree {checked.repo}/data " in str(f["message"])


@pytest.mark.skipif(not KERNEL, reason="Landlock is absent or disabled on this machine")
def test_kernel_layers_are_active_and_listed(checked: Checked) -> None:
    runs = {r["path"]: r for r in checked.report["scripts"]}  # type: ignore[union-attr, index]
    for run in runs.values():
        assert {"kernel-write-confinement", "kernel-network-block", "python-write-guard"} <= set(run["isolation"])
    # the C library's unlink was let through to the kernel, which refused it; the report says so
    [f] = [f for f in _findings(checked, "ctypes_unlink.py") if f["rule"] == "write-outside-copy"]
    assert str(f["message"]).endswith("the kernel refused it")
    [f] = [f for f in _findings(checked, "subprocess_rm.py") if f["rule"] == "write-outside-copy"]
    assert f"`rm -rf {checked.repo}`" in str(f["message"])


def test_other_scripts_are_still_checked_and_the_check_fails(checked: Checked) -> None:
    runs = {r["path"]: r for r in checked.report["scripts"]}  # type: ignore[union-attr, index]
    assert runs["honest.py"]["status"] == "ok" and runs["honest.py"]["figures"]
    assert not _findings(checked, "honest.py")
    assert checked.code == 1
    assert checked.report["working_tree_changes"] == []  # every layer held: nothing reached the tree

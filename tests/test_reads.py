"""Reads that reach outside the repo are reported at the user's line, with the path the script asked for.

One fixture repo holds a script per way of reading past the repo (a file in the system's temp folder, one in
the home folder, a path starting with ``~``, symbolic links in the repo that lead out, a refused network
connection) and per kind of existence check, beside scripts that must stay quiet (a file the script wrote into
its own temp folder, an optional file probed and skipped).  The repo is checked once with the warm pool and once
with a fresh interpreter per script: both runners must tell the same story.  Each read is line 3 of its script.
"""

from __future__ import annotations

import os
import tempfile
import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest

from figproof.model.findings import Finding
from figproof.pipeline import CheckOptions, check
from figproof.run.execute import FreshInterpreter, Runner

pytestmark = pytest.mark.skipif(os.name != "posix", reason="the fixture repo holds symbolic links (POSIX)")

HEAD = ("import glob, os, pathlib, socket, tempfile, urllib.request\n"
        "import matplotlib.pyplot as plt; TMP_FILE, HOME_FILE, HOME_TILDE = {tmp!r}, {home!r}, {tilde!r}\n")
SCRIPTS = {
    "tmp_read.py": "open(TMP_FILE).read()",
    "home_read.py": "open(HOME_FILE).read()",
    "run_folder.py": "open('../spec.json').read()",  # figproof's run folder, beside the copy the script runs on
    "analysis/tilde_open.py": "open('~/Desktop/figproof-absent-plates.csv').read()",
    "tilde_pandas.py": "import pandas as pd; pd.read_csv(HOME_TILDE)",
    "link_abs.py": "open('data/abs_link.csv').read()",
    "link_rel.py": "open('data/rel_link.csv').read()",
    "own_temp.py": "fd, name = tempfile.mkstemp(suffix='.csv'); os.write(fd, b'1,2\\n'); os.close(fd); "
                   "open(name).read()",
    "probe_isfile.py": "if not os.path.isfile('data/gone.csv'):\n"
                       "    raise FileNotFoundError('data/gone.csv is missing: run fetch.py first')",
    "probe_pathlib.py": "if not pathlib.Path('data', 'absent.csv').exists():\n"
                        "    raise SystemExit('cannot go on without data/absent.csv')",
    "probe_glob.py": "if not glob.glob('runs/*.csv'):\n    raise RuntimeError('no runs/*.csv to plot')",
    "probe_outside.py": "if not os.path.exists('/srv/figproof-lab-share/plates.csv'):\n"
                        "    raise SystemExit('need /srv/figproof-lab-share/plates.csv')",
    "probe_optional.py": "if os.path.exists('data/optional.csv'):\n    open('data/optional.csv').read()",
    "probe_unrelated.py": "os.path.exists('data/optional.csv')\nscale = 1 / 0",
    # 192.0.2.7 is TEST-NET-1 and example.org is reserved (RFC 5737, RFC 2606): never real hosts
    "net_socket.py": "socket.create_connection(('192.0.2.7', 5432), 3)",
    "net_urlopen.py": "urllib.request.urlopen('http://example.org:8080/plates.csv')",
}
PLOT = "\nfig, ax = plt.subplots()\nax.plot([1, 2, 3], [2, 4, 3])\nfig.savefig('{name}.png')\n"


class Checked:
    def __init__(self, findings: list[Finding], top: Path, tmp_file: Path, home_file: Path) -> None:
        self.findings, self.top, self.tmp_file, self.home_file = findings, top, tmp_file, home_file

    def of(self, script: str, rule: str | None = None) -> list[Finding]:
        return [f for f in self.findings if f.path == script and (rule is None or f.rule == rule)]


@pytest.fixture(scope="module", params=["warm", "fresh"])
def checked(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory,
            warm_runner: Runner) -> Iterator[Checked]:
    top = tmp_path_factory.mktemp(f"reads-{request.param}")
    repo, shared = top / "repo", top / "shared"
    (repo / "data").mkdir(parents=True)
    shared.mkdir()
    (shared / "outside.csv").write_text("x,y\n1,2\n")
    (repo / "data" / "in.csv").write_text("x,y\n1,2\n")
    (repo / "data" / "abs_link.csv").symlink_to(shared / "outside.csv")
    (repo / "data" / "rel_link.csv").symlink_to("../../shared/outside.csv")
    fd, name = tempfile.mkstemp(prefix="figproof-read-", suffix=".csv", dir=tempfile.gettempdir())
    os.write(fd, b"x,y\n1,2\n")
    os.close(fd)
    tmp_file = Path(name)
    home_file = Path.home() / f".figproof-read-{uuid.uuid4().hex}.csv"
    home_file.write_text("x,y\n1,2\n")
    head = HEAD.format(tmp=str(tmp_file), home=str(home_file), tilde=f"~/{home_file.name}")
    for script, body in SCRIPTS.items():
        path = repo / script
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(head + body + PLOT.format(name=Path(script).stem))
    runner = warm_runner if request.param == "warm" else FreshInterpreter()
    try:
        result = check(repo, CheckOptions(cache=False), runner=runner).result
    finally:
        tmp_file.unlink(missing_ok=True)
        home_file.unlink(missing_ok=True)
    yield Checked(list(result.findings), top, tmp_file, home_file)


def _one(checked: Checked, script: str, rule: str) -> Finding:
    found = checked.of(script, rule)
    assert len(found) == 1, [(f.rule, f.line, f.message) for f in checked.of(script)]
    return found[0]


def test_a_file_in_the_system_temp_folder_is_an_input_outside_the_repo(checked: Checked) -> None:
    f = _one(checked, "tmp_read.py", "input-outside-repo")
    assert f.line == 3 and f.severity == "error"
    assert str(checked.tmp_file) in f.message and "(it does not exist here)" not in f.message


def test_a_file_in_the_run_folder_beside_the_copy_is_an_input_outside_the_repo(checked: Checked) -> None:
    f = _one(checked, "run_folder.py", "input-outside-repo")
    assert f.line == 3 and "../spec.json" in f.message and "outside the repo" in f.message


def test_a_file_the_script_wrote_into_its_own_temp_folder_is_not_an_input(checked: Checked) -> None:
    assert checked.of("own_temp.py") == []


def test_a_file_in_the_home_folder_is_named_as_such(checked: Checked) -> None:
    f = _one(checked, "home_read.py", "input-outside-repo")
    assert f.line == 3
    assert str(checked.home_file) in f.message and "in the home folder" in f.message


def test_a_path_starting_with_tilde_is_shown_as_the_script_wrote_it(checked: Checked) -> None:
    # open() does not expand ~, the script runs in analysis/: the path must not be joined onto that folder
    f = _one(checked, "analysis/tilde_open.py", "input-outside-repo")
    assert f.line == 3
    assert "~/Desktop/figproof-absent-plates.csv" in f.message and "in the home folder" in f.message
    assert "(it does not exist here)" in f.message
    assert not any("/~/" in g.message or "analysis/~" in g.message for g in checked.findings)
    # one finding per cause: the failure that follows is a note pointing at it
    [note] = checked.of("analysis/tilde_open.py", "script-fails")
    assert note.severity == "note" and "reported by input-outside-repo" in note.message


def test_a_tilde_path_that_pandas_expands_is_read_from_the_home_folder(checked: Checked) -> None:
    f = _one(checked, "tilde_pandas.py", "input-outside-repo")
    assert f.line == 3
    assert f"~/{checked.home_file.name}" in f.message and "in the home folder" in f.message
    assert "does not exist" not in f.message  # pandas expanded ~ and read the file
    assert not checked.of("tilde_pandas.py", "script-fails")


def test_a_link_in_the_repo_that_leads_out_is_named_with_where_it_leads(checked: Checked) -> None:
    f = _one(checked, "link_abs.py", "input-outside-repo")
    assert f.line == 3
    assert f.message.startswith("data/abs_link.csv, read at link_abs.py:3, is a symbolic link in the repo")
    assert str(checked.top / "shared" / "outside.csv") in f.message
    # a relative link is shown as it is written in the repo; in the copy it leads nowhere
    f = _one(checked, "link_rel.py", "input-outside-repo")
    assert f.line == 3 and "data/rel_link.csv" in f.message and "to ../../shared/outside.csv" in f.message


@pytest.mark.parametrize(("script", "path"), [("probe_isfile.py", "data/gone.csv"),
                                              ("probe_pathlib.py", "data/absent.csv"),
                                              ("probe_glob.py", "runs/*.csv")])
def test_an_existence_check_the_failure_names_is_the_missing_input(checked: Checked, script: str,
                                                                    path: str) -> None:
    f = _one(checked, script, "input-missing")
    assert f.line == 3 and f.severity == "error" and f.message.startswith(f"{path} is ")
    [note] = checked.of(script, "script-fails")
    assert note.severity == "note" and "reported by input-missing" in note.message and note.line == 4


def test_an_existence_check_outside_the_repo_the_failure_names_is_an_input_outside_it(checked: Checked) -> None:
    f = _one(checked, "probe_outside.py", "input-outside-repo")
    assert f.line == 3 and "/srv/figproof-lab-share/plates.csv is checked for" in f.message
    assert not checked.of("probe_outside.py", "input-missing")
    [note] = checked.of("probe_outside.py", "script-fails")
    assert note.severity == "note"


def test_an_optional_file_probed_and_skipped_gives_no_finding(checked: Checked) -> None:
    assert checked.of("probe_optional.py") == []


def test_a_probe_the_failure_does_not_name_is_not_its_cause(checked: Checked) -> None:
    assert not checked.of("probe_unrelated.py", "input-missing")
    [f] = checked.of("probe_unrelated.py", "script-fails")
    assert f.severity == "error" and "ZeroDivisionError" in f.message


@pytest.mark.parametrize(("script", "address"), [("net_socket.py", "192.0.2.7:5432"),
                                                 ("net_urlopen.py", "example.org:8080")])
def test_a_refused_connection_names_host_and_port_once(checked: Checked, script: str, address: str) -> None:
    f = _one(checked, script, "input-outside-repo")
    assert f.line == 3 and f"connect to {address} at {script}:3" in f.message
    # the failure that follows (NetworkRefused, or urllib's URLError around it) is a note, not a second error
    [note] = checked.of(script, "script-fails")
    assert note.severity == "note" and "network access is off" in note.message

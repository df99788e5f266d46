"""Result cache: hits when nothing a run depends on changed, misses otherwise, and never a crash.

The unit tests use a fake inner runner that writes an artifact folder with
``dump_run`` (no child process); digests are checked against :mod:`hashlib`
(the Python standard library's SHA-256, FIPS 180-4).  One end-to-end test runs
a real script that reads a CSV through :class:`figproof.run.execute.FreshInterpreter`.
"""

from __future__ import annotations

import hashlib
import json
import os
import stat
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import pytest

from figproof.discover.imports import local_imports, search_folders
from figproof.model.records import FileEvent, ScriptError, ScriptRun, dump_run
from figproof.run.cache import (
    CachingRunner,
    cacheable,
    dependencies,
    entry_name,
    environment_key,
    file_sha256,
    prune,
)
from figproof.run.execute import FreshInterpreter, Options, Task, artifact_folder

ENV = {"python": "3.11.7", "figproof": "test"}  # fixed, so the tests do not depend on this interpreter


class FakeRunner:
    """Counts calls; "reads" the inputs it is told about, the way the child records them."""

    name = "fake"

    def __init__(self, reads: tuple[str, ...] = ("data/yield.csv",), status: str = "ok",
                 error: ScriptError | None = None, extra_events: tuple[FileEvent, ...] = ()) -> None:
        self.calls = 0
        self.reads = reads
        self.status = status
        self.error = error
        self.extra_events = extra_events

    def run(self, task: Task, options: Options) -> ScriptRun:
        self.calls += 1
        events = []
        for path in self.reads:
            file = options.root / path
            if file.exists():
                events.append(FileEvent(action="read", path=path, sha256=hashlib.sha256(file.read_bytes()).hexdigest()))
            else:
                events.append(FileEvent(action="missing", path=path, exists=False))
        run = ScriptRun(path=task.script, status=self.status, error=self.error,
                        events=tuple(events) + self.extra_events, seconds=0.5, working_dir=task.working_dir)
        out = artifact_folder(options.artifacts, task.script)
        dump_run(run, out)
        (out / "renders").mkdir(exist_ok=True)
        (out / "renders" / "figure-1.png").write_bytes(b"render %d" % self.calls)
        return run


@pytest.fixture
def repo(tmp_path: Path) -> Path:
    root = tmp_path / "lab"
    (root / "figures").mkdir(parents=True)
    (root / "data").mkdir()
    (root / "figures" / "yield.py").write_text("import pandas as pd\nt = pd.read_csv('data/yield.csv')\n")
    (root / "data" / "yield.csv").write_text("plot,yield\n1,4.2\n2,3.9\n")
    return root


def options_for(root: Path, **kw: object) -> Options:
    return Options(root=root, artifacts=root.parent / "artifacts", **kw)  # type: ignore[arg-type]


TASK = Task(script="figures/yield.py")



def hit(runner: CachingRunner, task: Task, options: Options) -> bool:
    """Run ``task`` through the cache; True when its result came from the cache."""
    runner.answered.discard(task.script)
    runner.run(task, options)
    return task.script in runner.answered

def cached(inner: FakeRunner, root: Path, *, environment: dict[str, str] = ENV,
           config_fingerprint: str = "") -> CachingRunner:
    return CachingRunner(inner, root / ".figproof-cache", environment=environment,
                         config_fingerprint=config_fingerprint)


def test_second_run_is_a_hit_and_restores_the_artifact_folder(repo: Path) -> None:
    inner = FakeRunner()
    runner = cached(inner, repo)
    first = runner.run(TASK, options_for(repo))
    assert inner.calls == 1 and runner.answered == set()
    out = artifact_folder(options_for(repo).artifacts, TASK.script)
    (out / "renders" / "figure-1.png").unlink()  # a later check starts from an empty artifacts folder
    second = runner.run(TASK, options_for(repo))
    assert inner.calls == 1
    assert second.notes == () and runner.answered == {TASK.script}
    assert (second.status, second.events, second.seconds) == (first.status, first.events, first.seconds)
    assert (out / "renders" / "figure-1.png").read_bytes() == b"render 1"
    assert (repo / ".figproof-cache" / ".gitignore").read_text() == "*\n"


def test_a_run_kept_without_renderings_serves_only_checks_that_need_none(repo: Path) -> None:
    inner = FakeRunner()
    runner = cached(inner, repo)
    runner.run(TASK, options_for(repo, renders=False))
    runner.run(TASK, options_for(repo, renders=False))
    assert inner.calls == 1
    runner.run(TASK, options_for(repo, renders=True))  # --images needs the pixels: run again, keep them
    assert inner.calls == 2
    assert hit(runner, TASK, options_for(repo, renders=False))  # renderings serve both
    assert inner.calls == 2


def test_changed_input_content_is_a_miss(repo: Path) -> None:
    inner = FakeRunner()
    runner = cached(inner, repo)
    runner.run(TASK, options_for(repo))
    (repo / "data" / "yield.csv").write_text("plot,yield\n1,4.2\n2,3.8\n")
    assert not hit(runner, TASK, options_for(repo))
    assert inner.calls == 2
    runner.run(TASK, options_for(repo))
    assert inner.calls == 2  # the new content is now the cached one


def test_changed_script_is_a_miss(repo: Path) -> None:
    inner = FakeRunner()
    runner = cached(inner, repo)
    runner.run(TASK, options_for(repo))
    with open(repo / "figures" / "yield.py", "a") as fh:
        fh.write("print(t)\n")
    runner.run(TASK, options_for(repo))
    assert inner.calls == 2


def test_missing_input_must_stay_missing(repo: Path) -> None:
    inner = FakeRunner(reads=("data/yield.csv", "data/soil.csv"))
    runner = cached(inner, repo)
    runner.run(TASK, options_for(repo))
    runner.run(TASK, options_for(repo))
    assert inner.calls == 1
    (repo / "data" / "soil.csv").write_text("plot,ph\n1,6.5\n")
    runner.run(TASK, options_for(repo))
    assert inner.calls == 2


def test_new_file_in_a_folder_read_from_is_a_miss(repo: Path) -> None:
    """A script that globs data/*.csv must see a new CSV even though it never read it before."""
    inner = FakeRunner()
    runner = cached(inner, repo)
    runner.run(TASK, options_for(repo))
    (repo / "data" / "yield_2025.csv").write_text("plot,yield\n3,4.0\n")
    runner.run(TASK, options_for(repo))
    assert inner.calls == 2


@pytest.mark.parametrize("change", ["timeout", "memory_limit", "network", "working_dir", "fingerprint", "environment"])
def test_settings_and_environment_are_part_of_the_key(repo: Path, change: str) -> None:
    inner = FakeRunner()
    cached(inner, repo).run(TASK, options_for(repo))
    options, task, kw = options_for(repo), TASK, dict[str, object]()
    if change in ("timeout", "memory_limit", "network"):
        options = options_for(repo, **{change: {"timeout": 30.0, "memory_limit": 512, "network": True}[change]})
    elif change == "working_dir":
        task = Task(script=TASK.script, working_dir="script")
    elif change == "fingerprint":
        kw = {"config_fingerprint": "extra-setting"}
    else:
        kw = {"environment": {**ENV, "python": "3.12.0"}}
    cached(inner, repo, **kw).run(task, options)
    assert inner.calls == 2
    cached(inner, repo, **kw).run(task, options)
    assert inner.calls == 2


def test_helper_module_the_script_imports_is_part_of_the_key(repo: Path) -> None:
    (repo / "figures" / "yield.py").write_text("import numpy as np\nfrom labstyle import apply\napply()\n")
    (repo / "figures" / "labstyle.py").write_text("def apply():\n    return None\n")
    inner = FakeRunner()
    runner = cached(inner, repo)
    runner.run(TASK, options_for(repo))
    runner.run(TASK, options_for(repo))
    assert inner.calls == 1
    (repo / "figures" / "labstyle.py").write_text("def apply():\n    return 1\n")
    runner.run(TASK, options_for(repo))
    assert inner.calls == 2
    # a repo file that would shadow an installed package changes what `import numpy` finds
    (repo / "figures" / "numpy.py").write_text("")
    runner.run(TASK, options_for(repo))
    assert inner.calls == 3


def test_deterministic_failures_are_cached_and_timeouts_are_not(repo: Path) -> None:
    raised = FakeRunner(status="failed", error=ScriptError(kind="exception", type="KeyError", message="'yield'"))
    runner = cached(raised, repo)
    runner.run(TASK, options_for(repo))
    assert runner.run(TASK, options_for(repo)).error == raised.error and raised.calls == 1
    slow = FakeRunner(status="timeout", error=ScriptError(kind="timeout", message="stopped after 120 s"))
    other = cached(slow, repo, config_fingerprint="another")
    other.run(TASK, options_for(repo))
    other.run(TASK, options_for(repo))
    assert slow.calls == 2


@pytest.mark.parametrize(("status", "kind", "kept"), [
    ("ok", None, True), ("failed", "exception", True), ("failed", "exit", True), ("failed", "needs-input", True),
    ("timeout", "timeout", False), ("memory", "memory", False), ("failed", "signal", False),
    ("failed", "no-report", False), ("skipped", None, False),
])
def test_cacheable_policy(status: str, kind: str | None, kept: bool) -> None:
    error = ScriptError(kind=kind) if kind else None
    assert cacheable(ScriptRun(path="f.py", status=status, error=error)) is kept


def test_dependencies_skip_the_scripts_own_outputs_and_refuse_what_cannot_be_checked(tmp_path: Path) -> None:
    own = ScriptRun(path="f.py", status="ok", events=(
        FileEvent(action="read", path="data/a.csv", sha256="1" * 64),
        FileEvent(action="write", path="data/b.csv"),
        FileEvent(action="read", path="data/b.csv", sha256="2" * 64),
    ))
    assert dependencies(own, tmp_path, False) == ({"data/a.csv": "1" * 64}, ["data"])
    relative_outside = ScriptRun(path="f.py", status="ok", events=(
        FileEvent(action="read", path="../x.csv", inside_repo=False, sha256="3" * 64),))
    assert dependencies(relative_outside, tmp_path, False) is None
    network = ScriptRun(path="f.py", status="ok", events=(FileEvent(action="network", path="example.org"),))
    assert dependencies(network, tmp_path, True) is None
    assert dependencies(network, tmp_path, False) == ({}, [])  # refused while off: the same every time


def test_corrupt_key_json_is_a_miss_and_is_replaced(repo: Path) -> None:
    inner = FakeRunner()
    runner = cached(inner, repo)
    runner.run(TASK, options_for(repo))
    key = repo / ".figproof-cache" / "runs" / entry_name(TASK.script) / "key.json"
    key.write_text('{"schema": 1, "files": [')
    run = runner.run(TASK, options_for(repo))
    assert inner.calls == 2
    assert any("unreadable" in n and ".figproof-cache/runs/" in n for n in run.notes)
    json.loads(key.read_text())  # replaced by a whole key
    assert hit(runner, TASK, options_for(repo))


def test_corrupt_cached_run_record_is_a_miss(repo: Path) -> None:
    inner = FakeRunner()
    runner = cached(inner, repo)
    runner.run(TASK, options_for(repo))
    entry = repo / ".figproof-cache" / "runs" / entry_name(TASK.script)
    (entry / "artifact" / "run.json").write_text("not json")
    runner.answered.clear()
    runner.run(TASK, options_for(repo))
    assert inner.calls == 2 and not runner.answered
    assert hit(runner, TASK, options_for(repo))


def test_read_only_cache_folder_falls_back_to_running(repo: Path) -> None:
    cache = repo / ".figproof-cache"
    cache.mkdir()
    cache.chmod(stat.S_IRUSR | stat.S_IXUSR)  # 0o500
    try:
        if os.access(cache, os.W_OK):
            pytest.skip("running as a user (root) whom chmod does not stop from writing")
        inner = FakeRunner()
        runner = cached(inner, repo)
        first = runner.run(TASK, options_for(repo))
        second = runner.run(TASK, options_for(repo))
        assert inner.calls == 2
        assert first.status == "ok"
        [note] = second.notes
        assert note.startswith("result cache .figproof-cache ") and "not writable" in note
        assert sorted(os.listdir(cache)) == []
    finally:
        cache.chmod(stat.S_IRWXU)


def test_refused_writes_fall_back_to_running(repo: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The read-only case as root sees it: the OS refuses the write (EACCES) where chmod cannot."""
    inner = FakeRunner()
    runner = cached(inner, repo)

    def refuse(*args: object, **kwargs: object) -> str:
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr("figproof.run.cache.tempfile.mkdtemp", refuse)
    run = runner.run(TASK, options_for(repo))
    assert run.status == "ok"
    assert run.notes == ("result cache .figproof-cache could not be written (Permission denied); "
                         "the result was not stored",)
    assert os.listdir(repo / ".figproof-cache" / "runs") == []


def test_cache_folder_that_cannot_be_created_falls_back_to_running(repo: Path) -> None:
    """Works as root too: nobody can make a folder below a regular file."""
    (repo / "notes.txt").write_text("mine\n")
    inner = FakeRunner()
    runner = CachingRunner(inner, repo / "notes.txt" / "cache", environment=ENV)
    run = runner.run(TASK, options_for(repo))
    assert run.status == "ok" and inner.calls == 1
    [note] = run.notes
    assert note.startswith("result cache notes.txt/cache is not writable (") and note.endswith("not stored")
    runner.run(TASK, options_for(repo))
    assert inner.calls == 2 and (repo / "notes.txt").read_text() == "mine\n"


def test_cache_path_that_is_a_file_is_left_alone(repo: Path) -> None:
    (repo / ".figproof-cache").write_text("my notes\n")
    inner = FakeRunner()
    run = cached(inner, repo).run(TASK, options_for(repo))
    assert run.status == "ok" and inner.calls == 1
    assert run.notes == ("result cache .figproof-cache is not a folder; ran the script without it",)
    assert (repo / ".figproof-cache").read_text() == "my notes\n"


def test_existing_user_folder_gets_no_gitignore(repo: Path) -> None:
    cache = repo / "scratch"
    cache.mkdir()
    (cache / "keep.txt").write_text("mine")
    CachingRunner(FakeRunner(), cache, environment=ENV).run(TASK, options_for(repo))
    assert sorted(os.listdir(cache)) == ["keep.txt", "runs"]


def test_prune_removes_entries_of_scripts_gone_and_nothing_else(repo: Path) -> None:
    runner = cached(FakeRunner(), repo)
    other = Task(script="figures/old.py")
    (repo / "figures" / "old.py").write_text("print(1)\n")
    runner.run(TASK, options_for(repo))
    runner.run(other, options_for(repo))
    (repo / ".figproof-cache" / "runs" / "stray.txt").write_text("not ours")
    removed = prune(repo / ".figproof-cache", [TASK.script])
    assert removed == [entry_name(other.script)]
    assert sorted(os.listdir(repo / ".figproof-cache" / "runs")) == sorted([entry_name(TASK.script), "stray.txt"])
    assert prune(repo / "no-such-folder", []) == []


def test_entry_names_do_not_collide() -> None:
    assert entry_name("a/b.py") != entry_name("a__b.py") != entry_name("a_b.py")


def test_local_imports_follow_packages_relative_imports_and_notebooks(tmp_path: Path) -> None:
    root = tmp_path / "lab"
    (root / "labtools").mkdir(parents=True)
    (root / "labtools" / "__init__.py").write_text("from .style import apply\n")
    (root / "labtools" / "style.py").write_text("from . import palette\n")
    (root / "labtools" / "palette.py").write_text("import json\n")
    (root / "analysis").mkdir()
    cells = [{"cell_type": "markdown", "source": "# yield"},
             {"cell_type": "code", "source": ["%matplotlib inline\n", "import labtools.style\n"]}]
    (root / "analysis" / "fig2.ipynb").write_text(json.dumps({"cells": cells, "nbformat": 4}))
    found = local_imports(root, "analysis/fig2.ipynb", search_folders(root, "analysis/fig2.ipynb", "root"))
    assert found.files == ("labtools/__init__.py", "labtools/palette.py", "labtools/style.py")
    # the child puts analysis/ first on sys.path, so a file there would shadow both the package and json
    assert {"analysis/labtools.py", "analysis/json.py"} <= set(found.absent)
    assert "labtools.py" not in found.absent  # labtools/ at the root was found before it


def test_environment_fingerprint_matches_the_packages_and_imports_no_matplotlib() -> None:
    import numpy

    env = environment_key()
    assert env["numpy"] == numpy.__version__  # the package's own version attribute
    assert env["python"] == "{}.{}.{}".format(*sys.version_info[:3])
    code = ("import sys, figproof.run.cache as c; c.environment_key(); "
            "print('matplotlib' in sys.modules, 'pandas' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["False", "False"]


def test_file_sha256_matches_hashlib(tmp_path: Path) -> None:
    # FIPS 180-4 test vector: SHA-256("abc")
    (tmp_path / "abc").write_bytes(b"abc")
    assert file_sha256(tmp_path / "abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert file_sha256(tmp_path / "none") is None


SCRIPT = """\
import matplotlib.pyplot as plt
import pandas as pd

t = pd.read_csv("data/yield.csv")
fig, ax = plt.subplots()
ax.plot(t["plot"], t["yield"], "o")
fig.savefig("figures/yield.png")
"""


@pytest.mark.slow
def test_end_to_end_with_a_real_child(tmp_path: Path) -> None:
    root = tmp_path / "lab"
    (root / "figures").mkdir(parents=True)
    (root / "data").mkdir()
    (root / "figures" / "yield.py").write_text(SCRIPT)
    (root / "data" / "yield.csv").write_text("plot,yield\n1,4.2\n2,3.9\n3,4.4\n")
    options = Options(root=root, artifacts=tmp_path / "artifacts", timeout=60)
    inner = FreshInterpreter()
    calls = []

    class Counting:
        name = "counting"

        def run(self, task: Task, opts: Options) -> ScriptRun:
            calls.append(task.script)
            return inner.run(task, opts)

    runner = CachingRunner(Counting(), root / ".figproof-cache")
    first = runner.run(TASK, options)
    assert first.status == "ok", first.stderr_tail
    assert [e.path for e in first.events if e.action == "read"] == ["data/yield.csv"]
    runner.answered.clear()
    second = runner.run(TASK, options)
    assert len(calls) == 1 and runner.answered == {TASK.script}
    assert replace(second, notes=first.notes).to_json() == first.to_json()
    out = artifact_folder(options.artifacts, TASK.script)
    assert (out / "regenerated" / "figures" / "yield.png").is_file()
    (root / "data" / "yield.csv").write_text("plot,yield\n1,4.2\n2,3.9\n3,4.5\n")
    assert not hit(runner, TASK, options) and len(calls) == 2
    (root / "figures" / "yield.py").write_text(SCRIPT.replace('"o"', '"s"'))
    assert not hit(runner, TASK, options) and len(calls) == 3
    assert hit(runner, TASK, options) and len(calls) == 3
    assert not (root / "figures" / "yield.png").exists()  # the working tree is still untouched


def test_recorded_inputs_and_uses_read_every_readable_key_and_skip_the_rest(tmp_path: Path) -> None:
    from figproof.run.cache import recorded_dependencies, recorded_uses

    repo = tmp_path / "repo"
    repo.mkdir()
    (repo / "a.py").write_text("print('a')\n")
    (repo / "b.py").write_text("print('b, edited since')\n")
    runs = tmp_path / "cache" / "runs"
    keys = {
        "a": {"script": "a.py", "script_sha256": hashlib.sha256(b"print('a')\n").hexdigest(),
              "files": [{"path": "data/x.csv"}, {"path": "helpers.py"}], "outputs": ["fig/a.png"]},
        "b": {"script": "b.py", "script_sha256": hashlib.sha256(b"print('b')\n").hexdigest(),  # the old code
              "files": [{"path": "data/y.csv"}], "outputs": ["fig/b.png"]},
        "c": {"script": "c.py", "files": [{"path": "data/z.csv"}]},  # written before outputs were recorded
    }
    for name, key in keys.items():
        (runs / name).mkdir(parents=True)
        (runs / name / "key.json").write_text(json.dumps(key))
    for name, text in (("broken", "{"), ("listed", "[1, 2]"), ("nameless", '{"files": []}')):
        (runs / name).mkdir()
        (runs / name / "key.json").write_text(text)
    assert recorded_dependencies(tmp_path / "cache") == {"a.py": {"data/x.csv", "helpers.py"}, "b.py": {"data/y.csv"},
                                                         "c.py": {"data/z.csv"}}
    # only a.py is unchanged and recorded what it wrote
    assert recorded_uses(tmp_path / "cache", repo) == {"a.py": frozenset({"fig/a.png", "data/x.csv", "helpers.py"})}
    assert recorded_dependencies(tmp_path / "nowhere") == {} and recorded_uses(tmp_path / "nowhere", repo) == {}

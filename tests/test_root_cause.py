"""Root cause once: a missing input is the error and the script failure it causes a note; a missing
package is one finding naming every script that needs it (issue 14)."""

from __future__ import annotations

import pytest

from figproof import rules
from figproof.model.context import RunContext
from figproof.model.records import FileEvent, ScriptError, ScriptRun, Source


def _failed(path: str, type_: str, message: str, line: int = 5, events: tuple[FileEvent, ...] = ()) -> ScriptRun:
    return ScriptRun(path=path, status="failed", events=events,
                     error=ScriptError(kind="exception", type=type_, message=message,
                                       source=Source(path=path, line=line)))


def test_missing_input_is_the_error_and_the_failure_a_note() -> None:
    where = Source(path="figures/pilot.py", line=5)
    missing = FileEvent(action="missing", path="data/pilot.csv", exists=False, source=where)
    run = _failed("figures/pilot.py", "FileNotFoundError",
                  "[Errno 2] No such file or directory: 'data/pilot.csv'", events=(missing,))
    found = rules.apply([run], RunContext(runs=(run,)))
    by_rule = {f.rule: f for f in found}
    assert by_rule["input-missing"].severity == "error"
    assert by_rule["script-fails"].severity == "note"
    assert "data/pilot.csv is missing (reported by input-missing)" in by_rule["script-fails"].message


def test_a_failure_with_no_missing_input_stays_an_error() -> None:
    run = _failed("figures/broken.py", "IndexError", "index 3 is out of bounds for axis 0 with size 3")
    (f,) = rules.apply([run], RunContext(runs=(run,)))
    assert f.rule == "script-fails" and f.severity == "error" and "IndexError" in f.message


def _import_error(module: str) -> str:
    """The message CPython's import system itself gives for ``import module`` (the test's outside reference)."""
    import importlib

    try:
        importlib.import_module(module)
    except ModuleNotFoundError as exc:
        return str(exc)
    raise AssertionError(f"{module} is importable here")


def test_one_missing_package_is_one_finding_naming_its_scripts_and_the_failures_are_notes() -> None:
    # CPython names the first part of a dotted import it cannot find: "import labtools_absent.api" says
    # "No module named 'labtools_absent'", so the package is missing, not a module of an installed one
    message = _import_error("labtools_absent.api")
    assert message == "No module named 'labtools_absent'"
    runs = [_failed(f"figures/fig{k}.py", "ModuleNotFoundError", message) for k in (1, 2, 3)]
    runs.append(_failed("figures/fig4.py", "ModuleNotFoundError", "No module named 'umap'"))
    found = rules.apply(runs, RunContext(runs=tuple(runs)))
    env = [f for f in found if f.rule == "environment-mismatch"]
    assert [f.message for f in env] == [
        "install labtools_absent to run 3 scripts (figures/fig1.py, figures/fig2.py and figures/fig3.py)",
        "install umap-learn to run 1 script",  # umap is installed as umap-learn (its install instructions)
    ]
    assert env[0].severity == "error" and [i.path for i in env[0].instances] == [
        "figures/fig1.py", "figures/fig2.py", "figures/fig3.py"]
    # the failures one cause explains are one note too, naming where each script stopped
    notes = [f for f in found if f.rule == "script-fails"]
    assert len(notes) == 2 and all(f.severity == "note" for f in notes)
    assert notes[0].message.startswith("figures/fig1.py stops at line 5 because the package 'labtools_absent' "
                                       "is not installed (reported by environment-mismatch) (3 scripts: ")
    assert [(i.path, i.line) for i in notes[0].instances] == [(f"figures/fig{k}.py", 5) for k in (1, 2, 3)]


def test_a_missing_reader_of_eight_scripts_says_install_it_to_read_their_inputs() -> None:
    # pandas' own wording for a reader it lacks (pandas.compat._optional.import_optional_dependency)
    pandas_optional = pytest.importorskip("pandas.compat._optional", reason="pandas words the missing reader")
    try:
        pandas_optional.import_optional_dependency("openpyxl_absent_for_test")
    except ImportError as exc:
        message = str(exc)
    runs = [_failed(f"fig{k}.py", "ImportError", message.replace("openpyxl_absent_for_test", "openpyxl"))
            for k in range(8)]
    (env,) = [f for f in rules.apply(runs, RunContext(runs=tuple(runs))) if f.rule == "environment-mismatch"]
    assert env.message.startswith("install openpyxl to read the .xlsx inputs of 8 scripts (fig0.py, fig1.py, ")
    assert env.message.endswith(" and 2 more)") and len(env.instances) == 8


def test_python2_code_and_a_removed_api_are_one_finding_each() -> None:
    import numpy as np

    try:
        compile("print 'plotting'\n", "old.py", "exec")
    except SyntaxError as exc:  # CPython's compiler's own words for a Python 2 print statement
        py2 = exc.msg
    try:
        compile("try:\n    pass\nexcept ValueError, e:\n    pass\n", "old2.py", "exec")
    except SyntaxError as exc:  # its message does not say Python 2: the failing line does
        except_msg, except_line = exc.msg, (exc.text or "").rstrip("\n")
    try:
        np.float  # noqa: B018 - NumPy 1.24 removed the alias (its release notes); the test wants its message
    except AttributeError as exc:
        removed = str(exc)
    runs = [
        _failed("old.py", "SyntaxError", py2),
        ScriptRun(path="old2.py", status="failed", error=ScriptError(kind="exception", type="SyntaxError",
                  message=except_msg, text=except_line, source=Source(path="old2.py", line=3))),
        _failed("f1.py", "AttributeError", removed),
        _failed("f2.py", "AttributeError", removed),
        _failed("bug.py", "IndexError", "index 3 is out of bounds for axis 0 with size 3"),
    ]
    found = rules.apply(runs, RunContext(runs=tuple(runs)))
    env = {f.message for f in found if f.rule == "environment-mismatch"}
    assert env == {
        "2 scripts are Python 2 code, which Python 3 cannot run; run them with Python 2.7 or port them to Python 3 "
        "(old.py and old2.py)",
        "NumPy 1.24 removed the aliases np.float, np.int, np.bool, np.object, np.str (use float, int, bool, object, "
        "str): this breaks 2 scripts; install the library version the scripts were written for, or update the call "
        "(f1.py and f2.py)",
    }
    errors = [f for f in found if f.rule == "script-fails" and f.severity == "error"]
    assert [f.path for f in errors] == ["bug.py"]  # not environmental: still the script's own error


def _notebook(*cells: str) -> str:
    import json

    return json.dumps({"nbformat": 4, "nbformat_minor": 5, "metadata": {}, "cells": [
        {"cell_type": "markdown", "metadata": {}, "source": "# Growth of the pilot cultures"},
        *({"cell_type": "code", "metadata": {}, "execution_count": None, "outputs": [], "source": c} for c in cells)]})


@pytest.mark.slow
def test_python2_notebooks_and_scripts_in_a_repo_are_one_finding(tmp_path) -> None:
    import json

    from figproof.cli import main

    # valid Python 2.7 that Python 3 refuses ("What's New In Python 3.0": except E, e and the print statement)
    (tmp_path / "growth.ipynb").write_text(_notebook(
        "%matplotlib inline\nimport matplotlib.pyplot as plt",
        "try:\n    od = [0.1, 0.2, 0.4]\nexcept ValueError, e:\n    od = []\nplt.plot(od)\nplt.savefig('growth.png')"))
    (tmp_path / "doses.py").write_text("import matplotlib\nmatplotlib.use('Agg')\nimport matplotlib.pyplot as plt\n"
                                       "print 'plotting'\nplt.bar([1, 2], [3, 4])\nplt.savefig('doses.png')\n")
    out = tmp_path / "report.json"
    assert main(["check", str(tmp_path), "--json", str(out), "--quiet"]) == 1
    found = json.loads(out.read_text())["findings"]
    (env,) = [f for f in found if f["rule"] == "environment-mismatch"]
    assert env["message"] == ("2 scripts are Python 2 code, which Python 3 cannot run; run them with Python 2.7 or "
                              "port them to Python 3 (doses.py and growth.ipynb)")
    notes = {(i["path"], i.get("cell"), i.get("line")) for f in found if f["rule"] == "script-fails"
             for i in f["instances"]}
    assert notes == {("doses.py", None, 4), ("growth.ipynb", 3, 3)}  # the markdown cell counts: code cell 3
    assert all(f["severity"] == "note" for f in found if f["rule"] == "script-fails")

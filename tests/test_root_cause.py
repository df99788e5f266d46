"""Root cause once: a missing input is the error and the script failure it causes a note; a missing
package is one finding naming every script that needs it (issue 14)."""

from __future__ import annotations

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


def test_one_missing_package_is_one_finding_naming_its_scripts() -> None:
    runs = [_failed(f"figures/fig{k}.py", "ModuleNotFoundError", "No module named 'umap'") for k in (1, 2, 3)]
    runs.append(_failed("figures/fig4.py", "ModuleNotFoundError", "No module named 'statsmodels.api'"))
    found = [f for f in rules.apply(runs, RunContext(runs=tuple(runs))) if f.rule == "script-fails"]
    assert len(found) == 2
    umap = next(f for f in found if "'umap'" in f.message)
    assert "3 scripts: figures/fig1.py, figures/fig2.py and figures/fig3.py" in umap.message
    assert [i.path for i in umap.instances] == ["figures/fig1.py", "figures/fig2.py", "figures/fig3.py"]
    assert any("'statsmodels'" in f.message and len(f.instances) == 1 for f in found)

"""Run rules about the execution itself."""

from __future__ import annotations

from collections.abc import Iterator

from figproof.model.context import RunContext
from figproof.model.findings import Hit
from figproof.model.records import ScriptRun
from figproof.rules.base import Knobs, rule

_KIND_TEXT = {
    "timeout": "did not finish within the time limit",
    "memory": "ran out of memory",
    "needs-input": "waited for keyboard input (standard input is closed during a check)",
    "signal": "crashed",
    "exit": "exited before figproof could read what it drew",
    "no-report": "ended without reporting what it drew",
}


@rule(
    "script-fails",
    severity="error",
    confidence="certain",
    scope="run",
    why="""
        A figure that cannot be regenerated cannot be checked, and a reader cannot reproduce it either.
        Scripts rot: a renamed column, a changed library default or a missing file breaks them silently
        until someone needs the figure again.
    """,
    fix="""
        Run the script yourself from a clean checkout (`python path/to/script.py` from the folder figproof
        reports as its working directory) and fix the error at the line named in the finding. If the script
        legitimately needs more time or memory, raise `timeout` or `memory-limit` in `[tool.figproof]`.
    """,
    sources=("Common practice: a figure's code must run from a clean checkout to be reproducible.",),
    bad="""
        import matplotlib.pyplot as plt
        import numpy as np
        values = np.array([1.0, 2.0, 3.0])
        fig, ax = plt.subplots()
        ax.plot(values, values[3])
        fig.savefig("out.png")
    """,
    good="""
        import matplotlib.pyplot as plt
        import numpy as np
        values = np.array([1.0, 2.0, 3.0])
        fig, ax = plt.subplots()
        ax.plot(values, values * 2)
        fig.savefig("out.png")
    """,
)
def script_fails(run: ScriptRun, context: RunContext, knobs: Knobs) -> Iterator[Hit]:
    """A figure script or notebook errors, times out or runs out of memory."""
    err = run.error
    if run.status == "ok" or run.status == "skipped" or err is None:
        return
    if err.kind == "exception":
        what = f"raised {err.type}: {err.message}" if err.message else f"raised {err.type}"
    else:
        what = _KIND_TEXT.get(err.kind, err.kind)
        if err.message:
            what = f"{what} ({err.message})"
    where = f" at {err.source}" if err.source is not None else ""
    yield Hit(message=f"{run.path} {what}{where}", source=err.source, key=err.kind)


RULES = (script_fails,)

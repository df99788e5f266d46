"""Run rules about the execution itself."""

from __future__ import annotations

from collections.abc import Iterator

from figproof.model.context import RunContext
from figproof.model.findings import Hit
from figproof.model.records import FileEvent, ScriptRun, Source
from figproof.rules._inputs import names_path, not_found
from figproof.rules.base import Knobs, rule
from figproof.rules.environment import reason, repo_cause

_KIND_TEXT = {
    "timeout": "did not finish within the time limit",
    "memory": "ran out of memory",
    "needs-input": "waited for keyboard input (standard input is closed during a check)",
    "signal": "crashed",
    "exit": "exited before figproof could read what it drew",
    "no-report": "ended without reporting what it drew",
}


def _missing_input(run: ScriptRun) -> FileEvent | None:
    """The missing file the script's error is about: read at the failing line, or named in the message (an
    existence check that found nothing counts only when the message names its path)."""
    err = run.error
    if err is None or err.kind not in ("exception", "exit"):
        return None
    missing = [ev for ev in run.events if not_found(run, ev)]
    for ev in missing:
        if err.source is not None and ev.source == err.source:
            return ev
    for ev in missing:
        if names_path(err.message, ev.path):
            return ev
    return None


def _location(run: ScriptRun) -> tuple[str, Source | None]:
    """Where a failure is told (" at fig.py:4") and the finding's location.

    A failure inside a helper module the script imports is the script's finding, at the line that called
    into the helper, and names the helper's line.
    """
    err = run.error
    if err is None or err.source is None:
        return "", None
    if err.source.path == run.path:
        return f" at {err.source}", err.source
    called = err.called_from
    where = f" in {err.source}" + (f", called at {called}" if called is not None else "")
    return where, called or Source(path=run.path)


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
    # a failure caused by a missing input is a note pointing at input-missing; one the environment explains
    # (a missing package, Python 2 code) a note pointing at environment-mismatch
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
    if _refused_write(run):
        return  # the refusal is the cause, and write-outside-copy reports it
    where, source = _location(run)
    at = f" at line {err.source.line}" if err.source is not None and err.source.path == run.path \
        and err.source.line is not None and err.source.cell is None else where
    # one finding per cause: a missing input file is input-missing's (or input-outside-repo's) error, and
    # the failure it causes is a note pointing at it; so is a failure environment-mismatch explains (a missing
    # package, Python 2 code, a removed API), which is one finding for all the scripts it stops
    ev = _missing_input(run)
    if ev is not None:
        rule_id = "input-missing" if ev.inside_repo else "input-outside-repo"
        yield Hit(message=f"{run.path} stops{at} because {ev.path} is missing (reported by {rule_id})",
                  source=source, severity="note", key=f"{err.kind}:missing-input", group=f"stops:missing:{ev.path}")
        return
    if _refused_network(run):
        yield Hit(message=f"{run.path} stops{at} because network access is off during a check (reported by "
                          f"input-outside-repo)", source=source, severity="note", key=f"{err.kind}:network")
        return
    cause = repo_cause(run)
    if cause is not None:
        # the scripts one cause stops are one note, as the cause is one finding
        yield Hit(message=f"{run.path} stops{at} because {reason(*cause)} (reported by environment-mismatch)",
                  source=source, severity="note", key=f"{err.kind}:environment",
                  group=f"stops:environment:{reason(*cause)}")
        return
    if err.kind == "exception":
        what = f"raised {err.type}: {err.message}" if err.message else f"raised {err.type}"
    else:
        what = _KIND_TEXT.get(err.kind, err.kind)
        if err.message:
            what = f"{what} ({err.message})"
    yield Hit(message=f"{run.path} {what}{where}", source=source, key=err.kind)


NETWORK_OFF = "network access is off during a check"  # in every refused connection's message (child/capture.py)


def _refused_network(run: ScriptRun) -> bool:
    """The failure is the refused connection (raised as is, or wrapped by the library that tried it)."""
    err = run.error
    tried = [ev for ev in run.events if ev.action == "network"]
    return (err is not None and bool(tried)
            and (NETWORK_OFF in err.message or any(ev.source is not None and ev.source == err.source
                                                  for ev in tried)))


def _refused_write(run: ScriptRun) -> bool:
    err = run.error
    return (err is not None and err.type == "PermissionError" and err.message.startswith("figproof: ")
            and any(ev.action == "blocked-write" for ev in run.events))


@rule(
    "write-outside-copy",
    severity="error",
    confidence="certain",
    scope="run",
    why="""
        During a check a script runs on a copy of the repo (or an overlay view of it), so whatever it writes,
        removes or renames there is thrown away and the working tree stays as committed. A script that
        reaches outside that copy, by an absolute path into the repo, into the home folder or through a
        symbolic link, would change the user's own files: delete data, overwrite committed figures or leave
        files behind. figproof refuses such changes and reports each one here, at the line that tried it.
        A script that does this on a colleague's machine does it there too, without figproof in the way.
    """,
    fix="""
        Write only beneath the folder the script runs in, with paths relative to the repo (or into a
        temporary folder from `tempfile`). Replace absolute paths and `~` with relative ones, and do not
        remove or rename inputs. A command the script starts (`subprocess`, `os.system`) must not name the
        repo by its absolute path either.
    """,
    sources=("Common practice: a figure script reads its inputs and writes its outputs, and changes "
             "nothing else.",),
    bad="""
        import os
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.plot([1, 2, 3], [2.0, 1.5, 3.0], marker="o")
        fig.savefig("growth.png")
        os.remove(os.path.expanduser("~/growth-old.png"))
    """,
    good="""
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots()
        ax.plot([1, 2, 3], [2.0, 1.5, 3.0], marker="o")
        fig.savefig("growth.png")
    """,
)
def write_outside_copy(run: ScriptRun, context: RunContext, knobs: Knobs) -> Iterator[Hit]:
    """A script writes, removes, renames or changes a file outside the copy of the repo it runs on."""
    seen: set[tuple[str, str, str, str]] = set()
    kernel = "kernel-write-confinement" in run.isolation
    for ev in run.events:
        if ev.action not in ("blocked-write", "subprocess"):
            continue
        mark = (ev.action, ev.operation, ev.path, str(ev.source))
        if mark in seen:
            continue
        seen.add(mark)
        where = f" at {ev.source}" if ev.source is not None else ""
        if ev.action == "subprocess":
            held = ("the kernel layer refused its writes there, and the working-tree check reports any change "
                    "that got through" if kernel else "no layer below Python held its writes there on this "
                    "machine; the working-tree check reports any change it made")
            yield Hit(message=f"{run.path} starts `{ev.operation}`{where}, which names {ev.path} in the repo "
                              f"itself, outside the copy of the repo it ran on; {held}",
                      source=ev.source, key=f"subprocess:{ev.path}")
            continue
        verb = ev.operation or "write"
        by = "the kernel" if verb.endswith(" (kernel)") else "figproof"
        verb = verb.removesuffix(" (kernel)")
        yield Hit(message=f"{run.path} tries to {verb} {ev.path}{where}, outside the copy of the repo it ran "
                          f"on; {by} refused it",
                  source=ev.source, key=f"write:{verb}:{ev.path}")


RULES = (script_fails, write_outside_copy)

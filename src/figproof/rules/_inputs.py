"""Which of a run's file events stand for an input the script did not find (shared by the run rules)."""

from __future__ import annotations

from figproof.model.records import FileEvent, ScriptRun


def names_path(message: str, path: str) -> bool:
    """Whether an error message names ``path`` (in full, or by its last part: scripts often print only that)."""
    return bool(path) and (path in message or path.rsplit("/", 1)[-1] in message)


def explained_probe(run: ScriptRun, ev: FileEvent) -> bool:
    """An existence check that found nothing counts as a read only when the script then fails naming that
    path (it checked for its input and raised its own error); a script that probes optional files and carries
    on has nothing to report."""
    err = run.error
    return (ev.action == "probe" and err is not None and err.kind in ("exception", "exit")
            and names_path(err.message, ev.path))


def not_found(run: ScriptRun, ev: FileEvent) -> bool:
    """A read of a file that was not there, or an existence check the failure explains."""
    if ev.action == "probe":
        return explained_probe(run, ev)
    return ev.action == "missing" or (ev.action == "read" and not ev.exists)

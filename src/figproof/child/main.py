"""Entry point of the child process that runs one figure script: ``python -m figproof.child.main SPEC``.

The parent (:mod:`figproof.run.execute`) writes a JSON spec, starts this module in
a new session with stdout/stderr sent to files and stdin closed, and reads
back ``run.json`` (plus its arrays in one ``arrays.npz``) from the spec's output folder.  Events
(files opened, figures saved) are appended to ``events.jsonl`` as they happen,
so the parent still learns them when the script kills the process.
"""

from __future__ import annotations

import json
import os
import sys
import time
import traceback
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from figproof.model.records import ErrorKind, RunStatus

CAPTURE_LIMIT = 1 << 20  # bytes of the script's own stdout/stderr kept per stream


@dataclass(frozen=True, slots=True, kw_only=True)
class Spec:
    script: str  # repo-relative
    sandbox: str  # absolute path of the repo copy
    cwd: str
    out: str
    memory_limit: int = 0  # MiB, 0 = none
    network: bool = False
    mode: str = "fresh-interpreter"  # or "warm-pool": how the process was started
    protect: tuple[str, ...] = ()  # folders never written (the user's own repo), even inside the temp folder
    renders: bool = True  # write each figure's pixels (for image panels and --twice); costs a full draw
    view: dict[str, str] | None = None  # how the sandbox shows the repo: {"method": copy | reflink | overlay, ...}

    @classmethod
    def read(cls, path: Path) -> Spec:
        data = json.loads(path.read_text(encoding="utf-8"))
        data["protect"] = tuple(data.get("protect", ()))
        return cls(**data)

    @property
    def view_method(self) -> str:
        return str((self.view or {}).get("method", "copy"))


ENVIRONMENT_EXIT = 75  # as figproof.run.execute.ENVIRONMENT_EXIT (not imported: the child starts light)
ENVIRONMENT_MARK = "figproof-environment: "


def _die_with_parent() -> None:
    """On Linux, end this child when the process that started it dies (figproof killed with SIGKILL), so it
    cannot run on unwatched; its process group still goes the usual way."""
    if not sys.platform.startswith("linux"):
        return
    try:
        import ctypes
        import signal

        ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL), 0, 0, 0)  # PR_SET_PDEATHSIG, <linux/prctl.h>
    except (OSError, AttributeError):
        pass


def enter_view(spec: Spec) -> None:
    """Mount the overlay view of the repo when the sandbox is one (first thing: before threads, hooks or
    any confinement that forbids mounting); a refusal ends the child with the machine's exit status."""
    view = spec.view
    if spec.view_method != "overlay" or view is None or os.path.ismount(view["merged"]):
        return  # a copy, or already entered (the warm pool enters before it re-reads the working folder)
    from figproof.child.view import enter_overlay

    launched = os.getcwd()
    try:
        enter_overlay(view["lower"], view["upper"], view["work"], view["merged"])
    except OSError as exc:
        sys.stderr.write(f"{ENVIRONMENT_MARK}could not mount the overlay view of the repo in {view['merged']}: "
                         f"{exc}; set FIGPROOF_REPO_VIEW=copy to copy the repo instead\n")
        sys.stderr.flush()
        os._exit(ENVIRONMENT_EXIT)
    os.chdir(spec.cwd)
    if sys.path and sys.path[0] in (launched, ""):
        sys.path[0] = spec.cwd  # as if started in the script's working folder, like a copy


class _CappedStream:
    """A text stream that keeps at most ``limit`` characters and drops the rest (the script may print a lot)."""

    def __init__(self, stream: Any, limit: int) -> None:
        self._stream = stream
        self._left = limit
        self._noted = False

    def write(self, text: str) -> int:
        if self._left > 0:
            chunk = text[: self._left]
            self._left -= len(chunk)
            self._stream.write(chunk)
        elif not self._noted:
            self._noted = True
            self._stream.write("\n[figproof: output capped]\n")
        return len(text)

    def flush(self) -> None:
        self._stream.flush()

    def __getattr__(self, name: str) -> Any:
        return getattr(self._stream, name)


def limit_memory(mib: int) -> bool:
    """Cap the address space of this process; False when the platform does not allow it."""
    if mib <= 0:
        return False
    try:
        import resource

        limit = mib * 1024 * 1024
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
        return True
    except (ImportError, ValueError, OSError):
        return False


def notebook_cells(path: Path) -> list[tuple[int, str, int, bool]]:
    """Code cells of a notebook as (number, Python source, IPython lines blanked, whether the inline display
    closes the figures at the end of the cell); ValueError when unreadable."""
    from figproof.notebook import InlineDisplay, NotebookError, blanked_lines, code_cells, python_source

    try:
        cells = code_cells(path.read_bytes())
    except (OSError, NotebookError) as exc:
        raise ValueError(f"cannot read notebook: {exc}") from None
    out = []
    display = InlineDisplay()
    for c in cells:
        display = display.after(c.source)
        out.append((c.number, python_source(c.source) + "\n", blanked_lines(c.source), display.closes))
    return out


def _user_frame(tb: Any, rec: Any) -> Any:
    """The innermost traceback frame in the user's code: where their script failed (maybe in a helper module)."""
    found = None
    for frame, lineno in traceback.walk_tb(tb):
        found = rec.source_at(frame.f_code.co_filename, lineno) or found
    return found


def _own_frame(tb: Any, rec: Any) -> Any:
    """The innermost traceback frame in the script or notebook that ran (the call into a helper module)."""
    found = None
    for frame, lineno in traceback.walk_tb(tb):
        src = rec.source_at(frame.f_code.co_filename, lineno)
        if src is not None and src.path == rec.script:
            found = src
    return found


def _error(rec: Any, exc: BaseException, **fields: Any) -> Any:
    """A ScriptError located in the user's code, with the ran script's own frame when the error is elsewhere."""
    from figproof.model.records import ScriptError

    source = fields.pop("source", None) or _user_frame(exc.__traceback__, rec)
    own = _own_frame(exc.__traceback__, rec) if source is not None and source.path != rec.script else None
    message = rec.shown_text(fields.pop("message", ""))
    return ScriptError(source=source, called_from=own, message=message, **fields)


def run_user_code(spec: Spec, rec: Any) -> Any:
    """Execute the script or notebook; return a ScriptError or None."""
    from figproof.child.capture import NetworkRefused

    path = Path(spec.sandbox) / spec.script
    try:
        if path.suffix == ".ipynb":
            _run_notebook(path, rec)
        else:
            _run_script(path)
    except SystemExit as exc:
        code = exc.code
        if code in (None, 0):
            return None
        # sys.exit("text") prints the text and exits with status 1: the text is what the script said went wrong
        said = str(code).strip().splitlines()[0][:300] if not isinstance(code, int) and str(code).strip() else ""
        return _error(rec, exc, kind="exit", type="SystemExit", message=said or f"exit status {code}")
    except MemoryError as exc:
        return _error(rec, exc, kind="memory", type="MemoryError", message=str(exc)[:300])
    except BaseException as exc:  # noqa: BLE001 - any failure of user code is reported, not raised
        kind: ErrorKind = "exception"
        if isinstance(exc, EOFError) and "needs-input" in rec.notes:
            kind = "needs-input"
        message = str(exc).strip().splitlines()[0][:300] if str(exc).strip() else ""
        source = _user_frame(exc.__traceback__, rec)
        text = ""
        if isinstance(exc, SyntaxError) and exc.filename:  # the failing line is in the exception, not a frame
            source = rec.source_at(exc.filename, exc.lineno) or source
            message = f"{exc.msg} (line {exc.lineno})" if exc.lineno else exc.msg
            text = (exc.text or "").rstrip("\r\n")[:300]
        if isinstance(exc, NetworkRefused):
            message = message.removeprefix("figproof: ")
        return _error(rec, exc, kind=kind, type=type(exc).__name__, message=message, source=source,
                      text=rec.shown_text(text))
    return None


def _run_script(path: Path) -> None:
    import runpy

    sys.argv = [str(path)]
    sys.path.insert(0, str(path.parent))
    runpy.run_path(str(path), run_name="__main__")


def _run_notebook(path: Path, rec: Any) -> None:
    cells = notebook_cells(path)
    namespace: dict[str, Any] = {"__name__": "__main__", "__file__": str(path), "display": _display}
    sys.argv = [str(path)]
    sys.path.insert(0, str(path.parent))
    rec.notebook = True
    for index, source, skipped, closes in cells:
        if skipped:
            rec.notes.append(f"cell {index}: skipped {skipped} IPython magic or shell line{'s' * (skipped != 1)}")
        code = compile(source, f"{path}#cell={index}", "exec")
        rec.cell_drew, rec.cell_closes = False, closes
        exec(code, namespace)
        if closes and rec.cell_drew:
            # as matplotlib-inline's flush_figures after each cell: the figures are shown, then closed,
            # so the next cell's pyplot calls start new figures
            rec.close_all()


def _display(*objs: Any, **kwargs: Any) -> None:
    """Stand-in for IPython's display(): figures are captured anyway."""


def main(argv: list[str] | None = None) -> int:
    """Run one script under capture and write its run record."""
    argv = sys.argv[1:] if argv is None else argv
    spec = Spec.read(Path(argv[0]))
    _die_with_parent()
    enter_view(spec)
    try:
        return _run(spec, Path(argv[0]).parent)
    except OSError as exc:
        if exc.errno not in (28, 122):  # ENOSPC, EDQUOT: the run record could not be written
            raise
        stream = sys.__stderr__ or sys.stderr
        stream.write(f"{ENVIRONMENT_MARK}no space left to write the run record of {spec.script} in "
                     f"{Path(spec.out).parent}; free some space or point TMPDIR at a folder with more room\n")
        stream.flush()
        os._exit(ENVIRONMENT_EXIT)


def _run(spec: Spec, base: Path) -> int:
    out = Path(spec.out)
    started = time.perf_counter()
    confinement = _confinement(spec, base)
    kernel = _kernel_layer(spec, confinement)
    isolation = [f"repo-{spec.view_method}", *kernel.tags, "python-write-guard"]
    if limit_memory(spec.memory_limit):
        isolation.append("memory-cap")
    if not spec.network:
        isolation.append("network-off")
    isolation.append(spec.mode)
    # written before the user's code runs, so the parent knows the isolation even when the run is lost
    (out / "isolation.json").write_text(json.dumps(isolation), encoding="utf-8")
    sys.stdout = _CappedStream(sys.stdout, CAPTURE_LIMIT)
    sys.stderr = _CappedStream(sys.stderr, CAPTURE_LIMIT)

    from figproof.child import capture

    rec = capture.Recorder(sandbox=Path(spec.sandbox).resolve(), script=spec.script,
                           events_path=out / "events.jsonl", protect=tuple(Path(p) for p in spec.protect),
                           temp=base / "tmp")
    from figproof.child import audit

    audit.install(confinement, rec.event, lambda: rec.user_source(1)[0])
    if kernel.note:
        rec.notes.append(kernel.note)
    capture.install_io_hooks(rec, network=spec.network)
    capture.install_loader_hooks(rec)
    capture.install_matplotlib_hooks(rec)
    os.chdir(spec.cwd)
    error = run_user_code(spec, rec)
    seconds = time.perf_counter() - started
    _finish(spec, rec, error, seconds, tuple(isolation))
    sys.stdout.flush()
    sys.stderr.flush()
    # threads the script left running must not keep the child alive
    os._exit(0)


def _confinement(spec: Spec, base: Path) -> Any:
    """Where the script may write: the copy and its run folder (``base``), the run record's folder, and a temp
    folder of its own inside ``base`` (so ``tempfile`` works and the system's temp folder is never written)."""
    import tempfile

    from figproof.child.audit import Confinement

    tmp = base / "tmp"
    tmp.mkdir(exist_ok=True)
    os.environ["TMPDIR"] = str(tmp)
    tempfile.tempdir = None  # the warm pool's server may have asked already
    return Confinement.beneath([base, Path(spec.sandbox), Path(spec.out)], [Path(p) for p in spec.protect])


@dataclass(frozen=True, slots=True)
class _Kernel:
    tags: tuple[str, ...] = ()
    note: str = ""


def _kernel_layer(spec: Spec, confinement: Any) -> _Kernel:
    """Landlock (Linux): the kernel holds writes to the same folders as the audit hook, and TCP when the
    network is off; must come after the repo view is entered and before any thread or user code."""
    from figproof.child import audit, landlock

    outcome = landlock.confine([*confinement.roots, *audit.DEVICE_FOLDERS], audit.DEVICES,
                               block_tcp=not spec.network)
    confinement.kernel = outcome.writes
    tags = ("kernel-write-confinement",) * outcome.writes + ("kernel-network-block",) * outcome.network
    note = f"{outcome.note}; the Python write guard and the working-tree check still hold" if outcome.note else ""
    return _Kernel(tags=tags, note=note)


def _finish(spec: Spec, rec: Any, error: Any, seconds: float, isolation: tuple[str, ...]) -> None:
    from figproof.child.extract import extract_figure
    from figproof.model.records import ScriptRun, dump_run

    out = Path(spec.out)
    figures = []
    notes = list(dict.fromkeys(rec.shown_text(n) for n in rec.notes if n != "needs-input"))
    render_folder = out / "renders"
    render_folder.mkdir(exist_ok=True)
    for number, fig in enumerate(rec.figures, start=1):
        try:
            figures.append(extract_figure(fig, number, rec, render_folder, renders=spec.renders))
        except MemoryError:
            notes.append(f"figure {number}: ran out of memory while drawing it")
        except Exception as exc:  # noqa: BLE001 - one undrawable figure must not lose the others
            notes.append(f"figure {number} could not be drawn: {type(exc).__name__}: {str(exc)[:200]}")
    status: RunStatus = "ok" if error is None else ("memory" if error.kind == "memory" else "failed")
    run = ScriptRun(path=spec.script, status=status, seconds=round(seconds, 3),
                    working_dir="script" if Path(spec.cwd).resolve() != Path(spec.sandbox).resolve() else "root",
                    error=error, figures=tuple(figures), events=tuple(rec.events), isolation=isolation,
                    notes=tuple(notes), freetype=_freetype())
    dump_run(run, out)


def _freetype() -> str:
    from matplotlib import ft2font

    return str(getattr(ft2font, "__freetype_version__", ""))


if __name__ == "__main__":
    main()

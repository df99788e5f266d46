"""Test-suite setup: say plainly when figproof is not installed, instead of 30 import errors.

The suite runs against the installed package (``python -m pip install -e ".[test]"``, as README says).
Run from another interpreter, every test module would fail to import; then nothing is collected and
the header and the summary say what to install.
"""

from __future__ import annotations

import importlib.util
import os
from collections.abc import Iterator
from typing import Any

import pytest

NEEDED = ("figproof", "numpy", "pandas", "scipy", "matplotlib", "PIL", "colorspacious", "nbformat", "jsonschema",
          "yaml")
MISSING = [name for name in NEEDED if importlib.util.find_spec(name) is None]
HINT = (f"figproof's tests need the project installed in this Python (missing: {', '.join(MISSING)}); "
        'run: python -m pip install -e ".[test]"')

collect_ignore_glob = ["test_*.py"] if MISSING else []


@pytest.hookimpl(tryfirst=True)
def pytest_cmdline_main(config: Any) -> None:
    """With pytest-xdist installed (the test extra), the suite runs on two processes, each test file whole on one
    of them so its module fixtures are built once: most tests wait on a child process, and one pytest process
    leaves a core idle.  ``-n N`` chooses otherwise, ``-n 0`` runs in one process; without xdist, one process."""
    if hasattr(config, "workerinput") or not config.pluginmanager.has_plugin("xdist"):
        return
    if config.option.numprocesses is None and not config.option.usepdb and (os.cpu_count() or 1) > 1:
        config.option.numprocesses = 2
        if config.option.dist == "no":
            config.option.dist = "loadfile"


def pytest_report_header(config: Any) -> str | None:
    return HINT if MISSING else None


def pytest_terminal_summary(terminalreporter: Any) -> None:
    if MISSING:
        terminalreporter.write_line(HINT, yellow=True)


class _Shared:
    """The session's warm pool, started on first use with the session's environment and replaced once a check
    has stopped it (an interrupted check kills its children and starts no more)."""

    def __init__(self) -> None:
        self.pool: Any = None
        self.temp = os.environ.get("TMPDIR")

    def get(self) -> Any:
        if self.pool is None or getattr(self.pool, "_stopped", False):
            from figproof.run.pool import default_runner

            self.close()
            self.pool = default_runner()
        return self.pool

    def close(self) -> None:
        close = getattr(self.pool, "close", None)
        if callable(close):
            close()
        self.pool = None


class _Lent:
    """The shared pool as one check's runner: the check's ``close`` leaves it running for the next test,
    ``stop`` stops it as it would the check's own pool (and the next check gets a new one)."""

    def __init__(self, shared: _Shared) -> None:
        self._shared = shared

    @property
    def name(self) -> str:
        return str(getattr(self._shared.get(), "name", "warm-pool"))

    def run(self, task: Any, options: Any) -> Any:
        return self._shared.get().run(task, options)

    def stop(self) -> None:
        stop = getattr(self._shared.pool, "stop", None)
        if callable(stop):
            stop()

    def close(self) -> None:
        pass


@pytest.fixture(scope="session")
def _shared_pool() -> Iterator[_Shared]:
    shared = _Shared()
    yield shared
    shared.close()


@pytest.fixture(scope="session")
def warm_runner(_shared_pool: _Shared) -> Any:
    """One runner for the whole session (the warm pool where it starts), for tests that check many small repos.

    Starting a pool costs over a second; a check of one small script through a running pool costs a fifth of
    that.  Each check still gets its own repo copy and a freshly forked child, so sharing changes no result.
    """
    return _Lent(_shared_pool)


@pytest.fixture(autouse=True)
def _checks_share_the_warm_pool(_shared_pool: _Shared, monkeypatch: pytest.MonkeyPatch) -> None:
    """Checks that would start a warm pool of their own (``figproof.pipeline.check``, and so ``figproof check``
    run in this process) borrow the session's instead, as ``warm_runner`` does.

    Where a test points ``TMPDIR`` elsewhere or sets ``FIGPROOF_RUNNER``, the check builds its own runner as
    it would outside the tests (those tests look at what a check leaves in its temp folder, or at the runner
    choice); a test that replaces ``default_runner`` itself wins, its patch coming later.
    """
    import figproof.pipeline
    from figproof.run.pool import default_runner

    def borrowed() -> Any:
        if os.environ.get("TMPDIR") != _shared_pool.temp or "FIGPROOF_RUNNER" in os.environ:
            return default_runner()
        return _Lent(_shared_pool)

    monkeypatch.setattr(figproof.pipeline, "default_runner", borrowed)

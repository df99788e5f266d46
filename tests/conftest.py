"""Test-suite setup: say plainly when figproof is not installed, instead of 30 import errors.

The suite runs against the installed package (``python -m pip install -e ".[test]"``, as README says).
Run from another interpreter, every test module would fail to import; then nothing is collected and
the header and the summary say what to install.
"""

from __future__ import annotations

import importlib.util
from collections.abc import Iterator
from typing import Any

import pytest

NEEDED = ("figproof", "numpy", "pandas", "scipy", "matplotlib", "PIL", "colorspacious", "nbformat", "jsonschema",
          "yaml")
MISSING = [name for name in NEEDED if importlib.util.find_spec(name) is None]
HINT = (f"figproof's tests need the project installed in this Python (missing: {', '.join(MISSING)}); "
        'run: python -m pip install -e ".[test]"')

collect_ignore_glob = ["test_*.py"] if MISSING else []


def pytest_report_header(config: Any) -> str | None:
    return HINT if MISSING else None


def pytest_terminal_summary(terminalreporter: Any) -> None:
    if MISSING:
        terminalreporter.write_line(HINT, yellow=True)


@pytest.fixture(scope="session")
def warm_runner() -> Iterator[Any]:
    """One runner for the whole session (the warm pool where it starts), for tests that check many small repos.

    Starting a pool costs over a second; a check of one small script through a running pool costs a fifth of
    that.  Each check still gets its own repo copy and a freshly forked child, so sharing changes no result.
    """
    from figproof.run.pool import default_runner

    runner = default_runner()
    yield runner
    close = getattr(runner, "close", None)
    if callable(close):
        close()

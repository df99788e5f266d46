"""Stopping cleanly on SIGINT (Ctrl-C) and SIGTERM (what CI runners and ``timeout`` send).

:func:`stop_on_signals` turns the first of those signals into :class:`Interrupted`, raised in the main thread
wherever it is.  On its way up, every ``finally`` of the check runs: :func:`figproof.run.execute.execute_all` kills
the children's process groups (the warm pool's server kills the children it forked), the sandboxes and run
records are deleted, and no report is written.  The command line then exits with 128 + the signal number (130
for SIGINT, 143 for SIGTERM), as shells report a process a signal ended.

A second signal while that clean-up runs ends the process at once (``os._exit``); whatever is left is removed by
the next check's sweep of stale temporary folders (see :mod:`figproof.run.scratch`).
"""

from __future__ import annotations

import os
import signal
import sys
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from types import FrameType

SIGNALS = (signal.SIGINT, signal.SIGTERM)


class Interrupted(BaseException):
    """A signal asked figproof to stop (a BaseException, so ``except Exception`` clean-ups let it pass)."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum

    @property
    def name(self) -> str:
        """The signal's name, e.g. ``SIGTERM``."""
        return signal.Signals(self.signum).name

    @property
    def exit_code(self) -> int:
        """The shell's convention for a process a signal ended: 128 + the signal number."""
        return 128 + self.signum


@contextmanager
def stop_on_signals() -> Iterator[None]:
    """While inside, SIGINT and SIGTERM raise :class:`Interrupted`; a second one exits at once.

    Outside the main thread (where Python cannot set handlers) it does nothing.  The previous handlers are put
    back on exit.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    seen: list[int] = []

    def handler(signum: int, _frame: FrameType | None) -> None:
        if seen:
            # the user insists: no more clean-up (the next check sweeps what is left)
            try:
                sys.stderr.write("\nfigproof: stopped at once\n")
                sys.stderr.flush()
            finally:
                os._exit(128 + signum)
        seen.append(signum)
        raise Interrupted(signum)

    previous = {sig: signal.signal(sig, handler) for sig in SIGNALS}
    try:
        yield
    finally:
        for sig, old in previous.items():
            signal.signal(sig, old)

"""How a command stops on SIGINT, SIGTERM or SIGHUP: at once, in any phase, its job processes ended.

The command line installs ``install_handlers`` first thing. The first signal raises ``Stopped`` where the
driver is (validation, start of the worker pool, running, reporting); the `finally` blocks on the way out
kill the job processes and release the run lock, and the CLI prints how to resume and exits 128 + the signal
number (130 for SIGINT, 143 for SIGTERM, 129 for SIGHUP). Inside ``deferred()`` (a job's record and its row
being written) the signal waits until the block ends. A second signal ends the process at once: every file
fourfold writes is written whole and every store write is one transaction, so even that leaves nothing half
done; the fork server and the job processes die with the driver (fourfold.study.process).

Job processes ignore SIGINT and SIGHUP (the terminal sends them to the whole process group; the driver
decides) and die from SIGTERM, as processes do.
"""

from __future__ import annotations

import os
import signal
from contextlib import contextmanager

STOP_SIGNALS = (signal.SIGINT, signal.SIGTERM, signal.SIGHUP)


class Stopped(BaseException):
    """The command was asked to stop by a signal. A BaseException, so no `except Exception` swallows it.
    ``hint`` says how to go on from where it stopped (filled in on the way out)."""

    def __init__(self, signum: int):
        super().__init__(signal.Signals(signum).name)
        self.signum = signum
        self.hint = ""

    @property
    def exit_status(self) -> int:
        return 128 + self.signum

    @property
    def signal_name(self) -> str:
        return signal.Signals(self.signum).name


_state = {"stopping": False, "deferring": 0, "pending": None}


def _handler(signum, frame):
    if _state["stopping"]:
        os._exit(128 + signum)  # asked again while stopping: go now (see the module docstring)
    if _state["deferring"]:
        _state["pending"] = signum
        return
    _state["stopping"] = True
    raise Stopped(signum)


def install_handlers() -> None:
    """Make SIGINT, SIGTERM and SIGHUP raise Stopped in the main thread."""
    _state.update(stopping=False, deferring=0, pending=None)
    for number in STOP_SIGNALS:
        signal.signal(number, _handler)


@contextmanager
def deferred():
    """A block a signal does not cut in two: a stop asked for inside it is raised when it ends."""
    _state["deferring"] += 1
    try:
        yield
    finally:
        _state["deferring"] -= 1
        pending = _state["pending"]
        if not _state["deferring"] and pending is not None:
            _state["pending"] = None
            _state["stopping"] = True
            raise Stopped(pending)


def stop_pending() -> bool:
    """Whether a stop waits for the end of a ``deferred`` block (a long wait inside it should end early)."""
    return _state["pending"] is not None


@contextmanager
def blocked():
    """Hold the stop signals back (they stay pending and arrive when the block ends). A process started
    inside inherits them blocked: the fork server starts here, so a Ctrl-C meant for the driver never
    lands in it while it imports, and its job processes start with them blocked too."""
    previous = signal.pthread_sigmask(signal.SIG_BLOCK, STOP_SIGNALS)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, previous)


def job_process_signals() -> None:
    """In a job process: SIGINT and SIGHUP ignored (they are the driver's), SIGTERM as usual, none blocked."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGHUP, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    signal.pthread_sigmask(signal.SIG_UNBLOCK, STOP_SIGNALS)

"""Stopping a run cleanly: SIGTERM, SIGUSR1 and SIGINT ask the running route to checkpoint and stop.

A cluster pre-empts a job with a signal and a grace period (SLURM sends SIGTERM, or an early
SIGUSR1 where the site allows it); Ctrl-C sends SIGINT. While a run is in :func:`stop_on_signals`,
these signals only set a flag; the route base class looks at it after every slice of work (well
under two seconds apart), writes a checkpoint at that step and raises
:class:`driven_atom.errors.Interrupted`; the command line then exits with 128 + signal. The next
invocation resumes from that step.

Handlers can only be installed in the main thread; elsewhere (a Dask worker thread) the flag is
set with :func:`request` by whoever receives the signal. In a campaign worker process the flag is
*sticky* (:func:`make_sticky`): once a stop is requested, every later job of that worker stops at
once too, until the campaign has gone.

>>> with stop_on_signals():
...     request(15)
...     requested()
15
>>> requested() is None
True
"""
from __future__ import annotations

import signal
import threading
from contextlib import contextmanager

STOP_SIGNALS = (signal.SIGTERM, signal.SIGUSR1, signal.SIGINT)
_state = {"signum": None, "depth": 0, "sticky": False}


def requested() -> int | None:
    """The signal that asked the current run to stop, or None."""
    return _state["signum"]


def request(signum: int) -> None:
    """Ask the current run (and, when sticky, every later run of this process) to stop."""
    _state["signum"] = int(signum)


def make_sticky() -> None:
    """This process is a campaign worker: a stop request is never cleared."""
    _state["sticky"] = True


def install_handlers() -> None:
    """Turn the stop signals into requests for the whole life of this process (main thread only):
    what a campaign worker does at start, so an idle worker is never killed half-way."""
    if threading.current_thread() is threading.main_thread():
        for sig in STOP_SIGNALS:
            signal.signal(sig, _handler)


def _handler(signum, frame):  # noqa: ARG001 - signal handler signature
    request(signum)


@contextmanager
def stop_on_signals():
    """Within the block the stop signals set the flag instead of ending the process; the previous
    handlers are restored on exit and the flag cleared (unless sticky; nesting is allowed)."""
    installed = {}
    if _state["depth"] == 0 and threading.current_thread() is threading.main_thread():
        for sig in STOP_SIGNALS:
            try:
                installed[sig] = signal.signal(sig, _handler)
            except (ValueError, OSError):      # not allowed here: leave that signal alone
                pass
    _state["depth"] += 1
    try:
        yield
    finally:
        _state["depth"] -= 1
        if _state["depth"] == 0:
            for sig, old in installed.items():
                signal.signal(sig, old)
            if not _state["sticky"]:
                _state["signum"] = None

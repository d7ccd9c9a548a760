"""Dask preload for campaign workers in batch jobs: a stop signal becomes a checkpoint, then the
worker leaves and its job goes to another worker.

A batch system ends a worker batch job with SIGTERM (pre-emption, the walltime, ``scancel``; the
job script passes SLURM's early warning on as SIGTERM too) and kills what is left after a grace
time (SLURM's ``GraceTime`` or ``KillWait``). The [cluster] job script loads this module into the
nanny and the worker processes (``--preload`` and ``--preload-nanny``):

* **worker process**: SIGTERM, SIGUSR1 or SIGINT ask the running job to stop
  (:mod:`driven_atom.stopping`, sticky): after its current slice it writes its checkpoint and, as
  :func:`leaving` is then true, :func:`driven_atom.campaign.runner.run_job` hands it back to the
  scheduler (``distributed.Reschedule``), which gives it to another worker that resumes from the
  checkpoint. The worker takes no new job meanwhile and closes once the running one is back.
* **nanny process**: the same signals pass SIGTERM on to its worker process and let the worker
  finish, instead of distributed's own handler, which kills the worker after a few seconds; the
  nanny does not restart the worker and closes after it.

Outside a Dask worker or nanny nothing is installed.

>>> leaving()
False
"""
from __future__ import annotations

import asyncio
import os
import signal
import threading

from driven_atom import stopping

LEAVE_TIMEOUT_S = 600.0        # longest wait for a running job to hand itself back
_state = {"leaving": False, "servers": [], "loop": None}


def leaving() -> bool:
    """True in a worker process that a stop signal told to leave (its jobs go back to the scheduler)."""
    return _state["leaving"]


def dask_setup(server) -> None:
    """Preload hook: called with the Worker (``--preload``) or the Nanny (``--preload-nanny``)."""
    from distributed import Nanny

    if threading.current_thread() is not threading.main_thread():
        return                                   # signal handlers live in the main thread only
    _state["servers"].append(server)
    _state["loop"] = asyncio.get_running_loop()
    handler = _nanny_signal if isinstance(server, Nanny) else _worker_signal
    for sig in stopping.STOP_SIGNALS:
        signal.signal(sig, handler)


def dask_teardown(server) -> None:
    if server in _state["servers"]:
        _state["servers"].remove(server)


def _soon(callback, *args) -> None:
    """Run ``callback(*args)`` in the event loop (signal handlers only set flags and schedule)."""
    loop = _state["loop"]
    if loop is not None and not loop.is_closed():
        loop.call_soon_threadsafe(callback, *args)


def _worker_signal(signum, frame) -> None:  # noqa: ARG001 - signal handler signature
    stopping.make_sticky()
    stopping.request(signum)
    if not _state["leaving"]:
        _state["leaving"] = True
        for worker in list(_state["servers"]):
            _soon(lambda w=worker: asyncio.ensure_future(_leave(w, signum)))


async def _leave(worker, signum: int) -> None:
    """Take no new job, wait until the running ones have handed themselves back, close."""
    from distributed.core import Status

    if worker.status == Status.running:
        worker.status = Status.closing_gracefully           # the scheduler sends no new job
    waited = 0.0
    while worker.state.executing_count and waited < LEAVE_TIMEOUT_S:
        await asyncio.sleep(0.1)
        waited += 0.1
    await worker.close(nanny=True, reason=f"stop signal {signum}")


def _nanny_signal(signum, frame) -> None:  # noqa: ARG001 - signal handler signature
    for nanny in list(_state["servers"]):
        _soon(_pass_on, nanny, signum)


def _pass_on(nanny, signum: int) -> None:
    """Nanny: no restart of the worker when it exits; SIGTERM to the worker process."""
    from distributed.core import Status

    if nanny.status == Status.running:
        nanny.close_gracefully(reason=f"stop signal {signum}")
    pid = nanny.process.pid if nanny.process is not None else None
    if pid:
        try:
            os.kill(pid, signal.SIGTERM)
        except ProcessLookupError:
            pass

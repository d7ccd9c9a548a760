"""Where campaign jobs run: a local process pool (default) or a Dask cluster.

* :func:`local_pool` — ``concurrent.futures.ProcessPoolExecutor`` with the ``spawn`` start
  method and one thread per worker (``OMP/OPENBLAS/MKL/NUMBA_NUM_THREADS = 1`` set before numpy
  loads in the worker). On Linux a worker is killed when the scan process dies, so a killed scan
  leaves no orphan still writing job files.
* :func:`dask_client` — a ``distributed.Client``: to a running scheduler (``--scheduler
  ADDRESS``) or to a new ``LocalCluster`` (``--dask-local N``, one thread per worker).
* the config's ``[cluster]`` table: a dask-jobqueue SLURM/PBS cluster whose lost batch jobs are
  replaced (:mod:`driven_atom.campaign.cluster`).

The campaign code only needs ``submit`` and "as completed": :class:`Runner` adapts both kinds.
Dask and dask-jobqueue are imported only when used.

>>> sorted(THREAD_VARIABLES)[:2]
['MKL_NUM_THREADS', 'NUMBA_NUM_THREADS']
"""
from __future__ import annotations

import concurrent.futures as cf
import contextlib
import os
import sys

from driven_atom.campaign.cluster import THREAD_VARIABLES, open_cluster
from driven_atom.errors import InputError


def _one_thread() -> None:
    """Worker initializer: one compute thread, stop signals turned into (sticky) stop requests so
    a running job checkpoints and an idle worker is not killed half-way, and die with the parent
    (Linux prctl)."""
    from driven_atom import stopping

    for name in THREAD_VARIABLES:
        os.environ[name] = "1"
    stopping.make_sticky()
    stopping.install_handlers()
    if sys.platform.startswith("linux"):
        try:
            import ctypes
            import signal

            libc = ctypes.CDLL("libc.so.6", use_errno=True)
            libc.prctl(1, signal.SIGKILL)    # PR_SET_PDEATHSIG
        except (OSError, AttributeError):
            pass


def check_count(value, name: str) -> int:
    """A worker count: an integer >= 1 (InputError naming ``name`` otherwise).

    >>> check_count(2, "--workers")
    2
    """
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise InputError(f"`{name}` must be an integer >= 1, got {value!r}")
    return value


def local_pool(workers: int) -> cf.ProcessPoolExecutor:
    """A process pool of ``workers`` single-threaded ``spawn`` workers."""
    import multiprocessing

    check_count(workers, "--workers")
    return cf.ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                                  initializer=_one_thread)


def default_workers() -> int:
    """Cores this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


def _is_dask_client(obj) -> bool:
    if "distributed" not in sys.modules:
        return False
    from distributed import Client

    return isinstance(obj, Client)


def _request_stop(signum: int) -> None:
    """Run on Dask workers: stop the running job at its next slice, and every later one."""
    from driven_atom import stopping

    stopping.make_sticky()
    stopping.request(signum)


class Runner:
    """``submit``, ``wait``, ``cancel`` and ``signal_workers`` over a futures executor or a Dask client;
    ``watch``: the :class:`~driven_atom.campaign.cluster.WorkerWatch` of a [cluster] (else None)."""

    def __init__(self, executor, *, watch=None):
        if not (isinstance(executor, cf.Executor) or _is_dask_client(executor)):
            raise InputError("`executor` must be a concurrent.futures.Executor or a distributed.Client, "
                             f"got {type(executor).__name__}")
        self.executor = executor
        self.is_dask = _is_dask_client(executor)
        self.watch = watch

    def submit(self, fn, *args, key: str | None = None):
        if self.is_dask:
            return self.executor.submit(fn, *args, key=key, pure=False)
        return self.executor.submit(fn, *args)

    @property
    def workers(self) -> int | None:
        """How many jobs run at once, where the executor tells (pool size, Dask worker threads)."""
        if self.is_dask:
            try:
                return int(sum(self.executor.nthreads().values())) or None
            except Exception:  # noqa: BLE001 - a client that cannot tell
                return None
        count = getattr(self.executor, "_max_workers", None)
        return int(count) if isinstance(count, int) else None

    def wait(self, futures, timeout: float) -> tuple[set, set]:
        """(finished, still pending) after at most ``timeout`` seconds, as soon as one finishes."""
        futures = set(futures)
        if not futures:
            return set(), set()
        if self.is_dask:
            from distributed import wait

            try:
                done, not_done = wait(list(futures), timeout=timeout, return_when="FIRST_COMPLETED")
            except TimeoutError:
                return set(), futures
            return set(done), set(not_done)
        done, not_done = cf.wait(futures, timeout=timeout, return_when=cf.FIRST_COMPLETED)
        return set(done), set(not_done)

    def cancel(self, futures) -> set:
        """Cancel the futures that have not started; the set of those cancelled. (Dask cannot tell
        a queued task from a running one on the client: it cancels neither, and its workers are
        asked to stop instead, so queued jobs stop at once.)"""
        if self.is_dask:
            return set()
        return {f for f in futures if f.cancel()}

    def signal_workers(self, signum: int) -> None:
        """Pass a stop signal on to the workers, whose running jobs then checkpoint and stop."""
        if self.is_dask:
            try:
                self.executor.run(_request_stop, signum)
            except Exception:  # noqa: BLE001 - workers already gone: nothing to stop
                pass
            return
        for process in list(getattr(self.executor, "_processes", {}).values()):
            try:
                os.kill(process.pid, signum)
            except (ProcessLookupError, AttributeError):
                pass


@contextlib.contextmanager
def dask_client(*, scheduler: str | None = None, local_workers: int | None = None):
    """A ``distributed.Client`` to a scheduler address or to a new LocalCluster."""
    import dask
    from distributed import Client, LocalCluster

    if scheduler is not None:
        from driven_atom.errors import short

        try:
            client = Client(scheduler, timeout="20s")
        except (OSError, TimeoutError, ValueError, TypeError) as exc:
            raise InputError(f"`--scheduler` {short(scheduler, 100)!r}: cannot connect "
                             f"({short(str(exc).splitlines()[0] if str(exc) else type(exc).__name__, 150)})") from None
        with client:
            yield client
        return
    if local_workers is not None:
        check_count(local_workers, "--dask-local")
        environ = {name: "1" for name in THREAD_VARIABLES}
        saved = {name: os.environ.get(name) for name in THREAD_VARIABLES}
        try:
            with dask.config.set({"distributed.nanny.pre-spawn-environ": environ}):
                with LocalCluster(n_workers=local_workers, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as lc, Client(lc) as client:
                    yield client
        finally:   # the nanny writes pre-spawn-environ into this process's environment too
            for name, value in saved.items():
                if value is None:
                    os.environ.pop(name, None)
                else:
                    os.environ[name] = value
        return
    raise InputError("dask_client needs one of `--scheduler` or `--dask-local`")


@contextlib.contextmanager
def open_runner(executor=None, *, workers: int | None = None, cluster=None, n_jobs: int = 1, log_folder=None):
    """The :class:`Runner` for ``scan``: the caller's executor, a [cluster] (a checked
    :class:`~driven_atom.campaign.cluster.ClusterSpec`; worker logs in ``log_folder``), or a
    local pool.

    A caller's executor or client is used as is and left open; pools and clusters made here are
    shut down on exit (a cluster's batch jobs cancelled).
    """
    if executor is not None:
        yield Runner(executor)
    elif cluster is not None and workers is None:
        with open_cluster(cluster, log_folder=log_folder) as (client, watch):
            yield Runner(client, watch=watch)
    else:
        n = workers if workers is not None else max(1, min(default_workers(), n_jobs))
        pool = local_pool(n)
        try:
            yield Runner(pool)
        finally:
            pool.shutdown(wait=True, cancel_futures=True)

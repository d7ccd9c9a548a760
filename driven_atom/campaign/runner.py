"""Run a campaign: expand the scan, skip finished jobs, run the rest, never lose a finished one.

``scan(config, out)`` takes the folder's lock, writes ``campaign.toml`` and runs every job that is
not done (failed ones only with ``retry_failed``); a damaged job file is moved aside and re-run.
Each job is :func:`driven_atom.routes.run_config` on ``jobs/<id>.h5``: the file is written atomically,
and a job whose checkpoint file (``jobs/<id>.ckpt.h5``) holds a checkpoint resumes from it. A job that raises is recorded as failed (error and
traceback in its file) and the others go on. Re-running the same command finishes what is left;
editing the scan (say, adding intensities) and re-running reuses every job whose physics is
unchanged.

>>> check_folder("runs/kestrel-hollow-scan").name
'kestrel-hollow-scan'
"""
from __future__ import annotations

import hashlib
import sys
import time
from pathlib import Path

from driven_atom.campaign import store
from driven_atom.errors import InputError


def run_job(job_id: str, config: dict, folder: str, cache_dir: str | None = None) -> dict:
    """Run one job into ``folder/jobs/<job_id>.h5`` (in a worker); never raises for job errors.

    Outcomes: done; failed (recorded in the job file with its traceback); interrupted (a stop
    signal: the job's checkpoint is written, it stays pending); storage (the disk is full or the
    folder read-only: nothing recorded, the campaign stops). In a batch-job worker that a stop
    signal told to leave (:mod:`~driven_atom.campaign.worker_signals`) an interrupted job goes back
    to the Dask scheduler instead (``distributed.Reschedule``), which gives it to another worker."""
    from driven_atom.campaign import worker_signals
    from driven_atom.errors import Interrupted
    from driven_atom.io import StorageError
    from driven_atom.routes import load_config, run_config

    path = store.job_path(folder, job_id)
    store.mark_running(path)
    started = time.perf_counter()
    try:
        run_config(load_config(config), path, progress=False, cache_dir=cache_dir)
        return {"id": job_id, "status": store.DONE, "wall_s": time.perf_counter() - started}
    except Interrupted as exc:
        if worker_signals.leaving():
            from distributed import Reschedule

            raise Reschedule() from None
        return {"id": job_id, "status": INTERRUPTED, "error": str(exc), "signum": exc.signum}
    except StorageError as exc:
        return {"id": job_id, "status": STORAGE, "error": exc.strerror or str(exc)}
    except Exception as exc:  # noqa: BLE001 - every job error is recorded, the campaign goes on
        try:
            store.write_failed(path, job_id=job_id, config=_toml(config), error=exc)
        except StorageError as storage:
            return {"id": job_id, "status": STORAGE, "error": storage.strerror or str(storage)}
        return {"id": job_id, "status": store.FAILED, "error": f"{type(exc).__name__}: {exc}".splitlines()[0]}
    finally:
        store.clear_running(path)


INTERRUPTED, STORAGE = "interrupted", "storage"
WORKER_LOGS = "worker-logs"  # the batch-job logs of a [cluster] campaign, inside its folder
GRACE_S = 60.0              # how long a stopping scan waits for its running jobs to checkpoint
MAX_JOBS = 10_000           # larger scans need yes=True (--yes)


def _toml(config: dict) -> str:
    import tomli_w

    return tomli_w.dumps(config)


def scan(config, out, *, executor=None, workers: int | None = None, retry_failed: bool = False,
         progress: bool = True, cache_dir=None, yes: bool = False, max_jobs: int = MAX_JOBS) -> Path:
    """Run (or resume) the campaign of ``config`` in folder ``out``; returns the folder.

    ``config``: a path, dict or RunConfig with a ``[scan]`` table, or a campaign folder (its stored
    config runs again; its ``[cluster]`` shell lines are never taken from the folder).

    ``executor``: ``None`` (a local process pool of ``workers`` processes, default one per core;
    or the ``[cluster]`` table's dask-jobqueue cluster when the config has one and ``workers`` is
    not given), a ``concurrent.futures.Executor`` or a ``distributed.Client`` (used as is).
    ``cache_dir``: a basis-cache folder for every job (default: inside the campaign folder).
    A scan of more than ``max_jobs`` jobs needs ``yes``.

    SIGTERM, SIGUSR1 or SIGINT stop it cleanly: no new job starts, the running ones write their
    checkpoints and stay pending, and :class:`~driven_atom.errors.Interrupted` is raised (the next
    scan resumes them). A full disk stops it with :class:`~driven_atom.io.StorageError`.
    Raises :class:`InputError` when another scan holds the folder. On a [cluster], lost batch jobs
    are replaced (:mod:`driven_atom.campaign.cluster`); with no worker left and none coming it
    stops with :class:`~driven_atom.errors.WorkersLost`.
    """
    from driven_atom import stopping
    from driven_atom.campaign.cluster import check_cluster, check_walltime
    from driven_atom.campaign.executors import check_count
    from driven_atom.campaign.scan import expand

    if workers is not None:
        check_count(workers, "--workers")
    cfg = campaign_config(config)
    cluster = None
    if executor is None and workers is None and cfg.cluster is not None:
        cluster = check_cluster(cfg.cluster)
    folder = check_folder(out)
    plan = expand(cfg, max_jobs=None if yes else max_jobs, progress=progress)   # every job checked here
    jobs = plan.unique_jobs()
    if cluster is not None:
        check_walltime(cluster, jobs)
    with store.CampaignLock(folder) as lock, stopping.stop_on_signals():
        if not lock.supported:
            import warnings

            warnings.warn(f"file locking is not supported in {folder}; run one `driven-atom scan` at a time there")
        store.write_plan(folder, plan)
        (folder / store.JOBS_DIR).mkdir(exist_ok=True)
        store.clear_stale_files(folder)
        todo, done, failed = [], 0, 0
        for job in jobs:
            state = store.job_state(folder, job.id)
            if state.status == store.CORRUPT:
                aside = store.quarantine(folder, job.id)
                _note(f"job {job.id}: damaged file ({state.error}); moved to {aside.name}, running it again")
            if state.status == store.DONE:
                done += 1
            elif state.status == store.FAILED and not retry_failed:
                failed += 1
            else:
                todo.append(job)
        _run_all(todo, folder, executor=executor, workers=workers, cluster=cluster,
                 progress=progress, total=len(jobs), initial=done, failed=failed,
                 cache_dir=None if cache_dir is None else str(Path(cache_dir).resolve()), lock=lock)
    return folder


def _note(text: str) -> None:
    sys.stderr.write(f"driven-atom scan: {text}\n")


def _run_all(todo, folder, *, executor, workers, cluster, progress, total, initial, failed, cache_dir,
             lock=None) -> None:
    from tqdm.auto import tqdm

    from driven_atom import stopping
    from driven_atom.campaign.executors import open_runner
    from driven_atom.errors import Interrupted, WorkersLost
    from driven_atom.io import StorageError

    if not todo:
        return
    bar = tqdm(total=total, initial=initial, unit="job", desc="scan", disable=not progress, dynamic_ncols=True)
    stop, storage, interrupted, finished_here, noted = None, None, 0, 0, None
    try:
        with open_runner(executor, workers=workers, cluster=cluster, n_jobs=len(todo),
                         log_folder=Path(folder).resolve() / WORKER_LOGS) as runner:
            if runner.watch is not None:
                bar.write(f"driven-atom scan: {runner.watch.describe_start()}", file=sys.stderr)
            if lock is not None:               # for the ETA of `driven-atom status`
                lock.note(workers=runner.workers if cluster is None else cluster.workers)
            where = str(Path(folder).resolve())          # workers on other nodes have another cwd
            tag = hashlib.sha256(where.encode()).hexdigest()[:8]   # Dask keys: one per job and folder
            futures = {runner.submit(run_job, job.id, job.config, where, cache_dir,
                                     key=f"driven-atom-{job.id}-{tag}"): job for job in todo}
            pending = set(futures)
            deadline = None
            while pending:
                finished, pending = runner.wait(pending, timeout=0.5)
                for future in finished:
                    outcome = _outcome(future, futures.pop(future), folder)   # released once read
                    if outcome["status"] == store.FAILED:
                        failed += 1
                        bar.write(f"driven-atom scan: job {outcome['id']} failed: {outcome['error']}", file=sys.stderr)
                    elif outcome["status"] == INTERRUPTED:
                        interrupted += "checkpoint written" in outcome["error"]
                        continue
                    elif outcome["status"] == STORAGE:
                        storage = storage or outcome["error"]
                        continue
                    finished_here += 1
                    bar.update(1)
                if runner.watch is not None and deadline is None:
                    try:
                        runner.watch.poll()
                    finally:
                        for line in runner.watch.events:
                            bar.write(f"driven-atom scan: {line}", file=sys.stderr)
                        runner.watch.events.clear()
                        if runner.watch.state() != noted and lock is not None:
                            noted = runner.watch.state()
                            lock.note(cluster=noted)     # what `driven-atom status` shows of the workers
                bar.set_postfix_str(_postfix(failed, runner.watch), refresh=False)
                signum = stopping.requested()
                if (signum is not None or storage is not None) and deadline is None:
                    stop = signum
                    deadline = time.monotonic() + GRACE_S
                    pending -= runner.cancel(pending)     # not started: stay pending on disk
                    if signum is not None:
                        runner.signal_workers(signum)     # running: checkpoint now and stop
                if deadline is not None and time.monotonic() > deadline:
                    break
    except WorkersLost as exc:
        left = len(todo) - finished_here
        raise WorkersLost(f"{exc}; {left} job(s) stay pending, finished jobs are kept: run the same command "
                          f"again to resume") from None
    finally:
        bar.close()
    if storage is not None:
        raise StorageError(28, f"{storage}; the campaign stopped, finished jobs are kept")
    if stop is not None:
        raise Interrupted(stop, f"scan stopped by signal {stop}: {interrupted} running job(s) checkpointed "
                                f"(the others had not started propagating), finished jobs kept; run the same "
                                f"command again to resume")


def _postfix(failed: int, watch) -> str:
    """The progress line's tail: "failed=0" and, on a [cluster], "2 workers lost, 2 requested"."""
    lost = watch.summary() if watch is not None else ""
    return f"failed={failed}" + (f", {lost}" if lost else "")


def _outcome(future, job, folder) -> dict:
    """The job's outcome; a job whose worker was lost (Dask gave up on it) is recorded as failed."""
    from concurrent.futures import BrokenExecutor, CancelledError

    try:
        return future.result()
    except CancelledError:
        return {"id": job.id, "status": INTERRUPTED, "error": "cancelled before it started"}
    except BrokenExecutor:
        raise RuntimeError("a worker process of the local pool died (out of memory, or killed); "
                           "finished jobs are kept: run the same command again") from None
    except Exception as exc:  # noqa: BLE001 - e.g. distributed.KilledWorker
        store.write_failed(store.job_path(folder, job.id), job_id=job.id, config=_toml(job.config), error=exc)
        return {"id": job.id, "status": store.FAILED, "error": f"worker lost: {type(exc).__name__}: {exc}"}


def campaign_config(source):
    """The RunConfig of a config path/dict/RunConfig, or of a campaign folder's campaign.toml."""
    from driven_atom.routes import load_config

    if isinstance(source, (str, Path)) and Path(source).is_dir():
        return load_config(store.read_plan(source)["config"])
    return load_config(source)


def check_folder(out) -> Path:
    """A ``--out`` folder: not an existing file."""
    folder = Path(out)
    if folder.exists() and not folder.is_dir():
        raise InputError(f"`--out` {str(folder)!r} is a file; give a folder for the campaign")
    return folder

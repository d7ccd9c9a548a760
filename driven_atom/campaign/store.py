"""The campaign folder: plan, job files, lock, and the state of each job.

Layout of a campaign folder ``DIR``::

    DIR/campaign.toml        the expanded plan: [campaign] (dims, shape, provenance), [axes.*],
                             [config] (the scan config as given), [[job]] (id, index)
    DIR/jobs/<id>.h5         one result file per job (driven_atom.result format), written temp + rename;
                             or the record of a failed job (complete = False, status, error)
    DIR/jobs/<id>.ckpt.h5    the checkpoint of an unfinished job (its own file: a complete result is
                             never rewritten)
    DIR/jobs/<id>.mM.part.h5 a finished sublevel run of an m-averaged job, until the sum is written
    DIR/jobs/<id>.running    while a worker runs the job: JSON {pid, host, started}
    DIR/jobs/.*.tmp          a file being written (left over only by a killed writer)
    DIR/jobs/<id>.h5.corrupt a job file found unreadable, kept aside for inspection (job re-run)
    DIR/scan.lock            held (flock) by the one `driven-atom scan` working on the folder
    DIR/worker-logs/         on a [cluster]: the output of the worker batch jobs
    DIR/summary.h5           the collected table (netCDF via h5netcdf), DIR/summary.csv on request

A job is in one of these states: ``done`` (complete, readable, checksum and physics hash = job id),
``failed`` (complete = False, attrs status = "failed", error, traceback; its checkpoint file, if
any, is kept so a retry resumes), ``checkpointed`` (no result, a checkpoint file), ``corrupt``
(a result file unreadable, foreign or without its checksum) or ``pending`` (nothing).

The lock is an advisory ``flock`` on ``scan.lock``: the kernel drops it when its process dies
(even by SIGKILL), so a killed scan never leaves a stale lock. Its holder writes who it is into the
file; ``status`` and ``collect`` read that note and never take the lock. A second ``driven-atom scan`` on a busy
folder stops with an error naming the holder's pid and host (exit code 2). On a file system
without ``flock`` support the scan proceeds unlocked, with a warning.

>>> job_path("runs/demo", "0123abcd").as_posix()
'runs/demo/jobs/0123abcd.h5'
"""
from __future__ import annotations

import errno
import json
import os
import socket
import time
import traceback as tb_module
from dataclasses import dataclass
from pathlib import Path

from driven_atom.errors import InputError
from driven_atom.io import atomic_write, write_text

PLAN_FILE = "campaign.toml"
JOBS_DIR = "jobs"
LOCK_FILE = "scan.lock"
SUMMARY_FILE = "summary.h5"
CSV_FILE = "summary.csv"

DONE, FAILED, CHECKPOINTED, CORRUPT, PENDING, RUNNING = (
    "done", "failed", "checkpointed", "corrupt", "pending", "running")


def job_path(folder, job_id: str) -> Path:
    """Where the result of job ``job_id`` lives."""
    return Path(folder) / JOBS_DIR / f"{job_id}.h5"


def _marker_path(path: Path) -> Path:
    return path.with_suffix(".running")


# -- plan ---------------------------------------------------------------------------------------
def write_plan(folder, plan) -> Path:
    """Write ``campaign.toml`` for ``plan`` (a :class:`driven_atom.campaign.scan.Plan`)."""
    import tomli_w

    from driven_atom.campaign.scan import axis_table
    from driven_atom.result import provenance

    from driven_atom.campaign.cluster import FROM_USER_ONLY

    config = dict(plan.base)
    if "cluster" in config:            # shell lines are never stored where others can edit them
        config["cluster"] = {k: v for k, v in config["cluster"].items() if k not in FROM_USER_ONLY}
    data = {
        "campaign": {"dims": list(plan.dims), "shape": list(plan.shape), "n_jobs": len(plan.unique_jobs()),
                     **provenance()},
        "axes": axis_table(plan),
        "config": config,
        "job": [{"id": job.id, "index": list(job.index)} for job in plan.jobs],
    }
    return write_text(Path(folder) / PLAN_FILE, tomli_w.dumps(data))


def read_plan(folder) -> dict:
    """Read ``campaign.toml`` of a campaign folder (InputError when it is not one)."""
    import tomllib

    path = Path(folder) / PLAN_FILE
    if not path.is_file():
        raise InputError(f"`DIR` {str(folder)!r} is not a campaign folder (no {PLAN_FILE}); "
                         f"start one with `driven-atom scan CONFIG --out DIR`")
    try:
        data = tomllib.loads(path.read_text())
    except (tomllib.TOMLDecodeError, UnicodeDecodeError, RecursionError) as exc:
        raise InputError(f"{str(path)!r} is damaged ({str(exc)[:150]}); re-run `driven-atom scan CONFIG` to "
                         f"rewrite it") from None
    if not _plan_is_sound(data):
        raise InputError(f"{str(path)!r} is damaged (its tables are incomplete); re-run `driven-atom scan CONFIG` "
                         f"to rewrite it")
    return data


def _plan_is_sound(data) -> bool:
    """campaign.toml has the tables and types the readers use."""
    try:
        campaign, axes, jobs = data["campaign"], data.get("axes", {}), data.get("job", [])
        dims, shape = list(campaign["dims"]), [int(n) for n in campaign["shape"]]
        ok = len(dims) == len(shape) and isinstance(data["config"], dict) and isinstance(axes, dict)
        for job in jobs:
            ok = ok and isinstance(job["id"], str) and len(job["index"]) == len(shape) and all(
                0 <= int(i) < n for i, n in zip(job["index"], shape))
        for axis in axes.values():
            ok = ok and axis["dim"] in dims and len(axis["coords"]) == shape[dims.index(axis["dim"])]
        return bool(ok)
    except (KeyError, TypeError, ValueError, AttributeError):
        return False


def plan_job_ids(plan_data: dict) -> list[str]:
    """Distinct job ids of a plan read from campaign.toml, in plan order."""
    return list(dict.fromkeys(job["id"] for job in plan_data.get("job", [])))


# -- job states ---------------------------------------------------------------------------------
@dataclass(frozen=True)
class JobState:
    """What a job's file says: status, wall time (done jobs) and error text (failed/corrupt)."""

    status: str
    wall_s: float | None = None
    error: str = ""
    trustworthy: bool | None = None


def job_state(folder, job_id: str) -> JobState:
    """Inspect ``jobs/<job_id>.h5``; a done file is read in full, so damage is found."""
    return load_job(folder, job_id)[0]


def load_job(folder, job_id: str):
    """(:class:`JobState`, the :class:`driven_atom.result.Result` of a done job or ``None``)."""
    import h5py

    from driven_atom.result import checkpoint_path, read_result

    path = job_path(folder, job_id)
    if not path.exists():
        started = checkpoint_path(path).exists() or any(path.parent.glob(f"{job_id}.m*.part*.h5"))
        return JobState(CHECKPOINTED if started else PENDING), None       # (m-averaged jobs keep parts)
    try:
        with h5py.File(path, "r") as f:
            complete = bool(f.attrs.get("complete", False)) and "sha256" in f.attrs
            owner = str(f.attrs.get("physics_hash", ""))
            status = str(f.attrs.get("status", ""))
            error = str(f.attrs.get("error", ""))
    except Exception as exc:  # noqa: BLE001 - any failure to open means a damaged file
        return JobState(CORRUPT, error=f"unreadable: {exc}"), None
    if owner != job_id:
        return JobState(CORRUPT, error=f"holds physics hash {owner!r}, expected {job_id!r}"), None
    if complete:
        try:
            result = read_result(path)
        except Exception as exc:  # noqa: BLE001
            return JobState(CORRUPT, error=f"unreadable: {exc}"), None
        return JobState(DONE, wall_s=result.stats.get("wall_s"),
                        trustworthy=result.quality.get("trustworthy")), result
    if status == FAILED:
        return JobState(FAILED, error=error), None
    return JobState(CORRUPT, error="incomplete file that is no failure record"), None


def quarantine(folder, job_id: str) -> Path:
    """Move a damaged job file aside (``<id>.h5.corrupt``) so the job runs again."""
    path = job_path(folder, job_id)
    aside = path.with_name(path.name + ".corrupt")
    os.replace(path, aside)
    return aside


def write_failed(path, *, job_id: str, config: str, error: BaseException) -> Path:
    """Record a failed job atomically: complete = False, status, error, traceback. Its checkpoint
    file stays, so ``--retry-failed`` resumes from it. A complete result is never replaced."""
    import h5py

    from driven_atom.io import is_complete
    from driven_atom.result import provenance

    path = Path(path)
    if is_complete(path):
        return path
    text = "".join(tb_module.format_exception(type(error), error, error.__traceback__))
    with atomic_write(path) as tmp:
        with h5py.File(tmp, "w") as f:
            for key, value in provenance().items():
                f.attrs[key] = value
            f.attrs["physics_hash"] = job_id
            f.attrs["config"] = config
            f.attrs["status"] = FAILED
            f.attrs["error"] = f"{type(error).__name__}: {error}".splitlines()[0][:500]
            f.attrs["traceback"] = text[-20000:]
            f.attrs["complete"] = False
    return path


# -- running markers ----------------------------------------------------------------------------
def _proc_stat(pid: int) -> list[str] | None:
    """The fields of ``/proc/PID/stat`` after the command name (Linux), or None."""
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()
    except (OSError, IndexError):
        return None


def _process_start(pid: int) -> str | None:
    """Start time of a process (Linux /proc), to tell a live pid from a reused one."""
    fields = _proc_stat(pid)
    return fields[19] if fields and len(fields) > 19 else None


def _identity() -> dict:
    pid = os.getpid()
    return {"pid": pid, "host": socket.gethostname(), "start": _process_start(pid),
            "started": time.strftime("%Y-%m-%dT%H:%M:%S%z")}


def _alive(info: dict) -> bool:
    """Is the process described by ``info`` alive? (Other hosts: assumed alive.)"""
    if info.get("host") != socket.gethostname():
        return True
    pid = int(info.get("pid", -1))
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    except (OSError, ValueError):
        return False
    fields = _proc_stat(pid)
    if fields and fields[0] in ("Z", "X"):   # killed, not yet reaped (a container's init may never reap it)
        return False
    start = info.get("start")
    return start is None or _process_start(pid) in (None, start)


def mark_running(path) -> Path:
    """Write ``<id>.running`` for the job at ``path`` (who runs it, since when)."""
    return write_text(_marker_path(Path(path)), json.dumps(_identity()), sync=False)


def clear_running(path) -> None:
    try:
        os.unlink(_marker_path(Path(path)))
    except FileNotFoundError:
        pass


def running_info(folder, job_id: str) -> dict | None:
    """The marker of a job whose worker is alive, else ``None``."""
    marker = _marker_path(job_path(folder, job_id))
    try:
        info = json.loads(marker.read_text())
    except (OSError, ValueError):
        return None
    return info if _alive(info) else None


def clear_stale_files(folder) -> None:
    """Remove running markers of dead processes and the temp files of writes they left
    unfinished (call while holding the lock)."""
    jobs = Path(folder) / JOBS_DIR
    for marker in jobs.glob("*.running"):
        try:
            info = json.loads(marker.read_text())
        except (OSError, ValueError):
            info = {}
        if not info or not _alive(info):
            marker.unlink(missing_ok=True)
    for tmp in jobs.glob(".*.tmp"):
        job_id = tmp.name[1:].split(".", 1)[0]
        if not _marker_path(jobs / f"{job_id}.h5").exists():
            tmp.unlink(missing_ok=True)


# -- lock ---------------------------------------------------------------------------------------
class CampaignLock:
    """Exclusive ``flock`` on ``DIR/scan.lock`` for one ``driven-atom scan`` (context manager).

    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as d, CampaignLock(d) as lock:
    ...     CampaignLock(d).busy()
    True
    """

    def __init__(self, folder):
        self.path = Path(folder) / LOCK_FILE
        self._fh = None
        self.supported = True

    def _try(self, mode: str = "a+") -> bool:
        import fcntl

        fh = open(self.path, mode)
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            fh.close()
            if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                return False
            self.supported = False
            return True
        self._fh = fh
        return True

    def holder(self) -> dict:
        try:
            return json.loads(self.path.read_text() or "{}")
        except (OSError, ValueError):
            return {}

    def acquire(self) -> "CampaignLock":
        self.path.parent.mkdir(parents=True, exist_ok=True)
        if not self._try():
            info = self.holder()
            who = f"pid {info.get('pid', '?')} on {info.get('host', '?')} since {info.get('started', '?')}"
            raise InputError(f"campaign folder {str(self.path.parent)!r} is in use by another `driven-atom scan` "
                             f"({who}); wait for it to finish or stop it, then run again")
        if self._fh is not None:
            self._fh.seek(0)
            self._fh.truncate()
            self._fh.write(json.dumps(_identity()))
            self._fh.flush()
        return self

    def note(self, **extra) -> None:
        """Add ``extra`` (JSON-able, e.g. ``workers``) to the holder's note that ``status`` reads."""
        if self._fh is not None:
            info = {**_identity(), **self.holder(), **extra}
            self._fh.seek(0)
            self._fh.truncate()
            self._fh.write(json.dumps(info))
            self._fh.flush()

    def release(self) -> None:
        if self._fh is not None:
            self._fh.seek(0)
            self._fh.truncate()
            self._fh.close()   # closing drops the flock
            self._fh = None

    def busy(self) -> bool:
        """True when a live process holds the lock, read from the holder's note in the lock file
        without touching the lock itself (``status`` never delays or refuses a starting scan)."""
        info = self.holder()
        return bool(info) and _alive(info)

    def __enter__(self):
        return self.acquire()

    def __exit__(self, *exc):
        self.release()


# -- campaign status ----------------------------------------------------------------------------
def job_points(plan: dict) -> dict:
    """job id -> (grid index of its first point, number of grid points it stands for)."""
    points: dict = {}
    for job in plan.get("job", []):
        first, count = points.get(job["id"], (tuple(job["index"]), 0))
        points[job["id"]] = (first, count + 1)
    return points


def axis_values(plan: dict, index) -> dict:
    """The scan-axis values (coordinates in each axis's units) at grid ``index``."""
    dims = list(plan["campaign"]["dims"])
    return {path: axis["coords"][index[dims.index(axis["dim"])]] for path, axis in plan.get("axes", {}).items()}


def eta_seconds(mean_wall: float | None, pending: int, running: int, workers: int | None) -> float | None:
    """Time until the jobs left are done: the mean wall time of the done jobs times the work left
    (pending jobs, and half of each running one), spread over the workers (as many as the scan
    noted, else as many as are running, at least one). None without a done job to time.

    >>> eta_seconds(10.0, pending=4, running=2, workers=2)
    25.0
    """
    if mean_wall is None:
        return None
    return mean_wall * (pending + 0.5 * running) / max(1, workers or running or 1)


def campaign_status(folder) -> dict:
    """Counts of done / running / failed / pending jobs, one row per job with its scan-axis values,
    and an ETA while a scan works on the folder.

    ``pending`` counts every job neither done, failed nor running (``checkpointed`` and
    ``corrupt`` jobs among them, also counted separately), so done + running + failed + pending
    = total. Each row: ``id``, ``status``, ``wall_s``, ``error`` (the one-line reason of a failed
    or corrupt job), ``trustworthy``, ``values`` (axis path -> value in the units of ``axes``:
    the user's, plain numbers of a quantity in its atomic unit, named),
    ``index`` (grid position) and ``points`` (grid points of equal physics it stands for).
    ``cluster``: the worker batch jobs of a running scan on a [cluster] (alive, lost, requested;
    else None).
    """
    plan = read_plan(folder)
    lock = CampaignLock(folder)
    active = lock.busy()
    jobs = []
    counts = {DONE: 0, RUNNING: 0, FAILED: 0, PENDING: 0, CHECKPOINTED: 0, CORRUPT: 0}
    points = job_points(plan)
    for job_id in plan_job_ids(plan):
        state = job_state(folder, job_id)
        status = state.status
        if status in (PENDING, CHECKPOINTED, CORRUPT) and active and running_info(folder, job_id):
            status = RUNNING
        if status in (CHECKPOINTED, CORRUPT):
            counts[status] += 1
        counts[status if status in (DONE, RUNNING, FAILED) else PENDING] += 1
        index, count = points[job_id]
        jobs.append({"id": job_id, "status": status, "wall_s": state.wall_s, "error": state.error,
                     "trustworthy": state.trustworthy, "values": axis_values(plan, index), "index": list(index),
                     "points": count})
    walls = [j["wall_s"] for j in jobs if j["wall_s"] is not None and j["status"] == DONE]
    untrustworthy = sum(1 for j in jobs if j["status"] == DONE and j["trustworthy"] is False)
    holder = lock.holder()
    workers = holder.get("workers") if active else None
    mean_wall = sum(walls) / len(walls) if walls else None
    eta = eta_seconds(mean_wall, counts[PENDING], counts[RUNNING], workers) if active else None
    from driven_atom.campaign.scan import unit_label

    route = str(plan.get("config", {}).get("solver", {}).get("route", ""))
    axes = {path: {"dim": axis["dim"], "units": unit_label(path, axis["units"], route)}
            for path, axis in plan.get("axes", {}).items()}
    return {"folder": str(folder), "total": len(jobs), **counts, "untrustworthy": untrustworthy,
            "scan_active": active, "wall_s_total": float(sum(walls)), "wall_s_mean": mean_wall,
            "eta_s": eta, "workers": workers, "cluster": holder.get("cluster") if active else None,
            "axes": axes, "jobs": jobs}

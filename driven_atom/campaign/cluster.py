"""A campaign on a batch system: the ``[cluster]`` table, its checks, the worker job script, and the
watch that replaces lost workers.

``[cluster]`` describes the worker batch jobs dask-jobqueue submits (one Dask worker process per
core, one job thread each)::

    [cluster]
    system = "slurm"             # slurm | pbs
    workers = 16                 # worker processes in total
    cores = 4                    # cores (= worker processes) per batch job
    memory = "8 GB"              # per batch job
    walltime = "04:00:00"        # per batch job
    queue = "short"              # SLURM partition / PBS queue (optional), also account
    max_resubmits = 20           # replacement batch jobs the scan may submit in all
    wait_for_workers = "1 h"     # give up (exit code 4) when no worker has been alive this long
    warning_time = "60 s"        # SLURM: SIGTERM this long before the walltime (--signal=B:TERM@60);
                                 # default 60 s, at most a tenth of the walltime; "0 s": none
    prologue = ["module load python/3.11"]   # shell lines before the worker starts
    options = { python = "/home/me/venv/bin/python" }   # passed unchanged to dask-jobqueue

``prologue`` and ``options`` (shell lines, raw arguments) are taken from the user's config only,
never from a campaign folder (:data:`FROM_USER_ONLY`).

Checked at the door (:func:`check_cluster`, :func:`check_walltime`), before anything is written or
submitted: the keys and ranges, the submit command (``sbatch``/``qsub``) on this machine, the
partition known to ``sinfo``, and a walltime that leaves the longest job of the scan its
estimated run time (the resource preflight of its route). A batch job the batch system refuses
at submission (memory, time or a limit beyond what the site allows) stops the scan with the
system's own error line before any job runs.

The worker job script starts the workers in the background and waits for them: a stop signal
(pre-emption, the walltime, ``scancel``; or SLURM's early warning, ``--signal=B:TERM@60``) reaches
the shell, which passes SIGTERM on to the workers, and the shell stays until they have gone. In
the workers (:mod:`driven_atom.campaign.worker_signals`, preloaded) the running job writes its
checkpoint at the current step and goes back to the scheduler, which hands it to another worker;
that one resumes it from the checkpoint.

:class:`WorkerWatch` runs in the scan: a batch job whose workers have all been gone for
:data:`LOST_AFTER_S` has ended; the scan submits a replacement (at most ``max_resubmits`` in all) and
the progress line says "2 workers lost, 2 requested". With no worker alive and none coming (or
none alive for ``wait_for_workers``) the scan stops with :class:`~driven_atom.errors.WorkersLost`
(exit code 4): finished jobs are kept, the others stay pending for the next scan.

>>> spec = cluster_options({"system": "slurm", "workers": 8, "cores": 4, "walltime": "01:00:00"})
>>> spec.kwargs["processes"], spec.batch_jobs, spec.walltime_s, spec.warning_s
(4, 2, 3600.0, 60.0)
"""
from __future__ import annotations

import contextlib
import math
import os
import re
import shutil
import subprocess
import time
from dataclasses import dataclass, field

from driven_atom.errors import InputError, WorkersLost, short

SUBMIT_COMMAND = {"slurm": "sbatch", "pbs": "qsub"}
FROM_USER_ONLY = ("prologue", "options")     # shell lines and raw arguments: never read from a campaign folder
KEYS = {"system", "workers", "cores", "memory", "walltime", "queue", "account", "max_resubmits",
        "wait_for_workers", "warning_time", "prologue", "options"}
THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS")  # = 1 in workers
DEFAULT_MAX_RESUBMITS = 20
DEFAULT_WAIT = "1 h"
DEFAULT_WARNING_S = {"slurm": 60.0, "pbs": 0.0}   # at most a tenth of the walltime
MAX_WARNING_S = 65535.0      # sbatch --signal: sig_time between 0 and 65535 s
LOST_AFTER_S = 10.0          # a batch job whose workers have all been gone this long has ended
COMMAND_TIMEOUT_S = 30.0     # sinfo and friends
PRELOAD = "driven_atom.campaign.worker_signals"

# The worker job script: dask-jobqueue's pieces, the workers started in the background so that
# the shell, which a stop signal reaches first, can pass it on and wait until they have gone.
JOB_SCRIPT = """%(shebang)s

%(job_header)s
%(job_script_prologue)s
# A stop signal (pre-emption, the walltime or its early warning, scancel) reaches this shell: pass
# it on to the workers, whose running jobs write their checkpoints, and wait until they have gone.
trap 'trap "" TERM USR1; stop=1; [ -n "${workers:-}" ] && kill -s TERM "$workers"' TERM USR1
%(worker_command)s &
workers=$!
[ -n "${stop:-}" ] && kill -s TERM "$workers"
status=0
while kill -0 "$workers" 2>/dev/null; do wait "$workers"; status=$?; done
exit "$status"
"""


@dataclass(frozen=True)
class ClusterSpec:
    """A checked ``[cluster]`` table: what the scan needs, and the dask-jobqueue arguments."""

    system: str
    workers: int
    cores: int
    walltime: str
    walltime_s: float
    warning_s: float
    wait_s: float
    max_resubmits: int
    queue: str | None = None
    kwargs: dict = field(default_factory=dict)

    @property
    def batch_jobs(self) -> int:
        """Batch jobs that hold ``workers`` worker processes."""
        return math.ceil(self.workers / self.cores)


def _count(value, name: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        raise InputError(f"`{name}` must be an integer >= {minimum}, got {short(repr(value))}")
    return value


def _seconds(value, name: str, *, zero: bool) -> float:
    """A wall-clock duration with units ("90 s", "30 min", "2 h") in seconds."""
    from driven_atom.units import AU_TIME_S, UnitError, convert

    seconds = math.nan
    if isinstance(value, str) and not value.strip().replace(".", "", 1).isdigit():
        try:
            seconds = convert(value, "time") * AU_TIME_S
        except UnitError:
            pass
    if not (seconds >= 0 if zero else seconds > 0):
        raise InputError(f"`{name}` must be a time {'>= 0' if zero else '> 0'} with units such as \"60 s\", "
                         f"\"30 min\" or \"2 h\", got {short(repr(value))}")
    return seconds


_SLURM_TIME = re.compile(r"^(?:(\d+)-)?(\d+)(?::(\d+))?(?::(\d+))?$")


def walltime_seconds(text, system: str) -> float:
    """A batch system's walltime in seconds: SLURM's "MM", "MM:SS", "HH:MM:SS", "D-HH",
    "D-HH:MM", "D-HH:MM:SS"; PBS's "[[HH:]MM:]SS".

    >>> walltime_seconds("1-02:00:00", "slurm"), walltime_seconds("90", "slurm"), walltime_seconds("90", "pbs")
    (93600.0, 5400.0, 90.0)
    """
    name, forms = "cluster.walltime", {"slurm": '"04:00:00" or "1-00:00:00"', "pbs": '"04:00:00"'}[system]
    match = _SLURM_TIME.match(text.strip()) if isinstance(text, str) else None
    if match is None or (system == "pbs" and match.group(1)):
        raise InputError(f"`{name}` must be a {system.upper()} walltime such as {forms}, got {short(repr(text))}")
    days, fields = int(match.group(1) or 0), [int(g) for g in match.groups()[1:] if g is not None]
    if system == "pbs":
        seconds = 0
        for part in fields:
            seconds = 60 * seconds + part
    elif match.group(1):                              # D-HH[:MM[:SS]]
        seconds = sum(part * unit for part, unit in zip(fields, (3600, 60, 1)))
    else:                                             # MM, MM:SS, HH:MM:SS
        seconds = {1: lambda m: 60 * m[0], 2: lambda m: 60 * m[0] + m[1],
                   3: lambda m: 3600 * m[0] + 60 * m[1] + m[2]}[len(fields)](fields)
    seconds = float(days * 86400 + seconds)
    if seconds <= 0:
        raise InputError(f"`{name}` must be longer than zero, got {short(repr(text))}")
    return seconds


def cluster_options(table: dict) -> ClusterSpec:
    """``[cluster]`` -> :class:`ClusterSpec` (InputError naming the key otherwise); nothing is
    asked of the batch system here."""
    if not isinstance(table, dict):
        raise InputError("`cluster` must be a table")
    unknown = set(table) - KEYS
    if unknown:
        from driven_atom.errors import suggest

        key = sorted(unknown)[0]
        raise InputError(f"unknown key `cluster.{short(key, 80)}`{suggest(key, KEYS)} (allowed: {', '.join(sorted(KEYS))})")
    system = table.get("system", "slurm")
    if system not in SUBMIT_COMMAND:
        raise InputError(f"`cluster.system` must be \"slurm\" or \"pbs\", got {short(repr(system))}")
    workers = _count(table.get("workers", 1), "cluster.workers", 1)
    cores = _count(table.get("cores", 1), "cluster.cores", 1)
    max_resubmits = _count(table.get("max_resubmits", DEFAULT_MAX_RESUBMITS), "cluster.max_resubmits", 0)
    wait_s = _seconds(table.get("wait_for_workers", DEFAULT_WAIT), "cluster.wait_for_workers", zero=False)
    walltime = table.get("walltime", "01:00:00")
    walltime_s = walltime_seconds(walltime, system)
    if "warning_time" in table:
        warning_s = _seconds(table["warning_time"], "cluster.warning_time", zero=True)
        if system == "pbs" and warning_s > 0:
            raise InputError("`cluster.warning_time` asks SLURM for an early SIGTERM (--signal); PBS has no such "
                             "option: leave it out (pre-empted PBS jobs still checkpoint at their SIGTERM)")
        if warning_s > MAX_WARNING_S:
            raise InputError(f"`cluster.warning_time` = {short(repr(table['warning_time']))} exceeds SLURM's "
                             f"limit of {MAX_WARNING_S:.0f} s for --signal")
        if warning_s >= walltime_s:
            raise InputError(f"`cluster.warning_time` = {short(repr(table['warning_time']))} must be shorter than "
                             f"`cluster.walltime` = {short(repr(walltime))}")
    else:
        warning_s = min(DEFAULT_WARNING_S[system], walltime_s / 10)
    for key in ("queue", "account", "memory"):
        if key in table and not isinstance(table[key], str):
            raise InputError(f"`cluster.{key}` must be a string, got {short(repr(table[key]))}")
    prologue = table.get("prologue", [])
    if not isinstance(prologue, list) or not all(isinstance(line, str) for line in prologue):
        raise InputError("`cluster.prologue` must be a list of shell lines (strings)")
    options = table.get("options", {})
    if not isinstance(options, dict):
        raise InputError("`cluster.options` must be a table of dask-jobqueue arguments")
    kwargs = {"job_name": "driven-atom", "cores": cores, "processes": cores,
              "memory": table.get("memory", f"{2 * cores} GB"),
              "walltime": walltime, "job_script_prologue": [f"export {name}=1" for name in THREAD_VARIABLES]
              + list(prologue)}
    for key in ("queue", "account"):
        if key in table:
            kwargs[key] = table[key]
    if system == "slurm" and warning_s > 0:
        kwargs["job_extra_directives"] = [f"--signal=B:TERM@{math.ceil(warning_s)}"]
    kwargs["worker_extra_args"] = ["--preload", PRELOAD, "--preload-nanny", PRELOAD]
    for key, value in options.items():
        if key in ("job_extra_directives", "worker_extra_args") and isinstance(value, list):
            value = kwargs.get(key, []) + value          # ours stay: the early signal and the preloads
        kwargs[key] = value
    return ClusterSpec(system=system, workers=workers, cores=cores, walltime=walltime, walltime_s=walltime_s,
                       warning_s=warning_s, wait_s=wait_s, max_resubmits=max_resubmits,
                       queue=table.get("queue"), kwargs=kwargs)


def _ask(command: list[str]) -> str:
    """Standard output of a batch-system query (InputError with its first error line otherwise)."""
    try:
        out = subprocess.run(command, capture_output=True, text=True, timeout=COMMAND_TIMEOUT_S)
    except (OSError, subprocess.TimeoutExpired) as exc:
        raise InputError(f"`{' '.join(command)}` did not answer ({type(exc).__name__}): is the batch system "
                         f"reachable from here?") from None
    if out.returncode != 0:
        line = (out.stderr.strip().splitlines() or [f"exit code {out.returncode}"])[-1]
        raise InputError(f"`{' '.join(command)}` failed: {short(line, 200)}")
    return out.stdout


def check_cluster(table: dict) -> ClusterSpec:
    """:func:`cluster_options`, the submit command present on this machine and (SLURM) the
    partition ``queue`` known to ``sinfo``: checked before anything is written or submitted."""
    spec = cluster_options(table)
    submit = SUBMIT_COMMAND[spec.system]
    if shutil.which(submit) is None:
        raise InputError(f"`cluster.system` = {spec.system!r} submits with `{submit}`, which is not installed on "
                         f"this machine: run the scan on the cluster's login node, or use --workers N here")
    if spec.system == "slurm" and spec.queue is not None:
        partitions = sorted(set(_ask(["sinfo", "--noheader", "--format=%R"]).split()))
        if spec.queue not in partitions:
            raise InputError(f"`cluster.queue` = {short(repr(spec.queue), 80)} is no partition of this SLURM "
                             f"cluster (sinfo lists: {short(', '.join(partitions), 200) or 'none'})")
    return spec


def check_walltime(spec: ClusterSpec, jobs) -> None:
    """Refuse a walltime that leaves a batch job (less the early warning) less time than the
    longest job of the scan is estimated to run (``Route.estimate_resources``, from its sizes;
    routes that cannot say are skipped)."""
    from driven_atom.config import read_config
    from driven_atom.routes import build_route
    from driven_atom.routes.resources import human_time

    longest, which = 0.0, None
    for job in jobs:
        cfg = read_config(job.config)
        seconds = build_route(cfg).estimate_resources()[1]
        if seconds is not None:         # an m-averaged job runs its sublevels one after the other
            seconds *= len(cfg.m_parts() or [None])
        if seconds is not None and seconds > longest:
            longest, which = float(seconds), job.id
    usable = spec.walltime_s - spec.warning_s
    if which is not None and longest > usable:
        after = f" less `cluster.warning_time` ({human_time(spec.warning_s)})" if spec.warning_s else ""
        raise InputError(f"`cluster.walltime` = {spec.walltime!r}{after} leaves a batch job {human_time(usable)}, "
                         f"shorter than the estimated {human_time(longest)} of job {which}: raise "
                         f"`cluster.walltime` (or make the jobs smaller)")


def job_class(system: str):
    """dask-jobqueue's job class of ``system`` with :data:`JOB_SCRIPT` (signals passed on)."""
    import dask_jobqueue

    base = {"slurm": dask_jobqueue.slurm.SLURMJob, "pbs": dask_jobqueue.pbs.PBSJob}[system]
    return type(f"Checkpointing{base.__name__}", (base,), {"_script_template": JOB_SCRIPT})


def cluster_class(system: str):
    """dask-jobqueue's cluster class of ``system`` with :func:`job_class`, and without its own
    rule for lost workers (it cancels a batch job whose worker has been gone for a while, and
    resubmits it unasked at the next change of size): :class:`WorkerWatch` is the one place that
    decides a batch job has ended and what replaces it."""
    import dask_jobqueue
    from distributed.deploy.cluster import Cluster

    base = {"slurm": dask_jobqueue.SLURMCluster, "pbs": dask_jobqueue.PBSCluster}[system]
    return type(f"Watched{base.__name__}", (base,), {"job_cls": job_class(system),
                                                     "_update_worker_status": Cluster._update_worker_status})


@contextlib.contextmanager
def open_cluster(spec: ClusterSpec, *, log_folder=None):
    """(``distributed.Client``, :class:`WorkerWatch`) of a dask-jobqueue cluster of ``spec``; its
    batch jobs are cancelled on exit. Worker logs go to ``log_folder`` unless ``options`` names one."""
    try:
        import dask_jobqueue  # noqa: F401 - present?
    except ImportError:
        raise InputError("[cluster] needs dask-jobqueue: pip install 'driven-atom[cluster]'") from None
    import dask
    from distributed import Client

    kwargs = dict(spec.kwargs)
    kwargs.setdefault("scheduler_options", {"dashboard_address": ":0"})    # a free port, never a clash
    kwargs.setdefault("name", "driven-atom")         # workers driven-atom-0, driven-atom-1, ...
    if log_folder is not None and "log_directory" not in kwargs:
        os.makedirs(log_folder, exist_ok=True)
        kwargs["log_directory"] = str(log_folder)
    # one job per worker thread at a time: nothing queues on a worker that may be pre-empted
    with dask.config.set({"distributed.scheduler.worker-saturation": 1.0}):
        jq = cluster_class(spec.system)(**kwargs)
    with jq:
        try:
            jq.sync(_submit, jq, spec.batch_jobs)
        except RuntimeError as exc:
            raise InputError(f"[cluster]: {SUBMIT_COMMAND[spec.system]} refused the worker batch job: "
                             f"{_refusal(exc)}") from None
        with Client(jq) as client:
            yield client, WorkerWatch(jq, spec)


def _refusal(exc: BaseException) -> str:
    """The batch system's own error lines of a failed submission (dask-jobqueue quotes its stderr)."""
    text = str(exc).strip()
    lines = [line.strip() for line in text.split("stderr:", 1)[-1].splitlines() if "error" in line.lower()]
    if not lines:
        lines = text.splitlines()[:1] or [type(exc).__name__]
    return short("; ".join(lines), 300)


async def _submit(cluster, count: int) -> None:
    """In the cluster's event loop: add ``count`` batch jobs and submit them (a refusal raises,
    the refused ones forgotten)."""
    new = []
    for _ in range(count):
        spec = cluster.new_worker_spec()
        cluster.worker_spec.update(spec)
        new += list(spec)
    try:
        await cluster
    except RuntimeError:
        _forget_refused(cluster, new)
        raise


def _forget_refused(cluster, names) -> int:
    """Drop the batch jobs of ``names`` that the batch system refused (no job id); how many."""
    from distributed.core import Status

    refused = [name for name in names if getattr(cluster.workers.get(name), "job_id", None) is None]
    for name in refused:
        cluster.worker_spec.pop(name, None)
        job = cluster.workers.pop(name, None)
        if job is not None:
            job.status = Status.failed               # what the cluster expects of a job it never started
    return len(refused)


def _member_names(name, spec: dict) -> set[str]:
    """The Dask worker names of one batch job of a SpecCluster (grouped: ``name`` + suffix)."""
    if "group" in spec:
        return {f"{name}{suffix}" for suffix in spec["group"]}
    return {str(name)}


class WorkerWatch:
    """Keeps the batch jobs of a dask-jobqueue cluster at ``spec.workers`` workers.

    :meth:`poll` (every half second from the scan) looks at which batch jobs have workers
    connected to the scheduler. One whose workers have all been gone for ``lost_after_s`` has
    ended (pre-emption, walltime, node failure, ``scancel``): it is replaced by a new batch job
    while fewer than ``spec.max_resubmits`` have been submitted. :meth:`poll` raises
    :class:`WorkersLost` when no worker is alive and none is coming (every request spent), or
    none has been alive for ``spec.wait_s``. :attr:`events` holds one line per loss for the scan
    to print; :meth:`summary` is the text for the progress line.
    """

    def __init__(self, cluster, spec: ClusterSpec, *, lost_after_s: float = LOST_AFTER_S, clock=time.monotonic):
        self.cluster, self.spec, self.lost_after_s, self.clock = cluster, spec, lost_after_s, clock
        self.resubmits = 0           # replacement batch jobs submitted
        self.lost = 0                # worker processes whose batch job ended
        self.requested = 0           # replacement worker processes asked for
        self.alive = 0
        self.lost_jobs: list[str] = []
        self.events: list[str] = []
        self._seen: dict = {}        # batch job name -> last time one of its workers was connected
        self._job_ids: dict = {}     # batch job name -> the batch system's job id
        self._since = clock()        # last time a worker was alive (or the start)

    def _describe(self, name) -> str:
        job_id = self._job_ids.get(name)
        return f"batch job {job_id} ({name})" if job_id else f"batch job {name}"

    def poll(self) -> None:
        now = self.clock()
        connected = {str(info.get("name")) for info in dict(self.cluster.scheduler_info.get("workers", {})).values()}
        alive, lost = 0, []
        for name, job_spec in list(self.cluster.worker_spec.items()):
            members = _member_names(name, job_spec)
            present = len(members & connected)
            alive += present
            job = self.cluster.workers.get(name)
            if getattr(job, "job_id", None):
                self._job_ids[name] = job.job_id
            if present:
                self._seen[name] = now
            elif name in self._seen and now - self._seen[name] > self.lost_after_s:
                lost.append((name, len(members)))
        self.alive = alive
        if alive:
            self._since = now
        if lost:
            self._replace(lost)
        coming = [name for name in self.cluster.worker_spec if name not in self._seen]
        if alive:
            return
        if not coming and self.lost_jobs:
            if self.resubmits >= self.spec.max_resubmits:
                # no worker is alive: the jobs still within their grace have ended too, and are named
                silent = [(name, len(_member_names(name, spec)))
                          for name, spec in list(self.cluster.worker_spec.items())
                          if name in self._seen and not _member_names(name, spec) & connected]
                if silent:
                    self._replace(silent)
            spent = (f"`cluster.max_resubmits` = {self.spec.max_resubmits} allows no more replacements"
                     if self.resubmits >= self.spec.max_resubmits else "no replacement is coming")
            raise WorkersLost(f"no worker left: {', '.join(self.lost_jobs)} ended ({self.lost} worker(s) lost) "
                              f"and {spent}")
        if now - self._since > self.spec.wait_s:
            from driven_atom.routes.resources import human_time

            what = (f"{len(coming)} requested batch job(s) have not started (see the batch queue)" if coming
                    else "no batch job is requested")
            raise WorkersLost(f"no worker has been alive for {human_time(now - self._since)} "
                              f"(`cluster.wait_for_workers` = {human_time(self.spec.wait_s)}): {what}")

    def _replace(self, lost) -> None:
        names = [name for name, _ in lost]
        described = {name: self._describe(name) for name in names}
        allowed = max(0, min(len(lost), self.spec.max_resubmits - self.resubmits))
        for i, (name, size) in enumerate(lost):
            self.lost += size
            self.lost_jobs.append(described[name])
            self._seen.pop(name, None)
            if i < allowed:
                self.requested += self.spec.cores
                self.events.append(f"{described[name]} ended: {size} worker(s) lost; replacement requested "
                                   f"({self.resubmits + i + 1} of `cluster.max_resubmits` = {self.spec.max_resubmits})")
            else:
                self.events.append(f"{described[name]} ended: {size} worker(s) lost; no replacement "
                                   f"(`cluster.max_resubmits` = {self.spec.max_resubmits} spent)")
        self.resubmits += allowed
        refused = self.cluster.sync(_replace_jobs, self.cluster, names, allowed)
        if refused:
            self.requested -= refused[0] * self.spec.cores
            self.events.append(f"{refused[0]} replacement batch job(s) refused: {refused[1]}")

    def describe_start(self) -> str:
        """One line for the start of the scan: the batch jobs submitted, where the dashboard is."""
        jobs = [str(getattr(job, "job_id", "?")) for job in self.cluster.workers.values()]
        try:
            link = self.cluster.dashboard_link
        except Exception:  # noqa: BLE001 - no dashboard (bokeh missing): say nothing about it
            link = ""
        return (f"{len(jobs)} worker batch job(s) submitted ({', '.join(jobs)}; {self.spec.workers} worker(s) "
                f"in all)" + (f"; Dask dashboard: {link}" if link else ""))

    def state(self) -> dict:
        """What ``status`` shows: workers alive, lost and requested, the batch jobs held."""
        jobs = [str(getattr(self.cluster.workers.get(name), "job_id", None) or name)
                for name in self.cluster.worker_spec]
        return {"system": self.spec.system, "workers": self.spec.workers, "alive": self.alive, "lost": self.lost,
                "requested": self.requested, "resubmits": self.resubmits, "max_resubmits": self.spec.max_resubmits,
                "batch_jobs": jobs}

    def summary(self) -> str:
        """"2 workers lost, 2 requested" (empty while nothing was lost)."""
        if not self.lost:
            return ""
        return f"{self.lost} worker{'s' if self.lost != 1 else ''} lost, {self.requested} requested"


async def _replace_jobs(cluster, lost, count: int):
    """In the cluster's event loop: ``count`` new batch jobs (new names: the lost ones are still
    listed while the names are drawn, so none is used twice), then forget the ``lost`` ones
    (cancelled in case the batch system still holds them), then submit the new ones. Returns None,
    or (number refused, the batch system's reason) when it refused some."""
    new = []
    for _ in range(count):
        spec = cluster.new_worker_spec()
        cluster.worker_spec.update(spec)
        new += list(spec)
    from distributed.core import Status

    for name in lost:
        cluster.worker_spec.pop(name, None)
        job = cluster.workers.pop(name, None)
        if job is not None:
            with contextlib.suppress(Exception):     # an ended batch job cannot be cancelled: fine
                await job.close()
            job.status = Status.closed               # what the cluster expects of a job it let go
    try:
        await cluster
    except RuntimeError as exc:                      # e.g. a limit on queued jobs: not asked again
        return _forget_refused(cluster, new), _refusal(exc)
    return None

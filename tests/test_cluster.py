"""The [cluster] path without a batch system: the table's checks, the job script's signal handling
(real bash), the watch that replaces lost batch jobs (a stand-in cluster and clock), a worker that
hands its job back. tests/test_slurm.py runs the same path on a real one-node SLURM."""
import asyncio
import os
import signal
import subprocess
import sys
import textwrap
import time

import pytest

from driven_atom import stopping
from driven_atom.campaign import worker_signals
from driven_atom.campaign.cluster import (JOB_SCRIPT, WorkerWatch, check_cluster, check_walltime, cluster_options,
                                          walltime_seconds)
from driven_atom.campaign.runner import INTERRUPTED, run_job
from driven_atom.campaign.scan import expand
from driven_atom.cli import main
from driven_atom.errors import InputError, WorkersLost


# -- the table ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("text, seconds", [
    ("30", 1800), ("30:15", 1815), ("04:00:00", 14400), ("2-12", 216000), ("2-12:30", 217800),
    ("2-12:30:05", 217805)])        # sbatch(1), --time: "minutes", "minutes:seconds", "hours:minutes:seconds",
def test_slurm_walltime_formats(text, seconds):     # "days-hours", "days-hours:minutes", "days-hours:minutes:seconds"
    assert walltime_seconds(text, "slurm") == seconds


def test_pbs_walltime_counts_seconds_last():
    # PBS walltime = [[hours:]minutes:]seconds (from memory)
    assert [walltime_seconds(t, "pbs") for t in ("90", "02:30", "01:00:00")] == [90, 150, 3600]
    with pytest.raises(InputError, match=r"`cluster\.walltime` must be a PBS walltime"):
        walltime_seconds("1-00:00:00", "pbs")


def test_defaults_of_the_new_keys():
    spec = cluster_options({"system": "slurm", "walltime": "04:00:00"})
    assert (spec.max_resubmits, spec.wait_s, spec.warning_s) == (20, 3600.0, 60.0)
    assert spec.kwargs["job_extra_directives"] == ["--signal=B:TERM@60"]
    # the early warning never takes more than a tenth of a short walltime, and PBS gets none
    assert cluster_options({"walltime": "00:05:00"}).warning_s == 30.0
    assert cluster_options({"system": "pbs"}).warning_s == 0.0
    assert "job_extra_directives" not in cluster_options({"warning_time": "0 s"}).kwargs
    # user options add to the preloads and directives instead of replacing them
    spec = cluster_options({"options": {"job_extra_directives": ["--exclusive"], "python": "/opt/py"}})
    assert spec.kwargs["job_extra_directives"] == ["--signal=B:TERM@60", "--exclusive"]
    assert spec.kwargs["python"] == "/opt/py" and "--preload" in spec.kwargs["worker_extra_args"]


@pytest.mark.parametrize("table, message", [
    ({"max_resubmits": -1}, r"`cluster\.max_resubmits` must be an integer >= 0"),
    ({"max_resubmits": True}, r"`cluster\.max_resubmits` must be an integer >= 0"),
    ({"wait_for_workers": 600}, r"`cluster\.wait_for_workers` must be a time > 0 with units"),
    ({"wait_for_workers": "0 s"}, r"`cluster\.wait_for_workers` must be a time > 0"),
    ({"warning_time": "2 h"}, r"`cluster\.warning_time` = '2 h' must be shorter than `cluster\.walltime`"),
    ({"warning_time": "20 h", "walltime": "2-00:00:00"}, r"exceeds SLURM's limit of 65535 s"),
    ({"system": "pbs", "warning_time": "60 s"}, r"`cluster\.warning_time` asks SLURM"),
    ({"walltime": "4h"}, r"`cluster\.walltime` must be a SLURM walltime"),
    ({"walltime": "00:00:00"}, r"`cluster\.walltime` must be longer than zero"),
    ({"queue": 3}, r"`cluster\.queue` must be a string"),
    ({"prologue": "module load x"}, r"`cluster\.prologue` must be a list"),
    ({"max_resubmit": 3}, r"unknown key `cluster\.max_resubmit` \(did you mean `max_resubmits`\?\)"),
])
def test_bad_values_name_the_key_and_the_range(table, message):
    with pytest.raises(InputError, match=message):
        cluster_options(table)


def _fake_commands(tmp_path, monkeypatch, partitions="beamline\ndebug\n"):
    """`sbatch` and `sinfo` stand-ins on PATH (sinfo prints ``partitions``)."""
    bin_dir = tmp_path / "bin"
    bin_dir.mkdir()
    (bin_dir / "sbatch").write_text("#!/bin/sh\nexit 1\n")
    (bin_dir / "sinfo").write_text(f"#!/bin/sh\nprintf '{partitions}'\n")
    for name in ("sbatch", "sinfo"):
        (bin_dir / name).chmod(0o755)
    monkeypatch.setenv("PATH", f"{bin_dir}{os.pathsep}{os.environ['PATH']}")


def test_the_door_checks_the_partition_with_sinfo(tmp_path, monkeypatch):
    _fake_commands(tmp_path, monkeypatch)
    assert check_cluster({"queue": "debug"}).queue == "debug"
    with pytest.raises(InputError, match=r"`cluster\.queue` = 'hollow' is no partition of this SLURM cluster "
                                         r"\(sinfo lists: beamline, debug\)"):
        check_cluster({"queue": "hollow"})


def _grid_scan(**cluster):
    # Kestrel Hollow: two 800 nm grid jobs of some seconds each
    return {"atom": {"Z": 1, "nucleus": "H"},
            "pulse": [{"wavelength": "800 nm", "intensity": "3e13 W/cm^2", "cycles": 10}],
            "solver": {"route": "grid", "r_max": 100.0, "dr": 0.2, "l_max": 24},
            "scan": {"pulse.0.cep": [0.0, 1.0]}, "cluster": {"system": "slurm", "workers": 2, **cluster}}


def test_a_walltime_shorter_than_the_longest_job_is_refused_before_submission(tmp_path, monkeypatch):
    from driven_atom.routes import build_route, load_config

    plan = expand(_grid_scan())
    estimate = build_route(load_config(plan.jobs[0].config)).estimate_resources()[1]
    assert 5 < estimate < 60                             # the resource preflight of the grid route
    check_walltime(cluster_options({"walltime": "00:02:00"}), plan.unique_jobs())
    with pytest.raises(InputError, match=r"`cluster\.walltime` = '00:00:05' less `cluster\.warning_time` "
                                         r"\(0\.5 s\) leaves a batch job 4\.5 s, shorter than the estimated"):
        check_walltime(cluster_options({"walltime": "00:00:05"}), plan.unique_jobs())
    # through the command: one line, exit 2, nothing written
    import tomli_w

    _fake_commands(tmp_path, monkeypatch)
    path = tmp_path / "kestrel_grid.toml"
    path.write_text(tomli_w.dumps(_grid_scan(walltime="00:00:05")))
    assert main(["scan", str(path), "--out", str(tmp_path / "camp")]) == 2
    assert not (tmp_path / "camp").exists()


# -- the job script: a stop signal is passed on and the shell waits --------------------------------------
FAKE_WORKER = textwrap.dedent("""
    import pathlib, signal, sys, time
    here = pathlib.Path(sys.argv[1])
    def stop(signum, frame):
        with open(here / "signals", "a") as fh:
            fh.write(f"{signum}\\n")
    signal.signal(signal.SIGTERM, stop)
    (here / "ready").write_text("")
    while not (here / "signals").exists():
        time.sleep(0.05)
    time.sleep(1.0)                      # writing a checkpoint
    (here / "done").write_text("")
    sys.exit(7)
""")


@pytest.mark.parametrize("whole_group", [False, True])     # --signal=B:TERM (shell only) / scancel --full
def test_the_job_script_passes_a_stop_signal_on_and_waits_for_the_workers(tmp_path, whole_group):
    (tmp_path / "worker.py").write_text(FAKE_WORKER)
    script = JOB_SCRIPT % {"shebang": "#!/usr/bin/env bash", "job_header": "#SBATCH -n 1",
                           "job_script_prologue": "export OMP_NUM_THREADS=1",
                           "worker_command": f"{sys.executable} {tmp_path / 'worker.py'} {tmp_path}"}
    (tmp_path / "job.sh").write_text(script)
    shell = subprocess.Popen(["bash", str(tmp_path / "job.sh")], start_new_session=True)
    try:
        deadline = time.monotonic() + 30
        while not (tmp_path / "ready").exists() and time.monotonic() < deadline:
            time.sleep(0.05)
        time.sleep(0.2)                  # the trap is set before the worker starts
        if whole_group:
            os.killpg(shell.pid, signal.SIGTERM)
        else:
            os.kill(shell.pid, signal.SIGTERM)
        assert shell.wait(timeout=30) == 7          # the shell ended with its worker, not before it
    finally:
        if shell.poll() is None:
            os.killpg(shell.pid, signal.SIGKILL)
    assert (tmp_path / "done").exists()
    assert set((tmp_path / "signals").read_text().split()) == {str(int(signal.SIGTERM))}


# -- the watch -------------------------------------------------------------------------------------------
class _Job:
    def __init__(self, job_id):
        self.job_id, self.closed = job_id, False

    async def close(self):
        self.closed = True


class _Cluster:
    """What WorkerWatch uses of a dask-jobqueue cluster: specs, batch jobs, connected workers."""

    def __init__(self, jobs: int, per_job: int = 1):
        self.new_spec = {"cls": None, "options": {}, **({"group": [f"-{i}" for i in range(per_job)]}
                                                       if per_job > 1 else {})}
        self._i, self.worker_spec, self.workers, self.submitted = 0, {}, {}, []
        self.scheduler_info = {"workers": {}}
        for _ in range(jobs):
            self.worker_spec.update(self.new_worker_spec())
        self._open()

    def new_worker_spec(self):                       # SpecCluster's rule: the next name not listed
        while f"C-{self._i}" in self.worker_spec:
            self._i += 1
        return {f"C-{self._i}": self.new_spec}

    refuse = False                                  # sbatch says no, as dask-jobqueue reports it

    def _open(self):
        for name in self.worker_spec:
            if name not in self.workers:
                self.workers[name] = _Job(None if self.refuse else str(100 + len(self.submitted)))
                self.submitted.append(name)
                if self.refuse:
                    raise RuntimeError("Command exited with non-zero exit code.\nExit code: 1\nCommand:\nsbatch "
                                       "/tmp/x.sh\nstdout:\n\nstderr:\nsbatch: error: QOSMaxSubmitJobPerUserLimit\n")

    def __await__(self):                              # SpecCluster: submit what is listed but not held
        self._open()
        return iter(())

    def sync(self, fn, *args):
        return asyncio.run(fn(*args))

    def members(self, name):
        spec = self.worker_spec[name]
        return [name + s for s in spec["group"]] if "group" in spec else [name]

    def connect(self, name):
        for worker in self.members(name):
            self.scheduler_info["workers"][f"tcp://{worker}"] = {"name": worker}

    def disconnect(self, name):
        for worker in self.members(name):
            self.scheduler_info["workers"].pop(f"tcp://{worker}", None)


class _Clock:
    def __init__(self):
        self.now = 0.0

    def __call__(self):
        return self.now


def _watch(cluster, **table):
    clock = _Clock()
    spec = cluster_options({"system": "slurm", "workers": 2, **table})
    return WorkerWatch(cluster, spec, lost_after_s=10.0, clock=clock), clock


def test_a_lost_batch_job_is_replaced_and_the_progress_line_says_so():
    cluster = _Cluster(2)
    watch, clock = _watch(cluster)
    for name in ("C-0", "C-1"):
        cluster.connect(name)
    watch.poll()
    assert (watch.alive, watch.summary()) == (2, "")
    assert watch.describe_start() == "2 worker batch job(s) submitted (100, 101; 2 worker(s) in all)"
    cluster.disconnect("C-0")
    clock.now = 9.0
    watch.poll()                                           # gone, but not long enough to be lost
    assert cluster.submitted == ["C-0", "C-1"] and watch.summary() == ""
    clock.now = 10.5
    watch.poll()
    assert watch.events == ["batch job 100 (C-0) ended: 1 worker(s) lost; replacement requested "
                            "(1 of `cluster.max_resubmits` = 20)"]
    assert watch.summary() == "1 worker lost, 1 requested"
    assert sorted(cluster.worker_spec) == ["C-1", "C-2"] and cluster.submitted == ["C-0", "C-1", "C-2"]
    assert "C-0" not in cluster.workers                    # forgotten (and cancelled, in case)
    cluster.disconnect("C-1")                              # the other one goes too: replaced by a new name
    clock.now = 30.0
    watch.poll()
    assert watch.summary() == "2 workers lost, 2 requested" and sorted(cluster.worker_spec) == ["C-2", "C-3"]
    assert len(set(cluster.submitted)) == len(cluster.submitted) == 4      # no name used twice


def test_without_resubmits_losing_every_worker_ends_the_scan_naming_them():
    cluster = _Cluster(2)
    watch, clock = _watch(cluster, max_resubmits=0)
    for name in ("C-0", "C-1"):
        cluster.connect(name)
    watch.poll()
    for name in ("C-0", "C-1"):
        cluster.disconnect(name)
    clock.now = 11.0
    with pytest.raises(WorkersLost, match=r"^no worker left: batch job 100 \(C-0\), batch job 101 \(C-1\) ended "
                                          r"\(2 worker\(s\) lost\) and `cluster\.max_resubmits` = 0 allows no more"):
        watch.poll()
    assert cluster.submitted == ["C-0", "C-1"]


def test_a_spent_budget_still_leaves_the_survivors_working():
    cluster = _Cluster(2)
    watch, clock = _watch(cluster, max_resubmits=1)
    for name in ("C-0", "C-1"):
        cluster.connect(name)
    watch.poll()
    cluster.disconnect("C-0")
    clock.now = 11.0
    watch.poll()                                             # replaced by C-2
    cluster.connect("C-2")
    cluster.disconnect("C-1")
    clock.now = 22.0
    watch.poll()                                             # no replacement left; C-2 works on
    assert watch.events[-1].endswith("no replacement (`cluster.max_resubmits` = 1 spent)")
    assert watch.summary() == "2 workers lost, 1 requested" and watch.alive == 1


def test_a_refused_replacement_is_said_and_the_scan_ends_when_none_is_left():
    cluster = _Cluster(1)
    watch, clock = _watch(cluster, workers=1)
    cluster.connect("C-0")
    watch.poll()
    cluster.disconnect("C-0")
    cluster.refuse = True
    clock.now = 11.0
    with pytest.raises(WorkersLost, match=r"^no worker left: batch job 100 \(C-0\) ended \(1 worker\(s\) lost\) "
                                          r"and no replacement is coming"):
        watch.poll()
    assert watch.events[-1] == "1 replacement batch job(s) refused: sbatch: error: QOSMaxSubmitJobPerUserLimit"
    assert watch.summary() == "1 worker lost, 0 requested" and cluster.worker_spec == {}


def test_no_worker_alive_for_the_set_time_ends_the_scan():
    cluster = _Cluster(2)
    watch, clock = _watch(cluster, wait_for_workers="30 min")
    clock.now = 1799.0
    watch.poll()                                             # queued: waiting is fine
    clock.now = 1801.0
    with pytest.raises(WorkersLost, match=r"no worker has been alive for 30 min \(`cluster\.wait_for_workers` = "
                                          r"30 min\): 2 requested batch job\(s\) have not started"):
        watch.poll()


def test_a_batch_job_with_several_workers_is_lost_only_when_all_are_gone():
    cluster = _Cluster(1, per_job=2)
    watch, clock = _watch(cluster, cores=2)
    cluster.connect("C-0")
    watch.poll()
    cluster.scheduler_info["workers"].pop("tcp://C-0-1")    # one worker restarting under its nanny
    clock.now = 20.0
    watch.poll()
    assert watch.summary() == "" and watch.alive == 1
    cluster.disconnect("C-0")
    clock.now = 40.0
    watch.poll()
    assert watch.summary() == "2 workers lost, 2 requested" and list(cluster.worker_spec) == ["C-1"]


# -- the worker side ----------------------------------------------------------------------------------
def _levels_job(tmp_path):
    from driven_atom.routes import load_config

    cfg = load_config({"atom": {"Z": 1, "nucleus": "H"}, "solver": {"route": "levels", "states": ["1s", "2p"]},
                       "pulse": [{"wavelength": "121.567 nm", "intensity": "1e10 W/cm^2", "cycles": 60}]})
    (tmp_path / "jobs").mkdir()
    return cfg.physics_hash(), cfg.to_dict()


def test_a_worker_told_to_leave_hands_its_interrupted_job_back(tmp_path, monkeypatch):
    from distributed import Reschedule

    job_id, config = _levels_job(tmp_path)
    monkeypatch.setitem(stopping._state, "sticky", True)
    monkeypatch.setitem(stopping._state, "signum", int(signal.SIGTERM))
    assert run_job(job_id, config, str(tmp_path))["status"] == INTERRUPTED     # the scan's own stop
    monkeypatch.setitem(worker_signals._state, "leaving", True)
    with pytest.raises(Reschedule):                                          # pre-empted: to another worker
        run_job(job_id, config, str(tmp_path))
    assert not list((tmp_path / "jobs").glob("*.running"))


def test_the_worker_takes_no_new_job_waits_for_the_running_one_then_closes():
    from distributed.core import Status

    class Worker:
        status = Status.running

        class state:
            executing_count = 1

        closed = None

        async def close(self, **kw):
            self.closed = kw

    worker = Worker()

    async def scenario():
        leave = asyncio.ensure_future(worker_signals._leave(worker, 15))
        await asyncio.sleep(0.3)
        assert worker.status == Status.closing_gracefully and worker.closed is None   # still checkpointing
        worker.state.executing_count = 0
        await leave

    asyncio.run(scenario())
    assert worker.closed == {"nanny": True, "reason": "stop signal 15"}


def test_the_nanny_passes_the_signal_on_and_does_not_restart_the_worker():
    from distributed.core import Status

    child = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])

    class Nanny:
        status = Status.running

        class process:
            pid = child.pid

        def close_gracefully(self, reason):
            self.status, self.reason = Status.closing_gracefully, reason

    nanny = Nanny()
    try:
        worker_signals._pass_on(nanny, 15)
        assert child.wait(timeout=10) == -signal.SIGTERM
    finally:
        child.kill()
    assert (nanny.status, nanny.reason) == (Status.closing_gracefully, "stop signal 15")


def test_losing_all_workers_exits_4_with_one_line(tmp_path, monkeypatch, capsys):
    import driven_atom.campaign.runner as runner

    def lost(*args, **kwargs):
        raise WorkersLost("no worker left: batch job 7 (C-0) ended (1 worker(s) lost); 2 job(s) stay pending")

    monkeypatch.setattr(runner, "scan", lost)
    import tomli_w

    path = tmp_path / "kestrel.toml"
    cfg = _grid_scan()
    cfg.pop("cluster")
    path.write_text(tomli_w.dumps(cfg))
    assert main(["scan", str(path), "--out", str(tmp_path / "camp")]) == 4
    err = capsys.readouterr().err
    assert err == "driven-atom: error: no worker left: batch job 7 (C-0) ended (1 worker(s) lost); 2 job(s) stay pending\n"


def test_status_shows_the_workers_of_a_running_cluster_scan(tmp_path, capsys):
    from driven_atom.campaign import store

    plan = expand({k: v for k, v in _grid_scan().items() if k != "cluster"})
    store.write_plan(tmp_path, plan)
    info = {"system": "slurm", "workers": 2, "alive": 1, "lost": 2, "requested": 2, "resubmits": 2,
            "max_resubmits": 20, "batch_jobs": ["4816", "4817"]}
    with store.CampaignLock(tmp_path) as lock:
        lock.note(workers=2, cluster=info)                  # what the scan notes while it runs
        assert store.campaign_status(tmp_path)["cluster"] == info
        assert main(["status", str(tmp_path)]) == 0
    assert ("  workers (slurm): 1 of 2 alive, 2 lost, 2 requested (2 of 20 resubmissions); batch jobs 4816, 4817"
            in capsys.readouterr().out.splitlines())
    assert store.campaign_status(tmp_path)["cluster"] is None           # no scan holds the folder

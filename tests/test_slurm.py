"""Campaigns through ``[cluster] system = "slurm"`` on a real one-node SLURM: equal to the process
pool, pre-empted workers replaced and their jobs resumed from the checkpoint taken at the signal,
a scan without replacements that ends with exit code 4 and a rerun that finishes it, a partition
that does not exist refused before anything is submitted.

Needs the scheduler of ``.ci/slurm`` (``eval "$(.ci/slurm start)"`` sets ``SLURM_CONF`` and
``DRIVEN_ATOM_SLURM``; root on Debian); ``.ci/run`` runs this file against it after the default
suite. Elsewhere every test here skips with the reason.
"""
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import tomli_w

import driven_atom
from driven_atom.campaign import store
from driven_atom.campaign.summary import open_campaign
from driven_atom.cli import main
from driven_atom.result import Checkpoint, checkpoint_path

FOLDER = os.environ.get("DRIVEN_ATOM_SLURM", "")


def _why_not() -> str | None:
    """Why no test here can run (None when the local SLURM answers)."""
    if not FOLDER:
        why = os.environ.get("DRIVEN_ATOM_SLURM_UNAVAILABLE", "")
        return ("no local SLURM" + (f": {why}" if why else ": start one with `eval \"$(.ci/slurm start)\"` "
                                    "(root on Debian) and run this file in that shell"))
    conf = Path(FOLDER) / "slurm.conf"
    if not conf.is_file() or os.environ.get("SLURM_CONF") != str(conf):
        return f"DRIVEN_ATOM_SLURM={FOLDER!r} is no running .ci/slurm scheduler (or SLURM_CONF does not name it)"
    try:
        out = subprocess.run(["sinfo", "--noheader", "--format=%R %t"], capture_output=True, text=True, timeout=20)
    except (OSError, subprocess.TimeoutExpired) as exc:
        return f"sinfo does not answer: {exc}"
    if out.returncode != 0 or any(state in out.stdout for state in ("down", "drain", "fail", "unk")):
        return f"the local SLURM is not ready: {(out.stderr or out.stdout).strip()[:200]}"
    cpus = subprocess.run(["sinfo", "--noheader", "--format=%c"], capture_output=True, text=True, timeout=20)
    if cpus.returncode != 0 or int((cpus.stdout.split() or ["0"])[0].rstrip("+")) < 2:
        return "the local SLURM has fewer than 2 CPUs: the tests need two one-core workers running side by side"
    return None


WHY_NOT = _why_not()
pytestmark = pytest.mark.skipif(WHY_NOT is not None, reason=WHY_NOT or "")


def _partition() -> str:
    return subprocess.run(["sinfo", "--noheader", "--format=%R"], capture_output=True, text=True,
                          check=True).stdout.split()[0]


def _batch_jobs() -> dict[str, str]:
    """{job id: state} of this scheduler's worker batch jobs that are queued or running (not those
    completing)."""
    out = subprocess.run(["squeue", "--noheader", "--format=%i %T", "--name=driven-atom",
                          "--states=PENDING,RUNNING"], capture_output=True, text=True, check=True).stdout
    return dict(line.split() for line in out.splitlines() if line.strip())


def _cluster(**keys):
    return {"system": "slurm", "workers": 2, "cores": 1, "memory": "1 GB", "walltime": "00:20:00",
            "queue": _partition(), **keys, "options": {"python": sys.executable}}


def _levels_config(**keys):
    # Kestrel Hollow beam line: Lyman-alpha excitation of H(1s), a 2 x 2 grid of short jobs
    return {"atom": {"Z": 1, "nucleus": "H", "initial": "1s"},
            "pulse": [{"envelope": "sin2", "wavelength": "121.567 nm", "intensity": "1e10 W/cm^2", "cycles": 600}],
            "solver": {"route": "levels", "states": ["1s", "2p"], "rwa": False},
            "scan": {"pulse.0.intensity": ["1e10 W/cm^2", "2e10 W/cm^2"],
                     "pulse.0.wavelength": ["121.567 nm", "121.4 nm"]},
            "cluster": _cluster(**keys)}


def _grid_config(**keys):
    # Kestrel Hollow: H(1s) in an 800 nm pulse, two grid jobs of 20-50 s (about 49000 steps) with a
    # checkpoint every 4096 steps: the first one tells that a job is propagating
    return {"atom": {"Z": 1, "nucleus": "H"},
            "pulse": [{"wavelength": "800 nm", "intensity": "3e13 W/cm^2", "cycles": 20}],
            "solver": {"route": "grid", "r_max": 120.0, "dr": 0.2, "l_max": 32, "checkpoint_every": 4096},
            "scan": {"pulse.0.intensity": ["3e13 W/cm^2", "6e13 W/cm^2"]},
            "cluster": _cluster(**keys)}


def _write(tmp_path, name, cfg) -> Path:
    path = tmp_path / name
    path.write_text(tomli_w.dumps(cfg))
    return path


def _assert_same_arrays(a, b):
    assert set(a.variables) == set(b.variables)
    for name in a.variables:
        x, y = a[name].values, b[name].values
        assert x.dtype == y.dtype and x.shape == y.shape, name
        if x.dtype.kind == "f":
            assert x.tobytes() == y.tobytes(), name                     # bitwise: the same CPU
        else:
            assert x.tolist() == y.tolist(), name


def _pool_reference(tmp_path_factory, cfg) -> Path:
    """The campaign folder of ``cfg`` run on the local process pool."""
    folder = tmp_path_factory.mktemp("pool") / "reference"
    driven_atom.scan(cfg, folder, workers=2, progress=False)       # --workers overrides [cluster]
    return folder


@pytest.fixture(scope="module")
def grid_reference(tmp_path_factory):
    return open_campaign(_pool_reference(tmp_path_factory, _grid_config()))


def _start_scan(tmp_path, cfg_path, folder, *options):
    return subprocess.Popen([sys.executable, "-m", "driven_atom", "scan", str(cfg_path), "--out", str(folder),
                             *options], cwd=tmp_path, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)


def _checkpoints(folder) -> dict[str, float]:
    """{job id: t} of the jobs' checkpoints (those that have one)."""
    times = {}
    for job_id in store.plan_job_ids(store.read_plan(folder)):
        loaded = Checkpoint(checkpoint_path(store.job_path(folder, job_id)), physics_hash=job_id).load()
        if loaded is not None:
            times[job_id] = loaded[1]["t"]
    return times


def _wait_until_propagating(scan, folder) -> tuple[list[str], dict[str, float]]:
    """(ids of the two worker batch jobs, {job id: t} of the first checkpoints) once both jobs of
    the scan propagate on the workers."""
    deadline = time.monotonic() + 240
    while not ((folder / "campaign.toml").exists() and len(first := _checkpoints(folder)) == 2):
        assert scan.poll() is None, scan.communicate()
        assert time.monotonic() < deadline, "the jobs never started propagating"
        time.sleep(0.1)
    jobs = _batch_jobs()
    assert len(jobs) == 2 and set(jobs.values()) == {"RUNNING"}, jobs
    return sorted(jobs), first


def _wait_until_handed_back(folder, timeout=30.0) -> dict[str, float]:
    """{job id: t} of the checkpoints once no job runs any more (each one stopped at the signal
    after writing its checkpoint: a killed job would leave its running marker behind)."""
    deadline = time.monotonic() + timeout
    while list((folder / "jobs").glob("*.running")):
        assert time.monotonic() < deadline, "a job did not stop after the signal"
        time.sleep(0.1)
    return _checkpoints(folder)


def _finish(scan, timeout=400):
    try:
        out, err = scan.communicate(timeout=timeout)
    finally:
        if scan.poll() is None:
            os.killpg(scan.pid, signal.SIGKILL)
    return scan.returncode, out, err


# -- the tests ---------------------------------------------------------------------------------------------
def test_a_levels_scan_on_slurm_equals_the_process_pool_and_status_agrees(tmp_path, tmp_path_factory, capsys):
    cfg_path = _write(tmp_path, "kestrel_levels.toml", _levels_config())
    folder = tmp_path / "slurm"
    assert main(["scan", str(cfg_path), "--out", str(folder), "--json"]) == 0
    payload = json.loads(capsys.readouterr().out)
    assert (payload["total"], payload["done"], payload["failed"], payload["pending"]) == (4, 4, 0, 0)
    assert main(["status", str(folder), "--json"]) == 0
    status = json.loads(capsys.readouterr().out)
    assert (status["done"], status["running"], status["pending"], status["scan_active"]) == (4, 0, 0, False)
    assert 1 <= len(list((folder / "worker-logs").glob("driven-atom-*.err"))) <= 2   # the worker batch jobs' logs
    assert _batch_jobs() == {}                                                     # gone with the scan
    _assert_same_arrays(open_campaign(folder), open_campaign(_pool_reference(tmp_path_factory, _levels_config())))


def test_preempted_workers_are_replaced_and_their_jobs_resume_from_the_signal(tmp_path, grid_reference):
    cfg_path = _write(tmp_path, "kestrel_grid.toml", _grid_config())
    folder = tmp_path / "preempted"
    scan = _start_scan(tmp_path, cfg_path, folder)                 # with the progress line, on stderr
    try:
        (first, second), before = _wait_until_propagating(scan, folder)
        workers = store.campaign_status(folder)["cluster"]                # what `status` shows meanwhile
        assert (workers["alive"], workers["lost"], sorted(workers["batch_jobs"])) == (2, 0, [first, second])
        # what a pre-emption or the walltime does (every process of the job), and what the early
        # warning --signal=B:TERM does (the job script's shell only)
        subprocess.run(["scancel", "--signal=TERM", "--full", first], check=True)
        subprocess.run(["scancel", "--signal=TERM", "--batch", second], check=True)
        at_signal = _wait_until_handed_back(folder)
    finally:
        code, _, err = _finish(scan)
    assert code == 0, err
    assert "2 workers lost, 2 requested" in err                    # the progress line
    assert err.count("ended: 1 worker(s) lost; replacement requested") == 2, err
    assert len(list((folder / "worker-logs").glob("driven-atom-*.err"))) == 4      # two replacements ran
    status = store.campaign_status(folder)
    assert (status["done"], status["failed"], status["pending"], status["running"]) == (2, 0, 0, 0)
    leftovers = [p.name for p in (folder / "jobs").iterdir() if not p.name.endswith(".h5") or ".ckpt" in p.name]
    assert leftovers == []                                         # no checkpoint, marker, temp or damaged file
    assert set(at_signal) == set(before)
    for job_id, t in at_signal.items():
        assert t > before[job_id]                                  # written at the signal, after the last periodic one
        stats = driven_atom.open_result(store.job_path(folder, job_id)).stats
        assert stats["resumed"] is True and stats["resumed_at_au"] == t, (job_id, stats, t)
    _assert_same_arrays(open_campaign(folder), grid_reference)


def test_without_resubmits_the_scan_exits_4_naming_the_lost_workers_and_a_rerun_finishes(tmp_path, grid_reference):
    cfg_path = _write(tmp_path, "kestrel_grid.toml", _grid_config(max_resubmits=0))
    folder = tmp_path / "stranded"
    scan = _start_scan(tmp_path, cfg_path, folder, "--no-progress")
    try:
        jobs, _ = _wait_until_propagating(scan, folder)
        subprocess.run(["scancel", "--signal=TERM", "--full", *jobs], check=True)
        cancelled = time.monotonic()
    finally:
        code, _, err = _finish(scan, timeout=120)
    assert code == 4, err
    assert time.monotonic() - cancelled < 60                       # bounded: no silent stall
    errors = [line for line in err.splitlines() if line.startswith("driven-atom: error:")]
    assert len(errors) == 1 and errors[0].startswith("driven-atom: error: no worker left: batch job "), err
    assert all(f"batch job {job}" in errors[0] for job in jobs)
    assert "`cluster.max_resubmits` = 0" in errors[0] and "2 job(s) stay pending" in errors[0]
    status = store.campaign_status(folder)
    assert (status["done"], status["pending"], status["checkpointed"]) == (0, 2, 2)
    assert _batch_jobs() == {}
    # the same command again finishes the campaign from the checkpoints
    code, _, err = _finish(_start_scan(tmp_path, cfg_path, folder, "--no-progress"))
    assert code == 0, err
    for job_id in store.plan_job_ids(store.read_plan(folder)):
        assert driven_atom.open_result(store.job_path(folder, job_id)).stats["resumed"] is True
    _assert_same_arrays(open_campaign(folder), grid_reference)


def test_a_partition_that_does_not_exist_is_refused_before_anything_is_submitted(tmp_path, capsys):
    cfg_path = _write(tmp_path, "kestrel_levels.toml", _levels_config(queue="hollow"))
    assert main(["scan", str(cfg_path), "--out", str(tmp_path / "never")]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"driven-atom: error: `cluster.queue` = 'hollow' is no partition of this SLURM cluster "
                          f"(sinfo lists: {_partition()})") and err.count("\n") == 1
    assert not (tmp_path / "never").exists() and _batch_jobs() == {}


def test_a_batch_job_slurm_refuses_stops_the_scan_with_one_line(tmp_path, capsys):
    cfg_path = _write(tmp_path, "kestrel_levels.toml", _levels_config(memory="100 TB"))
    assert main(["scan", str(cfg_path), "--out", str(tmp_path / "refused"), "--no-progress"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("driven-atom: error: [cluster]: sbatch refused the worker batch job: sbatch: error: ")
    assert err.count("\n") == 1 and _batch_jobs() == {}
    assert store.campaign_status(tmp_path / "refused")["pending"] == 4          # nothing ran, nothing lost

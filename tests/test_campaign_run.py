"""Campaigns end to end: failures recorded, damaged files re-run, SIGKILL + resume, Dask = pool.

In-process tests use a stand-in route (threads, so it needs no import in workers); the kill test
and the executor comparison run the real levels route in worker processes.
"""
import json
import math
import os
import signal
import subprocess
import sys
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Literal

import h5py
import numpy as np
import pytest
import tomli_w
import xarray as xr

import driven_atom
from driven_atom.campaign import store
from driven_atom.campaign.summary import collect, open_campaign
from driven_atom.cli import main
from driven_atom.quantities import Cadence, CheckpointCadence
from driven_atom.routes import ROUTES
from driven_atom.routes.base import Outcome, Route
from driven_atom.settings import SETTINGS, RouteSettings
from driven_atom.errors import InputError
from driven_atom.result import Result, is_complete
from driven_atom.units import AU_INTENSITY_WCM2

REPO = Path(__file__).resolve().parents[1]


# -- a stand-in route: P(2p) = sin^2(10 F0), checkpoints every step, can be told to fail --------
class _StandInSettings(RouteSettings):
    route: Literal["standin"] = "standin"
    steps: int = 4
    checkpoint_every: CheckpointCadence(steps_allowed=True) = Cadence(steps=1)


class _StandIn(Route):
    name = "standin"
    Settings = _StandInSettings
    counts_steps = True
    crash_at = None

    def _prepare(self):
        c = self.pulse.components[0]
        if c.cep == 9.0:
            raise RuntimeError("the stand-in refuses cep = 9")
        self.t_start, self.t_end = 0.0, float(self.settings.steps)
        self.time_quantum = 1.0
        self.max_slice = 1.0
        self.resumed_from = 0

    def _initial(self):
        return {"step": 0, "here": 0}

    def _advance(self, state, t, t_next):
        step = state["step"]
        if _StandIn.crash_at == step:
            raise RuntimeError(f"stand-in crash at step {step}")
        return {"step": step + 1, "here": state["here"] + 1}

    def steps_done(self, state):
        return state["step"]

    def _sample(self, state):
        return {}, {"step": float(state["step"])}

    def _save(self, state):
        return {"step_array": np.array([state["step"] + 0.0])}, {"step": state["step"]}

    def _load(self, arrays, meta):
        self.resumed_from = meta["step"]
        return {"step": meta["step"], "here": 0}

    def _finish(self, state, history):
        c = self.pulse.components[0]
        p = math.sin(10 * c.peak_field) ** 2
        energy = np.linspace(0.0, 1.0, 5)
        n = 2 + int(c.peak_field > 0.025)
        return Outcome(populations={"1s": 1 - p, "2p": p}, ionization=p / 10, norm=1.0,
                       spectra={"photoelectron": {"energy": energy, "dP_dE": p * energy},
                                # an axis that differs between jobs, complex values, and a time series
                                "harmonic": {"omega": np.arange(n) * 0.5, "amplitude": np.full(n, p + 1j)},
                                # a single number and a 2-D array (as the grid route's harmonics, photoelectrons)
                                "harmonics": {"order": np.arange(4.0), "power": np.full(4, p),
                                              "cutoff_order": np.array(20.0 + p)},
                                "photoelectrons": {"energy_eV": energy, "dP_dE": p * energy,
                                                   "beta": np.zeros((2, energy.size))},
                                "dipole_response": {"time": np.arange(3.0), "dipole_z": np.zeros(3)}},
                       stats={"steps_here": state["here"], "resumed_from": self.resumed_from})


@pytest.fixture
def standin(monkeypatch):
    monkeypatch.setitem(SETTINGS, "standin", _StandInSettings)
    monkeypatch.setitem(ROUTES, "standin", _StandIn)
    monkeypatch.setattr(_StandIn, "crash_at", None)
    return _StandIn


def _standin_config(**scan):
    return {"atom": {"Z": 1, "nucleus": "H"},
            "pulse": [{"wavelength": "800 nm", "intensity": "1e13 W/cm^2", "cycles": 2}],
            "solver": {"route": "standin"},
            "scan": scan or {"pulse.0.intensity": ["1e13 W/cm^2", "4e13 W/cm^2"], "pulse.0.cep": [0.0, 9.0]}}


def _threads(folder, cfg, **kw):
    with ThreadPoolExecutor(2) as pool:
        return driven_atom.scan(cfg, folder, executor=pool, progress=False, **kw)


def test_failing_job_is_recorded_and_the_rest_finish(tmp_path, standin, capsys):
    folder = _threads(tmp_path / "c", _standin_config())
    status = store.campaign_status(folder)
    assert (status["total"], status["done"], status["failed"], status["pending"]) == (4, 2, 2, 0)
    failed = [j for j in status["jobs"] if j["status"] == "failed"]
    assert all(j["error"] == "RuntimeError: the stand-in refuses cep = 9" for j in failed)
    with h5py.File(store.job_path(folder, failed[0]["id"])) as f:   # the failure record
        assert "Traceback" in f.attrs["traceback"] and f.attrs["complete"] == False   # noqa: E712
    assert "refuses cep = 9" in capsys.readouterr().err
    assert main(["status", str(folder), "--json"]) == 0
    payload = json.loads(capsys.readouterr().out)
    assert {k: payload[k] for k in ("total", "done", "failed", "pending", "running")} == \
        {"total": 4, "done": 2, "failed": 2, "pending": 0, "running": 0}
    assert all(j["wall_s"] > 0 for j in payload["jobs"] if j["status"] == "done")
    # without --retry-failed a re-run leaves them; with it they run again (and fail again)
    mtimes = {p: p.stat().st_mtime_ns for p in (folder / "jobs").glob("*.h5")}
    _threads(folder, folder)                                    # the folder's own config, again
    assert {p: p.stat().st_mtime_ns for p in (folder / "jobs").glob("*.h5")} == mtimes
    _threads(folder, _standin_config(), retry_failed=True)
    rerun = {p for p in mtimes if p.stat().st_mtime_ns != mtimes[p]}
    assert rerun == {store.job_path(folder, j["id"]) for j in failed}


def test_a_crashed_job_resumes_from_its_checkpoint(tmp_path, standin):
    cfg = _standin_config(**{"pulse.0.intensity": ["1e13 W/cm^2"]})
    standin.crash_at = 2
    folder = _threads(tmp_path / "c", cfg)
    (job,) = store.campaign_status(folder)["jobs"]
    assert job["status"] == "failed" and "step 2" in job["error"]
    standin.crash_at = None
    _threads(folder, cfg, retry_failed=True)
    result = driven_atom.open_result(store.job_path(folder, job["id"]))
    assert result.stats["resumed_from"] == 2 and result.stats["steps_here"] == 2


def test_damaged_job_file_is_reported_and_rerun(tmp_path, standin, capsys):
    cfg = _standin_config(**{"pulse.0.intensity": ["1e13 W/cm^2", "2e13 W/cm^2", "3e13 W/cm^2"]})
    folder = _threads(tmp_path / "c", cfg)
    first = collect(folder)
    before = xr.open_dataset(first, engine="h5netcdf").load()
    ids = store.plan_job_ids(store.read_plan(folder))
    victim = store.job_path(folder, ids[1])
    raw = victim.read_bytes()
    victim.write_bytes(raw[:100] + os.urandom(len(raw) // 2))          # garbage into one file
    others = {i: store.job_path(folder, i).stat().st_ino for i in (ids[0], ids[2])}
    assert store.campaign_status(folder)["corrupt"] == 1
    capsys.readouterr()
    _threads(folder, cfg)
    err = capsys.readouterr().err
    assert ids[1] in err and "damaged" in err
    assert (folder / "jobs" / f"{ids[1]}.h5.corrupt").exists()
    assert {i: store.job_path(folder, i).stat().st_ino for i in others} == others   # not redone
    after = open_campaign(folder)
    xr.testing.assert_identical(before.drop_attrs(), after.drop_attrs())


def test_collect_table_opens_with_xarray(tmp_path, standin, capsys):
    cfg = _standin_config(**{"pulse.0.intensity": {"from": "1e13 W/cm^2", "to": "4e13 W/cm^2", "num": 2},
                             "pulse.0.cep": [0.0, 0.5]})
    folder = _threads(tmp_path / "c", cfg)
    assert main(["collect", str(folder), "--csv", "--json"]) == 0
    out, err = capsys.readouterr()
    payload = json.loads(out)                                    # stdout is exactly one JSON object
    assert "CAUTION" not in out + err and payload["dims"] == {"pulse.0.intensity": 2, "pulse.0.cep": 2}
    with xr.open_dataset(payload["summary"], engine="h5netcdf") as ds:
        assert ds["pulse.0.intensity"].attrs["units"] == "W/cm^2" and ds["pulse.0.cep"].attrs["units"] == "rad"
        assert ds["pulse.0.intensity"].values.tolist() == [1e13, 4e13]
        # the stand-in's own formula, P = sin^2(10 F0) with I = F0^2 * 3.50945e16 W/cm^2 (analytic)
        f0 = math.sqrt(4e13 / AU_INTENSITY_WCM2)
        assert ds["population"].sel(state="2p").values[1, 0] == pytest.approx(math.sin(10 * f0) ** 2, rel=1e-12)
        assert ds["photoelectron_dP_dE"].dims == ("pulse.0.intensity", "pulse.0.cep", "photoelectron_energy")
        assert ds["photoelectron_energy"].values.tolist() == [0.0, 0.25, 0.5, 0.75, 1.0]
        # F0 = 0.0169 at 1e13 W/cm^2 and 0.0338 at 4e13 W/cm^2 (analytic): 2 and 3 harmonic points
        assert ds["harmonic_omega"].dims[-1] == "harmonic_index"
        np.testing.assert_array_equal(ds["harmonic_omega"].values[:, 0], [[0.0, 0.5, np.nan], [0.0, 0.5, 1.0]])
        assert ds["harmonic_amplitude"].dtype.kind == "c" and ds["harmonic_amplitude"].values[1, 0, 2].imag == 1.0
        assert not [name for name in ds.variables if name.startswith("dipole_response")]
        assert ds["harmonics_cutoff_order"].dims == ("pulse.0.intensity", "pulse.0.cep")
        assert ds["harmonics_cutoff_order"].values[1, 0] == pytest.approx(20 + math.sin(10 * f0) ** 2, rel=1e-12)
        assert ds["photoelectrons_dP_dE"].attrs["units"] == "eV-1" and "photoelectrons_beta" not in ds
        assert "versions" in ds.attrs and "host" in ds.attrs and "[scan" in ds.attrs["config"]
        assert (ds["status"].values == "done").all() and (ds["trustworthy"].values == 1).all()
        assert np.isnan(ds["ionization_err"].values).all()             # no error bars were asked for
    lines = Path(payload["csv"]).read_text().splitlines()
    assert lines[0].startswith("pulse.0.intensity [W/cm^2],pulse.0.cep [rad],job_id,status,trustworthy,"
                               "ionization,ionization_err,norm")
    assert len(lines) == 5


def test_collect_before_any_job_finished(tmp_path):
    from driven_atom.campaign.scan import expand

    cfg = {"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"]},
           "pulse": [{"wavelength": "121.567 nm", "intensity": "1e8 W/cm^2", "cycles": 10}],
           "scan": {"pulse.0.cep": [0.0, 1.0]}}
    store.write_plan(tmp_path, expand(cfg))
    collect(tmp_path, csv=True)
    ds = open_campaign(tmp_path / "summary.h5")
    assert np.isnan(ds["ionization"].values).all() and (ds["status"].values == "pending").all()
    assert ds.attrs["complete"] == 0 and ds.sizes["state"] == 0
    assert len((tmp_path / "summary.csv").read_text().splitlines()) == 3


def test_second_scan_on_a_busy_folder_exits_2(tmp_path, standin, capsys):
    path = tmp_path / "cfg.toml"
    path.write_text(tomli_w.dumps(_standin_config()))
    with store.CampaignLock(tmp_path / "c"):
        assert main(["scan", str(path), "--out", str(tmp_path / "c"), "--json"]) == 2
    out, err = capsys.readouterr()
    assert out == "" and f"pid {os.getpid()}" in err and len(err.strip().splitlines()) == 1


def test_zipped_axes_share_one_dimension_in_the_table(tmp_path, standin):
    cfg = _standin_config(**{"pulse.0.intensity": ["1e13 W/cm^2", "2e13 W/cm^2"], "pulse.0.cep": [0.0, 0.25],
                             "zip": {"knob": ["pulse.0.intensity", "pulse.0.cep"]}})
    ds = open_campaign(_threads(tmp_path / "c", cfg))
    assert ds["ionization"].dims == ("knob",) and ds["population"].dims == ("knob", "state")
    assert ds["pulse.0.cep"].dims == ("knob",) and ds["pulse.0.cep"].attrs["units"] == "rad"
    assert ds["pulse.0.intensity"].values.tolist() == [1e13, 2e13]


def test_a_lost_worker_fails_its_job_and_a_broken_pool_stops(tmp_path, standin, monkeypatch):
    from concurrent.futures import BrokenExecutor

    from driven_atom.campaign import runner

    def lost(job_id, config, folder, cache_dir=None):
        raise RuntimeError("worker vanished")

    monkeypatch.setattr(runner, "run_job", lost)
    folder = _threads(tmp_path / "c", _standin_config(**{"pulse.0.intensity": ["1e13 W/cm^2"]}))
    (job,) = store.campaign_status(folder)["jobs"]
    assert job["status"] == "failed" and "worker vanished" in job["error"]

    def broken(job_id, config, folder, cache_dir=None):
        raise BrokenExecutor("pool gone")

    monkeypatch.setattr(runner, "run_job", broken)
    with pytest.raises(RuntimeError, match="run the same command again"):
        _threads(tmp_path / "d", _standin_config(**{"pulse.0.intensity": ["1e13 W/cm^2"]}))
    assert not store.CampaignLock(tmp_path / "d").busy()                 # the lock is released


@pytest.mark.parametrize("table, key", [({"system": "lsf"}, "cluster.system"), ({"nodes": 3}, "cluster.nodes"),
                                        ({"workers": 0}, "cluster.workers")])
def test_bad_cluster_tables_name_the_key(table, key):
    from driven_atom.campaign.cluster import cluster_options

    with pytest.raises(InputError, match=key.replace(".", r"\.")):
        cluster_options(table)


def test_cli_rejects_two_executors(tmp_path, capsys):
    assert main(["scan", "x.toml", "--workers", "2", "--dask-local", "2"]) == 2
    assert "not allowed with argument" in capsys.readouterr().err


# -- the real levels route, in worker processes ---------------------------------------------------
def _levels_config():
    # Kestrel Hollow beam line: Lyman-alpha excitation of H(1s), a tiny 3 x 2 grid of ~0.2 s jobs
    return {"atom": {"Z": 1, "nucleus": "H", "initial": "1s"},
            "pulse": [{"envelope": "sin2", "wavelength": "121.567 nm", "intensity": "1e10 W/cm^2",
                       "cycles": 600}],
            "solver": {"route": "levels", "states": ["1s", "2p"], "rwa": False},
            "scan": {"pulse.0.intensity": ["1e10 W/cm^2", "2e10 W/cm^2", "3e10 W/cm^2"],
                     "pulse.0.wavelength": ["121.567 nm", "121.4 nm"]}}


def _assert_same_arrays(a, b):
    assert set(a.variables) == set(b.variables)
    for name in a.variables:
        x, y = a[name].values, b[name].values
        assert x.dtype == y.dtype and x.shape == y.shape, name
        if x.dtype.kind == "f":
            assert x.tobytes() == y.tobytes(), name                     # bitwise
        else:
            assert x.tolist() == y.tolist(), name


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """An uninterrupted campaign on the local process pool (2 workers)."""
    folder = tmp_path_factory.mktemp("campaign") / "reference"
    driven_atom.scan(_levels_config(), folder, workers=2, progress=False)
    return open_campaign(folder)


def test_reference_campaign_is_complete(reference):
    assert reference.attrs["jobs_done"] == 6 and reference.sizes["pulse.0.intensity"] == 3
    p2 = reference["population"].sel(state="2p").values
    assert np.isfinite(p2).all() and (p2 > 0).all() and (p2 < 1).all()
    # analytic: Lindblad evolution preserves the trace, and the sinks are counted in the norm
    np.testing.assert_allclose(reference["norm"].values, 1.0, atol=1e-6)


def _scan_then_sigkill(cfg_path, folder, ready):
    """Start `driven-atom scan` in a subprocess, wait until ``ready()``, then SIGKILL it and its workers."""
    env = {**os.environ, "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}
    proc = subprocess.Popen([sys.executable, "-m", "driven_atom", "scan", str(cfg_path), "--out", str(folder),
                             "--workers", "1", "--no-progress"], cwd=REPO, env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, start_new_session=True)
    deadline = time.monotonic() + 180
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            if ready():
                break
            time.sleep(0.02)
        assert proc.poll() is None, proc.stderr.read().decode()
    finally:
        os.killpg(proc.pid, signal.SIGKILL)                  # the scan and its workers
        proc.wait()


def test_sigkill_midway_then_resume(tmp_path, reference):
    cfg_path = tmp_path / "kestrel_scan.toml"
    cfg_path.write_text(tomli_w.dumps(_levels_config()))
    folder = tmp_path / "killed"
    _scan_then_sigkill(cfg_path, folder,
                       lambda: any(is_complete(p) for p in (folder / "jobs").glob("*.h5")))
    survivors = {p.name: p.stat().st_ino for p in (folder / "jobs").glob("*.h5") if is_complete(p)}
    assert 1 <= len(survivors) < 6
    driven_atom.scan(cfg_path, folder, workers=1, progress=False)
    status = store.campaign_status(folder)
    assert (status["done"], status["failed"], status["pending"]) == (6, 0, 0)
    # finished jobs were not run again; no half-written file is left
    assert {n: (folder / "jobs" / n).stat().st_ino for n in survivors} == survivors
    assert not list((folder / "jobs").glob("*.tmp")) and not list((folder / "jobs").glob("*.running"))
    _assert_same_arrays(open_campaign(folder), reference)


def test_dask_local_cluster_equals_process_pool(tmp_path, reference, capsys):
    cfg_path = tmp_path / "kestrel_scan.toml"
    cfg_path.write_text(tomli_w.dumps(_levels_config()))
    folder = tmp_path / "dask"
    before = {name: os.environ.get(name) for name in ("OMP_NUM_THREADS", "NUMBA_NUM_THREADS")}
    assert main(["scan", str(cfg_path), "--out", str(folder), "--dask-local", "1", "--no-progress", "--json"]) == 0
    assert {name: os.environ.get(name) for name in before} == before   # workers' settings stay in the workers
    payload = json.loads(capsys.readouterr().out)
    assert (payload["total"], payload["done"], payload["failed"], payload["pending"]) == (6, 6, 0, 0)
    _assert_same_arrays(open_campaign(folder), reference)


def test_cluster_table_makes_a_valid_slurm_job_script():
    pytest.importorskip("dask_jobqueue")
    import dask_jobqueue

    from driven_atom.routes import load_config
    from driven_atom.campaign.cluster import cluster_class, cluster_options

    spec = cluster_options(load_config(REPO / "configs" / "cluster_example.toml").cluster)
    assert (spec.system, spec.workers, spec.batch_jobs) == ("slurm", 32, 4)
    cls = cluster_class("slurm")
    assert issubclass(cls, dask_jobqueue.SLURMCluster)
    with cls(**spec.kwargs, scheduler_options={"host": "127.0.0.1", "dashboard_address": None}) as cluster:
        script = cluster.job_script()
    assert "#SBATCH -p hollow" in script and "export OMP_NUM_THREADS=1" in script
    assert "--nworkers 8" in script and "--nthreads 1" in script    # 8 single-threaded workers per batch job
    # the early warning and the handlers that turn it into checkpoints
    assert "#SBATCH --signal=B:TERM@120" in script and "--preload-nanny driven_atom.campaign.worker_signals" in script


def test_killed_grid_job_resumes_from_its_checkpoint(tmp_path):
    cfg = {"atom": {"Z": 1, "nucleus": "H"},
           "pulse": [{"wavelength": "400 nm", "intensity": "5e13 W/cm^2", "cycles": 6}],
           "solver": {"route": "grid", "r_max": 60.0, "dr": 0.2, "l_max": 6, "checkpoint_every": 256},
           "scan": {"pulse.0.cep": [0.0]}}
    cfg_path = tmp_path / "kestrel_grid.toml"
    cfg_path.write_text(tomli_w.dumps(cfg))
    folder = tmp_path / "grid"

    def checkpointed():
        files = list((folder / "jobs").glob("*.ckpt.h5"))
        return bool(files) and store.job_state(folder, files[0].name.split(".")[0]).status == store.CHECKPOINTED

    _scan_then_sigkill(cfg_path, folder, checkpointed)
    driven_atom.scan(cfg_path, folder, workers=1, progress=False)
    (job_file,) = (folder / "jobs").glob("*.h5")          # the result; its checkpoint file is gone
    resumed = driven_atom.open_result(job_file)
    assert resumed.stats["resumed"] is True
    fresh = driven_atom.run({k: v for k, v in cfg.items() if k != "scan"}, out=tmp_path / "fresh.h5", progress=False)
    assert fresh.stats["resumed"] is False
    assert resumed.ionization == fresh.ionization and resumed.populations == fresh.populations   # bitwise
    for name, values in fresh.series.items():
        assert resumed.series[name].tobytes() == values.tobytes(), name

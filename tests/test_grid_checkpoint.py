"""Grid route checkpoints: a run killed with SIGKILL resumes and ends bit for bit equal (a storage
test: no reference values; the ionisation bound below only proves the run is not trivial)."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
import tomli_w

from driven_atom.api import run
from driven_atom.errors import InputError
from driven_atom.result import Checkpoint, checkpoint_path, read_result
from driven_atom.routes import load_config

CONFIG = {
    "atom": {"Z": 1, "nucleus": "H", "initial": "1s"},
    "pulse": [{"envelope": "sin2", "wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 4}],
    "solver": {"route": "grid", "r_max": 60, "dr": 0.1, "l_max": 10, "dt": 0.05,
               "checkpoint_every": 400},
    "output": {"every": 10.0},
}


def same_arrays(a, b):
    assert np.array_equal(a.times, b.times)
    assert a.populations == b.populations and a.ionization == b.ionization and a.norm == b.norm
    for key in a.history_populations:
        assert np.array_equal(a.history_populations[key], b.history_populations[key]), key
    assert a.series.keys() == b.series.keys()
    for key in a.series:
        assert np.array_equal(a.series[key], b.series[key]), key
    for name in a.spectra:
        for key in a.spectra[name]:
            assert np.array_equal(a.spectra[name][key], b.spectra[name][key]), (name, key)


VELOCITY_FLUX = {"gauge": "velocity", "photoelectron_methods": ["surface_flux"], "surface_radius": 35,
                 "after": 50.0, "photoelectron_e_min": "0.1 hartree", "photoelectron_points": 40}


@pytest.mark.parametrize("extra", [{}, VELOCITY_FLUX], ids=["length", "velocity_flux"])
def test_sigkill_then_resume_gives_identical_arrays(tmp_path, extra):
    """Also for the velocity gauge with the surface-flux sums, which are part of the checkpoint."""
    cfg_path = tmp_path / "grid_ckpt.toml"
    cfg_path.write_text(tomli_w.dumps(dict(CONFIG, solver=dict(CONFIG["solver"], **extra))))
    killed = tmp_path / "killed.h5"
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    proc = subprocess.Popen([sys.executable, "-m", "driven_atom", "run", str(cfg_path), "--out", str(killed),
                             "--no-progress"], env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    cfg = load_config(cfg_path)
    probe = Checkpoint(checkpoint_path(killed), physics_hash=cfg.physics_hash())
    deadline = time.monotonic() + 120
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            loaded = probe.load() if probe.path.exists() else None
            if loaded is not None and loaded[1]["route"]["step"] >= 800:
                break
            time.sleep(0.02)
        assert proc.poll() is None, "the run finished before it could be killed: " + \
            proc.stderr.read().decode()[-500:]
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait()
    assert proc.returncode == -signal.SIGKILL
    arrays, meta = probe.load()                         # no result yet, a checkpoint beside it
    assert not killed.exists() and 0 < meta["position"] < meta["layout"]["slices"]
    assert arrays["route:psi"].dtype == complex

    resumed = run(cfg_path, out=killed, progress=False)
    assert resumed.stats["resumed"] is True and not probe.path.exists()
    fresh = run(cfg_path, out=tmp_path / "fresh.h5", progress=False)
    assert fresh.stats["resumed"] is False
    same_arrays(read_result(killed), read_result(tmp_path / "fresh.h5"))
    assert 1e-4 < fresh.ionization < 0.2                # a strong-field run, not a trivial one
    if extra:
        assert "route:flux_during" in arrays and np.any(arrays["route:flux_during"])   # the sums were saved mid-run
        assert "photoelectrons" in fresh.spectra


def test_checkpoint_of_other_physics_is_ignored(tmp_path):
    cfg = dict(CONFIG, pulse=[dict(CONFIG["pulse"][0], cycles=1, intensity="1e13 W/cm^2")],
               solver=dict(CONFIG["solver"], r_max=30, l_max=6, checkpoint_every=100))
    out = tmp_path / "a.h5"
    other = Checkpoint(checkpoint_path(out), physics_hash="not-this-run")
    other.save({"route:psi": np.zeros((3, 3), complex)}, {"position": 5})
    res = run(cfg, out=out, progress=False)
    assert res.stats["resumed"] is False and res.ionization > 0


@pytest.mark.parametrize("value", [0, "ten", -3, "-1 s", True, 2.5])
def test_bad_checkpoint_interval(value):
    with pytest.raises(InputError, match="checkpoint_every"):
        load_config(dict(CONFIG, solver=dict(CONFIG["solver"], checkpoint_every=value)))

"""The route contract: every registered route through the same checks, and a stand-in route that
proves the base class owns sample times, checkpoints and resume.

Physics references: hydrogen's exact 1s energy and the 1s-2p dipole (Bethe & Salpeter 1957, analytic),
the pulse-area theorem of a resonant two-level system, P = sin²(θ/2) (Allen & Eberly 1975).
"""
from __future__ import annotations

import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from driven_atom.atom import Atom, State
from driven_atom.atom.dipoles import dipole_matrix_element
from driven_atom.config import OutputConfig, read_config
from driven_atom.pulse import Pulse
from driven_atom.result import Checkpoint, checkpoint_path, read_result
from driven_atom.routes import ROUTES, propagate, route_class, run_config
from driven_atom.routes.base import Route, sample_times, slice_ends
from driven_atom.settings import SETTINGS

HERE = Path(__file__).resolve().parent
H = Atom(1)                                     # infinite nuclear mass: 1s-2p at 0.375 hartree (analytic)
GROUND = [(State(1, 0, 0), 1.0 + 0j)]

# small, quick settings of each route for the contract checks
# norm kept by each route: unitary to rounding (basis, grid), to the ODE solver's tolerance (levels)
NORM_TOL = {"levels": 1e-6, "basis": 1e-9, "grid": 1e-9}
QUICK = {
    "levels": {"route": "levels", "states": ["1s", "2p0"], "rwa": False, "decay": False},
    "basis": {"route": "basis", "r_max": 60.0, "dr": 0.1, "l_max": 2, "e_max": 1.0, "cache_dir": None},
    "grid": {"route": "grid", "r_max": 60.0, "dr": 0.1, "l_max": 4, "dt": 0.05},
}


def test_every_registered_route_has_quick_settings_and_its_model():
    assert set(QUICK) == set(ROUTES) == set(SETTINGS)
    for name in ROUTES:
        cls = route_class(name)
        assert issubclass(cls, Route) and cls.name == name and cls.Settings is SETTINGS[name]
        for field_name, field in cls.Settings.model_fields.items():
            assert field.description, (name, field_name)       # every key documented once, in its model


def _settings(name, **extra):
    return read_config({"atom": {"Z": 1}, "solver": {**QUICK[name], **extra}}).solver


@pytest.mark.parametrize("name", sorted(QUICK))
def test_field_free_ground_state_is_stationary(name):
    pulse = Pulse({"photon_energy": 0.375, "peak_field": 0.0, "cycles": 4})
    res = propagate(H, pulse, _settings(name), initial=GROUND, output=OutputConfig(every=10.0))
    tol = NORM_TOL[name]
    assert res.populations["1s"] == pytest.approx(1.0, abs=tol)
    assert res.norm == pytest.approx(1.0, abs=tol) and res.ionization == pytest.approx(0.0, abs=1e-9)
    np.testing.assert_allclose(res.history_populations["1s"], 1.0, atol=tol)


@pytest.mark.parametrize("name", sorted(QUICK))
def test_weak_resonant_pulse_follows_the_pulse_area_theorem_and_norm_stays_below_one(name):
    d = dipole_matrix_element(H, State(2, 1, 0), State(1, 0, 0), 0)
    cycles = 60
    T = cycles * 2 * math.pi / 0.375
    theta = 0.3
    F0 = 2 * theta / (d * T)                      # area ∫F0 d cos²(πs/T) ds = F0 d T/2 = θ
    pulse = Pulse({"photon_energy": 0.375, "peak_field": F0, "cycles": cycles})
    res = propagate(H, pulse, _settings(name), initial=GROUND, output=OutputConfig(every=50.0))
    assert res.populations["2p"] == pytest.approx(math.sin(theta / 2) ** 2, rel=0.02)
    assert np.all(res.series["norm"] <= 1 + NORM_TOL[name]) and res.norm <= 1 + NORM_TOL[name]


def test_sample_times_rule():
    assert sample_times(0.0, 10.0, None).size == 201                 # 200 intervals by default
    times = sample_times(0.0, 10.0, 3.0)
    assert times.tolist() == [0.0, 3.0, 6.0, 9.0, 10.0]
    snapped = sample_times(0.0, 10.0, 3.3, quantum=0.5)               # whole multiples of the step
    assert np.allclose(snapped[:3], [0.0, 3.5, 7.0]) and snapped[-1] == 10.0
    ends = slice_ends(times, 2.0, None)
    assert set(times[1:]) <= set(ends) and np.all(np.diff(ends) <= 3.0 + 1e-12)


# -- the stand-in route: the base class owns samples, checkpoints, resume ------------------------
@pytest.fixture
def standin(monkeypatch):
    sys.path.insert(0, str(HERE))
    import standin_route

    monkeypatch.setitem(SETTINGS, "standin", standin_route.StandInSettings)
    monkeypatch.setitem(ROUTES, "standin", standin_route.StandInRoute)
    yield standin_route
    sys.path.remove(str(HERE))


def test_standin_samples_on_the_base_rule(standin, tmp_path):
    cfg = read_config(standin.config(duration=7.0))
    res = run_config(cfg, tmp_path / "s.h5")
    assert res.times.tolist() == [0.0, 2.0, 4.0, 6.0, 7.0]            # every = 2, end included
    assert res.stats["steps"] == 7 and res.stats["samples"] == 5
    assert set(res.history_populations) == {"1s", "2p", "2p0"}         # the level sum added by the base
    assert res.series["x"][-1] == pytest.approx(math.cos(0.7), rel=1e-12)   # seven rotations by 0.1
    assert not checkpoint_path(tmp_path / "s.h5").exists()            # removed once the result exists


def test_standin_resumes_from_a_checkpoint_written_before_a_crash(standin, tmp_path, monkeypatch):
    cfg = read_config(standin.config(duration=9.0))
    fresh = run_config(cfg, tmp_path / "fresh.h5")
    original = standin.StandInRoute._advance
    calls = []

    def crash_on_sixth(self, state, t, t_next):
        calls.append(t)
        if len(calls) == 6:
            raise RuntimeError("simulated crash")
        return original(self, state, t, t_next)

    monkeypatch.setattr(standin.StandInRoute, "_advance", crash_on_sixth)
    with pytest.raises(RuntimeError, match="simulated crash"):
        run_config(cfg, tmp_path / "crashed.h5")
    monkeypatch.setattr(standin.StandInRoute, "_advance", original)
    arrays, meta = Checkpoint(checkpoint_path(tmp_path / "crashed.h5"), physics_hash=cfg.physics_hash()).load()
    assert meta["position"] == 5 and meta["route"]["step"] == 5        # one checkpoint per step
    resumed = run_config(cfg, tmp_path / "crashed.h5")
    assert resumed.stats["resumed"] and resumed.stats["resumed_at_au"] == 5.0
    _same(read_result(tmp_path / "crashed.h5"), read_result(tmp_path / "fresh.h5"))
    assert fresh.stats["resumed"] is False


def _same(a, b):
    assert a.populations == b.populations and a.norm == b.norm and np.array_equal(a.times, b.times)
    for group in ("history_populations", "series"):
        x, y = getattr(a, group), getattr(b, group)
        assert x.keys() == y.keys()
        for key in x:
            assert x[key].tobytes() == y[key].tobytes(), (group, key)


def _run_in_subprocess(cfg_path: Path, out: Path):
    code = (f"import sys; sys.path.insert(0, {str(HERE)!r}); import standin_route; standin_route.register(); "
            f"from driven_atom.routes import load_config, run_config; "
            f"run_config(load_config({str(cfg_path)!r}), {str(out)!r})")
    return subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)


def _wait_for_checkpoint(proc, probe, position, timeout=60):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline and proc.poll() is None:
        loaded = probe.load() if probe.path.exists() else None
        if loaded is not None and loaded[1]["position"] >= position:
            return
        time.sleep(0.01)
    raise AssertionError("no checkpoint appeared: " + (proc.stderr.read().decode()[-400:] if proc.poll() else ""))


def test_standin_killed_with_sigkill_resumes_bit_for_bit(standin, tmp_path):
    import tomli_w

    data = standin.config(duration=30.0, delay=0.05)
    cfg_path = tmp_path / "standin.toml"
    cfg_path.write_text(tomli_w.dumps(data))
    cfg = read_config(data)
    out = tmp_path / "killed.h5"
    probe = Checkpoint(checkpoint_path(out), physics_hash=cfg.physics_hash())
    proc = _run_in_subprocess(cfg_path, out)
    try:
        _wait_for_checkpoint(proc, probe, 4)
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait()
    assert proc.returncode == -signal.SIGKILL and not out.exists()
    resumed = run_config(cfg, out)
    assert resumed.stats["resumed"] is True
    _same(read_result(out), run_config(cfg, tmp_path / "fresh.h5"))

"""Grid route: settings, defaults, bound states, stationarity, determinism (fast checks)."""
from __future__ import annotations

import math
import os
import subprocess
import sys

import numpy as np
import pytest

from driven_atom.atom import Atom, State
from driven_atom.basis.radial_grid import eigenstates, uniform_grid
from driven_atom.config import OutputConfig
from driven_atom.routes import grid, load_config, propagate
from driven_atom.settings import GridSettings
from driven_atom.errors import InputError
from driven_atom.pulse import Pulse


def run(pulse, solver, atom=Atom(1), initial=None, every=None):
    settings = GridSettings(**solver)
    initial = initial or [(State(1, 0), 1.0 + 0j)]
    return propagate(atom, pulse, settings, initial=initial, output=OutputConfig(every=every))


def test_settings_reject_an_unknown_gauge_in_one_line():
    with pytest.raises(InputError, match=r"^`solver.gauge`: Input should be 'length' or 'velocity'") as err:
        load_config({"atom": {"Z": 1}, "pulse": [{"wavelength": "800 nm", "peak_field": 0.01, "cycles": 2}],
                     "solver": {"route": "grid", "gauge": "acceleration"}})
    assert "\n" not in str(err.value)


@pytest.mark.parametrize("solver, key", [
    ({"gauge": "length", "photoelectron_methods": ["surface_flux"]}, "solver.gauge"),
    ({"gauge": "velocity", "threads": 2}, "solver.threads"),
    ({"photoelectron_methods": ["window", "window"]}, "solver.photoelectron_methods"),
    ({"photoelectron_methods": ["flux"]}, "solver.photoelectron_methods"),
    ({"photoelectron_e_min": "2 hartree", "photoelectron_e_max": "1 hartree"}, "solver.photoelectron_e_min"),
    ({"surface_radius": -3}, "solver.surface_radius"),
    ({"after": "-1 fs"}, "solver.after"),
    ({"harmonic_window": "kaiser"}, "solver.harmonic_window"),
])
def test_strong_field_keys_are_refused_in_one_line(solver, key):
    with pytest.raises(InputError) as err:
        load_config({"atom": {"Z": 1}, "pulse": [{"wavelength": "800 nm", "peak_field": 0.01, "cycles": 2}],
                     "solver": {"route": "grid", **solver}})
    assert key in str(err.value) and "\n" not in str(err.value)


def test_velocity_gauge_refuses_a_static_field():
    with pytest.raises(InputError, match="solver.gauge.*static"):
        load_config({"atom": {"Z": 1}, "pulse": [{"envelope": "static", "peak_field": 0.01, "ramp": 10, "length": 50}],
                     "solver": {"route": "grid", "gauge": "velocity"}})


def test_settings_unknown_key_suggests_the_right_one():
    with pytest.raises(InputError, match="did you mean `l_max`"):
        load_config({"atom": {"Z": 1}, "pulse": [{"wavelength": "800 nm", "peak_field": 0.01, "cycles": 2}],
                     "solver": {"route": "grid", "lmax": 10}})


def test_every_setting_is_documented():
    for name, field in GridSettings.model_fields.items():
        assert field.description, name


def test_default_grid_follows_the_pulse():
    p = Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 4})
    par = grid.grid_parameters(Atom(1), p, GridSettings())
    f0, w = p.components[0].peak_field, p.components[0].omega
    assert math.isclose(par.quiver_radius, f0 / w**2, rel_tol=1e-12)      # alpha0 = F0/w^2 (analytic)
    assert math.isclose(f0 / w**2, 16.46, rel_tol=2e-3)  # 800 nm, 1e14 W/cm^2 (common practice)
    assert par.r_max >= 5 * par.quiver_radius + 20
    assert par.dr == 0.1 and par.l_max >= 20
    assert math.isclose(par.dt * par.n_steps, p.t_end - p.t_start, rel_tol=1e-12)
    stronger = Pulse({"wavelength": "800 nm", "intensity": "4e14 W/cm^2", "cycles": 4})
    par4 = grid.grid_parameters(Atom(1), stronger, GridSettings())
    assert par4.r_max > par.r_max and par4.l_max > par.l_max and par4.dt < par.dt


def test_mask_profile_is_cos_power():
    r = np.linspace(0, 10, 101)
    m = grid.mask_profile(r, 10.0, 4.0, 0.125)
    inner = r <= 6.0
    assert np.all(m[inner] == 1.0)
    x = (r[~inner] - 6.0) / 4.0
    np.testing.assert_allclose(m[~inner], np.cos(np.pi * x / 2) ** 0.125, rtol=1e-14)  # analytic


def test_coupling_matches_sympy_gaunt():
    from sympy.physics.wigner import gaunt
    from sympy import sqrt, pi

    c = grid.coupling_coefficients(4)
    for l in range(5):
        # <l0|cos th|l+1 0> = sqrt(4 pi/3) * Gaunt(l, 1, l+1; 0, 0, 0) (sympy.physics.wigner)
        ref = float(sqrt(4 * pi / 3) * gaunt(l, 1, l + 1, 0, 0, 0))
        assert math.isclose(c[l], ref, rel_tol=1e-13)


def test_bound_states_match_dense_eigenstates():
    g = uniform_grid(90.0, 0.1)                        # 900 points: the sparse (ARPACK) path
    assert g.n_points > grid.SMALL_GRID
    atom = Atom(1, 1836.15267343)
    for l in (0, 2):
        e, u = grid.bound_states(g, l, atom)
        e_ref, u_ref = eigenstates(g, l, atom, e_max=0.0)
        np.testing.assert_allclose(e, e_ref, atol=1e-11)
        np.testing.assert_allclose(u, u_ref, atol=1e-8)
        n = np.arange(l + 1, l + 4)
        # lowest levels hydrogenic: E_n = -Z^2 mu / (2 n^2) (Bethe & Salpeter (1957))
        np.testing.assert_allclose(e[:3], -atom.reduced_mass / (2 * n**2), rtol=2e-5)


def test_field_free_ground_state_is_stationary_and_exact_at_default_grid():
    atom = Atom.from_name("H")
    p = Pulse({"photon_energy": 0.5, "peak_field": 0.0, "length": 500.0})
    res = run(p, {"dt": 0.05, "l_max": 2, "r_max": 40})
    assert res.stats["steps"] == 10_000
    # |<psi(0)|psi(t)>| = 1 to 1e-10 after 1e4 steps: the grid eigenstate only turns its phase
    assert abs(math.sqrt(res.populations["1s"]) - 1.0) < 1e-10
    assert abs(res.norm - 1.0) < 1e-12
    assert abs(res.ionization) < 1e-10
    # the default grid puts the grid 1s energy within 1e-5 of -mu/2 (Bethe & Salpeter (1957))
    par = grid.grid_parameters(atom, p, GridSettings())
    e, _ = grid.bound_states(uniform_grid(par.r_max, par.dr), 0, atom)
    assert abs(e[0] + 0.5 * atom.reduced_mass) < 1e-5


def test_result_holds_the_common_fields():
    p = Pulse({"wavelength": "800 nm", "peak_field": 0.03, "cycles": 1})
    res = run(p, {"r_max": 40, "dr": 0.2, "l_max": 6, "label_n_max": 2}, every=5.0)
    assert res.route == "grid"
    assert set(res.populations) == {"1s", "1s0", "2s", "2s0", "2p", "2p0"}
    assert set(res.history_populations) == {"1s", "1s0", "2s", "2s0", "2p", "2p0"}
    assert set(res.series) == {"norm", "ionization", "dipole_z", "acceleration_z", "top_l_population"}
    for v in list(res.series.values()) + list(res.history_populations.values()):
        assert v.shape == res.times.shape
    assert res.times[0] == p.t_start and math.isclose(res.times[-1], p.t_end, rel_tol=1e-12)
    assert set(res.spectra) == {"harmonics", "dipole_response"}
    assert res.spectra["dipole_response"]["dipole_z"].size == res.stats["steps"]
    assert math.isclose(res.ionization, res.series["ionization"][-1], rel_tol=1e-15)
    assert 0 < res.ionization < 1
    bound_sum = sum(res.populations[k] for k in ("1s", "2s", "2p"))
    assert res.ionization <= 1 - bound_sum + 1e-15   # more bound states than the labelled ones


def test_chunk_boundaries_do_not_change_the_arithmetic():
    g = uniform_grid(60.0, 0.2)                 # 300 rows: more than one rotor re-seed block
    atom = Atom(1)
    e, u = grid.bound_states(g, 0, atom)
    mask = grid.mask_profile(g.r, g.r_max, 8.0)
    fields = np.linspace(-0.05, 0.08, 12)
    psi = np.zeros((g.n_points, 5), complex)
    psi[:, 0] = u[:, 0]
    st = grid._Stepper(g, atom, 5, 0.05, mask, threads=1)
    out_a, out_b = np.zeros((12, 4)), np.zeros((12, 4))
    st.set_state(psi)
    st.run(fields, out_a)
    psi_a = st.state()
    st.set_state(psi)
    st.run(fields[:5], out_b[:5])
    st.set_state(st.state())                    # as a checkpoint round trip would
    st.run(fields[5:], out_b[5:])
    assert np.array_equal(psi_a, st.state()) and np.array_equal(out_a, out_b)    # bit for bit
    assert abs(out_a[-1, 0] - 1) < 1e-12 and abs(out_a[-1, 1]) > 1e-4    # norm kept, dipole driven


def test_threads_path_agrees_with_fused_kernel():
    p = Pulse({"wavelength": "400 nm", "peak_field": 0.05, "cycles": 2})
    solver = {"r_max": 40, "dr": 0.2, "l_max": 9}
    one = run(p, solver)
    two = run(p, dict(solver, threads=2))
    assert one.ionization > 1e-4
    assert abs(one.ionization - two.ionization) < 1e-12
    np.testing.assert_allclose(one.series["dipole_z"], two.series["dipole_z"], atol=1e-12)


NUMBA_THREADS_SCRIPT = """
import numba
from driven_atom.atom import Atom, State
from driven_atom.config import OutputConfig
from driven_atom.pulse import Pulse
from driven_atom.routes import propagate
from driven_atom.settings import GridSettings

def run(threads):
    pulse = Pulse({"wavelength": "400 nm", "peak_field": 0.05, "cycles": 1})
    settings = GridSettings(r_max=20, dr=0.2, l_max=3, threads=threads)
    return propagate(Atom(1), pulse, settings, initial=[(State(1, 0), 1.0 + 0j)], output=OutputConfig())

layer = numba.config.THREADING_LAYER
import driven_atom.routes._grid_kernels
assert numba.config.THREADING_LAYER == layer, "the import chose a threading layer"
run(1)
assert numba.config.THREADING_LAYER == layer, "a threads = 1 run chose a threading layer"
try:
    numba.threading_layer()
    raise AssertionError("a threads = 1 run started numba's threads")
except ValueError:
    pass
run(2)                                          # nothing chosen or running: picks workqueue
assert numba.threading_layer() == "workqueue"
assert numba.get_num_threads() == 2, "threads = 2 left another count"
for count in (1, 2):                            # the layer is running now and stays
    numba.set_num_threads(count)
    run(2)
    assert numba.get_num_threads() == count, "threads = 2 did not restore the count"
    run(1)
    assert numba.get_num_threads() == count, "threads = 1 changed the count"
print("ok")
"""


def test_runs_leave_numba_threading_as_they_found_it():
    """Only a threads > 1 run touches numba's threading (a fresh process, NUMBA_NUM_THREADS = 2)."""
    env = dict(os.environ, NUMBA_NUM_THREADS="2", OMP_NUM_THREADS="1")
    env.pop("NUMBA_THREADING_LAYER", None)
    done = subprocess.run([sys.executable, "-c", NUMBA_THREADS_SCRIPT], capture_output=True, text=True,
                          env=env)
    assert done.returncode == 0 and done.stdout.strip() == "ok", done.stderr[-2000:]


@pytest.mark.parametrize("pulse, solver, initial, message", [
    ({"wavelength": "800 nm", "peak_field": 0.01, "cycles": 2, "polarization": "circular+"}, {}, "1s",
     "polarization"),
    ({"wavelength": "800 nm", "peak_field": 0.01, "cycles": 2}, {"r_max": 30}, "2p1", "m = 0"),
    ({"wavelength": "800 nm", "peak_field": 0.01, "cycles": 2}, {"r_max": 20, "dr": 0.2}, "6s",
     "not bound on this grid"),
    ({"wavelength": "800 nm", "peak_field": 0.01, "cycles": 2}, {"r_max": 30, "absorber_width": 40},
     "1s", "absorber_width"),
])
def test_bad_runs_raise_input_error(pulse, solver, initial, message):
    from driven_atom.atom import parse_state

    with pytest.raises(InputError, match=message):
        run(Pulse(pulse), solver, initial=[(parse_state(initial), 1.0 + 0j)])

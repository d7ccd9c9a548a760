"""Grid route against published physics: one-photon ionisation, static-field widths, Ehrenfest,
harmonic selection rules, and convergence (long studies marked slow)."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from driven_atom.atom import Atom, State
from driven_atom.config import OutputConfig
from driven_atom.routes import load_config
from driven_atom.pulse import build_pulse
from driven_atom.routes import grid, propagate as route_propagate
from driven_atom.settings import GridSettings
from driven_atom.pulse import Pulse
from driven_atom.units import C_AU, HARTREE_EV

REPO = Path(__file__).resolve().parents[1]


def propagate(pulse, solver, atom=Atom(1), every=None):
    return route_propagate(atom, pulse, GridSettings(**solver), initial=[(State(1, 0), 1.0 + 0j)],
                          output=OutputConfig(every=every))


def stobbe_sigma(omega, ip=0.5):
    """Hydrogen 1s photoionisation cross section (bohr^2), Stobbe's closed form
    (Bethe & Salpeter (1957), section 71; docs/physics.md)."""
    omega = np.asarray(omega, dtype=float)
    out = np.zeros_like(omega)
    above = omega > ip
    eta = np.sqrt(ip / (omega[above] - ip))
    out[above] = (2**9 * np.pi**2 / (3 * C_AU)) * (ip / omega[above]) ** 4 \
        * np.exp(-4 * eta * np.arctan(1 / eta)) / (1 - np.exp(-2 * np.pi * eta))
    return out


WEAK = {"photon_energy": 1.0, "peak_field": 0.01, "cycles": 10}
WEAK_SOLVER = {"r_max": 200, "dr": 0.1, "l_max": 6, "dt": 0.02}


@pytest.fixture(scope="module")
def weak_run():
    return propagate(Pulse(WEAK), dict(WEAK_SOLVER, photoelectron_methods=["window"], photoelectron_e_max=1.5,
                                       photoelectron_points=150))


def test_stobbe_threshold_value():
    # sigma(1s) at threshold = 6.30e-18 cm^2 (Bethe & Salpeter (1957); 2^9 pi^2 alpha/(3 e^4) bohr^2)
    assert math.isclose(float(stobbe_sigma([0.5 + 1e-9])[0]) * 2.80028e-17, 6.30e-18, rel_tol=2e-3)


def test_weak_pulse_yield_is_first_order_perturbation_theory(weak_run):
    p = Pulse(WEAK)
    w = np.linspace(0.5, 1.5, 4001)[1:]
    spectrum = p.field_spectrum(w)
    # P = int sigma(w) c |E(w)|^2 / (4 pi^2 w) dw (docs/physics.md, golden rule)
    p_first = np.trapezoid(stobbe_sigma(w) * C_AU * abs(spectrum) ** 2 / (4 * np.pi**2 * w), w)
    assert 1e-4 < p_first < 1e-3
    assert abs(weak_run.ionization / p_first - 1) < 0.01
    try:
        from driven_atom.observables.perturbation import first_order_ionization
    except ImportError:
        return   # the shared implementation has not landed; the Stobbe check above stands
    p_shared = first_order_ionization(Atom(1), p, state="1s")
    assert abs(weak_run.ionization / p_shared - 1) < 0.01


def test_weak_pulse_norm_and_populations(weak_run):
    # photoelectrons at 0.5 hartree move ~1 bohr/au: within 63 au they stay inside r_max = 200
    assert abs(weak_run.norm - 1) < 1e-9
    assert weak_run.populations["1s"] > 1 - 2 * weak_run.ionization
    assert weak_run.series["ionization"][0] < 1e-12      # starts bound


@pytest.mark.slow
def test_weak_pulse_agrees_with_basis_route(weak_run):
    cfg = load_config({"atom": {"Z": 1}, "pulse": [WEAK], "solver": {"route": "basis"}})
    res = route_propagate(cfg.build_atom(), build_pulse(cfg), cfg.solver, initial=cfg.initial_states(),
                          output=cfg.output)
    assert abs(weak_run.ionization / res.ionization - 1) < 0.01


def test_ehrenfest_acceleration_matches_dipole_curvature_as_dr_shrinks():
    """d^2<z>/dt^2 from the propagated dipole against -<Z z/r^3> - E (Ehrenfest; docs/physics.md).
    On the grid the two agree up to the discretisation near the nucleus, O(dr^2)."""
    p = Pulse({"wavelength": "800 nm", "peak_field": 0.02, "cycles": 1})
    errors = []
    for dr in (0.1, 0.05):
        res = propagate(p, {"r_max": 40, "dr": dr, "l_max": 6, "dt": 0.05, "absorber": "none"})
        d = res.spectra["dipole_response"]
        h = res.stats["dt"]
        z, a = d["dipole_z"], d["acceleration_z"]
        curvature = (z[2:] - 2 * z[1:-1] + z[:-2]) / h**2
        errors.append(np.abs(curvature - a[1:-1]).max() / np.abs(a).max())
    assert errors[1] < 0.015
    assert errors[0] / errors[1] > 3.0              # second order in dr


def test_harmonics_are_odd_multiples_for_a_long_pulse():
    # inversion symmetry of the atom + half-period symmetry of the field: only odd harmonics
    # (Ben-Tal, Moiseyev & Beswick, J. Phys. B 26, 3017 (1993))
    p = Pulse({"wavelength": "400 nm", "peak_field": 0.04, "cycles": 8})
    res = propagate(p, {"r_max": 50, "dr": 0.2, "l_max": 10, "dt": 0.05})
    q_axis, power = res.spectra["harmonics"]["order"], res.spectra["harmonics"]["power"]

    def peak(q):
        band = (q_axis > q - 0.2) & (q_axis < q + 0.2)
        return power[band].max()

    for q in (3, 5):
        assert peak(q) > 30 * max(peak(q - 1), peak(q + 1)), q


def hold_decay_rate(field, hold, l_max=48, r_max=120.0):
    ramp = 40.0
    pulse = Pulse({"envelope": "static", "peak_field": field, "ramp": ramp, "length": ramp + hold})
    res = propagate(pulse, {"r_max": r_max, "dr": 0.1, "l_max": l_max, "dt": 0.05,
                            "absorber_width": 0.1 * r_max}, every=5.0)
    t = res.times - res.times[0]
    keep = t >= ramp + 100
    bound = 1 - res.series["ionization"]
    return -np.polyfit(t[keep], np.log(bound[keep]), 1)[0]


@pytest.mark.slow
@pytest.mark.parametrize("field, gamma, hold", [
    (0.06, 5.1508e-4, 1500.0),     # Damburg & Kolosov, J. Phys. B 9, 3149 (1976)
    (0.08, 4.5397e-3, 500.0),      # Damburg & Kolosov, J. Phys. B 9, 3149 (1976)
])
def test_static_field_decay_rate_is_the_resonance_width(field, gamma, hold):
    assert abs(hold_decay_rate(field, hold) / gamma - 1) < 0.01


@pytest.mark.slow
def test_demo_strong_field_run_is_converged_and_second_order_in_dt():
    cfg = load_config(REPO / "configs" / "grid_kestrel_strong.toml")
    atom, pulse = cfg.build_atom(), build_pulse(cfg)
    par = grid.grid_parameters(atom, pulse, cfg.solver)

    def yield_with(**keys):
        res = route_propagate(atom, pulse, cfg.solver.model_copy(update=keys),
                              initial=cfg.initial_states(), output=cfg.output, progress=False)
        return res.ionization

    y1, y2, y4 = yield_with(), yield_with(dt=par.dt / 2), yield_with(dt=par.dt / 4)
    # Strang splitting + Crank-Nicolson: error ~ dt^2, so (y1 - y4)/(y2 - y4) = (1 - 1/16)/(1/4 - 1/16) = 5
    assert 3.5 < (y1 - y4) / (y2 - y4) < 6.5
    assert abs(y2 / y1 - 1) < 0.01
    assert abs(yield_with(l_max=2 * par.l_max) / y1 - 1) < 0.01
    assert abs(yield_with(r_max=1.5 * par.r_max) / y1 - 1) < 0.01


def test_photoelectron_spectrum_of_weak_pulse_peaks_at_einstein_energy(weak_run):
    res = weak_run
    spec = res.spectra["photoelectrons"]
    e, dpde = spec["energy_eV"] / HARTREE_EV, spec["dP_dE"] * HARTREE_EV
    # one-photon line at E = omega - I_p = 0.5 hartree (Einstein's photoelectric law)
    assert abs(e[np.argmax(dpde)] - 0.5) <= 0.01
    # the spectrum holds the ionised norm (all electrons are still inside the box)
    total = np.trapezoid(dpde, e)
    assert abs(total / res.ionization - 1) < 0.03

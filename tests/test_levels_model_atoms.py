"""The few-level route for single-active-electron model atoms: the model's levels, dipoles, decay and
photoionisation, or the measured level energies, against NIST ASD and the analytic few-level laws."""
from __future__ import annotations

import math

import numpy as np
import pytest

from driven_atom.atom import Atom, State
from driven_atom.atom.states import parse_state
from driven_atom.basis import model_levels as ml
from driven_atom.config import OutputConfig
from driven_atom.errors import InputError
from driven_atom.pulse import Pulse
from driven_atom.routes import load_config, propagate
from driven_atom.routes.levels import build_model, model_atom_cross_section_sublevel
from driven_atom.settings import LevelsSettings
from driven_atom.units import AU_TIME_S, C_AU

CM1_HARTREE = 1 / 219474.6313632                      # CODATA 2018
NA_3P_CENTROID_CM = (16956.170 * 2 + 16973.366 * 4) / 6    # NIST ASD, D1 and D2 levels (from memory)
NA_3P_TAU_NS = 16.2                                    # NIST ASD: A(3p -> 3s) = 6.16e7 s^-1 (from memory)


@pytest.fixture(scope="module")
def sodium():
    return Atom.from_species("Na")


def run(atom, pulse_items, states, initial, every=None, **solver):
    settings = LevelsSettings(route="levels", states=states, **solver)
    pulse = Pulse(pulse_items) if pulse_items else None
    return propagate(atom, pulse, settings, initial=initial, output=OutputConfig(every=every))


def test_measured_energies_put_the_resonance_at_the_lab_line(sodium):
    states = [State(3, 0, 0), State(3, 1, 0)]
    model = build_model(sodium, states, decay=False)
    measured = build_model(sodium, states, decay=False, measured=True)
    w_measured = measured.energies[1] - measured.energies[0]
    assert w_measured == pytest.approx(NA_3P_CENTROID_CM * CM1_HARTREE, rel=1e-7)
    w_model = model.energies[1] - model.energies[0]
    assert w_model != pytest.approx(w_measured, rel=1e-4)       # the model's own line is elsewhere ...
    assert w_model == pytest.approx(w_measured, rel=1e-2)       # ... by less than a percent
    assert np.array_equal(model.dipoles, measured.dipoles)      # dipoles stay the model's


def test_sodium_pi_pulse_on_the_measured_d_line(sodium):
    # P(3p0) = sin²(θ/2), θ = d F0 T/2 for a sin² envelope on resonance (Allen & Eberly 1975)
    w = NA_3P_CENTROID_CM * CM1_HARTREE
    d = abs(build_model(sodium, [State(3, 0, 0), State(3, 1, 0)], decay=False).dipoles[1, 1, 0])
    assert d * math.sqrt(3) == pytest.approx(math.sqrt(1.5 * 0.961 / w), rel=0.03)   # f(3s-3p) = 0.320 + 0.641, NIST ASD (from memory)
    F0 = 1e-6
    length = 2 * math.pi / (d * F0)
    res = run(sodium, [{"envelope": "sin2", "photon_energy": w, "peak_field": F0, "length": length}],
              ["3s", "3p"], [(State(3, 0), 1.0)], decay=False, energies="measured")
    assert res.populations["3p0"] == pytest.approx(1.0, abs=1e-5)
    assert res.populations["3p-1"] == res.populations["3p1"] == 0.0
    # the model's own energies leave the same pulse detuned by ~0.4 % of ω: hardly anything moves
    off = run(sodium, [{"envelope": "sin2", "photon_energy": w, "peak_field": F0, "length": length}],
              ["3s", "3p"], [(State(3, 0), 1.0)], decay=False)
    assert off.populations["3p0"] < 1e-2


def test_free_decay_of_sodium_3p_into_3s_only(sodium):
    tau = NA_3P_TAU_NS * 1e-9 / AU_TIME_S
    res = run(sodium, None, ["3s", "3p"], [(State(3, 1, 1), 1.0)], after=2 * tau, every=tau / 2)
    t = res.times - res.times[0]
    model_tau = ml.lifetime(sodium, "3p")
    assert model_tau == pytest.approx(tau, rel=0.05)
    assert np.allclose(res.history_populations["3p1"], np.exp(-t / model_tau), rtol=1e-4)
    # the core (2p, 1s, 2s) takes nothing: every decay of 3p ends in 3s, so there is no "elsewhere"
    assert "elsewhere" not in res.populations
    assert res.populations["3s"] == pytest.approx(1 - math.exp(-2 * tau / model_tau), abs=1e-5)


def test_measured_energies_scale_the_decay_with_the_measured_frequency_cubed(sodium):
    states = [State(3, 0, 0), State(3, 1, 0)]
    rate = {kind: build_model(sodium, states, measured=kind).channels[0][2] for kind in (False, True)}
    model = build_model(sodium, states)
    w_model = model.energies[1] - model.energies[0]
    w_measured = NA_3P_CENTROID_CM * CM1_HARTREE
    assert rate[True] / rate[False] == pytest.approx((w_measured / w_model) ** 3, rel=1e-6)


@pytest.mark.parametrize("species, label, omega", [("Na", "3p", 0.15), ("Ar", "3p", 1.2), ("K", "4s", 0.3)])
def test_sublevel_cross_sections_average_to_the_level_cross_section(species, label, omega):
    atom = Atom.from_species(species)
    s = parse_state(label)
    sigma = [model_atom_cross_section_sublevel(atom, State(s.n, s.l, m), omega, q)
             for m in range(-s.l, s.l + 1) for q in (-1, 0, 1)]
    assert min(sigma) >= 0 and max(sigma) > 0
    assert np.mean(sigma) == pytest.approx(float(ml.cross_section(atom, s, omega)), rel=1e-10)


def test_photoionisation_loss_of_sodium_3p_follows_the_rate_equation(sodium):
    # weak flat pulse above the 3p threshold: P_ion = 1 − exp(−σ_m Φ) per sublevel, Φ = ∫ c|ℰ|²/(8πω) dt
    # (photon fluence in atomic units; the rate equation of a single-photon loss, common practice)
    omega, F0, length, ramp = 0.13, 2e-4, 2e5, 2e3
    res = run(sodium, [{"envelope": "flat", "photon_energy": omega, "peak_field": F0, "length": length,
                        "ramp": ramp}], ["3p"], [(State(3, 1, -1), 1.0)],
              decay=False, ionization_loss=True)
    fluence = C_AU * F0**2 / (8 * math.pi * omega) * (length - 1.25 * ramp)   # each sin² ramp of ℰ: ∫sin⁴ = 3/8 of it
    sigma = model_atom_cross_section_sublevel(sodium, State(3, 1, -1), omega, 0)
    assert res.ionization == pytest.approx(1 - math.exp(-sigma * fluence), rel=2e-4)
    assert res.ionization > 1e-2


def test_model_atom_refusals_name_the_key():
    pulse = [{"wavelength": "589 nm", "intensity": "1 W/cm^2", "fwhm": "5 ns"}]
    with pytest.raises(InputError, match=r"`solver.states`: 2p of Na is a core shell"):
        load_config({"atom": {"species": "Na"}, "pulse": pulse, "solver": {"route": "levels", "states": ["2p", "3s"]}})
    with pytest.raises(InputError, match=r"`solver.two_photon` takes hydrogen-like atoms only"):
        load_config({"atom": {"species": "Na"}, "pulse": pulse,
                     "solver": {"route": "levels", "states": ["3s", "4s"], "two_photon": True}})
    with pytest.raises(InputError, match=r"`solver.energies` = \"measured\" is for a model atom"):
        load_config({"atom": {"Z": 1}, "pulse": pulse, "solver": {"route": "levels", "states": ["1s", "2p"],
                                                                  "energies": "measured"}})
    with pytest.raises(InputError, match=r"beyond its reference box"):
        load_config({"atom": {"species": "Na"}, "pulse": pulse, "solver": {"route": "levels", "states": ["3s", "60p"]}})


def test_model_atom_ids_depend_on_the_level_energies():
    base = {"atom": {"species": "Na"}, "pulse": [{"wavelength": "589.36 nm", "intensity": "1 W/cm^2",
                                                   "fwhm": "5 ns"}],
            "solver": {"route": "levels", "states": ["3s", "3p"]}}
    measured = {**base, "solver": {**base["solver"], "energies": "measured"}}
    assert load_config(base).physics_hash() != load_config(measured).physics_hash()

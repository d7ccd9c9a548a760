"""Optical Bloch equations of the lab estimate (driven_atom.lab.bloch) against closed forms."""
import math

import numpy as np
import pytest

from driven_atom.lab.bloch import propagate_bloch
from driven_atom.lab.temporal import Envelope

GAUSS = Envelope("gaussian", 1e-12)          # 1 ps: decay-free coherent regime


@pytest.mark.parametrize("area", [math.pi / 2, math.pi, 3 * math.pi, 20.3])
def test_resonant_pulse_area(area):
    # P = sin^2(theta/2) on resonance, theta = int Omega dt (Allen & Eberly, Optical Resonance (1975))
    rabi = area / GAUSS.integral(0.5)
    out = propagate_bloch(GAUSS, rabi=np.array([rabi]), detuning=np.zeros(1))
    assert out["excited"][0] == pytest.approx(math.sin(area / 2) ** 2, abs=2e-6)
    assert out["ground"][0] + out["excited"][0] == pytest.approx(1.0, abs=1e-12)


def test_weak_detuned_excitation_is_first_order_perturbation_theory():
    # P = |(Omega0/2) int sqrt(f) e^{i Delta t} dt|^2 and, for a Gaussian pulse of intensity FWHM tau,
    # int = tau sqrt(pi/(2 ln2)) exp(-Delta^2 tau^2/(8 ln2)) (analytic Fourier transform)
    tau = GAUSS.fwhm
    rabi = 1e-3 / tau
    detunings = np.array([0.0, 1.0, 2.5, 4.0]) / tau
    expected = (rabi / 2 * tau * math.sqrt(math.pi / (2 * math.log(2)))
                * np.exp(-detunings**2 * tau**2 / (8 * math.log(2)))) ** 2
    # the staircase of Omega(t) errs by O(h^2), most in the far wing (5e-3 at 4/tau with the default steps)
    out = propagate_bloch(GAUSS, rabi=np.full(4, rabi), detuning=detunings)
    np.testing.assert_allclose(out["excited"], expected, rtol=1e-2)
    fine = propagate_bloch(GAUSS, rabi=np.full(4, rabi), detuning=detunings, steps_per_fwhm=40)
    np.testing.assert_allclose(fine["excited"], expected, rtol=1e-3)


def test_loss_and_dephasing_limits():
    # strong dephasing turns the coherent drive into a rate: for gamma_phi >> Omega the excitation rate is
    # Omega^2/(2 gamma_phi) on resonance and the populations equalise as (1 - e^{-2 R t})/2 (rate
    # equations, Allen & Eberly 1975 ch. 7); a square-like long pulse: flat envelope from the pulse module
    from driven_atom.pulse import PulseComponent

    flat = PulseComponent("flat", omega=0.375, peak_field=1e-6, length=2e5, ramp=10.0)
    envelope = Envelope.from_component(flat, 1e-12)          # time unit 1 ps: 200 ns plateau
    gamma = 1e9
    rabi = 1e7
    rate = rabi**2 / (2 * gamma)
    out = propagate_bloch(envelope, rabi=np.array([rabi]), detuning=np.zeros(1), dephasing=gamma)
    t_eff = envelope.integral(1.0)
    assert out["excited"][0] == pytest.approx(0.5 * (1 - math.exp(-2 * rate * t_eff)), rel=2e-2)
    # ionisation of the upper level at gamma_i with no drive left: what was excited is lost at that rate;
    # with a strong resonant drive both levels share the population: P_ion = 1 - exp(-gamma_i t/2)
    out = propagate_bloch(envelope, rabi=np.array([1e12]), detuning=np.zeros(1), ionization=np.array([1e7]),
                          ionization_power=0.0)
    assert out["ionized"][0] == pytest.approx(1 - math.exp(-1e7 * (envelope.window[1] - envelope.window[0]) / 2),
                                              rel=2e-2)

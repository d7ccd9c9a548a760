"""N-photon perturbation theory from the atom's radial problem (driven_atom.observables.multiphoton):
against closed forms, published two-photon coefficients, the eigenbasis and the TDSE."""
import math

import numpy as np
import pytest

from driven_atom.atom import Atom, State
from driven_atom.atom.photoionization import cross_section, cross_section_sublevel
from driven_atom.observables.multiphoton import (dynamic_polarizability, generalized_cross_section,
                                                 ionization_amplitudes, rate_coefficient, two_photon_coupling)
from driven_atom.units import AU_INTENSITY_WM2, AU_TIME_S, BOHR_M, C_AU, HARTREE_J

H = Atom(1)                  # clamped nucleus, as in the published hydrogen numbers below


@pytest.mark.parametrize("omega", [0.51, 0.8, 2.5])
def test_one_photon_limit_is_the_exact_cross_section(omega):
    # sigma_1s: Stobbe's closed form (Bethe & Salpeter 1957, §71), through the atom layer
    assert generalized_cross_section(H, State(1, 0, 0), omega, photons=1) == \
        pytest.approx(float(cross_section(H, 1, 0, omega)), rel=3e-4)


@pytest.mark.parametrize("m, polarization", [(0, "linear"), (1, "circular+"), (-1, "circular-")])
def test_one_photon_from_2p_sublevels_matches_the_exact_sublevel_cross_section(m, polarization):
    # the sublevel form of sigma (exact radial integrals, Bethe & Salpeter 1957 §69-71) is a
    # different route to the same number
    q = {"linear": 0, "circular+": 1, "circular-": -1}[polarization]
    ours = generalized_cross_section(H, State(2, 1, m), 0.375, photons=1, polarization=polarization)
    assert ours == pytest.approx(float(cross_section_sublevel(H, State(2, 1, m), 0.375, q)), rel=3e-4)


def test_static_and_dynamic_polarizability_of_hydrogen():
    # alpha(0) = 9/2 for H(1s) (Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955), exact)
    assert dynamic_polarizability(H, State(1, 0, 0), 0.0).real == pytest.approx(4.5, rel=1e-4)
    # alpha(omega) against the sum over the bound and box-continuum eigenbasis (cross-method)
    from driven_atom.basis.eigenbasis import build_basis, dynamic_polarizability as by_sum

    basis = build_basis(H, r_max=80.0, dr=0.1, l_max=1, e_max=30.0)
    for omega in (0.2, 0.3):
        assert dynamic_polarizability(H, State(1, 0, 0), omega).real == \
            pytest.approx(float(by_sum(basis, "1s", omega)), rel=1e-3)


def test_imaginary_polarizability_above_threshold_is_the_cross_section():
    # Im alpha = c sigma/(4 pi omega) (optical theorem, common practice): 2s at 243 nm, outgoing waves
    omega = 0.1875
    alpha = dynamic_polarizability(H, State(2, 0, 0), omega)
    assert 4 * math.pi * omega * alpha.imag / C_AU == pytest.approx(float(cross_section(H, 2, 0, omega)), rel=2e-3)


def test_two_photon_1s_2s_coefficients_against_published_values():
    # the coefficients of the hydrogen 1S-2S spectroscopy at 243 nm, per W/m^2 (Haas, Jentschura &
    # Keitel, PRA 73, 052501 (2006); from memory): two-photon Rabi frequency Omega = 2 (2 pi beta_ge) I,
    # beta_ge = 3.68111e-5 Hz m^2/W; ionisation of 2S, Gamma = 2 pi beta_ioni I, beta_ioni = 1.20208e-4;
    # dynamic Stark shift of the line, |beta_AC| = 1.67e-4 (ours: to the blue, 1S down and 2S up by
    # about the ponderomotive energy)
    omega, per_wm2 = 0.1875, 1 / AU_INTENSITY_WM2
    M = two_photon_coupling(H, State(1, 0, 0), State(2, 0), omega)
    rabi_hz = 0.5 * per_wm2 * M / AU_TIME_S / (2 * math.pi)
    assert rabi_hz / 2 == pytest.approx(3.68111e-5, rel=2e-4)
    sigma = float(cross_section(H, 2, 0, omega)) * BOHR_M**2
    assert sigma / (omega * HARTREE_J) / (2 * math.pi) == pytest.approx(1.20208e-4, rel=2e-4)
    shift = (dynamic_polarizability(H, State(2, 0, 0), omega).real
             - dynamic_polarizability(H, State(1, 0, 0), omega).real) * per_wm2 / 4 / AU_TIME_S / (2 * math.pi)
    assert -shift == pytest.approx(1.67e-4, rel=5e-3)


def test_hydrogenic_scaling_of_the_two_photon_rate():
    # rates scale as Z^2 at photon energy Z^2 omega and intensity Z^6 I (common practice: Coulomb
    # scaling), so K_2(Z) = Z^(2 - 12) K_2(1)
    _, k1 = rate_coefficient(H, State(1, 0, 0), 0.3)
    _, k2 = rate_coefficient(Atom(2), State(1, 0, 0), 4 * 0.3)
    assert k2 == pytest.approx(k1 * 2.0**-10, rel=1e-3)


def test_two_photon_amplitude_against_the_eigenbasis_sum():
    # T_2(l_f) = sum_k <f|z|k><k|z|1s>/(E_1s + omega - E_k) over bound and box-continuum states of
    # driven_atom.basis (cross-method), final states energy-normalised with the box density of states
    from driven_atom.basis.eigenbasis import build_basis

    omega = 0.3
    basis = build_basis(H, r_max=120.0, dr=0.1, l_max=2, e_max=40.0)
    z = basis.dipole.toarray()
    i = basis.index("1s")
    E0 = basis.energies[i]
    amp = z @ (z[:, i] / (E0 + omega - basis.energies))         # only l = 1 states couple to 1s
    Ef = E0 + 2 * omega
    reference = 0.0
    for l in (0, 2):
        sel = (basis.n == 0) & (basis.l == l)
        reference += float(np.interp(Ef, basis.energies[sel], amp[sel] ** 2 * basis.dos[sel]))
    ours, _ = ionization_amplitudes(H, State(1, 0, 0), omega)
    assert sum(abs(t) ** 2 for t in ours.values()) == pytest.approx(reference, rel=1e-2)


def test_two_photon_ionisation_agrees_with_a_weak_field_tdse():
    # basis route (driven_atom.routes.propagate) at 8.2 eV, 1e12 W/cm^2: P = K I0^2 int f^4 dt with the
    # sin^2 field envelope, int cos^8 = 35T/128 (analytic); the box holds the slow photoelectrons
    from driven_atom.config import OutputConfig
    from driven_atom.pulse import Pulse
    from driven_atom.routes import propagate
    from driven_atom.settings import BasisSettings

    omega, F0, cycles = 0.3, 0.005, 30
    _, K = rate_coefficient(H, State(1, 0, 0), omega)
    T = cycles * 2 * math.pi / omega
    lopt = K * F0**4 * T * 35 / 128
    settings = BasisSettings(r_max=200.0, dr=0.12, l_max=3, e_max=1.5, cache_dir=None, tolerance=1e-10)
    pulse = Pulse({"envelope": "sin2", "photon_energy": omega, "peak_field": F0, "cycles": cycles})
    tdse = propagate(H, pulse, settings, initial=[(State(1, 0, 0), 1.0)], output=OutputConfig()).ionization
    assert 1e-6 < tdse < 1e-4
    assert lopt == pytest.approx(tdse, rel=0.03)


def test_dalgarno_lewis_sums_agree_with_the_analytic_hydrogenic_sums():
    # two independent second-order methods: Dalgarno-Lewis equations on the radial grid (here, any
    # potential) against the closed-form bound sums plus continuum integrals of atom.twophoton
    # (hydrogen only); the 1S-2S coefficients at 243 nm (Haas et al., PRA 73, 052501 (2006)) from both
    from driven_atom.atom.twophoton import haas_coefficients

    omega, per_wm2 = 0.1875, 1 / AU_INTENSITY_WM2
    analytic = haas_coefficients(H, omega)
    M = two_photon_coupling(H, State(1, 0, 0), State(2, 0), omega)
    assert 0.25 * per_wm2 * M / AU_TIME_S / (2 * math.pi) == pytest.approx(analytic["beta_ge"], rel=5e-4)
    for label, key in ((State(1, 0, 0), "beta_ac_1s"), (State(2, 0, 0), "beta_ac_2s")):
        shift = -dynamic_polarizability(H, label, omega).real * per_wm2 / 4 / AU_TIME_S / (2 * math.pi)
        assert shift == pytest.approx(analytic[key], rel=5e-3), key

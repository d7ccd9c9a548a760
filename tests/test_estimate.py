"""The lab estimate (driven_atom.lab): rates, focal averages, lab inputs, regimes, cross-method checks
against the levels and basis routes, the command line. Sources beside each reference value."""
import json
import math
import subprocess
import sys
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
from scipy.special import gamma

from driven_atom.cli import main
from driven_atom.lab import estimate
from driven_atom.lab.focus import Focus, ProbabilityTable, iso_intensity_volume, rayleigh_length
from driven_atom.lab.rates import _w_m, adk_rate, ppt_exponent, ppt_rate
from driven_atom.lab.temporal import Envelope

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "configs" / "lab" / "kestrel_lyman_alpha.toml"
LYMAN = "121.5684456 nm"          # the model's 1s-2p line (Bohr levels, proton reduced mass)


# -- rates -----------------------------------------------------------------------------------------------
@pytest.mark.parametrize("field", [0.03, 0.05, 0.1])
def test_adk_for_hydrogen_is_landau_rate(field):
    # w = (4/F) exp(-2/(3F)) for H(1s) (Landau & Lifshitz, QM §77)
    assert adk_rate(field, 0.5, 1) == pytest.approx(4 / field * math.exp(-2 / (3 * field)), rel=1e-12)


def test_adk_general_state_against_the_formula_with_scipy_gamma():
    # 2p0 of H: Ip = 1/8, n* = 2, l* = 1, l = 1, m = 0 (Ammosov, Delone & Krainov 1986, with scipy's Gamma)
    ip, F = 0.125, 0.004
    n, ls, f0 = 2.0, 1.0, (2 * ip) ** 1.5
    c2 = 2 ** (2 * n) / (n * gamma(n + ls + 1) * gamma(n - ls))
    expected = c2 * 3 * ip * (2 * f0 / F) ** (2 * n - 1) * math.exp(-2 * f0 / (3 * F))
    assert adk_rate(F, ip, 1, l=1, m=0) == pytest.approx(expected, rel=1e-12)
    # hydrogenic scaling w_Z(F) = Z^2 w_1(F/Z^3) (common practice: Coulomb scaling laws)
    assert adk_rate(0.4, 2.0, 2) == pytest.approx(4 * adk_rate(0.4 / 8, 0.5, 1), rel=1e-12)


@pytest.mark.parametrize("field", [0.03, 0.05, 0.1])
def test_ppt_tends_to_the_cycle_averaged_adk_rate_at_low_frequency(field):
    # gamma -> 0: PPT (Perelomov, Popov & Terent'ev 1966) -> ADK (1986) times sqrt(3F/(pi F0)) (docs/physics.md)
    omega = 0.005 * field                                # gamma = omega sqrt(2 Ip)/F = 0.005
    expected = adk_rate(field, 0.5, 1) * math.sqrt(3 * field / math.pi)
    assert ppt_rate(field, omega, 0.5, 1) == pytest.approx(expected, rel=2e-4)


def test_ppt_special_function_and_multiphoton_regime():
    from scipy.special import dawsn
    import mpmath

    x = np.array([0.3, 1.0, 4.0, 12.0])
    np.testing.assert_allclose(_w_m(x, 0), dawsn(x), rtol=1e-14)                  # scipy reference
    for xi in (0.5, 2.0, 6.0):                                                   # mpmath quadrature of the definition
        ref = xi**3 / 2 * mpmath.quad(lambda t: mpmath.exp(-xi**2 * t) * t / mpmath.sqrt(1 - t), [0, 1])
        assert float(_w_m(np.array([xi]), 1)[0]) == pytest.approx(float(ref), rel=1e-8)
    # gamma >> 1: w ~ I^K with K = 5 photons of 3.1 eV for 13.6 eV (common practice)
    f1, f2 = math.sqrt(1e11 / 3.50945e16), math.sqrt(2e11 / 3.50945e16)
    slope = math.log(ppt_rate(f2, 0.1139, 0.5, 1) / ppt_rate(f1, 0.1139, 0.5, 1)) / math.log(2)
    assert slope == pytest.approx(5, abs=0.1)


def test_envelope_rate_matches_the_instantaneous_field_for_long_mid_infrared_pulses():
    # at gamma ~ 0.01 the cycle-averaged rate along the envelope equals ADK integrated over the
    # instantaneous field F0 sqrt(f) cos(omega t) (ADK 1986; the averaging is asymptotic in F/F0)
    from driven_atom.units import AU_TIME_S

    omega, F0 = 0.00228, 0.05                               # 20 um
    env = Envelope("gaussian", 20 * 2 * math.pi / omega * AU_TIME_S)
    t, w = env.nodes(per_fwhm=20 * 64)
    field = F0 * np.sqrt(env.intensity(t)) * np.cos(omega * t / AU_TIME_S)
    direct = float(adk_rate(field, 0.5, 1) @ w) / AU_TIME_S
    assert float(ppt_exponent(env, F0, omega, 0.5, 1)(1.0)) == pytest.approx(direct, rel=0.02)


# -- focus and counts -----------------------------------------------------------------------------------
def test_iso_intensity_volume_and_focal_counts_against_scipy_quadrature():
    from scipy import integrate

    w0, zr = 20e-6, 1.5e-3
    focus = Focus("gaussian", w0, math.pi * w0**2 / zr)

    def w2(z):
        return w0**2 * (1 + (z / zr) ** 2)

    zmax = zr * math.sqrt(3.0)                               # volume inside I = I0/4: quad of the area
    reference, _ = integrate.quad(lambda z: math.pi * w2(z) / 2 * math.log(4 * w0**2 / w2(z)), -zmax, zmax,
                                  epsrel=1e-12)
    assert iso_intensity_volume(4.0, w0, zr) == pytest.approx(reference, rel=1e-10)
    # a smooth saturating P(s) = 1 - exp(-(s/0.3)^3): scipy.integrate.dblquad over r and z
    s = np.geomspace(1e-6, 1e2, 400)
    table = ProbabilityTable(s, -np.expm1(-((s / 0.3) ** 3)))
    length, n = 4 * zr, 1e18
    reference, _ = integrate.dblquad(
        lambda r, z: 2 * math.pi * r * -math.expm1(-((w0**2 / w2(z) * math.exp(-2 * r**2 / w2(z)) / 0.3) ** 3)),
        -length / 2, length / 2, 0.0, lambda z: 3 * math.sqrt(w2(z)), epsrel=1e-8)
    assert focus.counts(table, n, length=length)["count"] == pytest.approx(n * reference, rel=1e-3)
    # P = k s (one photon, unsaturated): N = n k (pi w0^2/2) L for any focus (power through each plane)
    linear = ProbabilityTable(s, 1e-3 * s)
    assert focus.counts(linear, n, length=5 * zr)["count"] == pytest.approx(n * 1e-3 * math.pi * w0**2 / 2 * 5 * zr,
                                                                            rel=1e-3)
    # z_R = pi w0^2/(M^2 lambda) (Siegman, Lasers (1986))
    assert rayleigh_length(w0, 800e-9, m2=1.3) == pytest.approx(math.pi * w0**2 / (1.3 * 800e-9), rel=1e-15)


def test_flat_and_sheet_focus_counts():
    # top-hat: every atom sees I0; sheet: n H L int P(exp(-2x^2/w^2)) dx, for P = k s that is
    # n H L k w sqrt(pi/2) (Gaussian integral)
    s = np.geomspace(1e-8, 1e2, 300)
    table = ProbabilityTable(s, 1e-3 * s)
    flat = Focus("top-hat", 1e-4, 5e-7).counts(table, 1e18, length=1e-3)
    assert flat["count"] == pytest.approx(1e18 * math.pi * 1e-8 * 1e-3 * 1e-3, rel=1e-9)
    sheet = Focus("sheet", 1e-5, 5e-7, height=2e-3).counts(table, 1e18, length=1e-3)
    assert sheet["count"] == pytest.approx(1e18 * 2e-3 * 1e-3 * 1e-3 * 1e-5 * math.sqrt(math.pi / 2), rel=1e-4)


def test_peak_intensity_of_a_gaussian_pulse_in_a_gaussian_focus():
    # I0 = 0.94 * 2E/(pi w0^2 tau_FWHM) (common practice; 0.9394 = 2 sqrt(ln2/pi))
    out = estimate(species="H", wavelength="800 nm", pulse_energy="1 mJ", fwhm="30 fs", waist="25 um")
    plain = 2 * 1e-3 / (math.pi * (25e-4) ** 2 * 30e-15)          # W/cm^2
    assert out["peak_intensity_Wcm2"] == pytest.approx(0.94 * plain, rel=1e-3)
    assert out["peak_intensity_Wcm2"] == pytest.approx(2 * math.sqrt(math.log(2) / math.pi) * plain, rel=1e-12)
    # the same pulse from an average power and a repetition rate, a spot FWHM, a lens (waist formulas:
    # w0 = d/sqrt(2 ln2), w0 = 2 M^2 lambda f/(pi D); Siegman (1986))
    same = estimate(species="H", wavelength="800 nm", power="1 W", rep_rate="1 kHz", fwhm="30 fs",
                    focus_fwhm=f"{25 * math.sqrt(2 * math.log(2))!r} um")
    assert same["peak_intensity_Wcm2"] == pytest.approx(out["peak_intensity_Wcm2"], rel=1e-12)
    lens = estimate(species="H", wavelength="800 nm", pulse_energy="1 mJ", fwhm="30 fs", beam_diameter="8 mm",
                    focal_length="200 mm", m2=1.2)
    assert lens["waist_m"] == pytest.approx(2 * 1.2 * 800e-9 * 0.2 / (math.pi * 8e-3), rel=1e-12)
    # sech^2 pulses: I0 = 0.88 E/(A tau) (common practice; 0.8814 = ln(1 + sqrt2))
    sech = estimate(species="H", wavelength="800 nm", pulse_energy="1 mJ", fwhm="30 fs", waist="25 um", shape="sech2")
    assert sech["peak_intensity_Wcm2"] == pytest.approx(math.log(1 + math.sqrt(2)) * plain, rel=1e-12)


# -- lab inputs ----------------------------------------------------------------------------------------
def test_pressure_in_torr_at_20_degc_gives_the_ideal_gas_density():
    # n = p/(k_B T) (ideal gas); 1 Torr = 101325/760 Pa and 20 degC = 293.15 K (definitions), k_B from scipy
    from scipy.constants import k as boltzmann

    out = estimate(species="H", wavelength="800 nm", intensity="1e12 W/cm^2", fwhm="30 fs", pressure="1e-6 Torr",
                   temperature="20 degC")
    expected = 1e-6 * 101325 / 760 / (boltzmann * 293.15) * 1e-6          # cm^-3
    assert out["inputs"]["density_cm3"] == pytest.approx(expected, rel=1e-6)
    assert out["inputs"]["given"]["pressure"] == "1e-6 Torr" and out["inputs"]["temperature_K"] == 293.15
    for spelling in ("20 °C", "68 degF", "293.15 K"):
        again = estimate(species="H", wavelength="800 nm", intensity="1e12 W/cm^2", fwhm="30 fs",
                         pressure="0.133322 mPa", temperature=spelling)
        assert again["inputs"]["temperature_K"] == pytest.approx(293.15, rel=1e-12)


def test_doppler_width_of_hydrogen_at_300_k_in_the_resonance_block():
    # FWHM 2 omega/c sqrt(2 ln2 k T/m) (common practice), m = m(1H) = 1.00782503223 u (NIST, AME2020)
    from scipy.constants import c, k, physical_constants

    out = estimate(species="H", wavelength=LYMAN, intensity="1e3 W/cm^2", fwhm="5 ns", temperature="300 K")
    m = 1.00782503223 * physical_constants["atomic mass constant"][0]
    nu = c / 121.5684456e-9
    expected = 2 * nu / c * math.sqrt(2 * math.log(2) * k * 300 / m) / 1e9          # GHz
    assert out["regime"] == "resonant"
    assert out["resonance"]["doppler_fwhm_GHz"] == pytest.approx(expected, rel=1e-6)


def test_every_input_is_echoed_converted_and_flags_override_the_file(tmp_path):
    out = estimate(DEMO, pulse_energy="2 uJ", volume="1 mm^3", length=None)
    given = out["inputs"]["given"]
    assert given["pulse_energy"] == "2 uJ" and out["inputs"]["pulse_energy_J"] == pytest.approx(2e-6, rel=1e-12)
    assert out["inputs"]["waist_m"] == pytest.approx(10e-6, rel=1e-12)
    assert out["inputs"]["beam_velocity_ms"] == 2500.0 and out["inputs"]["linewidth_Hz"] == 3e8
    # a group replaced by a flag: the file's pulse energy gives way to an intensity
    other = estimate(DEMO, intensity="1e9 W/cm^2")
    assert other["peak_intensity_Wcm2"] == pytest.approx(1e9, rel=1e-12) and "pulse_energy" not in other["inputs"]["given"]
    # a run configuration's atom and pulse, no [solver]: the estimate reads them
    run = {"atom": {"nucleus": "H", "initial": "1s"},
           "pulse": [{"envelope": "gaussian", "wavelength": LYMAN, "intensity": "1e8 W/cm^2", "fwhm": "2 ns"}]}
    from_run = estimate(run, temperature="0 K")
    direct = estimate(species="H", wavelength=LYMAN, intensity="1e8 W/cm^2", fwhm="2 ns", temperature="0 K")
    assert from_run["probability_peak"] == pytest.approx(direct["probability_peak"], rel=1e-9)


@pytest.mark.parametrize("keys, fragment", [
    ({"pulse_energy": "-2 mJ"}, "`--pulse-energy`: must be > 0 J"),
    ({"waist": "10 s"}, "`--waist`: must be a length"),
    ({"species": None}, "`species` is required"),
    ({"species": "Xx"}, "species` must be a hydrogen-like atom or ion"),
    ({"pressure": "3 kg"}, "`--pressure`: must be a pressure"),
    ({"density": "1e12 cm^-3", "pressure": "1 mbar"}, "exclude each other"),
    ({"m2": 0.5}, "`--m2`"),
    ({"photon_energy": "2 mJ"}, "past the dipole approximation"),        # the key an old hint led to
    ({"waist": "0.1 um"}, "relativistic"),
])
def test_bad_lab_input_is_one_line(keys, fragment):
    from driven_atom.errors import InputError

    base = {"species": "H", "wavelength": "800 nm", "pulse_energy": "1 mJ", "fwhm": "30 fs", "waist": "25 um"}
    if "photon_energy" in keys:
        base.pop("wavelength")
    with pytest.raises(InputError) as info:
        estimate(**{**base, **keys})
    assert fragment in str(info.value) and "\n" not in str(info.value)


# -- regimes -------------------------------------------------------------------------------------------
def test_one_photon_ionisation_follows_the_golden_rule_over_the_pulse_spectrum():
    # 20 eV, 20-cycle sin^2 pulse: the estimate's spectrum-averaged sigma times the photon fluence against
    # the golden rule over the exact pulse spectrum (driven_atom.observables.perturbation)
    from driven_atom.atom import Atom
    from driven_atom.observables.perturbation import first_order_ionization
    from driven_atom.pulse import Pulse

    pulse = {"envelope": "sin2", "photon_energy": "20 eV", "intensity": "1e13 W/cm^2", "cycles": 20}
    out = estimate({"atom": {"nucleus": "infinite", "Z": 1}, "pulse": [pulse]})
    p1 = first_order_ionization(Atom(1), Pulse(pulse), "1s")
    assert out["regime"] == "one-photon"
    assert out["probability_peak"] == pytest.approx(-math.expm1(-p1), rel=1e-2)
    assert out["saturation_intensity_Wcm2"] == pytest.approx(1e13 / p1, rel=1e-2)


def test_tunnelling_regime_and_saturation_intensity():
    out = estimate(species="H", wavelength="2000 nm", intensity="1e14 W/cm^2", fwhm="20 fs", waist="30 um",
                   density="1e12 cm^-3", length="1 mm")
    assert out["regime"] == "tunnelling" and out["keldysh"] < 1
    at_saturation = estimate(species="H", wavelength="2000 nm", intensity=f"{out['saturation_intensity_Wcm2']!r} W/cm^2",
                             fwhm="20 fs")
    assert at_saturation["probability_peak"] == pytest.approx(1 - math.exp(-1), rel=1e-3)   # P = 1 - 1/e there
    assert 0 < out["ions_per_shot"] < out["atoms_in_volume"] * 10


def test_multiphoton_regime_uses_perturbation_theory_and_reports_ppt_beside_it():
    out = estimate(species="H", wavelength="150 nm", intensity="1e11 W/cm^2", fwhm="100 fs")
    assert out["regime"] == "multiphoton" and out["photons"] == 2 and "perturbation theory" in out["method"]
    assert "PPT" in out["alternatives"]
    # P = 1 - exp(-K I^2 int f^2 dt), int f^2 dt = tau sqrt(pi/(8 ln2)) for a Gaussian (analytic)
    from driven_atom.atom import Atom, State
    from driven_atom.observables.multiphoton import rate_coefficient
    from driven_atom.units import AU_INTENSITY_WCM2, AU_TIME_S, wavelength_nm_to_photon_energy

    _, K = rate_coefficient(Atom.from_name("H"), State(1, 0, 0), wavelength_nm_to_photon_energy(150.0))
    exponent = K * (1e11 / AU_INTENSITY_WCM2) ** 2 * 100e-15 * math.sqrt(math.pi / (8 * math.log(2))) / AU_TIME_S
    assert out["probability_peak"] == pytest.approx(-math.expm1(-exponent), rel=1e-9)


@pytest.mark.parametrize("order, wavelength", [(2, "150 nm"), (3, "260 nm")])
def test_yield_slope_is_the_photon_order_then_three_halves(order, wavelength):
    # the ion count against the pulse energy grows as E^N below saturation and as E^(3/2) above it in a
    # Gaussian focus inside a long gas column (common practice)
    base = {"species": "H", "wavelength": wavelength, "fwhm": "100 fs", "waist": "20 um", "density": "1e12 cm^-3"}
    low = estimate(**base, pulse_energy="1 nJ", length="1 m")
    assert low["regime"] == "multiphoton" and low["photons"] == order and not low["saturated"]
    assert low["slope"] == pytest.approx(order, abs=0.03)
    high = estimate(**base, pulse_energy="30 mJ", length="100 m")
    assert high["saturated"] and high["slope"] == pytest.approx(1.5, abs=0.08)
    assert "I^(3/2)" in high["saturation"]


@pytest.mark.parametrize("area", [math.pi / 2, math.pi])
def test_resonant_pulse_area_against_the_levels_route(area, tmp_path):
    # P = sin^2(theta/2) on resonance (Allen & Eberly 1975); the levels route (qutip) is the reference
    from driven_atom.api import run

    d = 2**7 * math.sqrt(2) / 3**5                     # <1s|z|2p0>, infinite nuclear mass (Bethe & Salpeter 1957)
    F0 = 1e-3
    cfg = {"atom": {"Z": 1, "nucleus": "infinite", "initial": "1s"},
           "pulse": [{"envelope": "sin2", "photon_energy": 0.375, "peak_field": F0, "length": 2 * area / (d * F0)}],
           "solver": {"route": "levels", "states": ["1s", "2p"], "ionization_loss": True}}
    out = estimate(cfg, temperature="0 K")
    assert out["resonance"]["line"] == "1s-2p" and out["resonance"]["pulse_area_rad"] == pytest.approx(area, rel=1e-6)
    full = run(cfg, out=tmp_path, progress=False)
    assert out["excitation_peak"] == pytest.approx(math.sin(area / 2) ** 2, abs=2e-3)
    assert out["excitation_peak"] == pytest.approx(full.populations["2p"], abs=1e-3)


@lru_cache(maxsize=None)
def _levels_lyman(intensity: float):
    """The levels route on Lyman-alpha, 2 ns Gaussian, decay and ionisation loss (cached)."""
    from driven_atom.atom import Atom
    from driven_atom.config import OutputConfig
    from driven_atom.pulse import Pulse
    from driven_atom.routes import propagate
    from driven_atom.settings import LevelsSettings
    from driven_atom.atom import State

    H = Atom.from_name("H")
    pulse = Pulse({"envelope": "gaussian", "wavelength": LYMAN, "intensity": f"{intensity!r} W/cm^2", "fwhm": "2 ns"},
                  atom=H)
    return propagate(H, pulse, LevelsSettings(states=["1s", "2p"], ionization_loss=True),
                     initial=[(State(1, 0, 0), 1.0)], output=OutputConfig())


@pytest.mark.parametrize("intensity", [1e6, 1e7, 1e8, 1e9])
def test_lyman_alpha_1_plus_1_against_the_levels_route(intensity):
    # Lyman-alpha on H(1s), 2 ns FWHM, atoms at rest: the levels route with ionization_loss = true
    # (a qutip master equation) is the reference.
    from driven_atom.atom import Atom, State
    from driven_atom.atom.photoionization import cross_section, cross_section_sublevel
    from driven_atom.lab.inputs import lab_case
    from driven_atom.lab.physics import _coupling, _line_data
    from driven_atom.atom.resonance import nearest_lines
    from driven_atom.lab.bloch import propagate_bloch
    from driven_atom.units import wavelength_nm_to_photon_energy

    full = _levels_lyman(intensity)
    out = estimate(species="H", wavelength=LYMAN, intensity=f"{intensity!r} W/cm^2", fwhm="2 ns", temperature="0 K")
    assert out["regime"] == "resonant" and out["method"].startswith("resonant 1+1")
    # the bar: excitation and ionisation within 30 %. Both ionise 2p0 with the cross section of
    # that sublevel in z-polarised light (1.31 x the m-averaged one at Lyman-alpha, analytic; the basis
    # route below confirms it)
    H = Atom.from_name("H")
    omega = wavelength_nm_to_photon_energy(121.5684456)
    ratio = float(cross_section_sublevel(H, State(2, 1, 0), omega, 0)) / float(cross_section(H, 2, 1, omega))
    assert ratio == pytest.approx(1.306, abs=0.002)
    assert out["probability_peak"] == pytest.approx(full.ionization, rel=0.30)
    assert out["excitation_peak"] == pytest.approx(full.populations["2p"], rel=0.30)
    # and the Bloch equations themselves, with the route's cross section, within 1 %
    case = lab_case(species="H", wavelength=LYMAN, intensity=f"{intensity!r} W/cm^2", fwhm="2 ns", temperature="0 K")
    line = nearest_lines(case.atom, case.state, case.photon_energy)[1]
    data = _line_data(case, line, _coupling(case, line))
    bloch = propagate_bloch(case.envelope, rabi=data.rabi, detuning=line.detuning / 2.4188843265864e-17,
                            decay=data.decay, ionization=data.ionization)
    assert float(bloch["ionized"][0]) == pytest.approx(full.ionization, rel=0.01)
    assert float(bloch["excited"][0]) == pytest.approx(full.populations["2p"], rel=0.02)


@pytest.mark.parametrize("intensity", [1e12, 1e13])
def test_short_lyman_alpha_pulse_against_the_basis_route(intensity):
    # a 5 fs sin^2 Lyman-alpha pulse on H(1s) at rest: the TDSE in bound + box-continuum states (basis
    # route) resolves 1s-2p Rabi flopping and the ionisation of 2p by the next photon. (A picosecond
    # pulse would need a box of ~1e4 bohr to keep the photoelectron away from the wall, 2R > vT.)
    from driven_atom.atom import Atom, State
    from driven_atom.config import OutputConfig
    from driven_atom.pulse import Pulse
    from driven_atom.routes import propagate
    from driven_atom.settings import BasisSettings

    H = Atom.from_name("H")
    table = {"envelope": "sin2", "wavelength": LYMAN, "intensity": f"{intensity!r} W/cm^2", "fwhm": "5 fs"}
    out = estimate({"atom": {"nucleus": "H"}, "pulse": [table]}, temperature="0 K")
    settings = BasisSettings(r_max=300.0, dr=0.15, l_max=3, e_max="40 eV", cache_dir=None)
    tdse = propagate(H, Pulse(table, atom=H), settings, initial=[(State(1, 0, 0), 1.0)], output=OutputConfig())
    assert out["regime"] == "resonant"
    assert out["excitation_peak"] == pytest.approx(tdse.populations["2p"], rel=0.30)
    assert out["probability_peak"] == pytest.approx(tdse.ionization, rel=0.30)


def test_two_photon_resonance_2_plus_1_at_243_nm():
    out = estimate(species="H", wavelength="243.13689 nm", pulse_energy="1 mJ", fwhm="5 ns", waist="50 um",
                   temperature="300 K")
    res = out["resonance"]
    assert out["regime"] == "resonant" and res["line"] == "1s-2s" and res["photons"] == 2
    assert out["method"].startswith("resonant 2+1") and res["light_shift_GHz"] < 0
    # two-photon Doppler width, one beam: twice the one-photon FWHM 2 omega/c sqrt(2 ln2 kT/m) at 243 nm
    # (common practice), m(1H) = 1.00782503223 u (NIST, AME2020)
    from scipy.constants import c, k, physical_constants

    m = 1.00782503223 * physical_constants["atomic mass constant"][0]
    one_photon = 2 * (c / 243.13689e-9) / c * math.sqrt(2 * math.log(2) * k * 300 / m) / 1e9
    assert res["doppler_fwhm_GHz"] == pytest.approx(2 * one_photon, rel=1e-6)


def test_static_field_configuration_uses_adk_over_ramp_and_plateau():
    # exponent between w(F)(T - R) and w(F) T, w = Landau's rate for H(1s) (Landau & Lifshitz, QM §77)
    cfg = {"atom": {"Z": 1, "nucleus": "infinite", "initial": "1s"},
           "pulse": [{"envelope": "static", "peak_field": 0.04, "ramp": 50.0, "length": 400.0}]}
    out = estimate(cfg, waist="10 um")
    rate = 4 / 0.04 * math.exp(-2 / (3 * 0.04))
    exponent = -math.log1p(-out["probability_peak"])
    assert out["regime"] == "static field" and rate * 350 < exponent < rate * 400
    assert any("no focus" in note for note in out["notes"])


def test_structured_run_configuration_is_read_at_its_bohr_level():
    # a fine-structure initial component and static fields: the estimate names what it leaves out and
    # gives the Bohr level's numbers
    pulse = [{"envelope": "gaussian", "wavelength": LYMAN, "intensity": "1e8 W/cm^2", "fwhm": "2 ns"}]
    fine = estimate({"atom": {"nucleus": "H", "structure": "fine", "initial": "1s1/2"},
                     "fields": {"magnetic": "5 G"}, "pulse": pulse}, temperature="0 K")
    bohr = estimate({"atom": {"nucleus": "H", "initial": "1s"}, "pulse": pulse}, temperature="0 K")
    assert fine["probability_peak"] == pytest.approx(bohr["probability_peak"], rel=1e-12)
    assert any("Bohr level 1s" in n for n in fine["notes"]) and any("[fields]" in n for n in fine["notes"])


def test_two_colour_configuration_follows_one_laser():
    out = estimate(REPO / "configs" / "levels_ladder_3d.toml", waist="100 um", density="1e10 cm^-3", length="1 mm")
    assert out["resonance"]["line"] == "1s-2p" and out["probability_peak"] < 1e-8
    assert any("follows pulse.0" in note for note in out["notes"])


# -- refinement by the routes --------------------------------------------------------------------------
def test_table_from_a_campaign_replaces_the_formulas(tmp_path):
    import driven_atom

    config = {"atom": {"nucleus": "H", "initial": "1s"},
              "pulse": [{"envelope": "gaussian", "wavelength": LYMAN, "intensity": "1e8 W/cm^2", "fwhm": "50 ps"}],
              "solver": {"route": "levels", "states": ["1s", "2p"], "ionization_loss": True},
              "scan": {"pulse.0.intensity": {"from": "1e8 W/cm^2", "to": "1e10 W/cm^2", "num": 3, "spacing": "log"},
                       "pulse.0.wavelength": ["121.5680 nm", "121.5689 nm"]}}
    from concurrent.futures import ThreadPoolExecutor

    folder = tmp_path / "camp"
    with ThreadPoolExecutor(1) as pool:                     # in this process: no worker start-up
        driven_atom.scan(config, folder, executor=pool, progress=False)
    ds = driven_atom.open_campaign(folder)
    jobs = ds["ionization"].sel({"pulse.0.intensity": 1e9}, method="nearest").values
    lab = {"species": "H", "fwhm": "50 ps", "temperature": "0 K", "intensity": "1e9 W/cm^2", "waist": "20 um",
           "density": "1e10 cm^-3", "length": "2 mm"}
    # at a scanned point the table returns the job's own number (interpolation through the nodes) ...
    out = estimate(lab=lab, wavelength="121.5680 nm", table=folder)
    assert out["method"].startswith("campaign table") and out["probability_peak"] == pytest.approx(jobs[0], rel=1e-9)
    # ... between two wavelengths the linear interpolation in photon energy (the midpoint within 1e-6)
    mid = estimate(lab=lab, wavelength="121.56845 nm", table=folder)
    assert mid["probability_peak"] == pytest.approx(0.5 * (jobs[0] + jobs[1]), rel=1e-4)
    assert mid["ions_per_shot"] > 0 and any("interpolated to the laser's photon energy" in n for n in mid["notes"])
    from driven_atom.errors import InputError

    with pytest.raises(InputError, match="the campaign covers photon energies"):
        estimate(lab=lab, wavelength="121.6 nm", table=folder)


def test_check_runs_the_route_the_regime_calls_for(capsys):
    assert main(["estimate", str(DEMO), "--pulse-energy", "0.2 uJ", "--check"]) == 0
    out = capsys.readouterr().out
    assert "check with the levels route" in out and "(estimate) vs" in out and "(levels route)" in out


# -- the command --------------------------------------------------------------------------------------
CONTRACT = ["peak_intensity_Wcm2", "keldysh", "regime", "method", "probability_peak", "excitation_peak",
            "fraction_volume_averaged", "ions_per_shot", "excited_per_shot", "saturation_intensity_Wcm2", "saturated",
            "resonance", "inputs", "warnings", "caution"]


def test_demo_report_and_json_contract(capsys, tmp_path):
    assert main(["estimate", str(DEMO), "--json", "--plot", str(tmp_path / "yield.png")]) == 0
    captured = capsys.readouterr()
    data = json.loads(captured.out)                               # stdout: exactly one JSON object
    assert all(key in data for key in CONTRACT)
    for key in ("line", "detuning_GHz", "detuning_nm", "rabi_frequency_GHz", "pulse_area_rad", "doppler_fwhm_GHz",
                "laser_linewidth_GHz"):
        assert key in data["resonance"]
    assert data["saturated"] and data["ions_per_shot"] > 0 and data["excited_per_shot"] > 0
    assert 0 < data["excited_fraction_volume_averaged"] < 1 and 0 < data["fraction_volume_averaged"] < 1
    assert data["ions_per_second"] == pytest.approx(10 * data["ions_per_shot"], rel=1e-9)     # 10 Hz
    assert data["caution"] in captured.err and "not a safety assessment" in data["caution"]
    assert (tmp_path / "yield.png").stat().st_size > 0 and "curve" not in data
    assert main(["estimate", str(DEMO)]) == 0
    text = capsys.readouterr().out
    assert "method: resonant 1+1" in text and "resonance 1s-2p" in text and "saturated at the focus centre" in text


@pytest.mark.parametrize("path", sorted((REPO / "configs" / "lab").glob("*.toml")), ids=lambda p: p.name)
def test_shipped_lab_tables_hold_only_lab_numbers(path):
    # configs/lab: estimate inputs, kept apart from the run configurations of configs/
    import tomllib

    from driven_atom.errors import InputError
    from driven_atom.routes import load_config

    assert set(tomllib.loads(path.read_text())) == {"lab"}
    out = estimate(path)
    assert all(isinstance(v, str) for k, v in out["inputs"]["given"].items() if k not in ("species", "state",
                                                                                          "polarization"))
    with pytest.raises(InputError, match="is required"):
        load_config(path)                          # a lab table is not a run (no [atom], no [solver])


def test_caution_depends_on_the_numbers():
    strong = estimate(species="He+", wavelength="800 nm", pulse_energy="50 mJ", fwhm="30 fs", waist="100 um")
    assert strong["caution"].startswith("CAUTION: class-4 laser numbers: 50 mJ pulses")
    assert f"{strong['peak_power_W']:.3g} W" in strong["caution"]
    weak = estimate(species="He+", wavelength="800 nm", pulse_energy="5 uJ", fwhm="30 fs", waist="100 um")
    assert "class-4" not in weak["caution"]
    assert estimate(species="He+", wavelength="800 nm", intensity="1e12 W/cm^2", fwhm="30 fs")["caution"] is None
    gas = estimate(species="T", wavelength="800 nm", intensity="1e12 W/cm^2", fwhm="30 fs", density="1e10 cm^-3")
    assert "radioactive" in gas["caution"] and "flammable" in gas["caution"]


@pytest.mark.parametrize("options, field", [
    (["--pulse-energy", "-2 mJ"], "--pulse-energy"), (["--waist", "10 s"], "--waist"),
    (["--species", "Xx"], "species"), (["--m2", "abc"], "--m2"), (["--plot", "y.txt"], "--plot")])
def test_cli_bad_input_is_one_line_and_exit_2(options, field, capsys):
    assert main(["estimate", str(DEMO), *options]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and field in err


def test_cli_without_species_names_it(capsys):
    assert main(["estimate", "--wavelength", "800 nm", "--intensity", "1e13 W/cm^2", "--fwhm", "30 fs"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "`species` is required" in err


def test_cold_estimate_imports_neither_numba_nor_qutip():
    code = ("import sys; from driven_atom.cli import main; main(['estimate', %r, '--json']); "
            "print('loaded:', ' '.join(sorted(m for m in ('numba', 'qutip', 'pint', 'matplotlib') if m in sys.modules)))"
            % str(DEMO))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.splitlines()[-1].strip() == "loaded:"


@pytest.mark.slow
def test_ppt_estimate_is_near_the_full_tdse_for_hydrogen_at_800_nm(tmp_path):
    # 8-cycle 800 nm pulse at 1e14 W/cm^2 (gamma = 1.07, between the regimes): the quick PPT estimate
    # against the grid route's TDSE solution of the same config (measured: 1.53 % vs 1.37 %)
    from driven_atom.api import run

    config = REPO / "configs" / "kestrel_ir_grid.toml"
    full = run(config, out=tmp_path, progress=False)
    quick = estimate(config)
    assert quick["regime"] == "multiphoton"
    assert 1 / 1.5 < quick["probability_peak"] / full.ionization < 1.5

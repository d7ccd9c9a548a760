"""Pulses: fields from the vector potential, envelopes, spectra and derived lab quantities."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize

from driven_atom.atom import Atom
from driven_atom.pulse import PulseComponent, Pulse, derived_quantities, gaussian_shape
from driven_atom.units import AU_INTENSITY_WCM2, AU_TIME_S, HARTREE_EV, wavelength_nm_to_photon_energy

FS = 1e-15 / AU_TIME_S          # one femtosecond in atomic units of time


def one(**keys) -> PulseComponent:
    return Pulse(keys).components[0]


# --- lab quantities -----------------------------------------------------------------------------
def test_ponderomotive_energy_800nm_1e14():
    # Up[eV] = 9.3373e-14 * I[W/cm^2] * lambda[um]^2 -> 5.976 eV at 800 nm, 1e14 W/cm^2 (common practice)
    d = derived_quantities(Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 8}))
    row = d["pulses"][0]
    assert row["Up_eV"] == pytest.approx(9.3373e-14 * 1e14 * 0.8**2, rel=2e-4)
    assert row["Up_eV"] == pytest.approx(5.976, abs=1e-3)
    # Up = F0^2 / (4 omega^2) in atomic units (analytic)
    c = Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 8}).components[0]
    assert row["Up_eV"] / HARTREE_EV == pytest.approx(c.peak_field**2 / (4 * c.omega**2), rel=1e-14)
    assert row["quiver_au"] == pytest.approx(c.peak_field / c.omega**2, rel=1e-14)


def test_keldysh_parameter_hydrogen():
    # gamma = sqrt(Ip / (2 Up)) (Keldysh 1965); Ip(H) = 13.59844 eV (NIST ASD), Up = 5.976 eV (common practice)
    atom = Atom.from_name("H")
    d = derived_quantities(Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 8}), atom)
    assert d["pulses"][0]["keldysh"] == pytest.approx(math.sqrt(13.59844 / (2 * 5.976)), rel=3e-4)
    # gamma = omega sqrt(2 Ip) / F0 is the same number (analytic)
    c = Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 8}).components[0]
    gamma = c.omega * math.sqrt(2 * atom.ionization_potential) / c.peak_field
    assert d["pulses"][0]["keldysh"] == pytest.approx(gamma, rel=1e-13)


def test_intensity_to_field_uses_codata_atomic_unit():
    # atomic unit of intensity 3.50945e16 W/cm^2 = 1/2 c eps0 (5.14220674763e11 V/m)^2 (CODATA 2018)
    assert AU_INTENSITY_WCM2 == pytest.approx(3.50945e16, rel=2e-6)
    c = one(wavelength="800 nm", intensity="3.50945e16 W/cm^2", cycles=2)
    assert c.peak_field == pytest.approx(1.0, rel=2e-6)
    # 800 nm <-> 1.5498 eV: E[eV] = 1239.84198 / lambda[nm] (CODATA hc)
    assert c.omega * HARTREE_EV == pytest.approx(1239.84198 / 800, rel=1e-8)


def test_circular_light_carries_twice_the_intensity():
    # convention of docs/physics.md: amplitude F0 in each of x and y -> I = 2 F0^2 (a.u.)
    lin = one(wavelength="800 nm", intensity="1e14 W/cm^2", cycles=4)
    circ = one(wavelength="800 nm", intensity="1e14 W/cm^2", cycles=4, polarization="circular+")
    assert circ.peak_field == pytest.approx(lin.peak_field / math.sqrt(2), rel=1e-14)
    assert circ.intensity == pytest.approx(lin.intensity, rel=1e-14)


@pytest.mark.parametrize("eta", [-1.0, -0.4, 0.0, 0.7, 1.0])
def test_elliptical_light_intensity_limits_and_sense(eta):
    # ε = (1, iη, 0), I = (1 + η²) F0² (a.u.); the intensity key fixes the total (common practice)
    keys = dict(envelope="flat", wavelength="800 nm", intensity="1e14 W/cm^2", cycles=40, ramp="5 fs")
    lin = one(**keys)
    ell = one(**keys, polarization="elliptical", ellipticity=eta)
    assert ell.peak_field == pytest.approx(lin.peak_field / math.sqrt(1 + eta**2), rel=1e-14)
    period = 2 * math.pi / ell.omega                     # cycle average of |E|^2 on the plateau = I/2 (a.u.)
    t = np.linspace(-period / 2, period / 2, 4001)
    mean_square = integrate.simpson(np.sum(ell.electric_field(t) ** 2, axis=1), x=t) / period
    assert mean_square == pytest.approx(lin.intensity / 2, rel=1e-6)
    same = {-1.0: "circular-", 0.0: "x", 1.0: "circular+"}.get(eta)
    if same is not None:                                  # the limits are the named polarisations
        other = one(envelope="flat", wavelength="800 nm", peak_field=ell.peak_field, cycles=40, ramp="5 fs",
                    polarization=same)
        np.testing.assert_array_equal(ell.electric_field(t), other.electric_field(t))
    if eta != 0:                                          # sense of rotation follows the sign of η
        e, de = ell.electric_field(t[::400]), ell.electric_field(t[::400] + 1e-4) - ell.electric_field(t[::400] - 1e-4)
        assert np.all(np.sign(e[:, 0] * de[:, 1] - e[:, 1] * de[:, 0]) == np.sign(eta))


@pytest.mark.parametrize("keys, message", [
    ({"polarization": "elliptical", "ellipticity": 1.5}, "`pulse.0.ellipticity`: must be >= -1 and <= 1"),
    ({"polarization": "z", "ellipticity": 0.5}, "applies only to polarization"),
    ({"polarization": "elliptical", "ellipticity": float("nan")}, "ellipticity"),
])
def test_bad_ellipticity_is_named(keys, message):
    from driven_atom.errors import InputError

    with pytest.raises(InputError, match=message):
        Pulse({"wavelength": "800 nm", "peak_field": 0.01, "cycles": 4, **keys})


def test_gaussian_fluence_matches_time_integral_of_intensity():
    # 2∫E^2 dt = I ∫(f^2 + f'^2/ω^2) dt = I τ sqrt(π/(4 ln2)) (1 + 2 ln2/(ωτ)^2) for a gaussian f^2 of
    # FWHM τ, the 2ω term being ~e^{-(ωτ)^2/(8 ln2)} (analytic; 1.0645 I τ is common practice)
    factor = math.sqrt(math.pi / (4 * math.log(2)))
    for fwhm, is_long in [("20 fs", False), ("1 ns", True)]:      # exact quadrature / long-pulse path
        c = one(envelope="gaussian", wavelength="800 nm", intensity="1e12 W/cm^2", fwhm=fwhm)
        assert c.is_long == is_long
        expected = c.intensity * c.fwhm * factor * (1 + 2 * math.log(2) / (c.omega * c.fwhm) ** 2)
        assert c.fluence() == pytest.approx(expected, rel=1e-6)
    assert factor == pytest.approx(1 / 0.9394, rel=1e-4)   # docs/physics.md focus formula constant


# --- zero field area (no DC part) ------------------------------------------------------------------
@settings(max_examples=25, deadline=None)
@given(envelope=st.sampled_from(["sin2", "gaussian", "flat", "cos4"]),
       wavelength_nm=st.floats(100, 2000), cycles=st.floats(1.0, 10.0), cep=st.floats(0, 2 * math.pi),
       chirp_fraction=st.floats(-0.9, 0.9), ramp_fraction=st.floats(0.05, 0.5),
       polarization=st.sampled_from(["z", "x", "circular+", "circular-"]))
def test_field_area_vanishes(envelope, wavelength_nm, cycles, cep, chirp_fraction, ramp_fraction, polarization):
    """∫E dt = A(t_start) − A(t_end) = 0 (analytic); checked both ways: the exact difference of A
    and an independent adaptive quadrature of E (scipy.integrate.quad), to 1e-10 of ∫|E| dt."""
    keys = {"envelope": envelope, "wavelength": f"{wavelength_nm} nm", "peak_field": 0.05, "cep": cep,
            "cycles": cycles if envelope != "gaussian" else cycles / 3, "polarization": polarization}
    if envelope == "flat":
        keys["ramp"] = ramp_fraction * cycles * 2 * math.pi / wavelength_nm_to_photon_energy(wavelength_nm)
    probe = one(**keys)
    keys["chirp"] = chirp_fraction * 2 * probe.omega / probe.length   # |beta| T/2 < omega
    pulse = Pulse(keys)
    c = pulse.components[0]
    axis = 0 if polarization != "z" else 2
    exact = pulse.field_area()
    points = sorted(set(c.breakpoints))[1:-1]
    scale, _ = integrate.quad(lambda t: abs(pulse.electric_field([t])[0, axis]), c.t_start, c.t_end,
                              points=points or None, limit=2000, epsrel=1e-3)
    numeric, err = integrate.quad(lambda t: pulse.electric_field([t])[0, axis], c.t_start, c.t_end,
                                  points=points or None, limit=2000, epsabs=1e-13 * scale, epsrel=0)
    assert scale > 0
    assert np.max(np.abs(exact)) <= 1e-10 * scale
    assert abs(numeric) <= 1e-10 * scale


def test_static_field_area_is_its_dc_integral():
    # ∫E dt = F0 (T − R/2) for a sin^2 ramp of length R held until T (analytic)
    c = one(envelope="static", peak_field=0.02, ramp="5 fs", length="20 fs")
    assert Pulse([c]).field_area()[2] == pytest.approx(0.02 * 17.5 * FS, rel=1e-13)
    assert c.electric_field([c.t_start + 10 * FS])[0, 2] == pytest.approx(0.02, rel=1e-15)


# --- E = -dA/dt ----------------------------------------------------------------------------------
@pytest.mark.parametrize("keys", [
    {"envelope": "sin2", "cycles": 3, "cep": 0.4, "chirp": 1e-5},
    {"envelope": "cos4", "cycles": 5, "polarization": "circular-"},
    {"envelope": "gaussian", "fwhm": "3 fs", "cep": 2.0, "chirp": -2e-5, "polarization": "circular+"},
    {"envelope": "flat", "cycles": 6, "ramp": "3 fs", "polarization": "x"},
    {"envelope": "static", "length": "10 fs", "ramp": "4 fs"},
])
def test_field_is_minus_derivative_of_vector_potential(keys):
    # 8th-order central difference of A(t) (Fornberg coefficients, common practice) equals E to 1e-8 of F0
    if keys["envelope"] != "static":
        keys = {"wavelength": "800 nm", **keys}
    pulse = Pulse({"peak_field": 0.05, **keys})
    c = pulse.components[0]
    h = 0.05
    t = np.linspace(c.t_start, c.t_end, 801)
    near_joint = np.min(np.abs(t[:, None] - np.array(c.breakpoints)[None, :]), axis=1) < 6 * h
    t = t[~near_joint]
    coefficients = [1 / 280, -4 / 105, 1 / 5, -4 / 5, 0, 4 / 5, -1 / 5, 4 / 105, -1 / 280]
    dA = sum(w * pulse.vector_potential(t + (k - 4) * h) for k, w in enumerate(coefficients)) / h
    assert np.max(np.abs(-dA - pulse.electric_field(t))) < 1e-8 * 0.05


@pytest.mark.parametrize("polarization", ["z", "x", "circular+", "circular-"])
def test_complex_envelope_reproduces_field_exactly(polarization):
    # E(t) = Re[ℰ(t) e^{-i omega t}] (definition of the contract)
    c = one(envelope="gaussian", wavelength="400 nm", peak_field=0.03, fwhm="4 fs", cep=1.1,
            chirp=3e-5, polarization=polarization)
    t = np.linspace(c.t_start, c.t_end, 2001)
    rebuilt = (c.complex_envelope(t) * np.exp(-1j * c.omega * t)[:, None]).real
    assert np.max(np.abs(rebuilt - c.electric_field(t))) < 1e-15


def test_circular_plus_turns_counter_clockwise_about_z():
    # circular+ : x -> y, angular velocity (E x dE/dt)_z > 0 (convention of the contract)
    c = one(wavelength="800 nm", peak_field=0.05, cycles=10, polarization="circular+")
    t = np.linspace(-100, 100, 9)
    e, de = c.electric_field(t), (c.electric_field(t + 1e-4) - c.electric_field(t - 1e-4)) / 2e-4
    assert np.all(e[:, 0] * de[:, 1] - e[:, 1] * de[:, 0] > 0)
    assert np.allclose(c.jones, [1, 1j, 0])


# --- envelopes and durations ------------------------------------------------------------------------
def _intensity_fwhm(c: PulseComponent) -> float:
    """FWHM of f^2 by root-finding (scipy brentq) between samples where it crosses 1/2."""
    t = np.linspace(c.t_start, c.t_end, 20001)
    above = c.envelope(t) ** 2 - 0.5
    i = np.flatnonzero(np.diff(np.sign(above)))
    g = lambda x: c.envelope([x])[0] ** 2 - 0.5     # noqa: E731
    left = optimize.brentq(g, t[i[0]], t[i[0] + 1], xtol=1e-13)
    right = optimize.brentq(g, t[i[-1]], t[i[-1] + 1], xtol=1e-13)
    return right - left


def test_sin2_fwhm_is_0_3641_of_length():
    # intensity FWHM = T (2/pi) arccos(2^(-1/4)) = 0.36405 T for f = sin^2(pi t/T) (analytic)
    c = one(wavelength="800 nm", peak_field=0.01, length="30 fs")
    assert c.fwhm == pytest.approx(30 * FS * (2 / math.pi) * math.acos(2 ** -0.25), rel=1e-14)
    assert c.fwhm / c.length == pytest.approx(0.3641, abs=5e-5)
    assert _intensity_fwhm(c) == pytest.approx(c.fwhm, rel=1e-9)


@pytest.mark.parametrize("keys", [
    {"envelope": "gaussian", "fwhm": "5 fs"},
    {"envelope": "gaussian", "fwhm": "5 fs", "length": "12 fs"},       # window just above 2 fwhm
    {"envelope": "cos4", "fwhm": "5 fs"},
    {"envelope": "sin2", "fwhm": "5 fs"},
    {"envelope": "flat", "fwhm": "5 fs", "ramp": "2 fs"},
])
def test_requested_fwhm_is_met(keys):
    # the FWHM found by root-finding on the sampled intensity envelope equals the requested one
    c = one(wavelength="800 nm", peak_field=0.01, **keys)
    assert _intensity_fwhm(c) == pytest.approx(5 * FS, rel=1e-9)
    assert c.fwhm == pytest.approx(5 * FS, rel=1e-12)


def test_gaussian_truncated_at_one_millionth():
    c = one(envelope="gaussian", wavelength="800 nm", peak_field=0.01, fwhm="5 fs")
    a, cut = gaussian_shape(c.fwhm, c.length)
    assert cut == pytest.approx(1e-6, rel=1e-4)
    assert c.envelope([c.t_start, c.t_end]) == pytest.approx([0, 0], abs=1e-16)
    assert "1.0e-06" in derived_quantities(Pulse([c]))["pulses"][0]["note"]
    # 2 ln 2 / tau^2 of the plain gaussian e^{-2 ln 2 s^2/tau^2}, changed by the shift only at 1e-6 (analytic)
    assert a == pytest.approx(2 * math.log(2) / c.fwhm**2, rel=2e-6)


def test_cycles_count_optical_periods():
    period = 2 * math.pi / one(wavelength="800 nm", peak_field=0.01, cycles=1).omega
    assert one(wavelength="800 nm", peak_field=0.01, cycles=7).length == pytest.approx(7 * period)
    g = one(envelope="gaussian", wavelength="800 nm", peak_field=0.01, cycles=3)
    assert g.fwhm == pytest.approx(3 * period)          # gaussian: cycles within the FWHM


def test_pulses_add_and_window_covers_all():
    p = Pulse([{"wavelength": "800 nm", "peak_field": 0.02, "cycles": 4},
               {"wavelength": "400 nm", "peak_field": 0.01, "cycles": 4, "delay": "10 fs"}])
    a, b = p.components
    assert p.t_start == a.t_start and p.t_end == b.t_end
    t = np.linspace(p.t_start, p.t_end, 101)
    assert np.allclose(p.electric_field(t), a.electric_field(t) + b.electric_field(t), atol=0, rtol=0)
    assert np.array_equal(p.field_z(t), p.electric_field(t)[:, 2])
    assert np.array_equal(p.vector_potential_z(t), p.vector_potential(t)[:, 2])
    assert p.is_linear_z
    assert not Pulse({"wavelength": "800 nm", "peak_field": 0.01, "cycles": 2, "polarization": "x"}).is_linear_z


# --- spectrum ----------------------------------------------------------------------------------------
def _spectral_fwhm(pulse: Pulse, omega0: float, width: float) -> tuple[float, float]:
    """Peak position and FWHM (in omega) of |Ẽ(ω)|^2 by bounded maximisation and root-finding."""
    power = lambda w: float(np.abs(pulse.field_spectrum(np.array([w])))[0] ** 2)   # noqa: E731
    peak = optimize.minimize_scalar(lambda w: -power(w), bounds=(omega0 - width, omega0 + width),
                                    method="bounded", options={"xatol": 1e-10 * omega0}).x
    half = power(peak) / 2
    left = optimize.brentq(lambda w: power(w) - half, omega0 - 3 * width, peak, xtol=1e-14)
    right = optimize.brentq(lambda w: power(w) - half, peak, omega0 + 3 * width, xtol=1e-14)
    return peak, right - left


@pytest.mark.parametrize("fwhm", ["20 fs", "1 ns"])   # exact quadrature path and long-pulse path
def test_gaussian_time_bandwidth_product(fwhm):
    # transform-limited gaussian: Δν τ = 2 ln2 / π = 0.441 for intensity FWHMs (common practice)
    c = one(envelope="gaussian", wavelength="800 nm", peak_field=0.01, fwhm=fwhm)
    width = 4 * math.log(2) / c.fwhm
    peak, dw = _spectral_fwhm(Pulse([c]), c.omega, width)
    # Ẽ = iωÃ: the peak of ω^2 e^{-(ω-ω0)^2/(2σ^2)}, σ^2 = 2 ln2/τ^2, sits at (ω0 + √(ω0^2 + 8σ^2))/2 (analytic)
    sigma2 = 2 * math.log(2) / c.fwhm**2
    assert peak == pytest.approx((c.omega + math.sqrt(c.omega**2 + 8 * sigma2)) / 2, rel=1e-7)
    assert peak == pytest.approx(c.omega, rel=2e-3)
    assert dw / (2 * math.pi) * c.fwhm == pytest.approx(2 * math.log(2) / math.pi, rel=2e-3)
    assert 2 * math.log(2) / math.pi == pytest.approx(0.441, abs=5e-4)


def test_spectrum_equals_i_omega_times_vector_potential_transform():
    # Ẽ(ω) = iω Ã(ω) when A vanishes at both ends (docs/physics.md); Ã by scipy's QAWO (weight cos/sin)
    p = Pulse({"wavelength": "800 nm", "peak_field": 0.05, "cycles": 3, "cep": 0.3})
    c = p.components[0]
    a_z = lambda t: p.vector_potential([t])[0, 2]          # noqa: E731
    for w in (0.02, 0.057, 0.11):
        re, _ = integrate.quad(a_z, c.t_start, c.t_end, weight="cos", wvar=w, epsabs=1e-13)
        im, _ = integrate.quad(a_z, c.t_start, c.t_end, weight="sin", wvar=w, epsabs=1e-13)
        assert p.field_spectrum(w) == pytest.approx(1j * w * (re + 1j * im), abs=1e-10)


def test_sin2_time_bandwidth_product_against_mpmath():
    # reference: half-power point of the envelope transform F(x) = ∫cos²(πs/T) e^{ixs} ds
    # = sin(xT/2)/x + ½[sin((x−k)T/2)/(x−k) + sin((x+k)T/2)/(x+k)], k = 2π/T (analytic), found with
    # mpmath.findroot; a 200-cycle pulse makes the iω factor of Ẽ = iωÃ negligible
    import mpmath as mp

    T, k = mp.mpf(1), 2 * mp.pi
    F = lambda x: mp.sin(x * T / 2) / x + (mp.sin((x - k) * T / 2) / (x - k) + mp.sin((x + k) * T / 2) / (x + k)) / 2  # noqa: E731,E501
    x_half = mp.findroot(lambda x: F(x) ** 2 - (T / 2) ** 2 / 2, 4.0)
    reference = float(2 * x_half / (2 * mp.pi) * (2 / mp.pi) * mp.acos(mp.mpf(2) ** -0.25))   # Δν × FWHM_I
    assert reference == pytest.approx(0.5245, abs=1e-4)
    c = one(wavelength="800 nm", peak_field=0.01, cycles=200)
    _, dw = _spectral_fwhm(Pulse([c]), c.omega, 4 / c.length)
    assert dw / (2 * math.pi) * c.fwhm == pytest.approx(reference, rel=1e-3)


@pytest.mark.parametrize("text, expected", [
    ("0.001 fs^-2", 0.001 * AU_TIME_S**2 / 1e-30),                  # 1/fs² -> 1/(a.u. time)² (CODATA)
    ("0.05 eV/fs", 0.05 / HARTREE_EV * AU_TIME_S / 1e-15),           # dω/dt = (dE/dt)/ħ (analytic)
    (2e-6, 2e-6),                                                    # plain numbers are atomic units
])
def test_chirp_units(text, expected):
    c = one(wavelength="800 nm", peak_field=0.01, cycles=4, chirp=text)
    assert c.chirp == pytest.approx(expected, rel=1e-12)
    # instantaneous frequency Φ′(t) = ω + β(t − t0) (definition)
    t = np.array([c.delay - 50.0, c.delay + 50.0])
    assert np.diff(c.phase(t + 1e-3) - c.phase(t - 1e-3))[0] / 2e-3 == pytest.approx(100 * c.chirp, rel=1e-6)

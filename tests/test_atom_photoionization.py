"""Photoionisation cross sections: published values, Stobbe's closed form, mpmath Coulomb
functions, the Thomas-Reiche-Kuhn sum rule and the Z / reduced-mass scaling."""
import math

import numpy as np
import pytest
from scipy.integrate import quad
from hypothesis import given, settings, strategies as st
from scipy.special import zeta

from driven_atom.atom import Atom, State
from driven_atom.atom.dipoles import oscillator_strength
from driven_atom.atom.photoionization import bound_free_integral, cross_section, cross_section_1s_closed_form
from driven_atom.errors import InputError
from driven_atom.units import ALPHA, BOHR2_CM2, HARTREE_EV

INF = Atom(1)   # infinite nuclear mass, I = 13.6057 eV


@pytest.mark.parametrize("photon_eV, sigma_cm2", [
    (13.6057, 6.304e-18),   # threshold; Bethe & Salpeter (1957) §71, exact formula
    (20.0, 2.212e-18),      # Bethe & Salpeter (1957) §71, exact formula
    (30.0, 7.048e-19),      # Bethe & Salpeter (1957) §71, exact formula
    (50.0, 1.584e-19),      # Bethe & Salpeter (1957) §71, exact formula
])
def test_hydrogen_1s_published(photon_eV, sigma_cm2):
    omega = max(photon_eV / HARTREE_EV, 0.5)
    assert cross_section(INF, 1, 0, omega) * BOHR2_CM2 == pytest.approx(sigma_cm2, rel=5e-3)


def test_hydrogen_2s_threshold():
    # 1.478e-17 cm^2 at threshold (Bethe & Salpeter 1957 §71, exact formula)
    assert cross_section(INF, 2, 0, 0.125) * BOHR2_CM2 == pytest.approx(1.478e-17, rel=5e-3)


def test_general_formula_equals_stobbe_for_1s():
    # Stobbe's closed form (Bethe & Salpeter 1957, eq. 71.4), several nuclei
    omega = np.array([0.5, 0.5000001, 0.6, 1.0, 3.0, 30.0, 3000.0])
    for atom in (INF, Atom.from_name("H"), Atom.from_name("He+"), Atom(7)):
        w = omega * atom.Z**2 * atom.reduced_mass
        assert cross_section(atom, 1, 0, w) == pytest.approx(cross_section_1s_closed_form(atom, w), rel=1e-12)


def test_zero_below_threshold_and_vectorised_shape():
    s = cross_section(INF, 3, 2, np.array([[0.01, 0.05], [0.0556, 1.0]]))
    assert s.shape == (2, 2) and s[0, 0] == 0.0 and s[0, 1] == 0.0 and s[1, 0] > 0 and s[1, 1] > 0


def test_z_scaling_infinite_mass():
    # sigma_Z(omega) = sigma_H(omega / Z^2) / Z^2 for a clamped nucleus (analytic scaling)
    omega = np.array([0.6, 1.0, 4.0])
    for Z in (2, 5):
        for n, l in ((1, 0), (2, 1), (4, 3)):
            assert cross_section(Atom(Z), n, l, omega * Z**2) == pytest.approx(
                cross_section(INF, n, l, omega) / Z**2, rel=1e-12)


def test_reduced_mass_scaling():
    # threshold moves to mu/2 and sigma(omega mu) = sigma_inf(omega)/mu^2 (lengths 1/mu; analytic)
    h = Atom.from_name("H")
    mu = h.reduced_mass
    assert cross_section(h, 1, 0, 0.5 * mu * (1 - 1e-12)) == 0.0
    assert cross_section(h, 2, 1, 0.7 * mu) == pytest.approx(cross_section(INF, 2, 1, 0.7) / mu**2, rel=1e-12)


@pytest.mark.parametrize("n, l, L, k", [(4, 3, 2, 0.8), (5, 1, 0, 0.7)])
def test_radial_integral_vs_mpmath_coulomb_functions(n, l, L, k):
    # reference libraries: mpmath.coulombf (regular Coulomb function) and sympy's R_nl, integrated
    # by mpmath.quad at 20 digits
    import mpmath
    import sympy
    from sympy.physics.hydrogen import R_nl

    rs = sympy.Symbol("r", positive=True)
    bound = sympy.lambdify(rs, R_nl(n, l, rs, 1), "mpmath")
    with mpmath.workdps(20):
        kk = mpmath.mpf(k)
        ref = mpmath.quad(lambda r: bound(r) * r * r * mpmath.coulombf(L, -1 / kk, kk * r),
                          mpmath.linspace(0, 12 * n * n, 25)) * mpmath.sqrt(2 / (mpmath.pi * kk))
    assert bound_free_integral(n, l, L, k) == pytest.approx(float(ref), rel=1e-9)


def test_high_n_uses_extended_precision_consistently():
    # n = 50: the float sum cancels ~20 digits near threshold and is redone in mpmath; the result
    # must join smoothly onto the well-conditioned higher energies and stay positive
    k = np.linspace(0.0, 0.05, 11)
    values = bound_free_integral(50, 1, 2, k)
    assert np.all(values > 0) and np.all(np.diff(values) < 0)
    # quadrature with mpmath Coulomb functions at k = 0.02: 620.017 (reference library, computed once)
    assert bound_free_integral(50, 1, 2, 0.02) == pytest.approx(620.017, rel=1e-4)


def _trk_sum(n0, l0, N=60):
    """Signed f-sum from (n0 l0): bound levels n' l0+-1 (emission f = -(g_lower/g_upper) f_abs;
    the upward sum closed with an n'^-3 tail via zeta(3)) and the continuum df/dE = sigma/(2 pi^2 alpha)."""
    bound = 0.0
    for L in (l0 - 1, l0 + 1):
        if L < 0:
            continue
        bound -= sum((2 * L + 1) / (2 * l0 + 1) * oscillator_strength(INF, State(n, L), State(n0, l0))
                     for n in range(L + 1, n0))
        f = [oscillator_strength(INF, State(n0, l0), State(n, L)) for n in range(n0 + 1, N + 1)]
        bound += sum(f) + f[-1] * N**3 * (zeta(3) - sum(1.0 / n**3 for n in range(1, N + 1)))

    def dfde(w):
        return cross_section(INF, n0, l0, w) / (2 * math.pi**2 * ALPHA)

    th = 0.5 / n0**2
    cont = quad(dfde, th, 50 * th, limit=200, epsabs=1e-13)[0] + quad(dfde, 50 * th, np.inf, limit=200)[0]
    return bound, cont


def test_thomas_reiche_kuhn_1s():
    bound, continuum = _trk_sum(1, 0)
    assert bound == pytest.approx(0.5650, abs=2e-4)          # Bethe & Salpeter (1957), §63
    assert bound + continuum == pytest.approx(1.0, abs=1e-3)  # Thomas-Reiche-Kuhn sum rule (analytic)


@pytest.mark.parametrize("n0, l0", [(2, 0), (3, 2), (4, 1), (5, 3)])
def test_thomas_reiche_kuhn_excited(n0, l0):
    # sum of all f-values (both continuum channels l+-1, downward ones negative) = 1 (TRK, analytic)
    bound, continuum = _trk_sum(n0, l0)
    assert bound + continuum == pytest.approx(1.0, abs=1e-3)
    assert 0 < continuum < 0.5


def test_bad_level():
    with pytest.raises(InputError):
        cross_section(INF, 2, 2, 1.0)


@settings(max_examples=30, deadline=None)
@given(n=st.integers(1, 12), Z=st.integers(1, 10), x=st.floats(0.0, 40.0), data=st.data())
def test_sigma_positive_above_threshold_and_z_scaled(n, Z, x, data):
    # sigma > 0 above threshold, 0 below; sigma_Z(omega) = sigma_1(omega/Z^2)/Z^2 (analytic scaling)
    l = data.draw(st.integers(0, n - 1))
    omega = 0.5 / n**2 * (1.0 + x)
    s1 = cross_section(INF, n, l, omega)
    assert s1 > 0
    # rel 1e-10: the high-n series lose digits to cancellation (n = 12, l = 1, Z = 5, x = 1/32 gave 4.0e-11)
    assert cross_section(Atom(Z), n, l, omega * Z**2) == pytest.approx(s1 / Z**2, rel=1e-10)
    assert cross_section(INF, n, l, 0.5 / n**2 * (1 - 1e-9)) == 0.0


@pytest.mark.parametrize("n, l, Z", [(3, 0, 7), (1, 0, 3), (5, 2, 9)])
def test_exact_threshold_survives_z_scaling_rounding(n, l, Z):
    # found by hypothesis: omega = Z^2/(2 n^2) rounded one ulp below threshold and gave 0;
    # sigma_Z(Z^2 omega) = sigma_1(omega)/Z^2 holds at threshold too (analytic scaling)
    omega = 0.5 / n**2
    assert cross_section(Atom(Z), n, l, omega * Z**2) == pytest.approx(cross_section(INF, n, l, omega) / Z**2,
                                                                        rel=1e-11)

"""Dipoles, f-values, Einstein A and lifetimes against Wiese & Fuhr (2009), sympy and quadrature."""
import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from driven_atom.atom import Atom, State
from driven_atom.atom import dipoles
from driven_atom.atom.radial import radial_function
from driven_atom.errors import InputError
from driven_atom.units import AU_TIME_S

H = Atom.from_name("H")


@pytest.mark.parametrize("upper, lower, a_ref", [
    ("2p", "1s", 6.2649e8),   # Wiese & Fuhr, JPCRD 38, 565 (2009)
    ("3p", "1s", 1.6725e8),   # Wiese & Fuhr, JPCRD 38, 565 (2009)
    ("3p", "2s", 2.2448e7),   # Wiese & Fuhr, JPCRD 38, 565 (2009)
    ("3d", "2p", 6.4651e7),   # Wiese & Fuhr, JPCRD 38, 565 (2009)
])
def test_einstein_a_vs_wiese_fuhr(upper, lower, a_ref):
    assert dipoles.einstein_A(H, upper, lower) / AU_TIME_S == pytest.approx(a_ref, rel=1e-3)


@pytest.mark.parametrize("state, tau_ns", [
    ("2p", 1.5962),   # Wiese & Fuhr, JPCRD 38, 565 (2009)
    ("3p", 5.2715),   # Wiese & Fuhr, JPCRD 38, 565 (2009)
])
def test_lifetimes_vs_wiese_fuhr(state, tau_ns):
    assert dipoles.lifetime(H, state) * AU_TIME_S * 1e9 == pytest.approx(tau_ns, rel=1e-3)


def test_metastable_and_ground_have_no_e1_decay():
    assert dipoles.lifetime(H, "2s") == math.inf and dipoles.lifetime(H, "1s") == math.inf  # E1 selection rules
    # 3d decays only to 2p: tau = 1/A(3d->2p) = 15.47 ns (Wiese & Fuhr 2009 A-value)
    assert dipoles.lifetime(H, "3d") * AU_TIME_S == pytest.approx(1 / 6.4651e7, rel=1e-3)


@pytest.mark.parametrize("lower, upper, f_ref", [
    ("1s", "2p", 0.41620),    # Wiese & Fuhr, JPCRD 38, 565 (2009)
    ("1s", "3p", 0.079102),   # Wiese & Fuhr, JPCRD 38, 565 (2009)
    ("2s", "3p", 0.43487),    # Wiese & Fuhr, JPCRD 38, 565 (2009)
    ("2p", "3d", 0.69578),    # Wiese & Fuhr, JPCRD 38, 565 (2009)
])
def test_oscillator_strengths_vs_wiese_fuhr(lower, upper, f_ref):
    assert dipoles.oscillator_strength(H, lower, upper) == pytest.approx(f_ref, rel=1e-3)


def test_closed_form_dipoles():
    # radial <2p|r|1s> = 2^7 sqrt6 / 3^5 (analytic); 3p-1s 0.5167 and 3d-2p 4.7480 bohr
    # (Bethe & Salpeter 1957, table 13; from memory)
    assert dipoles.radial_dipole(Atom(1), 2, 1, 1, 0) == pytest.approx(2**7 * math.sqrt(6) / 3**5, rel=1e-14)
    assert dipoles.radial_dipole(Atom(1), 3, 1, 1, 0) == pytest.approx(0.5167, rel=1e-4)
    assert dipoles.radial_dipole(Atom(1), 3, 2, 2, 1) == pytest.approx(4.7480, rel=1e-4)
    # symmetric in the two states and scaling 1/(Z mu) (analytic)
    he = Atom.from_name("He+")
    assert dipoles.radial_dipole(he, 1, 0, 3, 1) == pytest.approx(
        dipoles.radial_dipole(Atom(1), 3, 1, 1, 0) / (2 * he.reduced_mass), rel=1e-14)


def _quadrature(n1, l1, n2, l2):
    x, w = np.polynomial.legendre.leggauss(24)
    n = max(n1, n2)
    edges = np.linspace(0.0, 2 * n * n + 60 * n, 4 * n + 1)
    a, b = edges[:-1, None], edges[1:, None]
    r = (0.5 * (b - a) * x + 0.5 * (a + b)).ravel()
    f = radial_function(Atom(1), n1, l1, r) * radial_function(Atom(1), n2, l2, r) * r**3
    return float(np.sum((0.5 * (b - a) * w).ravel() * f))


@pytest.mark.parametrize("n1, l1, n2, l2", [(5, 2, 4, 3), (12, 0, 3, 1), (30, 1, 29, 0), (60, 20, 55, 21),
                                            (100, 1, 2, 0), (150, 3, 149, 4)])
def test_radial_dipole_vs_quadrature(n1, l1, n2, l2):
    assert dipoles.radial_dipole(Atom(1), n1, l1, n2, l2) == pytest.approx(_quadrature(n1, l1, n2, l2),
                                                                        rel=1e-9)


def test_angular_factor_vs_sympy_wigner():
    # reference library: <l1 m1|C1_q|l2 m2> = (-1)^m1 sqrt((2l1+1)(2l2+1)) (l1 1 l2;0 0 0)(l1 1 l2;-m1 q m2)
    from sympy.physics.wigner import wigner_3j

    for l1 in range(5):
        for l2 in range(5):
            for m1 in range(-l1, l1 + 1):
                for m2 in range(-l2, l2 + 1):
                    for q in (-1, 0, 1):
                        ref = float((-1) ** m1 * math.sqrt((2 * l1 + 1) * (2 * l2 + 1))
                                    * wigner_3j(l1, 1, l2, 0, 0, 0) * wigner_3j(l1, 1, l2, -m1, q, m2))
                        assert dipoles.angular_factor(l1, m1, l2, m2, q) == pytest.approx(ref, abs=1e-14)


def test_clebsch_gordan_table_vs_sympy():
    from sympy.physics.wigner import clebsch_gordan

    for j1 in range(4):
        for j in (j1 - 1, j1, j1 + 1):
            if j < 0:
                continue
            for m1 in range(-j1, j1 + 1):
                for q in (-1, 0, 1):
                    ref = float(clebsch_gordan(j1, 1, j, m1, q, m1 + q)) if abs(m1 + q) <= j else 0.0
                    assert dipoles._cg_rank1(j1, m1, q, j, m1 + q) == pytest.approx(ref, abs=1e-14)


def test_dipole_matrix_element_is_z_for_q0():
    # <2p0|z|1s> = 2^7 sqrt2 / 3^5 (Bethe & Salpeter 1957) and r_(+1) raises m
    assert dipoles.dipole_matrix_element(H, "2p0", "1s0", 0) == pytest.approx(
        2**7 * math.sqrt(2) / 3**5 / H.reduced_mass, rel=1e-13)
    assert dipoles.dipole_matrix_element(H, "2p1", "1s0", 1) != 0.0
    assert dipoles.dipole_matrix_element(H, "2p1", "1s0", -1) == 0.0
    with pytest.raises(InputError, match="m in both"):
        dipoles.dipole_matrix_element(H, "2p", "1s", 0)


def test_m_resolved_rates_add_up_to_level_rate():
    level = dipoles.einstein_A(H, "3d", "2p")
    for m in range(-2, 3):   # every upper sublevel decays at the level rate (isotropy; analytic)
        total = sum(dipoles.einstein_A(H, State(3, 2, m), State(2, 1, ml)) for ml in (-1, 0, 1))
        assert total == pytest.approx(level, rel=1e-13)
    assert dipoles.einstein_A(H, "3d", "2p1") == pytest.approx(level / 3, rel=1e-13)


def test_upper_below_lower_is_an_error():
    with pytest.raises(InputError, match="below"):
        dipoles.einstein_A(H, "1s", "2p")


@settings(max_examples=60, deadline=None)
@given(l1=st.integers(0, 30), dl=st.sampled_from([-1, 0, 1, 2]), m1=st.integers(-31, 31),
       m2=st.integers(-31, 31), q=st.sampled_from([-1, 0, 1]))
def test_angular_selection_rules(l1, dl, m1, m2, q):
    # nonzero only for l2 = l1 +- 1, m1 = m2 + q, |m| <= l (Wigner-Eckart; analytic)
    l2 = l1 + dl
    if l2 < 0:
        return
    value = dipoles.angular_factor(l1, m1, l2, m2, q)
    allowed = abs(l1 - l2) == 1 and m1 == m2 + q and abs(m1) <= l1 and abs(m2) <= l2
    if not allowed:
        assert value == 0.0
    elif abs(m2) <= l2:
        # sum rule: sum over m1, q of |<l1 m1|C_q|l2 m2>|^2 = l_>/(2 l2 + 1) (analytic)
        total = sum(dipoles.angular_factor(l1, m2 + qq, l2, m2, qq) ** 2 for qq in (-1, 0, 1))
        assert total == pytest.approx(max(l1, l2) / (2 * l2 + 1), rel=1e-12)


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 25), dn=st.integers(1, 25), data=st.data())
def test_absorption_f_values_positive(n, dn, data):
    l = data.draw(st.integers(0, n - 1))
    lu = data.draw(st.sampled_from([x for x in (l - 1, l + 1) if 0 <= x < n + dn]))
    assert dipoles.oscillator_strength(H, State(n, l), State(n + dn, lu)) > 0


@settings(max_examples=30, deadline=None)
@given(Z=st.integers(2, 10), n=st.integers(2, 12), data=st.data())
def test_einstein_a_scales_as_z4_at_fixed_nuclear_mass(Z, n, data):
    # A ~ omega^3 R^2 ~ (Z^2)^3 Z^-2 = Z^4 at fixed mu (analytic scaling)
    l = data.draw(st.integers(1, n - 1))
    nl = data.draw(st.integers(l, n - 1))
    mass = 1836.15
    a1 = dipoles.einstein_A(Atom(1, mass), State(n, l), State(nl, l - 1))
    aZ = dipoles.einstein_A(Atom(Z, mass), State(n, l), State(nl, l - 1))
    assert aZ == pytest.approx(Z**4 * a1, rel=1e-12)

"""Radial functions and <r^k> against sympy, quadrature and closed forms."""
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from driven_atom.atom import Atom
from driven_atom.atom.radial import expectation_r, radial_function
from driven_atom.errors import InputError


def _gauss_legendre(f, r_max, panels, order=24):
    """int_0^r_max f(r) dr with composite Gauss-Legendre (vectorised)."""
    x, w = np.polynomial.legendre.leggauss(order)
    edges = np.linspace(0.0, r_max, panels + 1)
    a, b = edges[:-1, None], edges[1:, None]
    r = 0.5 * (b - a) * x + 0.5 * (a + b)
    return float(np.sum(0.5 * (b - a) * w * f(r.ravel()).reshape(r.shape)))


@pytest.mark.parametrize("Z", [1, 3])
def test_against_sympy_up_to_n8(Z):
    # reference library: sympy.physics.hydrogen.R_nl (infinite nuclear mass)
    import sympy
    from sympy.physics.hydrogen import R_nl

    r = np.array([0.0, 0.3, 1.7, 6.0, 25.0, 80.0]) / Z
    rs = sympy.Symbol("r", positive=True)
    for n in range(1, 9):
        for l in range(n):
            f = sympy.lambdify(rs, R_nl(n, l, rs, Z), "mpmath")
            ref = np.array([float(f(v)) if v > 0 else float(R_nl(n, l, 0, Z)) for v in r])
            got = radial_function(Atom(Z), n, l, r)
            assert got == pytest.approx(ref, rel=1e-11, abs=1e-13 * Z**1.5)


@pytest.mark.parametrize("n, l", [(50, 0), (50, 49), (100, 7), (200, 0), (200, 150)])
def test_normalisation_high_n(n, l):
    # int R^2 r^2 dr = 1 (analytic), by quadrature out to far beyond the turning point 2 n^2
    r_max = 2 * n * n + 60 * n
    norm = _gauss_legendre(lambda r: radial_function(Atom(1), n, l, r) ** 2 * r * r, r_max, 4 * n)
    assert norm == pytest.approx(1.0, abs=1e-10)


def test_no_overflow_far_out_and_scaling_with_mu():
    r = np.array([0.0, 1e3, 1e5, 1e7])
    values = radial_function(Atom(1), 200, 3, r)
    assert np.all(np.isfinite(values)) and values[-1] == 0.0
    # R(r; Z, mu) = (Z mu)^(3/2) R(Z mu r; 1, 1) (analytic scaling)
    he = Atom.from_name("He+")
    s = he.Z * he.reduced_mass
    assert radial_function(he, 3, 1, 2.0) == pytest.approx(s**1.5 * radial_function(Atom(1), 3, 1, 2.0 * s),
                                                           rel=1e-13)


@pytest.mark.parametrize("n, l", [(1, 0), (3, 2), (7, 3), (20, 5)])
@pytest.mark.parametrize("k", [-2, -1, 1, 2, 3, 4])
def test_expectation_values_vs_quadrature(n, l, k):
    atom = Atom(2)
    r_max = (2 * n * n + 60 * n) / atom.Z
    ref = _gauss_legendre(lambda r: radial_function(atom, n, l, r) ** 2 * r ** (2 + k), r_max, 8 * n)
    assert expectation_r(atom, n, l, k) == pytest.approx(ref, rel=1e-10)


def test_closed_forms():
    h = Atom(1)
    # <r> = (3n^2 - l(l+1))/2, <r^2> = n^2 (5n^2 + 1 - 3l(l+1))/2 (Bethe & Salpeter 1957, eq. 3.26)
    assert expectation_r(h, 3, 2, 1) == pytest.approx(10.5, rel=1e-14)
    assert expectation_r(h, 3, 2, 2) == pytest.approx(9 * (45 + 1 - 18) / 2, rel=1e-14)
    # <r^-3> for 2p: 1/24 (Bethe & Salpeter 1957, eq. 3.26)
    assert expectation_r(h, 2, 1, -3) == pytest.approx(1 / 24, rel=1e-14)
    with pytest.raises(InputError):
        expectation_r(h, 2, 0, -3)


@settings(max_examples=30, deadline=None)
@given(n=st.integers(1, 40), data=st.data())
def test_positive_near_origin_and_node_count(n, data):
    # R_nl > 0 near the origin and has n - l - 1 radial nodes (Bethe & Salpeter 1957, §3)
    l = data.draw(st.integers(0, n - 1))
    r = np.linspace(1e-3, 2 * n * n + 30 * n, 40000)
    values = radial_function(Atom(1), n, l, r)
    assert values[0] > 0
    significant = values[np.abs(values) > 1e-12 * np.abs(values).max()]
    assert np.count_nonzero(np.diff(np.sign(significant)) != 0) == n - l - 1


def test_bad_quantum_numbers():
    with pytest.raises(InputError):
        radial_function(Atom(1), 2, 2, 1.0)

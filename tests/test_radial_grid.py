"""The shared radial grid: Numerov-corrected operators, their symmetry, eigenstates, convergence."""
import math

import numpy as np
import pytest
from scipy.special import eval_genlaguerre, factorial, loggamma

from driven_atom.atom import Atom
from driven_atom.basis.radial_grid import (density_of_states, eigenstates, numerov_operators,
                                    stretched_grid, stretched_hamiltonian, uniform_grid)
from driven_atom.errors import InputError

H_INF = Atom(1)


def _u_exact(n, l, r, Z=1.0):
    """u = r R_nl with the associated-Laguerre closed form (Bethe & Salpeter (1957) eq. 3.17),
    evaluated with scipy.special (independent of the atom layer)."""
    rho = 2.0 * Z * r / n
    norm = math.sqrt((2.0 * Z / n) ** 3 * factorial(n - l - 1) / (2.0 * n * factorial(n + l)))
    return r * norm * np.exp(-rho / 2) * rho**l * eval_genlaguerre(n - l - 1, 2 * l + 1, rho)


def _observed_order(l, n, drs, r_max=60.0):
    errors = []
    for dr in drs:
        E, _ = eigenstates(uniform_grid(r_max, dr), l, H_INF, n_states=n - l)
        errors.append(abs(E[-1] + 0.5 / n**2))        # analytic -1/(2n^2)
    return errors, [math.log2(errors[i] / errors[i + 1]) for i in range(len(errors) - 1)]


def test_1s_energy_converges_as_dr4():
    errors, orders = _observed_order(0, 1, [0.2, 0.1, 0.05])
    print("1s |E - (-1/2)|:", errors, "observed orders:", orders)
    assert all(3.8 < p < 4.2 for p in orders), orders        # O(dr^4) (Muller 1999)


def test_2p_energy_converges_as_dr4_with_l1_row():
    errors, orders = _observed_order(1, 2, [0.2, 0.1, 0.05])
    print("2p |E - (-1/8)|:", errors, "observed orders:", orders)
    assert all(3.7 < p < 4.3 for p in orders), orders
    assert errors[1] < 1e-6 * 0.125


def test_bound_energies_at_default_grid_with_reduced_mass():
    atom = Atom.from_name("H")
    mu = atom.reduced_mass
    grid = uniform_grid(200.0, 0.08)                           # documented default grid
    for l in range(6):
        E, _ = eigenstates(grid, l, atom, n_states=6 - l)
        n = np.arange(l + 1, 7)
        exact = -mu / (2.0 * n**2)                             # analytic, -Z^2 mu/(2n^2)
        np.testing.assert_allclose(E, exact, rtol=1e-5, atol=0)


def test_hydrogenic_ion_scales_with_z():
    E, _ = eigenstates(uniform_grid(30.0, 0.02), 0, Atom(2), n_states=2)
    np.testing.assert_allclose(E, [-2.0, -0.5], rtol=1e-5)    # analytic -Z^2/(2n^2)


@pytest.mark.parametrize("l", [0, 1, 2])
def test_operators_commute_and_hamiltonian_is_symmetric(l):
    dr = 0.3
    ops = numerov_operators(uniform_grid(6.0, dr), l, H_INF)
    delta = np.diag(ops.d_diag) + np.diag(ops.d_off, 1) + np.diag(ops.d_off, -1)
    m = np.diag(ops.m_diag) + np.diag(ops.m_off, 1) + np.diag(ops.m_off, -1)
    np.testing.assert_allclose(m, np.eye(len(m)) + dr**2 * delta / 12, atol=1e-15)
    np.testing.assert_allclose(m @ delta, delta @ m, atol=1e-12)
    t = np.linalg.solve(m, delta)
    np.testing.assert_allclose(t, t.T, atol=1e-11)            # symmetric incl. corrected row
    h = ops.hamiltonian_dense()
    u = np.random.default_rng(1).normal(size=(len(m), 2))
    np.testing.assert_allclose(ops.apply(u), h @ u, atol=1e-10)


def test_first_row_values():
    dr = 0.25
    for l, expected in [(0, -2 * (1 - dr / (12 - 10 * dr))), (1, -2 * (1 + 1 / (10 - 3 * dr))), (2, -2.0)]:
        ops = numerov_operators(uniform_grid(2.0, dr), l, H_INF)
        assert ops.d_diag[0] * dr**2 == pytest.approx(expected, rel=1e-14)   # Muller 1999 (l = 0)
        assert ops.d_diag[1] * dr**2 == -2.0


@pytest.mark.parametrize("n,l", [(1, 0), (2, 1), (3, 0), (3, 2)])
def test_eigenvectors_match_closed_form(n, l):
    grid = uniform_grid(80.0, 0.05)
    _, U = eigenstates(grid, l, H_INF, n_states=n - l)
    u = U[:, -1] / math.sqrt(grid.dr)
    np.testing.assert_allclose(u, _u_exact(n, l, grid.r), atol=2e-5)
    assert np.sum(U[:, -1] ** 2) == pytest.approx(1.0, abs=1e-12)


def test_box_density_of_states_from_coulomb_phase():
    grid = uniform_grid(200.0, 0.1)
    E, _ = eigenstates(grid, 0, H_INF, e_max=3.0)
    rho = density_of_states(E)
    mask = (E > 0.5) & (E < 2.5)
    R = grid.r_max

    def theta(k):   # phase of F_0 at r = R: kR - eta ln(2kR) + arg Gamma(1 + i eta), eta = -Z/k
        eta = -1.0 / k                                          # Abramowitz & Stegun 14.5.1
        return k * R - eta * np.log(2 * k * R) + np.imag(loggamma(1 + 1j * eta))

    k = np.sqrt(2 * E[mask])
    dk = 1e-6
    expected = (theta(k + dk) - theta(k - dk)) / (2 * dk) / (math.pi * k)   # box: theta = n pi
    np.testing.assert_allclose(rho[mask], expected, rtol=2e-3)


def test_bad_input():
    with pytest.raises(InputError, match="dr"):
        uniform_grid(10.0, -0.1)
    with pytest.raises(InputError, match="r_max"):
        uniform_grid(0.1, 0.1)
    with pytest.raises(InputError, match="dr"):
        numerov_operators(uniform_grid(40.0, 1.0), 0, Atom(2))
    with pytest.raises(InputError, match="`l`"):
        numerov_operators(uniform_grid(10.0, 0.1), -1, H_INF)
    with pytest.raises(InputError, match="n_states"):
        eigenstates(uniform_grid(10.0, 0.1), 0, H_INF, n_states=0)


def test_stretched_grid_keeps_fourth_order_and_needs_fewer_points():
    # analytic -1/(2n^2); a third of the points of the uniform default grid, better accuracy
    grid = stretched_grid(250.0, 0.02, 0.25, 5.0)
    assert grid.n_points < 1100
    for l in range(6):
        E, _ = eigenstates(grid, l, H_INF, n_states=6 - l)
        n = np.arange(l + 1, 7)
        np.testing.assert_allclose(E, -0.5 / n**2, rtol=1e-6, atol=0)
    errors = []
    for dr_min in (0.2, 0.1, 0.05):                       # one mapping refined: spacings scale with dr_min
        E, _ = eigenstates(stretched_grid(40.0, dr_min, 2 * dr_min, 15.0), 0, H_INF, n_states=1)
        errors.append(abs(E[0] + 0.5))
    orders = [math.log2(errors[i] / errors[i + 1]) for i in range(2)]
    print("stretched 1s errors", errors, "observed orders", orders)
    assert all(3.5 < p < 4.5 for p in orders), orders


def test_stretched_eigenvectors_give_closed_form_and_symmetric_h():
    grid = stretched_grid(60.0, 0.02, 0.1, 3.0)
    h = stretched_hamiltonian(grid, 0, H_INF)
    np.testing.assert_allclose(h, h.T, atol=1e-10)
    _, U = eigenstates(grid, 0, H_INF, n_states=2)
    u = U[:, 1] / np.sqrt(grid.jacobian)                     # v = sqrt(g') u on the stretched grid
    np.testing.assert_allclose(u, _u_exact(2, 0, grid.r), atol=2e-5)

"""Every numba kernel of the grid route against a slow numpy/scipy twin written here (~1e-12)."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import solve_banded

from driven_atom.atom import Atom
from driven_atom.basis.radial_grid import numerov_operators, uniform_grid
from driven_atom.routes import _grid_kernels as kernels

N, L, DR, TAU = 157, 7, 0.2, 0.025        # N not a multiple of the re-seed interval on purpose
ATOM = Atom(1, 1836.15267343)              # reduced mass != 1 exercises the 1/(2 mu) factors


def coupling(nl):
    l = np.arange(nl, dtype=float)
    return (l + 1) / np.sqrt((2 * l + 1) * (2 * l + 3))   # <l|cos th|l+1>, m = 0 (analytic)


def twin_cn(psi, ops, tau):
    """(M(1+i tau V) - i tau D/2mu) psi' = (M(1-i tau V) + i tau D/2mu) psi, per l, with scipy."""
    out = np.empty_like(psi)
    for l, o in enumerate(ops):
        n = o.m_diag.size
        M = np.diag(o.m_diag) + np.diag(o.m_off, 1) + np.diag(o.m_off, -1)
        D = np.diag(o.d_diag) + np.diag(o.d_off, 1) + np.diag(o.d_off, -1)
        K = -D / (2 * o.mu) + M @ np.diag(o.potential)
        ap = M + 1j * tau * K
        am = M - 1j * tau * K
        ab = np.zeros((3, n), complex)
        ab[0, 1:] = np.diag(ap, 1)
        ab[1] = np.diag(ap)
        ab[2, :-1] = np.diag(ap, -1)
        out[:, l] = solve_banded((1, 1), ab, am @ psi[:, l])
    return out


def twin_rotate(psi, field, h, r, c, parity):
    psi = psi.copy()
    for l in range(parity, psi.shape[1] - 1, 2):
        th = h * field * r * c[l]
        a, b = psi[:, l].copy(), psi[:, l + 1].copy()
        psi[:, l] = np.cos(th) * a - 1j * np.sin(th) * b
        psi[:, l + 1] = -1j * np.sin(th) * a + np.cos(th) * b
    return psi


def twin_momentum(psi, r, c):
    """<p_z> = <psi|-i d/dz|psi> with d/dz on the pair (l, l+1): c_l (d/dr + (l+1)/r) from l+1 to l and
    c_l (d/dr - (l+1)/r) from l to l+1 (the gradient formula, Edmonds (1957) 5.7), d/dr the five-point
    central difference (u_{i-2} - 8u_{i-1} + 8u_{i+1} - u_{i+2})/(12 dr) with u = 0 beyond the grid."""
    dr = r[1] - r[0]
    n, nl = psi.shape
    D = (8 * np.diag(np.ones(n - 1), 1) - 8 * np.diag(np.ones(n - 1), -1)
         - np.diag(np.ones(n - 2), 2) + np.diag(np.ones(n - 2), -2)) / (12 * dr)
    total = 0.0
    for l in range(nl - 1):
        a, b = psi[:, l], psi[:, l + 1]
        up = c[l] * (D @ b + (l + 1) / r * b)          # (d/dz psi)_l from b
        down = c[l] * (D @ a - (l + 1) / r * a)        # (d/dz psi)_{l+1} from a
        total += (-1j * (np.vdot(a, up) + np.vdot(b, down))).real
    return total


def twin_observables(psi, r, c):
    """norm, <z>, <cos th dV/dr> (dV/dr = Z/r^2 for -Z/r) and <p_z>."""
    ang = 2 * np.sum(c[None, :-1] * (psi[:, :-1].conj() * psi[:, 1:]).real, axis=1)
    return np.array([np.sum(abs(psi) ** 2), np.sum(r * ang), np.sum(ATOM.Z * ang / r**2), twin_momentum(psi, r, c)])


def twin_chunk(psi, ops, tau, r, c, fields, mask, rows=None):
    obs, surface = [], []
    for e in fields:
        psi = twin_rotate(twin_rotate(psi, e, tau, r, c, 0), e, tau, r, c, 1)
        psi = twin_cn(psi, ops, tau)
        psi = twin_rotate(twin_rotate(psi, e, tau, r, c, 1), e, tau, r, c, 0)
        psi = psi * mask[:, None]
        obs.append(twin_observables(psi, r, c))
        surface.append(psi[rows].copy() if rows is not None else None)
    return psi, np.array(obs), surface


@pytest.fixture(scope="module")
def setup():
    grid = uniform_grid(N * DR, DR)
    ops = [numerov_operators(grid, l, ATOM) for l in range(L)]
    rng = np.random.default_rng(7)
    psi = rng.normal(size=(N, L)) + 1j * rng.normal(size=(N, L))
    psi /= np.linalg.norm(psi)
    return grid, ops, psi


SURFACE = 60                               # row of the surface-flux copies (rows 58-62)


def stepper_for(grid, mask, threads=1, nl=L, gauge="length"):
    from driven_atom.routes.grid import _Stepper

    return _Stepper(grid, ATOM, nl, 2 * TAU, mask, threads, gauge=gauge, surface_row=SURFACE)


def test_potential_formula_matches_radial_grid(setup):
    grid, ops, _ = setup
    st = stepper_for(grid, np.ones(N))
    a = st.a                                   # V[i, col] = cent[col]/r_i^2 + coul[i] in the kernels
    for l, o in enumerate(ops):
        j = st.column_of[l]
        np.testing.assert_allclose(a["cent"][j] * a["invr2"] + a["coul"], o.potential, rtol=1e-14,
                                   atol=1e-14 * abs(o.potential).max())


def test_cn_factorize_matches_lu_of_dense_matrix(setup):
    grid, ops, _ = setup
    st = stepper_for(grid, np.ones(N))
    for l in (0, 1, L - 1):
        j = st.column_of[l]
        w = st.thomas[0, :, j] + 1j * st.thomas[1, :, j]
        cp = st.thomas[2, :, j] + 1j * st.thomas[3, :, j]
        o = ops[l]
        M = np.diag(o.m_diag) + np.diag(o.m_off, 1) + np.diag(o.m_off, -1)
        D = np.diag(o.d_diag) + np.diag(o.d_off, 1) + np.diag(o.d_off, -1)
        ap = M + 1j * TAU * (-D / (2 * o.mu) + M @ np.diag(o.potential))
        # rebuild A+ from the factors: A+ = L U, U unit upper bidiagonal (c'), L lower (b', a)
        lower = np.diag(1.0 / w) + np.diag(np.diag(ap, -1), -1)
        upper = np.eye(N) + np.diag(cp[:-1], 1)
        np.testing.assert_allclose(lower @ upper, ap, atol=1e-12 * abs(ap).max())


def edge_mask():
    mask = np.ones(N)
    mask[N - 30:] = np.cos(0.5 * np.pi * np.arange(30) / 30) ** 0.125   # cos^(1/8) edge (common practice)
    return mask


@pytest.mark.parametrize("nl", [L, L - 1])           # odd and even numbers of partial waves
def test_propagate_chunk_matches_twin(setup, nl):
    grid, ops, psi0 = setup
    psi0 = psi0[:, :nl] / np.linalg.norm(psi0[:, :nl])
    mask = edge_mask()
    st = stepper_for(grid, mask, nl=nl)
    assert st.i_abs == N - 29
    fields = np.array([0.03, -0.05, 0.07, 0.01])
    st.set_state(psi0)
    out = np.zeros((fields.size, 4))
    surface = np.zeros((fields.size, 2, 5, nl))
    st.run(fields, out, surface)
    ref, ref_obs, ref_rows = twin_chunk(psi0, ops[:nl], TAU, grid.r, coupling(nl), fields, mask,
                                        rows=slice(SURFACE - 2, SURFACE + 3))
    np.testing.assert_allclose(st.state(), ref, atol=1e-12)
    np.testing.assert_allclose(out, ref_obs, rtol=1e-11, atol=1e-13)
    np.testing.assert_allclose(st.surface_values(surface), np.array(ref_rows), atol=1e-12)
    assert out[-1, 0] < 1 - 1e-3          # the mask removed norm: the test sees absorption
    assert np.all(abs(out[:, 3]) > 1e-3)  # the momentum is not trivially zero


def test_propagate_chunk_parallel_matches_twin(setup):
    grid, ops, psi0 = setup
    mask = edge_mask()
    st = stepper_for(grid, mask, threads=2)
    fields = np.array([0.02, 0.04, -0.06])
    st.set_state(psi0)
    out = np.zeros((fields.size, 4))
    surface = np.zeros((fields.size, 2, 5, L))
    st.run(fields, out, surface)
    ref, ref_obs, ref_rows = twin_chunk(psi0, ops, TAU, grid.r, coupling(L), fields, mask,
                                        rows=slice(SURFACE - 2, SURFACE + 3))
    np.testing.assert_allclose(st.state(), ref, atol=1e-12)
    np.testing.assert_allclose(out, ref_obs, rtol=1e-11, atol=1e-13)
    np.testing.assert_allclose(st.surface_values(surface), np.array(ref_rows), atol=1e-12)


def test_rotate_all_matches_twin(setup):
    grid, ops, psi0 = setup
    st = stepper_for(grid, np.ones(N))
    st.set_state(psi0)
    assert st.consts[0] == TAU and st.consts[2] == DR           # rotation time tau, grid step
    kernels.rotate_all(st.psi, 0.3, st.consts, st.coupling, st.scratch)
    ref = twin_rotate(twin_rotate(psi0, 0.3, TAU, grid.r, coupling(L), 0), 0.3, TAU, grid.r,
                      coupling(L), 1)
    np.testing.assert_allclose(st.state(), ref, atol=1e-13)
    assert abs(np.linalg.norm(st.state()) - 1.0) < 1e-13        # rotations are unitary


def test_reduce_partial_sums_blocks():
    part = np.random.default_rng(5).normal(size=(3, 7, 4))
    out = np.zeros((3, 4))
    kernels.reduce_partial(part, out)
    np.testing.assert_allclose(out, part.sum(axis=1), rtol=1e-14)


# -- velocity gauge ------------------------------------------------------------------------------

DELTA = np.sqrt(3) - 2      # corner rows of d/dr: the root of delta^2 + 4 delta + 1 = 0 (docs/physics.md)


def derivative_matrices(n, dr):
    """M1 = tridiag(1, 4, 1)/6 and D1 = tridiag(-1, 0, 1)/(2 dr) (fourth-order implicit d/dr,
    Muller, Laser Phys. 9, 138 (1999)) with the corner rows M11 = MNN = (4 + delta)/6,
    D11 = -DNN = delta/(2 dr)."""
    M = (np.diag(np.full(n, 4.0)) + np.diag(np.ones(n - 1), 1) + np.diag(np.ones(n - 1), -1)) / 6
    D = (np.diag(np.ones(n - 1), 1) - np.diag(np.ones(n - 1), -1)) / (2 * dr)
    M[0, 0] = M[-1, -1] = (4 + DELTA) / 6
    D[0, 0], D[-1, -1] = DELTA / (2 * dr), -DELTA / (2 * dr)
    return M, D


def twin_pair_factor(psi, a_vec, tau, r, c, mu, parity):
    """exp(-tau (A c_l/mu) D sigma_x) on the pairs (l, l+1), l = parity, parity + 2, ...: on
    s+- = (u_l +- u_{l+1})/sqrt2 the Cayley form (M + beta/2 D)^-1 (M - beta/2 D), beta = +-tau A c_l/mu."""
    psi = psi.copy()
    dr = r[1] - r[0]
    for l in range(parity, psi.shape[1] - 1, 2):
        M, D = derivative_matrices(r.size, dr)
        beta = tau * a_vec * c[l] / mu
        a, b = psi[:, l].copy(), psi[:, l + 1].copy()
        sp = np.linalg.solve(M + beta / 2 * D, (M - beta / 2 * D) @ ((a + b) / np.sqrt(2)))
        sm = np.linalg.solve(M - beta / 2 * D, (M + beta / 2 * D) @ ((a - b) / np.sqrt(2)))
        psi[:, l], psi[:, l + 1] = (sp + sm) / np.sqrt(2), (sp - sm) / np.sqrt(2)
    return psi


def twin_pair_rotate(psi, a_vec, tau, r, c, mu, parity):
    """exp(-i phi sigma_y), phi = tau (A c_l/mu)(l+1)/r, on the pairs (l, l+1), in the Cayley form
    (1 + phi/2 J)^-1 (1 - phi/2 J), J = [[0, 1], [-1, 0]]."""
    psi = psi.copy()
    for l in range(parity, psi.shape[1] - 1, 2):
        t = 0.5 * tau * a_vec * c[l] / mu * (l + 1) / r
        a, b = psi[:, l].copy(), psi[:, l + 1].copy()
        psi[:, l] = ((1 - t**2) * a - 2 * t * b) / (1 + t**2)
        psi[:, l + 1] = (2 * t * a + (1 - t**2) * b) / (1 + t**2)
    return psi


def twin_velocity_chunk(psi, ops, tau, r, c, potentials, mask, mu, rows=None):
    obs, surface = [], []
    for a_vec in potentials:
        if a_vec != 0:
            for parity in (0, 1):
                psi = twin_pair_factor(psi, a_vec, tau, r, c, mu, parity)
                psi = twin_pair_rotate(psi, a_vec, tau, r, c, mu, parity)
        psi = twin_cn(psi, ops, tau)
        if a_vec != 0:                                 # the opening factors in reverse order
            for parity in (1, 0):
                psi = twin_pair_rotate(psi, a_vec, tau, r, c, mu, parity)
                psi = twin_pair_factor(psi, a_vec, tau, r, c, mu, parity)
        psi = psi * mask[:, None]
        obs.append(twin_observables(psi, r, c))
        surface.append(psi[rows].copy() if rows is not None else None)
    return psi, np.array(obs), surface


@pytest.mark.parametrize("nl", [L, L - 1])
def test_propagate_chunk_velocity_matches_twin(setup, nl):
    grid, ops, psi0 = setup
    psi0 = psi0[:, :nl] / np.linalg.norm(psi0[:, :nl])
    mask = edge_mask()
    st = stepper_for(grid, mask, nl=nl, gauge="velocity")
    assert st.consts[3] == 1 / ATOM.reduced_mass and st.deriv[3] == DELTA
    potentials = np.array([0.9, -1.3, 0.0, 0.4])            # a field-free step among them
    st.set_state(psi0)
    out = np.zeros((potentials.size, 4))
    surface = np.zeros((potentials.size, 2, 5, nl))
    st.run(potentials, out, surface)
    ref, ref_obs, ref_rows = twin_velocity_chunk(psi0, ops[:nl], TAU, grid.r, coupling(nl), potentials, mask,
                                                 ATOM.reduced_mass, rows=slice(SURFACE - 2, SURFACE + 3))
    np.testing.assert_allclose(st.state(), ref, atol=1e-12)
    np.testing.assert_allclose(out, ref_obs, rtol=1e-11, atol=1e-13)
    np.testing.assert_allclose(st.surface_values(surface), np.array(ref_rows), atol=1e-12)
    free = twin_velocity_chunk(psi0, ops[:nl], TAU, grid.r, coupling(nl), np.zeros(4), mask, ATOM.reduced_mass)[0]
    assert np.abs(ref - free).max() > 1e-3                  # the coupling acted: the test can fail


def test_derivative_with_corner_rows_is_antisymmetric_and_fourth_order():
    """With delta = sqrt3 - 2, M1^-1 D1 is antisymmetric (the Cayley factors are unitary, our derivation);
    away from the corners it differentiates sin(kr) to O((k dr)^4) (the Pade form, Muller (1999))."""
    n, dr = 120, 0.1
    M, D = derivative_matrices(n, dr)
    G = np.linalg.solve(M, D)
    assert np.abs(G + G.T).max() < 1e-12 * np.abs(G).max()
    M0, D0 = derivative_matrices(n, dr)
    M0[0, 0] = M0[-1, -1] = 4 / 6
    D0[0, 0] = D0[-1, -1] = 0.0
    G0 = np.linalg.solve(M0, D0)
    assert np.abs(G0 + G0.T).max() > 1e-3 * np.abs(G0).max()       # without the corners it is not
    r = dr * np.arange(1, n + 1)
    errors = []
    for h in (dr, dr / 2):
        rr = h * np.arange(1, round(n * dr / h) + 1)
        Mh, Dh = derivative_matrices(rr.size, h)
        d = np.linalg.solve(Mh, Dh @ np.sin(rr))
        inner = (rr > 3) & (rr < rr[-1] - 3)
        errors.append(np.abs(d[inner] - np.cos(rr[inner])).max())
    assert errors[0] / errors[1] > 12                                # fourth order: 16 (analytic)
    assert r.size == n

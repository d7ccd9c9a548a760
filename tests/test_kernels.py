"""Every numba kernel of the grid route against a slow numpy/scipy twin written here (~1e-12)."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import solve_banded

from tdse.atom import Atom
from tdse.basis.radial_grid import numerov_operators, uniform_grid
from tdse.engines import kernels

N, L, DR, TAU = 157, 7, 0.2, 0.025        # N not a multiple of the re-seed interval on purpose
ATOM = Atom(1, 1836.15267343)              # reduced mass != 1 exercises the 1/(2 mu) factors


def coupling(nl):
    l = np.arange(nl, dtype=float)
    return (l + 1) / np.sqrt((2 * l + 1) * (2 * l + 3))   # <l|cos th|l+1>, m = 0 (analytic)


def kernel_arrays(grid, nl, atom):
    ops = [numerov_operators(grid, l, atom) for l in range(nl)]
    r = grid.r
    one = ops[min(1, nl - 1)]
    return dict(m_diag=one.m_diag.copy(), m_off=one.m_off.copy(), d_diag=one.d_diag.copy(),
                d_off=one.d_off.copy(), m_first=np.array([o.m_diag[0] for o in ops]),
                d_first=np.array([o.d_diag[0] for o in ops]),
                cent=np.array([l * (l + 1) / (2 * atom.reduced_mass) for l in range(nl)]),
                coul=-atom.Z / r, invr2=1.0 / r**2), ops


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


def twin_observables(psi, r, c):
    ang = 2 * np.sum(c[None, :-1] * (psi[:, :-1].conj() * psi[:, 1:]).real, axis=1)
    return np.array([np.sum(abs(psi) ** 2), np.sum(r * ang), np.sum(ang / r**2)])


def twin_chunk(psi, ops, tau, r, c, fields, mask):
    obs = []
    for e in fields:
        psi = twin_rotate(twin_rotate(psi, e, tau, r, c, 0), e, tau, r, c, 1)
        psi = twin_cn(psi, ops, tau)
        psi = twin_rotate(twin_rotate(psi, e, tau, r, c, 1), e, tau, r, c, 0)
        psi = psi * mask[:, None]
        obs.append(twin_observables(psi, r, c))
    return psi, np.array(obs)


@pytest.fixture(scope="module")
def setup():
    grid = uniform_grid(N * DR, DR)
    arrays, ops = kernel_arrays(grid, L, ATOM)
    rng = np.random.default_rng(7)
    psi = rng.normal(size=(N, L)) + 1j * rng.normal(size=(N, L))
    psi /= np.linalg.norm(psi)
    return grid, arrays, ops, psi


def factors(arrays, n, nl):
    w = np.zeros((n, nl), complex)
    cp = np.zeros((n, nl), complex)
    a = arrays
    kernels.cn_factorize(a["m_diag"], a["m_off"], a["d_diag"], a["d_off"], a["m_first"], a["d_first"],
                         a["cent"], a["coul"], a["invr2"], TAU, 0.5 / ATOM.reduced_mass, w, cp)
    return w, cp


def test_potential_formula_matches_radial_grid(setup):
    grid, a, ops, _ = setup
    for l, o in enumerate(ops):
        np.testing.assert_allclose(a["cent"][l] * a["invr2"] + a["coul"], o.potential, rtol=1e-14,
                                   atol=1e-14 * abs(o.potential).max())


def test_cn_factorize_matches_lu_of_dense_matrix(setup):
    grid, a, ops, _ = setup
    w, cp = factors(a, N, L)
    for l in (0, 1, L - 1):
        o = ops[l]
        M = np.diag(o.m_diag) + np.diag(o.m_off, 1) + np.diag(o.m_off, -1)
        D = np.diag(o.d_diag) + np.diag(o.d_off, 1) + np.diag(o.d_off, -1)
        ap = M + 1j * TAU * (-D / (2 * o.mu) + M @ np.diag(o.potential))
        # rebuild A+ from the factors: A+ = L U with U = unit upper (c'), L lower bidiagonal (b', a)
        b = 1.0 / w[:, l]
        lower = np.diag(b) + np.diag(np.diag(ap, -1), -1)
        upper = np.eye(N) + np.diag(cp[:-1, l], 1)
        np.testing.assert_allclose(lower @ upper, ap, atol=1e-12 * abs(ap).max())


def test_propagate_chunk_matches_twin(setup):
    grid, a, ops, psi0 = setup
    w, cp = factors(a, N, L)
    r = grid.r
    c = coupling(L)
    mask = np.ones(N)
    i_abs = N - 30
    mask[i_abs:] = np.cos(0.5 * np.pi * np.arange(30) / 30) ** 0.125   # cos^(1/8) edge (common practice)
    fields = np.array([0.03, -0.05, 0.07, 0.01])
    psi = psi0.copy()
    y = np.zeros_like(psi)
    out = np.zeros((fields.size, 3))
    kernels.propagate_chunk(psi, y, w, cp, a["m_diag"], a["m_off"], a["d_diag"], a["d_off"],
                            a["m_first"], a["d_first"], a["cent"], a["coul"], a["invr2"], TAU,
                            0.5 / ATOM.reduced_mass, DR, c, fields, mask, i_abs,
                            np.zeros(L, complex), np.zeros(L, complex), np.zeros((4, L), complex),
                            np.zeros((4, L), complex), out)
    ref, ref_obs = twin_chunk(psi0, ops, TAU, r, c, fields, mask)
    np.testing.assert_allclose(psi, ref, atol=1e-12)
    np.testing.assert_allclose(out, ref_obs, rtol=1e-11, atol=1e-13)
    assert out[-1, 0] < 1 - 1e-3          # the mask removed norm: the test sees absorption


def test_propagate_chunk_parallel_matches_twin(setup):
    grid, a, ops, psi0 = setup
    w, cp = factors(a, N, L)
    c = coupling(L)
    mask = np.ones(N)
    mask[-20:] = 0.9
    fields = np.array([0.02, 0.04, -0.06])
    block = 4
    psi = psi0.copy()
    out = np.zeros((fields.size, 3))
    kernels.propagate_chunk_parallel(psi, np.zeros_like(psi), w, cp, a["m_diag"], a["m_off"],
                                     a["d_diag"], a["d_off"], a["m_first"], a["d_first"], a["cent"],
                                     a["coul"], a["invr2"], TAU, 0.5 / ATOM.reduced_mass, DR, c,
                                     fields, mask, N - 20, np.zeros(((L + block - 1) // block, block),
                                                                     complex),
                                     np.zeros(((N + block - 1) // block, 3)), out, block)
    ref, ref_obs = twin_chunk(psi0, ops, TAU, grid.r, c, fields, mask)
    np.testing.assert_allclose(psi, ref, atol=1e-12)
    np.testing.assert_allclose(out, ref_obs, rtol=1e-11, atol=1e-13)


def test_rotate_all_matches_twin(setup):
    grid, a, ops, psi0 = setup
    c = coupling(L)
    psi = psi0.copy()
    kernels.rotate_all(psi, 0.3, TAU, DR, c, 1, np.zeros((2, L), complex), np.zeros((2, L), complex))
    ref = twin_rotate(twin_rotate(psi0, 0.3, TAU, grid.r, c, 1), 0.3, TAU, grid.r, c, 0)
    np.testing.assert_allclose(psi, ref, atol=1e-13)
    assert abs(np.linalg.norm(psi) - 1.0) < 1e-13        # rotations are unitary


def test_project_rows_matches_matmul(setup):
    grid, a, ops, psi0 = setup
    vec = np.linalg.qr(np.random.default_rng(3).normal(size=(N, 5)))[0]
    out = np.zeros(5, complex)
    kernels.project_rows(psi0, vec, 2, out)
    np.testing.assert_allclose(out, vec.T @ psi0[:, 2], atol=1e-14)

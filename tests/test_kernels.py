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
    ops = [numerov_operators(grid, l, ATOM) for l in range(L)]
    rng = np.random.default_rng(7)
    psi = rng.normal(size=(N, L)) + 1j * rng.normal(size=(N, L))
    psi /= np.linalg.norm(psi)
    return grid, ops, psi


def stepper_for(grid, mask, threads=1, nl=L):
    from driven_atom.routes.grid import _Stepper

    return _Stepper(grid, ATOM, nl, 2 * TAU, mask, threads)


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
    out = np.zeros((fields.size, 3))
    st.run(fields, out)
    ref, ref_obs = twin_chunk(psi0, ops[:nl], TAU, grid.r, coupling(nl), fields, mask)
    np.testing.assert_allclose(st.state(), ref, atol=1e-12)
    np.testing.assert_allclose(out, ref_obs, rtol=1e-11, atol=1e-13)
    assert out[-1, 0] < 1 - 1e-3          # the mask removed norm: the test sees absorption


def test_propagate_chunk_parallel_matches_twin(setup):
    grid, ops, psi0 = setup
    mask = edge_mask()
    st = stepper_for(grid, mask, threads=2)
    fields = np.array([0.02, 0.04, -0.06])
    st.set_state(psi0)
    out = np.zeros((fields.size, 3))
    st.run(fields, out)
    ref, ref_obs = twin_chunk(psi0, ops, TAU, grid.r, coupling(L), fields, mask)
    np.testing.assert_allclose(st.state(), ref, atol=1e-12)
    np.testing.assert_allclose(out, ref_obs, rtol=1e-11, atol=1e-13)


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
    part = np.random.default_rng(5).normal(size=(3, 7, 3))
    out = np.zeros((3, 3))
    kernels.reduce_partial(part, out)
    np.testing.assert_allclose(out, part.sum(axis=1), rtol=1e-14)

"""Speed of the grid route's time step, measured in one run on this machine; prints one JSON object.

Keys:

* ``ns_per_point_step`` — wall time of the fused single-core kernel per radial point × partial
  wave × time step (N = 4000 points, L = 40 partial waves, warm cache, numba compiled);
* ``numpy_pass_ns`` — this machine's time per element of one in-place elementwise complex multiply
  over an array of the same size (our unit of "one memory pass");
* ``passes_per_step`` — their ratio;
* ``speedup_vs_numpy`` — over a plain numpy/scipy implementation of the same scheme written here
  (per-l ``solve_banded`` for Crank–Nicolson, vectorised rotations), same N and L;
* ``speedup_vs_qutip`` — over qutip ``sesolve`` on the same discretised Hamiltonian in plain
  three-point form (M = 1), a short window, at equal accuracy: both errors measured against the
  split-operator scheme at dt/16; the qutip tolerance is tightened until its error is no larger than
  ours. The ODE solver's steps are limited by the stiffest term (l(l+1)/2r² near the origin), so this
  comparison uses a smaller problem (N = 600, L = 16, dr = 0.1, window 2 a.u.) that qutip finishes
  in seconds; the ratio grows with N and L (N = 300, L = 8, dr = 0.2 gives ~10× less);
* ``two_thread_speedup`` — the parallel kernel on two threads over the fused kernel on one.

Run: ``OMP_NUM_THREADS=1 python benchmarks/grid.py``.
"""
from __future__ import annotations

import json
import math
import sys
import time

import numpy as np

from driven_atom.atom import Atom
from driven_atom.basis.radial_grid import uniform_grid
from driven_atom.routes import grid

N, L, DR, DT = 4000, 40, 0.1, 0.05
ATOM = Atom(1)
VERBOSE = "-v" in sys.argv          # details of the qutip comparison on stderr


def best_time(fn, repeat=3):
    best = math.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def random_state(n, nl, seed=1):
    rng = np.random.default_rng(seed)
    psi = rng.normal(size=(n, nl)) + 1j * rng.normal(size=(n, nl))
    return psi / np.linalg.norm(psi)


def fields_for(steps):
    return 0.05 * np.sin(0.057 * DT * (np.arange(steps) + 0.5))


def kernel_ns(stepper, psi, steps):
    out = np.zeros((steps, 4))
    f = fields_for(steps)
    stepper.set_state(psi)
    stepper.run(f[:2], out[:2])                  # warm (compiled, caches filled)
    return best_time(lambda: stepper.run(f, out)) / (steps * psi.size) * 1e9


def numpy_pass_ns(shape):
    a = random_state(*shape, seed=2)
    b = random_state(*shape, seed=3)
    return best_time(lambda: np.multiply(a, b, out=a), repeat=20) / a.size * 1e9


class NumpyScheme:
    """The same Strang step in plain numpy/scipy: A B C B A, C by solve_banded per l."""

    def __init__(self, stepper: grid._Stepper, r):
        a = stepper.a                                # named views into the stacked operator arrays
        n, nl = stepper.psi.shape[1:]
        self.tau, inv2mu = stepper.consts[:2]
        self.r, self.mask = r, stepper.mask
        self.c = grid.coupling_coefficients(nl - 1)
        self.ap, self.am = [], []
        for l in range(nl):
            j = stepper.column_of[l]                 # the kernels keep even l first, then odd l
            v = a["cent"][j] * a["invr2"] + a["coul"]
            md = a["m_diag"].copy()
            dd = a["d_diag"].copy()
            md[0], dd[0] = a["m_first"][j], a["d_first"][j]
            k_diag = -dd * inv2mu + md * v
            up = -a["d_off"] * inv2mu + a["m_off"] * v[1:]      # (i, i+1)
            lo = -a["d_off"] * inv2mu + a["m_off"] * v[:-1]     # (i+1, i)
            ab = np.zeros((3, n), complex)
            ab[0, 1:] = a["m_off"] + 1j * self.tau * up
            ab[1] = md + 1j * self.tau * k_diag
            ab[2, :-1] = a["m_off"] + 1j * self.tau * lo
            self.ap.append(ab)
            self.am.append((md - 1j * self.tau * k_diag, a["m_off"] - 1j * self.tau * up,
                            a["m_off"] - 1j * self.tau * lo))

    def rotate(self, psi, e, parity):
        th = self.tau * e * self.r[:, None] * self.c[None, parity::2][:, : (psi.shape[1] - parity) // 2]
        c, s = np.cos(th), np.sin(th)
        lo = psi[:, parity:parity + 2 * th.shape[1]:2].copy()
        hi = psi[:, parity + 1:parity + 2 * th.shape[1]:2].copy()
        psi[:, parity:parity + 2 * th.shape[1]:2] = c * lo - 1j * s * hi
        psi[:, parity + 1:parity + 2 * th.shape[1]:2] = -1j * s * lo + c * hi

    def step(self, psi, e):
        from scipy.linalg import solve_banded

        self.rotate(psi, e, 0)
        self.rotate(psi, e, 1)
        for l in range(psi.shape[1]):
            d, up, lo = self.am[l]
            u = psi[:, l]
            rhs = d * u
            rhs[:-1] += up * u[1:]
            rhs[1:] += lo * u[:-1]
            psi[:, l] = solve_banded((1, 1), self.ap[l], rhs)
        self.rotate(psi, e, 1)
        self.rotate(psi, e, 0)
        psi *= self.mask[:, None]


def numpy_ns(stepper, r, psi, steps=3):
    scheme = NumpyScheme(stepper, r)
    f = fields_for(steps)
    stepper.set_state(psi)
    stepper.run(f[:1], np.zeros((1, 4)))
    ref = psi.copy()
    scheme.step(ref, f[0])
    assert np.abs(ref - stepper.state()).max() < 1e-10, "numpy scheme and kernel disagree"

    def go():
        for e in f:
            scheme.step(psi, e)
    return best_time(go, repeat=2) / (steps * psi.size) * 1e9


def qutip_ratio(window=2.0, n=600, nl=16, dr=0.1):
    """Wall time of qutip sesolve over that of the kernel, same plain 3-point problem, equal accuracy."""
    import qutip
    import scipy.sparse as sp

    g = uniform_grid(n * dr, dr)
    r = g.r
    stepper = grid._Stepper(g, ATOM, nl, DT, np.ones(n), threads=1)
    fine = grid._Stepper(g, ATOM, nl, DT / 16, np.ones(n), threads=1)
    for s in (stepper, fine):                    # switch to plain three-point: M = 1, no corrections
        s.a["m_diag"][:] = 1.0
        s.a["m_off"][:] = 0.0
        s.a["m_first"][:] = 1.0
        s.a["d_first"][:] = -2.0 / dr**2
        s.a["d_diag"][:] = -2.0 / dr**2
        s.refactor()
    a = stepper.a
    omega, f0 = 0.057, 0.05

    def field(t):
        return f0 * math.sin(omega * t)

    steps = round(window / DT)
    # 1s + 0.3·2p0 of the plain three-point operators (the grid's own states: smooth at r → 0)
    psi0 = np.zeros((n, nl), complex)
    for l, amp in ((0, 1.0), (1, 0.3)):
        kin = sp.diags([np.full(n - 1, -0.5 / dr**2), np.full(n, 1.0 / dr**2), np.full(n - 1, -0.5 / dr**2)],
                       [-1, 0, 1])
        h_l = (kin + sp.diags(a["cent"][stepper.column_of[l]] * a["invr2"] + a["coul"])).toarray()
        psi0[:, l] = amp * np.linalg.eigh(h_l)[1][:, 0]
    psi0 /= np.linalg.norm(psi0)
    psi0 /= np.linalg.norm(psi0)

    def ours(st, k):
        st.set_state(psi0)
        st.run(np.array([field((j + 0.5) * window / k) for j in range(k)]), np.zeros((k, 4)))
        return st.state()

    ours(stepper, 2)
    t_ours = best_time(lambda: ours(stepper, steps), repeat=5)
    ref = ours(fine, 16 * steps)
    err_ours = np.linalg.norm(ours(stepper, steps) - ref)

    # the same matrices in the l-major ordering index = l*n + i
    blocks = []
    coupling = grid.coupling_coefficients(nl - 1)
    for l in range(nl):
        v = a["cent"][stepper.column_of[l]] * a["invr2"] + a["coul"]
        blocks.append(sp.diags([np.full(n - 1, -0.5 / dr**2), 0.5 * 2.0 / dr**2 + v,
                                np.full(n - 1, -0.5 / dr**2)], [-1, 0, 1]))
    h0 = sp.block_diag(blocks, format="csr")
    zc = sp.lil_matrix((n * nl, n * nl))
    for l in range(nl - 1):
        idx = np.arange(n)
        zc[l * n + idx, (l + 1) * n + idx] = r * coupling[l]
        zc[(l + 1) * n + idx, l * n + idx] = r * coupling[l]
    dims = [[n * nl], [1]]
    H = qutip.QobjEvo([qutip.Qobj(h0, dims=[[n * nl], [n * nl]]),
                       [qutip.Qobj(zc.tocsr(), dims=[[n * nl], [n * nl]]), lambda t: field(t)]])
    state0 = qutip.Qobj(psi0.T.reshape(-1, 1), dims=dims)
    for tol in (1e-4, 1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10):
        opts = {"atol": tol * 1e-2, "rtol": tol, "nsteps": 10**7, "store_final_state": True}
        t0 = time.perf_counter()
        res = qutip.sesolve(H, state0, [0.0, window], options=opts)
        t_q = time.perf_counter() - t0
        final = res.final_state.full().reshape(nl, n).T
        if np.linalg.norm(final - ref) <= err_ours:
            break
    if VERBOSE:
        print(f"qutip tol {tol:g}: {t_q:.3f} s, error {np.linalg.norm(final - ref):.2e}; "
              f"kernel {t_ours * 1e3:.3f} ms, error {err_ours:.2e}", file=sys.stderr)
    return t_q / t_ours


def main():
    g = uniform_grid(N * DR, DR)
    mask = grid.mask_profile(g.r, g.r_max, 40.0, 0.125)
    one = grid._Stepper(g, ATOM, L, DT, mask, threads=1)
    psi = random_state(N, L)
    ns = kernel_ns(one, psi, steps=40)
    pass_ns = numpy_pass_ns((N, L))
    np_ns = numpy_ns(one, g.r, random_state(N, L, seed=4))
    two = grid._Stepper(g, ATOM, L, DT, mask, threads=2)
    ns_two = kernel_ns(two, random_state(N, L), steps=40)
    print(json.dumps({
        "ns_per_point_step": round(ns, 3),
        "numpy_pass_ns": round(pass_ns, 3),
        "passes_per_step": round(ns / pass_ns, 2),
        "speedup_vs_numpy": round(np_ns / ns, 1),
        "speedup_vs_qutip": round(qutip_ratio(), 1),
        "two_thread_speedup": round(ns / ns_two, 2),
    }))


if __name__ == "__main__":
    main()

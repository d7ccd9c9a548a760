"""Benchmark of the basis route: Magnus + Lanczos against scipy's DOP853 on the same matrix.

H(t) = diag(E) + E_z(t)·z in a bound + box-continuum basis of H (about 2000 states with the
defaults: r_max = 200, dr = 0.08, l_max = 10, e_max = 3.2 hartree) through a 10-cycle 800 nm
sin² pulse at 1e14 W/cm². Prints the basis construction time, then for each propagator the wall
time, the number of matrix-vector products and the error of the final amplitudes against a
reference (the Magnus propagator at tolerance 1e-12, checked against DOP853 at rtol 1e-12),
and finally the speed ratio at equal accuracy, two ways: (a) DOP853's time at the loosest rtol
whose error is no larger than the Magnus run's error, divided by the Magnus time; (b) DOP853's
time interpolated (log–log, between the two rtols whose errors bracket the Magnus error) to the
Magnus error, divided by the Magnus time; (b) is the figure held against the target. Both use the
same dipole matrix and the same pulse evaluation, but not the same product: the route applies z
as dense real l ↔ l+1 blocks with its own numba kernel (:mod:`driven_atom.routes.krylov`), while the
DOP853 reference is plain ``solve_ivp`` with the complex scipy CSR matrix. The time of one product
of each kind and the ratio of product counts are printed, so the gain of the integrator (fewer
products) and of the kernel (cheaper products) can be told apart. Threads as set by
OMP_NUM_THREADS.

    python benchmarks/basis.py                  # full size (several minutes on one core)
    python benchmarks/basis.py --l-max 4 --cycles 3 --r-max 100    # quick look
"""
from __future__ import annotations

import argparse
import time

import numpy as np


def main(argv=None) -> None:
    from scipy.integrate import solve_ivp

    from driven_atom.atom import Atom
    from driven_atom.basis.eigenbasis import build_basis
    from driven_atom.routes.basis import MagnusPropagator
    from driven_atom.routes.krylov import Coupling
    from driven_atom.pulse import Pulse

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--r-max", type=float, default=200.0)
    ap.add_argument("--dr", type=float, default=0.08)
    ap.add_argument("--l-max", type=int, default=10)
    ap.add_argument("--e-max", type=float, default=3.2)
    ap.add_argument("--cycles", type=float, default=10)
    ap.add_argument("--intensity", default="1e14 W/cm^2")
    ap.add_argument("--tolerance", type=float, default=1e-9, help="Magnus local error per step")
    ap.add_argument("--scheme", default="cf6", choices=["cf6", "cf4"])
    ap.add_argument("--rtols", default="1e-6,1e-7,1e-8,1e-9,1e-10,1e-11", help="DOP853 rtol values")
    args = ap.parse_args(argv)

    t0 = time.perf_counter()
    basis = build_basis(Atom(1), r_max=args.r_max, dr=args.dr, l_max=args.l_max, e_max=args.e_max)
    print(f"basis: {basis.size} states (l <= {args.l_max}, E <= {args.e_max} Eh, r_max {args.r_max}, "
          f"dr {args.dr}), dipole nnz {basis.dipole.nnz}, built in {time.perf_counter() - t0:.2f} s")
    pulse = Pulse({"wavelength": "800 nm", "intensity": args.intensity, "cycles": args.cycles})
    c0 = np.zeros(basis.size, complex)
    c0[basis.index("1s")] = 1.0
    E = basis.energies
    B = basis.dipole.astype(complex).tocsr()
    blocks = Coupling(basis.dipole, basis.l)
    v = np.random.default_rng(0).normal(size=(basis.size, 2)) @ np.array([1.0, 1j])
    for name, product in (("complex CSR (DOP853)", B.__matmul__), (f"{blocks.form} (Magnus)", blocks.__matmul__)):
        product(v)                                   # compiles (or loads) the numba kernel
        start = time.perf_counter()
        for _ in range(200):
            product(v)
        print(f"one product, {name}: {(time.perf_counter() - start) / 200 * 1e3:.3f} ms")

    def magnus(tol):
        prop = MagnusPropagator(E, basis.dipole, pulse.field_z, tol, scheme=args.scheme, groups=basis.l)
        start = time.perf_counter()
        c, _, _ = prop.advance(c0, pulse.t_start, pulse.t_end, 1.0)
        return c, time.perf_counter() - start, prop.matvecs

    def dop853(rtol):
        calls = [0]

        def rhs(t, y):
            calls[0] += 1
            return -1j * (E * y + pulse.field_z(np.array([t]))[0] * (B @ y))

        start = time.perf_counter()
        sol = solve_ivp(rhs, (pulse.t_start, pulse.t_end), c0, method="DOP853", rtol=rtol, atol=rtol * 1e-2)
        return sol.y[:, -1], time.perf_counter() - start, calls[0]

    ref, t_ref, _ = magnus(1e-12)
    check, t_check, n_check = dop853(1e-12)
    print(f"reference: Magnus tol 1e-12 in {t_ref:.1f} s; DOP853 rtol 1e-12 in {t_check:.1f} s "
          f"({n_check} products) differs by {np.linalg.norm(check - ref):.2e}")
    print(f"P(1s) = {abs(ref[basis.index('1s')]) ** 2:.8f}, ionisation = {np.sum(np.abs(ref[~basis.bound]) ** 2):.6e}")

    c, t_m, n_m = magnus(args.tolerance)
    err_m = np.linalg.norm(c - ref)
    print(f"Magnus {args.scheme} tol {args.tolerance:g}: {t_m:.2f} s, {n_m} products, error {err_m:.2e}")
    runs = []
    for rtol in (float(x) for x in args.rtols.split(",")):
        y, t_d, n_d = dop853(rtol)
        runs.append((rtol, t_d, n_d, np.linalg.norm(y - ref)))
        print(f"DOP853 rtol {rtol:g}: {t_d:.2f} s, {n_d} products, error {runs[-1][3]:.2e}")
        if runs[-1][3] <= err_m:
            break
    if runs[-1][3] > err_m:
        print("DOP853 did not reach the Magnus accuracy in the rtol list; no ratio")
        return
    rtol, t_d, n_d, _ = runs[-1]
    print(f"(a) loosest DOP853 at least as accurate (rtol {rtol:g}): {t_d / t_m:.2f}x faster, "
          f"{n_d / n_m:.2f}x fewer products")
    if len(runs) > 1:
        (_, t1, n1, e1), (_, t2, n2, e2) = runs[-2], runs[-1]
        x = np.log(err_m / e1) / np.log(e2 / e1)
        t_eq, n_eq = t1 * (t2 / t1) ** x, n1 * (n2 / n1) ** x
        print(f"(b) DOP853 interpolated to the Magnus error: {t_eq:.2f} s, {n_eq:.0f} products -> "
              f"{t_eq / t_m:.2f}x faster, {n_eq / n_m:.2f}x fewer products (target >= 5x)")

if __name__ == "__main__":
    main()

"""Benchmark: the levels route (qutip) against a plain scipy ``solve_ivp`` Lindblad equation.

Model: hydrogen, every sublevel with n <= 4 (30 states), spontaneous decay on, driven for 1 ns by
a flat Lyman-alpha pulse (z) and a flat Balmer-beta pulse (circular+), RWA. The reference below
writes the same master equation by hand in numpy,

    dρ/dt = -i[H(t), ρ] - ½{G, ρ} + diag(F p),   G = Σ_k L_k†L_k,  p = diag ρ,

with H(t) = Σ_r c_r(t) H_r built from the same operators and the same coefficient samples (cubic
splines, as qutip interpolates them), and integrates it with ``solve_ivp`` (DOP853) at the route's
tolerances. Printed: both wall times (the route's includes building the model and sampling the
field; the reference's is the integration only), their ratio, and the largest population
difference. Run: ``python benchmarks/levels.py`` (``--length "0.2 ns"`` for a quicker look).
"""
from __future__ import annotations

import argparse
import time

import numpy as np


def reference_populations(atom, pulse, settings, initial_index: int):
    """Final populations from a hand-written Lindblad equation integrated by scipy."""
    from scipy.integrate import solve_ivp
    from scipy.interpolate import make_interp_spline

    from driven_atom.routes.levels import build_model, coupling

    model = build_model(atom, settings.sublevels(), decay=settings.decay)
    terms, (ts, vals) = coupling(atom, pulse, model, settings)
    n = model.size
    ops = np.array([A for A, _, _ in terms.hamiltonian])
    rows = np.array([r for _, r, _ in terms.hamiltonian])
    conj = np.array([c for _, _, c in terms.hamiltonian])
    spline = make_interp_spline(ts, vals, k=3, axis=1)
    F = np.zeros((n, n))
    for i, j, rate in model.channels:
        F[j, i] += rate
    half_G = 0.5 * F.sum(axis=0)            # G is diagonal: Σ_k L_k†L_k = diag(total rate out)

    def rhs(t, y):
        rho = y.reshape(n, n)
        c = spline(t)[rows]
        c = np.where(conj, c.conj(), c)
        H = np.tensordot(c, ops, axes=1)
        d = -1j * (H @ rho - rho @ H) - half_G[:, None] * rho - rho * half_G[None, :]
        d[np.diag_indices(n)] += F @ np.real(np.diag(rho))
        return d.ravel()

    rho0 = np.zeros((n, n), dtype=complex)
    rho0[initial_index, initial_index] = 1.0
    started = time.perf_counter()
    sol = solve_ivp(rhs, (pulse.t_start, pulse.t_end), rho0.ravel(), method="DOP853",
                    rtol=settings.rtol, atol=settings.atol)
    wall = time.perf_counter() - started
    if not sol.success:
        raise RuntimeError(sol.message)
    return np.real(np.diag(sol.y[:, -1].reshape(n, n))), wall, model.labels, sol.nfev


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--length", default="1 ns", help='pulse length foot to foot (default "1 ns")')
    parser.add_argument("--intensity", default="1e5 W/cm^2", help="intensity of each pulse")
    args = parser.parse_args(argv)

    import qutip  # noqa: F401  (imported before timing: the route imports it lazily)

    from driven_atom.atom import Atom, State
    from driven_atom.atom.levels import energy
    from driven_atom.config import OutputConfig
    from driven_atom.pulse import Pulse
    from driven_atom.routes import propagate
    from driven_atom.settings import LevelsSettings as Settings

    atom = Atom.from_name("H")
    w21 = energy(atom, 2) - energy(atom, 1)
    w42 = energy(atom, 4) - energy(atom, 2)
    common = {"envelope": "flat", "intensity": args.intensity, "length": args.length, "ramp": "0.05 ns"}
    pulse = Pulse([{**common, "photon_energy": w21, "polarization": "z"},
                   {**common, "photon_energy": w42, "polarization": "circular+"}])
    states = ["1s", "2s", "2p", "3s", "3p", "3d", "4s", "4p", "4d", "4f"]
    settings = Settings(states=states, rwa=True, decay=True)

    started = time.perf_counter()
    result = propagate(atom, pulse, settings, initial=[(State(1, 0), 1.0)],
                       output=OutputConfig(every=(pulse.t_end - pulse.t_start) / 20))
    route_wall = time.perf_counter() - started

    ref, ref_wall, labels, nfev = reference_populations(atom, pulse, settings, initial_index=0)
    route = np.array([result.populations.get(label, 0.0) for label in labels])
    print(f"levels route: {len(settings.sublevels())} sublevels + sinks {result.metadata['sinks']}, "
          f"pulse {args.length}, {result.stats['coefficient_samples']} coefficient samples")
    for note in result.metadata["transitions"]:
        print(f"  {note}")
    print(f"qutip route (model + sampling + mesolve): {route_wall:8.3f} s")
    print(f"scipy solve_ivp reference (DOP853, {nfev} RHS calls): {ref_wall:8.3f} s")
    print(f"ratio reference / route: {ref_wall / route_wall:.2f}  (>= 1: the route is not slower)")
    print(f"largest population difference: {np.max(np.abs(route - ref)):.2e}; "
          f"2p = {result.populations['2p']:.4f}, 4d = {result.populations.get('4d', 0.0):.4f}, "
          f"norm - 1 = {result.norm - 1:.1e}")


if __name__ == "__main__":
    main()

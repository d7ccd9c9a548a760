"""Photoelectron spectra from the flux through a sphere (t-SURFF: Tao & Scrinzi, New J. Phys. 14,
013021 (2012); Scrinzi, New J. Phys. 14, 085008 (2012)).

Beyond the radius R the electron is taken as free in the laser field (the grid route tapers the
potential to zero below R), so the part of ψ that has crossed R evolves under the velocity-gauge
H_V = p²/2μ + A p_z/μ: the A²/2μ of (p + A ẑ)²/2μ is a phase common to the whole state, which the
route's propagation drops, so the Volkov waves must drop it too — kept in one and not the other,
it would shift every electron that crosses R while the field is on by the ponderomotive energy
(our derivation). Projected on Volkov waves

    χ_k(r, t) = (2π)^(−3/2) e^{ik·r} e^{−iΦ(k, t)},
    Φ(k, t) = k²(t − t₀)/2μ + k_z α(t)/μ,    α(t) = ∫_{t₀}^{t} A dt′,

the outer part ⟨χ_k|θ(r − R)ψ⟩ changes only by the flux through the sphere,
d/dt ⟨χ_k|θψ⟩ = i⟨χ_k|[H_V, θ]|ψ⟩, so the momentum amplitude after the time T is

    b(k) = i ∫_{t₀}^{T} dt ⟨χ_k(t)| [H_V(t), θ(r − R)] |ψ(t)⟩.

With ψ = Σ_l u_l(r)/r · Y_l0, e^{ik·r} = 4π Σ_l i^l j_l(kr) Y*_lm(k̂) Y_lm(r̂), [p², θ] giving the
Wronskian of v_l(r) = r j_l(kr) and u_l at R and [p_z, θ] = −i cos θ δ(r − R) (our derivation):

    b(k) = i √(2/π) Σ_l (−i)^l Y_l0(k̂) ∫ dt e^{iΦ(k, t)} F_l(k, t),
    F_l = [v_l′ u_l − v_l u_l′]_R / 2μ − i (A/μ) v_l(R) [c_{l−1} u_{l−1} + c_l u_{l+1}]_R,

c_l = ⟨l|cos θ|l+1⟩, and d³P/dk³ = |b|², d²P/dE dΩ = μk |b|². The direction enters Φ through
k_z α(t): while the field is on, the amplitude is summed on the emission angles of the spectrum
(:attr:`SurfaceFlux.during`); once A = 0 for good, α is constant, so the rest is summed per
partial wave (:attr:`SurfaceFlux.after`) and turned by e^{i k_z α_T/μ} at the end. The
time integral is the trapezoid rule on the samples the route passes (every few steps).

>>> sf = SurfaceFlux([0.5], np.array([-0.5, 0.5]), radius=20.0, l_max=2, mu=1.0)
>>> sf.during.shape, sf.after.shape
((2, 1), (3, 1))
"""
from __future__ import annotations

import math

import numpy as np

from driven_atom.errors import InputError


def volkov_integral(times, potential_start, potential_mid, potential_end) -> np.ndarray:
    """α(t) = ∫A dt from the first of ``times`` to each of them, by Simpson's rule on every step from
    A at its start, middle and end.

    >>> t = np.linspace(0.0, np.pi, 101)
    >>> a = volkov_integral(t, np.sin(t[:-1]), np.sin(t[:-1] + np.pi / 200), np.sin(t[1:]))
    >>> round(float(a[-1]), 8)                                  # 2 (analytic)
    2.0
    """
    t = np.asarray(times, dtype=float)
    dt = np.diff(t)
    a0, am, a1 = (np.asarray(v, dtype=float) for v in (potential_start, potential_mid, potential_end))
    return np.r_[0.0, np.cumsum(dt / 6 * (a0 + 4 * am + a1))]


def surface_derivative(rows: np.ndarray, dr: float) -> tuple[np.ndarray, np.ndarray]:
    """(u(R), ∂u/∂r(R)) from five rows u(R − 2dr) … u(R + 2dr) (axis 1 of ``rows``), the derivative
    by the fourth-order central difference (u₋₂ − 8u₋₁ + 8u₊₁ − u₊₂)/(12 dr).

    >>> r = 1.0 + 0.1 * np.arange(-2, 3)
    >>> u, d = surface_derivative(np.sin(r)[None, :, None], 0.1)
    >>> bool(abs(d[0, 0] - np.cos(1.0)) < 1e-5)                 # error dr⁴/30 · cos (analytic)
    True
    """
    rows = np.asarray(rows)
    return rows[:, 2], (rows[:, 0] - 8 * rows[:, 1] + 8 * rows[:, 3] - rows[:, 4]) / (12 * dr)


class SurfaceFlux:
    """The t-SURFF amplitudes of one run, summed sample by sample (module docstring).

    ``energies`` (hartree) and the emission nodes ``x`` = cos θ fix the momenta; ``radius`` is R,
    ``l_max`` the highest partial wave, ``mu`` the reduced mass, ``t0`` the time where Φ starts.
    :attr:`during` (n_x, n_E) and :attr:`after` (l_max + 1, n_E) are the whole state (checkpointed by
    the route).
    """

    def __init__(self, energies, x, *, radius: float, l_max: int, mu: float, t0: float = 0.0):
        from scipy.special import spherical_jn

        from driven_atom.observables.photoelectron import spherical_harmonics_m0

        self.energies = np.asarray(energies, dtype=float)
        if np.any(self.energies <= 0):
            raise InputError("surface-flux energies must be > 0 hartree")
        self.x = np.asarray(x, dtype=float)
        self.radius, self.mu, self.t0, self.l_max = float(radius), float(mu), float(t0), int(l_max)
        self.k = np.sqrt(2 * self.mu * self.energies)
        l = np.arange(self.l_max + 1)[:, None]
        kr = self.k[None, :] * self.radius
        self.v = self.radius * spherical_jn(l, kr)                                     # v_l(R) = R j_l(kR)
        self.dv = spherical_jn(l, kr) + kr * spherical_jn(l, kr, derivative=True)       # v_l′(R)
        self.angular = spherical_harmonics_m0(self.l_max, self.x) * (-1j) ** np.arange(self.l_max + 1)
        n = np.arange(self.l_max, dtype=float)
        self.c = (n + 1) / np.sqrt((2 * n + 1) * (2 * n + 3))                         # ⟨l|cos θ|l+1⟩
        self.during = np.zeros((self.x.size, self.energies.size), complex)
        self.after = np.zeros((self.l_max + 1, self.energies.size), complex)

    def integrand(self, u, du, potential) -> np.ndarray:
        """F_l(k, t) of the module docstring, shape (n_samples, l_max + 1, n_E), from u_l(R), ∂u_l/∂r(R)
        (n_samples, l_max + 1) and A at the samples."""
        u, du = np.asarray(u), np.asarray(du)
        w = np.zeros_like(u)
        w[:, 1:] += self.c[None, :] * u[:, :-1]          # c_{l−1} u_{l−1}
        w[:, :-1] += self.c[None, :] * u[:, 1:]          # c_l u_{l+1}
        a = np.asarray(potential, dtype=float)[:, None, None]
        return ((self.dv[None] * u[:, :, None] - self.v[None] * du[:, :, None]) / (2 * self.mu)
                - 1j * (a / self.mu) * self.v[None] * w[:, :, None])

    def add(self, times, u, du, potential, alpha, weights, batch: int = 16) -> None:
        """Add the samples at ``times`` with their trapezoid ``weights``: u_l(R), ∂u_l/∂r(R) (n, L),
        A and α at the samples. Samples with A = 0 and the field over for good must come with the
        final α and go to :attr:`after` (pass them in a call of their own, ``potential`` all 0)."""
        times = np.asarray(times, dtype=float)
        if times.size == 0:
            return
        weights = np.asarray(weights, dtype=float)
        f = self.integrand(u, du, potential)
        free_phase = np.exp(1j * np.outer(times - self.t0, self.k**2) / (2 * self.mu))  # (n, n_E)
        if not np.any(np.asarray(potential)) and np.all(np.asarray(alpha) == alpha[0]):
            self.after += np.einsum("n,nk,nlk->lk", weights, free_phase, f)
            return
        kx = self.x[:, None] * self.k[None, :] / self.mu                               # (n_x, n_E)
        for s in range(0, times.size, batch):
            part = slice(s, s + batch)
            g = np.einsum("jl,nlk->njk", self.angular, f[part])                         # Σ_l (−i)^l Y_l0 F_l
            phase = np.exp(1j * kx[None] * np.asarray(alpha)[part, None, None])
            phase *= free_phase[part, None, :]
            self.during += np.einsum("n,njk->jk", weights[part], phase * g)

    def amplitudes(self, alpha_end: float) -> np.ndarray:
        """b(k) on the (emission node, energy) grid, shape (n_x, n_E) (module docstring)."""
        turn = np.exp(1j * self.x[:, None] * self.k[None, :] * alpha_end / self.mu)
        return 1j * math.sqrt(2 / math.pi) * (self.during + turn * (self.angular @ self.after))

    def densities(self, alpha_end: float) -> np.ndarray:
        """d²P/dE dΩ = μk|b|² (per hartree per sr), shape (n_E, n_x)."""
        b = self.amplitudes(alpha_end)
        return (self.mu * self.k[None, :] * abs(b) ** 2).T


def trapezoid_weights(times, t0: float) -> np.ndarray:
    """Weights of the trapezoid rule on the sample times (ascending, after ``t0``, where the
    integrand vanishes: no flux has reached the sphere yet).

    >>> trapezoid_weights([1.0, 2.0, 4.0], 0.0).tolist()
    [1.0, 1.5, 1.0]
    """
    t = np.r_[t0, np.asarray(times, dtype=float)]
    w = np.zeros(t.size)
    w[:-1] += np.diff(t) / 2
    w[1:] += np.diff(t) / 2
    return w[1:]

"""Photoelectron energy spectra from populations of box-discretised continuum states.

A box state k of partial wave l with population P_k stands for the energy interval 1/ρ(E_k),
ρ the density of box states (docs/physics.md), so the energy density of the yield is

    dP_l/dE (E_k) = P_k · ρ_l(E_k),

sampled at that partial wave's own box energies. Partial waves have different box energies;
each is interpolated linearly onto one common energy grid and the sum over l gives dP/dE.
∫ dP/dE dE reproduces Σ_k P_k up to the interpolation error (a few 1e-3 for smooth spectra).

>>> import numpy as np
>>> E = np.array([0.1, 0.2, 0.3, 0.4]); rho = np.full(4, 10.0)
>>> total, per_l = box_spectrum(np.array([0.15, 0.25]), E, np.zeros(4, int), np.full(4, 0.01), rho, 1)
>>> total.round(6).tolist(), per_l.shape
([0.1, 0.1], (1, 2))
"""
from __future__ import annotations

import math

import numpy as np

from driven_atom.errors import InputError


def box_spectrum(energy_grid, energies, l, populations, dos, n_partial_waves: int,
                 l_min: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """dP/dE on ``energy_grid`` and its partial-wave parts dP_l/dE (shape (n_partial_waves, len)).

    ``energies``, ``l``, ``populations``, ``dos`` describe the continuum states (E ≥ 0) one entry
    each; row j of the second result belongs to l = l_min + j. Zero outside each partial wave's
    range of box energies.
    """
    grid = np.asarray(energy_grid, dtype=float)
    per_l = np.zeros((n_partial_waves, grid.size))
    for j in range(n_partial_waves):
        sel = np.asarray(l) == l_min + j
        if sel.sum() < 2:
            continue
        order = np.argsort(energies[sel])
        e = np.asarray(energies)[sel][order]
        density = (np.asarray(populations)[sel] * np.asarray(dos)[sel])[order]
        per_l[j] = np.interp(grid, e, density, left=0.0, right=0.0)
    return per_l.sum(axis=0), per_l


# -- angle-resolved spectra: the machinery every method shares --------------------------------------

def emission_angles(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes x = cos θ (ascending) and weights on [−1, 1]: ∫ f dΩ = 2π Σⱼ wⱼ f(xⱼ)
    for f independent of φ, exact for polynomials of degree ≤ 2n − 1 in cos θ.

    >>> x, w = emission_angles(3)
    >>> round(float(w.sum()), 12), round(float(w @ x**4), 12)      # ∫x⁴ dx = 2/5 (analytic)
    (2.0, 0.4)
    """
    return np.polynomial.legendre.leggauss(int(n))


def spherical_harmonics_m0(l_max: int, x) -> np.ndarray:
    """Y_l0(θ) = √((2l + 1)/4π) P_l(cos θ), shape (len(x), l_max + 1).

    >>> round(float(spherical_harmonics_m0(1, [1.0])[0, 1]), 6)    # √(3/4π)
    0.488603
    """
    from scipy.special import eval_legendre

    x = np.asarray(x, dtype=float)
    l = np.arange(l_max + 1)
    return np.sqrt((2 * l + 1) / (4 * np.pi))[None, :] * eval_legendre(l[None, :], x[:, None])


def coulomb_phases(l_max: int, k, Z: float, mu: float = 1.0) -> np.ndarray:
    """Coulomb phases σ_l(k) = arg Γ(l + 1 + iη), η = −Zμ/k (attractive; docs/physics.md), shape
    (l_max + 1, len(k)); σ_l = σ_0 + Σ_{s=1..l} arctan(η/s) (the recurrence of Γ).

    >>> s = coulomb_phases(2, [1.0], 1.0)
    >>> round(float(s[1, 0] - s[0, 0]), 12) == round(float(np.arctan(-1.0)), 12)
    True
    """
    from scipy.special import loggamma

    k = np.atleast_1d(np.asarray(k, dtype=float))
    eta = -Z * mu / k
    l = np.arange(l_max + 1)
    return loggamma(l[:, None] + 1 + 1j * eta[None, :]).imag


def angular_coefficients(x, w, density, k_max_order: int) -> tuple[np.ndarray, np.ndarray]:
    """dP/dE and β_K (K = 1..k_max_order) of a density d²P/dE dΩ(E, xⱼ) given at the nodes of
    :func:`emission_angles` (shape (n_E, n_x)):

        dP/dE = 2π Σⱼ wⱼ d²P/dE dΩ,   d²P/dE dΩ = (dP/dE)/(4π) [1 + Σ_K β_K P_K(cos θ)],
        β_K = (2K + 1)/2 · Σⱼ wⱼ P_K(xⱼ) · 4π d²P/dE dΩ / (dP/dE)      (docs/physics.md)

    (zero where dP/dE = 0). Returns (dP/dE (n_E,), β (k_max_order, n_E)).

    >>> x, w = emission_angles(4)
    >>> d = (3 / (4 * np.pi)) * x[None, :] ** 2         # cos²θ: a pure p wave, β₂ = 2 (Cooper & Zare 1968)
    >>> p, b = angular_coefficients(x, w, d, 2)
    >>> round(float(p[0]), 12), b[:, 0].round(12).tolist()
    (1.0, [0.0, 2.0])
    """
    from scipy.special import eval_legendre

    density = np.asarray(density, dtype=float)
    dp = 2 * np.pi * density @ w
    orders = np.arange(1, k_max_order + 1)
    legendre = eval_legendre(orders[:, None], np.asarray(x)[None, :])          # (K, n_x)
    moments = (legendre * w[None, :]) @ density.T                              # (K, n_E)
    with np.errstate(invalid="ignore", divide="ignore"):
        beta = np.where(dp[None, :] > 0, (2 * orders[:, None] + 1) / 2 * 4 * np.pi * moments / dp[None, :], 0.0)
    return dp, beta


def momentum_map(energies, x, w, density, mu: float, points: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """d³P/dp³ on a square grid of the polarisation plane (p_z along the polarisation, p_x across
    it; cylindrical symmetry about z): d³P/dp³ = d²P/dE dΩ / (μ p) at p = √(2μE), expanded in
    Legendre polynomials of cos θ = p_z/p by the quadrature of ``x``, ``w`` and interpolated
    linearly in p between the energies (zero outside their range). Returns (p_z, p_x, map[p_x, p_z]).
    """
    from scipy.special import eval_legendre

    energies = np.asarray(energies, dtype=float)
    k = np.sqrt(2 * mu * energies)
    per_p3 = np.asarray(density, dtype=float) / (mu * k[:, None])                  # (n_E, n_x)
    orders = np.arange(len(x))
    legendre = eval_legendre(orders[:, None], np.asarray(x)[None, :])              # (K, n_x)
    coeff = ((2 * orders[:, None] + 1) / 2) * ((legendre * w[None, :]) @ per_p3.T)  # (K, n_E)
    axis = np.linspace(-k[-1], k[-1], points)
    pz, px = np.meshgrid(axis, axis)
    p = np.hypot(pz, px)
    cos = np.divide(pz, p, out=np.ones_like(p), where=p > 0)
    inside = (p >= k[0]) & (p <= k[-1])
    out = np.zeros_like(p)
    for K in orders:
        out += np.interp(p, k, coeff[K]) * eval_legendre(K, cos)
    out[~inside] = 0.0
    return axis, axis.copy(), np.maximum(out, 0.0)


def spectrum_arrays(energies, x, w, density, mu: float, *, k_max_order: int, map_points: int) -> dict:
    """The stored arrays of one angle-resolved spectrum (units as in :mod:`driven_atom.result`):
    ``energy_eV``, ``dP_dE`` (per eV), ``beta`` (row K − 1 holds β_K over the energies),
    ``beta_order``, ``angle_deg`` (θ of the nodes, ascending), ``d2P_dE_dOmega`` (per eV per sr, one
    column per angle), ``momentum_z``, ``momentum_x`` (a.u.) and ``momentum_density`` (d³P/dp³, a.u.;
    rows p_x, columns p_z) from d²P/dE dΩ (per hartree per sr) at ``energies`` (hartree) and the
    nodes ``x`` = cos θ."""
    from driven_atom.units import HARTREE_EV

    density = np.asarray(density, dtype=float)
    dp, beta = angular_coefficients(x, w, density, k_max_order)
    pz, px, dens = momentum_map(energies, x, w, density, mu, map_points)
    order = np.argsort(-np.asarray(x))                           # θ ascending = cos θ descending
    return {"energy_eV": np.asarray(energies) * HARTREE_EV, "dP_dE": dp / HARTREE_EV, "beta": beta,
            "beta_order": np.arange(1, k_max_order + 1), "angle_deg": np.degrees(np.arccos(np.asarray(x)[order])),
            "d2P_dE_dOmega": density[:, order] / HARTREE_EV, "momentum_z": pz, "momentum_x": px,
            "momentum_density": dens}


def integrated(spectrum: dict) -> float:
    """∫ dP/dE dE of a stored spectrum (trapezoid over ``energy_eV``, ``dP_dE`` per eV).

    >>> integrated({"energy_eV": np.array([1.0, 2.0, 3.0]), "dP_dE": np.array([0.1, 0.1, 0.1])})
    0.2
    """
    return float(np.trapezoid(spectrum["dP_dE"], spectrum["energy_eV"]))


# -- the window operator and the projection on the grid's continuum ---------------------------------

def window_widths(energies, spacing: float, inner_radius: float, mu: float) -> np.ndarray:
    """Half-width γ(E) of the window at each energy: at least half the spacing of the energies and
    at least the box's level spacing there, π k/(μ R) with k = √(2μE) and R the absorber-free
    radius (narrower windows see single box states: the spectrum then alternates up and down).

    >>> window_widths([0.5], 0.01, 100.0, 1.0).round(4).tolist()     # π/100
    [0.0314]
    """
    k = np.sqrt(2 * mu * np.asarray(energies, dtype=float))
    return np.maximum(0.5 * spacing, np.pi * k / (mu * inner_radius))


def window_densities(grid, atom, psi, energies, gammas, x) -> np.ndarray:
    """d²P/dE dΩ (per hartree per sr; shape (n_E, len(x))) of ψ[i, l] by the window operator
    W = γ⁴/((H − E)⁴ + γ⁴) (Schafer & Kulander, PRA 42, 5794 (1990), n = 2), each partial wave's
    windowed function χ_l = γ² (H_l − E − γe^{iπ/4})⁻¹ (H_l − E − γe^{3iπ/4})⁻¹ u_l summed coherently
    in space:

        d²P/dE dΩ = √2/(πγ) · Σᵢ |Σ_l χ_l(rᵢ) Y_l0(θ)|²        (∫ γ⁴/(x⁴ + γ⁴) dx = πγ/√2),

    the angular distribution of the windowed state at large r, where the direction of r is that of
    the momentum (its partial waves then carry their Coulomb phases σ_l − lπ/2 themselves). Each
    resolvent is one banded solve, (H − z)⁻¹ = (K − zM)⁻¹M with K = −Δ/2μ + M·V (the grid's own
    Numerov operators). Integrated over angles it is Σ_l ‖χ_l‖² √2/(πγ).

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.basis.radial_grid import uniform_grid
    >>> from driven_atom.routes.grid import bound_states
    >>> g = uniform_grid(60.0, 0.1)
    >>> E, U = bound_states(g, 0, Atom(1))
    >>> psi = U[:, :1].astype(complex)             # the 1s state: W = 1 at E_1s, 1/2 at E_1s + γ
    >>> x, w = emission_angles(2)
    >>> d = window_densities(g, Atom(1), psi, E[0] + np.array([0.0, 0.01]), np.full(2, 0.01), x)
    >>> (2 * np.pi * d @ w * np.pi * 0.01 / np.sqrt(2)).round(6).tolist()
    [1.0, 0.5]
    """
    from scipy.linalg import solve_banded

    from driven_atom.basis.radial_grid import numerov_operators

    energies = np.asarray(energies, dtype=float)
    gammas = np.broadcast_to(np.asarray(gammas, dtype=float), energies.shape)
    n_l = psi.shape[1]
    ylm = spherical_harmonics_m0(n_l - 1, x)                        # (n_x, L)
    out = np.zeros((energies.size, len(x)))
    windowed = np.zeros((psi.shape[0], n_l), complex)
    ops = [numerov_operators(grid, l, atom) for l in range(n_l)]
    roots = np.exp(1j * np.pi * np.array([0.25, 0.75]))
    ab = np.zeros((3, psi.shape[0]), complex)
    for k, (e, gamma) in enumerate(zip(energies, gammas)):
        windowed[:] = 0.0
        for l, o in enumerate(ops):
            u = psi[:, l]
            if not np.any(u):
                continue
            x_ = _m_times(o, u)
            kin_d, kin_o = -o.d_diag / (2 * o.mu), -o.d_off / (2 * o.mu)
            for q, z in enumerate(e + gamma * roots):
                v = o.potential - z
                ab[0, 1:] = kin_o + o.m_off * v[1:]
                ab[1] = kin_d + o.m_diag * v
                ab[2, :-1] = kin_o + o.m_off * v[:-1]
                y = solve_banded((1, 1), ab, x_, check_finite=False)
                if q == 0:
                    x_ = _m_times(o, y)
            windowed[:, l] = gamma**2 * y
        gram = (windowed.conj().T @ windowed).real                  # (L, L), Σᵢ χ*_l χ_l'
        out[k] = np.einsum("jl,lm,jm->j", ylm, gram, ylm) * math.sqrt(2) / (math.pi * gamma)
    return out


def _m_times(ops, u):
    y = ops.m_diag * u
    y[1:] += ops.m_off * u[:-1]
    y[:-1] += ops.m_off * u[1:]
    return y


def continuum_waves(grid, atom, l: int, energies, r_normalize: float) -> np.ndarray:
    """Energy-normalised regular solutions φ_E of partial wave ``l`` of the grid's own radial
    operator (shape (N, n_E), values at the grid points, φ_E(r) → √(2μ/(πk)) sin(kr + …) so that
    ∫φ_E φ_E′ dr = δ(E − E′)): the three-term recurrence of (K − EM)φ = 0 row by row from
    φ(0) = 0 (K, M the Numerov operators of :mod:`driven_atom.basis.radial_grid`), scaled by its
    WKB amplitude A² = (q/k)(φ² + φ′²/q²), q(r) = √(2μ(E − V_l(r))), averaged over the last two
    wavelengths (at least 20 bohr) below ``r_normalize``, and signed so that its first lobe is
    positive, as the regular Coulomb function F_l (under a high centrifugal barrier the discrete
    recurrence alternates in sign at negligible amplitude before the first lobe).

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.basis.radial_grid import uniform_grid
    >>> g = uniform_grid(300.0, 0.05)
    >>> phi = continuum_waves(g, Atom(1), 0, [0.5], 280.0)[:, 0]
    >>> i = 20                                            # r = 1.05: the exact F_0 from mpmath
    >>> import mpmath
    >>> exact = float(mpmath.coulombf(0, -1.0, g.r[i])) * np.sqrt(2 / np.pi)
    >>> bool(abs(phi[i] / exact - 1) < 1e-4)
    True
    """
    from driven_atom.basis.radial_grid import numerov_operators

    o = numerov_operators(grid, l, atom)
    mu = o.mu
    energies = np.atleast_1d(np.asarray(energies, dtype=float))
    n, h = grid.n_points, grid.dr
    kin_d, kin_o = -o.d_diag / (2 * mu), -o.d_off / (2 * mu)
    phi = np.zeros((n, energies.size))
    phi[0] = 1.0
    previous = np.zeros(energies.size)
    for i in range(n - 1):
        v0 = o.potential[i] - energies
        diag = kin_d[i] + o.m_diag[i] * v0
        lower = (kin_o[i - 1] + o.m_off[i - 1] * (o.potential[i - 1] - energies)) if i > 0 else 0.0
        upper = kin_o[i] + o.m_off[i] * (o.potential[i + 1] - energies)
        phi[i + 1] = -(lower * previous + diag * phi[i]) / upper
        previous = phi[i]
        big = np.abs(phi[i + 1]) > 1e150                      # deep under a barrier: rescale (a common factor)
        if np.any(big):
            phi[:, big] /= 1e150
            previous[big] /= 1e150
    k = np.sqrt(2 * mu * energies)
    r = grid.r
    for j, (e, kk) in enumerate(zip(energies, k)):
        span = max(20.0, 2 * 2 * np.pi / kk)
        sel = np.nonzero((r > r_normalize - span) & (r <= r_normalize))[0]
        sel = sel[(sel >= 2) & (sel < n - 2)]
        q2 = 2 * mu * (e - o.potential[sel])
        if sel.size < 8 or np.any(q2 <= 0):
            raise InputError(f"the continuum of l = {l} at E = {e:g} hartree cannot be normalised below "
                             f"r = {r_normalize:g} bohr (classically forbidden there); raise `solver.r_max`")
        f = phi[:, j]
        d = (f[sel - 2] - 8 * f[sel - 1] + 8 * f[sel + 1] - f[sel + 2]) / (12 * h)
        q = np.sqrt(q2)
        amp2 = np.mean((q / kk) * (f[sel] ** 2 + (d / q) ** 2))
        mag = np.abs(f)
        first = f[np.argmax(mag > 1e-3 * mag.max())]     # the first lobe (below it, high l alternates in sign)
        phi[:, j] *= np.sign(first) * np.sqrt(2 * mu / (np.pi * kk) / amp2)
    return phi


def phase_shifts(r, phi, l: int, k, low: float, high: float) -> np.ndarray:
    """Phase shifts δ_l(k) of waves φ (columns, one per k) in a potential that is zero beyond
    ``low``: there φ = c₁ ĵ_l(kr) − c₂ n̂_l(kr) with the Riccati–Bessel ĵ_l = kr j_l(kr) and
    n̂_l = kr y_l(kr), fitted by least squares on the points between ``low`` and ``high``, and
    δ = atan2(c₂, c₁), so that φ → A sin(kr − lπ/2 + δ) with A > 0 (the phase the partial wave
    carries, as σ_l in a Coulomb field).

    >>> r = np.linspace(0.1, 40.0, 400)
    >>> phi = np.sin(2.0 * r - np.pi / 2 + 0.3)[:, None]      # the free l = 1 wave shifted by 0.3
    >>> from scipy.special import spherical_jn, spherical_yn
    >>> exact = 2 * r * (np.cos(0.3) * spherical_jn(1, 2 * r) - np.sin(0.3) * spherical_yn(1, 2 * r))
    >>> round(float(phase_shifts(r, exact[:, None], 1, [2.0], 10.0, 40.0)[0]), 10)
    0.3
    """
    from scipy.special import spherical_jn, spherical_yn

    r = np.asarray(r, dtype=float)
    sel = (r > low) & (r <= high)
    out = np.zeros(len(k))
    for j, kk in enumerate(np.atleast_1d(k)):
        x = kk * r[sel]
        basis = np.column_stack([x * spherical_jn(l, x), -x * spherical_yn(l, x)])
        (c1, c2), *_ = np.linalg.lstsq(basis, phi[sel, j], rcond=None)
        out[j] = math.atan2(c2, c1)
    return out


def projection_densities(grid, atom, psi, bound, energies, x, r_normalize: float) -> np.ndarray:
    """d²P/dE dΩ (per hartree per sr, shape (n_E, len(x))) of ψ[i, l] (Σ|ψ|² = 1 on the grid, so
    ψᵢ = √dr·u(rᵢ)) projected on the field-free continuum: the bound states ``bound[l]`` =
    (energies, vectors) removed, a_l(E) = ∫ φ_E u_l dr with φ_E from :func:`continuum_waves`, and the
    partial waves summed with their Coulomb phases (incoming-wave scattering states; docs/physics.md)
    — or, for an atom whose potential is cut to zero beyond ``atom.free_beyond`` (the flux route's
    :class:`driven_atom.routes.grid.TaperedAtom`), with the phase shifts of :func:`phase_shifts`:

        d²P/dE dΩ = |Σ_l (−i)^l e^{iσ_l} Y_l0(θ) a_l(E)|²,    ∫ dΩ → Σ_l |a_l(E)|².
    """
    energies = np.asarray(energies, dtype=float)
    n_l = psi.shape[1]
    k = np.sqrt(2 * atom.reduced_mass * energies)
    free = getattr(atom, "free_beyond", None)        # a potential cut to zero there (the flux route's)
    if free is None:
        sigma = coulomb_phases(n_l - 1, k, atom.asymptotic_charge, atom.reduced_mass)     # (L, n_E)
    else:
        sigma = np.zeros((n_l, energies.size))
    amps = np.zeros((n_l, energies.size), complex)
    for l in range(n_l):
        u = psi[:, l]
        if not np.any(u):
            continue
        if l < len(bound) and bound[l][1].shape[1]:
            vec = bound[l][1]
            u = u - vec @ (vec.T @ u)
        phi = continuum_waves(grid, atom, l, energies, r_normalize)               # (N, n_E)
        amps[l] = math.sqrt(grid.dr) * (phi.T @ u)
        if free is not None:
            sigma[l] = phase_shifts(grid.r, phi, l, k, free, r_normalize)
    ylm = spherical_harmonics_m0(n_l - 1, x)                                       # (n_x, L)
    phase = ((-1j) ** np.arange(n_l))[:, None] * np.exp(1j * sigma)
    f = ylm @ (phase * amps)                                                       # (n_x, n_E)
    return (abs(f) ** 2).T

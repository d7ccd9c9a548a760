"""Single-atom probabilities for quick estimates (pure functions, atomic units).

* Tunnelling: the static rate of Ammosov, Delone & Krainov, Sov. Phys. JETP 64, 1191 (1986),

      w(F) = C² f(l, m) Iₚ (2F₀/F)^{2n*−|m|−1} exp(−2F₀/(3F)),   F₀ = (2Iₚ)^{3/2}, n* = Z/√(2Iₚ),
      C² = 2^{2n*}/(n* Γ(n*+l*+1) Γ(n*−l*)),  l* = n* − 1,  f = (2l+1)(l+|m|)!/(2^{|m|}|m|!(l−|m|)!),

  which for H(1s) is Landau's w = (4/F) e^{−2/(3F)} (Landau & Lifshitz, QM §77; it exceeds the
  exact static widths of Damburg & Kolosov 1976 by ×1.7 at F = 0.05). Over a pulse the rate
  follows the instantaneous field |E(t)|; for pulses of many cycles its cycle average for linear
  light, w·√(3F/(πF₀)), follows the envelope. P = 1 − exp(−∫w dt) (depletion).
* One photon above threshold: the golden-rule probability P₁ of
  :func:`tdse.observables.perturbation.first_order_ionization`, saturated as P = 1 − exp(−P₁).
* Bound–bound excitation of one dipole transition l → u in the rotating-wave picture: first-order
  amplitude a = (1/2) Σ ⟨u|r|l⟩·∫ℰ(t) e^{−iδt} dt with ℰ the complex envelope and δ = ω − ω_ul, and
  P = sin²(√P₁), P₁ = Σ_{m_u}|a|²: the pulse-area result sin²(θ/2) on resonance (Allen & Eberly
  1975) and first-order theory off resonance; no decay, no other levels.
"""
from __future__ import annotations

import math

import numpy as np

RESONANCE_WIDTHS = 10.0     # a carrier drives a transition when within this many spectral widths


def spectral_width(component) -> float:
    """2π/FWHM (the window length without a FWHM) plus the chirp sweep |β|T/2, in a.u. of frequency."""
    duration = component.fwhm if component.fwhm is not None else component.length
    return 2 * math.pi / duration + abs(component.chirp) * component.length / 2


def adk_rate(field, ip: float, Z: float, l: int = 0, m: int = 0) -> np.ndarray:
    """Static tunnelling rate w(F) (a.u.) of the module docstring; 0 where F = 0.

    >>> round(float(adk_rate(0.05, 0.5, 1)), 10) == round(4 / 0.05 * math.exp(-2 / 0.15), 10)   # Landau
    True
    """
    F = np.abs(np.asarray(field, dtype=float))
    n_star = Z / math.sqrt(2.0 * ip)
    l_star = n_star - 1.0
    c2 = 2.0 ** (2 * n_star) / (n_star * math.gamma(n_star + l_star + 1) * math.gamma(n_star - l_star))
    m = abs(m)
    f_lm = (2 * l + 1) * math.factorial(l + m) / (2**m * math.factorial(m) * math.factorial(l - m))
    f0 = (2.0 * ip) ** 1.5
    out = np.zeros_like(F)
    on = F > 0
    out[on] = c2 * f_lm * ip * (2 * f0 / F[on]) ** (2 * n_star - m - 1) * np.exp(-2 * f0 / (3 * F[on]))
    return out


def _field_samples(pulse) -> tuple[np.ndarray, np.ndarray, bool]:
    """Quadrature nodes of |E(t)| (or of the envelope) with their weights, and whether the rate is to
    be cycle-averaged: windows of more than LONG_CYCLES periods of the fastest carrier use the
    envelope, Σ_k |ℰ_k(t)| (an upper bound where several colours beat)."""
    from tdse.pulse import LONG_CYCLES, quadrature

    edges = sorted({b for c in pulse.components for b in c.breakpoints})
    omega = max(c.omega for c in pulse.components)
    window = edges[-1] - edges[0]
    if omega * window > 2 * math.pi * LONG_CYCLES:
        scale = min(c.fwhm if c.fwhm is not None else c.length for c in pulse.components)
        t, w = quadrature(edges, scale / 64)
        return sum(np.linalg.norm(c.complex_envelope(t), axis=1) for c in pulse.components), w, True
    t, w = quadrature(edges, (2 * math.pi / omega) / 8 if omega > 0 else window / 64)
    return np.linalg.norm(pulse.electric_field(t), axis=1), w, False


def _compress(fields: np.ndarray, weights: np.ndarray, bins: int = 4096) -> tuple[np.ndarray, np.ndarray]:
    """The field distribution on at most ``bins`` log-spaced bins (relative width ~1e-3 over the
    decades that matter): summed weights at the weighted mean field of each bin."""
    keep = fields > 1e-6 * fields.max()
    fields, weights = fields[keep], weights[keep]
    if fields.size <= bins:
        return fields, weights
    edges = np.geomspace(fields.min(), fields.max() * (1 + 1e-12), bins + 1)
    total, _ = np.histogram(fields, edges, weights=weights)
    moment, _ = np.histogram(fields, edges, weights=weights * fields)
    full = total > 0
    return moment[full] / total[full], total[full]


def tunnelling_exponent(pulse, ip: float, Z: float, l: int = 0, m: int = 0, scales=1.0) -> np.ndarray:
    """∫ w(√s·|E(t)|) dt over the pulse for each intensity scale s in ``scales`` (the field scaled
    to s times the intensity); returns an array shaped like ``scales``.

    Up to 10⁴ carrier periods: the instantaneous field on 16 Gauss points per eighth of the
    shortest period; longer windows: the linear-light cycle average over the envelope. The field
    values enter through their distribution (:func:`_compress`), so the cost does not grow with
    the number of cycles."""
    scales = np.asarray(scales, dtype=float)
    fields, weights, averaged = _field_samples(pulse)
    fields, weights = _compress(fields, weights)
    F = np.sqrt(scales.ravel())[:, None] * fields[None, :]
    rate = adk_rate(F, ip, Z, l, m)
    if averaged:
        rate *= np.sqrt(3 * F / (math.pi * (2.0 * ip) ** 1.5))
    return (rate @ weights).reshape(scales.shape)


def excitation_first_order(pulse, atom, lower, upper_level) -> float:
    """P₁ = Σ_{m_u} |(1/2) ⟨u|r|l⟩·∫ℰ(t) e^{−iδt} dt|² for the level ``upper_level`` (State n, l)
    from the sublevel ``lower`` (State with m), summed over the pulse components within
    RESONANCE_WIDTHS spectral widths 2π/FWHM of the transition (module docstring)."""
    from tdse.atom import State
    from tdse.atom.dipoles import dipole_matrix_element, spherical_coefficients
    from tdse.atom.levels import energy
    from tdse.pulse import quadrature

    w_ul = energy(atom, upper_level.n) - energy(atom, lower.n)
    total = 0.0
    for m_u in range(-upper_level.l, upper_level.l + 1):
        upper = State(upper_level.n, upper_level.l, m_u)
        d = np.array([dipole_matrix_element(atom, upper, lower, q) for q in (-1, 0, 1)])
        if not np.any(d):
            continue
        amplitude = 0j
        for c in pulse.components:
            delta = c.omega - w_ul
            if abs(delta) > RESONANCE_WIDTHS * spectral_width(c):
                continue                  # far from resonance: its rotating-wave term averages out
            scale = c.fwhm if c.fwhm is not None else c.length
            rate = abs(delta) + abs(c.chirp) * c.length / 2
            panel = min(scale / 16, 2 * math.pi / rate / 4 if rate > 0 else math.inf)
            t, wts = quadrature(sorted(set(c.breakpoints)), panel)
            e_q = spherical_coefficients(c.complex_envelope(t))          # ℰ·r = Σ_q e_q r_q
            amplitude += 0.5 * (wts * np.exp(-1j * delta * t)) @ (e_q @ d)
        total += abs(amplitude) ** 2
    return float(total)

"""Exact hydrogenic photoionisation cross sections sigma_nl(omega) for any bound n, l.

One-photon ionisation of the level (n l), m-averaged, into the energy-normalised Coulomb continuum
(Bethe & Salpeter 1957, §69-71; docs/physics.md):

    sigma = (4 pi^2 alpha omega / 3) 1/(2l+1) sum_(L = l+-1) max(l, L) |I_L|^2,
    I_L = int R_nl(r) R_(E L)(r) r^3 dr,   R_(E L) = sqrt(2/(pi k)) F_L(eta, k r) / r,  eta = -1/k

(Z = mu = 1 here; F_L the regular Coulomb function, Abramowitz & Stegun 14.1.3). I_L is evaluated
in closed form: R_nl is e^(-r/n) times a polynomial, F_L = C_L(eta) rho^(L+1) e^(-i rho)
M(L+1-i eta, 2L+2, 2 i rho), so each term is a Laplace transform of Kummer's M (DLMF 13.10.3),
Gauss's 2F1, which Euler's transformation (DLMF 15.8.1) turns into a terminating series. The
finite double sum is done in floating point with a running bound on cancellation; points whose
estimated error exceeds 1e-10 relative (high n) are redone with mpmath at the precision the bound
asks for. The threshold value is the limit k -> 0 (no special case: every factor stays finite).

Nucleus: lengths scale as 1/(Z mu), the energy-normalised continuum as (Z^2 mu)^(-1/2), so

    sigma(omega; Z, mu) = sigma_1(omega / (Z^2 mu)) / (Z^2 mu^2),

i.e. for an infinite nuclear mass sigma_Z(omega) = sigma_H(omega / Z^2) / Z^2.

>>> from driven_atom.atom import Atom
>>> from driven_atom.units import BOHR2_CM2
>>> round(float(cross_section(Atom(1), 1, 0, 0.5)) * BOHR2_CM2 * 1e18, 3)   # threshold, cm^2 / 1e-18
6.304
"""
from __future__ import annotations

import math

import numpy as np

from driven_atom.errors import InputError
from driven_atom.units import ALPHA

_TOLERANCE = 1e-10


def _weights(n: int, l: int, L: int) -> list[int]:
    """Exact integers (-2)^j C(n+l, n-l-1-j) (c_j - 1)!/j!, c_j = l + L + 4 + j."""
    nr = n - l - 1
    return [(-2) ** j * math.comb(n + l, nr - j) * (math.factorial(l + L + 3 + j) // math.factorial(j))
            for j in range(nr + 1)]


def _series(l: int, L: int, x, weights, one):
    """G = sum_j w_j (1 - i x)^(-j) 2F1(L+1+i eta, -m_j; 2L+2; z) and a bound on sum |terms|.

    Works for numpy arrays (complex128) and mpmath scalars alike (``one`` = 1.0 or mpf(1)).
    z = 2ix/(1+ix) and i eta z = 2n/(1+ix) (eta = -1/k, x = nk) keep every term finite at k = 0.
    """
    n = (len(weights) - 1) + l + 1
    denom = one + 1j * x
    z = 2j * x / denom
    ietaz = 2 * n / denom
    u = one / (one - 1j * x)
    upow = one + 0j * x
    total, bound = 0j * x, 0.0 * x
    for j, w in enumerate(weights):
        m = l - L + 2 + j
        term = one + 0j * x
        p_sum, p_abs = term, abs(term)
        for t in range(m):
            term = term * ((L + 1 + t) * z + ietaz) * (t - m) / ((2 * L + 2 + t) * (t + 1))
            p_sum = p_sum + term
            p_abs = p_abs + abs(term)
        total = total + w * upow * p_sum
        bound = bound + abs(w) * abs(upow) * p_abs
        upow = upow * u
    return total, bound


def _log_magnitude(n: int, l: int, L: int, k, x):
    """log of the real prefactor of I_L (everything but Re[e^(i theta (l-L+2)) G] and the weight scale);
    the powers of k cancel analytically, so it is finite at threshold."""
    c0 = l + L + 4
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        inv_k = np.where(k > 0, 1.0 / np.where(k > 0, k, 1.0), np.inf)
        log_shadow = -0.5 * np.log(-np.expm1(-2.0 * math.pi * inv_k))  # 1/(1 - e^(-2 pi |eta|))
        atan_ratio = np.where(x > 0, np.arctan(x) / np.where(x > 0, x, 1.0), 1.0)
    log_gamma_prod = 0.5 * sum(np.log1p((s * k) ** 2) for s in range(1, L + 1)) if L else 0.0
    log_norm = 0.5 * (math.log(4.0) + math.lgamma(n - l) - 4 * math.log(n) - math.lgamma(n + l + 1))
    return (math.log(2.0) + log_shadow + log_gamma_prod + (L + l) * math.log(2.0) - math.lgamma(2 * L + 2)
            + log_norm + (L + 4) * math.log(n) - 0.5 * c0 * np.log1p(x * x) - 2.0 * n * atan_ratio)


def _mp_series(l: int, L: int, x: float, weights, scale: int, bound: float, digits: int) -> float:
    """Re[e^(i theta (l-L+2)) G] in mpmath, raising the precision until the cancellation
    (bound / |value|) leaves at least 20 good digits."""
    import mpmath

    while True:
        with mpmath.workdps(digits):
            big = mpmath.mpf(scale)
            total, _ = _series(l, L, mpmath.mpf(x), [mpmath.mpf(w) / big for w in weights], mpmath.mpf(1))
            value = (total * mpmath.expj(mpmath.atan(x) * (l - L + 2))).real
            lost = float(mpmath.log10(bound / abs(value))) if value else float(digits)
        if lost + 20 < digits:
            return float(value)
        digits = int(lost) + 40


def bound_free_integral(n: int, l: int, L: int, k):
    """I_L(k) = int R_nl R_(E L) r^3 dr for Z = mu = 1, E = k^2/2 (a.u., energy-normalised), vectorised.

    >>> round(bound_free_integral(1, 0, 1, 0.0) ** 2 * math.exp(4), 10)   # threshold: 2^8 e^-4 (Stobbe)
    256.0
    """
    if not (0 <= l < n) or abs(L - l) != 1:
        raise InputError(f"need 0 <= l < n and L = l +- 1, got n = {n}, l = {l}, L = {L}")
    k_in = np.asarray(k, dtype=float)
    k = np.atleast_1d(k_in)
    x = n * k
    weights = _weights(n, l, L)
    scale = max(abs(w) for w in weights)
    scaled = [w / scale for w in weights]
    total, bound = _series(l, L, x, scaled, 1.0)
    theta = np.arctan(x)
    value = (total * np.exp(1j * theta * (l - L + 2))).real
    with np.errstate(divide="ignore"):
        lost = np.log10(np.maximum(bound, 1e-300)) - np.log10(np.abs(value))
    redo = np.nonzero(lost > 16 + math.log10(_TOLERANCE))[0]
    if redo.size:
        try:
            import mpmath  # noqa: F401
        except ImportError:  # pragma: no cover - mpmath ships with the test extras
            raise InputError(f"sigma for n = {n} needs mpmath for extended precision (pip install mpmath)") from None
        for i in redo:
            digits = int(min(lost[i], 4000)) + 30
            value[i] = _mp_series(l, L, float(x[i]), weights, scale, float(bound[i]), digits)
    out = np.exp(_log_magnitude(n, l, L, k, x) + math.log(scale)) * value
    return out.reshape(k_in.shape) if k_in.ndim else float(out[0])


def cross_section(atom, n: int, l: int, photon_energy):
    """sigma_nl(omega) in bohr^2 (m-averaged), vectorised over ``photon_energy`` (hartree);
    0 below the threshold Z^2 mu / (2 n^2). Multiply by BOHR2_CM2 for cm^2.

    >>> from driven_atom.atom import Atom
    >>> s = cross_section(Atom(1), 2, 1, [0.1, 0.125, 1.0])
    >>> float(s[0]), bool(s[1] > s[2] > 0)
    (0.0, True)
    """
    if not (isinstance(n, (int, np.integer)) and isinstance(l, (int, np.integer)) and 0 <= l < n):
        raise InputError(f"need integers 0 <= l < n, got n = {n!r}, l = {l!r}")
    omega = np.asarray(photon_energy, dtype=float)
    scale = atom.Z**2 * atom.reduced_mass
    w = np.atleast_1d(omega) / scale
    threshold = 0.5 / n**2
    eps = w - threshold
    # photon energies at threshold up to the rounding of the Z^2 mu scaling count as threshold
    above = eps >= -4 * np.finfo(float).eps * threshold
    eps = np.maximum(eps, 0.0)
    sigma = np.zeros_like(w)
    if above.any():
        k = np.sqrt(2.0 * eps[above])
        acc = np.zeros_like(k)
        for L in (l - 1, l + 1):
            if L >= 0:
                acc += max(l, L) * bound_free_integral(n, l, L, k) ** 2
        sigma[above] = 4.0 * math.pi**2 * ALPHA * w[above] / 3.0 * acc / (2 * l + 1)
    sigma /= atom.Z**2 * atom.reduced_mass**2
    return sigma.reshape(omega.shape) if omega.ndim else float(sigma[0])


def cross_section_1s_closed_form(atom, photon_energy):
    """Stobbe's closed form for the ground state (Bethe & Salpeter 1957, eq. 71.4; a check):

        sigma = (2^9 pi^2 alpha / 3) (I/omega)^4 e^(-4 eta arccot eta) / (1 - e^(-2 pi eta)) a^2,

    eta = sqrt(I/(omega - I)), I = Z^2 mu/2, a = 1/(Z mu), with the same nucleus scaling as
    :func:`cross_section`. Vectorised; 0 below threshold, the limit e^-4 at threshold.

    >>> from driven_atom.atom import Atom
    >>> round(float(cross_section_1s_closed_form(Atom(1), 0.5)), 6)
    0.225131
    """
    omega = np.asarray(photon_energy, dtype=float)
    scale = atom.Z**2 * atom.reduced_mass
    w = np.atleast_1d(omega) / scale
    with np.errstate(divide="ignore", invalid="ignore"):
        eta = np.sqrt(0.5 / (w - 0.5))
        expo = np.where(w > 0.5, -4.0 * eta * np.arctan(1.0 / eta), -4.0)
        shadow = np.where(w > 0.5, -np.expm1(-2.0 * math.pi * eta), 1.0)
        sigma = 2**9 * math.pi**2 * ALPHA / 3.0 * (0.5 / w) ** 4 * np.exp(expo) / shadow
    sigma = np.where(w >= 0.5, sigma, 0.0) / (atom.Z**2 * atom.reduced_mass**2)
    return sigma.reshape(omega.shape) if omega.ndim else float(sigma[0])


def cross_section_sublevel(atom, state, photon_energy, q: int = 0):
    """σ of the sublevel |n l m⟩ for light of spherical component q (0: linear along the
    quantisation axis z, ±1: circular±), in bohr² (vectorised over ``photon_energy``):

        σ = 4π²αω Σ_{L = l±1} |⟨L m+q|C¹_q|l m⟩|² |I_L|²,

    the m-resolved form of :func:`cross_section` (whose average over m and q it is); same nucleus
    scaling. For 2p0 and linear light at Lyman-α it is 1.3 times the m-averaged value.

    >>> from driven_atom.atom import Atom, State
    >>> w = np.array([0.6, 2.0])
    >>> avg = np.mean([cross_section_sublevel(Atom(1), State(2, 1, m), w, 0) for m in (-1, 0, 1)], axis=0)
    >>> bool(np.allclose(avg, cross_section(Atom(1), 2, 1, w), rtol=1e-12))
    True
    """
    from driven_atom.atom.dipoles import angular_factor

    n, l = state.n, state.l
    m = 0 if state.m is None else state.m
    if q not in (-1, 0, 1):
        raise InputError(f"`q` must be -1, 0 or 1, got {q!r}")
    omega = np.asarray(photon_energy, dtype=float)
    scale = atom.Z**2 * atom.reduced_mass
    w = np.atleast_1d(omega) / scale
    threshold = 0.5 / n**2
    above = w - threshold >= -4 * np.finfo(float).eps * threshold
    sigma = np.zeros_like(w)
    if above.any():
        k = np.sqrt(2.0 * np.maximum(w[above] - threshold, 0.0))
        acc = np.zeros_like(k)
        for L in (l - 1, l + 1):
            a = angular_factor(L, m + q, l, m, q) if L >= abs(m + q) else 0.0
            if a:
                acc += a * a * bound_free_integral(n, l, L, k) ** 2
        sigma[above] = 4.0 * math.pi**2 * ALPHA * w[above] * acc
    sigma /= atom.Z**2 * atom.reduced_mass**2
    return sigma.reshape(omega.shape) if omega.ndim else float(sigma[0])

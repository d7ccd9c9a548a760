"""Single-atom probabilities for quick estimates (pure functions, atomic units).

* Static fields: the tunnelling rate of Ammosov, Delone & Krainov, Sov. Phys. JETP 64, 1191 (1986),

      w(F) = C² f(l, m) Iₚ (2F₀/F)^{2n*−|m|−1} exp(−2F₀/(3F)),   F₀ = (2Iₚ)^{3/2}, n* = Z/√(2Iₚ),
      C² = 2^{2n*}/(n* Γ(n*+l*+1) Γ(n*−l*)),  l* = n* − 1,  f = (2l+1)(l+|m|)!/(2^{|m|}|m|!(l−|m|)!),

  which for H(1s) is Landau's w = (4/F) e^{−2/(3F)} (Landau & Lifshitz, QM §77; it exceeds the
  exact static widths of Damburg & Kolosov 1976 by ×1.7 at F = 0.05), at the instantaneous field.
* Laser fields below the one-photon threshold, any Keldysh γ = ω√(2Iₚ)/F: the cycle-averaged rate
  of Perelomov, Popov & Terent'ev, Sov. Phys. JETP 23, 924 (1966) (short-range part as written by
  Ilkov, Decker & Chin, J. Phys. B 25, 4005 (1992)) with the Coulomb factor (2F₀/(F√(1+γ²)))^{2n*}
  (Popov, Phys. Usp. 47, 855 (2004); from memory), which keeps the multiphoton limit w ∝ I^K,

      w = C² f Iₚ √(6/π) (2F₀/F)^{2n*−|m|−3/2} (1 + γ²)^{|m|/2+3/4−n*} A_m(ω, γ) exp(−(2F₀/3F) g(γ)),
      g = (3/2γ)[(1 + 1/(2γ²)) asinh γ − √(1+γ²)/(2γ)],
      A_m = (4/√(3π)) (1/|m|!) (γ²/(1+γ²)) Σ_{κ≥ν} e^{−α(κ−ν)} w_m(√(β(κ−ν))),
      α = 2(asinh γ − γ/√(1+γ²)), β = 2γ/√(1+γ²), ν = (Iₚ/ω)(1 + 1/(2γ²)),
      w_m(x) = (x^{2|m|+1}/2) ∫₀¹ e^{−x²t} t^{|m|}/√(1−t) dt   (w₀ = Dawson's integral),

  at the envelope F(t); as γ → 0 it tends to the cycle-averaged ADK rate w·√(3F/(πF₀)) (checked
  in the tests), for γ ≫ 1 it describes multiphoton ionisation. P = 1 − exp(−∫w dt) (depletion).
  The rate is taken along the intensity profile of the pulse (:func:`ppt_exponent`) for linear
  light (m along the polarisation); a run configuration's static field uses ADK at the
  instantaneous field over its ramp and plateau (:func:`static_exponent`).
"""
from __future__ import annotations

import math

import numpy as np


def _adk_constants(ip: float, Z: float, l: int, m: int, c2: float | None = None) -> tuple[float, float, float]:
    """(n*, C²_{n*l*}·f(l, m)·Iₚ, F₀) of the module docstring, with l* = n* − 1; ``c2`` replaces
    that Hartree-type C²_{n*l*} where the atom's own asymptotic coefficient is known (a model atom:
    :func:`driven_atom.atom.model_atoms.adk_coefficient`, Tong, Zhao & Lin 2002)."""
    n_star = Z / math.sqrt(2.0 * ip)
    l_star = n_star - 1.0
    if c2 is None:
        c2 = 2.0 ** (2 * n_star) / (n_star * math.gamma(n_star + l_star + 1) * math.gamma(n_star - l_star))
    m = abs(m)
    f_lm = (2 * l + 1) * math.factorial(l + m) / (2**m * math.factorial(m) * math.factorial(l - m))
    return n_star, c2 * f_lm * ip, (2.0 * ip) ** 1.5


def adk_rate(field, ip: float, Z: float, l: int = 0, m: int = 0, c2: float | None = None) -> np.ndarray:
    """Static tunnelling rate w(F) (a.u.) of the module docstring; 0 where F = 0 (``c2``: see
    :func:`_adk_constants`; Z is the charge the electron leaves behind).

    >>> round(float(adk_rate(0.05, 0.5, 1)), 10) == round(4 / 0.05 * math.exp(-2 / 0.15), 10)   # Landau
    True
    """
    F = np.abs(np.asarray(field, dtype=float))
    n_star, prefactor, f0 = _adk_constants(ip, Z, l, m, c2)
    m = abs(m)
    out = np.zeros_like(F)
    on = F > 0
    out[on] = prefactor * (2 * f0 / F[on]) ** (2 * n_star - m - 1) * np.exp(-2 * f0 / (3 * F[on]))
    return out


def _w_m(x: np.ndarray, m: int) -> np.ndarray:
    """PPT's w_m(x) = (x^{2|m|+1}/2) ∫₀¹ e^{−x²t} t^{|m|}/√(1−t) dt; w₀ is Dawson's integral."""
    from scipy.special import dawsn

    x = np.asarray(x, dtype=float)
    if m == 0:
        return dawsn(x)
    u, wu = np.polynomial.legendre.leggauss(200)
    u, wu = (u + 1) / 2, wu / 2                          # t = 1 − u²: ∫₀¹ e^{−x²(1−u²)} (1−u²)^m 2 du
    inner = (np.exp(-np.multiply.outer(x**2, 1 - u**2)) * (1 - u**2) ** m) @ wu
    small = x**(2 * m + 1) * inner
    return np.where(x > 30, math.factorial(m) / (2 * np.maximum(x, 1e-300)), small)


def ppt_factor(omega: float, gamma: float, ip: float, m: int = 0) -> float:
    """A_m(ω, γ) of the PPT rate (module docstring); → 1 as γ → 0. The sum over photon numbers
    κ ≥ ν runs term by term up to 2·10⁴ terms, beyond that as its Euler–Maclaurin integral."""
    m = abs(m)
    if gamma < 0.02:
        return 1.0                                      # the tunnelling limit (A_m(γ = 0.02) = 1 − 3e-4)
    alpha = 2 * (math.asinh(gamma) - gamma / math.sqrt(1 + gamma**2))
    beta = 2 * gamma / math.sqrt(1 + gamma**2)
    nu = ip / omega * (1 + 1 / (2 * gamma**2))
    x0 = math.ceil(nu) - nu
    n_terms = int(40 / alpha) + 10 if alpha > 0 else 10**9
    if n_terms <= 20000:
        x = x0 + np.arange(n_terms)
        total = float(np.sum(np.exp(-alpha * x) * _w_m(np.sqrt(beta * x), m)))
    else:
        from scipy import integrate             # only here: its import costs the light commands 0.3 s

        def f(x):
            return math.exp(-alpha * x) * float(_w_m(np.array([math.sqrt(beta * x)]), m)[0])

        tail, _ = integrate.quad(f, x0, np.inf, limit=400, epsrel=1e-8)
        total = tail + 0.5 * f(x0)
    return 4 / math.sqrt(3 * math.pi) / math.factorial(m) * gamma**2 / (1 + gamma**2) * total


def ppt_rate(field, omega: float, ip: float, Z: float, l: int = 0, m: int = 0,
             c2: float | None = None) -> np.ndarray:
    """Cycle-averaged PPT rate (a.u.) at envelope field F and carrier ω (module docstring); 0 at F = 0."""
    F = np.abs(np.asarray(field, dtype=float))
    n_star, prefactor, f0 = _adk_constants(ip, Z, l, m, c2)
    m = abs(m)
    out = np.zeros_like(F)
    for i in np.flatnonzero(F > 0):
        gamma = omega * math.sqrt(2 * ip) / F.flat[i]
        g = 1.5 / gamma * ((1 + 1 / (2 * gamma**2)) * math.asinh(gamma) - math.sqrt(1 + gamma**2) / (2 * gamma))
        out.flat[i] = (prefactor * math.sqrt(6 / math.pi) * (2 * f0 / F.flat[i]) ** (2 * n_star - m - 1.5)
                       * (1 + gamma**2) ** (m / 2 + 0.75 - n_star) * ppt_factor(omega, gamma, ip, m)
                       * math.exp(-2 * f0 / (3 * F.flat[i]) * g))
    return out


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


def _rate_table(rate, fields: np.ndarray, weights: np.ndarray):
    """s ↦ Σ weights · rate(√s · fields), with ln rate tabulated on 800 log-spaced fields (the rate
    is smooth in ln F; the cost does not grow with the number of nodes)."""
    fields, weights = _compress(fields, weights)
    table_f = np.geomspace(fields.min() * 1e-4, fields.max() * 1e4, 800)
    with np.errstate(divide="ignore"):
        table_lnw = np.log(rate(table_f))

    def exponent(scales):
        scales = np.asarray(scales, dtype=float)
        F = np.sqrt(scales.ravel())[:, None] * fields[None, :]
        values = np.exp(np.interp(np.log(F), np.log(table_f), table_lnw))
        return (values @ weights).reshape(scales.shape)

    return exponent


def ppt_exponent(envelope, peak_field: float, omega: float, ip: float, Z: float, l: int = 0, m: int = 0,
                 c2: float | None = None):
    """The function s ↦ ∫ w dt (a.u.) of the cycle-averaged PPT rate along the envelope field
    F(t) = √(s f(t)) F₀ of a pulse with intensity profile ``envelope`` (times in s), peak field
    ``peak_field`` and carrier ``omega`` (a.u.); P(s) = 1 − exp(−exponent(s))."""
    from driven_atom.units import AU_TIME_S

    t, wt = envelope.nodes(per_fwhm=64)
    fields = peak_field * np.sqrt(envelope.intensity(t))
    return _rate_table(lambda F: ppt_rate(F, omega, ip, Z, l, m, c2), fields, wt / AU_TIME_S)


def static_exponent(component, ip: float, Z: float, l: int = 0, m: int = 0, c2: float | None = None):
    """s ↦ ∫ w dt (a.u.) of the ADK rate at the instantaneous field of a static-field pulse
    component (its ramp and plateau; 16 Gauss points per 1/64 of its window), the field scaled by √s."""
    from driven_atom.pulse import quadrature

    t, wt = quadrature(sorted(set(component.breakpoints)), component.length / 64)
    fields = np.linalg.norm(component.electric_field(t), axis=1)
    return _rate_table(lambda F: adk_rate(F, ip, Z, l, m, c2), fields, wt)

"""Gaussian focus: beam geometry, pulse energy and focal-volume averages (pure functions, SI or a.u.
as named; lengths in the same unit throughout a call).

Beam (docs/physics.md; Siegman, *Lasers* (1986), ch. 17): w(z) = w₀√(1 + (z/z_R)²), z_R = π w₀²/(M² λ),
I(r, z) = I₀ (w₀/w)² exp(−2r²/w²). The power through any plane is P = (π w₀²/2) I₀, so a pulse of
peak-intensity fluence Φ (J/cm², the time integral of the cycle-averaged intensity) carries
E_p = (π w₀²/2) Φ; for a Gaussian pulse of intensity FWHM τ this is I₀ = 2E_p/(π w₀²) · 0.9394/τ.

A probability P(I) averaged over a slab |z| ≤ L/2 of gas of density n gives the count

    N = n ∫ dz (π w(z)²/2) G(I₀ w₀²/w(z)²),   G(I) = ∫₀^I P(I′)/I′ dI′,

because at fixed z the area where the intensity exceeds I′ is (π w²/2) ln(I_z/I′). With P a step at
I_th and L → ∞ this is the volume inside the iso-intensity surface I_th,

    V(I_th) = π w₀² z_R [4β/3 + 2β³/9 − (4/3) arctan β],   β = √(I₀/I_th − 1),

the standard result for a Gaussian focus (derived by integrating the profile; used in the tests).
"""
from __future__ import annotations

import math

import numpy as np


def rayleigh_length(waist: float, wavelength: float, m2: float = 1.0) -> float:
    """z_R = π w₀²/(M² λ).

    >>> round(rayleigh_length(20e-6, 800e-9), 6)     # metres
    0.001571
    """
    return math.pi * waist**2 / (m2 * wavelength)


def pulse_energy(peak_fluence: float, waist: float) -> float:
    """E_p = (π w₀²/2) Φ for the peak fluence Φ (units: Φ·w₀²)."""
    return 0.5 * math.pi * waist**2 * peak_fluence


def iso_intensity_volume(ratio: float, waist: float, z_rayleigh: float) -> float:
    """Volume where I ≥ I₀/``ratio`` (ratio = I₀/I_th ≥ 1) in a Gaussian focus, both sides of it."""
    if ratio <= 1:
        return 0.0
    b = math.sqrt(ratio - 1.0)
    return math.pi * waist**2 * z_rayleigh * (4 * b / 3 + 2 * b**3 / 9 - 4 * math.atan(b) / 3)


def focal_count(probability, density: float, waist: float, z_rayleigh: float, length: float,
                points: int = 2001) -> float:
    """N = n ∫ (π w²/2) G(I_z) dz over |z| ≤ length/2 (module docstring).

    ``probability(s)`` is P at intensity s·I₀ for an array s in (0, 1]; it is tabulated on 2000
    log-spaced s from 1e-8 (P/s taken constant below, as for a one-photon or unsaturated rate)."""
    s = np.logspace(-8, 0, 2000)
    p = np.asarray(probability(s), dtype=float)
    log_s = np.log(s)
    G = p[0] + np.concatenate([[0.0], np.cumsum(0.5 * (p[1:] + p[:-1]) * np.diff(log_s))])
    z = np.linspace(-length / 2, length / 2, points)
    w2 = waist**2 * (1 + (z / z_rayleigh) ** 2)
    s_z = waist**2 / w2
    g = np.interp(np.log(s_z), log_s, G, left=0.0)
    from scipy.integrate import trapezoid

    return float(density * trapezoid(0.5 * math.pi * w2 * g, z))

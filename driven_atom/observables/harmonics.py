"""Harmonic spectra from the dipole acceleration (atomic units).

Ehrenfest's theorem for H = p²/(2μ) − Z/r + E(t) z (length gauge, field along z, the relative
coordinate of a one-electron atom with reduced mass μ):

    μ d²⟨z⟩/dt² = −⟨Z z/r³⟩ − E(t)·⟨ψ|ψ⟩

(docs/physics.md, "Grid route"; Burnett et al., PRA 45, 3347 (1992) for its use in harmonic spectra).
The norm factor ⟨ψ|ψ⟩ matters only once an absorber has removed part of the wave function; for
μ = 1 and unit norm this is the familiar −⟨Zz/r³⟩ − E(t). The emitted power per unit frequency is
proportional to |ã(ω)|², ã(ω) = ∫ a(t) e^{iωt} dt (Larmor).
"""
from __future__ import annotations

import numpy as np

from driven_atom.errors import InputError


def ehrenfest_acceleration(cos_over_r2, field, norm, Z, mu=1.0):
    """d²⟨z⟩/dt² = (−Z⟨cosθ/r²⟩ − E(t)·⟨ψ|ψ⟩)/μ, with ⟨cosθ/r²⟩ = ⟨z/r³⟩ (arrays broadcast).

    >>> float(ehrenfest_acceleration(0.0, 0.05, 1.0, 1))      # free electron: a = −E
    -0.05
    """
    return (-Z * np.asarray(cos_over_r2, dtype=float)
            - np.asarray(field, dtype=float) * np.asarray(norm, dtype=float)) / mu


def harmonic_spectrum(times, acceleration, window: str = "hann"):
    """Power spectrum |∫ a(t) w(t) e^{iωt} dt|² on the FFT frequencies ω_k = 2πk/(n·Δt) ≥ 0.

    ``times`` must be uniform; ``window`` is "hann" (default, suppresses the edges of a finite
    record) or "none". Returns (omega, power) in atomic units.

    >>> t = np.arange(1000) * 0.2 * np.pi           # 100 periods of cos(t)
    >>> w, p = harmonic_spectrum(t, np.cos(t))
    >>> round(float(w[np.argmax(p)]), 3)            # the line at omega = 1
    1.0
    """
    t = np.asarray(times, dtype=float)
    a = np.asarray(acceleration, dtype=float)
    if t.ndim != 1 or t.shape != a.shape or t.size < 2:
        raise InputError("`times` and `acceleration` must be 1-D arrays of the same length >= 2")
    dt = (t[-1] - t[0]) / (t.size - 1)
    if not np.allclose(np.diff(t), dt, rtol=1e-6, atol=0):
        raise InputError("`times` must be uniformly spaced for the harmonic spectrum")
    if window == "hann":
        w = np.hanning(t.size)
    elif window == "none":
        w = np.ones(t.size)
    else:
        raise InputError(f"`window` must be \"hann\" or \"none\", got {window!r}")
    spectrum = np.fft.rfft(a * w) * dt
    omega = 2 * np.pi * np.fft.rfftfreq(t.size, dt)
    return omega, np.abs(spectrum) ** 2

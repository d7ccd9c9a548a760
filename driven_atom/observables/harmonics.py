"""Harmonic spectra from the dipole, velocity and acceleration of the electron (atomic units).

Ehrenfest's theorem for H = p²/(2μ) + V(r) + E(t) z (length gauge, field along z, the relative
coordinate of a one-electron atom with reduced mass μ) and its velocity-gauge twin give

    μ d²⟨z⟩/dt² = −⟨cos θ · dV/dr⟩ − E(t)·⟨ψ|ψ⟩,      μ d⟨z⟩/dt = ⟨p_z + A⟩ (velocity gauge; ⟨p_z⟩ in length)

(docs/physics.md, "Grid route"; Burnett et al., PRA 45, 3347 (1992) for its use in harmonic spectra);
for V = −Z/r, ⟨cos θ dV/dr⟩ = Z⟨z/r³⟩. The norm factor ⟨ψ|ψ⟩ matters only once an absorber has
removed part of the wave function. The emitted power per unit frequency is proportional to
|ã(ω)|² (Larmor), ã(ω) = ∫ a(t) w(t) e^{iωt} dt with a window w; the same spectrum from the dipole
is ω⁴|d̃(ω)|² and from the velocity ω²|ṽ(ω)|² (ã = −ω²d̃ = −iωṽ for records that vanish at both
ends): the three agree when the propagation is accurate, which the grid route checks. The
classical cutoff is at Iₚ + 3.17 Uₚ (Krause, Schafer & Kulander, PRL 68, 3535 (1992); Corkum,
PRL 71, 1994 (1993)).
"""
from __future__ import annotations

import math

import numpy as np

from driven_atom.errors import InputError

WINDOWS = ("hann", "blackman", "none")
BINS_PER_ORDER = 32                 # zero padding: at least this many frequency bins per harmonic order


def ehrenfest_acceleration(force_cos, field, norm, mu=1.0):
    """d²⟨z⟩/dt² = (−⟨cos θ · dV/dr⟩ − E(t)·⟨ψ|ψ⟩)/μ (arrays broadcast).

    >>> float(ehrenfest_acceleration(0.0, 0.05, 1.0))      # free electron: a = −E
    -0.05
    """
    return (-np.asarray(force_cos, dtype=float)
            - np.asarray(field, dtype=float) * np.asarray(norm, dtype=float)) / mu


def window_function(name: str, n: int) -> np.ndarray:
    """The window ``name`` ("hann", "blackman" or "none") on ``n`` samples (numpy's definitions).

    >>> window_function("hann", 5).tolist()
    [0.0, 0.5, 1.0, 0.5, 0.0]
    """
    if name == "hann":
        return np.hanning(n)
    if name == "blackman":
        return np.blackman(n)
    if name == "none":
        return np.ones(n)
    raise InputError(f"`window` must be one of {', '.join(WINDOWS)}, got {name!r}")


def harmonic_spectrum(times, signal, window: str = "hann", pad_to: int | None = None):
    """Power spectrum |∫ s(t) w(t) e^{iωt} dt|² on the FFT frequencies ω_k = 2πk/(n·Δt) ≥ 0 of the
    record zero-padded to ``pad_to`` points (finer bins, the same resolution).

    ``times`` must be uniform; ``window`` as in :func:`window_function`. Returns (omega, power) in
    atomic units.

    >>> t = np.arange(1000) * 0.2 * np.pi           # 100 periods of cos(t)
    >>> w, p = harmonic_spectrum(t, np.cos(t))
    >>> round(float(w[np.argmax(p)]), 3)            # the line at omega = 1
    1.0
    """
    t = np.asarray(times, dtype=float)
    a = np.asarray(signal, dtype=float)
    if t.ndim != 1 or t.shape != a.shape or t.size < 2:
        raise InputError("`times` and the signal must be 1-D arrays of the same length >= 2")
    dt = (t[-1] - t[0]) / (t.size - 1)
    if not np.allclose(np.diff(t), dt, rtol=1e-6, atol=0):
        raise InputError("`times` must be uniformly spaced for the harmonic spectrum")
    n = max(t.size, pad_to or 0)
    spectrum = np.fft.rfft(a * window_function(window, t.size), n=n) * dt
    omega = 2 * np.pi * np.fft.rfftfreq(n, dt)
    return omega, np.abs(spectrum) ** 2


def harmonic_forms(times, dipole, velocity, acceleration, omega0: float, window: str = "hann") -> dict:
    """The harmonic spectrum in the acceleration, dipole and velocity forms on one frequency axis:
    ``omega``, ``order`` = ω/ω₀, ``power`` = |ã|², ``power_dipole`` = ω⁴|d̃|², ``power_velocity`` =
    ω²|ṽ|² (module docstring), each record windowed and zero-padded to at least
    :data:`BINS_PER_ORDER` bins per order ω₀.

    >>> t = np.linspace(0, 40 * np.pi, 4001)
    >>> f = harmonic_forms(t, -np.cos(3 * t) / 9, np.sin(3 * t) / 3, np.cos(3 * t), 1.0)
    >>> i = np.argmax(f["power"])
    >>> round(float(f["order"][i]), 1), round(float(f["power_dipole"][i] / f["power"][i]), 2)
    (3.0, 1.0)
    """
    t = np.asarray(times, dtype=float)
    dt = (t[-1] - t[0]) / (t.size - 1)
    pad = max(t.size, 2 ** math.ceil(math.log2(BINS_PER_ORDER * 2 * math.pi / (omega0 * dt))))
    omega, power = harmonic_spectrum(t, acceleration, window, pad)
    _, dip = harmonic_spectrum(t, dipole, window, pad)
    _, vel = harmonic_spectrum(t, velocity, window, pad)
    return {"omega": omega, "order": omega / omega0, "power": power, "power_dipole": omega**4 * dip,
            "power_velocity": omega**2 * vel}


def cutoff_order(ip: float, up: float, omega0: float) -> float:
    """The classical cutoff (Iₚ + 3.17 Uₚ)/ω₀ in harmonic orders (Krause, Schafer & Kulander 1992;
    Corkum 1993).

    >>> round(cutoff_order(0.5, 0.2204, 0.05695), 1)      # H, 800 nm, 1e14 W/cm²
    21.0
    """
    return (ip + 3.17 * up) / omega0


def harmonic_peaks(order, power, orders) -> np.ndarray:
    """The largest power within ±½ of each of ``orders`` (zero where the axis does not reach).

    >>> harmonic_peaks(np.arange(0, 5, 0.25), np.arange(20.0), [1, 3]).tolist()
    [5.0, 13.0]
    """
    order = np.asarray(order, dtype=float)
    power = np.asarray(power, dtype=float)
    out = np.zeros(len(orders))
    for i, q in enumerate(orders):
        band = (order >= q - 0.5) & (order < q + 0.5)
        out[i] = power[band].max() if band.any() else 0.0
    return out


def observed_cutoff(order, power, lowest: int = 3, highest: float | None = None) -> float:
    """Where the plateau of odd-harmonic peaks ends: the breakpoint of the best two-piece fit to
    log₁₀ of the peaks from order ``lowest`` to ``highest`` (default: the whole axis), flat (the
    plateau) then falling linearly (the cut-off region), by least squares over every breakpoint
    (common practice); the fit stops at the first peak within a decade of the lowest one (the
    numerical noise floor).

    >>> q = np.arange(0.0, 60.0, 0.125)
    >>> peaks = np.where(q < 21, 1.0, 10.0 ** (-(q - 21) / 2))
    >>> lines = peaks * np.exp(-((q % 2 - 1) / 0.1) ** 2)        # odd lines on that envelope
    >>> observed_cutoff(q, lines)
    21.0
    """
    order = np.asarray(order, dtype=float)
    top = int(order.max() - 0.5) if highest is None else int(min(highest, order.max() - 0.5))
    odd = np.arange(lowest, top + 1, 2)
    peaks = harmonic_peaks(order, power, odd)
    keep = peaks > 0
    odd, y = odd[keep], np.log10(peaks[keep])
    if y.size > 4:                            # the fall ends where the peaks reach the noise floor
        low = np.nonzero(y < y.min() + 1.0)[0][0]
        odd, y = odd[:max(low + 1, 5)], y[:max(low + 1, 5)]
    best, where = math.inf, float(odd[-1])
    for j in range(2, odd.size - 2):
        head, tail = y[:j + 1], y[j:]
        flat = head.mean()
        x = odd[j:] - odd[j]
        slope = float(np.sum(x * (tail - flat)) / np.sum(x * x)) if np.any(x) else 0.0
        err = float(np.sum((head - flat) ** 2) + np.sum((tail - flat - slope * x) ** 2))
        if slope < 0 and err < best:
            best, where = err, float(odd[j])
    return where


def forms_mismatch(order, power, power_dipole, power_velocity, low: float, high: float) -> float:
    """The largest |P_form/P_acceleration − 1| of the power summed over orders ``low`` … ``high``,
    for the dipole and the velocity forms (0 when the band holds no power).

    >>> q = np.linspace(0, 30, 301)
    >>> round(forms_mismatch(q, np.ones(301), 1.1 * np.ones(301), np.ones(301), 3, 21), 6)
    0.1
    """
    order = np.asarray(order, dtype=float)
    band = (order >= low) & (order <= high)
    ref = float(np.sum(np.asarray(power)[band]))
    if ref <= 0:
        return 0.0
    return max(abs(float(np.sum(np.asarray(p)[band])) / ref - 1) for p in (power_dipole, power_velocity))

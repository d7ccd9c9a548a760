"""Figures (matplotlib, Agg backend: no display needed). Each function writes one file.

Time in fs and photon energy in eV on the axes; fields and spectral power in atomic units.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from tdse.errors import InputError


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _save(fig, path) -> Path:
    """Save ``fig`` to ``path`` through a temporary file and os.replace (never a half file)."""
    import os

    path = Path(path)
    suffix = path.suffix.lstrip(".").lower()
    if suffix not in ("png", "pdf", "svg"):
        raise InputError(f"`--plot` file must end in .png, .pdf or .svg, got {str(path)!r}")
    tmp = path.with_name(path.name + ".tmp")
    try:
        fig.savefig(tmp, format=suffix, dpi=120)
        os.replace(tmp, path)
    except OSError as exc:
        raise InputError(f"`--plot` could not write {str(path)!r}: {exc.strerror}") from None
    finally:
        tmp.unlink(missing_ok=True)
    return path


def pulse_figure(pulse, path, *, samples: int = 4000) -> Path:
    """Draw E(t) (each Cartesian component that is not zero) and |Ẽ(ω)|² (log scale, per
    component) of a :class:`tdse.pulse.Pulse` into ``path`` (.png, .pdf or .svg).

    >>> import tempfile, os
    >>> from tdse.pulse import Pulse
    >>> p = Pulse({"wavelength": "800 nm", "peak_field": 0.05, "cycles": 3})
    >>> with tempfile.TemporaryDirectory() as d:
    ...     out = pulse_figure(p, os.path.join(d, "p.png"), samples=300)
    ...     out.stat().st_size > 0
    True
    """
    from tdse.units import AU_TIME_S, HARTREE_EV

    plt = _pyplot()
    t = np.linspace(pulse.t_start, pulse.t_end, samples)
    long = any(c.is_long for c in pulse.components)
    # many cycles: the carrier cannot be drawn, show the field envelope |ℰ(t)| instead
    field = np.abs(sum(c.complex_envelope(t) for c in pulse.components)) if long else pulse.electric_field(t)
    axes_used = [j for j in range(3) if np.any(field[:, j] != 0)] or [2]
    omega = _spectrum_axis(pulse)
    fig, (ax_t, ax_w) = plt.subplots(2, 1, figsize=(7, 6), constrained_layout=True)
    span_fs = (pulse.t_end - pulse.t_start) * AU_TIME_S * 1e15
    unit, per_fs = next((u, f) for u, f in (("ns", 1e-6), ("ps", 1e-3), ("fs", 1.0)) if span_fs * f >= 1 or u == "fs")
    # long pulses: photon energy as an offset from the first carrier, in µeV
    ref = pulse.components[0].omega if long else 0.0
    x_w = (omega - ref) * HARTREE_EV * (1e6 if long else 1.0)
    for j in axes_used:
        name = "xyz"[j]
        ax_t.plot(t * AU_TIME_S * 1e15 * per_fs, field[:, j], lw=0.8,
                  label=f"|ℰ_{name}| (envelope)" if long else f"E_{name}")
        power = np.abs(pulse.field_spectrum(omega, axis=name)) ** 2
        ax_w.semilogy(x_w, np.maximum(power, power.max() * 1e-12), lw=0.8, label=f"|E_{name}(ω)|²")
    ax_t.set_xlabel(f"time [{unit}]")
    ax_t.set_ylabel("field [au]")
    ax_t.legend(loc="best")
    ax_w.set_xlabel(f"photon energy − {ref * HARTREE_EV:.6f} eV [µeV]" if long else "photon energy [eV]")
    ax_w.set_ylabel("spectral power [au]")
    ax_w.legend(loc="upper right")
    try:
        return _save(fig, path)
    finally:
        plt.close(fig)


def _spectrum_axis(pulse, points: int = 600) -> np.ndarray:
    """Photon energies (a.u.) to draw: 0 to 2.5× the highest carrier, or for long pulses a band
    of ±3 spectral widths (2π/FWHM) plus the chirp sweep around each carrier."""
    if not any(c.is_long for c in pulse.components):
        top = max(c.omega + abs(c.chirp) * c.length / 2 for c in pulse.components)
        top = top if top > 0 else 40 * np.pi / (pulse.t_end - pulse.t_start)
        return np.linspace(0.0, 2.5 * top, points + 1)[1:]
    bands = []
    for c in pulse.components:
        half = 3 * 2 * np.pi / (c.fwhm or c.length) + abs(c.chirp) * c.length / 2
        bands.append((max(c.omega - half, 0.0), c.omega + half))
    return np.linspace(min(b[0] for b in bands), max(b[1] for b in bands), points)

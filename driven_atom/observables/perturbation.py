"""First-order (golden-rule) ionisation probability of a pulse.

With Ẽ(ω) = ∫E(t) e^{iωt} dt, first-order time-dependent perturbation theory for H_int = E(t)·r
and an energy-normalised continuum gives P = ∫ dE |⟨E|ε·r|i⟩|² |Ẽ(E − E_i)|²; with the
one-photon cross section σ(ω) = 4π²αω |⟨E|ε·r|i⟩|² (Bethe & Salpeter 1957, §69–71) this is

    P = ∫_{I_n}^{∞} σ(ω) · c |Ẽ(ω)|² / (4π² ω) dω      (atomic units, c = 1/α; docs/physics.md)

valid while P ≪ 1. σ is the m-averaged cross section of :mod:`driven_atom.atom.photoionization`, so for
l > 0 the result is that of the m-averaged level; |Ẽ|² sums the x, y and z components.

>>> from driven_atom.atom import Atom
>>> from driven_atom.pulse import Pulse
>>> p = first_order_ionization(Atom(1), Pulse({"photon_energy": 0.8, "peak_field": 1e-3, "cycles": 10}))
>>> 1e-6 < p < 1e-4
True
"""
from __future__ import annotations

import math

import numpy as np

_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(16)


def first_order_ionization(atom, pulse, state="1s", *, widths: float = 40.0) -> float:
    """P = ∫ σ(ω) c|Ẽ(ω)|²/(4π²ω) dω from the threshold of ``state`` (see module docstring).

    The integral runs over [I_n, ω_max + ``widths``·2π/T] (ω_max the highest carrier, T the
    shortest component's length) with 16-point Gauss–Legendre panels a quarter of 2π/T wide.
    """
    from driven_atom.atom import parse_state
    from driven_atom.atom.photoionization import cross_section
    from driven_atom.units import C_AU

    s = parse_state(state, name="state")
    threshold = atom.Z**2 * atom.reduced_mass / (2.0 * s.n**2)
    shortest = min(c.length for c in pulse.components)
    spectral_width = 2.0 * math.pi / shortest
    top = max(threshold, max(c.omega for c in pulse.components)) + widths * spectral_width
    n_panels = max(1, math.ceil((top - threshold) / (spectral_width / 4)))
    edges = np.linspace(threshold, top, n_panels + 1)
    half = 0.5 * np.diff(edges)
    omega = ((0.5 * (edges[:-1] + edges[1:]))[:, None] + half[:, None] * _GL_NODES).ravel()
    weights = (half[:, None] * _GL_WEIGHTS).ravel()
    spectrum2 = sum(np.abs(pulse.field_spectrum(omega, axis=a)) ** 2 for a in "xyz")
    sigma = cross_section(atom, s.n, s.l, omega)
    return float(np.sum(weights * sigma * C_AU * spectrum2 / (4.0 * math.pi**2 * omega)))

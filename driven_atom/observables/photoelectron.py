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

import numpy as np


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

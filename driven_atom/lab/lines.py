"""What the lab estimate knows of a resonance line, and the small conversions its models share.

>>> spherical_q("circular+"), round(photon_flux(1e4, 0.0773) / 1e22, 4)   # 1 W/cm² of 2.1 eV photons
(1, 2.9673)
"""
from __future__ import annotations

from dataclasses import dataclass

from driven_atom.units import HARTREE_J


def spherical_q(polarization: str) -> int:
    """The spherical component q of the light: 0 linear along z, ±1 circular."""
    return {"linear": 0, "circular+": 1, "circular-": -1}[polarization]


def photon_flux(intensity_wm2, omega: float):
    """Photons per m² and s of intensity I (W/m²) at photon energy ω (hartree)."""
    return intensity_wm2 / (omega * HARTREE_J)


@dataclass
class LineData:
    """A resonance ready for the Bloch equations (SI rates, rad/s)."""

    line: object                  # atom.resonance.Line
    photons: int
    rabi: float                   # Ω₀ at I₀
    shift: float                  # light shift δ at I₀ (two photons)
    decay: float                  # Γ of the upper level
    back: float                   # fraction of Γ back to the lower level
    ionization: float             # γᵢ of the upper level at I₀
    ionization_photons: int
    ionization_note: str
    upper_label: str
    lifetime: float               # s

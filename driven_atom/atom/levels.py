"""Hydrogenic energy levels and series lines (vacuum and air wavelengths).

Energies are the nonrelativistic reduced-mass Bohr levels (Bethe & Salpeter 1957, §2)

    E_n = -Z^2 mu / (2 n^2)            (hartree; mu = M/(1+M) in electron masses)

so transition wavenumbers are R_M Z^2 (1/n_l^2 - 1/n_u^2) with R_M = R_inf mu. Fine structure,
the Lamb shift and hyperfine splitting are not included (a few 1e-5 relative for hydrogen).

Air wavelengths use the dispersion formula of Edlén (1966), Metrologia 2, 71, for standard dry air
(15 °C, 101 325 Pa, 0.03 % CO2), valid from 200 nm to 2 µm; outside that range the air wavelength
is ``None``.

>>> from driven_atom.atom import Atom
>>> round(energy(Atom(1), 2), 6)
-0.125
>>> [round(line.vacuum_nm, 2) for line in series_lines(Atom.from_name("H"), 2, 4)]
[656.47, 486.27]
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from driven_atom.errors import InputError
from driven_atom.units import HARTREE_EV, energy_to_wavenumber_cm, photon_energy_to_wavelength_nm

# Named series: lower principal quantum number (Lyman 1, Balmer 2, ... Humphreys 6).
SERIES = {"lyman": 1, "balmer": 2, "paschen": 3, "brackett": 4, "pfund": 5, "humphreys": 6}
EDLEN_RANGE_NM = (200.0, 2000.0)
N_MAX = 100_000


def energy(atom, n):
    """Bound-state energy E_n = -Z^2 mu / (2 n^2) in hartree (vectorised over ``n``).

    >>> from driven_atom.atom import Atom
    >>> round(float(energy(Atom(2), 1)), 12)
    -2.0
    """
    n = np.asarray(n, dtype=float) if not isinstance(n, (int, float)) else float(n)
    return -(atom.Z**2) * atom.reduced_mass / (2.0 * n * n)


def transition_energy(atom, n_upper: int, n_lower: int) -> float:
    """Photon energy E_nu - E_nl in hartree (positive when ``n_upper`` > ``n_lower``).

    >>> from driven_atom.atom import Atom
    >>> round(transition_energy(Atom(1), 2, 1), 6)
    0.375
    """
    return float(energy(atom, n_upper) - energy(atom, n_lower))


def series_lower(series) -> int:
    """Lower level of a series given by name ("balmer") or by number ("2", 2).

    >>> series_lower("Paschen"), series_lower("7")
    (3, 7)
    """
    text = str(series).strip().lower()
    if text in SERIES:
        return SERIES[text]
    try:
        n = int(text)
    except ValueError:
        n = 0
    if not 1 <= n <= N_MAX:
        raise InputError(f"`series` must be one of {', '.join(SERIES)} or a lower level n >= 1, "
                         f"got {series!r}")
    return n


def edlen_refractive_index(vacuum_nm):
    """Refractive index of standard dry air, Edlén (1966), Metrologia 2, 71, eq. (1):

        (n - 1) 1e8 = 8342.13 + 2406030 / (130 - s^2) + 15997 / (38.9 - s^2),

    s = 1/lambda_vac in µm^-1. Valid 200 nm to 2 µm; ``None`` outside.

    >>> round(edlen_refractive_index(656.46) - 1, 8)
    0.00027624
    """
    if not EDLEN_RANGE_NM[0] <= vacuum_nm <= EDLEN_RANGE_NM[1]:
        return None
    s2 = (1e3 / vacuum_nm) ** 2
    return 1.0 + 1e-8 * (8342.13 + 2406030.0 / (130.0 - s2) + 15997.0 / (38.9 - s2))


def air_wavelength_nm(vacuum_nm):
    """Air wavelength lambda_vac / n_air (Edlén 1966); ``None`` outside 200 nm - 2 µm.

    >>> round(air_wavelength_nm(656.461), 3)
    656.28
    >>> air_wavelength_nm(121.567) is None
    True
    """
    index = edlen_refractive_index(vacuum_nm)
    return None if index is None else vacuum_nm / index


@dataclass(frozen=True)
class Line:
    """One line n_upper -> n_lower: photon ``energy`` (hartree), vacuum and air wavelengths (nm)."""

    upper: int
    lower: int
    energy: float
    vacuum_nm: float
    air_nm: float | None

    @property
    def energy_eV(self) -> float:
        return self.energy * HARTREE_EV

    @property
    def wavenumber_cm(self) -> float:
        return energy_to_wavenumber_cm(self.energy)


def line(atom, n_upper: int, n_lower: int) -> Line:
    """The line between two levels (``n_upper`` > ``n_lower`` >= 1).

    >>> from driven_atom.atom import Atom
    >>> round(line(Atom.from_name("H"), 2, 1).vacuum_nm, 3)
    121.568
    """
    if not 1 <= n_lower < n_upper:
        raise InputError(f"a line needs 1 <= lower < upper, got upper = {n_upper}, lower = {n_lower}")
    e = transition_energy(atom, n_upper, n_lower)
    vac = photon_energy_to_wavelength_nm(e)
    return Line(n_upper, n_lower, e, vac, air_wavelength_nm(vac))


def series_lines(atom, lower: int, upto: int) -> list[Line]:
    """Lines n -> ``lower`` for n = lower+1 ... ``upto``.

    >>> from driven_atom.atom import Atom
    >>> [ln.upper for ln in series_lines(Atom(1), 1, 3)]
    [2, 3]
    """
    if not isinstance(upto, int) or not lower < upto <= N_MAX:
        raise InputError(f"`upto` must be an integer from {lower + 1} to {N_MAX} for lower level "
                         f"{lower}, got {upto!r}")
    return [line(atom, n, lower) for n in range(lower + 1, upto + 1)]


def series_limit_nm(atom, lower: int) -> float:
    """Vacuum wavelength of the series limit, 2 pi c / |E_lower| in nm.

    >>> from driven_atom.atom import Atom
    >>> round(series_limit_nm(Atom.from_name("H"), 2), 2)
    364.71
    """
    return photon_energy_to_wavelength_nm(-float(energy(atom, lower)))

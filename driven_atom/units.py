"""Units at the edges, Hartree atomic units inside.

One pint registry, atomic units defined from CODATA 2022 (the values :mod:`scipy.constants` ships), and
:func:`to_au` that turns a user's quantity ("800 nm", "1e14 W/cm^2", "10 fs", "0.05 au", or a plain
number meaning atomic units) into a float in atomic units of a named kind.

>>> round(to_au("27.211386245988 eV", "energy"), 12)
1.0
>>> round(to_au("1 fs", "time"), 4)
41.3414
>>> round(AU_INTENSITY_WCM2 / 1e16, 4)
3.5094
"""
from __future__ import annotations

import math
from functools import lru_cache

from driven_atom.errors import InputError

# --- CODATA 2022 recommended values (Mohr et al., Rev. Mod. Phys. 97, 025002 (2025)); the same
# numbers scipy.constants ships (tests compare). Literals keep start-up free of scipy. --------------
ALPHA = 7.2973525643e-3                              # fine-structure constant
C_AU = 1.0 / ALPHA                                   # speed of light in atomic units
SPEED_OF_LIGHT_MS = 299792458.0
EPSILON_0 = 8.8541878188e-12                         # F/m
HBAR_JS = 1.0545718176461565e-34
HARTREE_J = 4.359744722206e-18
HARTREE_EV = 27.211386245981
BOHR_M = 5.29177210544e-11
AU_TIME_S = 2.4188843265864e-17
AU_FIELD_VM = 5.14220675112e11
RYDBERG_INF_M = 10973731.568157                      # R_inf in 1/m
ELECTRON_MASS_KG = 9.1093837139e-31
ATOMIC_MASS_UNIT_ME = 1.66053906892e-27 / ELECTRON_MASS_KG   # 1 u in electron masses
BOHR2_CM2 = (BOHR_M * 100.0) ** 2                     # 1 bohr^2 in cm^2 (2.80028e-17)
MEGABARN_CM2 = 1e-18
# Cycle-averaged intensity of a linearly polarised wave of amplitude 1 a.u.: I = 1/2 c eps0 E^2
AU_INTENSITY_WM2 = 0.5 * SPEED_OF_LIGHT_MS * EPSILON_0 * AU_FIELD_VM**2
AU_INTENSITY_WCM2 = AU_INTENSITY_WM2 * 1e-4           # 3.50945e16 W/cm^2
AU_FLUENCE_JCM2 = AU_INTENSITY_WCM2 * AU_TIME_S       # (W/cm^2)*s per a.u. intensity*time

# Quantity kinds: the pint unit that equals one atomic unit of that kind.
_AU_UNIT = {
    "energy": "hartree",
    "length": "bohr",
    "time": "atomic_unit_of_time",
    "intensity": "au_intensity",
    "field": "atomic_unit_of_electric_field",
    "rate": "1 / atomic_unit_of_time",
    "mass": "electron_mass",
    "area": "bohr ** 2",
    "fluence": "au_intensity * atomic_unit_of_time",
    "density": "1 / bohr ** 3",
}
KINDS = tuple(_AU_UNIT)


@lru_cache(maxsize=1)
def registry():
    """The package's pint registry (built on first use: pint is slow to import)."""
    import pint

    ureg = pint.UnitRegistry()
    # Pin the atomic units to the constants above, so every module agrees.
    ureg.define(f"hartree = {HARTREE_J!r} * joule = E_h")
    ureg.define(f"bohr = {BOHR_M!r} * meter = a0 = a_0")
    ureg.define(f"atomic_unit_of_time = {AU_TIME_S!r} * second")
    ureg.define(f"atomic_unit_of_electric_field = {AU_FIELD_VM!r} * volt / meter")
    ureg.define(f"au_intensity = {AU_INTENSITY_WM2!r} * watt / meter ** 2")
    return ureg


def _plain_number(value) -> float | None:
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value)
    return None


def to_au(value, kind: str, *, name: str = "value") -> float:
    """Convert a quantity to atomic units of ``kind``.

    ``value`` is a plain number (already atomic units), a string such as ``"800 nm"`` or
    ``"0.05 au"``, or a pint Quantity. Energies also accept a frequency (E = h nu) or a
    wavenumber (E = h c / lambda); a rate accepts a frequency in Hz (taken as 1/s) or an energy
    (E/hbar). Wrong dimensions raise :class:`InputError` naming ``name``.

    >>> round(to_au("0.05 au", "field"), 12)
    0.05
    >>> to_au("3 eV", "length", name="wavelength")
    Traceback (most recent call last):
    ...
    driven_atom.errors.InputError: `wavelength` must be a length (e.g. "800 nm"), got '3 eV'
    """
    if kind not in _AU_UNIT:
        raise ValueError(f"unknown quantity kind {kind!r}; one of {KINDS}")
    number = _plain_number(value)
    if number is not None:
        result = number
    else:
        result = _parse_to_au(value, kind, name)
    if not math.isfinite(result):
        raise InputError(f"`{name}` must be finite, got {value!r}")
    return result


_EXAMPLE = {"energy": "13.6 eV", "length": "800 nm", "time": "10 fs", "intensity": "1e14 W/cm^2",
            "field": "5e10 V/m", "rate": "1 GHz", "mass": "1.00728 u", "area": "1e-18 cm^2",
            "fluence": "1 J/cm^2", "density": "1e12 cm^-3"}
_ARTICLE = {"energy": "an", "intensity": "an"}


def _dimension_error(value, kind: str, name: str) -> InputError:
    article = _ARTICLE.get(kind, "a")
    return InputError(f"`{name}` must be {article} {kind} (e.g. \"{_EXAMPLE[kind]}\"), got {value!r}")


def _parse_to_au(value, kind: str, name: str) -> float:
    import pint

    ureg = registry()
    if isinstance(value, str):
        text = value.strip()
        for suffix in (" a.u.", " au", "a.u.", "au"):
            if text.endswith(suffix):
                head = text[: -len(suffix)].strip()
                try:
                    return float(head)
                except ValueError:
                    break
        try:
            quantity = ureg.Quantity(text)
        except Exception:
            raise InputError(f"`{name}` could not be read as a quantity: {value!r} "
                             f"(write e.g. \"{_EXAMPLE[kind]}\")") from None
    elif isinstance(value, pint.Quantity):
        quantity = value
    else:
        raise InputError(f"`{name}` must be a number or a string with units, got {value!r}")
    if not isinstance(quantity, pint.Quantity):  # a bare number in a string: atomic units
        return float(quantity)
    target = ureg(_AU_UNIT[kind])
    try:
        return float(quantity.to(target).magnitude)
    except pint.DimensionalityError:
        pass
    if kind == "energy" and quantity.dimensionality != ureg.meter.dimensionality:
        try:  # frequency or wavenumber -> photon energy
            return float(quantity.to(target, "sp").magnitude)
        except pint.DimensionalityError:
            pass
    if kind == "rate":
        if quantity.check("[energy]"):
            return float((quantity / ureg.hbar).to(target).magnitude)
    raise _dimension_error(value, kind, name)


def from_au(value: float, kind: str, unit: str) -> float:
    """Convert ``value`` in atomic units of ``kind`` into ``unit`` (a pint unit string).

    >>> round(from_au(1.0, "energy", "eV"), 6)
    27.211386
    """
    ureg = registry()
    return float((value * ureg(_AU_UNIT[kind])).to(unit).magnitude)


# --- plain-float conversions used on hot paths (no pint) --------------------------------------
def energy_to_ev(energy_au: float) -> float:
    """Hartree -> eV."""
    return energy_au * HARTREE_EV


def photon_energy_to_wavelength_nm(energy_au):
    """Vacuum wavelength lambda = 2 pi c / omega (c = 1/alpha in a.u.), in nm.

    >>> round(photon_energy_to_wavelength_nm(0.0569542), 1)
    800.0
    """
    return 2.0 * math.pi * C_AU / energy_au * BOHR_M * 1e9


def wavelength_nm_to_photon_energy(wavelength_nm):
    """Inverse of :func:`photon_energy_to_wavelength_nm`."""
    return 2.0 * math.pi * C_AU / (wavelength_nm * 1e-9 / BOHR_M)


def energy_to_wavenumber_cm(energy_au):
    """Photon energy in hartree -> wavenumber 1/lambda in cm^-1."""
    return 1.0 / (photon_energy_to_wavelength_nm(energy_au) * 1e-7)


def intensity_to_field(intensity_au: float) -> float:
    """Peak field F0 of a linearly polarised wave of cycle-averaged intensity I: I = F0^2 (a.u.)."""
    return math.sqrt(intensity_au)


def field_to_intensity_wcm2(field_au: float) -> float:
    """Cycle-averaged intensity in W/cm^2 of a linearly polarised wave of peak field F0 (a.u.)."""
    return field_au**2 * AU_INTENSITY_WCM2

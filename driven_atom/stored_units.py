"""The ``units`` and ``long_name`` of every array this package stores (one table, one rule).

Arrays are stored in Hartree atomic units, as computed. Their ``units`` attribute spells that
atomic unit as a UDUNITS-2 expression (the CF conventions' unit grammar): the SI value of the atomic
unit followed by the SI unit, e.g. ``"2.4188843265864e-17 s"`` for the atomic unit of time or
``"4.359744722206e-18 J"`` for the hartree (CODATA 2022, :mod:`driven_atom.units`). Any CF reader
converts them; ``long_name`` says in words what the array is and names the atomic unit.
Probabilities, populations and counts are ``"1"``; text arrays (labels, job ids) carry ``"1"`` too,
so every stored array has both attributes. Plain ``"au"`` is never written (UDUNITS reads it as the
astronomical unit). The convention is described once, in :mod:`driven_atom.result`.

>>> cf_units("time")
'2.4188843265864e-17 s'
>>> describe("history/series", "dipole_z")["units"]
'5.29177210544e-11 m'
>>> describe("spectra/photoelectron", "dP_dE")["long_name"]
'photoelectron energy density dP/dE (per hartree)'
"""
from __future__ import annotations

from driven_atom.units import (AU_FIELD_VM, AU_INTENSITY_WM2, AU_MAGNETIC_T, AU_TIME_S, BOHR_M, ELECTRON_MASS_KG,
                               HARTREE_J)

# one atomic unit of each kind, as a UDUNITS-2 expression (a number times SI units)
_AU_SI = {
    "energy": f"{HARTREE_J!r} J",
    "length": f"{BOHR_M!r} m",
    "time": f"{AU_TIME_S!r} s",
    "intensity": f"{AU_INTENSITY_WM2:.12g} W m-2",
    "field": f"{AU_FIELD_VM!r} V m-1",
    "rate": f"{1 / AU_TIME_S:.12g} s-1",
    "mass": f"{ELECTRON_MASS_KG!r} kg",
    "area": f"{BOHR_M ** 2:.12g} m2",
    "fluence": f"{AU_INTENSITY_WM2 * AU_TIME_S:.12g} J m-2",
    "density": f"{BOHR_M ** -3:.12g} m-3",
    "chirp": f"{AU_TIME_S ** -2:.12g} s-2",
    "magnetic field": f"{AU_MAGNETIC_T:.12g} T",
    # kinds of stored arrays that are no config quantity
    "per energy": f"{1 / HARTREE_J:.12g} J-1",
    "angular frequency": f"{1 / AU_TIME_S:.12g} rad s-1",
    "acceleration": f"{BOHR_M / AU_TIME_S ** 2:.12g} m s-2",
    "velocity squared": f"{(BOHR_M / AU_TIME_S) ** 2:.12g} m2 s-2",
    "momentum": f"{ELECTRON_MASS_KG * BOHR_M / AU_TIME_S:.12g} kg m s-1",
    "1": "1",
}
_AU_NAME = {"energy": "hartree", "length": "bohr", "time": "atomic units of time", "per energy": "per hartree",
            "angular frequency": "atomic units, hbar*omega in hartree", "acceleration": "atomic units",
            "velocity squared": "atomic units", "momentum": "atomic units"}

# (kind, description) of arrays by name; a spectrum array is looked up by its own name
_ARRAYS = {
    "times": ("time", "history sample time"),
    "labels": ("1", "state label"),
    "values": ("1", "final population"),
    "norm": ("1", "norm of the wave function"),
    "ionization": ("1", "ionisation probability"),
    "top_l_population": ("1", "population in the highest partial wave"),
    "dipole_z": ("length", "dipole expectation <z>"),
    "acceleration_z": ("acceleration", "dipole acceleration d2<z>/dt2"),
    "time": ("time", "time"),
    "energy": ("energy", "photoelectron energy"),
    "dP_dE": ("per energy", "photoelectron energy density dP/dE"),
    "dP_dE_l": ("per energy", "photoelectron energy density dP/dE per partial wave"),
    "omega": ("angular frequency", "angular frequency"),
    "power": ("velocity squared", "harmonic power |a(omega)|^2 (Larmor: emitted power per unit frequency "
                                  "is proportional to it)"),
    "frequency": ("rate", "frequency"),
    "order": ("1", "harmonic order"),
    "k": ("momentum", "electron momentum"),
}


def cf_units(kind: str) -> str:
    """The UDUNITS-2 spelling of one atomic unit of ``kind`` (a config quantity kind of
    :mod:`driven_atom.units` or a stored-array kind above); ``"1"`` for unknown kinds."""
    return _AU_SI.get(kind, "1")


def au_name(kind: str) -> str:
    """How a long name names the atomic unit of ``kind`` ("hartree", "bohr", ...)."""
    from driven_atom.quantities import AU_UNIT_NAME

    return _AU_NAME.get(kind) or AU_UNIT_NAME.get(kind, "atomic units")


def attributes(kind: str, description: str) -> dict:
    """``{"units", "long_name"}`` of an array of ``kind`` described by ``description``."""
    if kind == "1":
        return {"units": "1", "long_name": description}
    return {"units": cf_units(kind), "long_name": f"{description} ({au_name(kind)})"}


def describe(group: str, name: str) -> dict:
    """``{"units", "long_name"}`` of the array ``name`` stored in ``group`` ("history/populations",
    "history/series", "spectra/NAME", "populations" or "" for the top level). Unknown arrays are
    described as atomic-unit values of their name."""
    if group == "history/populations":
        return attributes("1", f"population of {name} at the sample times")
    kind, description = _ARRAYS.get(name, ("1", f"{name} (atomic units, see the route)"))
    if group.startswith("spectra/"):
        description = f"{description} of the {group.split('/', 1)[1]} spectrum" \
            if name not in ("dP_dE", "dP_dE_l", "energy") else description
    if group == "history/series":
        description = f"{description} at the sample times"
    return attributes(kind, description)

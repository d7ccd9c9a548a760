"""The atom layer as plain dicts in lab units: what ``driven-atom lines|transition|state|xsec`` print.

Every function returns a dict whose keys name their units (``_nm``, ``_eV``, ``_s``, ``_cm2``,
``_au``); values not defined (an air wavelength outside 200 nm - 2 µm, the lifetime of a level
without electric-dipole decay) are ``None``.

Nucleus: ``nucleus`` names it ("infinite", "H", "D", "T", "He3", "He", "Li", ... or a mass such
as "1.00728 u"; Z then defaults to 1); without it the default is the most abundant isotope for Z <= 10 (H, He-4, Li-7,
Be-9, B-11, C-12, N-14, O-16, F-19, Ne-20) and an infinite nuclear mass above.

>>> round(state("2p")["lifetime_s"] * 1e9, 4)
1.5962
>>> [round(x["vacuum_nm"], 2) for x in lines("balmer", upto=4)["lines"]]
[656.47, 486.27]
"""
from __future__ import annotations

import math

from driven_atom.atom.species import NUCLEI, Atom
from driven_atom.atom.states import State, parse_state
from driven_atom.errors import InputError
from driven_atom.units import AU_TIME_S, BOHR2_CM2, HARTREE_EV, MEGABARN_CM2

# most abundant isotope by Z (names of driven_atom.atom.species.NUCLEI)
DEFAULT_NUCLEUS = {1: "H", 2: "He", 3: "Li", 4: "Be", 5: "B", 6: "C", 7: "N", 8: "O", 9: "F", 10: "Ne"}
RANGE_POINTS_MAX = 100_000


def resolve_atom(Z=None, nucleus=None) -> Atom:
    """The atom for ``Z`` and ``nucleus`` (both optional; see the module docstring for defaults).

    >>> resolve_atom(2).nuclear_mass > 7000
    True
    >>> resolve_atom(nucleus="D").Z
    1
    """
    if isinstance(Z, Atom):
        return Z
    if nucleus is None:
        Z = 1 if Z is None else Z
        if isinstance(Z, bool) or not isinstance(Z, int):
            raise InputError(f"`Z` must be an integer from 1 to 118, got {Z!r}")
        name = DEFAULT_NUCLEUS.get(Z)
        return Atom(Z) if name is None else Atom.from_name(name)
    name = str(nucleus).strip()
    if Z is None and (name == "infinite" or (name not in NUCLEI and not name.endswith("+"))):
        Z = 1   # an infinite or given nuclear mass: Z defaults to 1 like everywhere else
    return Atom.from_name(name, Z)


def _finite(value):
    return value if value is not None and math.isfinite(value) else None


def lines(series="balmer", upto: int | None = None, *, Z=None, nucleus=None) -> dict:
    """Series lines ``upper -> lower`` for upper = lower+1 ... ``upto`` (default: five lines).

    ``series`` is a name (lyman, balmer, paschen, brackett, pfund, humphreys) or the lower n.
    Keys: ``lines`` (list of dicts with ``upper``, ``lower``, ``vacuum_nm``, ``air_nm``, ``energy_eV``,
    ``wavenumber_cm``) and ``limit_vacuum_nm``.

    >>> out = lines("lyman", upto=2)
    >>> round(out["lines"][0]["vacuum_nm"], 3), out["lines"][0]["air_nm"]
    (121.568, None)
    """
    from driven_atom.atom.levels import series_limit_nm, series_lines, series_lower

    atom = resolve_atom(Z, nucleus)
    lower = series_lower(series)
    rows = series_lines(atom, lower, lower + 5 if upto is None else upto)
    return {
        "lines": [{"upper": ln.upper, "lower": ln.lower, "vacuum_nm": ln.vacuum_nm, "air_nm": ln.air_nm,
                   "energy_eV": ln.energy_eV, "wavenumber_cm": ln.wavenumber_cm} for ln in rows],
        "limit_vacuum_nm": series_limit_nm(atom, lower),
    }


def _upper_lower(a: State, b: State) -> tuple[State, State]:
    if a.n == b.n and a.l == b.l:
        raise InputError(f"`transition` needs two different levels, got {a.label!r} and {b.label!r}")
    return (a, b) if (a.n, a.l) > (b.n, b.l) else (b, a)


def transition(state_a, state_b, *, Z=None, nucleus=None) -> dict:
    """Transition between two states, given in either order.

    Keys: ``energy_eV`` (photon energy), ``vacuum_nm``, ``air_nm``, ``radial_dipole_au``
    (int R R r^3 dr, bohr), ``f_absorption`` (level to level), ``A_s`` (upper -> lower, summed
    over lower m; with m in both states the single channel). Electric-dipole forbidden pairs
    (l' != l +- 1) have f = A = 0; levels of equal n have no energy (wavelengths ``None``).

    >>> out = transition("1s", "2p")
    >>> round(out["f_absorption"], 4), round(out["A_s"] / 1e8, 4)
    (0.4162, 6.2649)
    """
    from driven_atom.atom.dipoles import einstein_A, oscillator_strength, radial_dipole
    from driven_atom.atom.levels import air_wavelength_nm, transition_energy
    from driven_atom.units import photon_energy_to_wavelength_nm

    atom = resolve_atom(Z, nucleus)
    upper, lower = _upper_lower(parse_state(state_a, name="state"), parse_state(state_b, name="state"))
    omega = transition_energy(atom, upper.n, lower.n)
    vacuum = photon_energy_to_wavelength_nm(omega) if omega > 0 else None
    return {
        "energy_eV": omega * HARTREE_EV,
        "vacuum_nm": vacuum,
        "air_nm": None if vacuum is None else air_wavelength_nm(vacuum),
        "radial_dipole_au": radial_dipole(atom, upper.n, upper.l, lower.n, lower.l),
        "f_absorption": oscillator_strength(atom, lower, upper),
        "A_s": einstein_A(atom, upper, lower) / AU_TIME_S,
    }


def state(label, *, Z=None, nucleus=None) -> dict:
    """One level: ``energy_eV`` (E_n < 0), ``binding_eV`` (-E_n), ``lifetime_s`` (radiative,
    all lower levels; ``None`` if there is no electric-dipole decay, or for n above
    :data:`~driven_atom.atom.dipoles.MAX_N_LIFETIME` with a ``note`` saying so) and ``r_mean_au`` (<r>).

    >>> out = state("3d")
    >>> round(out["lifetime_s"] * 1e9, 2), out["r_mean_au"] > 10.5
    (15.47, True)
    """
    from driven_atom.atom.dipoles import MAX_N_LIFETIME, lifetime
    from driven_atom.atom.levels import energy
    from driven_atom.atom.radial import expectation_r

    atom = resolve_atom(Z, nucleus)
    s = parse_state(label, name="state")
    e = float(energy(atom, s.n))
    out = {
        "energy_eV": e * HARTREE_EV,
        "binding_eV": -e * HARTREE_EV,
        "lifetime_s": _finite(lifetime(atom, s) * AU_TIME_S) if s.n <= MAX_N_LIFETIME else None,
        "r_mean_au": expectation_r(atom, s.n, s.l, 1),
    }
    if s.n > MAX_N_LIFETIME:
        out["note"] = f"lifetimes are summed exactly for n <= {MAX_N_LIFETIME}"
    return out


def _photon_energies(photon_energy, wavelength, energy_range):
    """Photon energies in hartree from exactly one of the three inputs; a list for a range."""
    import numpy as np

    from driven_atom.units import C_AU, to_au

    given = [x is not None for x in (photon_energy, wavelength, energy_range)]
    if sum(given) != 1:
        raise InputError("give exactly one of `photon-energy`, `wavelength` or `range`")
    if photon_energy is not None:
        value = to_au(photon_energy, "energy", name="photon-energy")
        if value <= 0:
            raise InputError(f"`photon-energy` must be > 0, got {photon_energy!r}")
        return value
    if wavelength is not None:
        value = to_au(wavelength, "length", name="wavelength")
        if value <= 0:
            raise InputError(f"`wavelength` must be > 0, got {wavelength!r}")
        return 2.0 * math.pi * C_AU / value   # omega = 2 pi c / lambda (a.u.)
    parts = str(energy_range).split(":")
    if len(parts) != 3:
        raise InputError(f"`range` must be \"START:STOP:POINTS\" like \"14 eV:100 eV:50\", got {energy_range!r}")
    start = to_au(parts[0].strip(), "energy", name="range start")
    stop = to_au(parts[1].strip(), "energy", name="range stop")
    try:
        count = int(parts[2])
    except ValueError:
        count = 0
    if not 2 <= count <= RANGE_POINTS_MAX or not 0 < start < stop:
        raise InputError(f"`range` needs 0 < START < STOP and 2 <= POINTS <= {RANGE_POINTS_MAX}, "
                         f"got {energy_range!r}")
    return np.linspace(start, stop, count)


def xsec(label, photon_energy=None, *, wavelength=None, energy_range=None, Z=None, nucleus=None) -> dict:
    """Photoionisation cross section of the level ``label`` (m-averaged) at one photon energy
    (``photon_energy`` or ``wavelength``: strings with units or atomic units) or over
    ``energy_range`` "START:STOP:POINTS" (then every value is a list).

    Keys: ``sigma_cm2``, ``sigma_Mb``, ``photon_energy_eV``.

    >>> out = xsec("1s", "20 eV", nucleus="infinite")
    >>> round(out["sigma_cm2"] / 1e-18, 3), round(out["photon_energy_eV"], 1)
    (2.212, 20.0)
    """
    from driven_atom.atom.photoionization import cross_section

    atom = resolve_atom(Z, nucleus)
    s = parse_state(label, name="state")
    if s.m is not None:
        raise InputError(f"`state` for xsec is a level without m (cross sections are m-averaged), "
                         f"got {s.label!r}; use {s.level.label!r}")
    omega = _photon_energies(photon_energy, wavelength, energy_range)
    sigma = cross_section(atom, s.n, s.l, omega) * BOHR2_CM2
    if isinstance(sigma, float):
        return {"sigma_cm2": sigma, "sigma_Mb": sigma / MEGABARN_CM2, "photon_energy_eV": omega * HARTREE_EV}
    return {"sigma_cm2": sigma.tolist(), "sigma_Mb": (sigma / MEGABARN_CM2).tolist(),
            "photon_energy_eV": (omega * HARTREE_EV).tolist()}

"""The atom layer as plain dicts in lab units: what ``driven-atom lines|transition|state|xsec`` print.

Every function returns a dict whose keys name their units (``_nm``, ``_eV``, ``_s``, ``_cm2``,
``_au``); values not defined (an air wavelength outside 200 nm - 2 µm, the lifetime of a level
without electric-dipole decay) are ``None``.

Structure: ``structure`` = "bohr" (default: the reduced-mass Bohr levels), "fine" (Dirac energies
with recoil and the Lamb shift) or "hyperfine" (also the magnetic hyperfine structure) of
:mod:`driven_atom.atom.structure`; labels may then name components ("2p3/2", "1s1/2 F=1"), and "2p"
stands for the whole n l manifold (its (2j+1)-weighted centroid).

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


def lines(series="balmer", upto: int | None = None, *, Z=None, nucleus=None, structure: str = "bohr") -> dict:
    """Series lines ``upper -> lower`` for upper = lower+1 ... ``upto`` (default: five lines).
    With ``structure`` "fine" or "hyperfine" every electric-dipole component is listed (upper and
    lower are then component labels, each row also with its Einstein ``A_s``), ordered by upper n
    and wavelength; see :func:`component_lines`.

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
    if structure != "bohr":
        return component_lines(atom, lower, lower + 5 if upto is None else upto, structure)
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


def transition(state_a, state_b, *, Z=None, nucleus=None, structure: str = "bohr") -> dict:
    """Transition between two states, given in either order.

    Keys: ``energy_eV`` (photon energy), ``vacuum_nm``, ``air_nm``, ``radial_dipole_au``
    (int R R r^3 dr, bohr), ``f_absorption`` (level to level), ``A_s`` (upper -> lower, summed
    over lower m; with m in both states the single channel). Electric-dipole forbidden pairs
    (l' != l +- 1) have f = A = 0; levels of equal n have no energy (wavelengths ``None``).

    >>> out = transition("1s", "2p")
    >>> round(out["f_absorption"], 4), round(out["A_s"] / 1e8, 4)
    (0.4162, 6.2649)

    With ``structure`` "fine" or "hyperfine" see :func:`component_transition`.
    """
    from driven_atom.atom.dipoles import einstein_A, oscillator_strength, radial_dipole
    from driven_atom.atom.levels import air_wavelength_nm, transition_energy
    from driven_atom.units import photon_energy_to_wavelength_nm

    atom = resolve_atom(Z, nucleus)
    if structure != "bohr":
        return component_transition(atom, state_a, state_b, structure)
    upper, lower = _upper_lower(_label(state_a), _label(state_b))
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


def state(label, *, Z=None, nucleus=None, structure: str = "bohr") -> dict:
    """One level: ``energy_eV`` (E_n < 0), ``binding_eV`` (-E_n), ``lifetime_s`` (radiative,
    all lower levels; ``None`` if there is no electric-dipole decay, or for n above
    :data:`~driven_atom.atom.dipoles.MAX_N_LIFETIME` with a ``note`` saying so) and ``r_mean_au`` (<r>).

    >>> out = state("3d")
    >>> round(out["lifetime_s"] * 1e9, 2), out["r_mean_au"] > 10.5
    (15.47, True)

    With ``structure`` "fine" or "hyperfine" see :func:`component_state`.
    """
    from driven_atom.atom.dipoles import MAX_N_LIFETIME, lifetime
    from driven_atom.atom.levels import energy
    from driven_atom.atom.radial import expectation_r

    atom = resolve_atom(Z, nucleus)
    if structure != "bohr":
        return component_state(atom, label, structure)
    s = _label(label)
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


# --- fine and hyperfine structure ---------------------------------------------------------------
def _label(label, structure: str = "bohr"):
    """A label checked against ``structure`` (messages name the command-line option)."""
    from driven_atom.atom.components import check_label

    return check_label(label, structure, name="state", key="structure")


def _structure(structure: str) -> str:
    from driven_atom.atom.components import STRUCTURES

    if structure not in STRUCTURES:
        raise InputError(f"`structure` must be one of {', '.join(STRUCTURES)}, got {structure!r}")
    return structure


def _spin2(atom, structure: str) -> int:
    from driven_atom.atom.structure import nuclear_spin2

    return nuclear_spin2(atom) if structure == "hyperfine" else 0


def _whole(atom, label, structure: str, name: str):
    """A whole component for ``label`` (an s level "2s" is its only component "2s1/2"), or the
    n l manifold (a State) for a level label with l > 0."""
    from driven_atom.atom.components import Component, check_label

    item = check_label(label, structure, name=name, key="structure")
    if isinstance(item, State):
        if item.l == 0 and structure == "fine":
            return Component(item.n, 0, 1)
        return item
    return item.whole


def component_state(atom, label, structure: str) -> dict:
    """One level or component under ``structure``: ``energy_eV`` (from the ionisation limit),
    ``binding_eV``, ``lifetime_s`` (radiative, every lower component; ``None`` without electric-dipole
    decay), ``r_mean_au``, and for a component its ``g_factor`` (Landé g_j, or g_F with hyperfine
    structure) and ``label``.

    >>> from driven_atom.atom import Atom
    >>> out = component_state(Atom.from_name("H"), "2p3/2", "fine")
    >>> round(out["g_factor"], 4), round(out["lifetime_s"] * 1e9, 4)
    (1.3337, 1.5961)
    """
    from driven_atom.atom.components import Component
    from driven_atom.atom.dipoles import lifetime
    from driven_atom.atom.manifold import total_decay_rate
    from driven_atom.atom.radial import expectation_r
    from driven_atom.atom.structure import level_energy

    structure = _structure(structure)
    item = _whole(atom, label, structure, "state")
    e = level_energy(atom, item, structure)
    out = {"label": item.label, "energy_eV": e * HARTREE_EV, "binding_eV": -e * HARTREE_EV}
    if isinstance(item, Component):
        rate = total_decay_rate(atom, item, _spin2(atom, structure))
        out["lifetime_s"] = _finite(1.0 / rate * AU_TIME_S) if rate > 0 else None
        out["g_factor"] = _g_factor(atom, item, structure)
    else:
        out["lifetime_s"] = _finite(lifetime(atom, item) * AU_TIME_S)
    out["r_mean_au"] = expectation_r(atom, item.n, item.l, 1)
    return out


def _g_factor(atom, item, structure: str) -> float:
    """g_j, or g_F = g_j [F(F+1) + j(j+1) - I(I+1)]/(2F(F+1)) - g_I (m_e/m_p) [F(F+1) + I(I+1) - j(j+1)]/(2F(F+1))
    (Bethe & Salpeter 1957, §47; 0 for F = 0)."""
    from driven_atom.atom.nuclei import nuclear_data
    from driven_atom.atom.structure import PROTON_ELECTRON_MASS_RATIO, lande_g

    g_j = lande_g(item.l, item.j2, nuclear_mass=atom.nuclear_mass)
    if item.F2 is None:
        return g_j
    if item.F2 == 0:
        return 0.0
    data = nuclear_data(atom)
    F, j, I = item.F2 / 2, item.j2 / 2, data.spin
    FF, jj, II = F * (F + 1), j * (j + 1), I * (I + 1)
    return (g_j * (FF + jj - II) - data.g_factor / PROTON_ELECTRON_MASS_RATIO * (FF + II - jj)) / (2 * FF)


def component_transition(atom, state_a, state_b, structure: str) -> dict:
    """A transition between two components (or two n l manifolds) under ``structure``, in either
    order. Keys as :func:`transition` (``f_absorption``, ``A_s`` of the component, by its line
    strength) plus ``frequency_GHz`` (the interval), ``line_strength_au`` (bohr^2), ``upper``
    and ``lower`` (labels). Two manifolds ("3d", "2p") give the multiplet: centroid energies and the
    level values of :func:`transition`.

    >>> from driven_atom.atom import Atom
    >>> out = component_transition(Atom.from_name("H"), "2s1/2", "2p1/2", "fine")
    >>> round(out["frequency_GHz"] * 1e3, 1)            # the Lamb shift, MHz
    1057.8
    """
    from driven_atom.atom.components import Component
    from driven_atom.atom.dipoles import einstein_A, oscillator_strength, radial_dipole
    from driven_atom.atom.levels import air_wavelength_nm
    from driven_atom.atom.manifold import component_einstein_A, component_oscillator_strength, line_strength
    from driven_atom.atom.structure import HARTREE_HZ, level_energy
    from driven_atom.units import photon_energy_to_wavelength_nm

    structure = _structure(structure)
    a, b = _whole(atom, state_a, structure, "state"), _whole(atom, state_b, structure, "state")
    if isinstance(a, Component) != isinstance(b, Component):
        manifold = a if isinstance(b, Component) else b
        raise InputError(f"`transition` between a component and the whole manifold {manifold.label!r}: name "
                         f"its component (e.g. {manifold.label}{2 * manifold.l + 1}/2)")
    if a == b:
        raise InputError(f"`transition` needs two different levels, got {a.label!r} twice")
    ea, eb = level_energy(atom, a, structure), level_energy(atom, b, structure)
    (upper, e_u), (lower, e_l) = sorted([(a, ea), (b, eb)], key=lambda x: -x[1])
    omega = e_u - e_l
    vacuum = photon_energy_to_wavelength_nm(omega) if omega > 0 else None
    R = radial_dipole(atom, upper.n, upper.l, lower.n, lower.l)
    out = {"upper": upper.label, "lower": lower.label, "energy_eV": omega * HARTREE_EV,
           "frequency_GHz": omega * HARTREE_HZ * 1e-9, "vacuum_nm": vacuum,
           "air_nm": None if vacuum is None else air_wavelength_nm(vacuum), "radial_dipole_au": R}
    if isinstance(upper, Component):
        S = line_strength(atom, upper, lower, _spin2(atom, structure))
        positive = omega > 0 and S > 0
        out.update({"line_strength_au": S,
                    "f_absorption": component_oscillator_strength(atom, omega, S, lower) if positive else 0.0,
                    "A_s": component_einstein_A(omega, S, upper) / AU_TIME_S if positive else 0.0})
    else:
        out.update({"line_strength_au": max(upper.l, lower.l) * R * R if abs(upper.l - lower.l) == 1 else 0.0,
                    "f_absorption": oscillator_strength(atom, lower, upper),
                    "A_s": einstein_A(atom, upper, lower) / AU_TIME_S if upper.n > lower.n else 0.0})
    return out


def component_lines(atom, lower: int, upto: int, structure: str) -> dict:
    """Every electric-dipole component n -> ``lower`` (n = lower+1 ... ``upto``) under ``structure``:
    rows with ``upper``, ``lower`` (component labels), ``vacuum_nm``, ``air_nm``, ``energy_eV``,
    ``wavenumber_cm``, ``A_s``; and ``limit_vacuum_nm`` (from the lowest component of ``lower``).

    >>> from driven_atom.atom import Atom
    >>> rows = component_lines(Atom.from_name("H"), 1, 2, "fine")["lines"]
    >>> [(r["upper"], round(r["vacuum_nm"], 5)) for r in rows]
    [('2p3/2', 121.56682), ('2p1/2', 121.56736)]
    """
    from driven_atom.atom.components import Component, f_values
    from driven_atom.atom.levels import N_MAX, air_wavelength_nm
    from driven_atom.atom.manifold import component_einstein_A, line_strength, lower_components
    from driven_atom.atom.structure import component_energy
    from driven_atom.units import energy_to_wavenumber_cm, photon_energy_to_wavelength_nm

    structure = _structure(structure)
    if not isinstance(upto, int) or not lower < upto <= min(N_MAX, 100):
        raise InputError(f"`upto` must be an integer from {lower + 1} to 100 for lower level {lower} "
                         f"with `structure` = {structure!r}, got {upto!r}")
    I2 = _spin2(atom, structure)
    hyperfine = structure == "hyperfine"
    rows = []
    for n in range(lower + 1, upto + 1):
        uppers = [Component(n, l, j2, F2) for l in range(n) for j2 in (2 * l - 1, 2 * l + 1) if j2 >= 1
                  for F2 in (f_values(j2, I2) if hyperfine else [None])]
        found = []
        for up in uppers:
            e_up = component_energy(atom, up)
            for lo in lower_components(up, I2, hyperfine):
                if lo.n != lower:
                    continue
                omega = e_up - component_energy(atom, lo)
                vac = photon_energy_to_wavelength_nm(omega)
                found.append({"upper": up.label, "lower": lo.label, "vacuum_nm": vac, "air_nm": air_wavelength_nm(vac),
                              "energy_eV": omega * HARTREE_EV, "wavenumber_cm": energy_to_wavenumber_cm(omega),
                              "A_s": component_einstein_A(omega, line_strength(atom, up, lo, I2), up) / AU_TIME_S})
        rows += sorted(found, key=lambda r: r["vacuum_nm"])
    lowest = min(component_energy(atom, c) for c in
                 [Component(lower, l, j2, F2) for l in range(lower) for j2 in (2 * l - 1, 2 * l + 1) if j2 >= 1
                  for F2 in (f_values(j2, I2) if hyperfine else [None])])
    return {"lines": rows, "limit_vacuum_nm": photon_energy_to_wavelength_nm(-lowest)}


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

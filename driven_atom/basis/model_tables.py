"""A model atom as plain dicts in lab units: what ``driven-atom state|transition|lines|xsec
--species X`` print (the hydrogen-like tables are :mod:`driven_atom.atom.tables`).

Levels come from the model (:mod:`driven_atom.basis.model_levels`); where the data file holds the
measured level (NIST ASD) it is printed beside the model's with the deviation. Alkali p and d levels
also get their fine-structure components from the model's first-order spin–orbit term
(``fine``: energies, and for transitions from the ground state the two lines, e.g. Na D1 and D2).

>>> out = state("Na", "3p")
>>> round(out["excitation_eV"], 3), round(out["measured_excitation_eV"], 3)     # NIST ASD: 2.104 eV
(2.103, 2.104)
"""
from __future__ import annotations

import math

import numpy as np

from driven_atom.atom.states import State, parse_state
from driven_atom.errors import InputError
from driven_atom.units import AU_TIME_S, BOHR2_CM2, HARTREE_EV, MEGABARN_CM2


def _atom(species):
    from driven_atom.atom import Atom

    return species if hasattr(species, "model") else Atom.from_species(str(species))


def _level(label, name: str = "state") -> State:
    s = parse_state(label, name=name)
    if s.m is not None:
        raise InputError(f"`{name}` of a model atom is a level without m, got {s.label!r}; use {s.level.label!r}")
    return s


def _js(l: int) -> list[float]:
    return [0.5] if l == 0 else [l - 0.5, l + 0.5]


def state(species, label) -> dict:
    """One level of the model: ``energy_eV`` (from the limit), ``binding_eV``, ``excitation_eV``
    (above the ground state), the measured values and deviation where known, ``lifetime_s``,
    ``r_mean_au`` and, for l > 0, ``fine`` ({j: excitation_eV}) from the spin–orbit term."""
    from driven_atom.basis import model_levels as ml

    atom = _atom(species)
    s = _level(label)
    if ml.is_core(atom, s):
        raise InputError(f"`state` {s.label!r} is a core shell of the {atom.model.name} model (filled in the real "
                         f"atom); its ground state is {atom.model.ground.label!r}")
    e = ml.energy(atom, s)
    e0 = ml.energy(atom, atom.model.ground)
    out = {"species": atom.species, "label": s.label, "energy_eV": e * HARTREE_EV, "binding_eV": -e * HARTREE_EV,
           "excitation_eV": (e - e0) * HARTREE_EV, "lifetime_s": _finite(ml.lifetime(atom, s) * AU_TIME_S),
           "r_mean_au": ml.expectation_r(atom, s, 1), "model": atom.model.source}
    measured = ml.measured_energy(atom, s)
    if measured is not None:
        out["measured_binding_eV"] = -measured * HARTREE_EV
        out["measured_excitation_eV"] = (measured + atom.model.ip_measured) * HARTREE_EV
        out["deviation_eV"] = (e - measured) * HARTREE_EV
    if s.l > 0 and atom.l_dependent:
        out["fine"] = {f"{j:g}": (ml.fine_level(atom, s, j) - e0) * HARTREE_EV for j in _js(s.l)}
    return out


def _finite(value):
    return value if value is not None and math.isfinite(value) else None


def transition(species, state_a, state_b) -> dict:
    """Transition between two levels of the model (either order): ``energy_eV``, ``vacuum_nm``,
    ``radial_dipole_au``, ``f_absorption``, ``A_s``, the measured line where known and, for
    alkali lines with a p, d, ... level, ``components`` [{j_upper, j_lower, vacuum_nm, A_s}]."""
    from driven_atom.atom.levels import air_wavelength_nm
    from driven_atom.basis import model_levels as ml
    from driven_atom.units import photon_energy_to_wavelength_nm

    atom = _atom(species)
    a, b = _level(state_a, "A"), _level(state_b, "B")
    for s in (a, b):
        if ml.is_core(atom, s):
            raise InputError(f"state {s.label!r} is a core shell of the {atom.model.name} model (filled in the real atom)")
    upper, lower = (a, b) if ml.energy(atom, a) >= ml.energy(atom, b) else (b, a)
    omega = ml.energy(atom, upper) - ml.energy(atom, lower)
    vacuum = photon_energy_to_wavelength_nm(omega) if omega > 0 else None
    out = {"species": atom.species, "upper": upper.label, "lower": lower.label, "energy_eV": omega * HARTREE_EV,
           "vacuum_nm": vacuum, "air_nm": None if vacuum is None else air_wavelength_nm(vacuum),
           "radial_dipole_au": ml.radial_dipole(atom, upper, lower),
           "f_absorption": ml.oscillator_strength(atom, lower, upper),
           "A_s": ml.einstein_a(atom, upper, lower) / AU_TIME_S}
    mu_, ml_ = ml.measured_energy(atom, upper), ml.measured_energy(atom, lower)
    if mu_ is not None and ml_ is not None and mu_ > ml_:
        out["measured_vacuum_nm"] = photon_energy_to_wavelength_nm(mu_ - ml_)
    if atom.l_dependent and out["f_absorption"] > 0 and (upper.l > 0 or lower.l > 0):
        out["components"] = _components(atom, upper, lower)
    return out


def _components(atom, upper: State, lower: State) -> list[dict]:
    """Fine-structure lines upper j → lower j′ (|Δj| ≤ 1): energies from the spin–orbit term, A from
    the level's A times (2j′+1)(2l_u+1){l′ j′ ½; j l 1}² (the line strengths of docs/physics.md,
    Edmonds 1957, eqs. 7.1.7–7.1.8)."""
    from driven_atom.atom.angular import wigner_6j
    from driven_atom.basis import model_levels as ml
    from driven_atom.units import photon_energy_to_wavelength_nm

    a_level = ml.einstein_a(atom, upper, lower)
    out = []
    for ju in _js(upper.l):
        for jl in _js(lower.l):
            if abs(ju - jl) > 1:
                continue
            weight = (2 * jl + 1) * (2 * upper.l + 1) * wigner_6j(lower.l, jl, 0.5, ju, upper.l, 1) ** 2
            if weight == 0:
                continue
            omega = ml.fine_level(atom, upper, ju) - ml.fine_level(atom, lower, jl)
            row = {"upper": f"{upper.label}{int(2 * ju)}/2", "lower": f"{lower.label}{int(2 * jl)}/2",
                   "vacuum_nm": photon_energy_to_wavelength_nm(omega), "A_s": a_level * weight / AU_TIME_S}
            mu_, ml_ = atom.model.measured_component(upper, ju), atom.model.measured_component(lower, jl)
            if (upper.n, upper.l) == (atom.model.ground.n, atom.model.ground.l):
                mu_ = 0.0
            if (lower.n, lower.l) == (atom.model.ground.n, atom.model.ground.l):
                ml_ = 0.0
            if mu_ is not None and ml_ is not None and mu_ > ml_:
                row["measured_vacuum_nm"] = photon_energy_to_wavelength_nm(mu_ - ml_)
            out.append(row)
    return out


def lines(species, upto: int | None = None) -> dict:
    """Lines from the ground level to every converged level with l ± 1 and n ≤ ``upto`` (default:
    the ground n + 3), with the series limit (the model's Iₚ)."""
    from driven_atom.basis import model_levels as ml
    from driven_atom.units import photon_energy_to_wavelength_nm

    atom = _atom(species)
    g = atom.model.ground
    top = g.n + 3 if upto is None else int(upto)
    if top < g.n or top > 30:
        raise InputError(f"`upto` must be from {g.n} to 30, got {upto!r}")
    rows = []
    for l in (g.l - 1, g.l + 1):
        if l < 0:
            continue
        for n in range(l + 1, top + 1):
            s = State(n, l)
            try:
                if ml.is_core(atom, s):
                    continue
            except InputError:
                break
            rows.append(transition(atom, s, g))
    rows.sort(key=lambda row: row["energy_eV"])
    ip = ml.ionization_potential(atom)
    return {"species": atom.species, "lines": rows, "limit_vacuum_nm": photon_energy_to_wavelength_nm(ip),
            "ionization_potential_eV": ip * HARTREE_EV, "measured_ionization_potential_eV": atom.model.ip_measured * HARTREE_EV}


def xsec(species, label, omega) -> dict:
    """m-averaged photoionisation cross section of a level of the model at photon energies ``omega``
    (hartree, a number or an array): ``sigma_cm2``, ``sigma_Mb``, ``photon_energy_eV``."""
    from driven_atom.basis import model_levels as ml

    atom = _atom(species)
    s = _level(label)
    if ml.is_core(atom, s):
        raise InputError(f"`state` {s.label!r} is a core shell of the {atom.model.name} model (filled in the real atom)")
    sigma = np.asarray(ml.cross_section(atom, s, omega)) * BOHR2_CM2
    if sigma.ndim == 0:
        return {"sigma_cm2": float(sigma), "sigma_Mb": float(sigma) / MEGABARN_CM2,
                "photon_energy_eV": float(omega) * HARTREE_EV}
    return {"sigma_cm2": sigma.tolist(), "sigma_Mb": (sigma / MEGABARN_CM2).tolist(),
            "photon_energy_eV": (np.asarray(omega) * HARTREE_EV).tolist()}

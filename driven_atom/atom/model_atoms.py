"""Single-active-electron (SAE) model atoms: the rare gases and the alkalis as one electron in a
screened, possibly l-dependent potential V_l(r) fitted to the atom's real levels.

The parameters, their sources and the measured levels sit in ``data/model_atoms.toml`` beside this
module (read once); nothing numeric is written here. Two published forms:

* Tong & Lin, J. Phys. B 38, 2593 (2005), eq. (2) (He, Ne, Ar, Kr, Xe; l-independent):
  V(r) = −[Z_c + a₁e^{−a₂r} + a₃ r e^{−a₄r} + a₅e^{−a₆r}]/r;
* Marinescu, Sadeghpour & Dalgarno, Phys. Rev. A 49, 982 (1994), eqs. (2)–(3) (Li, Na, K, Rb, Cs;
  l-dependent, with core polarisation): V_l(r) = −Z_l(r)/r − α_c/(2r⁴)·[1 − e^{−(r/r_c)⁶}],
  Z_l(r) = 1 + (Z − 1)e^{−a₁r} − r(a₃ + a₄r)e^{−a₂r}.

Both tend to −Z/r at the nucleus (Z the nuclear charge: the Numerov cusp rows of
:mod:`driven_atom.basis.radial_grid` use it) and to −Z_c/r far out (Z_c = 1: the charge the
electron leaves behind). Hydrogen-like atoms have no model: their V = −Z/r is the exact special case.

>>> ar = model_potential("Ar")
>>> ar.Z, ar.ground.label, ar.l_dependent
(18, '3p', False)
>>> round(float(ar.potential(1e-9, 1) * 1e-9), 4)          # -Z at the nucleus
-18.0
>>> round(float(ar.potential(60.0, 1) * 60.0), 6)          # -Z_c far out
-1.0
>>> model_potential("Na").l_dependent
True
"""
from __future__ import annotations

import functools
import hashlib
import json
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from driven_atom.atom.states import State, parse_state
from driven_atom.errors import InputError

DATA_FILE = Path(__file__).with_name("data") / "model_atoms.toml"
FORMS = ("tong-lin", "marinescu")
CM1_HARTREE = 4.556335252912e-6        # 1 cm^-1 in hartree: 100 h c / E_h (CODATA 2022; hc R_inf = E_h/2)


@dataclass(frozen=True)
class ModelPotential:
    """One species' SAE potential (atomic units) with its data.

    ``params`` is the flat tuple of the published parameters (Tong–Lin: a₁ … a₆; Marinescu: one
    row (a₁, a₂, a₃, a₄, r_c) per l = 0, 1, 2, ≥ 3, flattened); ``polarizability`` α_c of the core
    (Marinescu only). ``key`` identifies the potential (form, species and parameters) in job ids
    and basis caches.
    """

    species: str
    name: str
    form: str
    Z: int
    charge: float
    params: tuple
    polarizability: float
    ground: State
    mass_u: float
    ip_measured: float
    source: str
    asymptotic_C: float | None = None
    levels_measured: tuple = ()          # ((label, ((j, hartree above ground), ...)), ...)

    @property
    def l_dependent(self) -> bool:
        """Whether V depends on l (Marinescu's form does; Tong–Lin's does not)."""
        return self.form == "marinescu"

    @property
    def key(self) -> str:
        """The potential's identity: form, species and a digest of its parameters.

        >>> model_potential("Ar").key.startswith("tong-lin:Ar:")
        True
        """
        text = json.dumps([self.form, self.Z, self.charge, list(self.params), self.polarizability])
        return f"{self.form}:{self.species}:{hashlib.sha256(text.encode()).hexdigest()[:12]}"

    def _row(self, l: int) -> tuple:
        k = min(int(l), 3)
        return self.params[5 * k:5 * k + 5]

    def charge_function(self, r, l: int = 0) -> np.ndarray:
        """The effective charge Z(r) = −r V_l(r) without the polarisation term (Tong–Lin: the
        whole bracket; Marinescu: Z_l(r))."""
        r = np.asarray(r, dtype=float)
        if self.form == "tong-lin":
            a1, a2, a3, a4, a5, a6 = self.params
            return self.charge + a1 * np.exp(-a2 * r) + a3 * r * np.exp(-a4 * r) + a5 * np.exp(-a6 * r)
        a1, a2, a3, a4, _ = self._row(l)
        return 1.0 + (self.Z - 1) * np.exp(-a1 * r) - r * (a3 + a4 * r) * np.exp(-a2 * r)

    def potential(self, r, l: int = 0) -> np.ndarray:
        """V_l(r) (hartree) at radii ``r`` (bohr, > 0); the centrifugal term is not included."""
        r = np.asarray(r, dtype=float)
        v = -self.charge_function(r, l) / r
        if self.form == "marinescu" and self.polarizability:
            rc = self._row(l)[4]
            v = v - self.polarizability / (2 * r**4) * -np.expm1(-((r / rc) ** 6))
        return v

    def derivative(self, r, l: int = 0) -> np.ndarray:
        """dV_l/dr (hartree/bohr), analytic (the force of the Ehrenfest acceleration and the
        spin–orbit term)."""
        r = np.asarray(r, dtype=float)
        if self.form == "tong-lin":
            a1, a2, a3, a4, a5, a6 = self.params
            z = self.charge_function(r, l)
            dz = -a1 * a2 * np.exp(-a2 * r) + a3 * (1 - a4 * r) * np.exp(-a4 * r) - a5 * a6 * np.exp(-a6 * r)
            return z / r**2 - dz / r
        a1, a2, a3, a4, rc = self._row(l)
        z = self.charge_function(r, l)
        dz = -(self.Z - 1) * a1 * np.exp(-a1 * r) - (a3 + 2 * a4 * r - a2 * r * (a3 + a4 * r)) * np.exp(-a2 * r)
        out = z / r**2 - dz / r
        if self.polarizability:
            x6 = (r / rc) ** 6
            damp = -np.expm1(-x6)
            out = out + self.polarizability * (2 * damp / r**5 - 3 * x6 * np.exp(-x6) / r**5)
        return out

    def measured_level(self, state) -> float | None:
        """Measured energy of level (n, l) above the ground state (hartree; the (2j+1)-weighted
        centroid of its fine-structure components), None if the data file has none."""
        s = parse_state(state)
        if (s.n, s.l) == (self.ground.n, self.ground.l):
            return 0.0
        for label, parts in self.levels_measured:
            if label == State(s.n, s.l).label:
                weights = [2 * j + 1 for j, _ in parts]
                return sum(w * e for w, (_, e) in zip(weights, parts)) / sum(weights)
        return None

    def measured_component(self, state, j: float) -> float | None:
        """Measured energy of the fine-structure level (n, l, j) above the ground state (hartree)."""
        s = parse_state(state)
        for label, parts in self.levels_measured:
            if label == State(s.n, s.l).label:
                for jj, e in parts:
                    if jj == j:
                        return e
        return None


@functools.lru_cache(maxsize=1)
def _table() -> dict:
    with open(DATA_FILE, "rb") as f:
        return tomllib.load(f)


def species_names() -> list[str]:
    """The species of the data file, in its order.

    >>> species_names()[:5]
    ['He', 'Ne', 'Ar', 'Kr', 'Xe']
    """
    return list(_table())


@functools.lru_cache(maxsize=None)
def model_potential(species: str) -> ModelPotential:
    """The model potential of ``species`` ("Ar", "Na", ...), read from the data file."""
    table = _table()
    if species not in table:
        raise InputError(f"`species` must be one of {', '.join(table)}, got {str(species)[:40]!r}")
    d = table[species]
    form = d["form"]
    if form not in FORMS:
        raise InputError(f"model atom {species!r}: unknown form {form!r} in {DATA_FILE.name}")
    if form == "tong-lin":
        params = tuple(float(x) for x in d["params"])
        if len(params) != 6:
            raise InputError(f"model atom {species!r}: a tong-lin potential has 6 parameters")
    else:
        rows = d["params"]
        if len(rows) != 4 or any(len(row) != 5 for row in rows):
            raise InputError(f"model atom {species!r}: a marinescu potential has 4 rows of 5 parameters")
        params = tuple(float(x) for row in rows for x in row)
    from driven_atom.units import HARTREE_EV

    levels = tuple((label, tuple((float(j), float(e) * CM1_HARTREE) for j, e in parts))
                   for label, parts in d.get("levels_cm", {}).items())
    return ModelPotential(species=species, name=d["name"], form=form, Z=int(d["Z"]), charge=float(d["charge"]),
                          params=params, polarizability=float(d.get("polarizability", 0.0)),
                          ground=parse_state(d["ground"]), mass_u=float(d["mass_u"]),
                          ip_measured=float(d["ip_eV"]) / HARTREE_EV, source=d["source"],
                          asymptotic_C=d.get("asymptotic_C"), levels_measured=levels)


def spin_orbit_factor(l: int, j: float) -> float:
    """⟨L·S⟩ = [j(j+1) − l(l+1) − 3/4]/2 of a one-electron level (n l j).

    >>> spin_orbit_factor(1, 1.5), spin_orbit_factor(1, 0.5)
    (0.5, -1.0)
    """
    return (j * (j + 1) - l * (l + 1) - 0.75) / 2


def adk_coefficient(model: ModelPotential, ip: float | None = None) -> float | None:
    """C²_{n*l*} of the ADK rate from the real atom's asymptotic coefficient C_l:
    C²_{n*l*} = C_l²/κ^{2n*+1}, κ = √(2Iₚ), n* = Z_c/κ (Tong, Zhao & Lin, PRA 66, 033402 (2002),
    their eq. (2) against Ammosov, Delone & Krainov 1986); None if the data file gives no C_l.

    >>> round(adk_coefficient(model_potential("Ar")), 3)
    4.826
    """
    if model.asymptotic_C is None:
        return None
    ip = model.ip_measured if ip is None else ip
    kappa = math.sqrt(2 * ip)
    n_star = model.charge / kappa
    return model.asymptotic_C**2 / kappa ** (2 * n_star + 1)

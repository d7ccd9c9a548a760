"""The atom as data: nuclear charge Z and nuclear mass, and the reduced mass they imply.

Nuclear masses in electron masses. H, D, T, He-3 and He-4 nuclei are the CODATA 2022 mass ratios
(proton, deuteron, triton, helion, alpha to electron). Heavier nuclei are AME2020 atomic masses
(Wang et al., Chinese Phys. C 45, 030003 (2021)) minus Z electron masses; the electrons' binding
energy (< 4 keV up to Ne) changes the reduced mass by < 1e-12 relative and is neglected.

>>> Atom.from_name("He+").Z
2
>>> round(Atom(1, 1836.15267343).reduced_mass, 9)
0.999455679

A single-active-electron model atom (:mod:`driven_atom.atom.model_atoms`) is the same dataclass with
a ``model``: Z is then its nuclear charge and V_l(r) the model's screened potential.

>>> Atom.from_species("Ar").Z, Atom.from_species("Ar").species
(18, 'Ar')
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

from driven_atom.errors import InputError
from driven_atom.units import ATOMIC_MASS_UNIT_ME, to_au

# name -> (Z, nuclear mass in electron masses)
_CODATA_NUCLEI = {           # CODATA 2022 mass ratios (as in scipy.constants; a test compares)
    "H": (1, 1836.152673426),    # proton
    "D": (1, 3670.482967655),    # deuteron
    "T": (1, 5496.92153551),     # triton
    "He3": (2, 5495.88527984),   # helion
    "He": (2, 7294.29954171),    # alpha particle
}
# AME2020 atomic masses in u (Wang et al. 2021).
_AME2020_ATOMIC_MASS_U = {
    "Li6": (3, 6.0151228874),
    "Li": (3, 7.0160034366),
    "Be": (4, 9.012183065),
    "B10": (5, 10.01293695),
    "B": (5, 11.00930536),
    "C": (6, 12.0),
    "C13": (6, 13.00335483507),
    "N": (7, 14.00307400443),
    "O": (8, 15.99491461957),
    "F": (9, 18.99840316273),
    "Ne": (10, 19.9924401762),
}
NUCLEI: dict[str, tuple[int, float]] = dict(_CODATA_NUCLEI)
NUCLEI.update({name: (Z, m * ATOMIC_MASS_UNIT_ME - Z) for name, (Z, m) in _AME2020_ATOMIC_MASS_U.items()})
NUCLEI["infinite"] = (0, math.inf)   # Z is then taken from the config
# one-electron ions by name: "He+", "Li2+", ... (most abundant isotope)
_ION_CHARGE = {"He+": "He", "Li2+": "Li", "Be3+": "Be", "B4+": "B", "C5+": "C", "N6+": "N",
               "O7+": "O", "F8+": "F", "Ne9+": "Ne"}
Z_MAX = 118


@dataclass(frozen=True)
class Atom:
    """A one-electron atom or ion: nuclear charge ``Z`` and nuclear mass in electron masses.

    The nuclear mass enters only through the reduced mass mu = M/(1 + M) (electron masses);
    ``nuclear_mass = inf`` is the clamped nucleus (mu = 1).
    """

    Z: int
    nuclear_mass: float = math.inf
    model: object = field(default=None, repr=False)   # a model_atoms.ModelPotential, or None (V = -Z/r)

    def __repr__(self) -> str:
        base = f"Atom(Z={self.Z}, nuclear_mass={self.nuclear_mass!r}"
        return base + (")" if self.model is None else f", species={self.model.species!r})")

    def __post_init__(self):
        if isinstance(self.Z, bool) or not isinstance(self.Z, int) or not 1 <= self.Z <= Z_MAX:
            raise InputError(f"`Z` must be an integer from 1 to {Z_MAX}, got {self.Z!r}")
        if not (self.nuclear_mass > 0):
            raise InputError(f"`nucleus` mass must be > 0 electron masses, got {self.nuclear_mass!r}")

    @property
    def species(self) -> str | None:
        """The model atom's species ("Ar"), None for a hydrogen-like atom."""
        return None if self.model is None else self.model.species

    @property
    def hydrogenic(self) -> bool:
        """True for V = −Z/r (no model potential)."""
        return self.model is None

    @property
    def asymptotic_charge(self) -> float:
        """The charge the electron sees far out: Z, or the model ion's charge Z_c."""
        return float(self.Z) if self.model is None else self.model.charge

    @property
    def l_dependent(self) -> bool:
        """Whether the potential depends on l (an l-dependent model such as the alkalis')."""
        return self.model is not None and self.model.l_dependent

    def potential(self, r, l: int = 0):
        """V_l(r) in hartree at radii ``r`` (bohr): −Z/r, or the model's screened potential."""
        if self.model is None:
            return -self.Z / r
        return self.model.potential(r, l)

    def potential_derivative(self, r, l: int = 0):
        """dV_l/dr (hartree/bohr): Z/r², or the model's."""
        if self.model is None:
            return self.Z / r**2
        return self.model.derivative(r, l)

    @classmethod
    def from_species(cls, species: str) -> "Atom":
        """The model atom of ``species`` ("He", "Ne", "Ar", "Kr", "Xe", "Li", "Na", "K", "Rb", "Cs"),
        with the mass of its most abundant isotope (the electron moves relative to the ion)."""
        from driven_atom.atom.model_atoms import model_potential

        model = model_potential(species)
        return cls(model.Z, model.mass_u * ATOMIC_MASS_UNIT_ME - model.Z, model)

    @property
    def reduced_mass(self) -> float:
        """mu = M/(1 + M) in electron masses."""
        M = self.nuclear_mass
        return 1.0 if math.isinf(M) else M / (1.0 + M)

    @property
    def ionization_potential(self) -> float:
        """I_p of the ground state (hartree): Z²μ/2, or the measured I_p of a model atom (NIST ASD,
        from the data file; the model's own value: :mod:`driven_atom.basis.model_levels`)."""
        if self.model is not None:
            return self.model.ip_measured
        return 0.5 * self.Z**2 * self.reduced_mass

    @classmethod
    def from_name(cls, name: str, Z: int | None = None) -> "Atom":
        """Build from a nucleus name ("H", "D", "He3", "Li", "infinite"), an ion name ("He+"),
        or a mass with units ("1.00728 u"); ``Z`` is required for "infinite" and a bare mass,
        and must agree with a named nucleus.

        >>> Atom.from_name("D").nuclear_mass > Atom.from_name("H").nuclear_mass
        True
        >>> Atom.from_name("infinite", Z=3)
        Atom(Z=3, nuclear_mass=inf)
        """
        key = _ION_CHARGE.get(name, name)
        if key in NUCLEI:
            Zn, mass = NUCLEI[key]
            if key == "infinite":
                if Z is None:
                    raise InputError("`Z` is required with nucleus = \"infinite\"")
                return cls(Z, math.inf)
            if Z is not None and Z != Zn:
                raise InputError(f"`nucleus` {name!r} has Z = {Zn}, but `Z` = {Z}; "
                                 f"drop one of them or use nucleus = \"infinite\" or a mass")
            return cls(Zn, mass)
        try:
            mass = to_au(name, "mass", name="nucleus")
        except InputError:
            known = ", ".join(sorted(NUCLEI)) + ", " + ", ".join(_ION_CHARGE)
            raise InputError(f"`nucleus` must be one of {known} or a mass like \"1.00728 u\", "
                             f"got {name!r}") from None
        if Z is None:
            raise InputError("`Z` is required when `nucleus` is given as a mass")
        return cls(Z, mass)

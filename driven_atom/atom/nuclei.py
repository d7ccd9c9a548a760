"""Nuclear data beyond the mass: spin I, magnetic moment mu_I and rms charge radius r_N.

One table, the source beside each value. Magnetic moments in nuclear magnetons mu_N = e hbar/(2 m_p)
(bare nuclei, not shielded); radii in femtometres. The level structure uses the spin and moment
for the hyperfine structure and the radius for the finite-size shift of s levels
(:mod:`driven_atom.atom.structure`). A nucleus without an entry (a mass given as a number, an
infinitely heavy nucleus, the heavier ions) has no hyperfine data; it is treated as a point charge.

>>> nuclear_data_of("D").spin, nuclear_data_of("D").magnetic_moment
(1.0, 0.8574382335)
"""
from __future__ import annotations

from dataclasses import dataclass

from driven_atom.atom.species import NUCLEI
from driven_atom.errors import InputError


@dataclass(frozen=True)
class NuclearData:
    """Spin ``spin`` (I), magnetic moment ``magnetic_moment`` (mu_I / mu_N), rms charge radius
    ``charge_radius_fm``; ``name`` is the nucleus name of :data:`driven_atom.atom.species.NUCLEI`."""

    name: str
    spin: float
    magnetic_moment: float
    charge_radius_fm: float

    @property
    def g_factor(self) -> float:
        """g_I = mu_I/(I mu_N) (0 for a spinless nucleus)."""
        return self.magnetic_moment / self.spin if self.spin else 0.0


# name: (I, mu_I / mu_N, r_N / fm)
_TABLE = {
    "H": (0.5, 2.79284734463,      # CODATA 2022 (Mohr et al., RMP 97, 025002 (2025)): mu_p / mu_N
          0.84075),                # CODATA 2022: proton rms charge radius
    "D": (1.0, 0.8574382335,       # CODATA 2022: mu_d / mu_N
          2.12778),                # CODATA 2022: deuteron rms charge radius
    "T": (0.5, 2.978962465,        # CODATA 2022: mu_t / mu_N
          1.7591),                 # Angeli & Marinova, ADNDT 99, 69 (2013) (from memory)
    "He3": (0.5, -2.1276253498,    # CODATA 2022: mu_h / mu_N (helion, unshielded)
            1.9661),               # Angeli & Marinova, ADNDT 99, 69 (2013) (from memory)
    "He": (0.0, 0.0,               # alpha particle: spin 0
           1.6785),                # CODATA 2022: alpha particle rms charge radius
}
NUCLEAR_DATA = {name: NuclearData(name, *values) for name, values in _TABLE.items()}


def nuclear_data_of(name: str) -> NuclearData:
    """The entry of nucleus ``name`` (``InputError`` naming ``nucleus`` if there is none)."""
    if name not in NUCLEAR_DATA:
        raise InputError(f"`nucleus` {name!r} has no spin and magnetic moment in the table "
                         f"(known: {', '.join(NUCLEAR_DATA)})")
    return NUCLEAR_DATA[name]


def nuclear_data(atom) -> NuclearData | None:
    """The entry of the nucleus of ``atom`` (matched by Z and mass to a named nucleus), or None.

    >>> from driven_atom.atom import Atom
    >>> nuclear_data(Atom.from_name("He3")).spin, nuclear_data(Atom(1)) is None
    (0.5, True)
    """
    for name, data in NUCLEAR_DATA.items():
        Z, mass = NUCLEI[name]
        if atom.Z == Z and atom.nuclear_mass == mass:
            return data
    return None

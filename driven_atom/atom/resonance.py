"""The dipole-allowed lines nearest to a laser: one- and two-photon transitions from a given state.

For a photon energy ω and an initial state (n₀ l₀), the candidates are every upper level (n l) with
E_nl > E_n₀l₀ and

* one photon: l = l₀ ± 1 (electric dipole);
* two photons: l = l₀ or l₀ ± 2 (two dipole steps; same parity),

and the detuning of each is Δ = kω − (E_nl − E_n₀l₀) for k photons (positive: the laser is blue of
the line). Levels of one energy (the Bohr atom's n s, n d, ...) form one line: their ``uppers``
are driven together. The line energies come from one function, :func:`level_energy`, so a model
with fine structure or a model atom changes that function (or passes its own as ``energies``) and
nothing else. Detunings are given as the laser-frequency offset Δ/2π in GHz and as the offset of
the laser wavelength from the one that would hit the line (nm, negative: the laser is blue).

>>> from driven_atom.atom import Atom, State
>>> lines = nearest_lines(Atom.from_name("H"), State(1, 0, 0), 0.0)
>>> lines[1] is None and lines[2] is None
True
>>> H = Atom.from_name("H")
>>> one = nearest_lines(H, State(1, 0, 0), level_energy(H, State(2, 1)) - level_energy(H, State(1, 0)))[1]
>>> one.label, abs(one.detuning_GHz) < 1e-6
('1s-2p', True)
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from driven_atom.atom.levels import energy
from driven_atom.atom.states import State
from driven_atom.errors import InputError
from driven_atom.units import AU_TIME_S, HARTREE_EV, photon_energy_to_wavelength_nm

N_SEARCH = 60                 # upper levels searched: n up to this (and at least n0 + 20)


def level_energy(atom, state) -> float:
    """Energy (hartree) of the level ``state`` (n, l) of ``atom``: here the Bohr level
    −Z²μ/(2n²) of :func:`driven_atom.atom.levels.energy`; the one place the resonance search and the
    lab estimate take level energies from.

    >>> from driven_atom.atom import Atom
    >>> level_energy(Atom(1), State(2, 1))
    -0.125
    """
    return float(energy(atom, state.n))


@dataclass(frozen=True)
class Line:
    """A k-photon line from ``lower`` to the levels ``uppers`` (one energy), and the detuning of the
    laser from it (atomic units inside; GHz and nm for the lab)."""

    photons: int
    lower: State
    uppers: tuple
    line_energy: float            # E_upper − E_lower (hartree)
    photon_energy: float          # the laser's ω (hartree)
    j: float | None = None        # the upper fine-structure level j, for a line resolved in j

    @property
    def detuning(self) -> float:
        """kω − (E_u − E_l) in hartree (= angular frequency in a.u.); > 0: laser blue of the line."""
        return self.photons * self.photon_energy - self.line_energy

    @property
    def detuning_GHz(self) -> float:
        """Δ/2π in GHz (of the k-photon energy; for two photons it is twice the laser's offset)."""
        return self.detuning / AU_TIME_S / (2 * math.pi) / 1e9

    @property
    def resonant_wavelength_nm(self) -> float:
        """Vacuum wavelength of the laser that hits the line: 2πc k/(E_u − E_l)."""
        return photon_energy_to_wavelength_nm(self.line_energy / self.photons)

    @property
    def detuning_nm(self) -> float:
        """Laser wavelength minus :attr:`resonant_wavelength_nm` (nm); < 0: laser blue of the line."""
        return photon_energy_to_wavelength_nm(self.photon_energy) - self.resonant_wavelength_nm

    @property
    def label(self) -> str:
        """"1s-2p", "1s-3s/3d" (levels of one energy joined by "/"), "3s-3p3/2" (one j)."""
        j = "" if self.j is None else f"{int(2 * self.j)}/2"
        return f"{self.lower.level.label}-{'/'.join(s.label for s in self.uppers)}{j}"

    def as_dict(self) -> dict:
        return {"line": self.label, "photons": self.photons, "line_energy_eV": self.line_energy * HARTREE_EV,
                "resonant_wavelength_nm": self.resonant_wavelength_nm, "detuning_GHz": self.detuning_GHz,
                "detuning_nm": self.detuning_nm}


def allowed_l(l0: int, photons: int) -> tuple[int, ...]:
    """Orbital quantum numbers reached from l₀ by ``photons`` (1 or 2) dipole steps.

    >>> allowed_l(0, 1), allowed_l(1, 2)
    ((1,), (1, 3))
    """
    if photons == 1:
        return tuple(l for l in (l0 - 1, l0 + 1) if l >= 0)
    if photons == 2:
        return tuple(sorted({l for l in (l0 - 2, l0, l0 + 2) if l >= 0}))
    raise InputError(f"`photons` must be 1 or 2, got {photons!r}")


def candidate_lines(atom, state, photon_energy: float, photons: int, *, n_max: int | None = None,
                    energies=None) -> list[Line]:
    """Every ``photons``-photon line from ``state`` to a level above it with n ≤ ``n_max``
    (default: max(N_SEARCH, n₀ + 20)), levels of one energy grouped into one line."""
    energies = level_energy if energies is None else energies
    lower = State(state.n, state.l, state.m)
    e_low = energies(atom, State(state.n, state.l))
    top = max(N_SEARCH, state.n + 20) if n_max is None else int(n_max)
    groups: dict[float, list] = {}
    for n in range(1, top + 1):
        for l in allowed_l(state.l, photons):
            if l >= n or (n, l) == (state.n, state.l):
                continue
            upper = State(n, l)
            e_up = energies(atom, upper)
            if e_up <= e_low:
                continue
            key = next((e for e in groups if math.isclose(e, e_up, rel_tol=1e-13, abs_tol=1e-15)), e_up)
            groups.setdefault(key, []).append(upper)
    return [Line(photons, lower, tuple(sorted(ups, key=lambda s: s.l)), e - e_low, float(photon_energy))
            for e, ups in groups.items()]


def nearest_lines(atom, state, photon_energy: float, *, n_max: int | None = None, energies=None) -> dict:
    """{1: the one-photon line, 2: the two-photon line} nearest to the laser (smallest |Δ|), each a
    :class:`Line` or None when there is none (no photon, or no level above). ``energies(atom,
    State(n, l))`` replaces :func:`level_energy` (e.g. for fine structure)."""
    out = {}
    for photons in (1, 2):
        lines = candidate_lines(atom, state, photon_energy, photons, n_max=n_max, energies=energies) \
            if photon_energy > 0 else []
        out[photons] = min(lines, key=lambda ln: abs(ln.detuning)) if lines else None
    return out


__all__ = ["Line", "level_energy", "allowed_l", "candidate_lines", "nearest_lines"]

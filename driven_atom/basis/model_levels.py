"""Structure of a single-active-electron model atom from its converged eigenstates: levels, radial
dipoles, f-values, Einstein A, lifetimes, photoionisation cross sections and the spin–orbit
splitting (what :mod:`driven_atom.atom` gives in closed form for hydrogen).

Everything comes from one *reference grid* (:data:`REFERENCE`): the stretched grid of
:mod:`driven_atom.basis.radial_grid`, 0.001 bohr at the nucleus (the cores of Xe and Cs have
Z = 54, 55), 0.2 bohr beyond ~5 bohr, out to 200 bohr, about 1100 points; every partial wave is
diagonalised once per species (cached) in ~0.15 s. Bound states keep the labels of their
spectroscopic n = l + 1 + (index in l): the potentials bind the core shells below the valence
state (Ar 1s 2s 2p 3s under 3p). A state counts as converged when less than 1e-8 of its norm lies
in the outer quarter of the box; higher Rydberg states are refused by name.

Formulas (docs/physics.md, "Atom"): with R = ∫ u_a r u_b dr and l_> = max(l_a, l_b),
f(lower → upper) = (2/3) ω l_>/(2l_lower + 1) R², A(upper → lower) = (4/3) α³ ω³ l_>/(2l_upper + 1) R²
(Bethe & Salpeter 1957, §59–63); σ(ω) = (4π²αω/3)/(2l + 1) Σ_{l′ = l ± 1} l_> |∫u_{El′} r u_{nl} dr|²
with energy-normalised continuum functions (:func:`driven_atom.basis.radial_grid.continuum_state`).
Decay and absorption skip the core: a state below the model's ground state is occupied in the real
atom (Pauli), so no transition ends there.

>>> from driven_atom.atom import Atom
>>> na = Atom.from_species("Na")
>>> round(-energy(na, "3s") * 27.211386, 3)         # NIST ASD: 5.139 eV
5.139
"""
from __future__ import annotations

import functools
import math

import numpy as np

from driven_atom.atom.states import State, parse_state
from driven_atom.errors import InputError

REFERENCE = {"r_max": 200.0, "dr_min": 0.001, "dr": 0.2, "r_stretch": 5.0}
OUTER_NORM = 1e-8                   # a converged bound state has less than this beyond 3/4 of the box


@functools.lru_cache(maxsize=None)
def reference_grid():
    """The stretched reference grid of :data:`REFERENCE`."""
    from driven_atom.basis.radial_grid import stretched_grid

    return stretched_grid(REFERENCE["r_max"], REFERENCE["dr_min"], REFERENCE["dr"], REFERENCE["r_stretch"])


@functools.lru_cache(maxsize=256)
def bound_states(atom, l: int) -> tuple[np.ndarray, np.ndarray]:
    """Converged bound states of partial wave ``l`` on the reference grid: energies (hartree,
    ascending; index i is n = l + 1 + i) and vectors (columns, Σvᵢ² = 1)."""
    from driven_atom.basis.radial_grid import eigenstates

    grid = reference_grid()
    energies, vectors = eigenstates(grid, l, atom, e_max=0.0)
    outer = grid.r > 0.75 * grid.r_max
    good = np.sum(vectors[outer] ** 2, axis=0) < OUTER_NORM
    count = int(np.argmin(good)) if not good.all() else good.size
    return energies[:count], vectors[:, :count]


def _index(atom, state) -> tuple[State, int]:
    s = parse_state(state)
    energies, _ = bound_states(atom, s.l)
    i = s.n - s.l - 1
    if i >= energies.size:
        top = State(s.l + energies.size, s.l).label if energies.size else "none"
        raise InputError(f"state {s.level.label!r} of the {atom.model.name} model is beyond its reference box "
                         f"(highest converged {L_name(s.l)} state: {top})")
    return s, i


def L_name(l: int) -> str:
    from driven_atom.atom.states import L_LETTERS

    return L_LETTERS[l] if l < len(L_LETTERS) else f"l={l}"


def energy(atom, state) -> float:
    """Energy of level (n, l) of the model (hartree, < 0)."""
    s, i = _index(atom, state)
    return float(bound_states(atom, s.l)[0][i])


def vector(atom, state) -> np.ndarray:
    """Radial vector of level (n, l) on the reference grid (vᵢ ≈ √Δrᵢ u(rᵢ), first lobe positive)."""
    s, i = _index(atom, state)
    return bound_states(atom, s.l)[1][:, i]


def ground_state(atom) -> State:
    """The valence ground state of the model (the data file's ``ground``)."""
    return atom.model.ground


def ionization_potential(atom) -> float:
    """The model's Iₚ = −E(ground) (hartree)."""
    return -energy(atom, ground_state(atom))


def is_core(atom, state) -> bool:
    """Whether (n, l) lies below the valence ground state (a shell occupied in the real atom)."""
    return energy(atom, state) < energy(atom, ground_state(atom)) - 1e-12


def radial_dipole(atom, a, b) -> float:
    """R = ∫ u_a r u_b dr (bohr) of two levels of the model."""
    return float(np.sum(vector(atom, a) * reference_grid().r * vector(atom, b)))


def expectation_r(atom, state, power: int = 1) -> float:
    """⟨rᵏ⟩ of level (n, l) (bohr^k)."""
    v = vector(atom, state)
    return float(np.sum(v**2 * reference_grid().r ** power))


def _pair(atom, a, b) -> tuple[State, State, float, int]:
    sa, sb = parse_state(a).level, parse_state(b).level
    omega = energy(atom, sb) - energy(atom, sa)
    return sa, sb, omega, max(sa.l, sb.l)


def oscillator_strength(atom, lower, upper) -> float:
    """Absorption f-value lower → upper, level to level (0 unless l changes by one or if
    ``upper`` lies below ``lower``)."""
    lo, up, omega, l_big = _pair(atom, lower, upper)
    if abs(lo.l - up.l) != 1 or omega <= 0:
        return 0.0
    return 2.0 / 3.0 * omega * l_big / (2 * lo.l + 1) * radial_dipole(atom, lo, up) ** 2


def einstein_a(atom, upper, lower) -> float:
    """Einstein A upper → lower (a.u. of rate, summed over lower m); 0 into the core."""
    from driven_atom.units import ALPHA

    lo, up, omega, l_big = _pair(atom, lower, upper)
    if abs(lo.l - up.l) != 1 or omega <= 0 or is_core(atom, lo):
        return 0.0
    return 4.0 / 3.0 * ALPHA**3 * omega**3 * l_big / (2 * up.l + 1) * radial_dipole(atom, lo, up) ** 2


def lower_levels(atom, state) -> list[State]:
    """The levels an electric-dipole decay of ``state`` can reach (below it, l ± 1, not the core)."""
    s = parse_state(state).level
    e = energy(atom, s)
    out = []
    for l in (s.l - 1, s.l + 1):
        if l < 0:
            continue
        energies, _ = bound_states(atom, l)
        for i, e_low in enumerate(energies):
            low = State(l + 1 + i, l)
            if e_low < e and not is_core(atom, low):
                out.append(low)
    return out


def lifetime(atom, state) -> float:
    """Radiative lifetime (a.u. of time; inf for the ground state)."""
    total = sum(einstein_a(atom, state, low) for low in lower_levels(atom, state))
    return math.inf if total == 0 else 1.0 / total


def cross_section(atom, state, omega) -> np.ndarray | float:
    """m-averaged photoionisation cross section of level (n, l) at photon energies ``omega``
    (hartree; bohr²), module docstring; 0 below threshold."""
    from driven_atom.basis.radial_grid import continuum_state
    from driven_atom.units import ALPHA

    s = parse_state(state).level
    e0 = energy(atom, s)
    v0 = vector(atom, s)
    r = reference_grid().r
    scalar = np.ndim(omega) == 0
    omegas = np.atleast_1d(np.asarray(omega, dtype=float))
    out = np.zeros(omegas.size)
    for k, w in enumerate(omegas):
        e = e0 + w
        if e <= 0:
            continue
        total = 0.0
        for lp in (s.l - 1, s.l + 1):
            if lp < 0:
                continue
            total += max(s.l, lp) * float(np.sum(continuum_state(reference_grid(), lp, atom, e) * r * v0)) ** 2
        out[k] = 4 * math.pi**2 * ALPHA * w / 3 / (2 * s.l + 1) * total
    return float(out[0]) if scalar else out


def partial_dipoles(atom, state, omega) -> dict:
    """The radial matrix elements ∫u_{El′} r u_{nl} dr (bohr·hartree^−½) of each channel l′ = l ± 1
    at photon energies ``omega``: a Cooper minimum is the sign change of one of them."""
    from driven_atom.basis.radial_grid import continuum_state

    s = parse_state(state).level
    e0 = energy(atom, s)
    v0 = vector(atom, s)
    r = reference_grid().r
    omegas = np.atleast_1d(np.asarray(omega, dtype=float))
    out = {}
    for lp in (s.l - 1, s.l + 1):
        if lp >= 0:
            out[lp] = np.array([float(np.sum(continuum_state(reference_grid(), lp, atom, e0 + w) * r * v0))
                                if e0 + w > 0 else 0.0 for w in omegas])
    return out


def spin_orbit_constant(atom, state) -> float:
    """ζ = (α²/2)⟨(1/r) dV_l/dr⟩ of level (n, l) (hartree): E(j) = E + ζ⟨L·S⟩ in first order
    (the Pauli spin–orbit term of a central potential, Bethe & Salpeter 1957, §12; Condon &
    Shortley 1935); 0 for s levels."""
    from driven_atom.units import ALPHA

    s = parse_state(state).level
    if s.l == 0:
        return 0.0
    v = vector(atom, s)
    r = reference_grid().r
    return 0.5 * ALPHA**2 * float(np.sum(v**2 * atom.potential_derivative(r, s.l) / r))


def fine_level(atom, state, j: float) -> float:
    """Energy of the fine-structure level (n, l, j) (hartree): model energy + ζ⟨L·S⟩."""
    from driven_atom.atom.model_atoms import spin_orbit_factor

    s = parse_state(state).level
    if abs(j - s.l) != 0.5 or j < 0.5:
        raise InputError(f"`j` of a {L_name(s.l)} level must be {' or '.join(f'{x:g}' for x in _js(s.l))}, got {j!r}")
    return energy(atom, s) + spin_orbit_constant(atom, s) * spin_orbit_factor(s.l, j)


def _js(l: int) -> list[float]:
    return [0.5] if l == 0 else [l - 0.5, l + 0.5]


def measured_energy(atom, state) -> float | None:
    """Measured energy of level (n, l) relative to the ionisation limit (hartree; NIST ASD via the
    data file), None where the data file has none."""
    above = atom.model.measured_level(state)
    return None if above is None else above - atom.model.ip_measured

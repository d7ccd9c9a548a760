"""Operators on a set of fine- or hyperfine-structure sublevels |n l j [F] m>, and line strengths
of the components of a line.

Matrix elements of orbital operators (the dipole r_q) and of the spin projections (Zeeman) are
sums over the product expansion of each sublevel (:func:`driven_atom.atom.components.uncoupled`:
Clebsch-Gordan coefficients), with the orbital factors of :mod:`driven_atom.atom.dipoles`; line
strengths of whole components use the recoupling formula instead (Edmonds 1957, eqs. 7.1.7-7.1.8):

    S(n l j -> n' l' j') = (2j+1)(2j'+1) {l' j' 1/2; j l 1}^2 l_> R^2,
    S(j F -> j' F')      = (2F+1)(2F'+1) {j' F' I; F j 1}^2 S(j -> j'),

R the radial dipole. Summed over the m of both, |<b|r_q|a>|^2 gives S (a test checks both routes
against each other). Einstein A and f of a component (Bethe & Salpeter 1957, §59-63, with the
reduced mass of :mod:`driven_atom.atom.dipoles`):

    A = (4/3) alpha^3 omega^3 S / (2J_u + 1),     f = (2/3) mu omega S / (2J_l + 1)      (J = j or F).

Static fields along z (Bethe & Salpeter 1957, §45-47 and §51-54): Zeeman
H_B = mu_B B (g_L L_z + g_s S_z) - g_I mu_N B I_z (mu_B = 1/2, mu_N = (m_e/m_p)/2 in atomic units;
g-factors of :func:`driven_atom.atom.structure.lande_g`), Stark H_F = F z (the electron's charge -1).

>>> from driven_atom.atom import Atom
>>> from driven_atom.atom.components import parse_label
>>> lya = [line_strength(Atom(1), parse_label(p), parse_label("1s1/2")) for p in ("2p1/2", "2p3/2")]
>>> round(lya[1] / lya[0], 12)                    # Lyman-alpha doublet: 2 : 1
2.0
"""
from __future__ import annotations

import math

import numpy as np

from driven_atom.atom.components import Component, f_values, uncoupled
from driven_atom.atom.dipoles import angular_factor, radial_dipole
from driven_atom.errors import InputError
from driven_atom.units import ALPHA


def line_strength(atom, upper: Component, lower: Component, I2: int = 0) -> float:
    """S = sum over m of |<lower|r|upper>|^2 between two whole components (bohr^2); zero unless
    |l - l'| = 1, |j - j'| <= 1 (and |F - F'| <= 1, not 0 -> 0).

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.atom.components import parse_label
    >>> H = Atom.from_name("H")
    >>> s1 = line_strength(H, parse_label("3d3/2"), parse_label("2p1/2"))
    >>> s2 = line_strength(H, parse_label("3d3/2"), parse_label("2p3/2"))
    >>> round(s1 / (s1 + s2), 12)                                   # 5/6 of the 3d3/2 decay goes to 2p1/2
    0.833333333333
    """
    from driven_atom.atom.angular import wigner_6j

    if abs(upper.l - lower.l) != 1 or abs(upper.j2 - lower.j2) > 2:
        return 0.0
    if (upper.F2 is None) != (lower.F2 is None):
        raise InputError(f"line strength between {upper.label!r} and {lower.label!r}: give F for both or neither")
    R = radial_dipole(atom, upper.n, upper.l, lower.n, lower.l)
    six = wigner_6j(lower.l, lower.j2 / 2, 0.5, upper.j2 / 2, upper.l, 1)
    strength = (upper.j2 + 1) * (lower.j2 + 1) * six * six * max(upper.l, lower.l) * R * R
    if upper.F2 is not None:
        six = wigner_6j(lower.j2 / 2, lower.F2 / 2, I2 / 2, upper.F2 / 2, upper.j2 / 2, 1)
        strength *= (upper.F2 + 1) * (lower.F2 + 1) * six * six
    return strength


def degeneracy(component: Component) -> int:
    """2J + 1 of a whole component (J = F with hyperfine structure, else j)."""
    return (component.F2 if component.F2 is not None else component.j2) + 1


def component_einstein_A(omega: float, strength: float, upper: Component) -> float:
    """A = (4/3) alpha^3 omega^3 S/(2J_u + 1) in 1/(a.u. time)."""
    return 4.0 / 3.0 * ALPHA**3 * omega**3 * strength / degeneracy(upper)


def component_oscillator_strength(atom, omega: float, strength: float, lower: Component) -> float:
    """Absorption f = (2/3) mu omega S/(2J_l + 1)."""
    return 2.0 / 3.0 * atom.reduced_mass * omega * strength / degeneracy(lower)


def lower_components(upper: Component, I2: int, hyperfine: bool) -> list[Component]:
    """Every whole component with n' < n that the electric dipole connects to ``upper``."""
    out = []
    for n in range(1, upper.n):
        for l in (upper.l - 1, upper.l + 1):
            if not 0 <= l < n:
                continue
            for j2 in (2 * l - 1, 2 * l + 1):
                if j2 < 1 or abs(j2 - upper.j2) > 2:
                    continue
                if not hyperfine:
                    out.append(Component(n, l, j2))
                    continue
                out += [Component(n, l, j2, F2) for F2 in f_values(j2, I2)
                        if abs(F2 - upper.F2) <= 2 and not (F2 == 0 and upper.F2 == 0)]
    return out


def total_decay_rate(atom, upper: Component, I2: int = 0) -> float:
    """Sum of the component rates A(upper -> every lower component with n' < n), 1/(a.u. time),
    with the transition energies of the level structure (decays within one n are left out: their
    rates are below 1e-6 s^-1 in hydrogen).

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.atom.components import parse_label
    >>> from driven_atom.units import AU_TIME_S
    >>> round(total_decay_rate(Atom.from_name("H"), parse_label("2p3/2")) / AU_TIME_S / 1e8, 3)
    6.265
    """
    from driven_atom.atom.structure import component_energy

    whole = upper.whole
    top = component_energy(atom, whole)
    total = 0.0
    for lower in lower_components(whole, I2, whole.F2 is not None):
        omega = top - component_energy(atom, lower)
        total += component_einstein_A(omega, line_strength(atom, whole, lower, I2), whole)
    return total


# --- matrices over a list of m-resolved sublevels --------------------------------------------------
# A sublevel is a Component with m, or a Bohr State with m (no spin: its expansion is |l m> alone).
def _expansions(sublevels, I2):
    return [uncoupled(c, I2 if c.F2 is not None else 0) if isinstance(c, Component) else {(c.m, 0, 0): 1.0}
            for c in sublevels]


def whole_of(sublevel):
    """The whole component (or Bohr level) a sublevel belongs to."""
    return sublevel.whole if isinstance(sublevel, Component) else sublevel.level


def _total_rate(atom, whole, I2: int) -> float:
    if isinstance(whole, Component):
        return total_decay_rate(atom, whole, I2)
    from driven_atom.atom.dipoles import total_decay_rate as level_rate

    return level_rate(atom, whole)


def orbital_matrix(sublevels, I2: int, element) -> np.ndarray:
    """M[a, b] = <a| O |b> for an operator O acting on the orbital part only, given by
    ``element(bra_n, bra_l, bra_ml, ket_n, ket_l, ket_ml)``; spin and nuclear projections must agree."""
    expansions = _expansions(sublevels, I2)
    N = len(sublevels)
    out = np.zeros((N, N), dtype=complex)
    for a, (ca, ea) in enumerate(zip(sublevels, expansions)):
        for b, (cb, eb) in enumerate(zip(sublevels, expansions)):
            total = 0.0
            for (ml_a, ms_a, mi_a), xa in ea.items():
                for (ml_b, ms_b, mi_b), xb in eb.items():
                    if ms_a == ms_b and mi_a == mi_b:
                        value = element(ca.n, ca.l, ml_a, cb.n, cb.l, ml_b)
                        if value:
                            total += xa * xb * value
            out[a, b] = total
    return out


def dipole_matrices(atom, sublevels, I2: int = 0) -> np.ndarray:
    """``d[k, a, b] = <a| r_q |b>`` (bohr) with q = k - 1, like :class:`driven_atom.routes.levels.LevelModel`.

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.atom.components import sublevels
    >>> subs = sublevels("1s", "fine") + sublevels("2p3/2", "fine")
    >>> d = dipole_matrices(Atom(1), subs)
    >>> round(float(abs(d[1, 4, 1])) / 0.744935539, 6)      # <2p3/2 1/2|z|1s1/2 1/2> = sqrt(2/3) <2p0|z|1s>
    0.816497
    """
    radial = {}

    def element_for(q):
        def element(n1, l1, m1, n2, l2, m2):
            if abs(l1 - l2) != 1 or m1 != m2 + q:
                return 0.0
            key = (n1, l1, n2, l2)
            if key not in radial:
                radial[key] = radial_dipole(atom, n1, l1, n2, l2)
            return angular_factor(l1, m1, l2, m2, q) * radial[key]
        return element

    return np.real(np.stack([orbital_matrix(sublevels, I2, element_for(q)) for q in (-1, 0, 1)]))


def zeeman_matrix(atom, sublevels, I2: int, field: float) -> np.ndarray:
    """H_B for a magnetic field ``field`` (atomic units of flux density, along z), N x N (hartree).

    Diagonal in the products |l m_l>|s m_s>|I m_I>: mu_B B (g_L m_l + g_s m_s) - g_I mu_N B m_I.
    """
    from driven_atom.atom.nuclei import nuclear_data
    from driven_atom.atom.structure import ELECTRON_ANOMALY, PROTON_ELECTRON_MASS_RATIO

    M = atom.nuclear_mass
    g_l = 1.0 - (0.0 if math.isinf(M) else 1.0 / M)
    g_s = 2.0 * (1.0 + ELECTRON_ANOMALY)
    data = nuclear_data(atom)
    g_i = data.g_factor if data is not None else 0.0
    mu_b, mu_n = 0.5, 0.5 / PROTON_ELECTRON_MASS_RATIO
    expansions = _expansions(sublevels, I2)
    N = len(sublevels)
    out = np.zeros((N, N))
    for a, (ca, ea) in enumerate(zip(sublevels, expansions)):
        for b, (cb, eb) in enumerate(zip(sublevels, expansions)):
            if (ca.n, ca.l) != (cb.n, cb.l):
                continue
            total = 0.0
            for key, xa in ea.items():
                xb = eb.get(key)
                if xb is not None:
                    ml, ms2, mi2 = key
                    total += xa * xb * (mu_b * (g_l * ml + g_s * ms2 / 2) - g_i * mu_n * mi2 / 2)
            out[a, b] = total * field
    return out


def stark_matrix(atom, sublevels, I2: int, field: float) -> np.ndarray:
    """H_F = F z for a static field ``field`` (atomic units, along z), N x N (hartree)."""
    return field * dipole_matrices(atom, sublevels, I2)[1]


def decay_operators(atom, sublevels, I2: int, energies) -> tuple[list, np.ndarray]:
    """Spontaneous decay inside the model and out of it.

    Returns (operators, outside): one Lindblad operator per pair of whole components (U above L,
    n_U > n_L) and polarisation q, sqrt((4/3) alpha^3 omega_UL^3) sum <l|r_q|u> |l><u| over the
    model's sublevels u of U and l of L (spontaneous emission keeps the coherences between
    sublevels of one component), and per sublevel the rate ``outside[u]`` to components not in the
    model (its total rate minus the channels inside). ``energies`` are the sublevels' field-free
    energies.
    """
    dip = dipole_matrices(atom, sublevels, I2)
    groups: dict = {}
    for i, c in enumerate(sublevels):
        groups.setdefault(whole_of(c), []).append(i)
    operators = []
    inside = np.zeros(len(sublevels))
    for U, us in groups.items():
        for L, ls in groups.items():
            if L.n >= U.n:
                continue
            omega = float(energies[us[0]] - energies[ls[0]])
            if omega <= 0:
                continue
            pref = math.sqrt(4.0 / 3.0 * ALPHA**3 * omega**3)
            for k in range(3):
                op = np.zeros((len(sublevels),) * 2)
                for u in us:
                    for l in ls:
                        op[l, u] = pref * dip[k, l, u]
                if np.any(op):
                    operators.append(op)
                    inside += np.sum(op * op, axis=0)
    outside = np.zeros(len(sublevels))
    for U, us in groups.items():
        total = _total_rate(atom, U, I2)
        for u in us:
            outside[u] = max(total - inside[u], 0.0) if total - inside[u] > 1e-9 * total else 0.0
    return operators, outside

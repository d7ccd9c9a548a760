"""Dipole physics of a hydrogenic atom: radial integrals, angular factors, f-values, A, lifetimes.

Radial integrals int R_n1l1 R_n2l2 r^(2+k) dr are evaluated EXACTLY: both radial functions are
e^(-r/n) times polynomials with rational coefficients, so the integral is a rational number times
the two normalisation constants (term by term int r^p e^(-b r) dr = p!/b^(p+1)). The sum is done
in Python integers (no cancellation error at any n) and rounded once; results are cached.
This is equivalent to Gordon's closed form (Gordon, Ann. Phys. 394, 1031 (1929)).

Conventions (Bethe & Salpeter 1957, §59-63; Condon & Shortley 1935):
- r_q = r C^1_q, spherical components r_0 = z, r_(+-1) = -+(x +- i y)/sqrt 2;
- <l1 m1|C^1_q|l2 m2> = s sqrt(l_>/(2 l1 + 1)) <l2 m2; 1 q|l1 m1>, s = +1 if l1 = l2 + 1, -1 if
  l1 = l2 - 1 (Wigner-Eckart with <l1||C^1||l2>; equals
  (-1)^m1 sqrt((2l1+1)(2l2+1)) (l1 1 l2; 0 0 0)(l1 1 l2; -m1 q m2));
- absorption oscillator strength (level to level, m-averaged), with the reduced mass so that f is
  the same for every isotope and the Thomas-Reiche-Kuhn sum is exactly 1:
      f = (2/3) mu omega l_>/(2 l_lower + 1) |R|^2;
- Einstein A (level to level, summed over lower m): A = (4/3) alpha^3 omega^3 l_>/(2 l_u + 1) |R|^2.

>>> from driven_atom.atom import Atom, State
>>> round(radial_dipole(Atom(1), 2, 1, 1, 0), 10)   # 2^7 sqrt6 / 3^5
1.290266202
"""
from __future__ import annotations

import math
import operator
from functools import lru_cache

from driven_atom.atom.levels import energy
from driven_atom.atom.states import State, parse_state
from driven_atom.errors import InputError
from driven_atom.units import ALPHA


def _check_level(n, l, name) -> tuple[int, int]:
    try:
        n_int, l_int = operator.index(n), operator.index(l)
    except TypeError:
        n_int, l_int = 0, 0
    if not 0 <= l_int < n_int:
        raise InputError(f"`{name}` needs integers 0 <= l < n, got n = {n!r}, l = {l!r}")
    return n_int, l_int


def _coefficients(n: int, l: int) -> tuple[list[int], int]:
    """Integers A_j and D with R_nl (Z = mu = 1) = N e^(-r/n) sum_j (A_j / D) r^(l+j)."""
    nr = n - l - 1
    coeffs = [(-1) ** j * math.comb(n + l, nr - j) * 2 ** (l + j)
              * (math.factorial(nr) // math.factorial(j)) * n ** (n - 1 - l - j) for j in range(nr + 1)]
    return coeffs, math.factorial(nr) * n ** (n - 1)


MAX_N_EXACT = 150        # exact rational integrals grow as n^4 in cost: ~0.1 s at n = 150, 4 s at 300
MAX_N_LIFETIME = 100     # a lifetime sums over every lower level: ~1 s at n = 100


@lru_cache(maxsize=4096)
def _radial_integral_scaled(n1: int, l1: int, n2: int, l2: int, k: int) -> float:
    """int R_n1l1 R_n2l2 r^(2+k) dr for Z = mu = 1, exact rational arithmetic, one rounding."""
    if max(n1, n2) > MAX_N_EXACT:
        raise InputError(f"exact radial integrals are computed for n <= {MAX_N_EXACT} (their cost grows as "
                         f"n^4), got n = {max(n1, n2)}")
    p0 = l1 + l2 + 2 + k
    if p0 < 0:
        raise InputError(f"the radial integral with r^{2 + k} diverges for l1 = {l1}, l2 = {l2}")
    a, d1 = _coefficients(n1, l1)
    b, d2 = _coefficients(n2, l2)
    s, prod = n1 + n2, n1 * n2
    p_max = n1 + n2 + k
    # M_p = p! (n1 n2)^(p+1) (n1+n2)^(p_max - p): the moment int r^p e^(-r s/prod) dr times s^(p_max+1)
    moments = []   # index p - p0
    fact = math.factorial(p0)
    for p in range(p0, p_max + 1):
        if p > p0:
            fact *= p
        moments.append(fact * prod ** (p + 1) * s ** (p_max - p))
    total = sum(ai * sum(map(operator.mul, b, moments[i:i + len(b)])) for i, ai in enumerate(a))
    if total == 0:
        return 0.0
    # I^2 = N1^2 N2^2 (total / (d1 d2 s^(p_max+1)))^2 with N^2 = 4 (n-l-1)! / (n^4 (n+l)!)
    num = 16 * math.factorial(n1 - l1 - 1) * math.factorial(n2 - l2 - 1) * total * total
    den = (n1**4 * n2**4 * math.factorial(n1 + l1) * math.factorial(n2 + l2)
           * (d1 * d2 * s ** (p_max + 1)) ** 2)
    return math.sqrt(num / den) if total > 0 else -math.sqrt(num / den)


def radial_integral(atom, n1: int, l1: int, n2: int, l2: int, k: int = 1) -> float:
    """int R_n1l1 R_n2l2 r^(2+k) dr in bohr^k (exact to the last bit or two; scales (Z mu)^-k).

    >>> from driven_atom.atom import Atom
    >>> round(radial_integral(Atom(1), 2, 1, 2, 1, k=1), 12)   # <2p|r|2p> = 5
    5.0
    """
    n1, l1 = _check_level(n1, l1, "n1, l1")
    n2, l2 = _check_level(n2, l2, "n2, l2")
    return _radial_integral_scaled(n1, l1, n2, l2, operator.index(k)) / (atom.Z * atom.reduced_mass) ** k


def radial_dipole(atom, n1: int, l1: int, n2: int, l2: int) -> float:
    """R = int R_n1l1 R_n2l2 r^3 dr in bohr (scales 1/(Z mu)); any n, l (not only l2 = l1 +- 1).

    >>> from driven_atom.atom import Atom
    >>> round(radial_dipole(Atom(2), 2, 1, 1, 0), 10)   # half the hydrogen value
    0.645133101
    """
    return radial_integral(atom, n1, l1, n2, l2, k=1)


def _cg_rank1(j1: int, m1: int, q: int, j: int, m: int) -> float:
    """Clebsch-Gordan <j1 m1; 1 q | j m> in closed form (Condon & Shortley 1935, table 2^3)."""
    if m != m1 + q or abs(q) > 1 or abs(m1) > j1 or abs(m) > j or j not in (j1 - 1, j1, j1 + 1) or j < 0:
        return 0.0
    if j == j1 + 1:
        num = {1: (j1 + m) * (j1 + m + 1), 0: 2 * (j1 - m + 1) * (j1 + m + 1), -1: (j1 - m) * (j1 - m + 1)}[q]
        return math.sqrt(num / ((2 * j1 + 1) * (2 * j1 + 2)))
    if j == j1:
        if j1 == 0:
            return 0.0
        if q == 0:
            return m / math.sqrt(j1 * (j1 + 1))
        num = (j1 + m) * (j1 - m + 1) if q == 1 else (j1 - m) * (j1 + m + 1)
        return -q * math.sqrt(num / (2 * j1 * (j1 + 1)))
    num = {1: (j1 - m) * (j1 - m + 1), 0: 2 * (j1 - m) * (j1 + m), -1: (j1 + m + 1) * (j1 + m)}[q]
    value = math.sqrt(num / (2 * j1 * (2 * j1 + 1)))
    return -value if q == 0 else value


def angular_factor(l1: int, m1: int, l2: int, m2: int, q: int) -> float:
    """<l1 m1|C^1_q|l2 m2> (q = 0, +-1); zero unless |l1 - l2| = 1 and m1 = m2 + q.

    >>> round(angular_factor(1, 0, 0, 0, 0), 12)   # <p0|cos theta|s> = 1/sqrt 3
    0.57735026919
    >>> angular_factor(1, 1, 0, 0, -1)
    0.0
    """
    if abs(l1 - l2) != 1 or m1 != m2 + q or abs(q) > 1 or abs(m1) > l1 or abs(m2) > l2:
        return 0.0
    sign = 1.0 if l1 == l2 + 1 else -1.0
    return sign * math.sqrt(max(l1, l2) / (2 * l1 + 1)) * _cg_rank1(l2, m2, q, l1, m1)


def _state(value, name) -> State:
    return parse_state(value, name=name)


def dipole_matrix_element(atom, s1, s2, q: int) -> float:
    """<s1| r_q |s2> in bohr (both states with m; q = 0 is z).

    >>> from driven_atom.atom import Atom, State
    >>> round(dipole_matrix_element(Atom(1), State(2, 1, 0), State(1, 0, 0), 0), 10)   # 2^7 sqrt2/3^5
    0.744935539
    """
    s1, s2 = _state(s1, "s1"), _state(s2, "s2")
    if s1.m is None or s2.m is None:
        raise InputError(f"dipole_matrix_element needs m in both states, got {s1.label!r}, {s2.label!r}")
    if q not in (-1, 0, 1):
        raise InputError(f"`q` must be -1, 0 or 1, got {q!r}")
    ang = angular_factor(s1.l, s1.m, s2.l, s2.m, q)
    return 0.0 if ang == 0.0 else ang * radial_dipole(atom, s1.n, s1.l, s2.n, s2.l)


def _omega(atom, lower: State, upper: State) -> float:
    return float(energy(atom, upper.n) - energy(atom, lower.n))


def oscillator_strength(atom, lower, upper) -> float:
    """Absorption f-value lower -> upper, level to level (m ignored):
    f = (2/3) mu omega l_>/(2 l_lower + 1) |R|^2 (Bethe & Salpeter 1957, eq. 61.4 with mu).

    >>> from driven_atom.atom import Atom
    >>> round(oscillator_strength(Atom(1), "1s", "2p"), 5)
    0.4162
    """
    lower, upper = _state(lower, "lower").level, _state(upper, "upper").level
    if abs(lower.l - upper.l) != 1:
        return 0.0
    R = radial_dipole(atom, upper.n, upper.l, lower.n, lower.l)
    omega = _omega(atom, lower, upper)
    return (2.0 / 3.0) * atom.reduced_mass * omega * max(lower.l, upper.l) / (2 * lower.l + 1) * R * R


def einstein_A(atom, upper, lower) -> float:
    """Spontaneous rate upper -> lower in 1/(a.u. time) (divide by AU_TIME_S for 1/s).

    Both with m: the single channel (4/3) alpha^3 omega^3 sum_q |<lower|r_q|upper>|^2. Upper without
    m: averaged over upper m; lower without m: summed over lower m. So two levels give
    A = (4/3) alpha^3 omega^3 l_>/(2 l_u + 1) |R|^2 (Bethe & Salpeter 1957, eq. 59.11, 63.4).
    Zero between levels of equal n (no energy) or without dipole coupling.

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.units import AU_TIME_S
    >>> round(einstein_A(Atom(1), "2p", "1s") / AU_TIME_S / 1e8, 4)
    6.2683
    """
    upper, lower = _state(upper, "upper"), _state(lower, "lower")
    if upper.n < lower.n:
        raise InputError(f"einstein_A: upper {upper.label!r} lies below lower {lower.label!r}")
    omega = _omega(atom, lower, upper)
    if omega <= 0.0 or abs(upper.l - lower.l) != 1:
        return 0.0
    R = radial_dipole(atom, upper.n, upper.l, lower.n, lower.l)
    pref = (4.0 / 3.0) * ALPHA**3 * omega**3 * R * R
    uppers, lowers = upper.sublevels() if upper.m is None else [upper], lower.sublevels()
    if upper.m is None or lower.m is None:
        # sum over the requested sublevels of |angular|^2, then average over the upper ones
        total = sum(angular_factor(lo.l, lo.m, up.l, up.m, q) ** 2
                    for up in uppers for lo in lowers for q in (-1, 0, 1))
        return pref * total / len(uppers)
    return pref * sum(angular_factor(lower.l, lower.m, upper.l, upper.m, q) ** 2 for q in (-1, 0, 1))


def total_decay_rate(atom, state) -> float:
    """Sum of the level rates A(n l -> n' l+-1) over all n' < n (1/(a.u. time)).

    >>> from driven_atom.atom import Atom
    >>> total_decay_rate(Atom(1), "2s")
    0.0
    """
    s = _state(state, "state").level
    if s.n > MAX_N_LIFETIME:
        raise InputError(f"radiative lifetimes are summed exactly for n <= {MAX_N_LIFETIME}, got n = {s.n}")
    return sum((einstein_A(atom, s, State(n2, l2)) for n2 in range(1, s.n)
                for l2 in (s.l - 1, s.l + 1) if 0 <= l2 < n2), 0.0)


def lifetime(atom, state) -> float:
    """Radiative lifetime 1/sum A (a.u. time) of a level or sublevel (independent of m); ``inf``
    when no electric-dipole decay exists (1s, 2s).

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.units import AU_TIME_S
    >>> round(lifetime(Atom.from_name("H"), "2p") * AU_TIME_S * 1e9, 4)
    1.5962
    """
    rate = total_decay_rate(atom, state)
    return math.inf if rate == 0.0 else 1.0 / rate


def spherical_coefficients(vec):
    """Coefficients e_q of v·r = Σ_q e_q r_q for q = -1, 0, +1 (last axis), from Cartesian v.

    With r_{±1} = ∓(x ± iy)/√2, r_0 = z: e_{-1} = (v_x + i v_y)/√2, e_0 = v_z,
    e_{+1} = (-v_x + i v_y)/√2 (Edmonds, *Angular Momentum in QM*, 1957, eq. 5.1.3).

    >>> [round(float(abs(e)), 6) for e in spherical_coefficients([1, 1j, 0])]   # circular+: only r_{+1} (Δm = +1)
    [0.0, 0.0, 1.414214]
    """
    import numpy as np

    v = np.asarray(vec, dtype=complex)
    x, y, z = v[..., 0], v[..., 1], v[..., 2]
    return np.stack([(x + 1j * y) / math.sqrt(2), z, (-x + 1j * y) / math.sqrt(2)], axis=-1)

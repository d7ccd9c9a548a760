"""Angular-momentum coupling coefficients: Clebsch-Gordan, Wigner 3j and 6j, exact up to one rounding.

Arguments are angular momenta and projections as numbers (``1``, ``0.5``, ``3/2`` written as
``1.5`` or ``fractions.Fraction(3, 2)``); internally everything is twice its value, an integer, and
Racah's sums run in Python integers (no cancellation error), so the result is exact until the
final square root. Conventions of Edmonds, *Angular Momentum in Quantum Mechanics* (1957):

* 3j, Racah's formula (Edmonds eq. 3.7.3);
* Clebsch-Gordan <j1 m1; j2 m2 | J M> = (-1)^(j1 - j2 + M) sqrt(2J + 1) (j1 j2 J; m1 m2 -M)
  (Condon-Shortley phases, Edmonds eq. 3.7.1);
* 6j, Racah's formula (Edmonds eq. 6.3.7).

A test compares every function with :mod:`sympy.physics.wigner` (sympy is not imported here:
the light commands stay light).

>>> round(clebsch_gordan(1, 0, 0.5, 0.5, 0.5, 0.5), 12)     # <1 0; 1/2 1/2 | 1/2 1/2> = -1/sqrt 3
-0.57735026919
>>> round(wigner_6j(1, 1, 1, 1, 1, 1), 12)                     # 1/6
0.166666666667
"""
from __future__ import annotations

import math
from fractions import Fraction
from functools import lru_cache

from driven_atom.errors import InputError


def twice(value, name: str = "angular momentum") -> int:
    """2 x ``value`` as an integer; ``value`` must be a whole or half-integer number.

    >>> twice(1.5), twice(Fraction(-1, 2)), twice(2)
    (3, -1, 4)
    """
    if isinstance(value, bool):
        raise InputError(f"`{name}` must be a whole or half-integer number, got {value!r}")
    try:
        doubled = 2 * value if isinstance(value, float) else 2 * Fraction(value)
    except (TypeError, ValueError):
        doubled = 0.5
    if isinstance(doubled, float):
        if not (math.isfinite(doubled) and doubled.is_integer()):
            raise InputError(f"`{name}` must be a whole or half-integer number, got {value!r}")
        return int(doubled)
    if doubled.denominator != 1:
        raise InputError(f"`{name}` must be a whole or half-integer number, got {value!r}")
    return int(doubled)


def _triangle(a2: int, b2: int, c2: int) -> bool:
    return (a2 + b2 + c2) % 2 == 0 and abs(a2 - b2) <= c2 <= a2 + b2


def _delta_squared(a2: int, b2: int, c2: int) -> Fraction:
    """Delta(abc)^2 = (a+b-c)!(a-b+c)!(-a+b+c)!/(a+b+c+1)! (doubled arguments)."""
    f = math.factorial
    return Fraction(f((a2 + b2 - c2) // 2) * f((a2 - b2 + c2) // 2) * f((-a2 + b2 + c2) // 2),
                    f((a2 + b2 + c2) // 2 + 1))


def _signed_sqrt(value: Fraction) -> float:
    """sign(v) sqrt|v| of an exact rational (one rounding)."""
    if value == 0:
        return 0.0
    root = math.sqrt(abs(value.numerator) / value.denominator) if abs(value) < 1e300 else \
        math.exp(0.5 * (math.log(abs(value.numerator)) - math.log(value.denominator)))
    return root if value > 0 else -root


@lru_cache(maxsize=65536)
def _three_j_doubled(j1: int, j2: int, j3: int, m1: int, m2: int, m3: int) -> Fraction:
    """The 3j symbol squared with its sign, as sign x Fraction (doubled arguments)."""
    if m1 + m2 + m3 != 0 or not _triangle(j1, j2, j3):
        return Fraction(0)
    for j, m in ((j1, m1), (j2, m2), (j3, m3)):
        if abs(m) > j or (j + m) % 2:
            return Fraction(0)
    f = math.factorial
    pre = _delta_squared(j1, j2, j3) * Fraction(
        f((j1 + m1) // 2) * f((j1 - m1) // 2) * f((j2 + m2) // 2) * f((j2 - m2) // 2)
        * f((j3 + m3) // 2) * f((j3 - m3) // 2))
    k_min = max(0, (j2 - j3 - m1) // 2, (j1 - j3 + m2) // 2)
    k_max = min((j1 + j2 - j3) // 2, (j1 - m1) // 2, (j2 + m2) // 2)
    total = Fraction(0)
    for k in range(k_min, k_max + 1):
        denom = (f(k) * f((j1 + j2 - j3) // 2 - k) * f((j1 - m1) // 2 - k) * f((j2 + m2) // 2 - k)
                 * f((j3 - j2 + m1) // 2 + k) * f((j3 - j1 - m2) // 2 + k))
        total += Fraction((-1) ** k, denom)
    sign = -1 if ((j1 - j2 - m3) // 2) % 2 else 1
    value = pre * total * total
    return value if sign * total >= 0 else -value


def wigner_3j(j1, j2, j3, m1, m2, m3) -> float:
    """Wigner 3j symbol (j1 j2 j3; m1 m2 m3); zero outside the selection rules.

    >>> round(wigner_3j(1, 1, 0, 1, -1, 0), 12)      # 1/sqrt 3
    0.57735026919
    """
    return _signed_sqrt(_three_j_doubled(twice(j1), twice(j2), twice(j3), twice(m1), twice(m2), twice(m3)))


def clebsch_gordan(j1, m1, j2, m2, J, M) -> float:
    """<j1 m1; j2 m2 | J M> (Condon-Shortley).

    >>> round(clebsch_gordan(0.5, 0.5, 0.5, -0.5, 1, 0), 12)
    0.707106781187
    """
    a, b, c, x, y, z = (twice(v) for v in (j1, j2, J, m1, m2, M))
    value = _three_j_doubled(a, b, c, x, y, -z) * (c + 1)
    sign = -1 if ((a - b + z) // 2) % 2 else 1
    return sign * _signed_sqrt(value)


@lru_cache(maxsize=65536)
def _six_j_doubled(a: int, b: int, c: int, d: int, e: int, f_: int) -> Fraction:
    triads = ((a, b, c), (a, e, f_), (d, b, f_), (d, e, c))
    if not all(_triangle(*t) for t in triads):
        return Fraction(0)
    f = math.factorial
    pre = Fraction(1)
    for t in triads:
        pre *= _delta_squared(*t)
    sums = [sum(t) // 2 for t in triads]
    quads = ((a + b + d + e) // 2, (a + c + d + f_) // 2, (b + c + e + f_) // 2)
    total = Fraction(0)
    for k in range(max(sums), min(quads) + 1):
        denom = f(k - sums[0]) * f(k - sums[1]) * f(k - sums[2]) * f(k - sums[3])
        denom *= f(quads[0] - k) * f(quads[1] - k) * f(quads[2] - k)
        total += Fraction((-1) ** k * f(k + 1), denom)
    value = pre * total * total
    return value if total >= 0 else -value


def wigner_6j(j1, j2, j3, j4, j5, j6) -> float:
    """Wigner 6j symbol {j1 j2 j3; j4 j5 j6}; zero unless all four triads close.

    >>> round(wigner_6j(0.5, 0.5, 1, 0.5, 0.5, 0), 12)   # {1/2 1/2 1; 1/2 1/2 0} = 1/2
    0.5
    """
    return _signed_sqrt(_six_j_doubled(*(twice(v) for v in (j1, j2, j3, j4, j5, j6))))

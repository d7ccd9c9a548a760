"""Hydrogenic radial functions R_nl(r), stable to high n, and closed-form <r^k>.

    R_nl(r) = N rho^l e^(-rho/2) L^(2l+1)_(n-l-1)(rho),   rho = 2 Z mu r / n,
    N^2 = (2 Z mu / n)^3 (n-l-1)! / (2n (n+l)!),          int R_nl^2 r^2 dr = 1

(Bethe & Salpeter 1957, eq. 3.17). The Laguerre polynomial comes from its three-term recurrence
(Abramowitz & Stegun 22.7.12) with a per-point running scale, and all factors are combined in log
space, so nothing overflows or underflows before the final exponential (n = 200 and beyond).
R_nl is positive near the origin.

>>> from driven_atom.atom import Atom
>>> round(float(radial_function(Atom(1), 1, 0, 1.0)), 12)   # 2 e^-1
0.735758882343
"""
from __future__ import annotations

import math

import numpy as np

from driven_atom.errors import InputError

_RESCALE = 1e150


def _check_nl(n, l):
    if not (isinstance(n, (int, np.integer)) and isinstance(l, (int, np.integer)) and 0 <= l < n):
        raise InputError(f"need integers 0 <= l < n, got n = {n!r}, l = {l!r}")


def log_radial(n: int, l: int, x):
    """Sign and log|R_nl| for Z = mu = 1 at radii ``x`` (bohr), as two arrays.

    >>> s, lg = log_radial(2, 1, np.array([1.0]))
    >>> float(s[0]), round(float(np.exp(lg[0])), 12)   # e^-1/2 / (2 sqrt 6)
    (1.0, 0.123807552471)
    """
    _check_nl(n, l)
    x = np.atleast_1d(np.asarray(x, dtype=float))
    rho = 2.0 * x / n
    alpha = 2 * l + 1
    k_max = n - l - 1
    # Laguerre recurrence with a running log scale per point
    prev = np.zeros_like(rho)
    cur = np.ones_like(rho)
    log_scale = np.zeros_like(rho)
    for k in range(k_max):
        nxt = ((2 * k + 1 + alpha - rho) * cur - (k + alpha) * prev) / (k + 1)
        prev, cur = cur, nxt
        big = np.abs(cur) > _RESCALE
        if big.any():
            s = np.where(big, np.abs(cur), 1.0)
            cur = cur / s
            prev = prev / s
            log_scale += np.log(s)
    log_norm = 0.5 * (3.0 * math.log(2.0 / n) + math.lgamma(n - l) - math.log(2.0 * n) - math.lgamma(n + l + 1))
    with np.errstate(divide="ignore"):
        log_rho_l = l * np.log(rho) if l > 0 else np.zeros_like(rho)
        log_abs = log_norm + log_rho_l - 0.5 * rho + np.log(np.abs(cur)) + log_scale
    return np.sign(cur), log_abs


def radial_function(atom, n: int, l: int, r):
    """R_nl(r) of ``atom`` (Z, reduced mass mu) at radii ``r`` in bohr; same shape as ``r``.

    Scaling: R_nl(r; Z, mu) = (Z mu)^(3/2) R_nl(Z mu r; 1, 1).

    >>> from driven_atom.atom import Atom
    >>> round(float(radial_function(Atom(1), 2, 0, 0.0)), 12)   # 1/sqrt(2)
    0.707106781187
    """
    scale = atom.Z * atom.reduced_mass
    r_arr = np.asarray(r, dtype=float)
    sign, log_abs = log_radial(n, l, scale * r_arr.reshape(-1))
    out = sign * np.exp(log_abs) * scale**1.5
    return out.reshape(r_arr.shape) if r_arr.ndim else float(out[0])


def expectation_r(atom, n: int, l: int, k: int) -> float:
    """<n l| r^k |n l> in bohr^k for integer k >= -3 (k = -3 needs l >= 1).

    Closed forms (Bethe & Salpeter 1957, eq. 3.24-3.26), in units a = 1/(Z mu):
    <r^-1> = 1/n^2, <r^-2> = 1/(n^3 (l+1/2)), <r^-3> = 1/(n^3 l (l+1/2)(l+1)); k >= 1 from
    Kramers' recursion (k+1)/n^2 <r^k> - (2k+1) <r^(k-1)> + k/4 ((2l+1)^2 - k^2) <r^(k-2)> = 0.

    >>> from driven_atom.atom import Atom
    >>> expectation_r(Atom(1), 3, 2, 1)   # (3 n^2 - l(l+1))/2
    10.5
    """
    _check_nl(n, l)
    a = 1.0 / (atom.Z * atom.reduced_mass)
    if k == -3:
        if l == 0:
            raise InputError("<r^-3> diverges for l = 0")
        return 1.0 / (n**3 * l * (l + 0.5) * (l + 1)) / a**3
    if k == -2:
        return 1.0 / (n**3 * (l + 0.5)) / a**2
    if k < -3 or not isinstance(k, int):
        raise InputError(f"`k` must be an integer >= -3, got {k!r}")
    values = [1.0 / n**2, 1.0]  # <r^-1>, <r^0>
    for j in range(1, k + 1):
        values.append(((2 * j + 1) * values[-1] - 0.25 * j * ((2 * l + 1) ** 2 - j * j) * values[-2])
                      * n**2 / (j + 1))
    return values[k + 1] * a**k

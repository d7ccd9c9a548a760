"""Level structure of a one-electron atom as measured: Dirac energy with reduced mass and recoil,
Lamb shift (self-energy with Bethe logarithms, vacuum polarisation, two loops, nuclear size) and
hyperfine structure. Pure functions of Z, the nucleus and the quantum numbers; energies in hartree
from the ionisation limit (a free electron and the nucleus at rest), like the Bohr levels of
:mod:`driven_atom.atom.levels`.

Formulas of the CODATA adjustment (Mohr, Taylor & Newell, Rev. Mod. Phys. 84, 1527 (2012), §IV.A.1;
"MTN" below), with m_e c^2 = 1/alpha^2 hartree, mu = m_r/m_e, M the nuclear mass in m_e,
kappa = (-1)^(j - l + 1/2) (j + 1/2) and L = ln (Z alpha)^-2:

* Dirac + recoil (MTN): E_M = [f - 1] mu c^2 - [f - 1]^2 mu^2 c^2/(2(1 + M))
  + (1 - d_l0)/(kappa (2l+1)) (Z alpha)^4 mu^3 c^2/(2 n^3 M^2),
  f = [1 + (Z alpha)^2/(n - delta)^2]^(-1/2), delta = j + 1/2 - sqrt((j + 1/2)^2 - (Z alpha)^2);
* relativistic recoil (Salpeter; MTN): E_S = mu^3/M (Z alpha)^5/(pi n^3) c^2
  {d_l0 L/3 - 8/3 ln k0(n, l) - d_l0/9 - 7/3 a_n - 2 d_l0 [M^2 ln(1/mu) - ln(M/mu)]/(M^2 - 1)},
  a_n = -2 [ln(2/n) + sum_(i<=n) 1/i + 1 - 1/(2n)] d_l0 + (1 - d_l0)/(l(l+1)(2l+1));
* one-loop self-energy (MTN): (alpha/pi)(Z alpha)^4/n^3 c^2 [mu^3 F + mu^2 A_mag],
  F = A41 ln(mu^-1 (Z alpha)^-2) + A40 + A50 (Z alpha) + (Z alpha)^2 (A62 L^2 + A61 L + G_SE),
  A41 = 4/3 d_l0, A40 = -4/3 ln k0 + 10/9 d_l0, A_mag = -(1 - d_l0)/(2 kappa (2l+1)),
  A50 = (139/32 - 2 ln 2) pi d_l0, A62 = -d_l0,
  A61 = [4 sum_(i<=n) 1/i + 28/3 ln 2 - 4 ln n - 601/180 - 77/(45 n^2)] d_l0
        + (1 - 1/n^2)(2/15 + d_j,1/2 /3) d_l1 + [96 n^2 - 32 l(l+1)](1 - d_l0)/(3 n^2 (2l-1)(2l)(2l+1)(2l+2)(2l+3));
  G_SE(Z alpha): hydrogen's values for n = 1, 2 (Jentschura, Mohr & Soff, PRL 82, 53 (1999)), used
  for every Z (G_SE changes slowly with Z: -30.29 at Z = 1, -29.77 at Z = 2 for 1S) and zero for n > 2;
* vacuum polarisation (MTN; Kotochigova & Mohr 2005): (alpha/pi)(Z alpha)^4/n^3 c^2 mu^3
  [-4/15 + 5 pi/48 (Z alpha) - 2/15 (Z alpha)^2 L + (19/45 - pi^2/27)(Z alpha)^2] d_l0;
* two loops (MTN): (alpha/pi)^2 (Z alpha)^4/n^3 c^2 mu^3 [B40 + B50 (Z alpha)],
  B40 = [3 pi^2/2 ln 2 - 10 pi^2/27 - 2179/648 - 9/4 zeta(3)] d_l0
        + [pi^2 ln 2/2 - pi^2/12 - 197/144 - 3 zeta(3)/4] (1 - d_l0)/(kappa (2l+1)),  B50 = -21.55447 d_l0;
* nuclear size (MTN): 2/3 mu^3 (Z alpha)^4/n^3 c^2 (r_N / lambda_C)^2 d_l0, lambda_C = alpha bohr.

Bethe logarithms ln k0(n, l) for n <= 4 (Drake & Swainson, PRA 41, 1243 (1990), as tabulated in
MTN); above n = 4 the n = 4 value of the same l is used (ln k0 changes by < 0.02 beyond,
a few hundred kHz at n = 5 in hydrogen). Coefficients of the (Z alpha)^6 and two-loop terms, and the
Bethe logarithms, were recalled from memory and checked by the tests against measured intervals
(Lamb shift, 1S-2S, 2S-2P3/2); the expansion in Z alpha is meant for light ions (H ... He+).
Left out (each below ~0.1 MHz in the hydrogen n = 1 level): higher-order recoil and radiative
recoil, the Uehling remainder G_VP, three loops, nuclear polarisability.

Hyperfine structure, magnetic dipole only (Bethe & Salpeter 1957, §22-23; Fermi contact term for
s states), E = A/2 [F(F+1) - I(I+1) - j(j+1)] with

    A = alpha^2 g_I (m_e/m_p) Z^3 mu^3 / (2 n^3 j(j+1)(l + 1/2)) x k,
    k = 1 + a_e for l = 0,   k = 1 + a_e [l(l+1) - j(j+1) + 3/4] / (2 l(l+1)) for l > 0,

g_I = mu_I/(I mu_N), a_e the electron's anomalous moment: for l > 0 the spin-dipolar part of the
field at the nucleus carries g_s/2 = 1 + a_e, the orbital part does not (2p1/2: 1 + a_e/2,
2p3/2: 1 - a_e/4). Left out: the Breit relativistic factor, radiative and nuclear-structure (Zemach)
corrections (each ~1e-4, partly cancelling: hydrogen's 1S splitting comes out 6e-5 above the maser
value), the electric quadrupole of D, and hyperfine mixing of the two j of one n l (~40 kHz in
hydrogen n = 2).

>>> from driven_atom.atom import Atom
>>> H = Atom.from_name("H")
>>> round((fine_energy(H, 2, 0, 1) - fine_energy(H, 2, 1, 1)) * HARTREE_HZ / 1e6, 1)   # Lamb shift, MHz
1057.8
"""
from __future__ import annotations

import math

from driven_atom.errors import InputError
from driven_atom.units import ALPHA, RYDBERG_INF_M, SPEED_OF_LIGHT_MS

HARTREE_HZ = 2.0 * RYDBERG_INF_M * SPEED_OF_LIGHT_MS     # 1 hartree / h in Hz
ELECTRON_ANOMALY = 1.15965218046e-3      # a_e, CODATA 2022 (Mohr et al., RMP 97, 025002 (2025))
PROTON_ELECTRON_MASS_RATIO = 1836.152673426   # CODATA 2022 (nuclear magneton mu_N = (m_e/m_p) mu_B)
ZETA3 = 1.2020569031595942               # Riemann zeta(3)

# ln k0(n, l): Drake & Swainson, PRA 41, 1243 (1990) (from memory; also tabulated in MTN)
BETHE_LOG = {
    (1, 0): 2.984128555765,
    (2, 0): 2.811769893120, (2, 1): -0.030016708630,
    (3, 0): 2.767663612491, (3, 1): -0.038190229385, (3, 2): -0.005232148140,
    (4, 0): 2.749811840454, (4, 1): -0.041954894598, (4, 2): -0.006740938876, (4, 3): -0.001733661482,
}
# G_SE(alpha) of hydrogen (Z = 1) by (n, l, 2j): Jentschura, Mohr & Soff, PRL 82, 53 (1999) and
# Jentschura & Mohr for the P states (from memory; also tabulated in MTN)
SELF_ENERGY_REMAINDER_H = {(1, 0, 1): -30.29024, (2, 0, 1): -31.18515, (2, 1, 1): -0.97350, (2, 1, 3): -0.48650}
B50 = -21.55447        # two-loop (Z alpha)^5 coefficient (Pachucki 1994; Eides & Shelyuto 1995) (from memory)


def _check(n: int, l: int, j2: int) -> None:
    if not (isinstance(n, int) and isinstance(l, int) and 0 <= l < n) or j2 not in (2 * l - 1, 2 * l + 1) or j2 < 1:
        raise InputError(f"need integers 0 <= l < n and j = l +- 1/2, got n = {n!r}, l = {l!r}, j = {j2}/2")


def kappa(l: int, j2: int) -> int:
    """Dirac quantum number kappa = (-1)^(j - l + 1/2) (j + 1/2).

    >>> kappa(0, 1), kappa(1, 1), kappa(1, 3)
    (-1, 1, -2)
    """
    return (j2 + 1) // 2 * (-1 if (j2 - 2 * l + 1) // 2 % 2 else 1)


def bethe_log(n: int, l: int) -> float:
    """ln k0(n, l) (table for n <= 4; beyond it the n = 4 value of the same l, 0 for l > 3).

    >>> bethe_log(2, 1)
    -0.03001670863
    """
    return BETHE_LOG.get((min(n, 4), l), 0.0)


def _harmonic(n: int) -> float:
    return sum(1.0 / i for i in range(1, n + 1))


def dirac_recoil_energy(atom, n: int, l: int, j2: int) -> float:
    """E_M - M c^2 of MTN (Dirac energy with reduced mass and recoil), hartree.

    >>> from driven_atom.atom import Atom
    >>> round(dirac_recoil_energy(Atom(1), 1, 0, 1) / -0.5 - 1, 8)      # (Z alpha)^2/4 above Bohr
    1.331e-05
    """
    _check(n, l, j2)
    za2 = (atom.Z * ALPHA) ** 2
    c2 = 1.0 / ALPHA**2
    mu, M = atom.reduced_mass, atom.nuclear_mass
    k = (j2 + 1) / 2
    delta = za2 / (k + math.sqrt(k * k - za2))               # j + 1/2 - sqrt((j+1/2)^2 - (Z alpha)^2)
    f1 = math.expm1(-0.5 * math.log1p(za2 / (n - delta) ** 2))   # f - 1, without cancellation
    energy = f1 * mu * c2
    if math.isfinite(M):
        energy -= f1 * f1 * mu * mu * c2 / (2.0 * (1.0 + M))
        if l > 0:
            energy += za2 * za2 * mu**3 * c2 / (2 * n**3 * M * M * kappa(l, j2) * (2 * l + 1))
    return energy


def recoil_energy(atom, n: int, l: int) -> float:
    """Salpeter's relativistic recoil E_S (MTN), hartree; 0 for an infinitely heavy nucleus."""
    M = atom.nuclear_mass
    if not math.isfinite(M):
        return 0.0
    za = atom.Z * ALPHA
    mu = atom.reduced_mass
    s = 1.0 if l == 0 else 0.0
    a_n = (-2.0 * (math.log(2.0 / n) + _harmonic(n) + 1.0 - 1.0 / (2 * n)) if l == 0
           else 1.0 / (l * (l + 1) * (2 * l + 1)))
    bracket = (s / 3 * math.log(za**-2) - 8.0 / 3 * bethe_log(n, l) - s / 9 - 7.0 / 3 * a_n
               - s * 2.0 / (M * M - 1.0) * (M * M * math.log(1.0 / mu) - math.log(M / mu)))
    return mu**3 / M * za**5 / (math.pi * n**3) / ALPHA**2 * bracket


def self_energy(atom, n: int, l: int, j2: int) -> float:
    """One-loop self-energy (MTN), hartree."""
    za = atom.Z * ALPHA
    mu = atom.reduced_mass
    s = 1.0 if l == 0 else 0.0
    L = math.log(za**-2)
    k = kappa(l, j2)
    a61 = s * (4 * _harmonic(n) + 28.0 / 3 * math.log(2) - 4 * math.log(n) - 601.0 / 180 - 77.0 / (45 * n * n))
    if l == 1:
        a61 += (1 - 1.0 / n**2) * (2.0 / 15 + (1.0 / 3 if j2 == 1 else 0.0))
    if l > 0:
        a61 += (96 * n * n - 32 * l * (l + 1)) / (3 * n * n * (2 * l - 1) * (2 * l) * (2 * l + 1) * (2 * l + 2)
                                                   * (2 * l + 3))
    g_se = SELF_ENERGY_REMAINDER_H.get((n, l, j2), 0.0)
    F = (4.0 / 3 * s * math.log(za**-2 / mu) - 4.0 / 3 * bethe_log(n, l) + 10.0 / 9 * s
         + (139.0 / 32 - 2 * math.log(2)) * math.pi * s * za
         + za * za * (-s * L * L + a61 * L + g_se))
    magnetic = 0.0 if l == 0 else -1.0 / (2 * k * (2 * l + 1))
    return ALPHA / math.pi * za**4 / n**3 / ALPHA**2 * (mu**3 * F + mu**2 * magnetic)


def vacuum_polarization(atom, n: int, l: int) -> float:
    """Electron vacuum polarisation, Uehling and Wichmann-Kroll leading terms (MTN), hartree."""
    if l > 0:
        return 0.0
    za = atom.Z * ALPHA
    H = (-4.0 / 15 + 5 * math.pi / 48 * za - 2.0 / 15 * za * za * math.log(za**-2)
         + (19.0 / 45 - math.pi**2 / 27) * za * za)
    return ALPHA / math.pi * za**4 / n**3 / ALPHA**2 * atom.reduced_mass**3 * H


def two_loop(atom, n: int, l: int, j2: int) -> float:
    """Two-loop corrections B40 + B50 Z alpha (MTN), hartree."""
    za = atom.Z * ALPHA
    if l == 0:
        b = (1.5 * math.pi**2 * math.log(2) - 10 * math.pi**2 / 27 - 2179.0 / 648 - 2.25 * ZETA3
             + B50 * za)
    else:
        b = ((math.pi**2 * math.log(2) / 2 - math.pi**2 / 12 - 197.0 / 144 - 0.75 * ZETA3)
             / (kappa(l, j2) * (2 * l + 1)))
    return (ALPHA / math.pi) ** 2 * za**4 / n**3 / ALPHA**2 * atom.reduced_mass**3 * b


def nuclear_size(atom, n: int, l: int) -> float:
    """Finite nuclear charge radius (MTN), hartree; 0 without a known radius."""
    from driven_atom.atom.nuclei import nuclear_data
    from driven_atom.units import BOHR_M

    data = nuclear_data(atom)
    if l > 0 or data is None:
        return 0.0
    za = atom.Z * ALPHA
    radius_over_compton = data.charge_radius_fm * 1e-15 / (ALPHA * BOHR_M)
    return 2.0 / 3 * atom.reduced_mass**3 * za**4 / n**3 / ALPHA**2 * radius_over_compton**2


def lamb_shift(atom, n: int, l: int, j2: int) -> float:
    """Everything beyond the Dirac-recoil energy: relativistic recoil, self-energy, vacuum
    polarisation, two loops and nuclear size (hartree).

    >>> from driven_atom.atom import Atom
    >>> round(lamb_shift(Atom.from_name("H"), 1, 0, 1) * HARTREE_HZ / 1e9, 2)     # 1S, GHz
    8.17
    """
    _check(n, l, j2)
    return (recoil_energy(atom, n, l) + self_energy(atom, n, l, j2) + vacuum_polarization(atom, n, l)
            + two_loop(atom, n, l, j2) + nuclear_size(atom, n, l))


def fine_energy(atom, n: int, l: int, j2: int) -> float:
    """Energy of the fine-structure level n l j (j = j2/2), hyperfine centroid, hartree."""
    return dirac_recoil_energy(atom, n, l, j2) + lamb_shift(atom, n, l, j2)


def hyperfine_constant(atom, n: int, l: int, j2: int) -> float:
    """Magnetic dipole constant A of the level n l j (hartree): E_F = A/2 [F(F+1) - I(I+1) - j(j+1)].

    >>> from driven_atom.atom import Atom
    >>> round(hyperfine_constant(Atom.from_name("H"), 1, 0, 1) * HARTREE_HZ / 1e6, 1)
    1420.5
    """
    from driven_atom.atom.nuclei import nuclear_data

    _check(n, l, j2)
    data = nuclear_data(atom)
    if data is None:
        raise InputError(f"hyperfine structure needs a nucleus with known spin and magnetic moment "
                         f"(`nucleus` = \"H\", \"D\", \"T\", \"He3\" or \"He\"), got Z = {atom.Z}, "
                         f"nuclear mass {atom.nuclear_mass:.10g} m_e")
    if data.spin == 0:
        return 0.0
    j = j2 / 2
    if l == 0:
        k = 1.0 + ELECTRON_ANOMALY
    else:
        k = 1.0 + ELECTRON_ANOMALY * (l * (l + 1) - j * (j + 1) + 0.75) / (2 * l * (l + 1))
    return (ALPHA**2 * data.g_factor / PROTON_ELECTRON_MASS_RATIO * atom.Z**3 * atom.reduced_mass**3
            / (2 * n**3 * j * (j + 1) * (l + 0.5)) * k)


def nuclear_spin2(atom) -> int:
    """Twice the nuclear spin of ``atom`` (InputError when it is not known)."""
    from driven_atom.atom.nuclei import nuclear_data

    data = nuclear_data(atom)
    if data is None:
        hyperfine_constant(atom, 1, 0, 1)          # raises the message naming the nucleus
    return int(round(2 * data.spin))


def hyperfine_shift(atom, n: int, l: int, j2: int, F2: int) -> float:
    """A/2 [F(F+1) - I(I+1) - j(j+1)] for the doubled F ``F2`` (hartree).

    >>> from driven_atom.atom import Atom
    >>> H = Atom.from_name("H")
    >>> round((hyperfine_shift(H, 1, 0, 1, 2) - hyperfine_shift(H, 1, 0, 1, 0)) * HARTREE_HZ / 1e6, 1)
    1420.5
    """
    I2 = nuclear_spin2(atom)
    F, I, j = F2 / 2, I2 / 2, j2 / 2
    if not abs(j - I) <= F <= j + I or (F2 - j2 - I2) % 2:
        raise InputError(f"F = {F:g} is not one of |j - I|, ..., j + I for j = {j:g}, I = {I:g}")
    return 0.5 * hyperfine_constant(atom, n, l, j2) * (F * (F + 1) - I * (I + 1) - j * (j + 1))


def component_energy(atom, component) -> float:
    """Energy of a fine- or hyperfine-structure component (its m ignored: no field), hartree."""
    energy = fine_energy(atom, component.n, component.l, component.j2)
    if component.F2 is not None:
        energy += hyperfine_shift(atom, component.n, component.l, component.j2, component.F2)
    return energy


def level_energy(atom, label, structure: str = "bohr") -> float:
    """Energy (hartree, from the ionisation limit) of any level or component label under
    ``structure`` ("bohr" | "fine" | "hyperfine"), without external fields.

    * "2p", "2p0" under "bohr": the Bohr level -Z^2 mu/(2 n^2);
    * "2p" under "fine"/"hyperfine": the (2j+1)-weighted centroid of its j components;
    * "2p3/2" (any m): the fine-structure level (under "hyperfine": the centroid of its F levels,
      which is the same energy);
    * "1s1/2 F=1" (any m): that hyperfine level (needs "hyperfine").

    >>> from driven_atom.atom import Atom
    >>> H = Atom.from_name("H")
    >>> round((level_energy(H, "2p3/2", "fine") - level_energy(H, "2p1/2", "fine")) * HARTREE_HZ / 1e6)
    10969
    """
    from driven_atom.atom.components import Component, check_label
    from driven_atom.atom.levels import energy

    item = check_label(label, structure)
    if not isinstance(item, Component):
        if structure == "bohr":
            return float(energy(atom, item.n))
        weights = [(j2 + 1, fine_energy(atom, item.n, item.l, j2)) for j2 in (2 * item.l - 1, 2 * item.l + 1)
                   if j2 >= 1]
        return sum(w * e for w, e in weights) / sum(w for w, _ in weights)
    if item.F2 is not None:
        return component_energy(atom, item)
    return fine_energy(atom, item.n, item.l, item.j2)


def lande_g(l: int, j2: int, *, reduced_mass: float = 1.0, nuclear_mass: float = math.inf) -> float:
    """Landé g_j = g_L [j(j+1) - s(s+1) + l(l+1)]/(2j(j+1)) + g_s [j(j+1) + s(s+1) - l(l+1)]/(2j(j+1))
    with g_s = 2(1 + a_e) and the orbital g_L = 1 - m_e/M (reduced-mass correction; Bethe &
    Salpeter 1957, §47); bound-state corrections of g_s (~(Z alpha)^2/3) are left out.

    >>> round(lande_g(1, 3), 4), round(lande_g(1, 1), 4), round(lande_g(0, 1), 6)
    (1.3341, 0.6659, 2.002319)
    """
    g_l = 1.0 - (0.0 if math.isinf(nuclear_mass) else 1.0 / nuclear_mass)
    g_s = 2.0 * (1.0 + ELECTRON_ANOMALY)
    jj, ll = (j2 / 2) * (j2 / 2 + 1), l * (l + 1)
    return (g_l * (jj - 0.75 + ll) + g_s * (jj + 0.75 - ll)) / (2 * jj)

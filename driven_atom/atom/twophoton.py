"""Second-order (two-photon) couplings of a hydrogenic atom with every intermediate state summed,
the continuum included: two-photon Rabi couplings, dynamic (ac) Stark shifts, and the one-photon
ionisation width of the same sums.

For a field E(t) = Re[ℰ e^{-iωt}], ℰ = s(t) ε (polarisation ε, complex amplitude s), eliminating
every state k that the light does not reach resonantly gives, to second order in ℰ (Bethe &
Salpeter 1957, §65; Haas et al., PRA 73, 052501 (2006), eqs. 2-8; docs/physics.md):

* a two-photon coupling of a lower state a to an upper state b (E_b - E_a near 2ω),
  H_ba = (s²/4) <b| (ε·r) G(E_a + ω) (ε·r) |a>;
* an ac Stark shift, within the states of one energy (a and a' of one shell n),
  W_a'a = (|s|²/4) [<a'| (ε*·r) G(E_a + ω) (ε·r) |a> + <a'| (ε·r) G(E_a - ω) (ε*·r) |a>],

with G(E) = Σ_k |k><k| / (E - E_k) over all bound states and the energy-normalised continuum; above
the ionisation threshold the outgoing G(E + i0) has Im G = -π δ(E - H), and -2 Im W_aa is the
one-photon ionisation rate σ(ω) I/ω (a test checks it against
:mod:`driven_atom.atom.photoionization`). The Stark shift here is the real part (the principal
value); the loss is left to the cross sections (``ionization_loss`` of the levels route).

The radial sums S_L(b, a; E) = Σ_k R_bk R_ka/(E - E_k) over the intermediate partial wave L
(R = ∫ R R r³ dr) use the exact bound-bound integrals of :mod:`driven_atom.atom.dipoles` up to
n = :data:`BOUND_N_MAX`, the Rydberg states above it as the threshold continuum they merge into
(density n³), and the bound-free integrals of :mod:`driven_atom.atom.photoionization` over the
continuum (Gauss-Legendre in k, the pole removed by subtracting its residue). They are computed
for Z = mu = 1 and scale as S(Z, mu; E) = S_1(E/(Z² mu)) / (Z⁴ mu³).

Lab units (Haas et al. 2006): with the intensity I of one travelling wave,
Ω/2 = 2π β_ge I, ΔE/h = β_ac I, Γ_ion = 2π β_ioni I, all β in Hz/(W/m²). Haas et al. quote them for
an infinitely heavy nucleus; with the reduced mass every β scales by mu^-3 (+0.16 % for hydrogen).

>>> from driven_atom.atom import Atom
>>> round(radial_second_order(Atom(1), (2, 0), (1, 0), 1, -0.5 + 0.375 / 2).real, 3)
23.561
"""
from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from driven_atom.atom.dipoles import angular_factor, radial_dipole
from driven_atom.atom.photoionization import bound_free_integral

BOUND_N_MAX = 120                 # bound intermediate states summed exactly (the rest: threshold continuum)
_K_PANELS = (0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 40.0, 100.0)
_GAUSS_NODES = 48


@lru_cache(maxsize=1)
def _gauss():
    return np.polynomial.legendre.leggauss(_GAUSS_NODES)


def _k_nodes(breaks):
    x, w = _gauss()
    ks, ws = [], []
    for a, b in zip(breaks[:-1], breaks[1:]):
        ks.append(0.5 * (b - a) * x + 0.5 * (b + a))
        ws.append(0.5 * (b - a) * w)
    return np.concatenate(ks), np.concatenate(ws)


@lru_cache(maxsize=256)
def _scaled_sum(nb: int, lb: int, na: int, la: int, L: int, energy: float) -> complex:
    """S_L(b, a; E) for Z = mu = 1 (E in hartree, outgoing above threshold)."""
    if abs(L - lb) != 1 or abs(L - la) != 1 or L < 0:
        return 0.0j
    # bound states n' = L+1 ... BOUND_N_MAX, exact rational radial integrals
    total = 0.0
    for n in range(L + 1, BOUND_N_MAX + 1):
        total += (radial_dipole_scaled(nb, lb, n, L) * radial_dipole_scaled(n, L, na, la)) / (energy + 0.5 / n**2)
    # Rydberg states above BOUND_N_MAX: the continuum's threshold value times the width they cover
    threshold = bound_free_integral(nb, lb, L, 0.0) * bound_free_integral(na, la, L, 0.0)
    total += threshold / energy * 0.5 / (BOUND_N_MAX + 0.5) ** 2
    # the continuum, in k (E = k²/2, dE = k dk)
    if energy > 0:
        k0 = math.sqrt(2.0 * energy)
        f0 = float(bound_free_integral(nb, lb, L, k0) * bound_free_integral(na, la, L, k0))
        # principal value: on [0, 2E] subtract the residue (the symmetric PV of 1/(E - e) vanishes there)
        k_inner, w_inner = _k_nodes((0.0, 0.5 * k0, k0, 1.25 * k0, math.sqrt(2.0) * k0))
        e = 0.5 * k_inner**2
        f = bound_free_integral(nb, lb, L, k_inner) * bound_free_integral(na, la, L, k_inner)
        with np.errstate(divide="ignore", invalid="ignore"):
            g = np.where(np.abs(e - energy) > 1e-14, (f - f0) / (energy - e), 0.0)
        total += float(np.sum(w_inner * g * k_inner))
        outer = [math.sqrt(2.0) * k0] + [b for b in _K_PANELS if b > math.sqrt(2.0) * k0]
        k_out, w_out = _k_nodes(tuple(outer))
        f = bound_free_integral(nb, lb, L, k_out) * bound_free_integral(na, la, L, k_out)
        total += float(np.sum(w_out * f / (energy - 0.5 * k_out**2) * k_out))
        total += _tail(nb, lb, na, la, L, energy, _K_PANELS[-1])
        return complex(total, -math.pi * f0)
    k, w = _k_nodes(_K_PANELS)
    f = bound_free_integral(nb, lb, L, k) * bound_free_integral(na, la, L, k)
    total += float(np.sum(w * f / (energy - 0.5 * k**2) * k))
    return complex(total + _tail(nb, lb, na, la, L, energy, _K_PANELS[-1]), 0.0)


def _tail(nb, lb, na, la, L, energy, k_max) -> float:
    """∫ from k_max to ∞ of the continuum integrand, as a power law fitted at k_max (its size is
    below 1e-9 of the whole for bound states of low n)."""
    k = np.array([k_max / 1.2, k_max])
    f = bound_free_integral(nb, lb, L, k) * bound_free_integral(na, la, L, k) * k / (energy - 0.5 * k**2)
    if f[1] == 0 or f[0] == 0 or np.sign(f[0]) != np.sign(f[1]):
        return 0.0
    p = math.log(f[0] / f[1]) / math.log(1.2)          # f ~ k^-p
    return float(f[1] * k_max / (p - 1)) if p > 1 else 0.0


@lru_cache(maxsize=65536)
def radial_dipole_scaled(n1: int, l1: int, n2: int, l2: int) -> float:
    """∫ R_n1l1 R_n2l2 r³ dr for Z = mu = 1."""
    from driven_atom.atom import Atom

    return radial_dipole(Atom(1), n1, l1, n2, l2)


def radial_second_order(atom, upper: tuple[int, int], lower: tuple[int, int], L: int, energy: float) -> complex:
    """S_L(b, a; E) = Σ_k <b|r|k><k|r|a>/(E - E_k) over radial states k of partial wave L, continuum
    included (outgoing: Im < 0 above threshold), in bohr²/hartree for the atom's Z and reduced mass.
    ``upper`` and ``lower`` are (n, l); ``energy`` is E in hartree from the ionisation limit."""
    nb, lb = upper
    na, la = lower
    scale = atom.Z**2 * atom.reduced_mass
    value = _scaled_sum(nb, lb, na, la, L, round(energy / scale, 15))
    return value / (atom.Z**4 * atom.reduced_mass**3)


# --- orbital operators ------------------------------------------------------------------------------
def _absorption(l1: int, m1: int, l2: int, m2: int, coefficients) -> complex:
    """<l1 m1| Σ_q c_q C_q |l2 m2>."""
    return sum(c * angular_factor(l1, m1, l2, m2, q) for q, c in zip((-1, 0, 1), coefficients) if c != 0)


def orbital_second_order(atom, bra: tuple[int, int, int], ket: tuple[int, int, int], first, second,
                         energy: float) -> complex:
    """<b| (second·r) G(E) (first·r) |a> for orbital states b = (n, l, m), a = (n, l, m); ``first``
    and ``second`` are spherical coefficients (q = -1, 0, 1) of the two photons (the first acts on a)."""
    nb, lb, mb = bra
    na, la, ma = ket
    total = 0.0j
    for L in (la - 1, la + 1):
        if L < 0 or abs(L - lb) != 1:
            continue
        angular = sum(_absorption(lb, mb, L, m, second) * _absorption(L, m, la, ma, first)
                      for m in range(-L, L + 1))
        if angular != 0:
            total += angular * radial_second_order(atom, (nb, lb), (na, la), L, energy)
    return total


def _expansion(state, I2: int):
    from driven_atom.atom.components import Component, uncoupled

    if isinstance(state, Component):
        return uncoupled(state, I2 if state.F2 is not None else 0)
    return {(state.m, 0, 0): 1.0}


def coupled_second_order(atom, sublevels, I2: int, pairs, first, second, energy_of) -> np.ndarray:
    """Matrix M[b, a] = <b| (second·r) G(energy_of(a)) (first·r) |a> over ``sublevels`` (Bohr states
    with m or components with m), for the index pairs (b, a) in ``pairs``; spins are spectators."""
    expansions = [_expansion(s, I2) for s in sublevels]
    out = np.zeros((len(sublevels),) * 2, dtype=complex)
    for b, a in pairs:
        sb, sa = sublevels[b], sublevels[a]
        energy = energy_of(a)
        total = 0.0j
        for (ml_a, ms_a, mi_a), xa in expansions[a].items():
            for (ml_b, ms_b, mi_b), xb in expansions[b].items():
                if ms_a == ms_b and mi_a == mi_b:
                    total += xa * xb * orbital_second_order(atom, (sb.n, sb.l, ml_b), (sa.n, sa.l, ml_a),
                                                            first, second, energy)
        out[b, a] = total
    return out


def bohr_energy(atom, n: int) -> float:
    return -atom.Z**2 * atom.reduced_mass / (2.0 * n * n)


def two_photon_matrix(atom, sublevels, I2: int, upper_shell: int, lower_shell: int, omega: float,
                      polarization) -> np.ndarray:
    """T[b, a] with H_ba = (s²/4) T[b, a] for b in ``upper_shell``, a in ``lower_shell``
    (polarisation ``polarization`` = spherical coefficients of ε)."""
    pairs = [(b, a) for b, sb in enumerate(sublevels) for a, sa in enumerate(sublevels)
             if sb.n == upper_shell and sa.n == lower_shell and (sb.l - sa.l) % 2 == 0 and abs(sb.l - sa.l) <= 2]
    return coupled_second_order(atom, sublevels, I2, pairs, polarization, polarization,
                                lambda a: bohr_energy(atom, sublevels[a].n) + omega)


def stark_matrix(atom, sublevels, I2: int, omega: float, polarization) -> np.ndarray:
    """W[a', a] with the ac Stark operator (|s|²/4) W within each shell (a and a' of one n, parity
    equal); complex above threshold (-2 Im W_aa is the ionisation rate per |s|²/4)."""
    conj = np.conj(polarization)
    pairs = [(b, a) for b, sb in enumerate(sublevels) for a, sa in enumerate(sublevels)
             if sb.n == sa.n and (sb.l - sa.l) % 2 == 0 and abs(sb.l - sa.l) <= 2]
    up = coupled_second_order(atom, sublevels, I2, pairs, polarization, conj,
                              lambda a: bohr_energy(atom, sublevels[a].n) + omega)
    down = coupled_second_order(atom, sublevels, I2, pairs, conj, polarization,
                                lambda a: bohr_energy(atom, sublevels[a].n) - omega)
    return up + down


def haas_coefficients(atom, omega: float | None = None) -> dict:
    """The 1S-2S coefficients of Haas et al. (2006) for linear polarisation, in Hz/(W/m²):
    ``beta_ge`` (Ω/2 = 2π β_ge I), ``beta_ac_1s``, ``beta_ac_2s`` (ΔE/h = β_ac I), ``beta_ioni``
    (Γ = 2π β_ioni I, from Im of the 2S sum), at ω = (E_2s - E_1s)/2 (Bohr) unless given.

    >>> from driven_atom.atom import Atom
    >>> round(float(haas_coefficients(Atom(1))["beta_ge"]) * 1e5, 4)       # infinite nuclear mass
    3.6811
    """
    from driven_atom.atom.states import State
    from driven_atom.atom.structure import HARTREE_HZ
    from driven_atom.units import AU_INTENSITY_WCM2

    if omega is None:
        omega = 0.5 * (bohr_energy(atom, 2) - bohr_energy(atom, 1))
    z = [0.0, 1.0, 0.0]                       # linear polarisation along z
    subs = [State(1, 0, 0), State(2, 0, 0)]
    T = two_photon_matrix(atom, subs, 0, 2, 1, omega, z)
    W = stark_matrix(atom, subs, 0, omega, z)
    per_wm2 = 1e-4 / AU_INTENSITY_WCM2         # I = 1 W/m^2 in atomic units; |s|^2 = I for a travelling wave
    quarter = 0.25 * per_wm2 * HARTREE_HZ      # (|s|^2/4) in Hz per (W/m^2), times a matrix element in au
    return {"beta_ge": float(abs(T[1, 0]) * quarter), "beta_ac_1s": float(W[0, 0].real * quarter),
            "beta_ac_2s": float(W[1, 1].real * quarter), "beta_ioni": float(-2 * W[1, 1].imag * quarter)}

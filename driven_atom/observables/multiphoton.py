"""N-photon absorption in lowest-order perturbation theory, from the atom's own radial problem.

The sums over intermediate states (bound and continuum) are done implicitly, by solving
inhomogeneous radial equations (Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955); for multiphoton
ionisation of hydrogen e.g. Gontier & Trahin, Phys. Rev. 172, 83 (1968)): with the absorption part
of the coupling, V₊ = ½√I d (d = z for linear light, the spherical component r_{±1} for circular;
I the cycle-averaged intensity in atomic units, I = F₀² for linear light, docs/physics.md),

    |ψ₀⟩ = |i⟩,   (E_i + kω − H) |ψ_k⟩ = d |ψ_{k−1}⟩   (k = 1 … N−1),
    T_N(l_f) = ⟨E_f l_f| d |ψ_{N−1}⟩,   E_f = E_i + Nω,

and Fermi's golden rule gives the N-photon ionisation rate and the generalised cross section

    W = 2π (I/4)^N Σ_{l_f} |T_N(l_f)|²,   σ_N = W/Φ^N = 2π (2πω/c)^N Σ_{l_f} |T_N(l_f)|²

(Φ = I_phys/ω the photon flux, I_phys = c I/(8π) in atomic units; σ_N in a₀^{2N} t_au^{N−1}). For
N = 1 this is σ = 4π²ω|⟨E|d|i⟩|²/c of docs/physics.md. The same chain gives the two-photon coupling
of two bound states, M = ⟨f|d (E_i + ω − H)⁻¹ d|i⟩ (two-photon Rabi frequency Ω₂ = I|M|/2), and the
dynamic polarisability α(ω) = −⟨i|d[(E_i + ω − H)⁻¹ + (E_i − ω − H)⁻¹]d|i⟩ (light shift −αI/4).

The radial operators are those of the propagation routes (:func:`driven_atom.basis.radial_grid.
numerov_operators`: Numerov-corrected finite differences, so the potential of a model atom enters
here through the same function): with M = 1 + h²Δ/12, (E − H_l) f = g is the tridiagonal system
[−Δ/(2μ) + M(V_l − E)] f = −M g, solved in O(N). Intermediate energies below threshold decay in a
box whose radius follows the slowest decay; above threshold (light shifts of excited states) the
last grid point carries an outgoing wave. Continuum states are the regular solutions of the same
discrete equation, normalised per unit energy by their WKB amplitude √(2μ/(π p(r))) far out.
Bound states are the grid's own eigenvectors (inverse iteration from the analytic R_nl), so every
energy in the chain is that of the discrete Hamiltonian.

Everything is numpy and plain Python (no scipy): a two-photon cross section takes milliseconds.

>>> from driven_atom.atom import Atom, State
>>> s1 = generalized_cross_section(Atom(1), State(1, 0, 0), 0.8, photons=1)   # 0.8 hartree
>>> from driven_atom.atom.photoionization import cross_section
>>> abs(s1 / float(cross_section(Atom(1), 1, 0, 0.8)) - 1) < 2e-3
True
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from driven_atom.errors import InputError
from driven_atom.units import C_AU

STEP = 0.1                     # grid step × Zμ (bohr): bound energies within ~1e-5, k·h ≤ 0.3
DECAY_LENGTHS = 36.0           # box radius: this many 1/κ of the slowest-decaying intermediate state
MIN_BOX = 60.0                 # bohr × Zμ, at least (and 12 n² for the initial state)
MAX_POINTS = 40_000            # grid points at most (near-threshold intermediate energies)


@dataclass
class RadialProblem:
    """The radial equations of ``atom`` on a uniform grid r_i = i·h, i = 1 … n (atomic units)."""

    atom: object
    h: float
    n: int
    _ops: dict = field(default_factory=dict, repr=False)

    @classmethod
    def for_atom(cls, atom, r_max: float, step: float = STEP) -> "RadialProblem":
        scale = atom.Z * atom.reduced_mass
        h = step / scale
        n = int(math.ceil(r_max / h))
        if n > MAX_POINTS:
            raise InputError(f"the perturbative sums need a box of {r_max:.4g} bohr ({n} points, at most "
                             f"{MAX_POINTS}): an intermediate energy lies too close to the threshold")
        return cls(atom, h, n)

    @property
    def r(self) -> np.ndarray:
        return self.h * np.arange(1, self.n + 1, dtype=float)

    def operators(self, l: int):
        """Δ, M and V_l of :func:`driven_atom.basis.radial_grid.numerov_operators` (cached)."""
        if l not in self._ops:
            from driven_atom.basis.radial_grid import RadialGrid, numerov_operators

            self._ops[l] = numerov_operators(RadialGrid(self.h, self.n), l, self.atom)
        return self._ops[l]

    def _rows(self, l: int, E):
        """Sub-, main and super-diagonal of A(E) = −Δ/(2μ) + M diag(V_l − E)."""
        ops = self.operators(l)
        w = ops.potential - E
        k = -0.5 / ops.mu
        main = k * ops.d_diag + ops.m_diag * w
        upper = k * ops.d_off + ops.m_off * w[1:]
        lower = k * ops.d_off + ops.m_off * w[:-1]
        return lower, main, upper

    def apply_m(self, l: int, g: np.ndarray) -> np.ndarray:
        ops = self.operators(l)
        out = ops.m_diag * g
        out[1:] += ops.m_off * g[:-1]
        out[:-1] += ops.m_off * g[1:]
        return out

    def resolvent(self, l: int, E: float, g: np.ndarray) -> np.ndarray:
        """f = (E − H_l)⁻¹ g: zero at the box wall below threshold, an outgoing wave above it."""
        lower, main, upper = self._rows(l, E)
        rhs = -self.apply_m(l, np.asarray(g))
        if E > 0:
            ops = self.operators(l)
            r_end = self.h * (self.n + 1)
            p = math.sqrt(2 * ops.mu * max(E + self.atom.Z / r_end - l * (l + 1) / (2 * ops.mu * r_end**2), 1e-12))
            beyond = -0.5 / ops.mu * ops.d_off[-1] + ops.m_off[-1] * (ops.potential[-1] - E)
            main = main.astype(complex)
            main[-1] += beyond * complex(math.cos(p * self.h), math.sin(p * self.h))
            rhs = rhs.astype(complex)
        return _thomas(lower, main, upper, rhs)

    def bound_state(self, n: int, l: int) -> tuple[float, np.ndarray]:
        """(E, u) of the grid's eigenstate (n, l): inverse iteration from the analytic R_nl at the
        level energy of the atom layer; u normalised as h Σ u² = 1."""
        from driven_atom.atom.radial import radial_function
        from driven_atom.atom.resonance import level_energy
        from driven_atom.atom.states import State

        r = self.r
        u = r * radial_function(self.atom, n, l, r)
        u /= math.sqrt(self.h * float(u @ u))
        E = level_energy(self.atom, State(n, l)) * (1 + 1e-7)       # just off the eigenvalue
        for _ in range(6):
            v = np.real(self.resolvent(l, E, -u))               # (H − E) v = u
            shift = float(u @ v) / float(v @ v)
            v /= math.sqrt(self.h * float(v @ v))
            v *= np.sign(float(v @ u)) or 1.0
            converged = abs(shift) < 1e-12 * abs(E) and np.max(np.abs(v - u)) < 1e-9
            u, E = v, E + shift
            if converged:
                break
        return E, u

    def continuum(self, l: int, E: float) -> np.ndarray:
        """The regular solution of (H_l − E)u = 0 on the grid, normalised per unit energy
        (u → √(2μ/(πk)) sin(kr + …)): outward recurrence, WKB amplitude far out."""
        ops = self.operators(l)
        mu = ops.mu
        k = math.sqrt(2 * mu * E)
        # integrate outward past max(box, 40 wavelengths and Z/(k² r) < 1e-3)
        r_out = max(self.h * self.n, 80 * math.pi / k, 1e3 * self.atom.Z / k**2 / 50)
        n_out = int(math.ceil(r_out / self.h))
        if n_out > 4 * MAX_POINTS:
            raise InputError(f"a continuum state at {E:.3g} hartree needs {n_out} grid points; the "
                             f"photoelectron energy is too close to the threshold")
        big = self if n_out <= self.n else RadialProblem(self.atom, self.h, n_out)
        lower, main, upper = big._rows(l, E)
        u = _recurrence(lower.tolist(), main.tolist(), upper.tolist())
        r = big.r
        p = np.sqrt(2 * mu * (E + self.atom.Z / r - l * (l + 1) / (2 * mu * r**2)).clip(min=1e-300))
        tail = slice(len(u) - max(int(4 * math.pi / (k * self.h)), 8), len(u) - 1)
        u1, u2 = u[tail], u[tail.start + 1:tail.stop + 1]
        ph = 0.5 * (p[tail] + p[tail.start + 1:tail.stop + 1]) * self.h
        amplitude2 = (u1**2 + u2**2 - 2 * u1 * u2 * np.cos(ph)) / np.sin(ph) ** 2
        # u = a √(2μ/(π p)) sin φ  ⇒  a² = amplitude² · π p/(2μ)
        a2 = float(np.mean(amplitude2 * np.pi * 0.5 * (p[tail] + p[tail.start + 1:tail.stop + 1]) / (2 * mu)))
        return np.asarray(u[:self.n]) / math.sqrt(a2)

    def integral(self, a: np.ndarray, b: np.ndarray) -> complex:
        """∫ a b dr on the grid (u(0) = 0: the sum is the trapezoid rule)."""
        return self.h * (a @ b)


def _thomas(lower, main, upper, rhs):
    """Solve the tridiagonal system (sub ``lower``, ``main``, super ``upper``) for ``rhs``."""
    a, b, c, d = lower.tolist(), main.tolist(), upper.tolist(), rhs.tolist()
    n = len(b)
    cp, dp = [0.0] * n, [0.0] * n
    cp[0], dp[0] = c[0] / b[0], d[0] / b[0]
    for i in range(1, n):
        m = b[i] - a[i - 1] * cp[i - 1]
        if i < n - 1:
            cp[i] = c[i] / m
        dp[i] = (d[i] - a[i - 1] * dp[i - 1]) / m
    x = [0.0] * n
    x[-1] = dp[-1]
    for i in range(n - 2, -1, -1):
        x[i] = dp[i] - cp[i] * x[i + 1]
    return np.array(x)


def _recurrence(lower, main, upper):
    """The solution of A u = 0 with u₁ = 1 (regular at the origin), row by row outward."""
    n = len(main)
    u = [0.0] * n
    u[0] = 1.0
    u[1] = -main[0] / upper[0]
    for i in range(1, n - 1):
        u[i + 1] = -(lower[i - 1] * u[i - 1] + main[i] * u[i]) / upper[i]
        if abs(u[i + 1]) > 1e200:                          # under the barrier: rescale
            scale = 1e-200
            u = [x * scale for x in u]
    return np.array(u)


def _couplings(l: int, m: int, q: int):
    """[(l', ⟨l' m+q|C¹_q|l m⟩)] for l' = l ± 1 (the angular factor of one photon)."""
    from driven_atom.atom.dipoles import angular_factor

    out = []
    for lp in (l - 1, l + 1):
        if lp >= abs(m + q):
            a = angular_factor(lp, m + q, l, m, q)
            if a:
                out.append((lp, a))
    return out


def _spherical_component(polarization: str) -> int:
    q = {"linear": 0, "z": 0, "x": 0, "circular": 1, "circular+": 1, "circular-": -1}.get(polarization)
    if q is None:
        raise InputError(f"`polarization` must be linear or circular for perturbative sums, got {polarization!r}")
    return q


def _box(atom, state, energies) -> float:
    """Box radius (bohr): the slowest decay among the bound-like energies, the initial state's extent."""
    mu = atom.reduced_mass
    scale = atom.Z * mu
    kappas = [math.sqrt(2 * mu * -E) for E in energies if E < 0]
    radius = max(MIN_BOX / scale, 12.0 * state.n**2 / scale, *(DECAY_LENGTHS / k for k in kappas))
    return radius


def absorption_chain(problem: RadialProblem, E0: float, u0: np.ndarray, l0: int, m0: int, omega: float,
                     steps: int, q: int = 0) -> dict:
    """{l: d|ψ_{steps−1}⟩ projected on l} after ``steps`` photons: the functions g_l whose overlap
    with a final state ⟨f l| gives the amplitude (module docstring). ``steps`` = 1 returns d|i⟩."""
    r = problem.r
    psi = {l0: u0}
    m = m0
    for k in range(1, steps + 1):
        source: dict = {}
        for l, f in psi.items():
            for lp, a in _couplings(l, m, q):
                source[lp] = source.get(lp, 0) + a * r * f
        m += q
        if k == steps:
            return source
        psi = {l: problem.resolvent(l, E0 + k * omega, g) for l, g in source.items()}
    return {}


def photon_order(ionization_potential: float, omega: float) -> int:
    """Smallest N with Nω > Iₚ.

    >>> photon_order(0.5, 0.3)
    2
    """
    return int(math.floor(ionization_potential / omega)) + 1


def ionization_amplitudes(atom, state, omega: float, photons: int | None = None, polarization: str = "linear"):
    """{l_f: T_N(l_f)} (atomic units) for N-photon ionisation of ``state`` (a State with m; m = 0 if
    None) and the final energy E_f; N defaults to the lowest order."""
    from driven_atom.atom.resonance import level_energy
    from driven_atom.atom.states import State

    q = _spherical_component(polarization)
    m0 = 0 if state.m is None else state.m
    ip = -level_energy(atom, State(state.n, state.l))
    N = photon_order(ip, omega) if photons is None else int(photons)
    if N * omega <= ip:
        raise InputError(f"{N} photons of {omega:.4g} hartree do not reach the threshold ({ip:.4g} hartree)")
    problem = RadialProblem.for_atom(atom, _box(atom, state, [-ip + k * omega for k in range(1, N)]))
    E0, u0 = problem.bound_state(state.n, state.l)
    Ef = E0 + N * omega
    if Ef <= 0:
        raise InputError(f"{N} photons end {Ef:.3g} hartree below the grid's threshold")
    sources = absorption_chain(problem, E0, u0, state.l, m0, omega, N, q)
    return {l: complex(problem.integral(problem.continuum(l, Ef), g)) for l, g in sources.items()}, Ef


def generalized_cross_section(atom, state, omega: float, photons: int | None = None,
                              polarization: str = "linear") -> float:
    """σ_N = 2π(2πω/c)^N Σ|T_N|² in a₀^{2N} t_au^{N−1} (module docstring); N the lowest order
    unless given. Multiply by (BOHR2_CM2)^N · AU_TIME_S^{N−1} for cm^{2N} s^{N−1}."""
    amplitudes, _ = ionization_amplitudes(atom, state, omega, photons, polarization)
    N = photon_count(amplitudes, photons, atom, state, omega)
    return 2 * math.pi * (2 * math.pi * omega / C_AU) ** N * sum(abs(t) ** 2 for t in amplitudes.values())


def photon_count(amplitudes, photons, atom, state, omega) -> int:
    """The N used by :func:`ionization_amplitudes` (given, or the lowest order)."""
    if photons is not None:
        return int(photons)
    from driven_atom.atom.resonance import level_energy
    from driven_atom.atom.states import State

    return photon_order(-level_energy(atom, State(state.n, state.l)), omega)


def rate_coefficient(atom, state, omega: float, photons: int | None = None, polarization: str = "linear"):
    """(N, K_N) with the N-photon ionisation rate W = K_N I^N (I in atomic units of intensity,
    W in 1/t_au): K_N = 2π 4^{−N} Σ|T_N|²."""
    amplitudes, _ = ionization_amplitudes(atom, state, omega, photons, polarization)
    N = photon_count(amplitudes, photons, atom, state, omega)
    return N, 2 * math.pi * 0.25**N * sum(abs(t) ** 2 for t in amplitudes.values())


def two_photon_coupling(atom, lower, upper, omega: float, polarization: str = "linear") -> float:
    """|M| = |⟨u|d (E_l + ω − H)⁻¹ d|l⟩| between two bound states (atomic units); the two-photon
    Rabi frequency is Ω₂ = I|M|/2 (I in atomic units). ``upper`` may carry several levels of one
    energy (a list): then the coupling to their bright combination, √(Σ|M_j|²)."""
    uppers = upper if isinstance(upper, (list, tuple)) else [upper]
    q = _spherical_component(polarization)
    m0 = 0 if lower.m is None else lower.m
    from driven_atom.atom.resonance import level_energy
    from driven_atom.atom.states import State

    e_low = level_energy(atom, State(lower.n, lower.l))
    top = max(s.n for s in uppers)
    problem = RadialProblem.for_atom(atom, max(_box(atom, lower, [e_low + omega]),
                                               12.0 * top**2 / (atom.Z * atom.reduced_mass)))
    E0, u0 = problem.bound_state(lower.n, lower.l)
    sources = absorption_chain(problem, E0, u0, lower.l, m0, omega, 2, q)
    total = 0.0
    for s in uppers:
        if s.l in sources:
            _, uf = problem.bound_state(s.n, s.l)
            total += abs(problem.integral(uf, sources[s.l])) ** 2
    return math.sqrt(total)


def dynamic_polarizability(atom, state, omega: float, polarization: str = "linear") -> complex:
    """α(ω) = −⟨i|d†(E_i + ω − H)⁻¹d|i⟩ − ⟨i|d(E_i − ω − H)⁻¹d†|i⟩ (absorption then emission, and
    emission then absorption (atomic units; for s states the scalar polarisability, 9/2 for H(1s) at ω = 0
    (Dalgarno & Lewis 1955)). Above threshold (E_i + ω > 0) it is complex: Im α = cσ/(4πω)."""
    from driven_atom.atom.resonance import level_energy
    from driven_atom.atom.states import State

    q = _spherical_component(polarization)
    m0 = 0 if state.m is None else state.m
    e0 = level_energy(atom, State(state.n, state.l))
    problem = RadialProblem.for_atom(atom, _box(atom, state, [e0 + omega, e0 - omega]))
    E0, u0 = problem.bound_state(state.n, state.l)
    r = problem.r
    total = 0j
    for sign, qq in ((+1, q), (-1, -q)):           # absorb then emit; emit then absorb
        for lp, a in _couplings(state.l, m0, qq):
            f = problem.resolvent(lp, E0 + sign * omega, a * r * u0)
            total += a * problem.integral(r * u0, f)
    return -complex(total)

"""The grid route: split-operator propagation of partial waves on the shared radial grid.

ψ(r, θ, t) = Σ_l u_l(r, t)/r · Y_l0(θ) on r_i = i·dr (:mod:`driven_atom.basis.radial_grid`, the same
Numerov-corrected H_l as the basis route: one discretisation), linear polarisation along z (m = 0),
in either gauge (docs/physics.md, "Grid route"):

* ``gauge = "length"``, H = H₀ + E(t) z. One step of length dt with the field E at mid-step
  (Strang, second order): U = A·B·C·B·A, C Crank–Nicolson for every H_l over dt; A, B exact 2×2
  rotations exp(−i (dt/2) E r c_l σ_x) on the pairs (l, l+1) with l even (A) and odd (B),
  c_l = (l+1)/√((2l+1)(2l+3)).
* ``gauge = "velocity"``, H = H₀ + A(t) p_z/μ (the A²/2μ term is a phase and dropped). On the pair
  (l, l+1), p_z = −i∂_z is −i c_l [σ_x ⊗ d/dr + iσ_y ⊗ (l+1)/r]; with A at mid-step one step is
  Q_A R_A Q_B R_B · C · R_B Q_B R_A Q_A, R the 1/r part (exact 2×2 orthogonal rotations, Cayley form)
  and Q the d/dr part: on s± = (u_l ± u_{l+1})/√2 the Cayley form (M₁ ± βΔ₁/2)⁻¹(M₁ ∓ βΔ₁/2),
  β = (dt/2)A c_l/μ, of the fourth-order implicit derivative M₁⁻¹Δ₁ (M₁ = tridiag(1, 4, 1)/6,
  Δ₁ = tridiag(−1, 0, 1)/(2dr); Muller, Laser Phys. 9, 138 (1999)). Its corner rows
  M₁₁ = M₁_NN = (4 + δ)/6, Δ₁₁ = −Δ₁_NN = δ/(2dr) with δ² + 4δ + 1 = 0, δ = √3 − 2, make M₁⁻¹Δ₁
  exactly antisymmetric (our derivation: Δ₁M₁ + M₁Δ₁ᵀ = 0 row by row), so every factor is
  unitary. The velocity gauge needs far fewer partial waves in infrared fields: the length-gauge
  state carries the factor e^{iA·r}, with l up to A·r.

Both steps are exactly unitary, so norm is lost only in the absorber at the edge: after each step
the wave function is multiplied by the mask cos^(p·dt/Δt_ref)(π/2·(r − r_a)/w) on the outer width w,
Δt_ref = 0.05 a.u.: the classic cos^(1/8) per step (p = 1/8; Krause, Schafer & Kulander, PRA 45,
4998 (1992)) at dt = Δt_ref, scaled so that the absorption per unit time does not depend on dt.
After the pulse the run goes on field free for ``after`` (a.u.), the electrons leaving the atom.

Observables (all in atomic units):

* populations: |⟨φ_nl|u_l⟩|² with φ_nl the grid's own field-free eigenvectors (E < 0), labelled
  "1s", "1s0", ... for n ≤ ``label_n_max``; in the velocity gauge they are those of the
  velocity-gauge state, which agree with the length gauge where A = 0 (at the end of the run);
* ``ionization`` = 1 − Σ over *all* bound (E < 0) grid eigenstates of every l ≤ l_max;
* series: ``norm``, ``ionization``, ``dipole_z`` = ⟨z⟩ and ``acceleration_z`` (Ehrenfest,
  :mod:`driven_atom.observables.harmonics`); every step also keeps ⟨z⟩, the velocity ⟨p_z + A⟩/μ
  (velocity gauge; ⟨p_z⟩/μ in the length gauge) and the acceleration (spectra["dipole_response"]),
  which over the pulse give spectra["harmonics"] in the acceleration, dipole and velocity forms;
* photoelectron spectra (``photoelectron_methods``), each angle resolved: "surface_flux" (t-SURFF,
  :mod:`driven_atom.observables.surface_flux`: the five rows around the surface radius R are copied
  every step and the flux summed while the run goes on; the potential is tapered to zero between
  R − w and R, w = min(20 bohr, R/4), so beyond R the electron is free), "window" and "projection"
  (the final state; :mod:`driven_atom.observables.photoelectron`).

Defaults derived from the pulse (documented on :class:`driven_atom.settings.GridSettings` and returned by
:func:`grid_parameters`): quiver radius α₀ = F/(μω²), Uₚ = F²/(4μω²), highest expected electron
energy E_max = max(10 Uₚ, 3ω, I_p) and its momentum k_max = √(2μE_max).

Checkpoints (owned by :class:`driven_atom.routes.base.Route`): at deterministic step boundaries
(history samples and multiples of 256 steps) the state, step index, per-step observables, sampled
histories and the surface-flux sums go into the run's checkpoint file whenever
``checkpoint_every`` (steps or wall time) has passed, and at a stop signal; where checkpoints fall
never changes the arithmetic, so a resumed run ends with arrays bit for bit equal to an
uninterrupted one.
"""
from __future__ import annotations

import math
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from driven_atom.atom.states import State
from driven_atom.errors import InputError
from driven_atom.routes.base import Knob, Outcome, Route
from driven_atom.routes.quality import assess
from driven_atom.settings import GridSettings

L_FACTOR = {"length": 1.6, "velocity": 0.8}   # default l_max: this many times the returning angular momentum
L_NEEDED = {"length": 1.0, "velocity": 0.5}   # preflight: l_max below this many times it is flagged
QUIVER_RADII = 5.0            # default inner box: this many quiver radii + 20 bohr (slow, Rydberg-bound electrons
                              # wander out several quiver radii: at 3 the 800 nm, 1e14 W/cm^2 yield moves ~1 %)
MASK_DT_REF = 0.05          # a.u. time: the mask exponent p is per this much time
CHUNK_MAX = 256             # longest kernel call in steps (granularity of checkpoints and stop signals)
SMALL_GRID = 600            # below this many points the bound states come from the dense solver
DERIVATIVE_CORNER = math.sqrt(3) - 2   # δ of the corner rows of d/dr (velocity gauge): M₁⁻¹Δ₁ antisymmetric
SURFACE_MARGIN = 2.0        # bohr between the flux sphere and the absorber
RYDBERG_N_KEPT = 6          # flux runs of multiphoton pulses: the cut potential should hold the levels up to this n
TAPER_MAX = 20.0            # bohr: the potential goes to zero over min(this, R/4) below the flux sphere
FLUX_SAMPLE_AU = 0.25       # the flux is summed every few steps, at most this far apart (0.1 gave the 800 nm,
                            # 1e14 W/cm^2 per-order yields of benchmarks/strong_field.py to 5 digits alike)
ABSORBER_WAVELENGTHS = 1.5  # flux runs: the mask spans this many de Broglie wavelengths of the slowest electrons
FINAL_STATE_METHODS = ("window", "projection")
HARMONIC_ORDERS_KEPT = 3.0  # harmonic spectra are stored up to this many times the cutoff order (at least 20)
VELOCITY_STEP_COST = 3.0    # a velocity-gauge step with the field on, in length-gauge steps (benchmarks/grid.py)
MODEL_DR = 0.05             # model atoms: default dr at most this (He 1s within 4e-5 of its converged value) ...
MODEL_DR_Z = 0.36           # ... and this over the nuclear charge (Ar 3p: 6.5e-5 at 0.02; the core needs it)


@dataclass(frozen=True)
class GridParameters:
    """Resolved numbers of one run (atomic units)."""

    r_max: float
    dr: float
    l_max: int
    dt: float
    n_steps: int                    # all steps: the pulse and the field-free time after it
    absorber_width: float
    quiver_radius: float
    e_max: float
    up: float = 0.0                 # ponderomotive energy of the summed carriers
    ip: float = 0.5                 # ionisation potential of the initial state
    omega_max: float = 0.0          # highest carrier frequency
    spectrum_radius: float = 0.0    # inner radius that keeps the photoelectrons until the pulse ends
    n_pulse_steps: int = 0          # steps over the pulse window
    after: float = 0.0              # field-free time after the pulse (a whole number of steps)
    surface_radius: float = 0.0     # flux sphere (0: none)
    energies: tuple = ()            # photoelectron energies (hartree)


def lowest_photon(pulse) -> float:
    """The lowest carrier frequency of the pulse (hartree), 0 without one (a static field)."""
    return min((c.omega for c in pulse.components if c.omega > 0), default=0.0)


def _pulse_scales(atom, pulse) -> tuple[float, float, float, float]:
    """(α₀, Uₚ, ω_max, F_static): quiver radius and ponderomotive energy of the summed carriers
    (amplitudes add, lowest frequency) and the static field, for the defaults."""
    mu = atom.reduced_mass
    osc = [c for c in pulse.components if c.omega > 0]
    static = sum(c.peak_field for c in pulse.components if c.omega == 0)
    if not osc:
        return 0.0, 0.0, 0.0, static
    f = sum(c.peak_field for c in osc)
    w = lowest_photon(pulse)
    return f / (mu * w**2), f**2 / (4 * mu * w**2), max(c.omega for c in osc), static


def photoelectron_energies(settings: GridSettings, e_max: float) -> np.ndarray:
    """The energies of every photoelectron spectrum of a run: ``photoelectron_points`` evenly from
    ``photoelectron_e_min`` to ``photoelectron_e_max`` (default ``e_max``). The default lowest
    energy is the spacing top/points when the surface flux is asked for (its slowest electrons set
    the time after the pulse), else a tenth of it: the window and the projection then also hold the
    electrons just above threshold (below the spacing they were 5 % of the yield at 800 nm).

    >>> flux = GridSettings(photoelectron_points=4, photoelectron_methods=["surface_flux"], gauge="velocity")
    >>> photoelectron_energies(flux, 2.0).tolist()
    [0.5, 1.0, 1.5, 2.0]
    >>> photoelectron_energies(GridSettings(photoelectron_points=4, photoelectron_methods=["window"]), 2.0).round(6).tolist()
    [0.05, 0.7, 1.35, 2.0]
    """
    top = settings.photoelectron_e_max if settings.photoelectron_e_max is not None else e_max
    spacing = top / settings.photoelectron_points
    default_low = spacing if "surface_flux" in settings.photoelectron_methods else spacing / 10
    low = settings.photoelectron_e_min if settings.photoelectron_e_min is not None else default_low
    if not low < top:
        raise InputError(f"`solver.photoelectron_e_min` = {low:g} hartree must be below the highest energy "
                         f"{top:g} hartree (`solver.photoelectron_e_max`)")
    return np.linspace(low, top, settings.photoelectron_points)


def default_surface_radius(alpha0: float, size: float, rydberg_charge: float = 0.0) -> float:
    """The flux sphere's default radius: 5 quiver radii + 20 bohr and at least the room of the
    initial state, 40 times its size n²/(Zμ) (the same rule as the default box); for a multiphoton
    pulse (``rydberg_charge`` Z_c > 0) also room for the Rydberg levels up to n = 6 inside the
    taper, 2·6²/Z_c + 20 bohr (the check ``rydberg_levels_cut``).

    >>> round(default_surface_radius(16.46, 1.0, 1.0), 6), default_surface_radius(10.2, 1.0, 1.0)
    (102.3, 92.0)
    """
    rydberg = 2 * RYDBERG_N_KEPT**2 / rydberg_charge + TAPER_MAX if rydberg_charge > 0 else 0.0
    return max(40.0 * size, QUIVER_RADII * alpha0 + 20.0, rydberg)


def grid_parameters(atom, pulse, settings: GridSettings, n_initial: int = 1,
                    l_initial: int = 0) -> GridParameters:
    """Grid, partial waves and step of a run: the user's values, else defaults from the pulse.

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.pulse import Pulse
    >>> p = Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 4})
    >>> g = grid_parameters(Atom(1), p, GridSettings())
    >>> round(g.quiver_radius, 1), g.dr, g.l_max
    (16.5, 0.1, 32)
    >>> grid_parameters(Atom(1), p, GridSettings(gauge="velocity")).l_max
    16
    """
    mu, Z = atom.reduced_mass, atom.Z
    methods = settings.photoelectron_methods
    flux = "surface_flux" in methods
    if settings.gauge == "velocity" and any(c.envelope_kind == "static" for c in pulse.components):
        raise InputError('`solver.gauge` = "velocity" needs pulses whose vector potential ends at zero; a static '
                         'field (envelope = "static") has A growing without bound: use gauge = "length"')
    alpha0, up, w_max, f_static = _pulse_scales(atom, pulse)
    if atom.model is None:
        ip = Z**2 * mu / (2 * n_initial**2)
        size = n_initial**2 / (Z * mu)
    else:                                     # a model atom: its own converged level (basis.model_levels)
        from driven_atom.basis.model_levels import energy

        ip = -energy(atom, State(n_initial, l_initial))
        size = (atom.model.charge / math.sqrt(2 * ip)) ** 2 / atom.model.charge     # n*²/Z_c
    e_max = max(10 * up, 3 * w_max, ip)
    k_max = math.sqrt(2 * mu * e_max)
    if settings.dr is not None:
        dr = settings.dr
    elif atom.model is None:
        dr = min(0.1 / Z, 0.5 / k_max)
    else:
        dr = min(MODEL_DR, MODEL_DR_Z / Z, 0.5 / k_max)
    window = pulse.t_end - pulse.t_start
    spectrum_radius = photoelectron_radius(up, w_max - ip, alpha0, window, mu)
    energies = photoelectron_energies(settings, e_max) if methods else np.zeros(0)
    surface = 0.0
    if flux:
        charge = atom.asymptotic_charge if multiphoton(pulse, ip) else 0.0
        surface = (settings.surface_radius if settings.surface_radius is not None
                   else default_surface_radius(alpha0, size, charge))
    if settings.r_max is not None:
        r_max = settings.r_max
        width = min(max(20.0, 0.2 * r_max), 0.5 * r_max)
        if flux and not any(m in methods for m in FINAL_STATE_METHODS):     # as wide as the default flux box's
            slowest = 2 * math.pi / math.sqrt(2 * mu * float(energies[0]))
            width = max(width, min(ABSORBER_WAVELENGTHS * slowest, r_max - surface - SURFACE_MARGIN))
        if settings.absorber_width is not None:
            width = settings.absorber_width
    else:
        inner = max(40.0 * size, QUIVER_RADII * alpha0 + 20.0)
        if f_static > 0:
            inner = max(inner, 2 * ip / f_static + 40.0)    # beyond the tunnel exit I_p/F
        width = max(20.0, 0.2 * inner)
        if flux:
            inner = surface + SURFACE_MARGIN                # the box beyond the sphere only absorbs
            slowest = 2 * math.pi / math.sqrt(2 * mu * float(energies[0]))
            width = max(20.0, 0.2 * inner, ABSORBER_WAVELENGTHS * slowest)   # a mask narrower reflects them
        if any(m in methods for m in FINAL_STATE_METHODS):
            inner = max(inner, spectrum_radius)             # the spectrum needs its electrons in the box
            width = max(20.0, 0.2 * inner)
        if settings.absorber_width is not None:
            width = settings.absorber_width
        r_max = inner + width
    if settings.absorber == "none":
        width = 0.0
    if not 0 <= width < r_max:
        raise InputError(f"`solver.absorber_width` must be >= 0 and below r_max = {r_max:g} bohr, "
                         f"got {width:g}")
    if flux and not 4 * dr < surface < r_max - 3 * dr:
        raise InputError(f"`solver.surface_radius` must lie inside the box (below r_max = {r_max:g} bohr), "
                         f"got {surface:g}")
    if settings.l_max is not None:
        l_max = settings.l_max
    else:
        factor = L_FACTOR[settings.gauge]
        l_max = max(8, l_initial + 6, math.ceil(factor * returning_l(alpha0, up, mu)),
                    multiphoton_l(ip, up, lowest_photon(pulse), l_initial))
    if settings.dt is not None:
        dt_max = settings.dt
    else:
        dt_max = min(0.05, 0.1 / e_max, (2 * math.pi / w_max) / 400 if w_max > 0 else math.inf)
    n_pulse = max(1, math.ceil(window / dt_max - 1e-9))
    dt = window / n_pulse
    if settings.after is not None:
        after = settings.after
    elif flux:
        after = surface * math.sqrt(mu / (2 * float(energies[0])))   # the slowest electrons of interest reach R
    else:
        after = 0.0
    n_after = math.ceil(after / dt - 1e-9) if after > 0 else 0
    return GridParameters(r_max=r_max, dr=dr, l_max=l_max, dt=dt, n_steps=n_pulse + n_after,
                          absorber_width=width, quiver_radius=alpha0, e_max=e_max, up=up, ip=ip,
                          omega_max=w_max, spectrum_radius=spectrum_radius, n_pulse_steps=n_pulse,
                          after=n_after * dt, surface_radius=surface, energies=tuple(energies.tolist()))


def potential_taper(r, radius: float, width: float) -> tuple[np.ndarray, np.ndarray]:
    """(s, ds/dr) of the smooth step s = 1 for r ≤ R − w, cos²(π/2 · (r − R + w)/w) up to R, 0
    beyond: the flux route multiplies the potential by it, so that the electron is free beyond R.

    >>> s, d = potential_taper(np.array([5.0, 9.0, 10.0, 12.0]), 10.0, 2.0)
    >>> s.round(6).tolist()
    [1.0, 0.5, 0.0, 0.0]
    """
    r = np.asarray(r, dtype=float)
    x = np.clip((r - (radius - width)) / width, 0.0, 1.0)
    s = np.cos(0.5 * np.pi * x) ** 2
    ds = np.where((x > 0) & (x < 1), -(np.pi / (2 * width)) * np.sin(np.pi * x), 0.0)
    return s, ds


class TaperedAtom:
    """``atom`` with its potential V multiplied by the flux route's smooth step s(r)
    (:func:`potential_taper`): the potential a surface-flux run propagates in, so that its bound
    states (the ionisation yield, the initial state) are those of the same Hamiltonian. Every other
    attribute is the atom's.

    >>> from driven_atom.atom import Atom
    >>> t = TaperedAtom(Atom(1), 10.0, 2.0)
    >>> t.potential(np.array([1.0, 9.0, 11.0])).round(6).tolist(), t.Z
    ([-1.0, -0.055556, -0.0], 1)
    """

    def __init__(self, atom, radius: float, width: float):
        self.atom, self.radius, self.width = atom, float(radius), float(width)
        self.free_beyond = self.radius

    def __getattr__(self, name):
        if name == "atom":                       # not yet set (a copy being built): no recursion
            raise AttributeError(name)
        return getattr(self.atom, name)

    def potential(self, r, l: int = 0):
        return potential_taper(r, self.radius, self.width)[0] * self.atom.potential(r, l)


def returning_l(alpha0: float, up: float, mu: float) -> float:
    """Angular momentum of an electron returning with 3.17 Uₚ at the quiver radius α₀:
    L = α₀·√(2μ·3.17 Uₚ) (the classical cutoff energy, Corkum, PRL 71, 1994 (1993)).

    >>> round(returning_l(16.46, 0.2204, 1.0), 1)
    19.5
    """
    return alpha0 * math.sqrt(6.34 * mu * up)


def multiphoton_l(ip: float, up: float, omega: float, l_initial: int = 0) -> int:
    """Partial waves that n-photon ionisation reaches: each photon changes l by one (the dipole
    rule), and n = ⌈(Iₚ + Uₚ)/ω⌉ photons of the lowest carrier ω cross the shifted threshold; three
    more for the first above-threshold orders. Below the tunnelling regime this, not the returning
    angular momentum, sets l_max (800 nm, 3.85e13 W/cm², 8 cycles: l_max = 8 left the yield 3.6 %
    low; 14 and 20 agree to 1e-5).

    >>> multiphoton_l(0.5, 0.0845, 0.057)
    14
    >>> multiphoton_l(0.5, 0.0, 1.0)                         # one photon
    4
    """
    if omega <= 0:
        return 0
    return l_initial + math.ceil((ip + up) / omega - 1e-9) + 3


def multiphoton(pulse, ip: float) -> bool:
    """Whether the lowest carrier's photon is below the ionisation potential (Rydberg states get
    populated on the way up)."""
    return 0 < lowest_photon(pulse) < ip


def photoelectron_radius(up: float, one_photon_energy: float, alpha0: float, window: float, mu: float) -> float:
    """Inner radius that keeps the photoelectrons on the grid until the pulse ends: the slow
    (direct, up to 2 Uₚ, or one-photon ω − Iₚ) electrons for the whole window, the rescattered
    ones (up to 10 Uₚ) born at the peak for half of it, plus three quiver radii and 20 bohr.

    >>> round(photoelectron_radius(0.2204, -0.44, 16.46, 441.2, 1.0))
    533
    """
    direct = math.sqrt(2 * max(2 * up, one_photon_energy, 0.0) / mu) * window
    rescattered = math.sqrt(2 * 10 * up / mu) * window / 2
    return max(direct, rescattered) + 3 * alpha0 + 20.0


def mask_profile(r, r_max, width, power=0.125) -> np.ndarray:
    """cos^p(π/2·(r − r_a)/w) for r > r_a = r_max − w, else 1 (edge absorber).

    >>> mask_profile(np.array([1.0, 9.0]), 10.0, 2.0).round(4).tolist()
    [1.0, 0.9576]
    """
    r = np.asarray(r, dtype=float)
    if width <= 0:
        return np.ones_like(r)
    x = np.clip((r - (r_max - width)) / width, 0.0, 1.0)
    return np.cos(0.5 * np.pi * x) ** power


def bound_states(grid, l: int, atom) -> tuple[np.ndarray, np.ndarray]:
    """Field-free bound states (E < 0) of partial wave ``l`` on ``grid``: energies ascending and
    columns with Σᵢ|uᵢ|² = 1, the first lobe positive.

    Small grids use :func:`driven_atom.basis.radial_grid.eigenstates`; larger ones the same operator
    through shift-invert Lanczos (ARPACK), (H − σ)⁻¹ = (K − σM)⁻¹M with K = −Δ/2μ + M·V a banded
    solve, a fixed start vector so the result is reproducible.

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.basis.radial_grid import uniform_grid
    >>> E, U = bound_states(uniform_grid(80.0, 0.1), 1, Atom(1))
    >>> round(float(E[0]), 5), U.shape[1] == E.size
    (-0.125, True)
    """
    from scipy.linalg import solve_banded
    from scipy.sparse.linalg import LinearOperator, eigsh

    from driven_atom.basis.radial_grid import eigenstates, numerov_operators, reproducible_blas

    n = grid.n_points
    if n <= SMALL_GRID:
        return eigenstates(grid, l, atom, e_max=0.0)
    ops = numerov_operators(grid, l, atom)
    sigma = -atom.Z**2 * atom.reduced_mass / (2 * (l + 1) ** 2) * 1.05 - 1e-3
    v = ops.potential - sigma
    ab = np.zeros((3, n))
    ab[0, 1:] = -ops.d_off / (2 * ops.mu) + ops.m_off * v[1:]
    ab[1] = -ops.d_diag / (2 * ops.mu) + ops.m_diag * v
    ab[2, :-1] = -ops.d_off / (2 * ops.mu) + ops.m_off * v[:-1]

    def m_times(x):
        y = ops.m_diag * x
        y[1:] += ops.m_off * x[:-1]
        y[:-1] += ops.m_off * x[1:]
        return y

    op_inv = LinearOperator((n, n), matvec=lambda x: solve_banded((1, 1), ab, m_times(np.ravel(x))),
                            dtype=float)
    a = LinearOperator((n, n), matvec=lambda x: ops.apply(np.ravel(x)), dtype=float)
    if atom.model is None:
        n_fit = int(math.sqrt(atom.Z * atom.reduced_mass * grid.r_max / 2)) + 1
    else:                                   # Rydberg states of the ion's charge, above the core shells
        n_fit = int(math.sqrt(atom.model.charge * atom.reduced_mass * grid.r_max / 2)) + 1 + atom.model.ground.n
    k = min(n - 2, max(1, n_fit - l) + 4)
    while True:
        with reproducible_blas():
            energies, vectors = eigsh(a, k=k, sigma=sigma, OPinv=op_inv, which="LM", v0=np.ones(n),
                                      tol=0)
        order = np.argsort(energies)
        energies, vectors = energies[order], vectors[:, order]
        if energies[-1] >= 0 or k >= n - 2:
            break
        k = min(n - 2, 2 * k)
    keep = energies < 0
    energies, vectors = energies[keep], vectors[:, keep]
    vectors /= np.linalg.norm(vectors, axis=0)
    mag = np.abs(vectors)
    if vectors.shape[1]:
        first = np.argmax(mag > 1e-3 * mag.max(axis=0), axis=0)
        signs = np.sign(vectors[first, np.arange(vectors.shape[1])])
        vectors = vectors * np.where(signs == 0, 1.0, signs)
    return energies, vectors


def coupling_coefficients(l_max: int) -> np.ndarray:
    """c_l = ⟨l 0|cosθ|l+1 0⟩ = (l+1)/√((2l+1)(2l+3)) for l = 0..l_max (docs/physics.md).

    >>> coupling_coefficients(1).round(6).tolist()
    [0.57735, 0.516398]
    """
    l = np.arange(l_max + 1, dtype=float)
    return (l + 1) / np.sqrt((2 * l + 1) * (2 * l + 3))


class _Stepper:
    """The propagation state and its arrays, prepared and stacked once in the kernels' layout
    (:mod:`driven_atom.routes._grid_kernels`): state, Thomas factors, operators, mask, scratch. The
    state is held as real and imaginary parts, columns even l then odd l; :meth:`state` and
    :meth:`set_state` convert exactly (no arithmetic).

    ``gauge`` picks the kernel ("length": the drive is E(t); "velocity": A(t)); ``surface_row`` ≥ 2
    makes every step copy the five rows around it (the surface-flux rows, :meth:`surface_values`).
    """

    def __init__(self, grid, atom, n_l: int, dt: float, mask, threads: int, gauge: str = "length",
                 surface_row: int = -1):
        from driven_atom.basis.radial_grid import numerov_operators
        from driven_atom.routes import _grid_kernels as kernels

        self.kernels = kernels
        self.gauge = gauge
        n = grid.n_points
        ops = [numerov_operators(grid, l, atom) for l in range(n_l)]
        ref = ops[-1]                                # rows >= 1 are the same for every l
        for o in ops:
            if not (np.array_equal(o.m_diag[1:], ref.m_diag[1:]) and np.array_equal(o.d_diag[1:], ref.d_diag[1:])
                    and np.array_equal(o.m_off, ref.m_off) and np.array_equal(o.d_off, ref.d_off)):
                raise RuntimeError("radial_grid operators differ between l beyond the first row")
        self.order = np.r_[np.arange(0, n_l, 2), np.arange(1, n_l, 2)]   # column j holds l = order[j]
        self.column_of = np.argsort(self.order)
        r = grid.r
        mu = atom.reduced_mass
        cent = np.array([l * (l + 1) / (2 * mu) for l in range(n_l)])
        self.rows = np.zeros((8, n))                 # off-diagonals padded with a zero
        self.cols = np.zeros((3, n_l))
        self.a = a = dict(m_diag=self.rows[0], d_diag=self.rows[1], coul=self.rows[2], invr2=self.rows[3],
                          m_off=self.rows[4, :-1], d_off=self.rows[5, :-1], invr=self.rows[6], force=self.rows[7],
                          m_first=self.cols[0], d_first=self.cols[1], cent=self.cols[2])   # named views
        a["m_diag"][:], a["d_diag"][:] = ref.m_diag, ref.d_diag
        a["m_off"][:], a["d_off"][:] = ref.m_off, ref.d_off
        if atom.l_dependent:
            raise InputError(_L_DEPENDENT.format(species=atom.species))
        a["coul"][:], a["invr2"][:], a["invr"][:] = atom.potential(r, 0), 1.0 / r**2, 1.0 / r   # −Z/r, or the model's V(r)
        # dV/dr of the potential in "coul": exact for −Z/r; a model atom's by differences (its harmonic
        # acceleration comes from the dipole instead, see GridRoute._finish)
        a["force"][:] = atom.Z / r**2 if atom.model is None else np.gradient(a["coul"], r)
        a["m_first"][:] = np.array([o.m_diag[0] for o in ops])[self.order]
        a["d_first"][:] = np.array([o.d_diag[0] for o in ops])[self.order]
        a["cent"][:] = cent[self.order]
        self.consts = np.array([0.5 * dt, 0.5 / mu, grid.dr, 1.0 / mu])     # tau, 1/(2 mu), dr, 1/mu
        self.deriv = np.array([4 / 6, 1 / 6, (4 + DERIVATIVE_CORNER) / 6, DERIVATIVE_CORNER])
        c = coupling_coefficients(n_l - 1)
        na, nb = n_l // 2, (n_l + 1) // 2 - 1
        p = max(1, na, nb)
        self.coupling = np.zeros((2, p))
        self.coupling[0, :na] = c[0:2 * na:2]        # pairs (2p, 2p+1)
        self.coupling[1, :nb] = c[1:2 * nb:2]        # pairs (2p+1, 2p+2)
        self.mask = np.ascontiguousarray(mask, dtype=float)
        below = np.nonzero(self.mask < 1.0)[0]
        self.i_abs = int(below[0]) if below.size else n
        self.i_surf = surface_row - 2 if surface_row >= 2 else -1
        self.thomas = np.zeros((4, n, n_l))
        self.refactor()
        self.psi = np.zeros((2, n, n_l))
        self.threads = threads
        keep = np.zeros((5, 2, n_l))
        if gauge == "velocity":
            if threads != 1:
                raise InputError("`solver.threads` > 1 runs the length-gauge kernel only; give threads = 1 "
                                 "with `solver.gauge` = \"velocity\"")
            self.scratch = (np.zeros((6, n_l)), keep, np.zeros((18, p)), np.zeros((2, n, p)), np.zeros((4, p)))
        elif threads == 1:
            self.scratch = (np.zeros((6, n_l)), np.zeros((8, p)), np.zeros((8, p)), keep)
        else:
            cblock = -(-n_l // threads)               # one block of partial waves per thread
            self.rblock = 64
            nrb = -(-n // self.rblock)
            self.scratch = (np.zeros((-(-n_l // cblock), 6, cblock)), np.zeros((nrb, 8, p)), np.zeros((8, p)), keep)

    def taper(self, s, ds):
        """Multiply the potential by the smooth step s(r) (derivative ds/dr), V → sV and
        dV/dr → s dV/dr + V ds/dr, and refactor (whatever the potential is)."""
        a = self.a
        a["force"][:] = s * a["force"] + a["coul"] * ds
        a["coul"][:] = s * a["coul"]
        self.refactor()

    def refactor(self):
        """(Re)compute the Thomas factors from ``rows``, ``cols`` and ``consts``."""
        self.kernels.cn_factorize(self.rows, self.cols, self.consts, self.thomas)

    def set_state(self, psi):
        """Load ψ[i, l] (complex, natural l order)."""
        self.psi[0] = psi.real[:, self.order]
        self.psi[1] = psi.imag[:, self.order]

    def state(self) -> np.ndarray:
        """ψ[i, l] (complex, natural l order), a new array."""
        psi = np.empty(self.psi.shape[1:], complex)
        psi.real[:, self.order] = self.psi[0]
        psi.imag[:, self.order] = self.psi[1]
        return psi

    def column(self, l: int) -> np.ndarray:
        """u_l(r_i) as a complex vector."""
        j = self.column_of[l]
        return self.psi[0, :, j] + 1j * self.psi[1, :, j]

    def surface_values(self, surface) -> np.ndarray:
        """The rows a run copied (``surface`` (k, 2, 5, L), kernel layout) as complex u[k, row, l]
        in natural l order."""
        out = np.empty(surface.shape[:1] + surface.shape[2:], complex)
        out.real[:, :, self.order] = surface[:, 0]
        out.imag[:, :, self.order] = surface[:, 1]
        return out

    def run(self, drive, out, surface=None):
        """Advance the state by len(drive) steps (``drive``: the mid-step E(t) in the length gauge,
        A(t) in the velocity gauge); ``out`` (k, 4) gets norm, ⟨z⟩, ⟨cosθ/r²⟩, ⟨p_z⟩ after each
        step and ``surface`` (k, 2, 5, L), when given, the surface rows."""
        drive = np.ascontiguousarray(drive, dtype=float)
        if out.shape != (drive.size, 4) or out.dtype != np.float64:    # the kernels do not check bounds
            raise ValueError(f"`out` must be a ({drive.size}, 4) float array, got {out.shape} {out.dtype}")
        if surface is None:
            surface, i_surf = np.zeros((0, 2, 5, self.psi.shape[2])), -1
        else:
            if surface.shape != (drive.size, 2, 5, self.psi.shape[2]):
                raise ValueError(f"`surface` must have the shape {(drive.size, 2, 5, self.psi.shape[2])}, "
                                 f"got {surface.shape}")
            i_surf = self.i_surf
        if self.gauge == "velocity":
            self.kernels.propagate_chunk_velocity(self.psi, self.thomas, self.rows, self.cols, self.consts,
                                                  self.coupling, drive, self.mask, self.i_abs, self.scratch,
                                                  self.deriv, out, surface, i_surf)
            return
        args = (self.psi, self.thomas, self.rows, self.cols, self.consts, self.coupling, drive,
                self.mask, self.i_abs, self.scratch)
        if self.threads == 1:
            self.kernels.propagate_chunk(*args, out, surface, i_surf)
        else:
            partial = np.zeros((drive.size, self.scratch[1].shape[0], 4))
            with _numba_threads(self.threads):
                self.kernels.propagate_chunk_parallel(*args, partial, self.rblock, surface, i_surf)
            self.kernels.reduce_partial(partial, out)


@contextmanager
def _numba_threads(threads: int):
    """Run numba's parallel kernels on ``threads`` threads (at most NUMBA_NUM_THREADS) and restore
    the previous count afterwards.

    If the process has chosen no threading layer and none is running yet, this picks workqueue:
    it needs no TBB/OpenMP and is enough for a bandwidth-bound step. A layer already chosen or
    running is left alone (it cannot change once started)."""
    import numba

    try:
        numba.threading_layer()
    except ValueError:                           # not started: the choice is still open
        if numba.config.THREADING_LAYER == "default":
            numba.config.THREADING_LAYER = "workqueue"
    before = numba.get_num_threads()             # starts the layer
    numba.set_num_threads(min(threads, numba.config.NUMBA_NUM_THREADS))
    try:
        yield
    finally:
        numba.set_num_threads(before)


def _model_energy(atom, state) -> float:
    from driven_atom.basis.model_levels import energy

    return energy(atom, state)


def _initial_psi(initial, bound, n, n_l) -> np.ndarray:
    psi = np.zeros((n, n_l), complex)
    for state, amp in initial:
        if state.m not in (None, 0):
            raise InputError(f"`atom.initial` {state.label!r}: the grid route is for linear "
                             f"polarisation along z and needs m = 0 states")
        if state.l >= n_l:
            raise InputError(f"`atom.initial` {state.label!r} needs l_max >= {state.l}")
        energies, vectors = bound[state.l]
        j = state.n - state.l - 1
        if j >= energies.size:
            raise InputError(f"`atom.initial` {state.label!r} is not bound on this grid; "
                             f"raise `solver.r_max`")
        psi[:, state.l] += amp * vectors[:, j]
    return psi


_L_DEPENDENT = ("`atom.species` = {species!r} has an l-dependent potential, which route \"grid\" does not take "
                "(its kernels hold one V(r) for every partial wave); use route \"basis\" or \"levels\", or "
                "species He, Ne, Ar, Kr, Xe on the grid")


class GridRoute(Route):
    """Split-operator propagation on the radial grid (see the module docstring).

    Sample and slice times are whole multiples of the time step (``time_quantum``); a slice is at
    most :data:`CHUNK_MAX` steps (one kernel call). BLAS runs single-threaded throughout, so a run
    resumed under other thread settings stores the same bits as an uninterrupted one.
    """

    name = "grid"
    Settings = GridSettings
    spectra = ("harmonics", "dipole_response", "photoelectrons")
    counts_steps = True

    @classmethod
    def check(cls, atom, pulse, initial, cfg=None) -> None:
        super().check(atom, pulse, initial, cfg)
        if atom.l_dependent:
            raise InputError(_L_DEPENDENT.format(species=atom.species))
        for state, _ in initial:
            if state.m not in (None, 0):
                raise InputError(f"`atom.initial` {state.label!r}: the grid route is for linear "
                                 f"polarisation along z and needs m = 0 states")
        if cfg is not None and pulse is not None and cfg.solver.gauge == "velocity" and any(
                c.envelope_kind == "static" for c in pulse.components):
            raise InputError('`solver.gauge` = "velocity" needs pulses whose vector potential ends at zero; a '
                             'static field (envelope = "static") has A growing without bound: use gauge = "length"')

    def run(self, **options):
        from driven_atom.basis.radial_grid import reproducible_blas

        with reproducible_blas():
            return super().run(**options)

    resource_fix = "lower `solver.r_max` or `solver.l_max`, raise `solver.dr` or `solver.dt`, or shorten the pulse"

    @classmethod
    def explicit(cls, settings, result):
        """dt, dr, l_max, r_max (and the flux sphere and the time after the pulse) as the run used
        them; the absorber keeps its rule (the user's width, else a fifth of the box), so a larger
        box gets a wider, less reflecting absorber."""
        s = result.stats
        update = {"dt": s["dt"], "dr": s["dr"], "l_max": s["l_max"], "r_max": s["r_max"], "after": s["after"]}
        if s.get("surface_radius"):
            update["surface_radius"] = s["surface_radius"]
        return settings.model_copy(update=update)

    @classmethod
    def knobs(cls, settings) -> list:
        """dt (error ∝ dt²), dr (∝ dr⁴), l_max and r_max (faster than any power); on a flux run also
        the sphere's radius R × 1.5 (the Coulomb tail is cut beyond it), the box and the time after
        the pulse moving with it (the absorber keeps its place beyond the sphere, the slowest
        electrons their time to reach it)."""
        knobs = [Knob("dt", settings.dt, settings.dt / 2, 2 * settings.dt, 2, 2.0),
                 Knob("dr", settings.dr, settings.dr / 2**0.5, settings.dr * 2**0.5, 4, 2**0.5),
                 Knob("l_max", settings.l_max, math.ceil(1.5 * settings.l_max), None, None, 1.5),
                 Knob("r_max", settings.r_max, 1.5 * settings.r_max, None, None, 1.5)]
        if "surface_flux" in settings.photoelectron_methods and settings.surface_radius:
            radius = settings.surface_radius
            knobs.append(Knob("surface_radius", radius, 1.5 * radius, None, None, 1.5,
                              also={"r_max": 0.5 * radius, "after": 0.5 * (settings.after or 0.0)}))
        return knobs

    @classmethod
    def companion(cls, settings, result):
        """dt doubled (error ∝ dt²) and dr stretched by √2 (∝ dr⁴): K = 4; the box, the partial
        waves, the absorber, the flux sphere (its tapered potential) and the time after the pulse as
        the run used them; no photoelectron spectrum of the final state."""
        s = result.stats
        knobs = {"dt": 2 * s["dt"], "dr": s["dr"] * 2**0.5, "r_max": s["r_max"], "l_max": s["l_max"],
                 "absorber_width": s["absorber_width"]}
        update = dict(knobs, after=s["after"],
                      photoelectron_methods=[m for m in settings.photoelectron_methods if m == "surface_flux"])
        if s.get("surface_radius"):
            update["surface_radius"] = s["surface_radius"]
        if settings.absorber == "none":
            update.pop("absorber_width")
        return settings.model_copy(update=update), 4.0, knobs

    def _parameters(self) -> GridParameters:
        n0 = max(st.n for st, _ in self.initial)
        l0 = max(st.l for st, _ in self.initial)
        return grid_parameters(self.atom, self.pulse, self.settings, n_initial=n0, l_initial=l0)

    def estimate_resources(self):
        """Memory: the state and the Crank–Nicolson factors (6 real N×L arrays), copies of the state
        for samples and checkpoints, the bound states of every l (N × about √(Zμ r_max/2) + 5
        vectors) and four numbers per time step; time: N·L·steps at the kernel's speed (the
        velocity gauge's steps while the field is on at three times that), the surface-flux sums
        (angles × energies × partial waves per sample) and the final-state spectra (two banded
        solves per energy and partial wave for the window)."""
        from driven_atom.routes.resources import BOUND_STATES_S_PER_POINT, GRID_NS_PER_POINT_STEP

        par = self._parameters()
        s = self.settings
        n, waves = par.r_max / par.dr, par.l_max + 1
        bound = math.sqrt(self.atom.Z * self.atom.reduced_mass * par.r_max / 2) + 5
        memory = 8.0 * (10 * n * waves + n * waves * bound + 5 * par.n_steps)
        eigen_s = waves * n * BOUND_STATES_S_PER_POINT           # shift-invert Lanczos per partial wave
        samples = min(self.samples_over(par.dt * par.n_steps), par.n_steps + 1.0)
        sample_s = samples * n * waves * (bound + 2) * 2e-9      # projections on the bound states
        pulse_factor = VELOCITY_STEP_COST if s.gauge == "velocity" else 1.0
        steps = par.n_pulse_steps * pulse_factor + (par.n_steps - par.n_pulse_steps)
        seconds = n * waves * steps * GRID_NS_PER_POINT_STEP * 1e-9 + eigen_s + sample_s
        n_e = len(par.energies)
        if "surface_flux" in s.photoelectron_methods:
            angles = self._angles(par)
            flux_samples = par.n_pulse_steps / self._flux_stride(par)
            seconds += flux_samples * angles * n_e * (waves + 30) * 2e-9
            memory += 16.0 * angles * n_e * 18
        if any(m in s.photoelectron_methods for m in FINAL_STATE_METHODS):
            seconds += 2 * n_e * waves * n * 60e-9
        return memory, seconds

    def _angles(self, par) -> int:
        s = self.settings
        return s.photoelectron_angles if s.photoelectron_angles is not None else 2 * par.l_max + 2

    def _flux_stride(self, par) -> int:
        return max(1, int(FLUX_SAMPLE_AU / par.dt + 1e-9))

    def _prepare(self) -> None:
        from driven_atom.basis.radial_grid import uniform_grid

        atom, pulse, s = self.atom, self.pulse, self.settings
        self.par = par = self._parameters()
        self.grid = grid = uniform_grid(par.r_max, par.dr)
        n, n_l = grid.n_points, par.l_max + 1
        self.n_l = n_l
        mask = mask_profile(grid.r, grid.r_max, par.absorber_width, s.mask_power * par.dt / MASK_DT_REF)
        surface_row = int(round(par.surface_radius / grid.dr)) - 1 if par.surface_radius > 0 else -1
        if surface_row >= 0:                     # the run's potential is tapered: so are its bound states
            radius = (surface_row + 1) * grid.dr
            self.taper_width = min(TAPER_MAX, radius / 4)
            self.bound_atom = TaperedAtom(atom, radius, self.taper_width)
        else:
            self.bound_atom = atom
        self.bound = [bound_states(grid, l, self.bound_atom) for l in range(n_l)]
        self.n_l_bound = max((l + 1 for l in range(n_l) if self.bound[l][0].size), default=0)
        self.labelled = [(l, j) for l in range(n_l) for j in range(self.bound[l][0].size)
                         if j + l + 1 <= s.label_n_max]
        self.t_start = t0 = pulse.t_start
        self.t_end = t0 + par.dt * par.n_steps
        self.time_quantum = par.dt
        self.max_slice = CHUNK_MAX * par.dt
        mid = t0 + par.dt * (np.arange(par.n_steps) + 0.5)
        drive = pulse.vector_potential_z(mid) if s.gauge == "velocity" else pulse.field_z(mid)
        self.drive_mid = np.where(np.arange(par.n_steps) < par.n_pulse_steps, drive, 0.0)
        self.per_step = np.zeros((par.n_steps, 4))
        self.flux = None
        self.stepper = _Stepper(grid, atom, n_l, par.dt, mask, s.threads, gauge=s.gauge, surface_row=surface_row)
        if surface_row >= 0:
            self._prepare_flux()

    def _prepare_flux(self) -> None:
        """The tapered potential, the flux accumulator and the sample plan of "surface_flux"."""
        from driven_atom.observables.photoelectron import emission_angles
        from driven_atom.observables.surface_flux import SurfaceFlux, trapezoid_weights, volkov_integral

        par, grid, pulse = self.par, self.grid, self.pulse
        radius = self.bound_atom.radius                            # on the grid row of the sphere
        self.stepper.taper(*potential_taper(grid.r, radius, self.taper_width))
        x, _ = emission_angles(self._angles(par))
        self.flux = SurfaceFlux(np.asarray(par.energies), x, radius=radius, l_max=par.l_max,
                                mu=self.atom.reduced_mass, t0=self.t_start)
        ends = self.t_start + par.dt * np.arange(par.n_steps + 1)
        a_ends = np.where(np.arange(par.n_steps + 1) <= par.n_pulse_steps, pulse.vector_potential_z(ends), 0.0)
        a_mid = np.where(np.arange(par.n_steps) < par.n_pulse_steps, pulse.vector_potential_z(ends[:-1] + par.dt / 2), 0.0)
        self.alpha = volkov_integral(ends, a_ends[:-1], a_mid, a_ends[1:])
        self.a_ends = a_ends
        stride = self._flux_stride(par)
        steps = np.unique(np.r_[np.arange(stride, par.n_steps + 1, stride), par.n_steps])
        self.flux_steps = steps                                     # step ends where the flux is summed
        self.flux_weights = trapezoid_weights(ends[steps], self.t_start)

    def preflight(self) -> list:
        """Before any step: the initial states' energies on this grid against the exact
        −Z²μ/(2n²) (Bethe & Salpeter 1957) — for a model atom against the model's own eigenvalue
        converged on the fine stretched reference grid (:mod:`driven_atom.basis.model_levels`,
        0.001 bohr at the nucleus; computed once per species in ~0.2 s) —, the time step against the fastest phase that matters
        (Iₚ + 3.17 Uₚ, Corkum 1993) and the carrier period, the initial state's norm inside the
        absorber, the box against the quiver radius, l_max against the returning angular momentum
        (the velocity gauge needs half of what the length gauge needs), and for the surface flux:
        the sphere inside the absorber-free region and beyond the quiver motion, and the time
        after the pulse against the slowest electrons of interest."""
        atom, par, grid, s = self.atom, self.par, self.grid, self.settings
        mu, Z = atom.reduced_mass, atom.Z
        checks = []
        worst = 0.0
        for state, _ in self.initial:
            energies = self.bound[state.l][0]
            j = state.n - state.l - 1
            exact = -Z**2 * mu / (2 * state.n**2) if atom.model is None else _model_energy(atom, state)
            worst = max(worst, abs(energies[j] / exact - 1) if j < energies.size else math.inf)
        better = par.dr * (1e-5 / worst) ** 0.25 if 0 < worst < math.inf else par.dr / 2
        checks.append(assess("initial_energy_error", worst, soft=5e-4, hard=1e-3, key="solver.dr",
                             why="relative error of the initial state's energy on this grid",
                             fix=f"lower `solver.dr` to about {better:.3g} bohr"))
        e_hi = max(par.ip + 3.17 * par.up, par.omega_max, par.ip)
        checks.append(assess("phase_per_step", par.dt * e_hi, soft=0.2, hard=1.0, key="solver.dt",
                             why="phase turned per time step at the highest energy that matters (Ip + 3.17 Up)",
                             fix=f"lower `solver.dt` to about {0.1 / e_hi:.3g} au"))
        if par.omega_max > 0:
            period = 2 * math.pi / par.omega_max
            checks.append(assess("steps_per_period_inverse", par.dt / period, soft=1 / 100, hard=1 / 20,
                                 key="solver.dt", why="time step over the shortest carrier period",
                                 fix=f"lower `solver.dt` to about {period / 400:.3g} au"))
        r_abs = grid.r_max - par.absorber_width
        psi = _initial_psi(self.initial, self.bound, grid.n_points, self.n_l)
        inside = float(np.sum(abs(psi[grid.r > r_abs]) ** 2) / np.sum(abs(psi) ** 2))
        checks.append(assess("initial_norm_in_absorber", inside, soft=1e-8, hard=1e-4, key="solver.r_max",
                             why="part of the initial state lies in the absorber and would count as ionised",
                             fix="raise `solver.r_max` or narrow `solver.absorber_width`"))
        if par.quiver_radius > 0:
            checks.append(assess("quiver_over_inner_radius", par.quiver_radius / r_abs, soft=0.5, hard=1.0,
                                 key="solver.r_max", why="quiver radius F/ω² over the radius where the absorber starts",
                                 fix=f"raise `solver.r_max` to at least {QUIVER_RADII * par.quiver_radius + 20 + par.absorber_width:.0f} bohr"))
            needed = L_NEEDED[s.gauge] * returning_l(par.quiver_radius, par.up, mu)
            checks.append(assess("returning_l_over_l_max", needed / par.l_max, soft=1.0, hard=2.5, key="solver.l_max",
                                 why=f"angular momentum of the returning electron ({s.gauge} gauge: "
                                     f"{L_NEEDED[s.gauge]:g} × α₀√(6.34 μ Uₚ)) over l_max",
                                 fix=f"raise `solver.l_max` to at least {math.ceil(needed)}"))
        if self.flux is not None:
            checks += self._flux_checks()
        return checks

    def _flux_checks(self) -> list:
        par, grid = self.par, self.grid
        radius = self.flux.radius
        r_abs = grid.r_max - par.absorber_width
        checks = [assess("surface_in_absorber", max(0.0, (radius + 2 * grid.dr) - r_abs + 1e-12) / grid.dr,
                         hard=0.0, key="solver.surface_radius",
                         why="the flux sphere (and the two rows beyond it) must lie where the absorber has not "
                             "started; in bohr over dr",
                         fix=f"lower `solver.surface_radius` below {r_abs - 2 * grid.dr:.4g} bohr or raise `solver.r_max`")]
        if par.quiver_radius > 0:
            checks.append(assess("quiver_over_surface_radius", par.quiver_radius / (radius - self.taper_width),
                                 soft=0.5, hard=1.0, key="solver.surface_radius",
                                 why="quiver radius over the radius where the potential starts to taper "
                                     "(the electron must be free beyond it)",
                                 fix=f"raise `solver.surface_radius` to at least "
                                     f"{2 * par.quiver_radius + self.taper_width:.0f} bohr"))
        if multiphoton(self.pulse, par.ip):                       # Rydberg states get populated
            charge = self.atom.asymptotic_charge
            n_cut = max(1, math.floor(math.sqrt(charge * (radius - self.taper_width) / 2)))
            checks.append(assess("rydberg_levels_cut", 1.0 / n_cut**3, soft=1.0 / RYDBERG_N_KEPT**3,
                                 key="solver.surface_radius",
                                 why=f"1/n³ of the highest level the cut potential still holds (n = {n_cut}, 2n²/Z "
                                     f"inside the taper): population of the Rydberg levels above it counts as "
                                     f"ionised (800 nm, 1e14 W/cm², 2 cycles: n = 3 added 7 % to the yield; "
                                     f"4 cycles: n = 6 within 0.2 %)",
                                 fix=f"raise `solver.surface_radius` to at least "
                                     f"{2 * RYDBERG_N_KEPT**2 / charge + self.taper_width:.0f} bohr"))
        e_low = float(par.energies[0])
        needed = radius * math.sqrt(self.atom.reduced_mass / (2 * e_low))
        checks.append(assess("flux_time_short", needed / max(par.after + par.dt, 1e-300), soft=1.0, key="solver.after",
                             why=f"time electrons of the lowest spectrum energy ({e_low:.3g} hartree) need to reach "
                                 f"the flux sphere over the time after the pulse and one step (the sphere sits on a grid row)",
                             fix=f"raise `solver.after` to about {needed:.0f} au or `solver.photoelectron_e_min`"))
        return checks

    def _step_index(self, t: float) -> int:
        return int(round((t - self.t_start) / self.par.dt))

    def _initial(self):
        psi = _initial_psi(self.initial, self.bound, self.grid.n_points, self.n_l)
        psi /= math.sqrt(float(np.sum(abs(psi) ** 2)))
        self.stepper.set_state(psi)
        return {"step": 0}

    def _advance(self, state, t, t_next):
        i0, i1 = self._step_index(t), self._step_index(t_next)
        surface = np.zeros((i1 - i0, 2, 5, self.n_l)) if self.flux is not None else None
        self.stepper.run(self.drive_mid[i0:i1], self.per_step[i0:i1], surface)
        if self.flux is not None:
            self._add_flux(i0, i1, surface)
        return {"step": i1}

    def _add_flux(self, i0: int, i1: int, surface) -> None:
        """Sum the flux of the sampled step ends in (i0, i1] (the pulse's and the field-free ones
        apart; :class:`driven_atom.observables.surface_flux.SurfaceFlux`)."""
        from driven_atom.observables.surface_flux import surface_derivative

        pick = (self.flux_steps > i0) & (self.flux_steps <= i1)
        steps, weights = self.flux_steps[pick], self.flux_weights[pick]
        if not steps.size:
            return
        rows = self.stepper.surface_values(surface[steps - i0 - 1]) / math.sqrt(self.grid.dr)   # u(r), not √dr·u
        u, du = surface_derivative(rows, self.grid.dr)
        times = self.t_start + self.par.dt * steps
        during = steps <= self.par.n_pulse_steps
        for part in (during, ~during):
            if part.any():
                m = steps[part]
                self.flux.add(times[part], u[part], du[part], self.a_ends[m], self.alpha[m],
                              weights[part])

    def steps_done(self, state) -> int:
        return state["step"]

    def _sample(self, state):
        pops, total = {}, 0.0
        for l in range(self.n_l_bound):
            amps = self.bound[l][1].T @ self.stepper.column(l)
            total += float(np.sum(abs(amps) ** 2))
            for ll, j in self.labelled:
                if ll == l:
                    pops[State(l + j + 1, l, 0).label] = float(abs(amps[j]) ** 2)
        k = state["step"]
        obs = (_observables(self.stepper.state(), self.grid.r, coupling_coefficients(self.par.l_max),
                            self.stepper.a["force"]) if k == 0 else self.per_step[k - 1])
        series = {"norm": float(obs[0]), "ionization": 1.0 - total, "dipole_z": float(obs[1]),
                  "_force_cos": float(obs[2])}
        if self.n_l - 1 > max(st.l for st, _ in self.initial):     # the top wave tells of truncation
            series["top_l_population"] = float(np.sum(abs(self.stepper.column(self.n_l - 1)) ** 2))
        return pops, series

    def _save(self, state):
        arrays = {"psi": self.stepper.state(), "per_step": self.per_step}
        if self.flux is not None:
            arrays.update(flux_during=self.flux.during, flux_after=self.flux.after)
        return arrays, {"step": state["step"]}

    def _load(self, arrays, meta):
        psi = np.ascontiguousarray(arrays["psi"])
        if psi.shape != (self.grid.n_points, self.n_l) or arrays["per_step"].shape != self.per_step.shape:
            raise ValueError("checkpoint of another grid")
        if self.flux is not None:
            if arrays["flux_during"].shape != self.flux.during.shape or arrays["flux_after"].shape != self.flux.after.shape:
                raise ValueError("checkpoint of another flux sphere")
            self.flux.during[:] = arrays["flux_during"]
            self.flux.after[:] = arrays["flux_after"]
        self.stepper.set_state(psi)
        self.per_step[:] = arrays["per_step"]
        return {"step": int(meta["step"])}

    def _finish(self, state, history) -> Outcome:
        from driven_atom.observables.harmonics import ehrenfest_acceleration

        atom, pulse, par, s = self.atom, self.pulse, self.par, self.settings
        dt, n_steps, mu = par.dt, par.n_steps, atom.reduced_mass
        step_times = self.t_start + dt * np.arange(1, n_steps + 1)
        on = np.arange(1, n_steps + 1) <= par.n_pulse_steps
        per_step = self.per_step
        field = np.where(on, pulse.field_z(step_times), 0.0)
        sample_field = np.where(history.times <= pulse.t_end, pulse.field_z(history.times), 0.0)
        if atom.model is None:
            acc_steps = ehrenfest_acceleration(per_step[:, 2], field, per_step[:, 0], mu)
            acc_samples = ehrenfest_acceleration(history.series["_force_cos"], sample_field, history.series["norm"], mu)
        else:
            # a model atom's acceleration is d²⟨z⟩/dt² by central differences of the per-step dipole
            # (⟨z⟩ before the first step from the initial state), interpolated to the history times.
            # (The Ehrenfest force ⟨cosθ dV/dr⟩ on the grid is dominated by the coarsely resolved
            # core, where dV/dr ~ Z/r², and missed the dipole's second derivative by ×5–15 in a test
            # at dr = 0.02.)
            psi0 = _initial_psi(self.initial, self.bound, self.grid.n_points, self.n_l)
            psi0 /= math.sqrt(float(np.sum(abs(psi0) ** 2)))
            z0 = _observables(psi0, self.grid.r, coupling_coefficients(par.l_max), self.stepper.a["force"])[1]
            z = np.r_[z0, per_step[:, 1]]
            acc_steps = np.zeros(n_steps)
            acc_steps[:-1] = (z[2:] - 2 * z[1:-1] + z[:-2]) / dt**2
            acc_steps[-1] = acc_steps[-2] if n_steps > 1 else 0.0
            acc_samples = np.interp(history.times, step_times, acc_steps)
        velocity = per_step[:, 3] / mu
        if s.gauge == "velocity":                       # the kinetic momentum ⟨p_z + A⟩
            velocity = velocity + np.where(on, pulse.vector_potential_z(step_times), 0.0) * per_step[:, 0] / mu
        spectra = {"dipole_response": {"time": step_times, "dipole_z": per_step[:, 1], "velocity_z": velocity,
                                       "acceleration_z": acc_steps}}
        checks = []
        harmonics = self._harmonics(step_times[on], per_step[on, 1], velocity[on], acc_steps[on], checks)
        if harmonics:
            spectra["harmonics"] = harmonics
        bound_left = 1.0 - float(history.series["ionization"][-1])
        norm = float(history.series["norm"][-1])
        metadata = {}
        if s.photoelectron_methods:
            spectra.update(self._photoelectrons(1.0 - bound_left, checks))
            metadata["photoelectron_methods"] = list(s.photoelectron_methods)
        warnings = []
        if par.absorber_width == 0 and bound_left < 1 - 1e-3:
            warnings.append("no absorber: ionised norm reflects from r_max")
        stats = {"steps": n_steps, "pulse_steps": par.n_pulse_steps, "dt": dt, "after": par.after,
                 "gauge": s.gauge, "r_max": self.grid.r_max, "dr": self.grid.dr, "l_max": par.l_max,
                 "n_points": self.grid.n_points, "absorber": s.absorber, "absorber_width": par.absorber_width,
                 "quiver_radius": par.quiver_radius, "e_max": par.e_max, "absorbed": 1.0 - norm,
                 "threads": s.threads, "bound_states": int(sum(b[0].size for b in self.bound)),
                 "ground_energy": float(self.bound[0][0][0]) if self.bound[0][0].size else float("nan")}
        if self.flux is not None:
            stats.update(surface_radius=self.flux.radius, taper_width=self.taper_width,
                         flux_samples=int(self.flux_steps.size))
        return Outcome(populations=history.last("populations"), ionization=1.0 - bound_left, norm=norm,
                       spectra=spectra, stats=stats, warnings=warnings, checks=checks, metadata=metadata,
                       series={"acceleration_z": acc_samples})

    def _harmonics(self, times, dipole, velocity, acceleration, checks) -> dict:
        """spectra["harmonics"] over the pulse (module docstring), and the check that the three
        forms agree between order 3 and the cutoff."""
        from driven_atom.observables.harmonics import cutoff_order, forms_mismatch, harmonic_forms
        from driven_atom.units import HARTREE_EV

        carriers = [c.omega for c in self.pulse.components if c.omega > 0]
        if not carriers or times.size < 8:
            return {}
        omega0 = self.pulse.components[0].omega if self.pulse.components[0].omega > 0 else min(carriers)
        forms = harmonic_forms(times, dipole, velocity, acceleration, omega0, self.settings.harmonic_window)
        cutoff = cutoff_order(self.par.ip, self.par.up, omega0)
        if cutoff >= 5:
            mismatch = forms_mismatch(forms["order"], forms["power"], forms["power_dipole"], forms["power_velocity"],
                                      3.0, cutoff)
            checks.append(assess("harmonic_forms_mismatch", mismatch, soft=0.25, key="solver.dt",
                                 why="largest relative difference of the harmonic power (orders 3 to the cutoff) "
                                     "between the dipole or velocity form and the acceleration form",
                                 fix="lower `solver.dt` and `solver.dr`, raise `solver.l_max`"))
        keep = forms["order"] <= max(HARMONIC_ORDERS_KEPT * cutoff, 20.0)     # beyond: noise, and large files
        return {"order": forms["order"][keep], "photon_energy_eV": forms["omega"][keep] * HARTREE_EV,
                "power": forms["power"][keep], "power_dipole": forms["power_dipole"][keep],
                "power_velocity": forms["power_velocity"][keep], "cutoff_order": np.array(cutoff)}

    def _unbound_part(self) -> np.ndarray:
        """The final state with every bound grid eigenstate projected out (ψ[i, l])."""
        psi = self.stepper.state()
        for l in range(self.n_l):
            vectors = self.bound[l][1]
            if vectors.shape[1]:
                psi[:, l] -= vectors @ (vectors.T @ psi[:, l])
        return psi

    def _unbound_inside(self, radius: float) -> float:
        """Norm of the final state inside ``radius`` that no bound state holds: the electrons the
        flux has not counted yet (they leave later, or stay in Rydberg states the box cannot hold)."""
        return float(np.sum(abs(self._unbound_part()[self.grid.r < radius]) ** 2))

    def _photoelectrons(self, ionized: float, checks) -> dict:
        """The spectra of ``photoelectron_methods``: the first as "photoelectrons", the others as
        "photoelectrons_<method>", each with the check that it holds the ionisation yield."""
        from driven_atom.observables import photoelectron as pe

        atom, par, s, grid = self.bound_atom, self.par, self.settings, self.grid   # the potential the run saw
        energies = np.asarray(par.energies)
        n_x = self._angles(par)
        x, w = pe.emission_angles(n_x)
        k_order = max(2, min(2 * par.l_max, n_x - 1))
        r_abs = grid.r_max - par.absorber_width
        out = {}
        for i, method in enumerate(s.photoelectron_methods):
            if method == "surface_flux":
                density = self.flux.densities(float(self.alpha[-1]))
                fix = ("widen `solver.absorber_width` (slow electrons reflected from a narrow mask) or lower "
                       "`solver.photoelectron_e_min`")
            elif method == "window":
                spacing = energies[1] - energies[0] if energies.size > 1 else energies[0]
                gammas = pe.window_widths(energies, spacing, r_abs, atom.reduced_mass)
                # the bound states removed first: their windows' far tails would leak into a weak spectrum
                density = pe.window_densities(grid, atom, self._unbound_part(), energies, gammas, x)
                fix = (f"raise `solver.r_max` to about {par.spectrum_radius + par.absorber_width:.0f} bohr (or leave "
                       f"it unset: the box is then sized for the spectrum)")
            else:
                density = pe.projection_densities(grid, atom, self.stepper.state(), self.bound, energies, x, r_abs)
                fix = (f"raise `solver.r_max` to about {par.spectrum_radius + par.absorber_width:.0f} bohr (or leave "
                       f"it unset: the box is then sized for the spectrum)")
            arrays = pe.spectrum_arrays(energies, x, w, density, atom.reduced_mass, k_max_order=k_order,
                                        map_points=s.momentum_map_points)
            name = "photoelectrons" if i == 0 else f"photoelectrons_{method}"
            out[name] = arrays
            held = pe.integrated(arrays)
            expected = ionized - (self._unbound_inside(self.flux.radius) if method == "surface_flux" else 0.0)
            missing = 1.0 - held / expected if expected > 1e-12 else 0.0
            suffix = "" if i == 0 else f"_{method}"
            what = ("ionisation yield less the unbound norm still inside the sphere" if method == "surface_flux"
                    else "ionisation yield")
            checks.append(assess(f"spectrum_missing_fraction{suffix}", abs(missing), soft=0.03, key="solver.r_max",
                                 why=f"|1 − ∫dP/dE dE / ({what})| of the {method} spectrum (electrons lost before "
                                     f"they were counted, reflected, or outside the energies)", fix=fix))
        return out


def _observables(psi, r, c, force) -> np.ndarray:
    """(norm, ⟨z⟩, ⟨cos θ · dV/dr⟩, ⟨p_z⟩) of ψ[r, l] (the kernels' per-step quantities, for the first
    sample; ``force`` = dV/dr at the grid points): ⟨p_z⟩ = Σ_l 2c_l Σ_i [Im(u*_l ∂_r u_{l+1}) +
    (l+1)/rᵢ Im(u*_l u_{l+1})], ∂_r the fourth-order central difference (u = 0 beyond the grid), from
    p_z = −i∂_z on the pair (l, l+1): c_l(d/dr + (l+1)/r) and c_l(d/dr − (l+1)/r) (docs/physics.md,
    "Grid route")."""
    a, b = psi[:, :-1], psi[:, 1:]
    ang = 2 * np.sum(c[None, :-1] * (a.conj() * b).real, axis=1)
    dr = r[1] - r[0] if r.size > 1 else r[0]
    p = np.vstack([np.zeros((2, b.shape[1])), b, np.zeros((2, b.shape[1]))])
    db = (p[:-4] - 8 * p[1:-3] + 8 * p[3:-1] - p[4:]) / (12 * dr)
    kappa = np.arange(1, psi.shape[1])[None, :] / r[:, None]
    mom = 2 * np.sum(c[None, :-1] * (a.conj() * (db + kappa * b)).imag)
    return np.array([np.sum(abs(psi) ** 2), np.sum(r * ang), np.sum(force * ang), mom])

"""The grid route: split-operator propagation of partial waves on the shared radial grid.

ψ(r, θ, t) = Σ_l u_l(r, t)/r · Y_l0(θ) on r_i = i·dr (:mod:`driven_atom.basis.radial_grid`, the same
Numerov-corrected H_l as the basis route: one discretisation), length gauge, linear polarisation
along z (m = 0). One step of length dt with the field E at mid-step (Strang, second order):

    U = A·B·C·B·A,  C: Crank–Nicolson for every H_l over dt;  A, B: exact 2×2 rotations
    exp(−i (dt/2) E r c_l σ_x) on the pairs (l, l+1) with l even (A) and odd (B),
    c_l = (l+1)/√((2l+1)(2l+3)) (docs/physics.md, "Grid route").

Both pieces are exactly unitary, so norm is lost only in the absorber at the edge: after each step
the wave function is multiplied by the mask cos^(p·dt/Δt_ref)(π/2·(r − r_a)/w) on the outer width w,
Δt_ref = 0.05 a.u.: the classic cos^(1/8) per step (p = 1/8; Krause, Schafer & Kulander, PRA 45,
4998 (1992)) at dt = Δt_ref, scaled so that the absorption per unit time does not depend on dt
(the mask is then the propagator of the imaginary potential −i·p·ln(1/cos(…))/Δt_ref).

Observables (all in atomic units):

* populations: |⟨φ_nl|u_l⟩|² with φ_nl the grid's own field-free eigenvectors (E < 0), labelled
  "1s", "1s0", ... for n ≤ ``label_n_max`` (m = 0, so the level and its m = 0 sublevel agree);
* ``ionization`` = 1 − Σ over *all* bound (E < 0) grid eigenstates of every l ≤ l_max: the norm
  removed by the absorber counts as ionised, and so does unbound norm still on the grid;
* series (at the history times): ``norm``, ``ionization``, ``dipole_z`` = ⟨z⟩ and
  ``acceleration_z`` (Ehrenfest, :func:`driven_atom.observables.harmonics.ehrenfest_acceleration`);
  ⟨z⟩ and the acceleration are also kept at every step (spectra["dipole_response"]) and give
  spectra["harmonic"] = {"omega", "power"};
* optionally (``photoelectron = true``) spectra["photoelectron"] = {"energy", "dP_dE"} of the final
  state by the window operator (:func:`window_spectrum`).

Defaults derived from the pulse (documented on :class:`driven_atom.settings.GridSettings` and returned by
:func:`grid_parameters`): quiver radius α₀ = F/(μω²), Uₚ = F²/(4μω²), highest expected electron
energy E_max = max(10 Uₚ, 3ω, I_p) and its momentum k_max = √(2μE_max).

Checkpoints (owned by :class:`driven_atom.routes.base.Route`): at deterministic step boundaries
(history samples and multiples of 256 steps) the state, step index and sampled histories go into
the run's checkpoint file whenever ``checkpoint_every`` (steps or wall time) has passed, and at a
stop signal; where checkpoints fall never changes the arithmetic, so a resumed run ends with
arrays bit for bit equal to an uninterrupted one.
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

L_FACTOR = 1.6                # default l_max: this many times the returning angular momentum
QUIVER_RADII = 5.0            # default inner box: this many quiver radii + 20 bohr (slow, Rydberg-bound electrons
                              # wander out several quiver radii: at 3 the 800 nm, 1e14 W/cm^2 yield moves ~1 %)
MASK_DT_REF = 0.05          # a.u. time: the mask exponent p is per this much time
CHUNK_MAX = 256             # longest kernel call in steps (granularity of checkpoints and stop signals)
SMALL_GRID = 600            # below this many points the bound states come from the dense solver
MODEL_DR = 0.05             # model atoms: default dr at most this (He 1s within 4e-5 of its converged value) ...
MODEL_DR_Z = 0.36           # ... and this over the nuclear charge (Ar 3p: 6.5e-5 at 0.02; the core needs it)


@dataclass(frozen=True)
class GridParameters:
    """Resolved numbers of one run (atomic units)."""

    r_max: float
    dr: float
    l_max: int
    dt: float
    n_steps: int
    absorber_width: float
    quiver_radius: float
    e_max: float
    up: float = 0.0                 # ponderomotive energy of the summed carriers
    ip: float = 0.5                 # ionisation potential of the initial state
    omega_max: float = 0.0          # highest carrier frequency
    spectrum_radius: float = 0.0    # inner radius that keeps the photoelectrons until the pulse ends


def _pulse_scales(atom, pulse) -> tuple[float, float, float, float]:
    """(α₀, Uₚ, ω_max, F_static): quiver radius and ponderomotive energy of the summed carriers
    (amplitudes add, lowest frequency) and the static field, for the defaults."""
    mu = atom.reduced_mass
    osc = [c for c in pulse.components if c.omega > 0]
    static = sum(c.peak_field for c in pulse.components if c.omega == 0)
    if not osc:
        return 0.0, 0.0, 0.0, static
    f = sum(c.peak_field for c in osc)
    w = min(c.omega for c in osc)
    return f / (mu * w**2), f**2 / (4 * mu * w**2), max(c.omega for c in osc), static


def grid_parameters(atom, pulse, settings: GridSettings, n_initial: int = 1,
                    l_initial: int = 0) -> GridParameters:
    """Grid, partial waves and step of a run: the user's values, else defaults from the pulse.

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.pulse import Pulse
    >>> p = Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 4})
    >>> g = grid_parameters(Atom(1), p, GridSettings())
    >>> round(g.quiver_radius, 1), g.dr, g.l_max
    (16.5, 0.1, 32)
    """
    mu, Z = atom.reduced_mass, atom.Z
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
    if settings.r_max is not None:
        r_max = settings.r_max
        width = (settings.absorber_width if settings.absorber_width is not None
                 else min(max(20.0, 0.2 * r_max), 0.5 * r_max))
    else:
        inner = max(40.0 * size, QUIVER_RADII * alpha0 + 20.0)
        if f_static > 0:
            inner = max(inner, 2 * ip / f_static + 40.0)    # beyond the tunnel exit I_p/F
        if settings.photoelectron:
            inner = max(inner, spectrum_radius)             # the spectrum needs its electrons in the box
        width = settings.absorber_width if settings.absorber_width is not None else max(20.0, 0.2 * inner)
        r_max = inner + width
    if settings.absorber == "none":
        width = 0.0
    if not 0 <= width < r_max:
        raise InputError(f"`solver.absorber_width` must be >= 0 and below r_max = {r_max:g} bohr, "
                         f"got {width:g}")
    if settings.l_max is not None:
        l_max = settings.l_max
    else:
        l_max = max(8, l_initial + 6, math.ceil(L_FACTOR * returning_l(alpha0, up, mu)))
    if settings.dt is not None:
        dt_max = settings.dt
    else:
        dt_max = min(0.05, 0.1 / e_max, (2 * math.pi / w_max) / 400 if w_max > 0 else math.inf)
    n_steps = max(1, math.ceil(window / dt_max - 1e-9))
    return GridParameters(r_max=r_max, dr=dr, l_max=l_max, dt=window / n_steps, n_steps=n_steps,
                          absorber_width=width, quiver_radius=alpha0, e_max=e_max, up=up, ip=ip,
                          omega_max=w_max, spectrum_radius=spectrum_radius)


def returning_l(alpha0: float, up: float, mu: float) -> float:
    """Angular momentum of an electron returning with 3.17 Uₚ at the quiver radius α₀:
    L = α₀·√(2μ·3.17 Uₚ) (the classical cutoff energy, Corkum, PRL 71, 1994 (1993)).

    >>> round(returning_l(16.46, 0.2204, 1.0), 1)
    19.5
    """
    return alpha0 * math.sqrt(6.34 * mu * up)


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


def window_spectrum(grid, atom, psi, energies, gamma) -> np.ndarray:
    """Angle-integrated photoelectron spectrum dP/dE of ψ[i, l] by the window operator
    W = γ⁴/((H − E)⁴ + γ⁴) (Schafer & Kulander, PRA 42, 5794 (1990), n = 2):

        P(E) = Σ_l ‖γ² (H_l − E − γe^{iπ/4})⁻¹ (H_l − E − γe^{3iπ/4})⁻¹ u_l‖²,
        dP/dE ≈ P(E)·√2/(πγ)     (∫ γ⁴/(x⁴ + γ⁴) dx = πγ/√2),

    each resolvent one banded solve, (H − z)⁻¹ = (K − zM)⁻¹M with K = −Δ/2μ + M·V (the grid's
    own Numerov operators).

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.basis.radial_grid import uniform_grid
    >>> g = uniform_grid(60.0, 0.1)
    >>> E, U = bound_states(g, 0, Atom(1))
    >>> psi = U[:, :1].astype(complex)             # the 1s state: W = 1 at E_1s, 1/2 at E_1s + γ
    >>> s = window_spectrum(g, Atom(1), psi, E[0] + np.array([0.0, 0.01]), 0.01)
    >>> (s * np.pi * 0.01 / np.sqrt(2)).round(6).tolist()
    [1.0, 0.5]
    """
    from scipy.linalg import solve_banded

    from driven_atom.basis.radial_grid import numerov_operators

    energies = np.asarray(energies, dtype=float)
    out = np.zeros(energies.size)
    roots = gamma * np.exp(1j * np.pi * np.array([0.25, 0.75]))
    for l in range(psi.shape[1]):
        u = psi[:, l]
        if not np.any(u):
            continue
        ops = numerov_operators(grid, l, atom)
        m_u = ops.m_diag * u
        m_u[1:] += ops.m_off * u[:-1]
        m_u[:-1] += ops.m_off * u[1:]
        kin_d, kin_o = -ops.d_diag / (2 * ops.mu), -ops.d_off / (2 * ops.mu)
        ab = np.zeros((3, u.size), complex)
        for k, e in enumerate(energies):
            x = m_u
            for q, z in enumerate(e + roots):
                v = ops.potential - z
                ab[0, 1:] = kin_o + ops.m_off * v[1:]
                ab[1] = kin_d + ops.m_diag * v
                ab[2, :-1] = kin_o + ops.m_off * v[:-1]
                y = solve_banded((1, 1), ab, x, check_finite=False)
                if q == 0:
                    x = ops.m_diag * y
                    x[1:] += ops.m_off * y[:-1]
                    x[:-1] += ops.m_off * y[1:]
            out[k] += gamma**4 * float(np.sum(abs(y) ** 2))
    return out * math.sqrt(2) / (math.pi * gamma)


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
    :meth:`set_state` convert exactly (no arithmetic)."""

    def __init__(self, grid, atom, n_l: int, dt: float, mask, threads: int):
        from driven_atom.basis.radial_grid import numerov_operators
        from driven_atom.routes import _grid_kernels as kernels

        self.kernels = kernels
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
        self.rows = np.zeros((6, n))                 # off-diagonals padded with a zero
        self.cols = np.zeros((3, n_l))
        self.a = a = dict(m_diag=self.rows[0], d_diag=self.rows[1], coul=self.rows[2], invr2=self.rows[3],
                          m_off=self.rows[4, :-1], d_off=self.rows[5, :-1],
                          m_first=self.cols[0], d_first=self.cols[1], cent=self.cols[2])   # named views
        a["m_diag"][:], a["d_diag"][:] = ref.m_diag, ref.d_diag
        a["m_off"][:], a["d_off"][:] = ref.m_off, ref.d_off
        if atom.l_dependent:
            raise InputError(_L_DEPENDENT.format(species=atom.species))
        a["coul"][:], a["invr2"][:] = atom.potential(r, 0), 1.0 / r**2    # −Z/r, or the model's V(r)
        a["m_first"][:] = np.array([o.m_diag[0] for o in ops])[self.order]
        a["d_first"][:] = np.array([o.d_diag[0] for o in ops])[self.order]
        a["cent"][:] = cent[self.order]
        self.consts = np.array([0.5 * dt, 0.5 / mu, grid.dr])     # tau, 1/(2 mu), dr
        c = coupling_coefficients(n_l - 1)
        na, nb = n_l // 2, (n_l + 1) // 2 - 1
        p = max(1, na, nb)
        self.coupling = np.zeros((2, p))
        self.coupling[0, :na] = c[0:2 * na:2]        # pairs (2p, 2p+1)
        self.coupling[1, :nb] = c[1:2 * nb:2]        # pairs (2p+1, 2p+2)
        self.mask = np.ascontiguousarray(mask, dtype=float)
        below = np.nonzero(self.mask < 1.0)[0]
        self.i_abs = int(below[0]) if below.size else n
        self.thomas = np.zeros((4, n, n_l))
        self.refactor()
        self.psi = np.zeros((2, n, n_l))
        self.threads = threads
        stp = np.zeros((8, p))
        if threads == 1:
            self.scratch = (np.zeros((6, n_l)), np.zeros((8, p)), stp)
        else:
            cblock = -(-n_l // threads)               # one block of partial waves per thread
            self.rblock = 64
            nrb = -(-n // self.rblock)
            self.scratch = (np.zeros((-(-n_l // cblock), 6, cblock)), np.zeros((nrb, 8, p)), stp)

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

    def run(self, fields, out):
        """Advance the state by len(fields) steps; ``out`` (k, 3) gets norm, ⟨z⟩, ⟨cosθ/r²⟩."""
        fields = np.ascontiguousarray(fields, dtype=float)
        args = (self.psi, self.thomas, self.rows, self.cols, self.consts, self.coupling, fields,
                self.mask, self.i_abs, self.scratch)
        if self.threads == 1:
            self.kernels.propagate_chunk(*args, out)
        else:
            partial = np.zeros((fields.size, self.scratch[1].shape[0], 3))
            with _numba_threads(self.threads):
                self.kernels.propagate_chunk_parallel(*args, partial, self.rblock)
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
    spectra = ("harmonic", "dipole_response", "photoelectron")
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

    def run(self, **options):
        from driven_atom.basis.radial_grid import reproducible_blas

        with reproducible_blas():
            return super().run(**options)

    resource_fix = "lower `solver.r_max` or `solver.l_max`, raise `solver.dr` or `solver.dt`, or shorten the pulse"

    @classmethod
    def explicit(cls, settings, result):
        """dt, dr, l_max and r_max as the run used them; the absorber keeps its rule (the user's width,
        else a fifth of the box), so a larger box gets a wider, less reflecting absorber."""
        s = result.stats
        return settings.model_copy(update={"dt": s["dt"], "dr": s["dr"], "l_max": s["l_max"], "r_max": s["r_max"]})

    @classmethod
    def knobs(cls, settings) -> list:
        """dt (error ∝ dt²), dr (∝ dr⁴), l_max and r_max (faster than any power)."""
        return [Knob("dt", settings.dt, settings.dt / 2, 2 * settings.dt, 2, 2.0),
                Knob("dr", settings.dr, settings.dr / 2**0.5, settings.dr * 2**0.5, 4, 2**0.5),
                Knob("l_max", settings.l_max, math.ceil(1.5 * settings.l_max), None, None, 1.5),
                Knob("r_max", settings.r_max, 1.5 * settings.r_max, None, None, 1.5)]

    @classmethod
    def companion(cls, settings, result):
        """dt doubled (error ∝ dt²) and dr stretched by √2 (∝ dr⁴): K = 4; the box, the partial
        waves and the absorber as the run used them; no photoelectron spectrum."""
        s = result.stats
        knobs = {"dt": 2 * s["dt"], "dr": s["dr"] * 2**0.5, "r_max": s["r_max"], "l_max": s["l_max"],
                 "absorber_width": s["absorber_width"]}
        update = dict(knobs, photoelectron=False)
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
        vectors) and four numbers per time step; time: N·L·steps at the kernel's speed."""
        from driven_atom.routes.resources import BOUND_STATES_S_PER_POINT, GRID_NS_PER_POINT_STEP

        par = self._parameters()
        n, waves = par.r_max / par.dr, par.l_max + 1
        bound = math.sqrt(self.atom.Z * self.atom.reduced_mass * par.r_max / 2) + 5
        memory = 8.0 * (10 * n * waves + n * waves * bound + 5 * par.n_steps)
        eigen_s = waves * n * BOUND_STATES_S_PER_POINT           # shift-invert Lanczos per partial wave
        samples = min(self.samples_over(par.dt * par.n_steps), par.n_steps + 1.0)
        sample_s = samples * n * waves * (bound + 2) * 2e-9      # projections on the bound states
        return memory, n * waves * par.n_steps * GRID_NS_PER_POINT_STEP * 1e-9 + eigen_s + sample_s

    def _prepare(self) -> None:
        from driven_atom.basis.radial_grid import uniform_grid

        atom, pulse, s = self.atom, self.pulse, self.settings
        self.par = par = self._parameters()
        self.grid = grid = uniform_grid(par.r_max, par.dr)
        n, n_l = grid.n_points, par.l_max + 1
        self.n_l = n_l
        mask = mask_profile(grid.r, grid.r_max, par.absorber_width, s.mask_power * par.dt / MASK_DT_REF)
        self.bound = [bound_states(grid, l, atom) for l in range(n_l)]
        self.n_l_bound = max((l + 1 for l in range(n_l) if self.bound[l][0].size), default=0)
        self.labelled = [(l, j) for l in range(n_l) for j in range(self.bound[l][0].size)
                         if j + l + 1 <= s.label_n_max]
        self.t_start = t0 = pulse.t_start
        self.t_end = t0 + par.dt * par.n_steps
        self.time_quantum = par.dt
        self.max_slice = CHUNK_MAX * par.dt
        self.fields_mid = pulse.field_z(t0 + par.dt * (np.arange(par.n_steps) + 0.5))
        self.per_step = np.zeros((par.n_steps, 3))
        self.stepper = _Stepper(grid, atom, n_l, par.dt, mask, s.threads)

    def preflight(self) -> list:
        """Before any step: the initial states' energies on this grid against the exact
        −Z²μ/(2n²) (Bethe & Salpeter 1957) — for a model atom against the model's own eigenvalue
        converged on the fine stretched reference grid (:mod:`driven_atom.basis.model_levels`,
        0.001 bohr at the nucleus; computed once per species in ~0.2 s) —, the time step against the fastest phase that matters
        (Iₚ + 3.17 Uₚ, Corkum 1993) and the carrier period, the initial state's norm inside the
        absorber, the box against the quiver radius, and l_max against the returning angular
        momentum."""
        atom, par, grid = self.atom, self.par, self.grid
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
            needed = returning_l(par.quiver_radius, par.up, mu)
            checks.append(assess("returning_l_over_l_max", needed / par.l_max, soft=1.0, hard=2.5, key="solver.l_max",
                                 why="angular momentum of the returning electron over l_max",
                                 fix=f"raise `solver.l_max` to at least {math.ceil(L_FACTOR * needed)}"))
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
        self.stepper.run(self.fields_mid[i0:i1], self.per_step[i0:i1])
        return {"step": i1}

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
        obs = (_observables(self.stepper.state(), self.grid.r, coupling_coefficients(self.par.l_max))
               if k == 0 else self.per_step[k - 1])
        series = {"norm": float(obs[0]), "ionization": 1.0 - total, "dipole_z": float(obs[1]),
                  "_cos_r2": float(obs[2])}
        if self.n_l - 1 > max(st.l for st, _ in self.initial):     # the top wave tells of truncation
            series["top_l_population"] = float(np.sum(abs(self.stepper.column(self.n_l - 1)) ** 2))
        return pops, series

    def _save(self, state):
        return {"psi": self.stepper.state(), "per_step": self.per_step}, {"step": state["step"]}

    def _load(self, arrays, meta):
        psi = np.ascontiguousarray(arrays["psi"])
        if psi.shape != (self.grid.n_points, self.n_l) or arrays["per_step"].shape != self.per_step.shape:
            raise ValueError("checkpoint of another grid")
        self.stepper.set_state(psi)
        self.per_step[:] = arrays["per_step"]
        return {"step": int(meta["step"])}

    def _finish(self, state, history) -> Outcome:
        from driven_atom.observables.harmonics import ehrenfest_acceleration, harmonic_spectrum

        atom, pulse, par, s = self.atom, self.pulse, self.par, self.settings
        dt, n_steps, mu = par.dt, par.n_steps, atom.reduced_mass
        step_times = self.t_start + dt * np.arange(1, n_steps + 1)
        per_step = self.per_step
        if atom.model is None:
            acc_steps = ehrenfest_acceleration(per_step[:, 2], pulse.field_z(step_times), per_step[:, 0], atom.Z, mu)
            acc_samples = ehrenfest_acceleration(history.series["_cos_r2"], pulse.field_z(history.times),
                                                 history.series["norm"], atom.Z, mu)
        else:
            # the kernels keep ⟨cosθ/r²⟩ per step, which is the force of −Z/r only: a model atom's
            # acceleration is d²⟨z⟩/dt² by central differences of the per-step dipole (⟨z⟩ before the
            # first step from the initial state), interpolated to the history times. (The Ehrenfest
            # force ⟨cosθ dV/dr⟩ on the grid is dominated by the coarsely resolved core, where
            # dV/dr ~ Z/r², and missed the dipole's second derivative by ×5–15 in a test at dr = 0.02.)
            psi0 = _initial_psi(self.initial, self.bound, self.grid.n_points, self.n_l)
            psi0 /= math.sqrt(float(np.sum(abs(psi0) ** 2)))
            z = np.r_[_observables(psi0, self.grid.r, coupling_coefficients(par.l_max))[1], per_step[:, 1]]
            acc_steps = np.zeros(n_steps)
            acc_steps[:-1] = (z[2:] - 2 * z[1:-1] + z[:-2]) / dt**2
            acc_steps[-1] = acc_steps[-2] if n_steps > 1 else 0.0
            acc_samples = np.interp(history.times, step_times, acc_steps)
        omega, power = harmonic_spectrum(step_times, acc_steps)
        spectra = {"harmonic": {"omega": omega, "power": power},
                   "dipole_response": {"time": step_times, "dipole_z": per_step[:, 1],
                                       "acceleration_z": acc_steps}}
        bound_left = 1.0 - float(history.series["ionization"][-1])
        norm = float(history.series["norm"][-1])
        checks = []
        if s.photoelectron:
            e_top = s.photoelectron_e_max if s.photoelectron_e_max is not None else par.e_max
            energies = np.linspace(0.0, e_top, s.photoelectron_points + 1)[1:]
            dP_dE = window_spectrum(self.grid, atom, self.stepper.state(), energies, 0.5 * energies[0])
            spectra["photoelectron"] = {"energy": energies, "dP_dE": dP_dE}
            ionized = 1.0 - bound_left
            held = float(np.sum(dP_dE) * (energies[1] - energies[0]))
            missing = 1.0 - held / ionized if ionized > 1e-12 else 0.0
            needed = par.spectrum_radius + par.absorber_width
            checks.append(assess("spectrum_missing_fraction", missing, soft=0.03, key="solver.r_max",
                                 why="fraction of the ionisation yield missing from the photoelectron spectrum "
                                     "(absorbed before the spectrum was taken)",
                                 fix=f"raise `solver.r_max` to about {needed:.0f} bohr (or leave it unset: "
                                     f"the box is then sized for the spectrum)"))
        warnings = []
        if par.absorber_width == 0 and bound_left < 1 - 1e-3:
            warnings.append("no absorber: ionised norm reflects from r_max")
        stats = {"steps": n_steps, "dt": dt, "r_max": self.grid.r_max, "dr": self.grid.dr, "l_max": par.l_max,
                 "n_points": self.grid.n_points, "absorber": s.absorber, "absorber_width": par.absorber_width,
                 "quiver_radius": par.quiver_radius, "e_max": par.e_max, "absorbed": 1.0 - norm,
                 "threads": s.threads, "bound_states": int(sum(b[0].size for b in self.bound)),
                 "ground_energy": float(self.bound[0][0][0]) if self.bound[0][0].size else float("nan")}
        return Outcome(populations=history.last("populations"), ionization=1.0 - bound_left, norm=norm,
                       spectra=spectra, stats=stats, warnings=warnings, checks=checks,
                       series={"acceleration_z": acc_samples})


def _observables(psi, r, c) -> np.ndarray:
    """(norm, ⟨z⟩, ⟨cosθ/r²⟩) of ψ[r, l] (the kernels' per-step quantities, for the first sample)."""
    ang = 2 * np.sum(c[None, :-1] * (psi[:, :-1].conj() * psi[:, 1:]).real, axis=1)
    return np.array([np.sum(abs(psi) ** 2), np.sum(r * ang), np.sum(ang / r**2)])

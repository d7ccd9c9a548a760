"""Route ``basis``: propagation in bound + box-continuum eigenstates (:mod:`driven_atom.basis.eigenbasis`).

The amplitudes obey i dc/dt = H(t) c with H(t) = diag(E) + s(t)·B, where for linear z
polarisation either B = z, s = E_z(t) (length form, H_int = E·z for the electron's charge −1),
or B = p_z = iμ[H₀, z], s = A_z(t)/μ (velocity form; the A²/2μ term is a global phase).

Integrator: commutator-free Magnus exponentials (Blanes & Moan, J. Comput. Appl. Math. 142, 313
(2002); Alvermann & Fehske, J. Comput. Phys. 230, 5930 (2011)). A step t → t + h is a product of
exponentials exp(−ih Σ_m G_im H(t + c_m h)) at Gauss–Legendre nodes c_m; ``scheme = "cf6"``
(default) is their sixth-order scheme with five exponentials, ``"cf4"`` the fourth-order one,

    c(t + h) = exp(−ih[E/2 + (a₁s₁ + a₂s₂)B]) exp(−ih[E/2 + (a₂s₁ + a₁s₂)B]) c(t),  a₁,₂ = 1/4 ∓ √3/6,

with s_j = s(t + (1/2 ∓ √3/6)h). The observed orders (4 and 6) are checked in the tests.
Each exponential acts through a Lanczos process (:mod:`driven_atom.routes.krylov`, numba kernels) whose
dimension grows until Saad's a-posteriori estimate (SIAM J. Numer. Anal. 29, 209 (1992)) is below
tolerance/(2 × number of exponentials), so the Krylov error of a step stays below tolerance/2.
With the states grouped by l, the length-form dipole, which couples only l ↔ l ± 1, is applied as
dense real blocks; other couplings (the velocity form) as a complex CSR product. Step size: every
``check_every`` (16) steps a checked pair (two steps of h against one of 2h; local error ≈
‖difference‖/(2^p − 1) for order p) keeps the error per step below ``tolerance`` (amplitude norm)
and sets h ∝ (tolerance/error)^(1/(p+1)); failed pairs are redone.

Results: populations of bound states by label (m-resolved and level) for n up to the last n whose
states all lie within 1e-3 of −Z²μ/(2n²) (higher, wall-distorted box states only as the sum
``stats["box_rydberg_population"]``), ``ionization`` = total
continuum population, ``norm``, histories at the ``[output] every`` samples (bound states with
n ≤ 4, series norm, ionization, dipole_z) and ``spectra["photoelectron"]`` =
{energy, dP_dE, dP_dE_l} from the box density of states (:mod:`driven_atom.observables.photoelectron`).

Convergence guidance (stats): ``top_l_population`` (largest population in l = l_max over the
samples) and ``e_max_population`` (largest continuum population within the top 10 % of
energies below e_max). If either exceeds ``warn_population`` (default 1e-4, absolute) the result
carries a warning naming the key to raise (``driven-atom run`` prints it).

>>> BasisSettings(e_max="50 eV").e_max > 1.8
True
"""
from __future__ import annotations

import numpy as np

from driven_atom.errors import InputError
from driven_atom.routes.base import Knob, Outcome, Route
from driven_atom.routes.krylov import Coupling, KrylovFailure
from driven_atom.settings import BasisSettings

HISTORY_N_MAX = 4          # bound levels with n <= this get a population history
MODEL_DR_Z = 0.36          # a model atom's uniform grid needs dr <= this over Z (its core; see routes.grid)
SLICE_AU = 50.0            # longest stretch advanced between looks at the clock (a.u. of time)


def _cfet_table(f: list[list[float]], n_nodes: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss nodes c_m on [0, 1] and weights G[i, m] of the exponentials Ω_i = −ih Σ_m G[i, m] H(t + c_m h)
    (applied i = 0 first) from the Legendre-moment coefficients f[i][n] of Alvermann & Fehske,
    J. Comput. Phys. 230, 5930 (2011): G[i, m] = w_m Σ_n f[i][n] (2n + 1) P_n(1 − 2c_m)."""
    from numpy.polynomial.legendre import Legendre, leggauss

    x, w = leggauss(n_nodes)
    c, w = (x + 1) / 2, w / 2
    G = np.array([[w[m] * sum(fi[n] * (2 * n + 1) * Legendre.basis(n)(1 - 2 * c[m]) for n in range(len(fi)))
                   for m in range(n_nodes)] for fi in f])
    return c, G


def _schemes() -> dict:
    f6 = [[0.16, 0.14587456942714338561, 0.11762370828143015682],
          [0.38752405202531186588, 0.15089113704380764664, -0.12805075909013044594]]
    f6.append([1 - 2 * f6[1][0] - 2 * f6[0][0], 0.0, -2 * f6[1][2] - 2 * f6[0][2]])
    f6 += [[v if n % 2 == 0 else -v for n, v in enumerate(f6[k])] for k in (1, 0)]   # time symmetry
    return {"cf4": (4, _cfet_table([[0.5, 1 / 3], [0.5, -1 / 3]], 2)),
            "cf6": (6, _cfet_table(f6, 5))}


SCHEMES = _schemes()


class MagnusPropagator:
    """Commutator-free Magnus + Lanczos for i dc/dt = (diag(E) + s(t)·B) c.

    ``B`` is a Hermitian sparse matrix (z in the length form, p_z in the velocity form);
    ``drive(t)`` returns s at an array of times; ``scheme`` "cf6" (order 6, five exponentials)
    or "cf4" (order 4, two). ``matvecs`` counts products with B. With ``groups`` (the group of each
    state, e.g. its l) a real symmetric B coupling only neighbouring groups is applied in block
    form, otherwise as complex CSR (:class:`driven_atom.routes.krylov.Coupling`). See the module
    docstring for the schemes and the error control.
    """

    def __init__(self, energies, B, drive, tolerance: float, max_step: float | None = None,
                 scheme: str = "cf6", check_every: int = 16, groups=None):
        self.E = np.asarray(energies, dtype=float)
        self.coupling = Coupling(B, groups)
        self.drive = drive
        self.tol = tolerance
        self.max_step = max_step
        self.order, (self.nodes, self.weights) = SCHEMES[scheme]
        self.check_every = check_every
        self._diagonals = [row.sum() * self.E for row in self.weights]
        self._krylov_tol = tolerance / (2 * len(self.weights))     # Krylov error ≤ tolerance/2 per step
        self.steps = 0
        self.rejected = 0

    @property
    def matvecs(self) -> int:
        """Products with B so far."""
        return self.coupling.products

    def step(self, c: np.ndarray, t: float, h: float) -> np.ndarray:
        """One step t → t + h: Π_i exp(−ih Σ_m G[i, m] H(t + c_m h)) c (rightmost i = 0 first)."""
        s = self.drive(t + h * self.nodes)
        for diagonal, row in zip(self._diagonals, self.weights):
            c = self.coupling.expm(diagonal, float(row @ s), c, h, self._krylov_tol)[0]
        return c

    def advance(self, c: np.ndarray, t: float, t_stop: float, h: float) -> tuple[np.ndarray, float, float]:
        """Steps from t to t_stop; returns (c, t_stop, next h). Every ``check_every``-th move is a
        checked pair: two steps of h against one of 2h, local error ≈ ‖difference‖/(2^p − 1) per
        pair (order p), kept below 2·tolerance; h then adapts as (tolerance/error)^(1/(p+1))."""
        while t < t_stop - 1e-12 * max(1.0, abs(t_stop)):
            if self.max_step is not None:
                h = min(h, self.max_step)
            left = t_stop - t
            if self.steps % self.check_every:
                h_try = min(h, left)
                try:
                    c = self.step(c, t, h_try)
                except KrylovFailure:
                    h /= 2
                    continue
                t += h_try
                self.steps += 1
                continue
            h_try = min(h, left / 2)
            try:
                fine = self.step(self.step(c, t, h_try), t + h_try, h_try)
                coarse = self.step(c, t, 2 * h_try)
            except KrylovFailure:
                h /= 2
                continue
            err = np.linalg.norm(fine - coarse) / (2.0**self.order - 1.0) / 2.0
            h_opt = h_try * (10.0 if err == 0 else 0.9 * (self.tol / err) ** (1.0 / (self.order + 1)))
            if err <= self.tol:
                c, t = fine, t + 2 * h_try
                self.steps += 2
                h = min(h_opt, 2.0 * h)
            else:
                self.rejected += 1
                h = max(h_opt, 0.2 * h_try)
        return c, t_stop, h


def _basis_m(initial) -> int:
    ms = {0 if s.m is None else s.m for s, _ in initial}
    if len(ms) != 1:
        raise InputError(f"`atom.initial`: the basis route propagates one m at a time; got m = {sorted(ms)}")
    return ms.pop()


def _reference_energies(atom, n, l) -> np.ndarray:
    """Exact −Z²μ/(2n²), or a model atom's converged levels (NaN beyond its reference box)."""
    if atom.model is None:
        return -atom.Z**2 * atom.reduced_mass / (2.0 * n**2)
    from driven_atom.basis.model_levels import bound_states

    out = np.full(n.size, np.nan)
    for k, (nk, lk) in enumerate(zip(n, l)):
        energies = bound_states(atom, int(lk))[0]
        i = int(nk) - int(lk) - 1
        if i < energies.size:
            out[k] = energies[i]
    return out


def _hydrogenic_n(basis, atom, rtol: float = 1e-3) -> int:
    """Largest n up to which every bound state of the basis has its hydrogenic energy (a model
    atom: its converged level) within ``rtol``; higher box states are distorted by the wall and
    are reported only as a sum."""
    bound = basis.bound
    if not bound.any():
        return 0
    exact = _reference_energies(atom, basis.n[bound], basis.l[bound])
    bad = basis.n[bound][np.abs(basis.energies[bound] / exact - 1) > rtol]
    return int(bad.min() - 1 if bad.size else basis.n[bound].max())


class BasisRoute(Route):
    """Propagation in bound + box-continuum eigenstates (see the module docstring).

    >>> from driven_atom.atom import Atom, State
    >>> from driven_atom.pulse import Pulse
    >>> from driven_atom.config import OutputConfig
    >>> p = Pulse({"photon_energy": 0.6, "peak_field": 1e-3, "cycles": 3})
    >>> s = BasisSettings(r_max=40.0, dr=0.1, l_max=1, e_max=2.0, cache_dir=None)
    >>> res = BasisRoute(Atom(1), p, s, initial=[(State(1, 0), 1.0)], output=OutputConfig()).run()
    >>> 1e-6 < res.ionization < 1e-4, abs(res.norm - 1) < 1e-9
    (True, True)
    """

    name = "basis"
    Settings = BasisSettings
    spectra = ("photoelectron",)
    tolerance_key = "solver.tolerance"
    norm_tolerance = 1e-7           # each step is unitary to the Krylov accuracy (tolerance/2 per step)

    @classmethod
    def check(cls, atom, pulse, initial, cfg=None) -> None:
        super().check(atom, pulse, initial, cfg)
        _basis_m(initial)
        if cfg is not None and atom.model is not None and cfg.solver.dr_min is None \
                and atom.Z * cfg.solver.dr > MODEL_DR_Z:
            raise InputError(f"`solver.dr_min` is needed for the {atom.model.name} model (nuclear charge {atom.Z}): "
                             f"a stretched grid fine at the core, e.g. dr_min = 0.002 (or a uniform "
                             f"`solver.dr` <= {MODEL_DR_Z / atom.Z:.3g} bohr)")

    resource_fix = "lower `solver.r_max` or raise `solver.dr`, or lower `solver.l_max`"

    @classmethod
    def knobs(cls, settings) -> list:
        """dr (energies ∝ dr⁴), the step tolerance (error ∝ tolerance), r_max, l_max and e_max."""
        return [Knob("dr", settings.dr, settings.dr / 2**0.5, settings.dr * 2**0.5, 4, 2.8),
                Knob("tolerance", settings.tolerance, settings.tolerance / 2, min(2 * settings.tolerance, 5e-3), 1, 1.3),
                Knob("r_max", settings.r_max, 1.5 * settings.r_max, None, None, 3.4),
                Knob("l_max", settings.l_max, settings.l_max + max(2, settings.l_max // 2), None, None, 1.5),
                Knob("e_max", settings.e_max, 1.5 * settings.e_max, None, None, 1.5)]

    @classmethod
    def companion(cls, settings, result):
        """dr (and dr_min) stretched by √2 (Numerov energies ∝ dr⁴) and the step tolerance
        loosened fourfold: K = 4."""
        knobs = {"dr": settings.dr * 2**0.5, "tolerance": min(4 * settings.tolerance, 5e-3)}
        if settings.dr_min is not None:
            knobs["dr_min"] = settings.dr_min * 2**0.5
        return settings.model_copy(update=dict(knobs, cache_dir=None)), 4.0, knobs

    def estimate_resources(self):
        """Building the basis diagonalises one dense N×N H_l per partial wave (N = r_max/dr grid
        points): about 4·8·N² bytes at a time and N³ LAPACK operations each; the kept states
        (bound ones and the box continuum up to e_max, about r_max·√(2μ e_max)/π per l) and their
        dipole blocks follow."""
        from driven_atom.routes.resources import DENSE_EIGH_NS_PER_N3

        s = self.settings
        n = s.r_max / (s.dr_min if s.dr_min is not None else s.dr)
        if s.dr_min is not None:
            n = min(n, s.r_stretch / s.dr_min + s.r_max / s.dr)
        waves = s.l_max + 1
        kept = s.r_max * np.sqrt(2 * self.atom.reduced_mass * s.e_max) / np.pi + np.sqrt(s.r_max)
        memory = 8.0 * (4 * n * n + n * kept * 2 + waves * kept * kept * 2)
        seconds = waves * n * n * n * DENSE_EIGH_NS_PER_N3 * 1e-9      # float products: inf, never an error
        return float(memory), float(seconds)

    def _prepare(self) -> None:
        import time

        from driven_atom.basis.eigenbasis import cache_path, cached_basis

        s, pulse, atom = self.settings, self.pulse, self.atom
        started = time.perf_counter()
        self.m = _basis_m(self.initial)
        spec = dict(r_max=s.r_max, dr=s.dr, l_max=s.l_max, n_max=s.n_max, e_max=s.e_max, m=self.m,
                    dr_min=s.dr_min, r_stretch=s.r_stretch)
        basis, reused = cached_basis(atom, self.cache_dir, save=False, **spec)
        # saved once the preflight has passed (a refused basis is not kept)
        self._unsaved = None if reused or self.cache_dir is None else cache_path(atom, self.cache_dir, **spec)
        self.basis = basis
        self.stats.update({"basis_size": basis.size, "basis_key": basis.key, "basis_reused": reused,
                           "basis_build_s": time.perf_counter() - started, "gauge": s.gauge})
        if s.gauge == "length":
            drive, coupling = pulse.field_z, basis.dipole
        else:
            coupling = basis.velocity_dipole()

            def drive(t):
                return pulse.vector_potential_z(t) / basis.mu
        self.prop = MagnusPropagator(basis.energies, coupling, drive, s.tolerance, s.max_step,
                                     scheme=s.scheme, groups=basis.l)
        self.t_start, self.t_end = pulse.t_start, pulse.t_end
        self.max_slice = SLICE_AU
        self.population_soft = s.warn_population
        self.n_good = _hydrogenic_n(basis, atom)
        self.hist_idx = np.flatnonzero(basis.bound & (basis.n <= min(HISTORY_N_MAX, self.n_good)))
        self.cont = ~basis.bound
        # the top partial wave tells of truncation only above the initial states' own waves
        self.top_l = basis.l == basis.l.max() if basis.l.max() > max(s.l for s, _ in self.initial) else None
        e_cont = basis.energies[self.cont]
        self.near_emax = self.cont & (basis.energies >= 0.9 * float(e_cont.max() if e_cont.size else 0.0))

    def preflight(self) -> list:
        """The initial states' energies in this basis against the exact −Z²μ/(2n²) (Bethe &
        Salpeter 1957), for a model atom against its level converged on the reference grid
        (:mod:`driven_atom.basis.model_levels`): a box too small for the state or a grid too coarse
        shows here first."""
        from driven_atom.routes.quality import assess

        atom, s = self.atom, self.settings
        worst, too_small = 0.0, False
        for state, _ in self.initial:
            exact = float(_reference_energies(atom, np.array([state.n]), np.array([state.l]))[0])
            energy = float(self.basis.energies[self.basis.index(state)])
            worst = max(worst, abs(energy / exact - 1))
            size = state.n**2 / (atom.Z * atom.reduced_mass) if atom.model is None else 1 / (2 * abs(exact))
            too_small |= s.r_max < 4 * size                                        # twice the turning point
        if too_small:
            fix = f"raise `solver.r_max` (the state reaches beyond the box of {s.r_max:g} bohr)"
        else:
            fix = f"lower `solver.dr` to about {s.dr * (1e-5 / worst) ** 0.25:.3g} bohr" if worst > 0 else ""
        return [assess("initial_energy_error", worst, soft=5e-4, hard=1e-3,
                       key="solver.r_max" if too_small else "solver.dr",
                       why="relative error of the initial state's energy in this basis", fix=fix)]

    def _initial(self):
        from driven_atom.basis.eigenbasis import save_basis

        if self._unsaved is not None:
            save_basis(self.basis, self._unsaved)
            self._unsaved = None
        c = np.zeros(self.basis.size, dtype=complex)
        for state, amplitude in self.initial:
            c[self.basis.index(state)] += amplitude
        return {"c": c, "h": min(1.0, (self.t_end - self.t_start) / 10)}

    def _advance(self, state, t, t_next):
        c, _, h = self.prop.advance(state["c"], t, t_next, state["h"])
        return {"c": c, "h": h}

    def steps_done(self, state) -> int:
        return self.prop.steps

    def _sample(self, state):
        c = state["c"]
        pop = np.abs(c) ** 2
        pops = {self.basis.label(i): float(pop[i]) for i in self.hist_idx}
        series = {"norm": float(pop.sum()), "ionization": float(pop[self.cont].sum()),
                  "dipole_z": float(np.vdot(c, self.basis.dipole @ c).real),
                  "_near_e_max": float(pop[self.near_emax].sum())}
        if self.top_l is not None:
            series["top_l_population"] = float(pop[self.top_l].sum())
        return pops, series

    def _save(self, state):
        return {"c": state["c"]}, {"h": state["h"], "steps": self.prop.steps, "matvecs": self.prop.matvecs}

    def _load(self, arrays, meta):
        self.prop.steps, self.prop.coupling.products = int(meta["steps"]), int(meta["matvecs"])
        return {"c": np.array(arrays["c"], dtype=complex), "h": float(meta["h"])}

    def _finish(self, state, history) -> Outcome:
        from driven_atom.observables.photoelectron import box_spectrum

        basis, s = self.basis, self.settings
        pop = np.abs(state["c"]) ** 2
        bound_idx = np.flatnonzero(basis.bound & (basis.n <= self.n_good))
        energy = np.linspace(0.0, float(s.e_max), s.spectrum_points)
        l_min = int(basis.l.min())
        cont = self.cont
        dP_dE, dP_dE_l = box_spectrum(energy, basis.energies[cont], basis.l[cont], pop[cont],
                                      basis.dos[cont], int(basis.l.max()) - l_min + 1, l_min)
        stats = dict(self.stats)
        stats.update({"box_rydberg_population": float(pop[basis.bound].sum() - pop[bound_idx].sum()),
                      "matvecs": self.prop.matvecs, "steps": self.prop.steps,
                      "top_l_population": float(history.series["top_l_population"].max())
                      if "top_l_population" in history.series else 0.0,
                      "e_max_population": float(history.series["_near_e_max"].max())})
        warnings = []
        if s.gauge == "velocity" and abs(float(self.pulse.vector_potential_z(np.array([self.t_end]))[0])) > 1e-8:
            warnings.append("A(t) does not vanish at the end of the pulse (static field): velocity-gauge "
                            "amplitudes differ from length-gauge ones by the gauge phase; use gauge = \"length\"")
        return Outcome(populations={basis.label(i): float(pop[i]) for i in bound_idx},
                       ionization=float(pop[cont].sum()), norm=float(pop.sum()),
                       spectra={"photoelectron": {"energy": energy, "dP_dE": dP_dE, "dP_dE_l": dP_dE_l}},
                       stats=stats, warnings=warnings)

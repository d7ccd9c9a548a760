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
Each exponential acts through a Lanczos process (:mod:`driven_atom.engines.krylov`, numba kernels) whose
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

>>> Settings(route="basis", e_max="50 eV").e_max > 1.8
True
"""
from __future__ import annotations

import math
import time
from typing import Literal, Union

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, field_validator

from driven_atom.engines.krylov import Coupling, KrylovFailure
from driven_atom.errors import InputError
from driven_atom.result import Result

Quantity = Union[float, str]
HISTORY_N_MAX = 4          # bound levels with n <= this get a population history


def _positive(value, kind: str, key: str) -> float:
    from driven_atom.units import to_au

    result = to_au(value, kind, name=f"solver.{key}")
    if not result > 0:
        raise InputError(f"`solver.{key}` must be > 0, got {value!r}")
    return result


class Settings(BaseModel):
    """``[solver]`` keys of route ``basis``; quantities take units ("80 eV") or plain a.u."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    route: Literal["basis"] = Field("basis", description="this route")
    r_max: Quantity = Field(200.0, description="box radius (bohr); sets the continuum density of states")
    dr: Quantity = Field(0.08, description="grid spacing (bohr); E_n exact to 1e-5 for n <= 6 at 0.08")
    dr_min: Quantity | None = Field(None, description="finest spacing at the nucleus (bohr): stretches "
                                    "the grid from dr_min to dr (default: uniform grid of step dr)")
    r_stretch: Quantity = Field(10.0, description="radius (bohr) of the stretched grid's transition")
    l_max: int = Field(3, ge=0, le=200, description="highest partial wave")
    n_max: int | None = Field(None, ge=1, description="highest bound n kept (default: all the box holds)")
    e_max: Quantity = Field(3.0, description="highest continuum energy kept (hartree or with units)")
    form: Literal["length", "velocity"] = Field("length", description="dipole coupling: E·z or A·p/μ")
    tolerance: float = Field(1e-9, gt=0, lt=1e-2, description="local error per time step (amplitude norm)")
    scheme: Literal["cf6", "cf4"] = Field("cf6", description="commutator-free Magnus scheme: order 6 "
                                          "(five exponentials) or order 4 (two)")
    max_step: Quantity | None = Field(None, description="largest time step (a.u. or with units; default: none)")
    warn_population: float = Field(1e-4, gt=0, le=1, description="warn when the population in l = l_max "
                                   "or near e_max exceeds this")
    cache_dir: str | None = Field("auto", description="folder for the basis cache; \"auto\" = next to "
                                  "the result file, none = no disk cache")
    spectrum_points: int = Field(400, ge=10, description="energies in the photoelectron spectrum")
    checkpoint_every: Quantity = Field(60.0, description="wall-clock seconds between checkpoints of a run "
                                       "(at history samples); plain numbers are seconds")

    @field_validator("r_max", "dr", "r_stretch")
    @classmethod
    def _length(cls, value, info):
        return _positive(value, "length", info.field_name)

    @field_validator("dr_min")
    @classmethod
    def _optional_length(cls, value, info):
        return None if value is None else _positive(value, "length", info.field_name)

    @field_validator("e_max")
    @classmethod
    def _energy(cls, value, info):
        return _positive(value, "energy", info.field_name)

    @field_validator("checkpoint_every")
    @classmethod
    def _wall(cls, value, info):
        from driven_atom.units import AU_TIME_S, to_au

        if isinstance(value, (int, float)):
            seconds = value
        else:
            seconds = to_au(value, "time", name="solver.checkpoint_every") * AU_TIME_S
        if not seconds >= 0:
            raise InputError(f"`solver.checkpoint_every` must be >= 0 s, got {value!r}")
        return float(seconds)

    @field_validator("max_step")
    @classmethod
    def _time(cls, value, info):
        return None if value is None else _positive(value, "time", info.field_name)


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
    form, otherwise as complex CSR (:class:`driven_atom.engines.krylov.Coupling`). See the module
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


def _initial_vector(basis, initial) -> np.ndarray:
    c = np.zeros(basis.size, dtype=complex)
    for state, amplitude in initial:
        c[basis.index(state)] += amplitude
    return c


def _basis_m(initial) -> int:
    ms = {0 if s.m is None else s.m for s, _ in initial}
    if len(ms) != 1:
        raise InputError(f"`atom.initial`: the basis route propagates one m at a time; got m = {sorted(ms)}")
    return ms.pop()


def _hydrogenic_n(basis, atom, rtol: float = 1e-3) -> int:
    """Largest n up to which every bound state of the basis has its hydrogenic energy within
    ``rtol``; higher box states are distorted by the wall and are reported only as a sum."""
    bound = basis.bound
    exact = -atom.Z**2 * atom.reduced_mass / (2.0 * basis.n[bound] ** 2)
    bad = basis.n[bound][np.abs(basis.energies[bound] / exact - 1) > rtol]
    return int(bad.min() - 1 if bad.size else basis.n[bound].max())


def _cache_folder(settings: Settings, checkpoint):
    if settings.cache_dir is None or settings.cache_dir.lower() == "none":
        return None
    if settings.cache_dir == "auto":
        return None if checkpoint is None else checkpoint.path.parent / ".basis-cache"
    return settings.cache_dir


def propagate(atom, pulse, settings: Settings, *, initial, output, progress=False, checkpoint=None) -> Result:
    """Propagate ``initial`` (list of (State, amplitude)) through ``pulse`` in the eigenbasis.

    >>> from driven_atom.atom import Atom, State
    >>> from driven_atom.pulse import Pulse
    >>> from driven_atom.campaign.config import OutputConfig
    >>> p = Pulse({"photon_energy": 0.6, "peak_field": 1e-3, "cycles": 3})
    >>> s = Settings(r_max=40.0, dr=0.1, l_max=1, e_max=2.0, cache_dir=None)
    >>> res = propagate(Atom(1), p, s, initial=[(State(1, 0), 1.0)], output=OutputConfig())
    >>> 1e-6 < res.ionization < 1e-4, abs(res.norm - 1) < 1e-9
    (True, True)
    """
    from driven_atom.basis.eigenbasis import cached_basis
    from driven_atom.observables.photoelectron import box_spectrum
    from driven_atom.observables.populations import level_populations

    if not pulse.is_linear_z:
        raise InputError("`pulse.polarization`: the basis route handles linear z polarisation only "
                         "(use route = \"grid\" or \"levels\" for x or circular light)")
    wall0 = time.perf_counter()
    m = _basis_m(initial)
    basis, reused = cached_basis(atom, _cache_folder(settings, checkpoint), r_max=settings.r_max,
                                 dr=settings.dr, l_max=settings.l_max, n_max=settings.n_max,
                                 e_max=settings.e_max, m=m, dr_min=settings.dr_min,
                                 r_stretch=settings.r_stretch)
    build_s = time.perf_counter() - wall0
    c = _initial_vector(basis, initial)
    if settings.form == "length":
        drive, coupling = pulse.field_z, basis.dipole
    else:
        coupling = basis.velocity_dipole()

        def drive(t):
            return pulse.vector_potential_z(t) / basis.mu
    prop = MagnusPropagator(basis.energies, coupling, drive, settings.tolerance, settings.max_step,
                            scheme=settings.scheme, groups=basis.l)

    t0, t1 = pulse.t_start, pulse.t_end
    every = output.every_au
    if every is None:
        times = np.linspace(t0, t1, 201)
    else:
        times = t0 + every * np.arange(int(math.floor((t1 - t0) / every + 1e-9)) + 1)
        if times[-1] < t1 - 1e-9:
            times = np.append(times, t1)
    hist_idx = np.flatnonzero(basis.bound & (basis.n <= min(HISTORY_N_MAX, _hydrogenic_n(basis, atom))))
    cont = ~basis.bound
    top_l = basis.l == basis.l.max()
    e_cont = basis.energies[cont]
    near_emax = cont & (basis.energies >= 0.9 * float(e_cont.max() if e_cont.size else 0.0))
    records = {"bound": np.zeros((times.size, hist_idx.size)), "norm": np.zeros(times.size),
               "ionization": np.zeros(times.size), "dipole_z": np.zeros(times.size),
               "top_l": np.zeros(times.size), "near_emax": np.zeros(times.size)}

    def record(i, c):
        pop = np.abs(c) ** 2
        records["bound"][i] = pop[hist_idx]
        records["norm"][i] = pop.sum()
        records["ionization"][i] = pop[cont].sum()
        records["dipole_z"][i] = np.vdot(c, basis.dipole @ c).real
        records["top_l"][i] = pop[top_l].sum()
        records["near_emax"][i] = pop[near_emax].sum()

    start, h = 0, min(1.0, (t1 - t0) / 10)
    resumed = checkpoint.load() if checkpoint is not None else None
    if resumed is not None:
        arrays, meta = resumed
        c, start, h = arrays["c"], int(meta["sample"]), float(meta["h"])
        prop.steps, prop.coupling.products = int(meta.get("steps", 0)), int(meta.get("matvecs", 0))
        for key in records:
            records[key][:start + 1] = arrays[key][:start + 1]
    else:
        record(0, c)
    bar = None
    if progress:
        from tqdm import tqdm

        bar = tqdm(total=times.size - 1, initial=start, desc="basis", unit="sample", leave=False)
    last_save = time.perf_counter()
    for i in range(start, times.size - 1):
        c, _, h = prop.advance(c, times[i], times[i + 1], h)
        record(i + 1, c)
        if bar is not None:
            bar.update(1)
        if checkpoint is not None and time.perf_counter() - last_save >= settings.checkpoint_every:
            checkpoint.save({"c": c, **records}, {"sample": i + 1, "h": h, "steps": prop.steps,
                                                  "matvecs": prop.matvecs})
            last_save = time.perf_counter()
    if bar is not None:
        bar.close()

    pop = np.abs(c) ** 2
    bound_idx = np.flatnonzero(basis.bound & (basis.n <= _hydrogenic_n(basis, atom)))
    populations = level_populations({basis.label(i): float(pop[i]) for i in bound_idx})
    history = level_populations({basis.label(i): records["bound"][:, j] for j, i in enumerate(hist_idx)})
    energy = np.linspace(0.0, float(settings.e_max), settings.spectrum_points)
    l_min = int(basis.l.min())
    n_waves = int(basis.l.max()) - l_min + 1
    dP_dE, dP_dE_l = box_spectrum(energy, basis.energies[cont], basis.l[cont], pop[cont],
                                  basis.dos[cont], n_waves, l_min)
    stats = {"basis_size": basis.size, "basis_key": basis.key, "basis_reused": reused,
             "basis_build_s": build_s, "box_rydberg_population": float(pop[basis.bound].sum()
                                                                            - pop[bound_idx].sum()), "matvecs": prop.matvecs, "form": settings.form,
             "top_l_population": float(records["top_l"].max()),
             "e_max_population": float(records["near_emax"].max()),
             "propagate_s": time.perf_counter() - wall0 - build_s}
    warnings = []
    if settings.form == "velocity" and abs(float(pulse.vector_potential_z(np.array([t1]))[0])) > 1e-8:
        warnings.append("A(t) does not vanish at the end of the pulse (static field): velocity-form "
                        "amplitudes differ from length-form ones by the gauge phase; use form = \"length\"")
    for key, setting in (("top_l_population", "l_max"), ("e_max_population", "e_max")):
        if stats[key] > settings.warn_population:
            warnings.append(f"basis not converged: {key} = {stats[key]:.3g} > warn_population = "
                            f"{settings.warn_population:.3g}; raise `solver.{setting}`")
    return Result(route="basis", populations=populations, ionization=float(pop[cont].sum()),
                  norm=float(pop.sum()), times=times, history_populations=history,
                  series={k: records[k] for k in ("norm", "ionization", "dipole_z")},
                  spectra={"photoelectron": {"energy": energy, "dP_dE": dP_dE, "dP_dE_l": dP_dE_l}},
                  stats=stats, warnings=warnings)

"""``[solver]`` keys of every route: one frozen pydantic model per route, each key documented once.

The models live here, at the bottom of the house beside the run description, so that the config
can validate a ``[solver]`` table (and every expanded scan job) without importing a route. A
route class names its model (``Route.Settings``); :data:`SETTINGS` is the registry the config
dispatches on (``route = "grid"`` picks :class:`GridSettings`).

One meaning per key across routes:

* ``gauge`` = "length" | "velocity" wherever a route couples the field (``form`` is a deprecated
  alias on the basis route);
* ``checkpoint_every`` is a wall-clock time with units ("60 s", "10 min") on every resumable route;
  a plain whole number counts steps only where the route declares step granularity (grid);
* the grid's population labels are ``label_n_max`` (``n_max`` truncates the basis route's basis).

Quantities are converted to atomic units when the table is read (:mod:`driven_atom.quantities`);
keys that change no number of a result (``threads``, ``checkpoint_every``, ``cache_dir``) are
listed in ``NOT_PHYSICS`` and stay out of job ids.

>>> GridSettings(dr="0.1 au", l_max=6).dr
0.1
"""
from __future__ import annotations

import warnings
from typing import ClassVar, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from driven_atom.atom.components import parse_label
from driven_atom.atom.states import State, parse_state
from driven_atom.quantities import Cadence, CheckpointCadence, Flag, Integer, Number, Quantity


class ConfigWarning(UserWarning):
    """A config key that still works but should be written differently."""


def _renamed(data, old: str, new: str, route: str):
    """Accept ``old`` for ``new`` with a warning (deprecated alias)."""
    if isinstance(data, dict) and old in data:
        if new in data:
            raise ValueError(f"`solver.{old}` is the old name of `solver.{new}`; give only `{new}`")
        warnings.warn(f"`solver.{old}` is deprecated on route {route!r}: write `solver.{new}`",
                      ConfigWarning, stacklevel=2)
        data = dict(data)
        data[new] = data.pop(old)
    return data


class RouteSettings(BaseModel):
    """Common base of the ``[solver]`` models (extra keys refused, values frozen)."""

    model_config = ConfigDict(extra="forbid", frozen=True)
    NOT_PHYSICS: ClassVar[frozenset] = frozenset()
    PROPAGATES_ANY_M: ClassVar[bool] = False     # the route propagates an initial state of any one m

    route: str

    def physics(self) -> dict:
        """The keys that shape the numbers (for job ids), in JSON form."""
        return self.model_dump(mode="json", exclude=set(self.NOT_PHYSICS))


class LevelsSettings(RouteSettings):
    """``[solver]`` of route ``levels``: master equation of chosen sublevels (qutip)."""

    route: Literal["levels"] = Field("levels", description="the few-level master-equation route")
    states: list[str] = Field(..., min_length=1, description=(
        'levels or sublevels in the model: "2p" brings all its m-sublevels, "2p0" only that one; with '
        '`atom.structure` = "fine" or "hyperfine" also components: "2p3/2", "1s1/2 F=1", "2p1/2 m=1/2" '
        '("2p" then brings all its j, F and m)'))
    rwa: Flag = Field(True, description=(
        "rotating-wave approximation: each pulse drives only the transitions nearest its carrier"))
    energies: Literal["model", "measured"] = Field("model", description=(
        "level energies of a model atom (`atom.species`): the model's own, or the measured ones (NIST ASD "
        "fine-structure centroids, where the data file has them) so that resonances sit at the lab's "
        "wavelengths; dipoles and cross sections stay the model's"))
    decay: Flag = Field(True, description="spontaneous decay with the Einstein A of each m->m' channel")
    dephasing: Quantity("rate", ge=0) = Field(0.0, description=(
        'pure dephasing rate of coherences between different energies ("1 GHz" = 1e9 s^-1); with '
        '`atom.structure` "fine" or "hyperfine", between different shells n'))
    ionization_loss: Flag | None = Field(None, description=(
        "photoionisation loss of every level at the instantaneous intensity, into `ionization` "
        "(default: on with `two_photon`, off otherwise)"))
    two_photon: Flag = Field(False, description=(
        "two-photon excitation: each pulse drives the two-photon transitions (1s-2s, ns, nd) nearest "
        "twice its carrier, with the intermediate states eliminated (two-photon Rabi coupling and the "
        "ac Stark shifts of every level from sums over all states, continuum included); one-photon "
        "couplings are then left out"))
    after: Quantity("time", ge=0) | None = Field(None, description=(
        "field-free time after the pulse (closed form); default 0"))
    t_end: Quantity("time") | None = Field(None, description=(
        "absolute end time (the pulse window starts at its first foot); instead of `after`"))
    gauge: Literal["length"] = Field("length", description="interaction E(t)·r (the length gauge; "
                                     "a few-level model has no other)")
    atol: Number(gt=0) = Field(1e-12, description="absolute tolerance of the ODE solver (qutip atol)")
    rtol: Number(gt=0) = Field(1e-10, description="relative tolerance of the ODE solver (qutip rtol)")
    nsteps: Integer(gt=0, le=10**9) = Field(1_000_000, description="maximum internal ODE steps between samples")
    method: Literal["adams", "bdf", "lsoda", "dop853", "vern7", "vern9"] = Field(
        "adams", description="qutip integration method")
    max_step: Quantity("time", gt=0) | None = Field(None, description=(
        "largest ODE step (default: a tenth of the shortest pulse)"))
    sampling_tol: Number(gt=0, lt=1e-2) = Field(1e-7, description=(
        "accuracy of the cubic-spline samples of the field coefficients, relative to their peak"))

    @field_validator("states")
    @classmethod
    def _states(cls, value):
        seen: dict = {}
        for label in value:
            item = parse_label(label, name="solver.states")
            if not isinstance(item, State):
                continue              # components repeat sublevels only under a structure (checked by the route)
            for s in item.sublevels():
                if s in seen:
                    raise ValueError(f"`solver.states`: {label!r} repeats sublevel {s.label} (from {seen[s]!r})")
                seen[s] = label
        return value

    @model_validator(mode="after")
    def _one_end(self):
        if self.after is not None and self.t_end is not None:
            raise ValueError("`solver.after` and `solver.t_end` exclude each other; give one")
        if self.two_photon and not self.rwa:
            raise ValueError("`solver.two_photon` needs `solver.rwa` = true (the eliminated states are an RWA picture)")
        return self

    @property
    def photoionization(self) -> bool:
        """Whether levels lose population to photoionisation (``ionization_loss``, default: ``two_photon``)."""
        return self.two_photon if self.ionization_loss is None else self.ionization_loss

    def sublevels(self) -> list:
        """The model's Bohr sublevels in the order of ``states``, each level's m ascending.

        >>> [s.label for s in LevelsSettings(states=["1s", "2p"]).sublevels()]
        ['1s0', '2p-1', '2p0', '2p1']
        """
        return [s for label in self.states for s in parse_state(label, name="solver.states").sublevels()]


class BasisSettings(RouteSettings):
    """``[solver]`` of route ``basis``: bound + box-continuum eigenstates, Magnus propagation."""

    NOT_PHYSICS: ClassVar[frozenset] = frozenset({"cache_dir", "checkpoint_every"})
    PROPAGATES_ANY_M: ClassVar[bool] = True

    route: Literal["basis"] = Field("basis", description="this route")
    r_max: Quantity("length", gt=0) = Field(200.0, description="box radius (bohr); sets the continuum "
                                            "density of states")
    dr: Quantity("length", gt=0) = Field(0.08, description="grid spacing (bohr); E_n exact to 1e-5 for "
                                         "n <= 6 at 0.08")
    dr_min: Quantity("length", gt=0) | None = Field(None, description="finest spacing at the nucleus "
                                                    "(bohr): stretches the grid from dr_min to dr "
                                                    "(default: uniform grid of step dr)")
    r_stretch: Quantity("length", gt=0) = Field(10.0, description="radius (bohr) of the stretched grid's transition")
    l_max: Integer(ge=0, le=200) = Field(3, description="highest partial wave")
    n_max: Integer(ge=1) | None = Field(None, description="highest bound n kept in the basis "
                                        "(default: all the box holds)")
    e_max: Quantity("energy", gt=0) = Field(3.0, description="highest continuum energy kept (hartree or with units)")
    gauge: Literal["length", "velocity"] = Field("length", description="coupling: E·z (length) or "
                                                 "A·p/μ (velocity); `form` is its old name")
    tolerance: Number(gt=0, lt=1e-2) = Field(1e-9, description="local error per time step (amplitude norm)")
    scheme: Literal["cf6", "cf4"] = Field("cf6", description="commutator-free Magnus scheme: order 6 "
                                          "(five exponentials) or order 4 (two)")
    max_step: Quantity("time", gt=0) | None = Field(None, description="largest time step (default: none)")
    warn_population: Number(gt=0, le=1) = Field(1e-4, description="warn when the population in "
                                                 "l = l_max or near e_max exceeds this")
    cache_dir: str | None = Field("auto", description="folder for the basis cache: \"auto\" = "
                                  "`.basis-cache` beside the result file, \"none\" = no disk cache, or a "
                                  "folder name inside the result's folder; a folder elsewhere only from the "
                                  "command line (--cache-dir) or the Python API")
    spectrum_points: Integer(ge=10, le=100_000) = Field(400, description="energies in the photoelectron spectrum")
    checkpoint_every: CheckpointCadence(steps_allowed=False) = Field(
        Cadence(seconds=60.0), description="wall-clock time between checkpoints (\"60 s\", \"10 min\")")

    @model_validator(mode="before")
    @classmethod
    def _old_names(cls, data):
        return _renamed(data, "form", "gauge", "basis")

    @field_validator("cache_dir")
    @classmethod
    def _confined(cls, value):
        """Only a plain relative folder name: the cache stays inside the result's folder."""
        if value is None or value in ("auto", "none"):
            return value
        from pathlib import PurePosixPath

        path = PurePosixPath(value)
        if path.is_absolute() or ".." in path.parts or "\\" in value or not value.strip():
            raise ValueError('`solver.cache_dir` must be "auto", "none" or a folder name inside the result\'s '
                             "folder (no absolute path, no \"..\"); give another folder on the command line "
                             f"with --cache-dir, got {value[:80]!r}")
        return value


class GridSettings(RouteSettings):
    """``[solver]`` of route ``grid``: split-operator propagation of partial waves on a radial grid.
    Unset grid keys are derived from the pulse (see ``driven_atom.routes.grid.grid_parameters``)."""

    NOT_PHYSICS: ClassVar[frozenset] = frozenset({"threads", "checkpoint_every"})

    route: Literal["grid"] = Field("grid", description="propagation route")
    r_max: Quantity("length", gt=0) | None = Field(None, description=(
        "radial box size (bohr); default: room for the initial state (40 n²/(Zμ)), 5 quiver radii + "
        "20 bohr and, for a static field F, the tunnel exit I_p/F twice + 40 bohr; plus the absorber"))
    dr: Quantity("length", gt=0) | None = Field(None, description=(
        "grid spacing (bohr); default min(0.1/Z, 0.5/k_max), which puts the grid 1s energy within "
        "1e-5 of −Z²μ/2"))
    l_max: Integer(ge=1, le=2000) | None = Field(None, description=(
        "highest partial wave; default max(8, l₀ + 6, ⌈1.6·α₀·√(6.34 μ Uₚ)⌉): the angular momentum "
        "of a returning electron (3.17 Uₚ) at the quiver radius"))
    dt: Quantity("time", gt=0) | None = Field(None, description=(
        "largest time step; default min(0.05, 0.1/E_max, T/400); the step used divides the pulse "
        "window evenly"))
    absorber: Literal["mask", "none"] = Field("mask", description="edge absorber: cos^p mask or none")
    absorber_width: Quantity("length", ge=0) | None = Field(None, description=(
        "width of the mask at the outer edge (bohr); default max(20 bohr, 20 % of the inner region) "
        "(at most half a given r_max)"))
    mask_power: Number(gt=0, le=2) = Field(0.125, description=(
        "exponent p of the cos^p mask per 0.05 au of time (each step applies cos^(p·dt/0.05): "
        "dt-independent absorption)"))
    gauge: Literal["length", "velocity"] = Field("length", description=(
        "coupling: E(t)·z (length) or A(t)·p/μ (velocity, the A²/2μ term removed as a phase); the "
        "velocity gauge needs fewer partial waves in infrared fields"))
    label_n_max: Integer(ge=1, le=30) = Field(4, description=(
        "bound states with n <= label_n_max get their own population label"))
    checkpoint_every: CheckpointCadence(steps_allowed=True) = Field(
        Cadence(seconds=60.0), description="checkpoint interval: wall-clock time with units "
                                           "(\"60 s\", \"10 min\") or a whole number of time steps")
    photoelectron_methods: list[Literal["surface_flux", "window", "projection"]] = Field(
        default_factory=list, description=(
            'photoelectron spectra to compute, each angle-resolved (dP/dE, β_k, d²P/dE dΩ, the momentum '
            'map): "surface_flux" (the flux through the sphere `surface_radius` projected on Volkov waves '
            'while the run goes on; Tao & Scrinzi 2012; needs gauge = "velocity"), "window" (window '
            'operator on the final state; Schafer & Kulander 1990), "projection" (the final state on '
            'the field-free continuum of the grid, Coulomb phases); the first is stored as '
            '"photoelectrons", the others as "photoelectrons_<method>"'))
    photoelectron_e_min: Quantity("energy", gt=0) | None = Field(None, description=(
        "lowest photoelectron energy (the slowest electrons of interest; default: the spacing "
        "photoelectron_e_max / photoelectron_points with the surface flux, else a tenth of it)"))
    photoelectron_e_max: Quantity("energy", gt=0) | None = Field(None, description=(
        "highest photoelectron energy; default E_max of the grid defaults"))
    photoelectron_points: Integer(ge=2, le=100_000) = Field(200, description=(
        "number of energies, evenly spaced from photoelectron_e_min to photoelectron_e_max"))
    photoelectron_angles: Integer(ge=4, le=2000) | None = Field(None, description=(
        "emission angles: Gauss–Legendre nodes in cos θ (θ from the polarisation axis); default "
        "2 l_max + 2, which integrates the angular distribution of l ≤ l_max exactly"))
    momentum_map_points: Integer(ge=11, le=2001) = Field(101, description=(
        "points per axis of the momentum map d³P/dp³ in the polarisation plane (p_z along the "
        "polarisation, p_x across it)"))
    surface_radius: Quantity("length", gt=0) | None = Field(None, description=(
        "radius of the flux sphere of \"surface_flux\" (bohr); beyond it the potential is tapered to "
        "zero and the box only absorbs; default 5 quiver radii + 20 bohr, at least 40 n²/(Zμ)"))
    after: Quantity("time", ge=0) | None = Field(None, description=(
        "field-free time after the pulse (the electrons leave the atom; the flux keeps being "
        "counted); default: with \"surface_flux\", the time electrons of photoelectron_e_min need "
        "to reach surface_radius, else 0"))
    harmonic_window: Literal["hann", "blackman", "none"] = Field("hann", description=(
        "window on the dipole, velocity and acceleration records before their Fourier transform"))
    threads: Integer(ge=1, le=256) = Field(1, description=(
        "threads for the step (1: the fused single-core kernel; more: the unfused parallel kernel, "
        "which pays little: the step is bandwidth-bound, run jobs side by side instead)"))

    @model_validator(mode="before")
    @classmethod
    def _old_names(cls, data):
        data = _renamed(data, "n_max", "label_n_max", "grid")
        if isinstance(data, dict) and "photoelectron" in data:     # the old switch of the window spectrum
            if "photoelectron_methods" in data:
                raise ValueError("`solver.photoelectron` is the old form of `solver.photoelectron_methods`; "
                                 "give only `photoelectron_methods`")
            warnings.warn('`solver.photoelectron` is deprecated on route \'grid\': write '
                          '`solver.photoelectron_methods = ["window"]`', ConfigWarning, stacklevel=2)
            data = dict(data)
            flag = data.pop("photoelectron")
            if not isinstance(flag, bool):
                raise ValueError(f"`solver.photoelectron` must be true or false, got {flag!r}")
            data["photoelectron_methods"] = ["window"] if flag else []
        return data

    @field_validator("photoelectron_methods")
    @classmethod
    def _distinct(cls, value):
        if len(set(value)) != len(value):
            raise ValueError(f"`solver.photoelectron_methods` lists a method twice: {value}")
        return value

    @model_validator(mode="after")
    def _flux_needs_velocity(self):
        if "surface_flux" in self.photoelectron_methods and self.gauge != "velocity":
            raise ValueError('`solver.photoelectron_methods` "surface_flux" needs `solver.gauge` = "velocity" '
                             "(Volkov waves at the surface; the length gauge would need l ~ A·R there)")
        if self.gauge == "velocity" and self.threads != 1:
            raise ValueError('`solver.threads` > 1 runs the length-gauge kernel only; give threads = 1 with '
                             '`solver.gauge` = "velocity" (run jobs side by side instead)')
        if (self.photoelectron_e_min is not None and self.photoelectron_e_max is not None
                and self.photoelectron_e_min >= self.photoelectron_e_max):
            raise ValueError("`solver.photoelectron_e_min` must be below `solver.photoelectron_e_max`")
        return self

    @property
    def photoelectron(self) -> bool:
        """Whether any photoelectron spectrum is asked for."""
        return bool(self.photoelectron_methods)


SETTINGS: dict[str, type[RouteSettings]] = {"levels": LevelsSettings, "basis": BasisSettings,
                                            "grid": GridSettings}

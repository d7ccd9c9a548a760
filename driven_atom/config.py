"""The run description: one TOML file (or dict) describes atom, pulses, solver and output.

Everything here is checked when the file is read, before anything is computed: unknown keys (with
a "did you mean"), types (booleans are not numbers), units and their kind (a wavelength is a
length), ranges, exclusive keys, and the ``[solver]`` table against the chosen route's settings
(:mod:`driven_atom.settings`). Quantities are converted to atomic units at the door; the user's
own spelling is kept (:meth:`RunConfig.to_toml`) for the files we write.

Checks that need the physics objects (the pulse built from its keys, which route can treat which
light) run one floor up, in :func:`driven_atom.routes.load_config`, the function the package
exports as ``driven_atom.load_config``.

Job ids hash the physics, not its spelling (:meth:`RunConfig.physics_hash`): the validated
values in atomic units (rounded to 12 significant digits), defaults included, and the
:data:`HASH_VERSION`; output options and operational keys (threads, checkpoint cadence, cache
folder) are left out.

>>> cfg = read_config({"atom": {"Z": 1}, "pulse": [{"wavelength": "800 nm",
...     "intensity": "1e14 W/cm^2", "cycles": 4}], "solver": {"route": "grid"}})
>>> cfg.atom.initial, round(cfg.pulse[0].wavelength)
('1s', 15118)
"""
from __future__ import annotations

import cmath
import hashlib
import json
import math
import re
import tomllib
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationError, field_validator, model_validator

from driven_atom.atom.components import check_label
from driven_atom.atom.species import Atom
from driven_atom.atom.states import State
from driven_atom.errors import InputError, short, validation_message
from driven_atom.io import read_regular_text
from driven_atom.quantities import Flag, Integer, Number, Quantity
from driven_atom.settings import SETTINGS, RouteSettings

HASH_VERSION = 3                     # bump when the meaning of a hashed value changes
MAX_NESTING = 24                     # deepest table/list nesting a config may have
SIGNIFICANT = 12                     # digits of a float that enter a job id


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class WeightedState(_Section):
    """One component of a superposition initial state: amplitude² = weight (normalised over all)."""

    state: str = Field(description="state label, e.g. \"2p0\"")
    weight: Number(gt=0) = Field(1.0, description="relative weight |c|^2 (normalised over the list)")
    phase: Number() = Field(0.0, description="phase of the amplitude in radians")


class AtomConfig(_Section):
    """``[atom]``: nuclear charge, nucleus (name or mass), or a single-active-electron model atom by
    ``species``; level structure and initial state."""

    Z: Integer(ge=1, le=118) | None = Field(None, description="nuclear charge")
    nucleus: str = Field("infinite", description="nucleus name (H, D, T, He3, He, Li, ...), ion name "
                         "(He+, Li2+, ...), \"infinite\" or a mass with units (\"1.00728 u\")")
    species: str | None = Field(None, description=(
        "a single-active-electron model atom instead of a hydrogen-like one: He, Ne, Ar, Kr, Xe (Tong & Lin "
        "2005) or Li, Na, K, Rb, Cs (Marinescu et al. 1994, l-dependent); parameters and sources in "
        "driven_atom/atom/data/model_atoms.toml; excludes `Z` and `nucleus`"))
    structure: Literal["bohr", "fine", "hyperfine"] = Field("bohr", description=(
        "level structure: bohr (reduced-mass Bohr levels), fine (Dirac energies with recoil and the Lamb "
        "shift; states |n l j m_j>) or hyperfine (also the magnetic hyperfine structure; states |n l j F m_F>); "
        "fine and hyperfine need route \"levels\" and a hydrogen-like atom"))
    initial: str | list[WeightedState] = Field("1s", description="state label (\"1s\", or a component such as "
                                               "\"1s1/2 F=1 m=0\" with structure; \"ground\" for the ground state, "
                                               "the default of a model atom: Ar 3p, Na 3s), or a list of weighted "
                                               "states ({state, weight, phase}; a plain label has weight 1)")

    @model_validator(mode="before")
    @classmethod
    def _ground_by_default(cls, data):
        if isinstance(data, dict) and data.get("species") is not None and "initial" not in data:
            data = {**data, "initial": "ground"}
        return data

    @field_validator("initial", mode="before")
    @classmethod
    def _plain_labels(cls, value):
        if isinstance(value, list):
            return [{"state": item} if isinstance(item, str) else item for item in value]
        return value

    @model_validator(mode="after")
    def _species(self):
        if self.species is None:
            return self
        from driven_atom.atom.model_atoms import model_potential

        model = model_potential(self.species)
        if self.nucleus != "infinite":
            raise ValueError("`atom.species` and `atom.nucleus` exclude each other (a model atom carries the mass "
                             "of its most abundant isotope); give one")
        if self.Z is not None and self.Z != model.Z:
            raise ValueError(f"`atom.Z` = {self.Z} does not fit `atom.species` = {self.species!r} (Z = {model.Z}); "
                             f"drop `atom.Z`")
        if self.structure != "bohr":
            raise ValueError(f"`atom.structure` = {self.structure!r} is for hydrogen-like atoms; a model atom has "
                             f"\"bohr\" levels (its fine structure: `driven-atom transition` with --species)")
        return self

    def _label(self, label):
        if label == "ground":
            return self.build_atom().model.ground if self.species is not None else check_label("1s", self.structure)
        return check_label(label, self.structure, name="atom.initial")

    @model_validator(mode="after")
    def _labels(self):
        labels = [self.initial] if isinstance(self.initial, str) else [c.state for c in self.initial]
        if not labels:
            raise ValueError("`atom.initial` must name at least one state")
        seen = set()
        for label in labels:
            state = self._label(label)
            if state in seen:
                raise ValueError(f"`atom.initial` lists {state.label} twice (the norm would not be 1); "
                                 f"give each state once with its weight")
            seen.add(state)
        return self

    @model_validator(mode="after")
    def _atom(self):
        atom = self.build_atom()
        if self.structure == "hyperfine":
            from driven_atom.atom.structure import nuclear_spin2

            nuclear_spin2(atom)           # refuses a nucleus without spin and magnetic moment
        return self

    def build_atom(self) -> Atom:
        if self.species is not None:
            return Atom.from_species(self.species)
        return Atom.from_name(self.nucleus, Z=self.Z)

    def initial_states(self) -> list:
        """The initial state as a normalised list of (State or Component, complex amplitude)."""
        if isinstance(self.initial, str):
            return [(self._label(self.initial), 1.0 + 0j)]
        total = sum(c.weight for c in self.initial)
        return [(self._label(c.state), math.sqrt(c.weight / total) * cmath.exp(1j * c.phase))
                for c in self.initial]


MAX_MAGNETIC_T = 10.0                # the diamagnetic term (left out) reaches ~30 MHz at n = 2 there


class FieldsConfig(_Section):
    """``[fields]``: static fields of the apparatus, along z (the quantisation axis), present the whole
    run. They are part of the level structure: Zeeman and Stark couplings within each shell n of the
    model, diagonalised (route "levels" with ``atom.structure`` = "fine" or "hyperfine"). A ramped DC
    field that is part of the experiment is a [[pulse]] with envelope = "static" instead."""

    magnetic: Quantity("magnetic field") = Field(0.0, description=(
        "static magnetic field along z (\"5 G\", \"0.3 mT\"; the sign gives its direction), |B| <= 10 T"))
    electric: Quantity("field") = Field(0.0, description=(
        "static electric field along z (\"10 V/cm\"; the sign gives its direction)"))

    @model_validator(mode="after")
    def _range(self):
        from driven_atom.units import AU_MAGNETIC_T

        if abs(self.magnetic) * AU_MAGNETIC_T > MAX_MAGNETIC_T:
            raise ValueError(f"`fields.magnetic` must be within +-{MAX_MAGNETIC_T:g} T (the model leaves out the "
                             f"diamagnetic term), got {self.magnetic * AU_MAGNETIC_T:.4g} T")
        return self

    @property
    def any(self) -> bool:
        return self.magnetic != 0.0 or self.electric != 0.0


_EXCLUSIVE = (("wavelength", "photon_energy"), ("intensity", "peak_field"))
# Hard X-rays (above ~10 keV, wavelengths below ~0.1 nm) reach past the dipole approximation and
# the one-electron picture of every route: such carriers are refused at the door.
MAX_PHOTON_ENERGY_AU = 400.0           # about 10.9 keV
MIN_WAVELENGTH_AU = 2.0                # about 0.106 nm


class PulseConfig(_Section):
    """``[[pulse]]``: one laser pulse (several tables add). Quantities are in atomic units once
    read; the consistency of lengths, ramps and chirp is checked when the pulse is built
    (:mod:`driven_atom.pulse`)."""

    envelope: Literal["sin2", "gaussian", "flat", "cos4", "static"] = Field(
        "sin2", description="envelope of A(t): sin2 | gaussian | flat | cos4 | static (a ramped DC field)")
    wavelength: Quantity("length", ge=MIN_WAVELENGTH_AU) | None = Field(
        None, description="carrier wavelength (vacuum); or photon_energy")
    photon_energy: Quantity("energy", gt=0, le=MAX_PHOTON_ENERGY_AU) | None = Field(
        None, description="carrier photon energy; or wavelength")
    intensity: Quantity("intensity", ge=0) | None = Field(None, description="peak cycle-averaged "
                                                          "intensity; or peak_field")
    peak_field: Quantity("field", ge=0) | None = Field(None, description="peak field F0 (per component for "
                                                       "circular light, along the major axis for elliptical)")
    cycles: Number(gt=0) | None = Field(None, description="optical cycles foot to foot (gaussian: within the FWHM)")
    length: Quantity("time", gt=0) | None = Field(None, description="foot-to-foot duration (gaussian: the window)")
    fwhm: Quantity("time", gt=0) | None = Field(None, description="FWHM of the intensity envelope")
    ramp: Quantity("time", gt=0) | None = Field(None, description="sin^2 ramp length (flat and static)")
    cep: Number() = Field(0.0, description="carrier-envelope phase in radians")
    chirp: Quantity("chirp") | None = Field(None, description="linear chirp beta = d(omega)/dt, e.g. \"0.05 eV/fs\"")
    delay: Quantity("time") = Field(0.0, description="centre of the envelope t0")
    polarization: Literal["z", "x", "circular+", "circular-", "elliptical"] = Field(
        "z", description="z | x | circular+ (x -> y, drives Delta m = +1) | circular- | elliptical (x-y plane)")
    ellipticity: Number(ge=-1, le=1) | None = Field(None, description="elliptical only: minor/major field "
                                                    "ratio in [-1, 1], major axis x; + turns x -> y like circular+")

    @model_validator(mode="after")
    def _keys_fit_together(self):
        if self.envelope == "static":
            for name in ("wavelength", "photon_energy", "cycles", "fwhm", "chirp"):
                if getattr(self, name) is not None:
                    raise ValueError(f"`{name}` does not apply to envelope = \"static\" (a DC field)")
            if self.cep != 0:
                raise ValueError("`cep` does not apply to envelope = \"static\" (a DC field)")
            for name, why in (("length", " (ramp included)"), ("ramp", "")):
                if getattr(self, name) is None:
                    raise ValueError(f"`{name}` is required for envelope = \"static\"{why}")
            if self.polarization not in ("z", "x"):
                raise ValueError(f"`polarization` of a static field must be \"z\" or \"x\", got {self.polarization!r}")
        for a, b in _EXCLUSIVE + (("length", "cycles"), ("length", "fwhm"), ("cycles", "fwhm")):
            if getattr(self, a) is not None and getattr(self, b) is not None:
                if not (self.envelope == "gaussian" and "length" in (a, b)):
                    raise ValueError(f"`{a}` and `{b}` exclude each other; give one")
        if self.envelope != "static":
            if self.wavelength is None and self.photon_energy is None:
                raise ValueError("`wavelength` (or `photon_energy`) is required")
            if self.envelope == "gaussian":
                if self.fwhm is None and self.cycles is None:
                    raise ValueError("`fwhm` (or `cycles`) is required for envelope = \"gaussian\"")
            elif self.length is None and self.cycles is None and self.fwhm is None:
                raise ValueError("`length` (or `cycles` or `fwhm`) is required")
            if self.envelope == "flat" and self.ramp is None:
                raise ValueError("`ramp` is required for envelope = \"flat\"")
            if self.envelope != "flat" and self.ramp is not None:
                raise ValueError("`ramp` applies only to envelope = \"flat\" or \"static\"")
        if self.intensity is None and self.peak_field is None:
            raise ValueError("`intensity` (or `peak_field`) is required")
        if self.polarization != "elliptical" and self.ellipticity not in (None, 0.0):
            raise ValueError(f"`ellipticity` applies only to polarization = \"elliptical\", "
                             f"got polarization = {self.polarization!r}")
        return self

    def physics(self) -> dict:
        return self.model_dump(mode="json", exclude_none=True)


class OutputConfig(_Section):
    """``[output]``: what to store and how often to sample the history."""

    every: Quantity("time", gt=0) | None = Field(None, description="history sampling interval "
                                                 "(default: 200 samples over the run)")
    error_estimate: Flag = Field(False, description="run a coarser companion and store an error bar "
                                 "for every scalar (ionization_err, ...); costs about a third of the run")

    @property
    def every_au(self) -> float | None:
        """``every`` in atomic units of time (None: 200 samples over the run)."""
        return self.every


class RunConfig(_Section):
    """A whole run: ``[atom]``, optional ``[fields]``, ``[[pulse]]``, ``[solver]``, ``[output]``,
    optional ``[scan]`` and ``[cluster]`` (checked by the campaign) and ``[lab]`` (the lab numbers of
    ``driven-atom estimate``, checked by :mod:`driven_atom.lab`; a run does not use them)."""

    atom: AtomConfig
    fields: FieldsConfig = Field(default_factory=FieldsConfig)
    pulse: list[PulseConfig] = Field(default_factory=list)
    solver: RouteSettings
    output: OutputConfig = Field(default_factory=OutputConfig)
    scan: dict[str, Any] | None = None
    cluster: dict[str, Any] | None = None
    lab: dict[str, Any] | None = None
    _source: dict = PrivateAttr(default_factory=dict)

    @model_validator(mode="wrap")
    @classmethod
    def _keep_source(cls, data, handler):
        model = handler(data)
        if isinstance(data, dict):
            model._source = _without_none(data)
        return model

    @field_validator("solver", mode="before")
    @classmethod
    def _route_settings(cls, value):
        if isinstance(value, RouteSettings):
            return value
        if not isinstance(value, dict):
            raise ValueError("must be a table with a `route` key")
        route = value.get("route")
        if route is None:
            raise ValueError(f"`solver.route` is required ({' | '.join(SETTINGS)})")
        if route not in SETTINGS:
            raise ValueError(f"`solver.route` must be one of {', '.join(SETTINGS)}, got {short(repr(route))}")
        try:
            return SETTINGS[route].model_validate(value)
        except ValidationError as exc:      # one line, keys and suggestions from the route's model
            raise ValueError(validation_message(exc, prefix="solver", model=SETTINGS[route])) from None

    @model_validator(mode="after")
    def _structure_fits(self):
        structure = self.atom.structure
        if self.fields.any and structure == "bohr":
            raise ValueError("`fields` need `atom.structure` = \"fine\" or \"hyperfine\" (the Bohr model has no "
                             "spin: no Zeeman effect, and its 2s and 2p are degenerate)")
        for label in getattr(self.solver, "states", None) or ():
            check_label(label, structure, name="solver.states")
        return self

    # -- derived objects (the pulse is built one floor up: driven_atom.pulse.build_pulse) ------------
    @property
    def route(self) -> str:
        return self.solver.route

    def build_atom(self) -> Atom:
        return self.atom.build_atom()

    def initial_states(self) -> list:
        """The initial state as a normalised list of (State, complex amplitude)."""
        return self.atom.initial_states()

    def unpolarised_p_level(self):
        """The p level (m = None) a model atom starts in when no sublevel is named ("ground" of Ar:
        3p; "3p" of Na written without m), else None."""
        if self.atom.species is None or not isinstance(self.atom.initial, str):
            return None
        state = self.atom._label(self.atom.initial)
        return state if state.l == 1 and state.m is None else None

    def m_parts(self) -> list | None:
        """The runs whose weighted sum is the result: [(initial states, weight, m)], or None for one run.

        A model atom's p level without m (the hole of a filled p shell, or an unpolarised excited
        p level) has its sublevels m = −1, 0, 1 equally occupied: linear polarisation along z
        conserves m and the runs of m = ±1 are equal, so the average is (P(m=0) + 2 P(|m|=1))/3
        (single-active-electron practice; Tong & Lin, J. Phys. B 38, 2593 (2005)) — made on the
        routes that propagate any m (the others take m = 0 and say so in the result)."""
        level = self.unpolarised_p_level()
        if level is None or not type(self.solver).PROPAGATES_ANY_M:
            return None
        return [([(State(level.n, 1, m), 1.0 + 0j)], weight, m) for m, weight in ((0, 1 / 3), (1, 2 / 3))]

    # -- text ---------------------------------------------------------------------------------------
    def to_dict(self) -> dict:
        """The config as the user wrote it (units and spelling kept; absent keys absent)."""
        return json.loads(json.dumps(self._source)) if self._source else self.model_dump(mode="json",
                                                                                            exclude_none=True)

    def to_toml(self) -> str:
        import tomli_w

        return tomli_w.dumps(self.to_dict())

    def physics(self) -> dict:
        """The values that shape the numbers, in atomic units (the content of the job id)."""
        atom = self.build_atom()
        initial = [[s.label, a.real, a.imag] for s, a in self.initial_states()]
        atom_physics = {"Z": atom.Z, "nuclear_mass": atom.nuclear_mass, "initial": initial,
                        "structure": self.atom.structure}
        if atom.model is not None:                   # the potential's identity (hydrogen-like ids unchanged)
            atom_physics["species"] = atom.model.key
        if self.m_parts() is not None:               # the m-averaged result of a p level (other ids unchanged)
            atom_physics["m_average"] = True
        return _canonical({"hash_version": HASH_VERSION,
                           "atom": atom_physics,
                           "fields": self.fields.model_dump(mode="json"),
                           "pulse": [p.physics() for p in self.pulse],
                           "solver": self.solver.physics()})

    def physics_hash(self) -> str:
        """Content hash of :meth:`physics` (16 hex digits)."""
        text = json.dumps(self.physics(), sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()[:16]


def _canonical(obj):
    """Floats to 12 significant digits (inf as text), recursively: equal physics, equal text."""
    if isinstance(obj, dict):
        return {str(k): _canonical(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_canonical(v) for v in obj]
    if isinstance(obj, float):
        if not math.isfinite(obj):
            return repr(obj)
        value = float(f"{obj:.{SIGNIFICANT}g}")
        return 0.0 if value == 0 else value
    return obj


def _without_none(obj):
    if isinstance(obj, dict):
        return {k: _without_none(v) for k, v in obj.items() if v is not None}
    if isinstance(obj, list):
        return [_without_none(v) for v in obj]
    return obj


def _depth(obj, limit: int) -> int:
    """Nesting depth of tables and lists, counted without recursion (stops past ``limit``)."""
    deepest, stack = 0, [(obj, 1)]
    while stack:
        node, d = stack.pop()
        if isinstance(node, (dict, list)):
            deepest = max(deepest, d)
            if deepest > limit:
                return deepest
            stack.extend((v, d + 1) for v in (node.values() if isinstance(node, dict) else node))
    return deepest


_BARE_KEY = re.compile(r"`([A-Za-z_][A-Za-z0-9_]*)`")


def qualify(message: str, prefix: str) -> str:
    """Prefix the bare keys of a model-level message with their section: `cycles` -> `pulse.0.cycles`.

    >>> qualify("`length` and `cycles` exclude each other", "pulse.0")
    '`pulse.0.length` and `pulse.0.cycles` exclude each other'
    """
    if not prefix or re.search(r"`[^`]*\.[^`]*`", message):      # already names dotted keys
        return message
    return _BARE_KEY.sub(lambda m: f"`{prefix}.{m.group(1)}`", message)


def config_message(exc: ValidationError) -> str:
    """One line for a config ``ValidationError`` (see :func:`driven_atom.errors.validation_message`)."""
    err = max(exc.errors(), key=lambda e: len(e["loc"]))
    message = validation_message(exc, model=RunConfig)
    if err["type"] == "value_error" and message.startswith("`"):
        return qualify(message, ".".join(str(p) for p in err["loc"]))
    return message


def read_settings(table: dict) -> RouteSettings:
    """Validate one ``[solver]`` table into its route's settings model (one-line errors).

    >>> read_settings({"route": "basis", "lmax": 3})
    Traceback (most recent call last):
    ...
    driven_atom.errors.InputError: unknown key `solver.lmax` (did you mean `l_max`?)
    """
    try:
        return RunConfig._route_settings(table)
    except ValueError as exc:
        raise InputError(str(exc).removeprefix("Value error, ")) from None


def read_text(path) -> dict:
    """The TOML tables of a config file (a regular UTF-8 file, nesting bounded)."""
    text = read_regular_text(path, what="config file")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"config file {short(str(path))!r} is not valid TOML: {exc}") from None
    except RecursionError:
        raise InputError(f"config file {short(str(path))!r} nests tables deeper than {MAX_NESTING}") from None
    return data


def read_config(source) -> RunConfig:
    """Read and validate a run configuration from a TOML path, a dict or a :class:`RunConfig`.

    Structure, keys, units and ranges only; :func:`driven_atom.routes.load_config` adds the
    checks that need the pulse and the route.
    """
    if isinstance(source, RunConfig):
        return source
    if isinstance(source, (str, Path)):
        data = read_text(source)
    elif isinstance(source, dict):
        data = source
    else:
        raise InputError(f"config must be a path or a dict, got {type(source).__name__}")
    if _depth(data, MAX_NESTING) > MAX_NESTING:
        raise InputError(f"config nests tables and lists deeper than {MAX_NESTING}")
    try:
        return RunConfig.model_validate(data)
    except ValidationError as exc:
        raise InputError(config_message(exc)) from None
    except InputError as exc:
        raise InputError(str(exc)) from None
    except (TypeError, RecursionError) as exc:
        raise InputError(f"config: {short(str(exc))}") from None

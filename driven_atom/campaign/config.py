"""The run configuration: one TOML file (or dict) describes atom, pulses, solver and output.

Quantities are kept as the user wrote them (a string with units, or a plain number meaning atomic
units) so that a config dumps back to the same text; methods convert them to atomic units.
Unknown keys are errors with a "did you mean" suggestion; every error is one line naming the key.

>>> cfg = load_config({"atom": {"Z": 1}, "pulse": [{"wavelength": "800 nm",
...     "intensity": "1e14 W/cm^2", "cycles": 4}], "solver": {"route": "grid"}})
>>> cfg.atom.initial
'1s'
"""
from __future__ import annotations

import difflib
import hashlib
import json
import tomllib
from pathlib import Path
from typing import Annotated, Any, Literal, Union

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, ValidationError, field_validator

from driven_atom.errors import InputError
from driven_atom.units import to_au


def _quantity(value):
    """A quantity is a plain number (atomic units) or a string with units; never a bool or a list."""
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise ValueError("must be a number in atomic units or a string with units such as \"800 nm\"")
    return value


def _number(value):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError("must be a plain number")
    return value


# "800 nm" or a plain number in atomic units; the unit kind is checked when the pulse is built
Quantity = Annotated[Union[float, str], BeforeValidator(_quantity)]
Number = Annotated[float, BeforeValidator(_number)]


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class WeightedState(_Section):
    """One component of a superposition initial state: amplitude^2 = weight (normalised over all)."""

    state: str = Field(description="state label, e.g. \"2p0\"")
    weight: Number = Field(1.0, gt=0, description="relative weight |c|^2 (normalised over the list)")
    phase: Number = Field(0.0, description="phase of the amplitude in radians")


class AtomConfig(_Section):
    """``[atom]``: nuclear charge, nucleus (name or mass) and initial state."""

    Z: int | None = Field(None, ge=1, le=118, description="nuclear charge")
    nucleus: str = Field("infinite", description="nucleus name, ion name or mass with units")
    initial: str | list[WeightedState] = Field("1s", description="state label or weighted states")


class PulseConfig(_Section):
    """``[[pulse]]``: one laser pulse; several tables add. Keys are checked (units, exclusive
    pairs, ranges) when the pulse is built, see :mod:`driven_atom.pulse`."""

    envelope: Literal["sin2", "gaussian", "flat", "cos4", "static"] = Field(
        "sin2", description="envelope of A(t): sin2 | gaussian | flat | cos4 | static (a ramped DC field)")
    wavelength: Quantity | None = Field(None, description="carrier wavelength (vacuum); or photon_energy")
    photon_energy: Quantity | None = Field(None, description="carrier photon energy; or wavelength")
    intensity: Quantity | None = Field(None, description="peak cycle-averaged intensity; or peak_field")
    peak_field: Quantity | None = Field(None, description="peak field F0 (per component for circular light, along the major axis for elliptical)")
    cycles: Number | None = Field(None, description="optical cycles foot to foot (gaussian: within the FWHM)")
    length: Quantity | None = Field(None, description="foot-to-foot duration (gaussian: the window)")
    fwhm: Quantity | None = Field(None, description="FWHM of the intensity envelope")
    ramp: Quantity | None = Field(None, description="sin^2 ramp length (flat and static)")
    cep: Number = Field(0.0, description="carrier-envelope phase in radians")
    chirp: Quantity | None = Field(None, description="linear chirp beta = d(omega)/dt, e.g. \"0.05 eV/fs\"")
    delay: Quantity = Field(0.0, description="centre of the envelope t0")
    polarization: Literal["z", "x", "circular+", "circular-", "elliptical"] = Field(
        "z", description="z | x | circular+ (x -> y, drives Delta m = +1) | circular- | elliptical (x-y plane)")
    ellipticity: Number | None = Field(None, description="elliptical only: minor/major field ratio in [-1, 1], "
                                       "major axis x; + turns x -> y like circular+")


class OutputConfig(_Section):
    """``[output]``: what to store and how often to sample the history."""

    every: Quantity | None = Field(None, description="history sampling interval (default: route's own)")

    @field_validator("every")
    @classmethod
    def _positive_time(cls, value):
        if value is not None and not to_au(value, "time", name="output.every") > 0:
            raise ValueError(f"`output.every` must be a time > 0, got {value!r}")
        return value

    @property
    def every_au(self) -> float | None:
        """``every`` in atomic units of time (None: the route chooses its own sampling)."""
        return None if self.every is None else to_au(self.every, "time", name="output.every")


class RunConfig(_Section):
    """A whole run: ``[atom]``, ``[[pulse]]``, ``[solver]``, ``[output]``, optional ``[scan]``."""

    atom: AtomConfig
    pulse: list[PulseConfig] = Field(default_factory=list)
    solver: dict[str, Any]
    output: OutputConfig = Field(default_factory=OutputConfig)
    scan: dict[str, Any] | None = None
    cluster: dict[str, Any] | None = None

    @field_validator("solver")
    @classmethod
    def _route_present(cls, value):
        from driven_atom.engines import ROUTES

        if "route" not in value:
            raise ValueError(f"`solver.route` is required ({' | '.join(ROUTES)})")
        if value["route"] not in ROUTES:
            raise ValueError(f"`solver.route` must be one of {', '.join(ROUTES)}, got {value['route']!r}")
        return value

    # -- derived objects ------------------------------------------------------------------
    def build_atom(self):
        from driven_atom.atom import Atom

        return Atom.from_name(self.atom.nucleus, Z=self.atom.Z)

    def build_pulse(self):
        """The :class:`driven_atom.pulse.Pulse` of the ``[[pulse]]`` tables, or ``None`` without any
        (a field-free run, e.g. free decay; routes take ``pulse=None``)."""
        from driven_atom.pulse import Pulse

        if not self.pulse:
            return None
        return Pulse.from_config(self.pulse, atom=self.build_atom())

    def solver_settings(self):
        from driven_atom.engines import settings_for

        return settings_for(self.solver["route"], self.solver)

    def initial_states(self):
        """The initial state as a normalised list of (State, complex amplitude)."""
        import cmath
        import math

        from driven_atom.atom import parse_state

        if isinstance(self.atom.initial, str):
            return [(parse_state(self.atom.initial, name="atom.initial"), 1.0 + 0j)]
        total = sum(c.weight for c in self.atom.initial)
        return [(parse_state(c.state, name="atom.initial"),
                 math.sqrt(c.weight / total) * cmath.exp(1j * c.phase)) for c in self.atom.initial]

    # -- text -----------------------------------------------------------------------------
    def to_dict(self) -> dict:
        return self.model_dump(mode="json", exclude_none=True)

    def to_toml(self) -> str:
        import tomli_w

        return tomli_w.dumps(self.to_dict())

    def physics_hash(self) -> str:
        """Content hash of the physics inputs (atom, pulses, solver): output options excluded."""
        data = self.to_dict()
        physics = {k: data.get(k) for k in ("atom", "pulse", "solver")}
        text = json.dumps(physics, sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()[:16]


def _suggest(word: str, options) -> str:
    match = difflib.get_close_matches(word, list(options), n=1, cutoff=0.6)
    return f" (did you mean `{match[0]}`?)" if match else ""


def _model_at(model, loc):
    """Walk a pydantic model class along an error location to the model that owns the last key."""
    import typing

    current = model
    for part in loc[:-1]:
        if isinstance(part, int) or current is None:
            continue
        field = getattr(current, "model_fields", {}).get(part)
        if field is None:
            return None
        ann = field.annotation
        candidates = [ann, *typing.get_args(ann)]
        for sub in list(candidates):
            candidates.extend(typing.get_args(sub))
        current = next((c for c in candidates if isinstance(c, type) and issubclass(c, BaseModel)), None)
    return current


_UNION_TAGS = {"float", "str", "int", "bool", "function-after", "function-before", "function-wrap",
               "function-plain"}


def validation_message(exc: ValidationError, *, prefix: str = "", model=None) -> str:
    """One line from a pydantic error: the dotted key (``pulse.1.fwhm``, as scan axes name it), what
    is wrong, a suggestion for typos. Of several errors (union members) the most specific one is
    reported.

    >>> try:
    ...     PulseConfig(wavelenght="800 nm")
    ... except ValidationError as exc:
    ...     print(validation_message(exc, prefix="pulse.0", model=PulseConfig))
    unknown key `pulse.0.wavelenght` (did you mean `wavelength`?)
    """
    errors = exc.errors()
    err = max(errors, key=lambda e: len(e["loc"]))
    loc = [p for p in err["loc"] if not (isinstance(p, str) and (p in _UNION_TAGS or "[" in p))]
    key = ".".join(str(p) for p in ([prefix] if prefix else []) + list(loc))
    kind = err["type"]
    if kind == "extra_forbidden":
        owner = _model_at(model, loc) if model is not None else None
        options = getattr(owner, "model_fields", {}) if owner is not None else {}
        return f"unknown key `{key}`{_suggest(str(loc[-1]), options)}"
    if kind == "missing":
        return f"`{key}` is required"
    msg = err["msg"].removeprefix("Value error, ")
    if msg.startswith("`"):
        return msg
    return f"`{key}`: {msg}, got {err.get('input')!r}"


def load_config(source) -> RunConfig:
    """Load and validate a run configuration from a TOML path, TOML text path-like, or a dict."""
    if isinstance(source, RunConfig):
        return source
    if isinstance(source, (str, Path)):
        path = Path(source)
        if not path.exists():
            raise InputError(f"config file {str(path)!r} not found")
        try:
            data = tomllib.loads(path.read_text())
        except tomllib.TOMLDecodeError as exc:
            raise InputError(f"config file {str(path)!r} is not valid TOML: {exc}") from None
    elif isinstance(source, dict):
        data = source
    else:
        raise InputError(f"config must be a path or a dict, got {type(source).__name__}")
    try:
        cfg = RunConfig(**data)
    except ValidationError as exc:
        raise InputError(validation_message(exc, model=RunConfig)) from None
    except TypeError as exc:
        raise InputError(f"config: {exc}") from None
    check_config(cfg)
    return cfg


def check_config(cfg: RunConfig) -> None:
    """Cross-section checks, each failing with one line naming the key: the atom and initial
    states exist, every pulse builds (units, exclusive keys, ranges), the route can treat the
    light (basis and grid: at least one pulse, linear z polarisation only; levels: fields below barrier suppression
    of the initial state, F_BS = Ip^2/(4Z), Augst et al. 1989).
    """
    atom = cfg.build_atom()
    initial = cfg.initial_states()
    pulse = cfg.build_pulse()
    route = cfg.solver["route"]
    if pulse is None:
        if route in ("basis", "grid"):
            raise InputError(f"`pulse` is required for route {route!r}: add a [[pulse]] table "
                             f"(field-free runs: route \"levels\")")
        return
    for i, c in enumerate(pulse.components):
        if route in ("basis", "grid") and c.polarization != "z":
            raise InputError(f"`pulse.{i}.polarization` = {c.polarization!r}: route {route!r} treats "
                             f"linear z polarisation only (use route \"levels\" or polarization = \"z\")")
    if route == "levels":
        from driven_atom.atom.levels import energy

        ip = min(-energy(atom, s.n) for s, _ in initial)
        f_bs = ip**2 / (4 * atom.Z)
        total = sum(c.peak_field * abs(c.jones).max() for c in pulse.components)
        if total > f_bs:
            i = max(range(len(pulse.components)), key=lambda j: pulse.components[j].peak_field)
            key = "intensity" if cfg.pulse[i].intensity is not None else "peak_field"
            raise InputError(f"`pulse.{i}.{key}`: peak field {total:.3g} au is above barrier suppression "
                             f"({f_bs:.3g} au) of the initial state; a few-level model is meaningless "
                             f"there (use route \"grid\")")

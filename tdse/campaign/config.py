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
from typing import Any, Literal, Union

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from tdse.errors import InputError

Quantity = Union[float, str]   # "800 nm" or a plain number in atomic units


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class WeightedState(_Section):
    """One component of a superposition initial state: amplitude^2 = weight."""

    state: str
    weight: float = Field(1.0, gt=0)
    phase: float = 0.0


class AtomConfig(_Section):
    """``[atom]``: nuclear charge, nucleus (name or mass) and initial state."""

    Z: int | None = Field(None, ge=1, le=118, description="nuclear charge")
    nucleus: str = Field("infinite", description="nucleus name, ion name or mass with units")
    initial: str | list[WeightedState] = Field("1s", description="state label or weighted states")


class PulseConfig(_Section):
    """``[[pulse]]``: one laser pulse; several tables add. See :mod:`tdse.pulse`."""

    envelope: Literal["sin2", "gaussian", "flat", "cos4", "static"] = "sin2"
    wavelength: Quantity | None = None
    photon_energy: Quantity | None = None
    intensity: Quantity | None = None
    peak_field: Quantity | None = None
    cycles: float | None = None
    length: Quantity | None = None
    fwhm: Quantity | None = None
    ramp: Quantity | None = None
    cep: float = 0.0
    chirp: Quantity | None = None
    delay: Quantity = 0.0
    polarization: Literal["z", "x", "circular+", "circular-"] = "z"


class OutputConfig(_Section):
    """``[output]``: what to store and how often to sample the history."""

    every: Quantity | None = Field(None, description="history sampling interval (default: route's own)")


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
        if "route" not in value:
            raise ValueError("`solver.route` is required (levels | basis | grid)")
        return value

    # -- derived objects ------------------------------------------------------------------
    def build_atom(self):
        from tdse.atom import Atom

        return Atom.from_name(self.atom.nucleus, Z=self.atom.Z)

    def build_pulse(self):
        from tdse.pulse import Pulse

        return Pulse.from_config(self.pulse, atom=self.build_atom())

    def solver_settings(self):
        from tdse.engines import settings_for

        return settings_for(self.solver["route"], self.solver)

    def initial_states(self):
        """The initial state as a normalised list of (State, complex amplitude)."""
        import cmath
        import math

        from tdse.atom import parse_state

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


def validation_message(exc: ValidationError, *, prefix: str = "", model=None) -> str:
    """One line from a pydantic error: the dotted key, what is wrong, a suggestion for typos."""
    err = exc.errors()[0]
    loc = [p for p in err["loc"] if p not in ("function-after", "function-before")]
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
    cfg.build_atom()          # nucleus / Z consistency
    cfg.initial_states()      # state labels
    return cfg

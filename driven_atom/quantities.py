"""Quantity types for the config models: a unit kind, converted to atomic units at the door.

``Quantity("length", gt=0)`` is a pydantic field type: it accepts a plain number (atomic units) or
a string with units ("800 nm", "0.2 au"), refuses booleans and lists, checks the kind (a length,
not an energy) and the bounds, and stores a float in atomic units. Messages name no key: the
config layer adds it ("`solver.r_max`: must be a length > 0 bohr, got '-5 nm'"). The user's own
spelling is kept by :class:`driven_atom.config.RunConfig` for the stored TOML.

The kind travels with the type (:class:`UnitKind` in the ``Annotated`` metadata), so a scan or
the key reference can ask a field which unit a plain number means (:func:`unit_kind`).

>>> from pydantic import TypeAdapter
>>> TypeAdapter(Quantity("length", gt=0)).validate_python("2 a0")
2.0
>>> TypeAdapter(Number(gt=0)).validate_python(True)
Traceback (most recent call last):
...
pydantic_core._pydantic_core.ValidationError: 1 validation error for function-before[...]
  Value error, must be a plain number [type=value_error, input_value=True, input_type=bool]
    For further information visit https://errors.pydantic.dev/2.../v/value_error
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import partial
from typing import Annotated

from pydantic import BeforeValidator

from driven_atom.units import AU_TIME_S, SI_KINDS, UnitError, convert, kind_phrase, si_value

AU_UNIT_NAME = {"energy": "hartree", "length": "bohr", "time": "au of time", "intensity": "au",
                "field": "au", "rate": "au", "mass": "electron masses", "area": "bohr^2",
                "fluence": "au", "density": "bohr^-3", "chirp": "au", "magnetic field": "au"}


@dataclass(frozen=True)
class UnitKind:
    """Marker in a field's ``Annotated`` metadata: the kind of quantity ("length", "time", ...)."""

    kind: str


@dataclass(frozen=True)
class Bounds:
    gt: float | None = None
    ge: float | None = None
    lt: float | None = None
    le: float | None = None

    def check(self, x: float) -> str | None:
        """None when ``x`` is inside, else the phrase of the first bound it breaks."""
        for op, bound, ok in (("> ", self.gt, lambda: x > self.gt), (">= ", self.ge, lambda: x >= self.ge),
                              ("< ", self.lt, lambda: x < self.lt), ("<= ", self.le, lambda: x <= self.le)):
            if bound is not None and not ok():
                return f"{op}{bound:g}"
        return None

    @property
    def text(self) -> str:
        parts = [f"{op}{v:g}" for op, v in (("> ", self.gt), (">= ", self.ge), ("< ", self.lt), ("<= ", self.le))
                 if v is not None]
        return " and ".join(parts)


def _convert(kind: str, bounds: Bounds, value):
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise ValueError(f"must be a number in atomic units or a string with units such as "
                         f"{kind_phrase(kind).split('e.g. ', 1)[1].rstrip(')')}")
    try:
        x = convert(value, kind)
    except UnitError as exc:
        raise ValueError(str(exc)) from None
    broken = bounds.check(x)
    if broken is not None:
        nonzero = any(v not in (None, 0) for v in (bounds.gt, bounds.ge, bounds.lt, bounds.le))
        unit = f" {AU_UNIT_NAME.get(kind, 'au')}" if nonzero else ""
        raise ValueError(f"must be {kind_phrase(kind).split(' (')[0]} {bounds.text}{unit}")
    return x


def Quantity(kind: str, *, gt=None, ge=None, lt=None, le=None):
    """The field type of a quantity of ``kind`` with optional bounds (in atomic units)."""
    bounds = Bounds(gt, ge, lt, le)
    return Annotated[float, UnitKind(kind), BeforeValidator(partial(_convert, kind, bounds))]


def _convert_si(kind: str, bounds: Bounds, value):
    unit, _, example = SI_KINDS[kind]
    if isinstance(value, bool) or not isinstance(value, str) and type(value).__module__.split(".")[0] != "pint":
        raise ValueError(f"needs units, e.g. \"{example}\"")
    try:
        x = si_value(value, kind)
    except UnitError as exc:
        raise ValueError(f"{exc} (e.g. \"{example}\")") from None
    if bounds.check(x) is not None:
        raise ValueError(f"must be {bounds.text} {unit}")
    return x


def LabQuantity(kind: str, *, gt=None, ge=None, lt=None, le=None):
    """The field type of a lab quantity of ``kind`` (:data:`driven_atom.units.SI_KINDS`: "2 mJ",
    "1e-6 Torr", "20 degC"), stored in SI units (J, Pa, K, m, ...); units are required and the
    bounds are in SI.

    >>> from pydantic import TypeAdapter
    >>> TypeAdapter(LabQuantity("pressure", gt=0)).validate_python("1 mbar")
    100.0
    """
    return Annotated[float, BeforeValidator(partial(_convert_si, kind, Bounds(gt, ge, lt, le)))]


def _number(bounds: Bounds, integer: bool, value):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError("must be a whole number" if integer else "must be a plain number")
    if integer and (not isinstance(value, int) and not float(value).is_integer()):
        raise ValueError("must be a whole number")
    x = int(value) if integer else float(value)
    if not integer and not math.isfinite(x):
        raise ValueError("must be finite")
    broken = bounds.check(x)
    if broken is not None:
        raise ValueError(f"must be {bounds.text}")
    return x


def Number(*, gt=None, ge=None, lt=None, le=None):
    """A plain number (no units; booleans refused) with optional bounds."""
    return Annotated[float, BeforeValidator(partial(_number, Bounds(gt, ge, lt, le), False))]


def Integer(*, gt=None, ge=None, lt=None, le=None):
    """A whole number (``4`` or ``4.0``; booleans and ``4.5`` refused) with optional bounds."""
    return Annotated[int, BeforeValidator(partial(_number, Bounds(gt, ge, lt, le), True))]


def _flag(value):
    if not isinstance(value, bool):
        raise ValueError("must be true or false")
    return value


Flag = Annotated[bool, BeforeValidator(_flag)]


@dataclass(frozen=True)
class Cadence:
    """A checkpoint interval: wall-clock ``seconds`` or a number of ``steps`` (one of them)."""

    seconds: float | None = None
    steps: int | None = None

    def __str__(self) -> str:
        return f"{self.steps} steps" if self.steps is not None else f"{self.seconds:g} s"


def _cadence(steps_allowed: bool, value):
    if isinstance(value, Cadence):
        return value
    if isinstance(value, bool):
        raise ValueError("must be a wall-clock time such as \"60 s\"")
    if isinstance(value, (int, float)):
        if steps_allowed and isinstance(value, int) and value >= 1:
            return Cadence(steps=int(value))
        if steps_allowed:
            raise ValueError("must be a whole number of steps >= 1 or a wall-clock time such as \"60 s\"")
        raise ValueError("must be a wall-clock time with units such as \"60 s\" (this route counts no steps)")
    if not isinstance(value, str):
        raise ValueError("must be a wall-clock time such as \"60 s\"")
    try:
        seconds = convert(value, "time") * AU_TIME_S
    except UnitError as exc:
        raise ValueError(f"{exc} (a wall-clock time such as \"60 s\")") from None
    if value.strip().replace(".", "", 1).isdigit() or not seconds > 0:
        raise ValueError("must be a wall-clock time > 0 with units such as \"60 s\"")
    return Cadence(seconds=seconds)


def CheckpointCadence(*, steps_allowed: bool):
    """The ``checkpoint_every`` type: a time with units everywhere; a plain whole number counts
    steps only on routes that declare step granularity."""
    return Annotated[Cadence, BeforeValidator(partial(_cadence, steps_allowed))]


def unit_kind(model, key: str) -> str | None:
    """The unit kind of field ``key`` of a pydantic model class (optional fields included), or
    None for plain values.

    >>> from pydantic import BaseModel
    >>> class M(BaseModel):
    ...     r: Quantity("length") = 1.0
    ...     t: Quantity("time") | None = None
    >>> unit_kind(M, "r"), unit_kind(M, "t"), unit_kind(M, "x")
    ('length', 'time', None)
    """
    import typing

    field = getattr(model, "model_fields", {}).get(key)
    if field is None:
        return None
    pending = [field.annotation, *field.metadata]
    while pending:
        item = pending.pop()
        if isinstance(item, UnitKind):
            return item.kind
        pending.extend(getattr(item, "__metadata__", ()))
        pending.extend(typing.get_args(item))
    return None

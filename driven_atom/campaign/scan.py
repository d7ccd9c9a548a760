"""Expansion of a ``[scan]`` table into jobs: one full run configuration per grid point.

A scan axis maps a key path (``"pulse.0.intensity"``, ``"solver.dt"``, ``"atom.nucleus"``) to a list
of values, or to a range ``{from, to, num, spacing}`` (``spacing`` = ``"linear"`` (default) or
``"log"``; ``from``/``to`` with the same units)::

    [scan]
    "pulse.0.intensity" = {from = "1e13 W/cm^2", to = "1e14 W/cm^2", num = 4, spacing = "log"}
    "pulse.0.wavelength" = ["400 nm", "800 nm"]

Axes form a product (first axis slowest). Axes listed together in a named group of ``[scan.zip]``
advance together instead (equal lengths); the group name is then their common dimension::

    [scan.zip]
    colours = ["pulse.0.wavelength", "pulse.1.wavelength"]

Values keep their units as strings in the job configs; each axis also carries numeric coordinates
and one unit string (plain numbers: ``"au"`` for quantities, ``"rad"`` for ``cep``, ``"1"`` else).
Expansion is deterministic; a job's id is :meth:`driven_atom.config.RunConfig.physics_hash` of its
full config (the physics in atomic units, not its spelling), so output options and operational keys
do not change ids and equal physics gives one job.

>>> plan = expand({"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"]},
...     "pulse": [{"wavelength": "800 nm", "intensity": "1e12 W/cm^2", "cycles": 4}],
...     "scan": {"pulse.0.intensity": {"from": "1e12 W/cm^2", "to": "1e14 W/cm^2", "num": 3,
...                                    "spacing": "log"}, "pulse.0.cep": [0.0, 1.0]}})
>>> plan.shape, plan.axes[0].units, plan.axes[1].units
((3, 2), 'W/cm^2', 'rad')
>>> plan.jobs[1].values
{'pulse.0.intensity': '1000000000000.0 W/cm^2', 'pulse.0.cep': 1.0}
"""
from __future__ import annotations

import copy
import itertools
import re
from dataclasses import dataclass
from typing import Any

from driven_atom.errors import InputError

_SECTIONS = ("atom", "fields", "pulse", "solver", "output")
_RANGE_KEYS = {"from", "to", "num", "spacing"}
# setting one of these in a pulse drops its alternatives, so a scan over `intensity` works on a
# base pulse written with `peak_field` (and likewise for the other alternatives)
_ALTERNATIVES = {
    "intensity": ("peak_field",), "peak_field": ("intensity",),
    "wavelength": ("photon_energy",), "photon_energy": ("wavelength",),
    "cycles": ("length", "fwhm"), "length": ("cycles", "fwhm"), "fwhm": ("cycles", "length"),
}
_NUMBER_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@dataclass(frozen=True)
class Axis:
    """One scan axis: the values written into the configs and their numeric coordinates."""

    path: str
    dim: str                 # its dimension: the path itself, or the zip group's name
    values: tuple            # as written into each job config (strings with units, or numbers)
    coords: tuple            # floats in ``units`` (or the strings themselves for text values)
    units: str


@dataclass(frozen=True)
class Job:
    """One grid point: its id (physics hash), position per dimension, axis values and config."""

    id: str
    index: tuple
    values: dict
    config: dict


@dataclass(frozen=True)
class Plan:
    """The expanded scan: base config, axes, dimensions (names and sizes) and jobs in C order."""

    base: dict
    axes: tuple
    dims: tuple
    shape: tuple
    jobs: tuple

    def unique_jobs(self) -> list:
        """Jobs with distinct ids, in plan order (grid points with equal physics share one job)."""
        seen, out = set(), []
        for job in self.jobs:
            if job.id not in seen:
                seen.add(job.id)
                out.append(job)
        return out


def _flatten(table: dict, prefix: str = "") -> dict:
    """Nested tables (from unquoted dotted TOML keys) -> {"a.b.c": leaf}; a leaf is a list or range."""
    out = {}
    for key, value in table.items():
        path = f"{prefix}{key}"
        if isinstance(value, dict) and not (set(value) & _RANGE_KEYS):
            out.update(_flatten(value, path + "."))
        else:
            out[path] = value
    return out


def _split_quantity(value, name: str):
    """A scan value -> (magnitude float or None for text, unit string)."""
    if isinstance(value, bool):
        raise InputError(f"`{name}`: booleans cannot be scanned, got {value!r}")
    if isinstance(value, (int, float)):
        return float(value), ""
    if isinstance(value, str):
        match = _NUMBER_UNIT.match(value)
        if match:
            return float(match.group(1)), match.group(2)
        return None, ""
    raise InputError(f"`{name}`: values must be numbers or strings, got {value!r}")


def _convert(magnitude: float, unit: str, target: str, name: str) -> float:
    import pint

    from driven_atom.units import registry

    ureg = registry()
    try:
        return float(ureg.Quantity(magnitude, unit).to(target).magnitude)
    except (pint.DimensionalityError, pint.UndefinedUnitError, ValueError, AttributeError) as exc:
        raise InputError(f"`{name}`: cannot express {magnitude!r} {unit} in {target} ({exc})") from None


def axis_kind(path: str, route: str) -> str | None:
    """The unit kind ("length", "intensity", ...) of the key a scan axis sets, or None for plain
    values (the kind comes with the field's type).

    >>> axis_kind("pulse.0.intensity", "levels"), axis_kind("solver.l_max", "grid")
    ('intensity', None)
    """
    from driven_atom.config import AtomConfig, FieldsConfig, OutputConfig, PulseConfig
    from driven_atom.quantities import unit_kind
    from driven_atom.settings import SETTINGS

    section, leaf = path.split(".", 1)[0], path.rsplit(".", 1)[-1]
    model = {"pulse": PulseConfig, "atom": AtomConfig, "output": OutputConfig, "fields": FieldsConfig,
             "solver": SETTINGS.get(route)}.get(section)
    return unit_kind(model, leaf) if model is not None else None


def unit_label(path: str, units: str, route: str) -> str:
    """An axis unit as people read it: the plan's "au" named by the key's kind ("bohr", "hartree").

    >>> unit_label("solver.r_max", "au", "grid"), unit_label("pulse.0.wavelength", "nm", "grid")
    ('bohr', 'nm')
    """
    if units != "au":
        return units or "1"
    from driven_atom.stored_units import au_name

    kind = axis_kind(path, route)
    return au_name(kind) if kind else "1"


def _plain_units(path: str, route: str) -> str:
    """The unit of a plain number on this key: atomic units for quantities, radians for cep, "1" else."""
    if path.rsplit(".", 1)[-1] == "cep":
        return "rad"
    return "au" if axis_kind(path, route) is not None else "1"


def _coordinates(path: str, values: list, name: str, route: str) -> tuple[tuple, str]:
    """Numeric coordinates in one unit (the first value's), or the texts themselves."""
    split = [_split_quantity(v, name) for v in values]
    if any(mag is None for mag, _ in split):
        if not all(isinstance(v, str) for v in values):
            raise InputError(f"`{name}`: mixes text and numbers: {values!r}")
        return tuple(values), ""
    units = [u for _, u in split]
    target = units[0]
    coords = []
    for (mag, unit), value in zip(split, values):
        if unit == target:
            coords.append(mag)
        elif not unit or not target:
            raise InputError(f"`{name}`: mixes plain numbers and values with units: {values!r}")
        else:
            coords.append(_convert(mag, unit, target, name))
    return tuple(coords), (target or _plain_units(path, route))


def _range_values(spec: dict, name: str) -> list:
    """{from, to, num, spacing} -> list of values with the unit of ``from``."""
    unknown = set(spec) - _RANGE_KEYS
    if unknown:
        raise InputError(f"`{name}`: unknown range key `{sorted(unknown)[0]}` (allowed: from, to, num, spacing)")
    missing = [k for k in ("from", "to", "num") if k not in spec]
    if missing:
        raise InputError(f"`{name}`: a range needs `{missing[0]}` (keys: from, to, num, spacing)")
    num, spacing = spec["num"], spec.get("spacing", "linear")
    if isinstance(num, bool) or not isinstance(num, int) or num < 1:
        raise InputError(f"`{name}.num` must be an integer >= 1, got {num!r}")
    if spacing not in ("linear", "log"):
        raise InputError(f"`{name}.spacing` must be \"linear\" or \"log\", got {spacing!r}")
    start, unit = _split_quantity(spec["from"], name + ".from")
    stop, stop_unit = _split_quantity(spec["to"], name + ".to")
    if start is None or stop is None:
        raise InputError(f"`{name}`: `from` and `to` must be numbers or quantities like \"800 nm\"")
    if stop_unit != unit:
        if not unit or not stop_unit:
            raise InputError(f"`{name}`: `from` and `to` must both have units or both be plain numbers")
        stop = _convert(stop, stop_unit, unit, name + ".to")
    import numpy as np

    if spacing == "log":
        if start <= 0 or stop <= 0:
            raise InputError(f"`{name}`: log spacing needs `from` and `to` > 0, got {start!r}, {stop!r}")
        mags = np.geomspace(start, stop, num)
    else:
        mags = np.linspace(start, stop, num)
    mags = [float(m) for m in mags]
    return [f"{m!r} {unit}" for m in mags] if unit else mags


_NOT_SCANNABLE = {"solver.cache_dir": "the cache folder is no physics (and stays in the campaign folder)",
                  "solver.route": "a campaign runs one route; make one campaign per route"}


def _check_path(path: str, base: dict) -> list:
    """Validate a key path against the base config; returns its parts (list indices as int)."""
    if path in _NOT_SCANNABLE:
        raise InputError(f"`scan.{path}` cannot be scanned: {_NOT_SCANNABLE[path]}")
    parts = path.split(".")
    if parts[0] not in _SECTIONS or len(parts) < 2:
        raise InputError(f"`scan.{path}`: a key path starts with one of {', '.join(_SECTIONS)} "
                         f"and names a key, e.g. \"pulse.0.intensity\"")
    if parts[0] == "pulse":
        n_pulses = len(base.get("pulse", []))
        if len(parts) != 3 or not parts[1].isdigit() or int(parts[1]) >= n_pulses:
            raise InputError(f"`scan.{path}`: pulse keys are \"pulse.I.KEY\" with 0 <= I < {n_pulses}")
        return ["pulse", int(parts[1]), parts[2]]
    if len(parts) != 2:
        raise InputError(f"`scan.{path}`: expected \"{parts[0]}.KEY\"")
    return parts


def _set(config: dict, parts: list, value) -> None:
    target = config
    for part in parts[:-1]:
        target = target.setdefault(part, {}) if isinstance(part, str) else target[part]
    key = parts[-1]
    if parts[0] == "pulse":
        for other in _ALTERNATIVES.get(key, ()):
            target.pop(other, None)
    target[key] = value


def _axis_values(path: str, spec, name: str) -> list:
    if isinstance(spec, dict):
        return _range_values(spec, name)
    if isinstance(spec, list):
        if not spec:
            raise InputError(f"`{name}` must list at least one value")
        return list(spec)
    raise InputError(f"`{name}` must be a list of values or a range {{from, to, num, spacing}}, got {spec!r}")


def _groups(zip_table, axis_paths: list) -> dict:
    """path -> group name, validated."""
    if zip_table is None:
        return {}
    if not isinstance(zip_table, dict):
        raise InputError("`scan.zip` must be a table: group name = [key paths]")
    owner = {}
    for group, members in zip_table.items():
        if group in axis_paths:
            raise InputError(f"`scan.zip.{group}`: a group name must differ from the key paths")
        if not isinstance(members, list) or len(members) < 1 or not all(isinstance(m, str) for m in members):
            raise InputError(f"`scan.zip.{group}` must be a list of key paths scanned in [scan]")
        for member in members:
            if member not in axis_paths:
                raise InputError(f"`scan.zip.{group}`: {member!r} is not a scan axis "
                                 f"(axes: {', '.join(axis_paths)})")
            if member in owner:
                raise InputError(f"`scan.zip.{group}`: {member!r} is already in group {owner[member]!r}")
            owner[member] = group
    return owner


def _grid(cfg):
    """(config data without [scan]/[cluster], axes, dims, shape, key parts) of a RunConfig's scan."""
    data = cfg.to_dict()
    scan_table = data.pop("scan", None) or {}
    data.pop("cluster", None)
    scan_table = dict(scan_table)
    zip_table = scan_table.pop("zip", None)
    flat = _flatten(scan_table)
    parts = {path: _check_path(path, data) for path in flat}
    owner = _groups(zip_table, list(flat))

    axes, dims, shape = [], [], []
    for path, spec in flat.items():
        name = f"scan.{path}"
        values = _axis_values(path, spec, name)
        coords, units = _coordinates(path, values, name, cfg.route)
        dim = owner.get(path, path)
        axes.append(Axis(path=path, dim=dim, values=tuple(values), coords=coords, units=units))
        if dim not in dims:
            dims.append(dim)
            shape.append(len(values))
        elif shape[dims.index(dim)] != len(values):
            raise InputError(f"`scan.zip.{dim}`: zipped axes need equal lengths, "
                             f"{path!r} has {len(values)}, expected {shape[dims.index(dim)]}")
    return data, axes, dims, shape, parts


def _point(data: dict, axes, dims, parts, index):
    """(job config, axis values) at grid ``index``, validated (InputError naming the point)."""
    from driven_atom.routes import load_config

    job_data = copy.deepcopy(data)
    values = {}
    for axis in axes:
        value = axis.values[index[dims.index(axis.dim)]]
        _set(job_data, parts[axis.path], value)
        values[axis.path] = value
    try:
        return load_config(job_data), values
    except InputError as exc:
        raise InputError(f"`scan` point {values}: {exc}") from None


def expand(config, *, max_jobs: int | None = None, progress: bool = False) -> Plan:
    """Expand the ``[scan]`` table of ``config`` (path, dict or RunConfig) into a :class:`Plan`.

    Without a ``[scan]`` table the plan holds the single base job. Every job config is validated
    with :func:`driven_atom.routes.load_config` (keys, units, pulse and route), so a misspelt key
    on a scan axis stops here, before any job starts. A grid of more than ``max_jobs`` points is
    refused before it is built; ``progress`` shows a bar while a large one is checked.
    """
    import math

    from driven_atom.routes import load_config

    cfg = load_config(config)
    data, axes, dims, shape, parts = _grid(cfg)
    total = math.prod(shape)
    if max_jobs is not None and total > max_jobs:
        raise InputError(f"`scan` has {total} grid points ({' x '.join(map(str, shape))}); more than {max_jobs} "
                         f"need --yes (or yes=True)")
    jobs = []
    from tqdm.auto import tqdm

    points = tqdm(itertools.product(*(range(n) for n in shape)), total=total, unit="job", desc="checking scan",
                  disable=not progress or total < 2000, leave=False)
    for index in points:
        job_cfg, values = _point(data, axes, dims, parts, index)
        jobs.append(Job(id=job_cfg.physics_hash(), index=tuple(index), values=values,
                        config=job_cfg.to_dict()))
    base = cfg.to_dict()
    return Plan(base=base, axes=tuple(axes), dims=tuple(dims), shape=tuple(shape), jobs=tuple(jobs))


def corner_configs(config, *, most_dims: int = 8) -> list:
    """The validated job configs (RunConfig) at the corners of the scan grid: every dimension at its
    first or last value (of the first ``most_dims`` dimensions; the others at their first). Quantities
    that grow monotonically along the axes (intensity, duration, fluence) take their extremes there,
    without expanding a large grid.

    >>> cfg = {"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"]},
    ...        "pulse": [{"wavelength": "800 nm", "intensity": "1e12 W/cm^2", "cycles": 4}],
    ...        "scan": {"pulse.0.intensity": ["1e10 W/cm^2", "1e11 W/cm^2", "1e12 W/cm^2"]}}
    >>> [round(c.pulse[0].intensity * 3.50945e16, -8) for c in corner_configs(cfg)]
    [10000000000.0, 1000000000000.0]
    """
    from driven_atom.routes import load_config

    cfg = load_config(config)
    data, axes, dims, shape, parts = _grid(cfg)
    ends = [sorted({0, n - 1}) if k < most_dims else [0] for k, n in enumerate(shape)]
    return [_point(data, axes, dims, parts, index)[0] for index in itertools.product(*ends)]


def axis_table(plan: Plan) -> dict[str, Any]:
    """The axes as plain data (for campaign.toml): path -> dim, units, values, coords."""
    return {axis.path: {"dim": axis.dim, "units": axis.units, "values": list(axis.values),
                        "coords": list(axis.coords)} for axis in plan.axes}

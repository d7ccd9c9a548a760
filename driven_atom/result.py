"""The one result type of every route, and the one pair of functions that store and load it.

HDF5 layout of a result file (``NAME.h5``)::

    attrs:  complete (bool, written last), route, config (TOML text), physics_hash, hash_version,
            package, versions (JSON), host, created, ionization, norm, stats (JSON), warnings (JSON),
            quality (JSON: the checks made, their numbers, trustworthy), metadata (JSON),
            sha256 (checksum of the result's content, see :func:`content_digest`)
    /times                       history sample times (a.u.)
    /populations                 attrs label -> final population; dataset "labels"/"values"
    /history/populations/<label> population at each sample time ("/" in a label, "2p3/2", written %2F)
    /history/series/<name>       other sampled series (norm, ionization, dipole_z, ...)
    /spectra/<name>/<array>      spectra, each a group of named arrays with a "units" attribute

Units: every dataset carries a ``units`` attribute and a ``long_name`` (the CF metadata
conventions). The numbers are stored in Hartree atomic units, as computed, and ``units`` spells the
atomic unit in the UDUNITS-2 grammar CF uses: its SI value times the SI unit (``"2.4188843265864e-17
s"`` for the atomic unit of time, ``"4.359744722206e-18 J"`` for the hartree, ``"5.29177210544e-11 m"``
for the bohr); ``long_name`` names the atomic unit in words. Probabilities are ``"1"``; text
datasets (labels) carry ``"1"`` as well. Plain ``"au"`` is never written (UDUNITS reads it as the
astronomical unit). The one table of units and names is :mod:`driven_atom.stored_units`; the
campaign summary follows the same rule. Files written before these attributes existed read the same
(readers use no attribute of a dataset).

A run's checkpoint lives in a file of its own, ``NAME.ckpt.h5`` (group ``/checkpoint``), so a
complete result is never rewritten by a run that resumes or repeats it.

Every file is written through :func:`driven_atom.io.atomic_write` (a new temporary file in the same
folder, fsync, rename), so a reader never sees a half-written file; readers trust a file only when
``complete`` is true and its ``sha256`` is present, and :func:`read_result` refuses a file whose
content no longer matches its ``sha256`` (a damaged disk or a bit flip: a campaign then re-runs
the job).
"""
from __future__ import annotations

import hashlib
import json
import platform
import socket
import time
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from driven_atom.errors import InputError


@dataclass
class Result:
    """What one propagation produced (all quantities in atomic units).

    ``populations`` are final probabilities by state label (m-resolved and m-summed labels, as
    the route provides them); ``history_populations[label]`` and ``series[name]`` are sampled at
    ``times``; ``spectra[name]`` is a dict of arrays (e.g. ``{"energy": ..., "dP_dE": ...}``).
    """

    route: str
    populations: dict[str, float]
    ionization: float
    norm: float
    times: np.ndarray = field(default_factory=lambda: np.zeros(0))
    history_populations: dict[str, np.ndarray] = field(default_factory=dict)
    series: dict[str, np.ndarray] = field(default_factory=dict)
    spectra: dict[str, dict[str, np.ndarray]] = field(default_factory=dict)
    stats: dict = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    config: str = ""
    metadata: dict = field(default_factory=dict)
    quality: dict = field(default_factory=dict)

    def __repr__(self) -> str:
        r"""A short summary (route, atom, pulse, ionisation, norm, file), never the arrays.

        >>> Result(route="levels", populations={"1s": 1.0}, ionization=0.0, norm=1.0,
        ...        config='[atom]\nZ = 1\n[[pulse]]\nwavelength = "121.6 nm"\nintensity = "1e3 W/cm^2"\n')
        Result(route='levels', atom='Z=1 1s', pulse='121.6 nm 1e3 W/cm^2', ionization=0, norm=1, 1 populations, 0 samples)
        """
        from driven_atom.errors import short

        trust = self.quality.get("trustworthy")
        flag = "" if trust is None else (", trustworthy" if trust else ", NOT trustworthy")
        where = self.metadata.get("file")
        atom, pulse = _config_brief(self.config)
        text = (f"Result(route={self.route!r}" + (f", atom={atom!r}" if atom else "")
                + (f", pulse={pulse!r}" if pulse else "")
                + f", ionization={self.ionization:.6g}, norm={self.norm:.10g}, "
                f"{len(self.populations)} populations, {len(self.times)} samples"
                + (f", spectra={sorted(self.spectra)}" if self.spectra else "") + flag
                + (f", file={short(where, 300)!r}" if where else "") + ")")
        return short(text, 990)

    def to_xarray(self):
        """The result as an :class:`xarray.Dataset` with ``units`` and ``long_name`` on every
        variable (:func:`driven_atom.result_xarray.result_dataset`)."""
        from driven_atom.result_xarray import result_dataset

        return result_dataset(self)


def _config_brief(text: str) -> tuple[str, str]:
    """("Z=1 1s", "800 nm 1e14 W/cm^2") from a config's TOML text; empty strings where it says nothing."""
    import tomllib

    try:
        data = tomllib.loads(text) if text else {}
    except (tomllib.TOMLDecodeError, RecursionError):
        return "", ""
    atom = data.get("atom") if isinstance(data.get("atom"), dict) else {}
    parts = [f"Z={atom['Z']}" if "Z" in atom else "", str(atom.get("nucleus", "")) if "nucleus" in atom else ""]
    initial = atom.get("initial", "1s")            # the config default
    parts.append(initial if isinstance(initial, str) else "superposition")
    pulses = data.get("pulse") if isinstance(data.get("pulse"), list) else []
    described = []
    for p in pulses[:3]:
        if isinstance(p, dict):
            keys = ("wavelength", "photon_energy", "intensity", "peak_field", "fwhm", "cycles", "length")
            described.append(" ".join(str(p[k]) for k in keys if k in p and not isinstance(p[k], dict)))
    pulse = " + ".join(described) + (f" + {len(pulses) - 3} more" if len(pulses) > 3 else "")
    return " ".join(x for x in parts if x)[:120], pulse[:200]


@lru_cache(maxsize=1)
def _package_versions() -> tuple[tuple[str, str], ...]:
    from importlib import metadata

    out = {}
    for dist in ("driven-atom", "numpy", "scipy", "qutip", "numba", "h5py", "pydantic", "pint"):
        try:
            out[dist] = metadata.version(dist)
        except metadata.PackageNotFoundError:
            out[dist] = "absent"
    out["python"] = platform.python_version()
    return tuple(out.items())


def package_versions() -> dict[str, str]:
    """Versions of this package and the libraries that shape its numbers (looked up once)."""
    return dict(_package_versions())


def provenance() -> dict[str, str]:
    """Versions, host and time, for the attributes of every file we write."""
    return {"package": "driven-atom", "versions": json.dumps(package_versions()), "host": socket.gethostname(),
            "created": time.strftime("%Y-%m-%dT%H:%M:%S%z")}


def _write_attrs(h5obj, attrs: dict) -> None:
    for key, value in attrs.items():
        if isinstance(value, (dict, list, tuple)) and not isinstance(value, np.ndarray):
            value = json.dumps(value)
        h5obj.attrs[key] = value


def _h5_name(label: str) -> str:
    """A label as an HDF5 member name: "/" (which HDF5 reads as a path, "2p3/2") and "%" escaped.

    >>> _h5_name("2p3/2 m=1/2"), _label("2p3%2F2 m=1%2F2")
    ('2p3%2F2 m=1%2F2', '2p3/2 m=1/2')
    """
    return label.replace("%", "%25").replace("/", "%2F")


def _label(name: str) -> str:
    """Inverse of :func:`_h5_name`."""
    return name.replace("%2F", "/").replace("%25", "%") if "%" in name else name


def _dataset(group, name: str, data, *, where: str, label: str | None = None, **kwargs) -> None:
    """One dataset with its ``units`` and ``long_name`` (:func:`driven_atom.stored_units.describe`)."""
    from driven_atom.stored_units import describe

    dataset = group.create_dataset(name, data=data, **kwargs)
    for key, value in describe(where, label if label is not None else name).items():
        dataset.attrs[key] = value


def _write_body(f, result: Result) -> None:
    _dataset(f, "times", np.asarray(result.times, dtype=float), where="")
    pops = f.create_group("populations")
    labels = list(result.populations)
    _dataset(pops, "labels", np.array(labels, dtype=object), where="populations", dtype=_str_dtype())
    _dataset(pops, "values", np.array([result.populations[k] for k in labels], dtype=float), where="populations")
    hist = f.create_group("history")
    hp = hist.create_group("populations", track_order=True)
    for label, values in result.history_populations.items():
        _dataset(hp, _h5_name(label), np.asarray(values), where="history/populations", label=label)
    hs = hist.create_group("series", track_order=True)
    for name, values in result.series.items():
        _dataset(hs, _h5_name(name), np.asarray(values), where="history/series", label=name)
    spec = f.create_group("spectra")
    for name, arrays in result.spectra.items():
        g = spec.create_group(name)
        for key, values in arrays.items():
            _dataset(g, key, np.asarray(values), where=f"spectra/{name}")


def digest(parts) -> str:
    """SHA-256 (hex) of a sequence of arrays (by dtype, shape and bytes) and JSON-able values
    (as sorted-key JSON, which keeps floats exactly).

    >>> digest([np.arange(3.0), {"b": 1, "a": 0.1}]) == digest([np.arange(3.0), {"a": 0.1, "b": 1}])
    True
    """
    h = hashlib.sha256()
    for part in parts:
        if isinstance(part, np.ndarray):
            a = np.ascontiguousarray(part)
            h.update(f"{a.dtype.str}{a.shape}".encode())
            h.update(a.tobytes())
        else:
            h.update(json.dumps(part, sort_keys=True).encode())
        h.update(b"\0")
    return h.hexdigest()


def content_digest(result: Result) -> str:
    """:func:`digest` of everything a result file stores of ``result``: route, config, ionisation,
    norm, stats, warnings, metadata, populations, times, histories, series and spectra (keys
    sorted)."""
    parts = [result.route, result.config, float(result.ionization), float(result.norm), result.stats,
             result.warnings, result.metadata, np.asarray(result.times, dtype=float)]
    if result.quality:
        parts.append(result.quality)
    for label in sorted(result.populations):
        parts += [label, float(result.populations[label])]
    for group in (result.history_populations, result.series):
        for name in sorted(group):
            parts += [name, np.asarray(group[name])]
    for name in sorted(result.spectra):
        for key in sorted(result.spectra[name]):
            parts += [name, key, np.asarray(result.spectra[name][key])]
    return digest(parts)


def _str_dtype():
    import h5py

    return h5py.string_dtype()


def write_result(path, result: Result, *, attrs: dict | None = None) -> Path:
    """Write ``result`` to ``path`` atomically (temp file -> datasets -> attributes -> complete)."""
    import h5py

    from driven_atom.io import atomic_write

    path = Path(path)
    with atomic_write(path, size_hint=_size(result)) as tmp:
        with h5py.File(tmp, "w") as f:
            _write_body(f, result)
            _write_attrs(f, provenance())
            _write_attrs(f, {"route": result.route, "config": result.config,
                             "ionization": float(result.ionization), "norm": float(result.norm),
                             "stats": result.stats, "warnings": result.warnings,
                             "metadata": result.metadata, "quality": result.quality})
            if attrs:
                _write_attrs(f, attrs)
            f.attrs["sha256"] = content_digest(result)
            f.attrs["complete"] = True
    return path


def _size(result: Result) -> float:
    """Bytes the arrays of ``result`` take (the file takes about this plus its attributes)."""
    arrays = [result.times, *result.history_populations.values(), *result.series.values()]
    arrays += [a for group in result.spectra.values() for a in group.values()]
    return float(sum(np.asarray(a).nbytes for a in arrays)) + 16 * len(result.populations)


def stored_physics_hash(path) -> str | None:
    """The physics hash of a complete result file (``None``: no complete result there)."""
    import h5py

    from driven_atom.io import is_complete as complete

    if not complete(path):
        return None
    try:
        with h5py.File(path, "r") as f:
            return str(f.attrs.get("physics_hash", ""))
    except (OSError, ValueError):
        return None


def is_complete(path) -> bool:
    """True only for a readable result file marked complete and carrying its checksum."""
    from driven_atom.io import is_complete as complete

    return complete(path)


def _json_attr(f, key, default):
    value = f.attrs.get(key)
    return default if value is None else json.loads(value)


def read_result(path) -> Result:
    """Read a complete result file written by :func:`write_result`."""
    import h5py

    path = Path(path)
    try:
        f = h5py.File(path, "r")
    except (OSError, ValueError) as exc:
        raise InputError(f"result file {str(path)!r} cannot be read: {exc}") from None
    with f:
        if not bool(f.attrs.get("complete", False)) or "sha256" not in f.attrs:
            raise InputError(f"result file {str(path)!r} is not complete (an unfinished or failed run, "
                             f"or a file without its checksum)")
        try:
            labels = [s.decode() if isinstance(s, bytes) else s for s in f["populations/labels"][()]]
            values = f["populations/values"][()]
            result = Result(
                route=str(f.attrs["route"]),
                populations={k: float(v) for k, v in zip(labels, values)},
                ionization=float(f.attrs["ionization"]),
                norm=float(f.attrs["norm"]),
                times=f["times"][()],
                history_populations={_label(k): v[()] for k, v in f["history/populations"].items()},
                series={_label(k): v[()] for k, v in f["history/series"].items()},
                spectra={name: {k: v[()] for k, v in g.items()} for name, g in f["spectra"].items()},
                stats=_json_attr(f, "stats", {}),
                warnings=_json_attr(f, "warnings", []),
                config=str(f.attrs.get("config", "")),
                metadata=_json_attr(f, "metadata", {}),
                quality=_json_attr(f, "quality", {}),
            )
        except (KeyError, ValueError, OSError) as exc:    # marked complete but a part is missing or unreadable
            raise InputError(f"result file {str(path)!r} is damaged: {exc}") from None
        stored = f.attrs.get("sha256")
    if str(stored) != content_digest(result):
        raise InputError(f"result file {str(path)!r} is damaged: its content does not match its "
                         "SHA-256 checksum")
    return result


def checkpoint_path(result_path) -> Path:
    """Where the checkpoint of the run writing ``result_path`` lives: ``NAME.ckpt.h5`` beside it.

    >>> checkpoint_path("runs/a-0123.h5").as_posix()
    'runs/a-0123.ckpt.h5'
    """
    path = Path(result_path)
    stem = path.name[:-3] if path.name.endswith(".h5") else path.name
    return path.with_name(stem + ".ckpt.h5")


class Checkpoint:
    """Resumable route state in a file of its own (:func:`checkpoint_path` of the result).

    The route base class calls :meth:`load` once at the start (``None`` when there is nothing
    to resume, or the file belongs to other physics) and :meth:`save` now and then; each save
    replaces the file atomically. :meth:`clear` removes it once the result is written. Arrays are
    stored bit for bit; ``meta`` holds JSON-able values (position, step counts, ...).
    """

    def __init__(self, path, *, physics_hash: str = "", config: str = ""):
        self.path = Path(path)
        self.physics_hash = physics_hash
        self.config = config

    def load(self) -> tuple[dict[str, np.ndarray], dict] | None:
        import h5py

        if not self.path.exists():
            return None
        try:
            with h5py.File(self.path, "r") as f:
                if "checkpoint" not in f or str(f.attrs.get("physics_hash", "")) != self.physics_hash:
                    return None
                g = f["checkpoint"]
                arrays = {k: v[()] for k, v in g.items()}
                meta = json.loads(g.attrs.get("meta", "{}"))
                stored = str(f.attrs.get("sha256", ""))
        except (OSError, ValueError, KeyError):
            return None
        if stored != digest([arrays[k] for k in sorted(arrays)] + [meta]):
            return None          # damaged: start again rather than resume from wrong numbers
        return arrays, meta

    def save(self, arrays: dict[str, np.ndarray], meta: dict) -> None:
        import h5py

        from driven_atom.io import atomic_write

        arrays = {k: np.asarray(v) for k, v in arrays.items()}
        with atomic_write(self.path) as tmp:
            with h5py.File(tmp, "w") as f:
                g = f.create_group("checkpoint")
                for key, value in arrays.items():
                    g.create_dataset(key, data=value)
                g.attrs["meta"] = json.dumps(meta)
                _write_attrs(f, provenance())
                f.attrs["config"] = self.config
                f.attrs["physics_hash"] = self.physics_hash
                f.attrs["sha256"] = digest([arrays[k] for k in sorted(arrays)] + [meta])
                f.attrs["complete"] = False

    def clear(self) -> None:
        """Remove the checkpoint (its run has written its result)."""
        self.path.unlink(missing_ok=True)

"""The one result type of every route, and the one pair of functions that store and load it.

HDF5 layout of a result file (``NAME.h5``)::

    attrs:  complete (bool, written last), route, config (TOML text), physics_hash,
            versions (JSON), host, created, ionization, norm, stats (JSON), warnings (JSON),
            sha256 (checksum of the result's content, see :func:`content_digest`)
    /times                       history sample times (a.u.)
    /populations                 attrs label -> final population; dataset "labels"/"values"
    /history/populations/<label> population at each sample time
    /history/series/<name>       other sampled series (norm, ionization, dipole_z, ...)
    /spectra/<name>/<array>      spectra, each a group of named arrays with a "units" attribute
    /checkpoint/...              only in an unfinished file: the engine's resumable state

Files are written to ``NAME.h5.tmp`` and renamed onto ``NAME.h5`` (``os.replace``), so a reader
never sees a half-written file; readers trust a file only when ``complete`` is true, and
:func:`read_result` refuses a file whose content no longer matches its ``sha256`` (a damaged disk
or a bit flip: a campaign then re-runs the job).
"""
from __future__ import annotations

import hashlib
import json
import os
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
    return {"versions": json.dumps(package_versions()), "host": socket.gethostname(),
            "created": time.strftime("%Y-%m-%dT%H:%M:%S%z")}


def _tmp_path(path: Path) -> Path:
    return path.with_name(path.name + ".tmp")


def _write_attrs(h5obj, attrs: dict) -> None:
    for key, value in attrs.items():
        if isinstance(value, (dict, list, tuple)) and not isinstance(value, np.ndarray):
            value = json.dumps(value)
        h5obj.attrs[key] = value


def _write_body(f, result: Result) -> None:
    f.create_dataset("times", data=np.asarray(result.times, dtype=float))
    pops = f.create_group("populations")
    labels = list(result.populations)
    pops.create_dataset("labels", data=np.array(labels, dtype=object), dtype=_str_dtype())
    pops.create_dataset("values", data=np.array([result.populations[k] for k in labels], dtype=float))
    hist = f.create_group("history")
    hp = hist.create_group("populations", track_order=True)
    for label, values in result.history_populations.items():
        hp.create_dataset(label, data=np.asarray(values))
    hs = hist.create_group("series", track_order=True)
    for name, values in result.series.items():
        hs.create_dataset(name, data=np.asarray(values))
    spec = f.create_group("spectra")
    for name, arrays in result.spectra.items():
        g = spec.create_group(name)
        for key, values in arrays.items():
            g.create_dataset(key, data=np.asarray(values))


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

    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = _tmp_path(path)
    with h5py.File(tmp, "w") as f:
        _write_body(f, result)
        _write_attrs(f, provenance())
        _write_attrs(f, {"route": result.route, "config": result.config,
                         "ionization": float(result.ionization), "norm": float(result.norm),
                         "stats": result.stats, "warnings": result.warnings,
                         "metadata": result.metadata})
        if attrs:
            _write_attrs(f, attrs)
        f.attrs["sha256"] = content_digest(result)
        f.attrs["complete"] = True
    os.replace(tmp, path)
    return path


def is_complete(path) -> bool:
    """True only for a readable result file whose ``complete`` attribute is set."""
    import h5py

    try:
        with h5py.File(path, "r") as f:
            return bool(f.attrs.get("complete", False))
    except (OSError, ValueError):
        return False


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
        if not bool(f.attrs.get("complete", False)):
            raise InputError(f"result file {str(path)!r} is not complete (an unfinished or failed run)")
        try:
            labels = [s.decode() if isinstance(s, bytes) else s for s in f["populations/labels"][()]]
            values = f["populations/values"][()]
            result = Result(
                route=str(f.attrs["route"]),
                populations={k: float(v) for k, v in zip(labels, values)},
                ionization=float(f.attrs["ionization"]),
                norm=float(f.attrs["norm"]),
                times=f["times"][()],
                history_populations={k: v[()] for k, v in f["history/populations"].items()},
                series={k: v[()] for k, v in f["history/series"].items()},
                spectra={name: {k: v[()] for k, v in g.items()} for name, g in f["spectra"].items()},
                stats=_json_attr(f, "stats", {}),
                warnings=_json_attr(f, "warnings", []),
                config=str(f.attrs.get("config", "")),
                metadata=_json_attr(f, "metadata", {}),
            )
        except (KeyError, ValueError, OSError) as exc:    # marked complete but a part is missing or unreadable
            raise InputError(f"result file {str(path)!r} is damaged: {exc}") from None
        stored = f.attrs.get("sha256")
    if stored is not None and str(stored) != content_digest(result):
        raise InputError(f"result file {str(path)!r} is damaged: its content does not match its "
                         "SHA-256 checksum")
    return result


class Checkpoint:
    """Resumable engine state kept in the run's own file, group ``/checkpoint``.

    An engine calls :meth:`load` once at the start (``None`` when there is nothing to resume)
    and :meth:`save` now and then; each save replaces the file atomically and leaves
    ``complete = False``. The final :func:`write_result` replaces the file and so drops it.
    Arrays are stored bit for bit; ``meta`` holds JSON-able scalars (step index, ...).
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
                if bool(f.attrs.get("complete", False)) or "checkpoint" not in f:
                    return None
                if str(f.attrs.get("physics_hash", "")) != self.physics_hash:
                    return None
                g = f["checkpoint"]
                arrays = {k: v[()] for k, v in g.items()}
                meta = json.loads(g.attrs.get("meta", "{}"))
        except (OSError, ValueError, KeyError):
            return None
        return arrays, meta

    def save(self, arrays: dict[str, np.ndarray], meta: dict) -> None:
        import h5py

        self.path.parent.mkdir(parents=True, exist_ok=True)
        tmp = _tmp_path(self.path)
        with h5py.File(tmp, "w") as f:
            g = f.create_group("checkpoint")
            for key, value in arrays.items():
                g.create_dataset(key, data=np.asarray(value))
            g.attrs["meta"] = json.dumps(meta)
            _write_attrs(f, provenance())
            f.attrs["config"] = self.config
            f.attrs["physics_hash"] = self.physics_hash
            f.attrs["complete"] = False
        os.replace(tmp, self.path)

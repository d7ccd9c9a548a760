"""The campaign table: every job's result on the scan grid, as one xarray Dataset.

``collect(folder)`` reads ``campaign.toml`` and the job files and writes ``summary.h5`` (netCDF-4
through h5netcdf, temp file + rename), optionally ``summary.csv`` (one row per grid point).
The Dataset has one dimension per scan axis (a zipped group is one dimension carrying all its
axes as coordinates) in the user's units; every variable and coordinate has ``units`` and
``long_name`` (CF spellings, :mod:`driven_atom.stored_units`). Variables:

* ``ionization``, ``norm`` (scan dims), ``population`` (scan dims + ``state``), and their error bars
  ``ionization_err``, ``norm_err``, ``population_err`` (NaN where a job asked for none);
* ``trustworthy`` (1 when every quality check of the job passed, 0 when one flagged);
* ``job_id`` and ``status`` (scan dims), so every number can be traced to its file;
* spectra: for ``spectra[NAME] = {AXIS: ..., Y: ...}`` (AXIS one of energy, omega, frequency,
  order, k) the variable ``NAME_Y`` on (scan dims, ``NAME_AXIS``) when all jobs share one AXIS
  array, else on (scan dims, ``NAME_index``) with ``NAME_AXIS`` stored beside it (NaN padded).
  Per-step time series kept with the spectra (an array named ``time``, e.g. the grid route's
  ``dipole_response``) stay in the job files: they would make the table as large as all jobs.

Grid points whose job is not done hold NaN (``status`` says why); attributes carry provenance
(versions, host, created), the campaign config text and the job counts.

>>> SPECTRUM_AXES[:2]
('energy', 'omega')
"""
from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path

import numpy as np

from driven_atom.campaign import store
from driven_atom.io import atomic_write, write_text

SPECTRUM_AXES = ("energy", "omega", "frequency", "order", "k")


def axis_attributes(path: str, units: str, route: str) -> dict:
    """``units``, ``long_name``, ``key_path`` and ``user_units`` (for labels) of a scan-axis
    coordinate: the user's own unit (plain numbers of a quantity, stored as "au" in the plan, get the
    UDUNITS spelling of the atomic unit, :mod:`driven_atom.stored_units`, and its name as
    ``user_units``).

    >>> axis_attributes("solver.r_max", "au", "basis")["units"]
    '5.29177210544e-11 m'
    """
    from driven_atom.campaign.scan import axis_kind, unit_label
    from driven_atom.stored_units import attributes

    name = f"scan axis {path}"
    if units == "au":
        return {**attributes(axis_kind(path, route) or "1", name), "key_path": path,
                "user_units": unit_label(path, units, route)}
    return {"units": units or "1", "long_name": name, "key_path": path, "user_units": units or "1"}


def _coordinates(plan: dict) -> dict:
    route = str(plan.get("config", {}).get("solver", {}).get("route", ""))
    coords = {}
    for path, axis in plan.get("axes", {}).items():
        values = np.asarray(axis["coords"])
        coords[path] = ((axis["dim"],), values, axis_attributes(path, axis["units"], route))
    return coords


def _spectra_variables(results: dict, index_of: dict, dims: tuple, shape: tuple) -> dict:
    """Spectrum arrays of all done jobs -> data variables with the spectrum axis as extra dim."""
    from driven_atom.stored_units import attributes, describe

    names = list(dict.fromkeys(name for r in results.values() for name, arrays in r.spectra.items()
                               if "time" not in arrays))
    out = {}
    for name in names:
        members = {jid: r.spectra[name] for jid, r in results.items() if name in r.spectra}
        keys = list(dict.fromkeys(k for arrays in members.values() for k in arrays))
        axis_key = next((k for k in SPECTRUM_AXES if k in keys), None)
        first = next(iter(members.values()))
        shared = axis_key is not None and all(
            axis_key in a and np.array_equal(a[axis_key], first[axis_key]) for a in members.values())
        extra = f"{name}_{axis_key}" if shared else f"{name}_index"
        length = len(first[axis_key]) if shared else max(len(np.ravel(v)) for a in members.values() for v in a.values())
        for key in keys:
            if shared and key == axis_key:
                continue
            dtype = np.result_type(float, *(np.asarray(a[key]).dtype for a in members.values() if key in a))
            data = np.full(shape + (length,), np.nan, dtype=dtype)
            for jid, arrays in members.items():
                if key in arrays:
                    values = np.ravel(np.asarray(arrays[key]))
                    for idx in index_of[jid]:
                        data[idx + (slice(0, len(values)),)] = values
            out[f"{name}_{key}"] = (dims + (extra,), data, describe(f"spectra/{name}", key))
        if shared:
            out[extra] = ((extra,), np.asarray(first[axis_key], dtype=float), describe(f"spectra/{name}", axis_key))
        else:
            out[extra] = ((extra,), np.arange(length), attributes("1", f"index into the {name} spectrum arrays"))
    return out


def build_dataset(folder):
    """The summary Dataset of a campaign folder (nothing written)."""
    import xarray as xr

    from driven_atom.result import provenance

    plan = store.read_plan(folder)
    dims = tuple(plan["campaign"]["dims"])
    shape = tuple(plan["campaign"]["shape"])
    index_of = {}
    for job in plan.get("job", []):
        index_of.setdefault(job["id"], []).append(tuple(job["index"]))
    results, status = {}, {}
    for job_id in index_of:
        state, result = store.load_job(folder, job_id)
        status[job_id] = state.status
        if result is not None:
            results[job_id] = result

    labels = list(dict.fromkeys(label for r in results.values() for label in r.populations))
    ionization, norm = np.full(shape, np.nan), np.full(shape, np.nan)
    ionization_err, norm_err = np.full(shape, np.nan), np.full(shape, np.nan)
    population = np.full(shape + (len(labels),), np.nan)
    population_err = np.full(shape + (len(labels),), np.nan)
    trustworthy = np.full(shape, -1, dtype=np.int8)
    job_ids = np.empty(shape, dtype=object)
    statuses = np.empty(shape, dtype=object)
    for job_id, indices in index_of.items():
        result = results.get(job_id)
        for idx in indices:
            job_ids[idx], statuses[idx] = job_id, status[job_id]
            if result is not None:
                ionization[idx], norm[idx] = result.ionization, result.norm
                population[idx] = [result.populations.get(label, np.nan) for label in labels]
                trust = result.quality.get("trustworthy")
                trustworthy[idx] = -1 if trust is None else int(bool(trust))
                errors = result.quality.get("errors", {})
                if errors.get("method") == "richardson":
                    ionization_err[idx], norm_err[idx] = errors["ionization"], errors["norm_loss"]
                    population_err[idx] = [errors["populations"].get(label, np.nan) for label in labels]

    data_vars = {
        "ionization": (dims, ionization, {"units": "1", "long_name": "ionisation probability"}),
        "norm": (dims, norm, {"units": "1", "long_name": "final norm"}),
        "population": (dims + ("state",), population, {"units": "1", "long_name": "final population"}),
        "ionization_err": (dims, ionization_err, {"units": "1", "long_name": "estimated numerical error of "
                                                   "the ionisation probability (NaN: no error bar asked)"}),
        "norm_err": (dims, norm_err, {"units": "1", "long_name": "estimated numerical error of the norm loss"}),
        "population_err": (dims + ("state",), population_err,
                           {"units": "1", "long_name": "estimated numerical error of the final population"}),
        "trustworthy": (dims, trustworthy, {"units": "1", "long_name": "every quality check passed "
                                            "(1 yes, 0 no, -1 no result or no checks)"}),
        "job_id": (dims, job_ids.astype(str), {"units": "1", "long_name": "job id (physics hash; file "
                                                "jobs/<job_id>.h5)"}),
        "status": (dims, statuses.astype(str), {"units": "1", "long_name": "job status (done, failed, "
                                                "checkpointed, corrupt, pending)"}),
    }
    data_vars.update(_spectra_variables(results, index_of, dims, shape))
    coords = _coordinates(plan)
    for dim, size in zip(dims, shape):
        if dim not in coords:          # a zipped group: its position, so no dimension is left without units
            members = ", ".join(p for p, a in plan.get("axes", {}).items() if a["dim"] == dim)
            coords[dim] = ((dim,), np.arange(size), {"units": "1", "long_name": f"position along the zipped scan "
                                                     f"dimension {dim} ({members})"})
    coords["state"] = (("state",), np.array(labels, dtype=str), {"units": "1", "long_name": "state label"})
    counts = {s: sum(1 for v in status.values() if v == s)
              for s in (store.DONE, store.FAILED, store.CHECKPOINTED, store.CORRUPT, store.PENDING)}
    import tomli_w

    untrustworthy = sum(1 for r in results.values() if r.quality.get("trustworthy") is False)
    attrs = {**provenance(), "config": tomli_w.dumps(plan.get("config", {})), "n_jobs": len(index_of),
             "jobs_done": counts[store.DONE], "jobs_failed": counts[store.FAILED],
             "jobs_untrustworthy": untrustworthy,
             "jobs_missing": len(index_of) - counts[store.DONE], "counts": json.dumps(counts),
             "complete": int(counts[store.DONE] == len(index_of))}
    return xr.Dataset(data_vars, coords=coords, attrs=attrs)


def _write_csv(ds, path: Path) -> Path:
    """One row per grid point: axis values (unit in the header), job id, status, numbers."""
    dims = [d for d in ds["ionization"].dims]
    axis_names = [name for name in ds.coords if name != "state" and set(ds[name].dims) <= set(dims)]
    header = [f"{n} [{ds[n].attrs['units']}]" if ds[n].attrs.get("units") else n for n in axis_names]
    states = ds["state"].values.tolist()
    header += ["job_id", "status", "trustworthy", "ionization", "ionization_err", "norm"]
    header += [f"P({s})" for s in states] + [f"P({s})_err" for s in states]
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(header)
    for idx in np.ndindex(*ds["ionization"].shape):
        point = dict(zip(dims, idx))
        row = [ds[n].isel({d: point[d] for d in ds[n].dims}).item() for n in axis_names]
        row += [str(ds["job_id"].values[idx]), str(ds["status"].values[idx]),
                {1: "yes", 0: "no"}.get(int(ds["trustworthy"].values[idx]), ""),
                _num(ds["ionization"].values[idx]), _num(ds["ionization_err"].values[idx]),
                _num(ds["norm"].values[idx])]
        row += [_num(v) for v in ds["population"].values[idx]]
        row += [_num(v) for v in ds["population_err"].values[idx]]
        writer.writerow(row)
    return write_text(path, buffer.getvalue())


def _num(value) -> str:
    value = float(value)
    return "" if math.isnan(value) else repr(value)


def collect(folder, csv: bool = False) -> Path:
    """Write ``summary.h5`` (and ``summary.csv`` when asked) for a campaign folder; returns its path.

    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as d:
    ...     collect(d)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    driven_atom.errors.InputError: `DIR` ... is not a campaign folder (no campaign.toml); start one with `driven-atom scan CONFIG --out DIR`
    """
    folder = Path(folder)
    ds = build_dataset(folder)
    path = folder / store.SUMMARY_FILE
    size = sum(v.nbytes for v in ds.variables.values())
    with atomic_write(path, size_hint=size) as tmp:   # a new temporary file: two collects never share one
        ds.to_netcdf(tmp, engine="h5netcdf")
    if csv:
        _write_csv(ds, folder / store.CSV_FILE)
    return path


def _stale(folder: Path, summary: Path) -> bool:
    if not summary.exists():
        return True
    made = summary.stat().st_mtime_ns
    inputs = [folder / store.PLAN_FILE, *(folder / store.JOBS_DIR).glob("*.h5")]
    return any(p.stat().st_mtime_ns > made for p in inputs if p.exists())


def open_campaign(path):
    """The summary Dataset of a campaign (a folder, collected first if needed, or a summary file).

    The data are loaded into memory and the file closed, so the campaign can go on writing.
    """
    import xarray as xr

    path = Path(path)
    if path.is_dir():
        summary = path / store.SUMMARY_FILE
        if _stale(path, summary):
            collect(path)
        path = summary
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        return ds.load()

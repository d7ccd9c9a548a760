"""A result as an :class:`xarray.Dataset` (``Result.to_xarray()``), units on every variable.

Layout (atomic units, ``units``/``long_name`` from :mod:`driven_atom.stored_units`):

* coordinates ``time`` (the history samples) and ``state`` (the population labels);
* ``final_population`` (state), ``ionization`` and ``norm`` (scalars);
* ``population`` (state, time) for the labels with a history (NaN for labels without one);
* every stored series on ``time`` under its own name (``norm_history``, ``ionization_history`` when
  a series shares its name with a final value);
* every spectrum array as ``NAME_ARRAY`` on the dimension ``NAME_ARRAY`` of its own length (the
  axes of one spectrum are not assumed to be shared; an array of more dimensions gets
  ``NAME_ARRAY_0``, ``NAME_ARRAY_1``, ...).

>>> from driven_atom.result import Result
>>> ds = Result(route="levels", populations={"1s": 0.25, "2p": 0.75}, ionization=0.0, norm=1.0).to_xarray()
>>> ds["final_population"].sel(state="2p").item(), ds["final_population"].attrs["units"]
(0.75, '1')
"""
from __future__ import annotations

import numpy as np


def result_dataset(result):
    """The :class:`xarray.Dataset` of a :class:`driven_atom.result.Result` (nothing copied back)."""
    import xarray as xr

    from driven_atom.stored_units import attributes, describe

    labels = list(result.populations)
    times = np.asarray(result.times, dtype=float)
    data = {
        "final_population": (("state",), np.array([result.populations[k] for k in labels], dtype=float),
                             attributes("1", "final population")),
        "ionization": ((), float(result.ionization), attributes("1", "final ionisation probability")),
        "norm": ((), float(result.norm), attributes("1", "final norm of the wave function")),
    }
    if result.history_populations:
        history = np.full((len(labels), times.size), np.nan)
        for i, label in enumerate(labels):
            if label in result.history_populations:
                history[i] = np.asarray(result.history_populations[label], dtype=float)
        data["population"] = (("state", "time"), history, attributes("1", "population at the sample times"))
    for name, values in result.series.items():
        key = f"{name}_history" if name in data else name
        data[key] = (("time",), np.asarray(values), describe("history/series", name))
    for name, arrays in result.spectra.items():
        for key, values in arrays.items():
            full, values = f"{name}_{key}", np.asarray(values)
            dims = (full,) if values.ndim == 1 else tuple(f"{full}_{i}" for i in range(values.ndim))
            data[full] = (dims, values, describe(f"spectra/{name}", key))
    coords = {"time": (("time",), times, describe("", "times")),
              "state": (("state",), np.array(labels, dtype=str), attributes("1", "state label"))}
    attrs = {"route": result.route, "config": result.config}
    if result.metadata.get("file"):
        attrs["file"] = str(result.metadata["file"])
    return xr.Dataset(data, coords=coords, attrs=attrs)

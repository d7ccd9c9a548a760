"""The result of an unpolarised p level: the weighted sum of the runs of its sublevels.

Linear polarisation along z conserves m, so an initial level whose sublevels m = −1, 0, 1 are
equally occupied (a model atom's filled p shell, single-active-electron practice: Tong & Lin,
J. Phys. B 38, 2593 (2005)) is propagated once for m = 0 and once for m = 1 (m = −1 gives the same
numbers), and every observable is the incoherent sum

    P = (P(m=0) + 2 P(|m|=1)) / 3.

Populations, the ionisation yield, the norm, the sampled histories and series and the spectra are
summed with these weights (a label or series that one run lacks counts as zero there; m-resolved
labels keep their m, those of the |m| = 1 run stand for m = ±1 together). A spectrum's arrays
that are equal in both runs (its axes: the basis route's energy grid does not depend on m) are
kept; arrays with a row per partial wave (l = |m| … l_max) are aligned by l. The error bars are summed with the same weights (the errors of the two runs add, at worst,
linearly). The result says all this in ``metadata["m_average"]``, with each run's ionisation.

>>> import numpy as np
>>> from driven_atom.result import Result
>>> r0 = Result(route="basis", populations={"3p0": 0.7}, ionization=0.3, norm=1.0)
>>> r1 = Result(route="basis", populations={"3p1": 0.97}, ionization=0.03, norm=1.0)
>>> out = average_over_m([(r0, 1 / 3, 0), (r1, 2 / 3, 1)])
>>> round(out.ionization, 6), round(out.populations["3p1"], 6)
(0.12, 0.646667)
"""
from __future__ import annotations

import numpy as np

from driven_atom.result import Result

RULE = "(P(m=0) + 2 P(|m|=1))/3: sublevels equally occupied, linear polarisation along z conserves m"


def _weighted(dicts_and_weights) -> dict:
    """Σ w·d[key] over the union of keys (a missing key counts as zero); scalars stay floats."""
    out: dict = {}
    for values, weight in dicts_and_weights:
        for key, value in values.items():
            term = weight * np.asarray(value, dtype=float)
            out[key] = out[key] + term if key in out else term
    return {key: float(value) if value.ndim == 0 else value for key, value in out.items()}


def _spectrum(parts) -> dict:
    """The weighted sum of one spectrum (dict of arrays); arrays equal in every run (its axes)
    are kept as they are."""
    first = parts[0][0]
    out = {}
    for name, array in first.items():
        arrays = [np.asarray(spectrum[name], dtype=float) for spectrum, _ in parts]
        if all(a.shape == arrays[0].shape and np.array_equal(a, arrays[0]) for a in arrays):
            out[name] = arrays[0]
            continue
        rows = max(a.shape[0] for a in arrays)
        total = 0.0
        for values, (_, weight) in zip(arrays, parts):
            if values.ndim == 2 and values.shape[0] < rows:
                # rows by partial wave l = |m| ... l_max: the |m| = 1 run has no l = 0 row
                values = np.vstack([np.zeros((rows - values.shape[0], values.shape[1])), values])
            if np.shape(total) not in ((), values.shape):
                raise ValueError(f"spectrum array {name!r} has other shapes in the runs of the m-average")
            total = total + weight * values
        out[name] = total
    return out


def _errors(parts) -> dict | None:
    blocks = [(r.quality.get("errors"), w) for r, w, _ in parts]
    if any(b is None or b.get("method") != "richardson" for b, _ in blocks):
        return next((b for b, _ in blocks if b is not None and b.get("method") != "richardson"), None)
    out = {k: v for k, v in blocks[0][0].items() if k not in ("ionization", "norm_loss", "populations")}
    for key in ("ionization", "norm_loss"):
        out[key] = sum(w * b[key] for b, w in blocks)
    out["populations"] = _weighted([(b["populations"], w) for b, w in blocks])
    return out


def average_over_m(parts: list[tuple[Result, float, int]]) -> Result:
    """One :class:`Result` from the runs ``[(result, weight, m)]`` of an unpolarised level."""
    first = parts[0][0]
    if any(len(r.times) != len(first.times) or not np.allclose(r.times, first.times) for r, _, _ in parts):
        raise ValueError("the runs of the m-average sampled different times")
    spectra = {name: _spectrum([(r.spectra[name], w) for r, w, _ in parts if name in r.spectra])
               for name in first.spectra}
    checks = [{**check, "m": m} for r, _, m in parts for check in r.quality.get("checks", [])]
    quality = {"trustworthy": all(r.quality.get("trustworthy", False) for r, _, _ in parts), "checks": checks}
    errors = _errors(parts)
    if errors is not None:
        quality["errors"] = errors
    stats = dict(first.stats)
    for key in ("wall_s", "companion_s", "steps", "matvecs"):
        if all(key in r.stats for r, _, _ in parts):
            stats[key] = sum(r.stats[key] for r, _, _ in parts)
    warnings = list(dict.fromkeys(f"m = {m}: {w}" for r, _, m in parts for w in r.warnings))
    metadata = {**first.metadata, "m_average": {
        "rule": RULE, "weights": {str(m): w for _, w, m in parts},
        "ionization_by_m": {str(m): r.ionization for r, _, m in parts}}}
    return Result(route=first.route,
                  populations=_weighted([(r.populations, w) for r, w, _ in parts]),
                  ionization=sum(w * r.ionization for r, w, _ in parts),
                  norm=sum(w * r.norm for r, w, _ in parts), times=first.times,
                  history_populations=_weighted([(r.history_populations, w) for r, w, _ in parts]),
                  series=_weighted([(r.series, w) for r, w, _ in parts]), spectra=spectra, stats=stats,
                  warnings=warnings, config=first.config, metadata=metadata, quality=quality)

"""The figure of a campaign: every scalar observable against the scanned axes.

:func:`campaign_figure` draws the summary Dataset of a campaign
(:func:`driven_atom.campaign.summary.open_campaign`) on a :class:`matplotlib.figure.Figure`
(never pyplot), one row of panels per observable: the ionisation probability, the final population
of each level (labels without m) and the norm loss 1 − norm; an observable that is zero or NaN at
every point is left out (the figure's footnote names it).

* **Lines**: the observable against the lead axis (an intensity or peak-field axis when one is
  scanned, else the first), one line per value of another axis (the third when three are scanned,
  else the second; at most 8 lines), the other axes at their middle value. A *yield* (an observable
  below 1/2 at the weakest point: not the initial level) is drawn log–log against a log-spaced
  intensity, with the slope d ln P / d ln I fitted over the lowest decade of intensity shown and
  drawn: below saturation an N-photon yield grows as I^N (lowest-order perturbation theory), so the
  slope reads the photon order (2N against a peak field).
* **Map**: with two or more scanned axes, the observable over the lead axis and the second axis
  (colour, log scale for a yield spanning decades).
* Error bars where the summary has ``_err`` values; points whose job failed a quality check
  (``trustworthy`` = 0) are marked with a red ×.
* Axes in the user's units; a wavelength or photon-energy axis that scans narrowly across a line of
  the model (within its own span) is drawn as the detuning of the photon frequency from that line
  (one or two photons), in MHz, GHz or THz.

:func:`campaign_figure` returns the Figure and a list of panel descriptions (observable, kind, axes,
and per line the fitted slope), which ``driven-atom plot --json`` prints.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from driven_atom.errors import InputError

INTENSITY_KEYS = ("intensity", "peak_field")
MAX_LINES = 8
MAX_OBSERVABLES = 16
YIELD_BELOW = 0.5                    # an observable below this at the weakest point is a yield


# ---------------------------------------------------------------- axes
class _Axis:
    """One scan dimension as drawn: values, label, scale."""

    def __init__(self, ds, dim: str):
        self.dim = dim
        names = [str(n) for n in ds.coords if ds[n].dims == (dim,) and n != "state"]
        if len(names) > 1 and dim in names:            # a zipped group's position: draw its axes instead
            names.remove(dim)
        self.path = names[0] if names else dim
        coord = ds[self.path] if names else None
        raw = coord.values if coord is not None else np.arange(ds.sizes[dim])
        self.units = str(coord.attrs.get("user_units", coord.attrs.get("units", "1"))) if coord is not None else "1"
        self.leaf = self.path.rsplit(".", 1)[-1]
        self.categorical = raw.dtype.kind not in "fiu"
        self.ticks = None
        if self.categorical:
            self.values = np.arange(raw.size, dtype=float)
            self.ticks = [str(v) for v in raw]
        else:
            self.values = np.asarray(raw, dtype=float)
        unit = "" if self.units in ("1", "") else f" [{self.units}]"
        self.label = f"{self.path}{unit}"
        if len(names) > 1:
            self.label += " (with " + ", ".join(names[1:]) + ")"
        self.line = None
        if not self.categorical:
            self._detuning(ds)
        positive = self.values[np.isfinite(self.values)]
        self.log = (not self.categorical and self.line is None and positive.size > 1 and positive.min() > 0
                    and positive.max() / positive.min() >= 10)

    @property
    def intensity_like(self) -> bool:
        return self.leaf in INTENSITY_KEYS and not self.categorical

    def _detuning(self, ds) -> None:
        """Redraw a narrow wavelength or photon-energy scan across a line as a detuning."""
        if self.leaf not in ("wavelength", "photon_energy") or self.values.size < 2:
            return
        frequency = _frequencies_hz(self.values, self.units)
        if frequency is None:
            return
        span = float(frequency.max() - frequency.min())
        middle = float(np.median(frequency))
        if not span > 0 or span > 0.01 * middle:
            return
        lines = _lines_hz(ds.attrs.get("config", ""))
        if not lines:
            return
        name, line_hz = min(lines.items(), key=lambda item: abs(item[1] - middle))
        if abs(line_hz - middle) > span:
            return
        offset = frequency - line_hz
        offset[np.abs(offset) < 1e-9 * span] = 0.0            # on the line, up to rounding
        scale, unit = next((s, u) for s, u in ((1e12, "THz"), (1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz"))
                           if np.max(np.abs(offset)) >= s or u == "kHz")
        self.values, self.line = offset / scale, name
        self.label = f"detuning from {name} [{unit}]"


def _frequencies_hz(values, units: str):
    """Photon frequencies (Hz) of wavelengths or photon energies given in ``units``, or None."""
    from driven_atom.units import registry

    ureg = registry()
    try:
        return np.asarray(ureg.Quantity(np.asarray(values, dtype=float), units).to("Hz", "sp").magnitude, dtype=float)
    except Exception:  # noqa: BLE001 - a unit pint cannot turn into a frequency: no detuning axis
        return None


def _lines_hz(config_text: str) -> dict:
    """Photon frequencies (Hz) of the one- and two-photon lines from the initial level of the
    config's atom: to the levels of a levels-route model (its fine or hyperfine components under a
    structure), or to the Bohr shells n <= 12 on the other routes."""
    import tomllib

    from driven_atom.config import read_config
    from driven_atom.units import AU_TIME_S

    try:
        cfg = read_config(tomllib.loads(config_text))
        atom, structure = cfg.build_atom(), cfg.atom.structure
        initial = cfg.atom.initial if isinstance(cfg.atom.initial, str) else cfg.atom.initial[0].state
        lower = _energies(atom, [initial], structure)
        states = getattr(cfg.solver, "states", None)
        upper = _energies(atom, states, structure) if states else _shells(atom)
    except Exception:  # noqa: BLE001 - a config this cannot read: no detuning axis
        return {}
    hz = 1.0 / (2 * math.pi * AU_TIME_S)
    out = {}
    for low_name, low in lower.items():
        for up_name, up in upper.items():
            gap = up - low
            if gap > 0:
                out[f"{low_name}–{up_name}"] = gap * hz
                out[f"{low_name}–{up_name} / 2 (two photons)"] = gap * hz / 2
    return out


def _shells(atom) -> dict:
    from driven_atom.atom.levels import energy

    return {f"n={n}": float(energy(atom, n)) for n in range(1, 13)}


def _energies(atom, labels, structure: str) -> dict:
    """Level energies (hartree) of the levels or components named by ``labels``, m dropped."""
    from driven_atom.atom.components import sublevels
    from driven_atom.atom.states import parse_state
    from driven_atom.atom.structure import level_energy, nuclear_spin2

    out = {}
    if structure == "bohr":
        for label in labels:
            out[parse_state(label).level.label] = level_energy(atom, label, "bohr")
        return out
    I2 = nuclear_spin2(atom) if structure == "hyperfine" else 0
    for label in labels:
        for sub in sublevels(label, structure, I2):
            name = sub.label.split(" m=")[0]
            out.setdefault(name, level_energy(atom, name, structure))
    return out


# ---------------------------------------------------------------- observables
def observables(ds) -> tuple[list, list]:
    """([(name, values, errors or None)], [names left out]) of the summary ``ds``: ionisation,
    the final population of each level, the norm loss."""
    from driven_atom.plotting import _levels_only

    found = [("ionization", ds["ionization"], ds.get("ionization_err"))]
    labels = [str(s) for s in ds["state"].values] if "state" in ds.coords else []
    for label in _levels_only({label: None for label in labels}):
        found.append((f"population {label}", ds["population"].sel(state=label),
                      ds["population_err"].sel(state=label) if "population_err" in ds else None))
    found.append(("norm loss 1 − norm", 1.0 - ds["norm"], ds.get("norm_err")))
    kept, left = [], []
    for name, values, errors in found:
        data = np.asarray(values.values, dtype=float)
        if not np.isfinite(data).any() or np.nanmax(np.abs(data)) < 1e-14:
            left.append(name)
        elif len(kept) < MAX_OBSERVABLES:
            kept.append((name, values, errors if errors is not None and np.isfinite(errors.values).any() else None))
        else:
            left.append(name)
    return kept, left


def local_slope(x, y) -> float | None:
    """d ln y / d ln x fitted (least squares) over the lowest decade of ``x`` (at least the two
    lowest points with positive finite values); None with fewer than two.

    >>> round(local_slope([1e12, 2e12, 4e12, 1e14], [1e-9, 8e-9, 6.4e-8, 1e-2]), 6)
    3.0
    """
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y) & (x > 0) & (y > 0)
    x, y = x[ok], y[ok]
    if x.size < 2:
        return None
    order = np.argsort(x)
    x, y = x[order], y[order]
    use = x <= 10 * x[0] * (1 + 1e-9)
    if use.sum() < 2:
        use[:2] = True
    return float(np.polyfit(np.log(x[use]), np.log(y[use]), 1)[0])


# ---------------------------------------------------------------- drawing
def _plan(ds):
    dims = list(ds["ionization"].dims)
    if not dims:
        raise InputError("the campaign has no scan axis to draw against (a single job: use `driven-atom plot` on "
                         "its job file)")
    axes = {d: _Axis(ds, d) for d in dims}
    lead = next((d for d in dims if axes[d].intensity_like), dims[0])
    others = [d for d in dims if d != lead]
    second = others[0] if others else None
    lines = others[1] if len(others) > 1 else second
    return axes, lead, second, lines


def _pick(n: int, most: int = MAX_LINES) -> list[int]:
    return list(range(n)) if n <= most else sorted({int(round(i)) for i in np.linspace(0, n - 1, most)})


def _is_yield(values, lead: str) -> bool:
    data = np.asarray(values.transpose(lead, ...).values, dtype=float)
    first = data[0] if data.ndim else data
    finite = np.asarray(first)[np.isfinite(first)]
    return bool(finite.size) and float(np.median(finite)) < YIELD_BELOW


def _draw_lines(ax, name, values, errors, trust, axes, lead, line_dim, fixed) -> dict:
    x_axis = axes[lead]
    selection = {d: ds_size // 2 for d, ds_size in fixed.items()}
    data = values.isel(selection)
    err = errors.isel(selection) if errors is not None else None
    flag = trust.isel(selection)
    is_yield = _is_yield(data, lead)
    positive = np.asarray(data.values, dtype=float)
    positive = positive[np.isfinite(positive) & (positive > 0)]
    log_y = is_yield and positive.size > 1 and positive.max() / positive.min() >= 10
    show_slope = x_axis.log and x_axis.intensity_like and log_y
    entries = []
    indices = _pick(values.sizes[line_dim]) if line_dim else [None]
    flagged_drawn = False
    for k in indices:
        y = data.isel({line_dim: k}) if line_dim else data
        y_err = err.isel({line_dim: k}) if err is not None and line_dim else err
        bad = flag.isel({line_dim: k}) if line_dim else flag
        yv = np.asarray(y.transpose(lead).values, dtype=float)
        label = _value_text(axes[line_dim], k) if line_dim else name
        slope = local_slope(x_axis.values, yv) if show_slope else None
        if slope is not None:
            label += f"  (slope {slope:.2f})"
        if y_err is not None:
            ev = np.asarray(y_err.transpose(lead).values, dtype=float)
            line = ax.errorbar(x_axis.values, yv, yerr=np.where(np.isfinite(ev), ev, 0.0), marker="o", ms=3,
                               lw=1.0, capsize=2, label=label)[0]
        else:
            (line,) = ax.plot(x_axis.values, yv, marker="o", ms=3, lw=1.0, label=label)
        if slope is not None:
            _draw_slope(ax, x_axis.values, yv, slope, line.get_color())
        marks = np.asarray(bad.transpose(lead).values) == 0
        if marks.any():
            ax.plot(x_axis.values[marks], yv[marks], "x", color="red", ms=8, mew=2,
                    label=None if flagged_drawn else "flagged by a quality check")
            flagged_drawn = True
        entries.append({"label": label, "slope": slope, "index": k})
    if x_axis.log:
        ax.set_xscale("log")
    if log_y:
        ax.set_yscale("log")
    _ticks(ax, x_axis, "x")
    ax.set_xlabel(x_axis.label)
    ax.set_ylabel(name)
    note = ", ".join(f"{axes[d].path} = {_value_text(axes[d], i)}" for d, i in selection.items())
    ax.set_title(name + (f"  ({note})" if note else ""), fontsize="small")
    if len(entries) > 1 or show_slope or flagged_drawn:
        ax.legend(fontsize="x-small", loc="best", title=axes[line_dim].label if line_dim else None,
                  title_fontsize="x-small")
    kind = "log-log" if (x_axis.log and log_y) else "lines"
    slope_name = {"intensity": "d ln P / d ln I", "peak_field": "d ln P / d ln F0"}.get(x_axis.leaf)
    return {"observable": name, "kind": kind, "x": x_axis.path, "lines_over": axes[line_dim].path if line_dim else None,
            "fixed": {axes[d].path: _value_text(axes[d], i) for d, i in selection.items()},
            "slope": slope_name if show_slope else None, "lines": entries}


def _draw_slope(ax, x, y, slope, colour) -> None:
    """The fitted power law through the lowest decade, dashed, over the whole x range."""
    ok = np.isfinite(x) & np.isfinite(y) & (x > 0) & (y > 0)
    if ok.sum() < 2:
        return
    x0, y0 = x[ok][np.argmin(x[ok])], y[ok][np.argmin(x[ok])]
    top = max(min(10 * x0, x[ok].max()), np.sort(x[ok])[1])          # the fitted range
    xs = np.geomspace(x0, top, 20)
    ax.plot(xs, y0 * (xs / x0) ** slope, ls=":", lw=1.5, color=colour)


def _draw_map(fig, ax, name, values, trust, axes, lead, second, fixed) -> dict:
    from matplotlib.colors import LogNorm

    selection = {d: n // 2 for d, n in fixed.items()}
    data = np.asarray(values.isel(selection).transpose(second, lead).values, dtype=float)
    flags = np.asarray(trust.isel(selection).transpose(second, lead).values)
    xa, ya = axes[lead], axes[second]
    xo, yo = np.argsort(xa.values), np.argsort(ya.values)
    data, flags = data[np.ix_(yo, xo)], flags[np.ix_(yo, xo)]
    x, y = xa.values[xo], ya.values[yo]
    positive = data[np.isfinite(data) & (data > 0)]
    log_c = positive.size > 1 and positive.max() / positive.min() >= 100 and _is_yield(values.isel(selection), lead)
    norm = LogNorm(vmin=positive.min(), vmax=positive.max()) if log_c else None
    mesh = ax.pcolormesh(_edges(x, xa.log), _edges(y, ya.log), np.ma.masked_invalid(data), norm=norm,
                         shading="flat", cmap="viridis")
    fig.colorbar(mesh, ax=ax, label=name)
    bad = flags == 0
    if bad.any():
        gx, gy = np.meshgrid(x, y)
        ax.plot(gx[bad], gy[bad], "x", color="red", ms=8, mew=2)
    if xa.log:
        ax.set_xscale("log")
    if ya.log:
        ax.set_yscale("log")
    _ticks(ax, xa, "x", order=xo)
    _ticks(ax, ya, "y", order=yo)
    ax.set_xlabel(xa.label)
    ax.set_ylabel(ya.label)
    note = ", ".join(f"{axes[d].path} = {_value_text(axes[d], i)}" for d, i in selection.items())
    ax.set_title(name + (f"  ({note})" if note else ""), fontsize="small")
    return {"observable": name, "kind": "map", "x": xa.path, "y": ya.path,
            "fixed": {axes[d].path: _value_text(axes[d], i) for d, i in selection.items()}}


def _edges(centres: np.ndarray, log: bool) -> np.ndarray:
    """Cell edges around sorted centres (geometric midpoints on a log axis)."""
    c = np.log(centres) if log else np.asarray(centres, dtype=float)
    if c.size == 1:
        edges = np.array([c[0] - 0.5, c[0] + 0.5]) if not log else np.array([c[0] - 0.1, c[0] + 0.1])
    else:
        mid = (c[1:] + c[:-1]) / 2
        edges = np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])
    return np.exp(edges) if log else edges


def _ticks(ax, axis: _Axis, which: str, order=None) -> None:
    if axis.ticks is None:
        return
    positions = axis.values if order is None else axis.values[order]
    labels = axis.ticks if order is None else [axis.ticks[i] for i in order]
    (ax.set_xticks if which == "x" else ax.set_yticks)(positions, labels)


def _value_text(axis: _Axis, i: int) -> str:
    """The value of ``axis`` at ``i`` with as few digits (at least 3) as tell its neighbours apart."""
    if axis.ticks is not None:
        return axis.ticks[i]
    unit = axis.label.rsplit("[", 1)[-1].rstrip("]") if "[" in axis.label else ""
    values = axis.values[np.isfinite(axis.values)]
    digits = next((d for d in range(3, 17) if len({f"{v:.{d}g}" for v in values}) == len(set(values))), 17)
    return f"{axis.values[i]:.{digits}g}" + (f" {unit}" if unit else "")


def campaign_figure(ds):
    """(Figure, panel descriptions) of the summary Dataset ``ds`` (see the module docstring)."""
    from driven_atom.plotting import _figure

    kept, left = observables(ds)
    if not kept:
        raise InputError("the campaign has no finished job with a number to draw (see `driven-atom status`)")
    axes, lead, second, line_dim = _plan(ds)
    trust = ds["trustworthy"]
    columns = 2 if second else 1
    fig = _figure(figsize=(6.4 * columns, 2.9 * len(kept) + 1.0), layout="constrained")
    grid = fig.subplots(len(kept), columns, squeeze=False)
    panels = []
    for row, (name, values, errors) in enumerate(kept):
        fixed = {d: values.sizes[d] for d in values.dims if d not in (lead, line_dim)}
        panels.append(_draw_lines(grid[row, 0], name, values, errors, trust, axes, lead, line_dim, fixed))
        if second:
            fixed = {d: values.sizes[d] for d in values.dims if d not in (lead, second)}
            panels.append(_draw_map(fig, grid[row, 1], name, values, trust, axes, lead, second, fixed))
    done, total = int(ds.attrs.get("jobs_done", 0)), int(ds.attrs.get("n_jobs", 0))
    title = f"campaign: {done}/{total} jobs done" + (f", {int(ds.attrs.get('jobs_failed', 0))} failed"
                                                      if int(ds.attrs.get("jobs_failed", 0)) else "")
    if left:
        title += "\nnot drawn (zero or NaN everywhere, or past " + f"{MAX_OBSERVABLES} panels): " + ", ".join(left)
    fig.suptitle(title, fontsize="medium")
    return fig, panels


def plot_campaign(source, path=None, *, name: str = "--out"):
    """Draw a campaign (a summary Dataset, a campaign folder or its summary file) and return the
    :class:`matplotlib.figure.Figure`; with ``path`` (.png, .pdf or .svg) also write it atomically.

    >>> import driven_atom as da
    >>> callable(da.plot_campaign)
    True
    """
    from driven_atom.campaign.summary import open_campaign
    from driven_atom.plotting import _save, figure_format

    if path is not None:
        figure_format(path, name)
    ds = source if hasattr(source, "data_vars") else open_campaign(Path(source))
    fig, _ = campaign_figure(ds)
    if path is not None:
        _save(fig, path, name)
    return fig

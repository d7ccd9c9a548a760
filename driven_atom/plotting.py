"""Figures on :class:`matplotlib.figure.Figure` objects (never pyplot, never the global backend, so a
notebook keeps its own). Each function writes one file, atomically (:mod:`driven_atom.io`).

Time in fs and photon energy in eV on the axes; fields and spectral power in atomic units.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from driven_atom.errors import InputError


def _figure(**kwargs):
    """A new Figure not registered with pyplot (no backend switch, nothing to close)."""
    from matplotlib.figure import Figure

    return Figure(**kwargs)


FIGURE_FORMATS = ("png", "pdf", "svg")


def figure_format(path, name: str = "--plot") -> str:
    """The file format of a figure path (its suffix), or an InputError naming the argument ``name``.

    >>> figure_format("a/b.PNG")
    'png'
    """
    suffix = Path(path).suffix.lstrip(".").lower()
    if suffix not in FIGURE_FORMATS:
        raise InputError(f"`{name}` file must end in .png, .pdf or .svg, got {str(path)!r}")
    return suffix


def _save(fig, path, name: str = "--plot") -> Path:
    """Save ``fig`` to ``path`` atomically (:func:`driven_atom.io.atomic_write`: never a half file);
    a bad suffix names the command-line argument ``name`` that gave the path."""
    from driven_atom.io import StorageError, atomic_write

    path = Path(path)
    suffix = figure_format(path, name)
    try:
        with atomic_write(path) as tmp:
            fig.savefig(tmp, format=suffix, dpi=120)
    except StorageError:
        raise
    except OSError as exc:
        raise InputError(f"`{name}` could not write {str(path)!r}: {exc.strerror or exc}") from None
    return path


def pulse_figure(pulse, path, *, samples: int = 4000) -> Path:
    """Draw E(t) (each Cartesian component that is not zero) and |Ẽ(ω)|² (log scale, per
    component) of a :class:`driven_atom.pulse.Pulse` into ``path`` (.png, .pdf or .svg).

    >>> import tempfile, os
    >>> from driven_atom.pulse import Pulse
    >>> p = Pulse({"wavelength": "800 nm", "peak_field": 0.05, "cycles": 3})
    >>> with tempfile.TemporaryDirectory() as d:
    ...     out = pulse_figure(p, os.path.join(d, "p.png"), samples=300)
    ...     out.stat().st_size > 0
    True
    """
    from driven_atom.units import AU_TIME_S, HARTREE_EV

    t = np.linspace(pulse.t_start, pulse.t_end, samples)
    long = any(c.is_long for c in pulse.components)
    # many cycles: the carrier cannot be drawn, show the field envelope |ℰ(t)| instead
    field = np.abs(sum(c.complex_envelope(t) for c in pulse.components)) if long else pulse.electric_field(t)
    axes_used = [j for j in range(3) if np.any(field[:, j] != 0)] or [2]
    omega = _spectrum_axis(pulse)
    fig = _figure(figsize=(7, 6), layout="constrained")
    ax_t, ax_w = fig.subplots(2, 1)
    span_fs = (pulse.t_end - pulse.t_start) * AU_TIME_S * 1e15
    unit, per_fs = next((u, f) for u, f in (("ns", 1e-6), ("ps", 1e-3), ("fs", 1.0)) if span_fs * f >= 1 or u == "fs")
    # long pulses: photon energy as an offset from the first carrier, in µeV
    ref = pulse.components[0].omega if long else 0.0
    x_w = (omega - ref) * HARTREE_EV * (1e6 if long else 1.0)
    for j in axes_used:
        name = "xyz"[j]
        ax_t.plot(t * AU_TIME_S * 1e15 * per_fs, field[:, j], lw=0.8,
                  label=f"|ℰ_{name}| (envelope)" if long else f"E_{name}")
        power = np.abs(pulse.field_spectrum(omega, axis=name)) ** 2
        ax_w.semilogy(x_w, np.maximum(power, power.max() * 1e-12), lw=0.8, label=f"|E_{name}(ω)|²")
    ax_t.set_xlabel(f"time [{unit}]")
    ax_t.set_ylabel("field [au]")
    ax_t.legend(loc="best")
    ax_w.set_xlabel(f"photon energy − {ref * HARTREE_EV:.6f} eV [µeV]" if long else "photon energy [eV]")
    ax_w.set_ylabel("spectral power [au]")
    ax_w.legend(loc="upper right")
    return _save(fig, path)


def _spectrum_axis(pulse, points: int = 600) -> np.ndarray:
    """Photon energies (a.u.) to draw: 0 to 2.5× the highest carrier, or for long pulses a band
    of ±3 spectral widths (2π/FWHM) plus the chirp sweep around each carrier."""
    if not any(c.is_long for c in pulse.components):
        top = max(c.omega + abs(c.chirp) * c.length / 2 for c in pulse.components)
        top = top if top > 0 else 40 * np.pi / (pulse.t_end - pulse.t_start)
        return np.linspace(0.0, 2.5 * top, points + 1)[1:]
    bands = []
    for c in pulse.components:
        half = 3 * 2 * np.pi / (c.fwhm or c.length) + abs(c.chirp) * c.length / 2
        bands.append((max(c.omega - half, 0.0), c.omega + half))
    return np.linspace(min(b[0] for b in bands), max(b[1] for b in bands), points)


# ---------------------------------------------------------------- stored results (``driven-atom plot``)

def _spans_decades(arrays, decades: float = 3.0) -> bool:
    """True when the positive finite values of ``arrays`` span more than ``decades`` powers of ten.

    >>> _spans_decades([np.array([1.0, 0.5]), np.array([0.0, 2e-4])])
    True
    >>> _spans_decades([np.array([1.0, 0.0, 0.01])])
    False
    """
    values = np.concatenate([np.ravel(np.asarray(a, dtype=float)) for a in arrays] or [np.zeros(0)])
    values = values[np.isfinite(values) & (values > 0)]
    return bool(values.size > 0 and values.max() > values.min() * 10.0 ** decades)


def _is_level(label: str) -> bool:
    """True for a level label without an m suffix ("2p"); False for "2p0", "2p-1" or a label
    that is not a state."""
    from driven_atom.atom import parse_state

    try:
        return parse_state(label).m is None
    except InputError:
        return False


def _levels_only(populations: dict) -> dict:
    """The entries of the levels (labels without m); all entries if there is no level label.
    With fine or hyperfine components, the finest whole components ("2p3/2", or "1s1/2 F=1")."""
    from driven_atom.atom.components import Component, parse_label

    components = {}
    for k in populations:
        try:
            item = parse_label(k)
        except InputError:
            continue
        if isinstance(item, Component) and item.m2 is None:
            components[k] = item
    if components:
        refined = {c.fine for c in components.values() if c.F2 is not None}
        return {k: populations[k] for k, c in components.items() if c not in refined}
    levels = {k: v for k, v in populations.items() if _is_level(k)}
    return levels or dict(populations)


def _has_history(result) -> bool:
    times = np.asarray(result.times)
    return times.size > 0 and (bool(result.history_populations) or "ionization" in result.series)


# spectra drawn by result_figure and the arrays each needs (as the routes store them)
_SPECTRUM_ARRAYS = {"photoelectron": ("energy", "dP_dE"), "harmonic": ("omega", "power")}


def result_panels(result) -> list[str]:
    """Names of the panels :func:`result_figure` draws for ``result``, top to bottom:
    "populations" (histories against time) or, with no history samples, "final_populations";
    then "photoelectron" and "harmonic" when the result holds those spectra."""
    where = result.metadata.get("file")
    what = f"result {str(where)!r}" if where else "result"
    panels = []
    if _has_history(result):
        n = np.asarray(result.times).size
        curves = {**result.history_populations, **{k: v for k, v in result.series.items() if k == "ionization"}}
        bad = [k for k, v in curves.items() if np.asarray(v).shape != (n,)]
        if bad:
            raise InputError(f"{what}: history {bad[0]!r} does not have one value per sample time ({n})")
        panels.append("populations")
    elif result.populations:
        panels.append("final_populations")
    for name, needed in _SPECTRUM_ARRAYS.items():
        if name in result.spectra:
            missing = [k for k in needed if k not in result.spectra[name]]
            if missing:
                raise InputError(f"{what}: spectrum {name!r} lacks the array {missing[0]!r} "
                                 f"(has {', '.join(sorted(result.spectra[name])) or 'none'})")
            panels.append(name)
    if not panels:
        raise InputError(f"{what} holds no populations, history samples or spectra to draw")
    return panels


def _carrier_omega(result) -> float | None:
    """Carrier frequency (a.u.) of the first pulse, from the result's metadata (``carriers_au``),
    or None when there is none (no pulse, or a static field)."""
    carriers = result.metadata.get("carriers_au") or []
    return float(carriers[0]) if carriers and carriers[0] > 0 else None


def _draw_histories(ax, result) -> None:
    from driven_atom.units import AU_TIME_S

    t_fs = np.asarray(result.times, dtype=float) * AU_TIME_S * 1e15
    curves = _levels_only(result.history_populations)
    if "ionization" in result.series:
        curves["ionization"] = result.series["ionization"]
    style = {"marker": "o", "ms": 3} if t_fs.size <= 20 else {}
    for label, values in curves.items():
        ax.plot(t_fs, np.asarray(values, dtype=float), lw=1.0, ls="--" if label == "ionization" else "-",
                label=label, **style)
    if _spans_decades(curves.values()):
        ax.set_yscale("log")
        top = max(float(np.nanmax(np.asarray(v, dtype=float), initial=0.0)) for v in curves.values())
        low, high = ax.get_ylim()
        ax.set_ylim(max(low, top * 1e-12), high)     # early near-zero values would squash the rest
    ax.set_xlabel("time [fs]")
    ax.set_ylabel("population")
    ax.legend(loc="center left", bbox_to_anchor=(1.01, 0.5), fontsize="small", ncol=2 if len(curves) > 12 else 1)


def _draw_final(ax, result) -> None:
    levels = _levels_only(result.populations)
    labels = list(levels)
    ax.bar(range(len(labels)), [levels[k] for k in labels])
    ax.set_xticks(range(len(labels)), labels)
    if _spans_decades([np.array(list(levels.values()))]):
        ax.set_yscale("log")
    ax.set_xlabel("state (no history samples stored: final populations)")
    ax.set_ylabel("population")


def _positive_floor(values: np.ndarray, decades: float) -> np.ndarray:
    """``values`` with everything below max·10^−decades raised to that floor (for a log axis)."""
    top = np.nanmax(values) if values.size else 0.0
    return np.maximum(values, top * 10.0 ** -decades) if top > 0 else values


def _draw_photoelectron(ax, spectrum) -> None:
    from driven_atom.units import HARTREE_EV

    energy = np.asarray(spectrum["energy"], dtype=float) * HARTREE_EV
    density = np.asarray(spectrum["dP_dE"], dtype=float)
    ax.plot(energy, _positive_floor(density, 12), lw=0.9)
    if np.nanmax(density, initial=0.0) > 0:
        ax.set_yscale("log")
    ax.set_xlabel("photoelectron energy [eV]")
    ax.set_ylabel("dP/dE [1/hartree]")


def _draw_harmonic(ax, spectrum, omega0) -> None:
    """Harmonic power against harmonic order ω/ω₀ (or photon energy in eV without a carrier),
    cut where the power last exceeds 10⁻¹² of its maximum."""
    from driven_atom.units import HARTREE_EV

    omega = np.asarray(spectrum["omega"], dtype=float)
    power = np.asarray(spectrum["power"], dtype=float)
    x = omega / omega0 if omega0 else omega * HARTREE_EV
    ax.plot(x, _positive_floor(power, 14), lw=0.8)
    top = np.nanmax(power, initial=0.0)
    if top > 0:
        ax.set_yscale("log")
        above = np.nonzero(power > top * 1e-12)[0]
        if above.size and above[-1] + 1 < x.size:
            ax.set_xlim(x[0], x[above[-1] + 1])
    ax.set_xlabel("harmonic order ω/ω₀ (pulse 0 carrier)" if omega0 else "photon energy [eV]")
    ax.set_ylabel("harmonic power [au]")


def result_figure(result, path, *, name: str = "--out") -> Path:
    """Draw a stored :class:`driven_atom.result.Result` into ``path`` (.png, .pdf or .svg), one panel per
    entry of :func:`result_panels`:

    * populations: level populations (labels without m) and the ``ionization`` series against
      time in fs, log y (down to 10⁻¹² of the largest value) when they span more than 3 decades;
      without history samples, the final level populations as bars;
    * photoelectron: dP/dE (per hartree, log y) against electron energy in eV;
    * harmonic: harmonic power (a.u., log y) against harmonic order ω/ω₀ of the first pulse.

    The title gives the route, the ionisation and the norm. Errors name the argument ``name``.

    >>> import tempfile, os
    >>> from driven_atom.result import Result
    >>> r = Result(route="levels", populations={"1s": 0.9, "2p": 0.1}, ionization=0.0, norm=1.0)
    >>> with tempfile.TemporaryDirectory() as d:
    ...     result_figure(r, os.path.join(d, "r.svg")).stat().st_size > 0
    True
    """
    figure_format(path, name)
    panels = result_panels(result)
    fig = _figure(figsize=(7, 3.0 * len(panels) + 0.6), layout="constrained")
    axes = fig.subplots(len(panels), 1, squeeze=False)
    for ax, panel in zip(axes[:, 0], panels):
        if panel == "populations":
            _draw_histories(ax, result)
        elif panel == "final_populations":
            _draw_final(ax, result)
        elif panel == "photoelectron":
            _draw_photoelectron(ax, result.spectra["photoelectron"])
        else:
            _draw_harmonic(ax, result.spectra["harmonic"], _carrier_omega(result))
    title = f"{result.route} route: ionization {result.ionization:.4g}, norm {result.norm:.6f}"
    if result.metadata.get("file"):
        title += f"\n{Path(result.metadata['file']).name}"
    fig.suptitle(title, fontsize="medium")
    return _save(fig, path, name)


def yield_figure(estimate: dict, path) -> Path:
    """The yield of a lab estimate (:func:`driven_atom.lab.estimate` with ``curve=True``) against the
    pulse energy, log–log: ions (and excited atoms) per shot — or the single-atom probability when
    no gas is given — with the local slopes at both ends, the saturation energy and the operating
    point, into ``path`` (.png, .pdf or .svg).

    >>> import tempfile, os
    >>> from driven_atom.lab import estimate
    >>> out = estimate(species="H", wavelength="121.5684 nm", pulse_energy="10 uJ", fwhm="2 ns", waist="100 um",
    ...                density="1e10 cm^-3", length="5 mm", temperature="0 K", curve=True)
    >>> with tempfile.TemporaryDirectory() as d:
    ...     yield_figure(out, os.path.join(d, "y.png")).stat().st_size > 0
    True
    """
    curve = estimate.get("curve")
    if not curve:
        raise InputError("yield_figure needs an estimate made with curve=True")
    per_shot = curve["per_shot"]
    energy = curve["pulse_energy_J"]
    x = np.asarray(energy if energy is not None else curve["scale"], dtype=float)
    y = np.asarray(curve["ions"], dtype=float)
    x0 = estimate.get("pulse_energy_J") or 1.0
    y0 = estimate.get("ions_per_shot") if per_shot else estimate.get("probability_peak")
    fig = _figure(figsize=(6.5, 4.8), layout="constrained")
    ax = fig.subplots()
    what = "ions per shot" if per_shot else "ionisation at the focus centre"
    ax.loglog(x, np.where(y > 0, y, np.nan), color="C0", label=what)
    if curve.get("excited"):
        exc = np.asarray(curve["excited"], dtype=float)
        ax.loglog(x, np.where(exc > 0, exc, np.nan), color="C1", ls="--",
                  label="excited atoms per shot" if per_shot else "excited after the pulse")
    good = (y > 0) & np.isfinite(y)
    lx, ly = np.log(x[good]), np.log(y[good])
    if lx.size > 6:
        for i, where in ((slice(0, 4), "low"), (slice(-4, None), "high")):
            slope = float(np.polyfit(lx[i], ly[i], 1)[0])
            xm, ym = float(np.exp(lx[i].mean())), float(np.exp(ly[i].mean()))
            ax.annotate(f"slope {slope:.2f}", (xm, ym), textcoords="offset points",
                        xytext=(0, 10 if where == "low" else -16), ha="center", fontsize=9)
    if curve.get("saturation_scale"):
        ax.axvline(x0 * curve["saturation_scale"], color="0.5", lw=0.8, ls=":")
        ax.annotate("saturation (P = 1 - 1/e at the centre)", (x0 * curve["saturation_scale"], np.nanmin(y[good])),
                    rotation=90, fontsize=8, color="0.4", va="bottom", ha="right")
    if y0:
        ax.plot([x0], [y0], "o", color="C3", label="operating point")
    ax.set_xlabel("pulse energy [J]" if energy is not None else "intensity / peak intensity")
    ax.set_ylabel(what)
    inputs = estimate.get("inputs", {})
    title = f"{estimate.get('species', '')} {estimate.get('state', '')}"
    if "wavelength_nm" in inputs:
        title += f" at {inputs['wavelength_nm']:.5g} nm"
    ax.set_title(f"{title}: {estimate.get('regime', '')}", fontsize=10)
    ax.legend(fontsize=8)
    ax.grid(True, which="both", alpha=0.3)
    return _save(fig, path)

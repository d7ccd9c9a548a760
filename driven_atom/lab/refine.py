"""The estimate refined by the time-dependent routes: a campaign's collected yields in place of the
formulas (``--table``), or one short run at the peak intensity (``--check``).

* :func:`table_model`: the ``ionization`` (and the upper level's ``population``) of a collected
  campaign (:func:`driven_atom.campaign.summary.open_campaign`) against its intensity axis (and its
  wavelength axis when scanned: linear interpolation to the laser's), as the single-atom
  probability P(s) that the focal average then uses; below the scanned intensities P follows the
  power law of the two lowest points, above them it is held (a warning says so).
* :func:`check`: the route the regime calls for — ``levels`` (Bloch equations' master-equation
  twin, with ``ionization_loss``) for resonant pulses longer than ``LEVELS_ABOVE``, ``basis`` for
  weak fields (one-photon, perturbative, resonant short pulses), ``grid`` for strong fields — run
  on one atom at rest at the peak intensity. Pulses too long for the basis and grid routes are
  replaced by a Gaussian of ``SHORT_CYCLES`` optical cycles (FWHM) at the same peak intensity (the
  basis route's box must hold the photoelectron during the pulse, 2R > v·T: shorter still when that
  box would pass BOX_CAP), and the estimate is recomputed for exactly that pulse: the two numbers
  printed describe one case.
"""
from __future__ import annotations

import dataclasses
import math
import time

import numpy as np

from driven_atom.errors import InputError

LEVELS_ABOVE = 100e-12          # resonant pulses longer than this (s FWHM) are checked on the levels route
SHORT_CYCLES = 20               # the check's replacement pulse: this many cycles FWHM
MAX_SHORT_FWHM = 2e-12          # basis/grid checks run pulses up to this FWHM (s)
BOX_CAP = 600.0                 # largest basis-route box of a check (bohr × Zμ) ...
MIN_CYCLES = 4                  # ... the pulse is shortened to fit it, to no fewer cycles (FWHM)


# -- --table ----------------------------------------------------------------------------------------------
def _axis(ds, names):
    """(coordinate name, key path) of the scan axis whose key path ends in one of ``names``."""
    for name in ds.coords:
        path = ds[name].attrs.get("key_path", "")
        if path.split(".")[-1] in names:
            return name, path
    return None, None


def _converted(ds, name: str, kind: str) -> np.ndarray:
    """A scan coordinate in atomic units of ``kind`` (its ``units`` attribute)."""
    from driven_atom.units import to_au

    units = ds[name].attrs.get("units", "au")
    values = np.asarray(ds[name].values, dtype=float)
    if units in ("", "au", "a.u."):
        return values
    return np.array([to_au(f"{float(v)!r} {units}", kind, name=name) for v in values])


def table_model(case, model, folder):
    """The model whose P(s) comes from the campaign in ``folder`` (module docstring)."""
    from driven_atom.campaign.summary import open_campaign
    from driven_atom.lab.focus import ProbabilityTable
    from driven_atom.lab.physics import Model
    from driven_atom.units import ALPHA, AU_INTENSITY_WM2, HARTREE_EV

    ds = open_campaign(folder)
    name, path = _axis(ds, ("intensity", "peak_field"))
    if name is None:
        raise InputError(f"`--table` {str(folder)!r}: the campaign scans no pulse intensity (scan "
                         f"`pulse.0.intensity`)")
    values = _converted(ds, name, "intensity" if path.endswith("intensity") else "field")
    intensity = values if path.endswith("intensity") else values**2          # W/m² below
    intensity = intensity * AU_INTENSITY_WM2
    dim_i = ds[name].dims[0]
    ionization = ds["ionization"]
    population = ds["population"] if "population" in ds else None
    notes, warnings = [f"single-atom yields from the campaign {str(folder)!r} (axis {path})"], []
    wname, wpath = _axis(ds, ("wavelength", "photon_energy"))
    if wname is not None:
        kind = "length" if wpath.endswith("wavelength") else "energy"
        w = _converted(ds, wname, kind)
        omega = 2 * math.pi / (w * ALPHA) if kind == "length" else w
        dim_w = ds[wname].dims[0]
        order = np.argsort(omega)
        if not omega[order][0] <= case.photon_energy <= omega[order][-1]:
            raise InputError(f"`--table`: the campaign covers photon energies {omega.min() * HARTREE_EV:.6g} to "
                             f"{omega.max() * HARTREE_EV:.6g} eV; the laser is at {case.photon_energy * HARTREE_EV:.6g} eV")
        ionization = _interpolate(ionization, dim_w, omega[order], order, case.photon_energy)
        population = (_interpolate(population, dim_w, omega[order], order, case.photon_energy)
                      if population is not None else None)
        notes.append(f"interpolated to the laser's photon energy along {wpath}")
    extra = [d for d in ionization.dims if d not in (dim_i,) and ionization.sizes[d] > 1]
    if extra:
        raise InputError(f"`--table`: the campaign also scans {', '.join(extra)}; the estimate takes intensity "
                         f"and wavelength axes only")
    ionization = ionization.squeeze()
    order = np.argsort(intensity)
    s = intensity[order] / case.peak_intensity
    p_ion = np.asarray(ionization.values, dtype=float).reshape(-1)[order]
    keep = np.isfinite(p_ion)
    if keep.sum() < 2:
        raise InputError(f"`--table` {str(folder)!r}: fewer than two finished jobs (run `driven-atom scan` "
                         f"to the end and `driven-atom collect`)")
    excitation = None
    upper = (model.resonance or {}).get("upper")
    if population is not None and upper:
        from driven_atom.atom import parse_state

        level = parse_state(upper.split("/")[0]).level.label
        if level in list(population["state"].values):
            p_exc = np.asarray(population.sel(state=level).squeeze().values, dtype=float).reshape(-1)[order]
            excitation = ProbabilityTable(s[keep], p_exc[keep])
    if s[keep][-1] < 1:
        warnings.append(f"the campaign ends at {intensity.max() * 1e-4:.3g} W/cm^2, below the peak intensity: "
                        f"the yield is held at its last value above it")
    if s[keep][0] > 1e-3:
        notes.append("below the campaign's lowest intensity the yield follows the power law of its two lowest points")
    table = ProbabilityTable(s[keep], p_ion[keep])
    return Model(model.regime, f"campaign table: time-dependent yields interpolated in intensity (the "
                 f"formulas' regime: {model.method})", model.why,
                 "as the campaign's runs (their convergence); the focal average is the estimate's",
                 model.photons, table, excitation, resonance=model.resonance, notes=model.notes + notes,
                 warnings=model.warnings + warnings)


def _interpolate(array, dim: str, omega_sorted, order, omega: float):
    """``array`` linearly interpolated along ``dim`` (ordered by ``order``) to ``omega``."""
    values = array.isel({dim: order})
    i = int(np.clip(np.searchsorted(omega_sorted, omega), 1, len(omega_sorted) - 1))
    a, b = omega_sorted[i - 1], omega_sorted[i]
    f = 0.0 if b == a else (omega - a) / (b - a)
    return values.isel({dim: i - 1}) * (1 - f) + values.isel({dim: i}) * f


# -- --check ------------------------------------------------------------------------------------------------
def _pulse_table(case, envelope_fwhm_s: float, polarization: str) -> dict:
    from driven_atom.units import photon_energy_to_wavelength_nm

    pol = {"linear": "z", "circular+": "circular+", "circular-": "circular-"}[polarization]
    return {"envelope": "gaussian", "wavelength": f"{photon_energy_to_wavelength_nm(case.photon_energy)!r} nm",
            "intensity": f"{case.peak_intensity * 1e-4!r} W/cm^2", "fwhm": f"{envelope_fwhm_s!r} s",
            "polarization": pol}


def _route(case, model) -> str:
    """The route the regime calls for (module docstring)."""
    if model.regime == "resonant" and case.envelope.fwhm > LEVELS_ABOVE:
        return "levels"
    if model.regime in ("tunnelling", "above the barrier") or (model.regime == "multiphoton" and "PPT" in model.method):
        return "grid"
    return "basis"


def _basis_box(case, model, fwhm: float) -> tuple[float, float]:
    """(box radius, FWHM) for a basis-route check: the box holds the photoelectron over the pulse
    (a reflection must not come back before the pulse ends: R > k v_window/4 with margin), the pulse
    shortened (to no less than MIN_CYCLES) when that box would pass BOX_CAP."""
    from driven_atom.lab.physics import binding_energy
    from driven_atom.pulse import gaussian_window
    from driven_atom.units import AU_TIME_S

    scale = case.atom.Z * case.atom.reduced_mass
    ip = binding_energy(case.atom, case.state)
    energy = max((model.photons or 1) * case.photon_energy - ip, 0.05 * scale**2)
    k = math.sqrt(2 * case.atom.reduced_mass * energy)
    period = 2 * math.pi / case.photon_energy * AU_TIME_S

    def radius(width):
        return 1.5 * k * gaussian_window(width / AU_TIME_S) / 4 + 40.0 / scale

    if radius(fwhm) > BOX_CAP / scale:
        fwhm = max((BOX_CAP / scale - 40.0 / scale) * 4 / (1.5 * k) / (gaussian_window(1.0)) * AU_TIME_S,
                   MIN_CYCLES * period)
    return max(radius(fwhm), 100.0 / scale), fwhm


def _settings(case, model, route: str, box: float | None):
    """The ``[solver]`` model of the check's route."""
    from driven_atom.settings import BasisSettings, GridSettings, LevelsSettings
    from driven_atom.units import AU_TIME_S

    if route == "levels":
        res = model.resonance
        lower = case.state.level.label
        uppers = sorted({u.rstrip("-0123456789") for u in res["upper"].split("/")})
        return LevelsSettings(states=[lower, *uppers], rwa=True, decay=True, ionization_loss=True,
                              dephasing=res["photons"] ** 2 * math.pi * case.linewidth * AU_TIME_S)
    if route == "grid":
        return GridSettings()
    from driven_atom.lab.physics import binding_energy

    scale = case.atom.Z * case.atom.reduced_mass
    photons = model.photons or 1
    e_max = max(1.0 * scale**2, photons * case.photon_energy - binding_energy(case.atom, case.state) + 1.0 * scale**2)
    dr = min(0.25, 0.5 / math.sqrt(2 * e_max)) / scale
    return BasisSettings(r_max=box, dr=dr, dr_min=min(0.08 / scale, dr / 2), l_max=min(photons + 2, 10),
                         e_max=e_max, cache_dir=None)


def check(case, model) -> dict:
    """One run of the route the regime calls for on an atom at rest, against the estimate for the
    same pulse (module docstring)."""
    from driven_atom.atom import State
    from driven_atom.config import OutputConfig
    from driven_atom.lab.physics import choose_model
    from driven_atom.lab.temporal import Envelope
    from driven_atom.pulse import Pulse
    from driven_atom.routes import propagate
    from driven_atom.units import photon_energy_to_wavelength_nm

    if case.static is not None:
        raise InputError("`--check` takes a laser pulse; this configuration's pulse is a static field "
                         "(run it with `driven-atom run`)")
    route = _route(case, model)
    if route == "levels" and case.atom.model is not None and (model.resonance or {}).get("line", "").endswith("/2"):
        raise InputError(f"`--check`: the {case.atom.model.name} line {model.resonance['line']} is one fine-structure "
                         f"component, which the levels route does not resolve for a model atom (its levels are "
                         f"the j-centroids); no check is run")
    fwhm = case.envelope.fwhm
    period = photon_energy_to_wavelength_nm(case.photon_energy) * 1e-9 / 299792458.0
    if route != "levels" and fwhm > MAX_SHORT_FWHM:
        fwhm = SHORT_CYCLES * period
    box = None
    if route == "basis":
        box, fwhm = _basis_box(case, model, fwhm)
    note = ("atoms at rest" if fwhm == case.envelope.fwhm else
            f"a {fwhm / period:.3g}-cycle Gaussian pulse at the same peak intensity, atoms at rest")
    settings = _settings(case, model, route, box)
    same = dataclasses.replace(case, envelope=Envelope("gaussian", fwhm), doppler_fwhm=0.0)
    reference = choose_model(same)
    pulse = Pulse(_pulse_table(case, fwhm, case.polarization), atom=case.atom)
    started = time.perf_counter()
    result = propagate(case.atom, pulse, settings, initial=[(State(case.state.n, case.state.l, case.state.m), 1.0)],
                       output=OutputConfig())
    seconds = time.perf_counter() - started
    estimate_p = float(np.asarray(reference.ionization(np.array([1.0])))[0])
    out = {"route": route, "pulse": f"gaussian {fwhm:.4g} s FWHM, {note}", "seconds": seconds,
           "estimate": {"probability": estimate_p}, "run": {"probability": result.ionization},
           "warnings": list(result.warnings)}
    text = f"ionised {estimate_p:.4g} (estimate) vs {result.ionization:.4g} ({route} route)"
    upper = (reference.resonance or {}).get("upper")
    if upper and reference.excitation is not None:
        from driven_atom.atom import parse_state

        level = parse_state(upper.split("/")[0]).level.label
        exc = float(np.asarray(reference.excitation(np.array([1.0])))[0])
        out["estimate"]["excitation"] = exc
        out["run"]["excitation"] = result.populations.get(level)
        text += f"; excited {exc:.4g} vs {result.populations.get(level, float('nan')):.4g}"
    if route == "levels" and reference.resonance is not None:
        out["note"] = ("the levels route ionises each level with its m-averaged cross section; the estimate "
                       "uses the sublevel's for the light's polarisation")
    out["comparison"] = text
    return out

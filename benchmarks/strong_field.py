"""Time to a converged ATI spectrum and yield at 800 nm, 1e14 W/cm², 4 cycles (sin²), hydrogen 1s,
measured in one run on this machine; prints one JSON object.

Two ways to the same numbers:

* (a) ``length_window`` — length gauge, the box sized to hold every electron until the end
  (the grid defaults with ``photoelectron_methods = ["window"]``), window-operator spectrum;
* (b) ``velocity_flux`` — velocity gauge, a small absorbing box around the flux sphere at
  ``R`` = 60 bohr (t-SURFF), the run continued until electrons of 0.5 eV have crossed it.

Both at their default l_max, dr and dt. The machine is shared, so the two runs alternate (a, b, a,
b, ...) and the medians are reported: ``wall_s`` of each, ``speedup`` = median(a)/median(b) (the
goal is ≥ 5). Convergence of each, in one more run with l_max × 1.5 (``yield_change``, and
``spectrum_change``: the largest relative change of dP/dE over the ATI peaks between 2 and 20 eV).
Between the two methods: the yields (``yield_ratio``), the ATI peak positions (``peak_shift_eV``
at most, over the peaks from 2 to 20 eV; peaks are ħω = 1.55 eV apart) and the relative peak
heights (``peak_height_ratio_spread``: the largest |h_b/h_a / median − 1|).

Run: ``OMP_NUM_THREADS=1 python benchmarks/strong_field.py [repeats]`` (default 2; each repeat
takes a few minutes).
"""
from __future__ import annotations

import json
import statistics
import sys
import time

import numpy as np

from driven_atom.atom import Atom, State
from driven_atom.config import OutputConfig
from driven_atom.pulse import Pulse
from driven_atom.routes import propagate
from driven_atom.routes.grid import grid_parameters
from driven_atom.settings import GridSettings
from driven_atom.units import HARTREE_EV

PULSE = Pulse({"envelope": "sin2", "wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 4})
SPECTRUM = {"photoelectron_e_max": 60 / HARTREE_EV, "photoelectron_points": 400}
CASES = {
    "length_window": GridSettings(photoelectron_methods=["window"], **SPECTRUM),
    "velocity_flux": GridSettings(gauge="velocity", photoelectron_methods=["surface_flux"], surface_radius=60.0,
                                  photoelectron_e_min=0.5 / HARTREE_EV, **SPECTRUM),
}
ATOM = Atom(1)
OMEGA_EV = PULSE.components[0].omega * HARTREE_EV


def run(settings):
    t0 = time.perf_counter()
    res = propagate(ATOM, PULSE, settings, initial=[(State(1, 0), 1.0 + 0j)], output=OutputConfig(every=200.0))
    return res, time.perf_counter() - t0


def ati_peaks(res, low=2.0, high=20.0):
    """(energies, heights) of the local maxima of dP/dE between ``low`` and ``high`` eV, one per
    photon order (the largest within each ħω-wide bin)."""
    s = res.spectra["photoelectrons"]
    e, d = s["energy_eV"], s["dP_dE"]
    peaks = []
    for start in np.arange(low, high, OMEGA_EV):
        band = np.nonzero((e >= start) & (e < start + OMEGA_EV))[0]
        if band.size:
            i = band[np.argmax(d[band])]
            peaks.append((e[i], d[i]))
    return np.array(peaks)


def spectrum_change(a, b, low=2.0, high=20.0):
    pa, pb = ati_peaks(a, low, high), ati_peaks(b, low, high)
    n = min(len(pa), len(pb))
    return float(np.max(abs(pb[:n, 1] / pa[:n, 1] - 1))) if n else float("nan")


def main(repeats: int = 2) -> dict:
    walls = {name: [] for name in CASES}
    results = {}
    for _ in range(repeats):                           # paired: a, b, a, b, ...
        for name, settings in CASES.items():
            res, wall = run(settings)
            walls[name].append(wall)
            results[name] = res
    out = {"pulse": "800 nm, 1e14 W/cm^2, 4 cycles sin2, H 1s", "repeats": repeats}
    for name, settings in CASES.items():
        res = results[name]
        par = grid_parameters(ATOM, PULSE, settings)
        finer, _ = run(settings.model_copy(update={"l_max": int(1.5 * par.l_max)}))
        out[name] = {"l_max": par.l_max, "r_max": round(par.r_max, 1), "dr": par.dr, "dt": par.dt,
                     "steps": par.n_steps, "wall_s": round(statistics.median(walls[name]), 2),
                     "walls_s": [round(w, 2) for w in walls[name]], "yield": res.ionization,
                     "yield_change": abs(finer.ionization / res.ionization - 1),
                     "spectrum_change": spectrum_change(res, finer),
                     "trustworthy": res.quality["trustworthy"]}
    a, b = results["length_window"], results["velocity_flux"]
    pa, pb = ati_peaks(a), ati_peaks(b)
    n = min(len(pa), len(pb))
    ratio = pb[:n, 1] / pa[:n, 1]
    out["speedup"] = round(out["length_window"]["wall_s"] / out["velocity_flux"]["wall_s"], 2)
    out["yield_ratio"] = b.ionization / a.ionization
    out["peak_shift_eV"] = float(np.max(abs(pb[:n, 0] - pa[:n, 0])))
    out["peak_height_ratio_spread"] = float(np.max(abs(ratio / np.median(ratio) - 1)))
    return out


if __name__ == "__main__":
    print(json.dumps(main(int(sys.argv[1]) if len(sys.argv) > 1 else 2), indent=1))

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
``spectrum_change``: the largest relative change of the per-order yields, the spectrum's
probability in bins one photon wide centred on nħω − Iₚ − Uₚ from 2 to 20 eV). Between the two
methods: the yields (``yield_ratio``), the per-order yields (``order_yield_ratios`` b/a, and
``order_yield_ratio_spread``: the largest |ratio/median − 1|, the relative heights) and the peak
positions (``peak_shift_eV``: the largest difference of the maxima within half a photon of each
centre; the peaks of a 4-cycle pulse are broad and shallow).

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


def order_yields(res, low=2.0, high=20.0):
    """The spectrum's probability in bins one photon wide centred on the ATI peaks
    nħω − Iₚ − Uₚ between ``low`` and ``high`` eV (robust where the peaks of a few-cycle pulse are
    broad and shallow): (centres, probabilities)."""
    c = PULSE.components[0]
    up_ev = c.peak_field**2 / (4 * c.omega**2) * HARTREE_EV
    s = res.spectra["photoelectrons"]
    e, d = s["energy_eV"], s["dP_dE"]
    centres = np.arange(1, 200) * OMEGA_EV - 0.5 * HARTREE_EV - up_ev
    centres = centres[(centres >= low) & (centres <= high)]
    probs = []
    for x in centres:
        band = (e >= x - OMEGA_EV / 2) & (e < x + OMEGA_EV / 2)
        probs.append(np.trapezoid(d[band], e[band]))
    return centres, np.array(probs)


def peak_positions(res, centres):
    """The energy of the largest dP/dE within half a photon of each centre."""
    s = res.spectra["photoelectrons"]
    e, d = s["energy_eV"], s["dP_dE"]
    out = []
    for x in centres:
        band = np.nonzero(abs(e - x) < OMEGA_EV / 2)[0]
        out.append(e[band[np.argmax(d[band])]])
    return np.array(out)


def spectrum_change(a, b):
    """The largest relative difference of the per-order yields (:func:`order_yields`)."""
    _, pa = order_yields(a)
    _, pb = order_yields(b)
    return float(np.max(abs(pb / pa - 1)))


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
    centres, pa = order_yields(a)
    _, pb = order_yields(b)
    ratio = pb / pa
    out["speedup"] = round(out["length_window"]["wall_s"] / out["velocity_flux"]["wall_s"], 2)
    out["yield_ratio"] = b.ionization / a.ionization
    out["order_yield_ratios"] = [round(float(x), 4) for x in ratio]
    out["order_yield_ratio_spread"] = float(np.max(abs(ratio / np.median(ratio) - 1)))
    out["peak_shift_eV"] = float(np.max(abs(peak_positions(b, centres) - peak_positions(a, centres))))
    return out


if __name__ == "__main__":
    print(json.dumps(main(int(sys.argv[1]) if len(sys.argv) > 1 else 2), indent=1))

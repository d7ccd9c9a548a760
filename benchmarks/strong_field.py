"""Time to a 1 %-converged ATI spectrum and yield at 800 nm, 1e14 W/cm², 4 cycles (sin²),
hydrogen 1s, measured in one run on this machine; prints one JSON object.

Two ways to the same numbers:

* (a) ``length_window`` — length gauge, the box sized to hold every electron until the end
  (the grid defaults with ``photoelectron_methods = ["window"]``), window-operator spectrum;
* (b) ``velocity_flux`` — velocity gauge, a small absorbing box around the flux sphere at its
  default radius (5 quiver radii + 20 bohr = 102 bohr here; t-SURFF), the run continued until
  electrons of 0.5 eV have crossed it.

"Converged" is measured in the partial waves, the knob that dominates both: each way climbs the
ladder l_max = L, 1.5 L, 2.25 L … from its default L until the next rung changes the yield and the
order-resolved spectrum by less than 1 % (``spectrum_change``: Σₙ|Δpₙ| / Σₙ pₙ, pₙ the spectrum's
probability in a bin one photon wide centred on the ATI peak nħω − Iₚ − Uₚ, from 2 to 20 eV). The
time of a way (``wall_s``) is that of its converged rung, the median of ``repeats`` runs, the two
ways alternating (a, b, a, b, …) on this shared machine; ``speedup`` = wall(a)/wall(b), the goal
≥ 5. Between the two converged spectra: the yields (``yield_ratio``), the per-order yields
(``order_yield_ratios`` b/a; ``spectrum_difference``, the same L1 measure) and the peak positions
(``peak_shift_eV``). ``radius_change`` is the L1 change of (b) with the sphere 1.5 times further
out (the Coulomb tail is cut at the sphere, so t-SURFF converges in the radius too).

Run: ``OMP_NUM_THREADS=1 python benchmarks/strong_field.py [repeats]`` (default 2; about 20 minutes: the
length gauge climbs to l_max 108 to show that 72 is converged).
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
    "velocity_flux": GridSettings(gauge="velocity", photoelectron_methods=["surface_flux"],
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
    """Σₙ|pₙ(b) − pₙ(a)| / Σₙ pₙ(a) of the per-order yields (:func:`order_yields`)."""
    _, pa = order_yields(a)
    _, pb = order_yields(b)
    return float(np.sum(abs(pb - pa)) / np.sum(pa))


def converged_rung(settings, tolerance=0.01, rungs=3):
    """Climb l_max from the default by factors of 1.5 until the next rung changes the yield and the
    spectrum by less than ``tolerance``: (settings of the converged rung, its result, the changes);
    after ``rungs`` steps the last one, marked ``converged: false``."""
    l_max = grid_parameters(ATOM, PULSE, settings).l_max
    current = settings.model_copy(update={"l_max": l_max})
    res, _ = run(current)
    for _ in range(rungs):
        finer = settings.model_copy(update={"l_max": round(1.5 * current.l_max)})
        res_f, _ = run(finer)
        changes = {"yield_change": abs(res_f.ionization / res.ionization - 1), "spectrum_change": spectrum_change(res, res_f)}
        if max(changes.values()) < tolerance:
            return current, res, dict(changes, converged=True)
        current, res = finer, res_f
    return current, res, dict(changes, converged=False)       # reported as such


def main(repeats: int = 2) -> dict:
    rungs = {name: converged_rung(settings) for name, settings in CASES.items()}
    walls = {name: [] for name in CASES}
    for _ in range(repeats):                           # paired: a, b, a, b, ...
        for name, (settings, _, _) in rungs.items():
            walls[name].append(run(settings)[1])
    out = {"pulse": "800 nm, 1e14 W/cm^2, 4 cycles sin2, H 1s", "repeats": repeats}
    for name, (settings, res, changes) in rungs.items():
        par = grid_parameters(ATOM, PULSE, settings)
        out[name] = {"l_max": par.l_max, "r_max": round(par.r_max, 1), "dr": par.dr, "dt": par.dt,
                     "steps": par.n_steps, "wall_s": round(statistics.median(walls[name]), 2),
                     "walls_s": [round(w, 2) for w in walls[name]], "yield": res.ionization, **changes,
                     "trustworthy": res.quality["trustworthy"]}
    (sa, a, _), (sb, b, _) = rungs["length_window"], rungs["velocity_flux"]
    radius = grid_parameters(ATOM, PULSE, sb).surface_radius
    further, _ = run(sb.model_copy(update={"surface_radius": 1.5 * radius}))
    out["velocity_flux"].update(surface_radius=round(radius, 1), radius_change=spectrum_change(b, further))
    centres, pa = order_yields(a)
    _, pb = order_yields(b)
    ratio = pb / pa
    out["speedup"] = round(out["length_window"]["wall_s"] / out["velocity_flux"]["wall_s"], 2)
    out["yield_ratio"] = b.ionization / a.ionization
    out["order_yield_ratios"] = [round(float(x), 4) for x in ratio]
    out["spectrum_difference"] = spectrum_change(a, b)
    out["peak_shift_eV"] = float(np.max(abs(peak_positions(b, centres) - peak_positions(a, centres))))
    return out


if __name__ == "__main__":
    print(json.dumps(main(int(sys.argv[1]) if len(sys.argv) > 1 else 2), indent=1))

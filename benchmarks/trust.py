"""What trust costs, measured in one run on this machine; prints one JSON object.

* ``preflight_share_<route>`` — the accuracy preflight's time over the whole run (target < 5 %);
* ``companion_share_<route>`` — the error bar's coarser companion run over the run itself
  (target < 60 %);
* ``converge_runs`` — the convergence study of a small strong-field grid case, in units of one run
  (counted as the work its sizes imply) and its wall time.

Cases (all H 1s): levels — 30-cycle resonant pulse on 1s-2p; basis — one-photon ionisation at
27 eV; grid — 800 nm, 1e14 W/cm^2, 2 cycles with the default grid.

Run: ``OMP_NUM_THREADS=1 python benchmarks/trust.py``.
"""
from __future__ import annotations

import json
import tempfile
import time
from pathlib import Path

from driven_atom.convergence import converge
from driven_atom.routes import load_config, run_config

CASES = {
    "levels": {"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"], "rwa": False},
               "pulse": [{"photon_energy": 0.375, "peak_field": 1e-3, "cycles": 30}]},
    "basis": {"atom": {"Z": 1}, "solver": {"route": "basis", "r_max": 100, "dr": 0.1, "l_max": 2, "e_max": 2.0,
                                           "cache_dir": "none"},
              "pulse": [{"photon_energy": 1.0, "peak_field": 1e-3, "cycles": 10}]},
    "grid": {"atom": {"Z": 1}, "solver": {"route": "grid"},
             "pulse": [{"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 2}]},
}


def main():
    out = {}
    with tempfile.TemporaryDirectory() as folder:
        for name, data in CASES.items():
            run_config(load_config(data), Path(folder) / f"warm-{name}.h5")          # compile, import
            result = run_config(load_config({**data, "output": {"error_estimate": True}}), Path(folder) / f"{name}.h5")
            wall = result.stats["wall_s"]
            out[f"preflight_share_{name}"] = round(result.stats["preflight_s"] / wall, 4)
            out[f"companion_share_{name}"] = round(result.stats["companion_s"] / wall, 3)
        started = time.perf_counter()
        study = converge(load_config(CASES["grid"]), tol=0.01)
        out["converge_runs"] = round(study.cost_in_runs, 2)
        out["converge_wall_s"] = round(time.perf_counter() - started, 1)
        out["converge_dominant"] = study.dominant
    print(json.dumps(out))


if __name__ == "__main__":
    main()

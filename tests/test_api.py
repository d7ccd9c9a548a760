"""The public Python API: pinned names, load_config/run/open_result round trip, light imports."""
import subprocess
import sys

import numpy as np
import pytest

import driven_atom

PUBLIC = ["Atom", "Pulse", "load_config", "run", "scan", "open_result", "open_campaign", "estimate",
          "lines", "transition", "state", "xsec"]

CONFIG = {"atom": {"Z": 1, "nucleus": "infinite", "initial": "1s"},
          "pulse": [{"envelope": "sin2", "photon_energy": 0.375, "peak_field": 1e-3, "length": 4217.268}],
          "solver": {"route": "levels", "states": ["1s", "2p0"], "decay": False},
          "output": {"every": 500.0}}


def test_public_names_are_pinned():
    assert set(PUBLIC) <= set(driven_atom.__all__)


def test_run_and_open_result_round_trip(tmp_path):
    cfg = driven_atom.load_config(CONFIG)
    result = driven_atom.run(cfg, out=tmp_path, progress=False)
    # θ = d F0 T/2 = π/2 with d = 2^7 √2/3^5: P = sin²(θ/2) = 1/2 (Allen & Eberly 1975)
    assert result.populations["2p0"] == pytest.approx(0.5, abs=1e-5)
    back = driven_atom.open_result(result.metadata["file"])
    assert back.route == "levels" and back.populations == result.populations
    assert back.ionization == result.ionization and back.norm == result.norm
    np.testing.assert_array_equal(back.times, result.times)
    assert list(back.history_populations) == list(result.history_populations)
    np.testing.assert_array_equal(back.history_populations["2p0"], result.history_populations["2p0"])
    assert driven_atom.load_config(CONFIG).physics_hash() in back.metadata["file"]
    assert "[solver]" in back.config


def test_load_config_from_a_path(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text(driven_atom.load_config(CONFIG).to_toml())
    assert driven_atom.load_config(path).physics_hash() == driven_atom.load_config(CONFIG).physics_hash()


def test_levels_route_and_run_command_import_light():
    code = ("import sys, driven_atom, driven_atom.routes.levels, driven_atom.cli.run_cmd, driven_atom.observables.populations; "
            "print(sorted(m for m in ('qutip', 'numba') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"

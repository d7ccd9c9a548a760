"""The house: one name, the public namespace, imports that run downward, one meaning per key and
job ids that hash the physics (interface and structure checks: no reference values)."""
from __future__ import annotations

import ast
import copy
import importlib
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

import driven_atom
from driven_atom.cli import main
from driven_atom.errors import InputError
from driven_atom.routes import load_config

PACKAGE = Path(driven_atom.__file__).resolve().parent
REPO = PACKAGE.parent
EXPECTED = ["Atom", "Pulse", "Result", "State", "estimate", "lines", "load_config", "open_campaign",
            "open_result", "parse_state", "plot_campaign", "run", "scan", "state", "transition", "xsec"]
BASE = {"atom": {"Z": 1, "nucleus": "H", "initial": "1s"},
        "pulse": [{"envelope": "sin2", "wavelength": "800 nm", "intensity": "1e13 W/cm^2", "cycles": 4}],
        "solver": {"route": "basis"}}


def _with(section, **keys):
    data = copy.deepcopy(BASE)
    if section == "pulse":
        data["pulse"][0].update(keys)
    else:
        data[section].update(keys)
    return data


# -- one name ---------------------------------------------------------------------------------------
def test_the_command_is_driven_atom_and_nothing_is_called_tdse():
    bin_dir = Path(sys.executable).parent
    assert (bin_dir / "driven-atom").exists()
    assert not (bin_dir / "tdse").exists() and importlib.util.find_spec("tdse") is None
    out = subprocess.run([str(bin_dir / "driven-atom"), "state", "2p", "--json"], capture_output=True, text=True)
    assert out.returncode == 0 and '"energy_eV"' in out.stdout


# -- the namespace ---------------------------------------------------------------------------------
def test_public_names_are_pinned_and_resolve_every_time():
    assert sorted(driven_atom.__all__) == EXPECTED
    for name in EXPECTED:
        assert getattr(driven_atom, name) is getattr(driven_atom, name)
    assert callable(driven_atom.estimate) and callable(driven_atom.estimate)
    for sub in ("driven_atom.cli", "driven_atom.cli.estimate_cmd", "driven_atom.lab", "driven_atom.lab.rates",
                "driven_atom.campaign.runner", "driven_atom.campaign.summary", "driven_atom.api",
                "driven_atom.routes", "driven_atom.plotting", "driven_atom.validation"):
        importlib.import_module(sub)
    for name in EXPECTED:
        assert not isinstance(getattr(driven_atom, name), type(sys)), name     # never a module
    assert callable(driven_atom.estimate) and callable(driven_atom.scan)


def test_estimate_is_the_function_in_a_fresh_interpreter():
    code = ("import driven_atom as da, driven_atom.lab, driven_atom.cli.estimate_cmd; "
            "print(type(da.estimate).__name__, type(da.estimate).__name__)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["function", "function"]


# -- imports run downward --------------------------------------------------------------------------
def _import_graph():
    mods = {}
    for f in PACKAGE.rglob("*.py"):
        parts = f.relative_to(REPO).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        mods[name] = f
    graph = {m: set() for m in mods}
    for m, f in mods.items():
        base = m if f.name == "__init__.py" else m.rsplit(".", 1)[0]
        for node in ast.walk(ast.parse(f.read_text())):          # imports inside functions count too
            targets = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    up = base.split(".")[: len(base.split(".")) - (node.level - 1)]
                    root = ".".join(up + ([node.module] if node.module else []))
                else:
                    root = node.module or ""
                targets = [root] + [f"{root}.{a.name}" for a in node.names]
            graph[m] |= {t for t in targets if t in mods and t != m and not m.startswith(t + ".")}
    return graph


def test_no_import_cycle_anywhere_in_the_package():
    graph = _import_graph()
    state, cycles = {}, []

    def visit(node, stack):
        state[node] = "open"
        stack.append(node)
        for nxt in graph[node]:
            if state.get(nxt) == "open":
                cycles.append(stack[stack.index(nxt):] + [nxt])
            elif nxt not in state:
                visit(nxt, stack)
        stack.pop()
        state[node] = "done"

    for node in sorted(graph):
        if node not in state:
            visit(node, [])
    assert cycles == []


def test_the_run_description_sits_at_the_bottom():
    graph = _import_graph()
    for low in ("driven_atom.config", "driven_atom.settings", "driven_atom.quantities", "driven_atom.units",
                "driven_atom.errors", "driven_atom.io"):
        above = {m for m in graph[low] if m.startswith(("driven_atom.pulse", "driven_atom.routes",
                                                        "driven_atom.campaign", "driven_atom.api",
                                                        "driven_atom.cli", "driven_atom.lab", "driven_atom.basis"))}
        assert above == set(), (low, above)


# -- every command refuses a misspelt key before computing -----------------------------------------
def test_misspelt_solver_key_is_refused_everywhere(tmp_path, capsys):
    bad = _with("solver", r_maxx=200)
    with pytest.raises(InputError, match=r"unknown key `solver.r_maxx` \(did you mean `r_max`\?\)"):
        load_config(bad)
    with pytest.raises(InputError, match="r_maxx"):
        driven_atom.estimate(bad)
    with pytest.raises(InputError, match="r_maxx"):
        driven_atom.scan({**bad, "scan": {"pulse.0.cep": [0.0, 1.0]}}, tmp_path / "camp", progress=False)
    import tomli_w

    path = tmp_path / "bad.toml"
    path.write_text(tomli_w.dumps(bad))
    for argv in (["run", str(path), "--out", str(tmp_path / "out")], ["pulse", str(path)],
                 ["estimate", str(path)], ["scan", str(path), "--out", str(tmp_path / "scan")]):
        assert main(argv) == 2, argv
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and "r_maxx" in err, argv
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.toml"]      # no file, no folder


def test_scan_axis_over_a_misspelt_key_stops_before_any_job(tmp_path):
    with pytest.raises(InputError, match=r"solver.r_maxx"):
        driven_atom.scan({**BASE, "scan": {"solver.r_maxx": [50, 60]}}, tmp_path / "c", progress=False)
    assert not (tmp_path / "c" / "jobs").exists()


@pytest.mark.parametrize("section, key", [("solver", "r_max"), ("solver", "l_max"), ("atom", "Z"),
                                          ("pulse", "cycles"), ("pulse", "wavelength")])
def test_booleans_are_not_numbers(section, key):
    with pytest.raises(InputError, match=f"`{section}{'.0' if section == 'pulse' else ''}.{key}`"):
        load_config(_with(section, **{key: True}))


# -- job ids hash the physics ------------------------------------------------------------------------
def test_one_physics_one_job_id_whatever_the_spelling():
    ids = {load_config(_with("solver", r_max=value)).physics_hash()
           for value in (200, 200.0, "200 bohr", "200 a0", "10.583544210880 nm")}
    ids.add(load_config(BASE).physics_hash())                          # the default, 200 bohr
    assert len(ids) == 1
    waves = {load_config(_with("pulse", wavelength=w)).physics_hash()
             for w in ("121.567 nm", "121.5670 nm", "0.121567 um", "1215.67 angstrom")}
    assert len(waves) == 1
    assert load_config(_with("pulse", wavelength="121.568 nm")).physics_hash() not in waves
    assert load_config(_with("solver", r_max=201)).physics_hash() not in ids


def test_operational_keys_do_not_change_the_job_id():
    grid = {**BASE, "solver": {"route": "grid"}}
    first = load_config(grid).physics_hash()
    assert load_config({**grid, "solver": {"route": "grid", "threads": 2, "checkpoint_every": "5 min"}}) \
        .physics_hash() == first
    assert load_config({**BASE, "solver": {"route": "basis", "cache_dir": "none"}}).physics_hash() == \
        load_config(BASE).physics_hash()


def test_hash_version_is_stored_in_every_result(tmp_path):
    import h5py

    from driven_atom.config import HASH_VERSION

    result = driven_atom.run({"atom": {"Z": 1, "initial": "2p0"},
                              "solver": {"route": "levels", "states": ["1s", "2p"], "after": 100.0}},
                             out=tmp_path, progress=False)
    with h5py.File(result.metadata["file"]) as f:
        assert f.attrs["hash_version"] == HASH_VERSION and f.attrs["package"] == "driven-atom"


# -- one meaning per key -----------------------------------------------------------------------------
def test_checkpoint_every_is_a_time_and_counts_steps_only_on_the_grid():
    grid = {**BASE, "solver": {"route": "grid", "checkpoint_every": 400}}
    assert load_config(grid).solver.checkpoint_every.steps == 400
    with pytest.raises(InputError, match="wall-clock time with units"):
        load_config(_with("solver", checkpoint_every=60))              # the basis route counts no steps
    assert load_config(_with("solver", checkpoint_every="2 min")).solver.checkpoint_every.seconds == \
        pytest.approx(120.0, rel=1e-12)


def test_gauge_is_one_key_on_every_route():
    from driven_atom.settings import SETTINGS

    assert all("gauge" in model.model_fields for model in SETTINGS.values())
    assert "label_n_max" in SETTINGS["grid"].model_fields and "n_max" not in SETTINGS["grid"].model_fields


# -- the caller's environment stays the caller's ---------------------------------------------------
def test_plots_leave_the_matplotlib_backend_alone(tmp_path):
    import matplotlib

    from driven_atom.plotting import pulse_figure, result_figure
    from driven_atom.pulse import Pulse
    from driven_atom.result import Result

    before = matplotlib.get_backend()
    pulse_figure(Pulse({"wavelength": "800 nm", "peak_field": 0.05, "cycles": 2}), tmp_path / "p.png", samples=200)
    result_figure(Result(route="levels", populations={"1s": 1.0}, ionization=0.0, norm=1.0), tmp_path / "r.png")
    assert matplotlib.get_backend() == before


def test_physics_conventions_are_shipped_and_referenced():
    text = (REPO / "docs" / "physics.md").read_text()
    assert "atomic units" in text and "Keldysh" in text
    referencing = [p for p in PACKAGE.rglob("*.py") if "docs/physics.md" in p.read_text()]
    assert len(referencing) >= 5
    assert not [p for p in PACKAGE.rglob("*.py") if "PHYSICS.md" in p.read_text()]


def test_no_pycache_names_or_old_package_left_in_the_tree():
    assert not (REPO / "tdse").exists() and shutil.which("tdse") is None

"""Run configurations: loading, units at load time, cross-field checks, round trip."""
import copy
import math
from pathlib import Path

import pytest

from driven_atom.config import RunConfig, read_config
from driven_atom.errors import InputError
from driven_atom.pulse import build_pulse
from driven_atom.routes import load_config
from driven_atom.settings import LevelsSettings
from driven_atom.units import AU_TIME_S

CONFIGS = sorted((Path(__file__).resolve().parent.parent / "configs").glob("*.toml"))
BASE = {"atom": {"Z": 1, "nucleus": "H", "initial": "1s"},
        "pulse": [{"envelope": "sin2", "wavelength": "800 nm", "intensity": "1e13 W/cm^2", "cycles": 4}],
        "solver": {"route": "grid"}}


def with_changes(section=None, **keys):
    data = copy.deepcopy(BASE)
    if section == "pulse":
        data["pulse"][0].update(keys)
    elif section is not None:
        data.setdefault(section, {}).update(keys)
    return data


def drop(path):
    data = copy.deepcopy(BASE)
    node = data
    for part in path[:-1]:
        node = node[part]
    del node[path[-1]]
    return data


def test_demo_and_scenarios_are_present():
    names = {p.name for p in CONFIGS}
    assert "demo.toml" in names and len([n for n in names if n.startswith("kestrel_")]) >= 2


@pytest.mark.parametrize("path", CONFIGS, ids=lambda p: p.name)
def test_shipped_configs_load_and_round_trip(path):
    cfg = load_config(path)
    again = load_config(RunConfig(**__import__("tomllib").loads(cfg.to_toml())).to_dict())
    assert again == cfg and again.to_toml() == cfg.to_toml()
    assert again.physics_hash() == cfg.physics_hash()
    assert build_pulse(cfg) is not None


def test_demo_is_a_levels_run_of_lyman_alpha():
    cfg = load_config(CONFIGS[[p.name for p in CONFIGS].index("demo.toml")])
    assert cfg.solver == LevelsSettings(states=["1s", "2p"], rwa=True, decay=True)
    assert cfg.to_dict()["solver"] == {"route": "levels", "states": ["1s", "2p"], "rwa": True, "decay": True}
    from driven_atom.atom.levels import energy

    atom = cfg.build_atom()
    omega = build_pulse(cfg).components[0].omega
    # on resonance with 1s-2p of the model atom to better than its 1 ns bandwidth (analytic)
    assert abs(omega - (energy(atom, 2) - energy(atom, 1))) < 0.01 / (1e-9 / AU_TIME_S)


def test_round_trip_keeps_numbers_and_strings(tmp_path):
    data = with_changes("pulse", cep=0.5, delay=100, chirp="1e-4 fs^-2")
    data["atom"]["initial"] = [{"state": "1s", "weight": 1}, {"state": "2p0", "weight": 3, "phase": 0.2}]
    data["output"] = {"every": "0.5 fs"}
    cfg = load_config(data)
    path = tmp_path / "c.toml"
    path.write_text(cfg.to_toml())
    again = load_config(path)
    assert again == cfg
    assert again.to_dict()["pulse"][0]["delay"] == 100 and again.to_dict()["pulse"][0]["chirp"] == "1e-4 fs^-2"
    assert again.pulse[0].chirp == pytest.approx(1e-4 * AU_TIME_S**2 * 1e30, rel=1e-12)   # fs^-2 -> au


def test_weighted_initial_states_are_normalised():
    data = with_changes()
    data["atom"]["initial"] = [{"state": "1s", "weight": 1}, {"state": "2p0", "weight": 3, "phase": math.pi}]
    states = load_config(data).initial_states()
    assert [s.label for s, _ in states] == ["1s", "2p0"]
    assert sum(abs(c) ** 2 for _, c in states) == pytest.approx(1.0, rel=1e-15)
    assert states[1][1] == pytest.approx(-math.sqrt(0.75), rel=1e-15)


def test_output_changes_do_not_change_the_physics_hash():
    a = load_config(with_changes("output", every="1 fs"))
    b = load_config(with_changes("output", every="2 fs"))
    c = load_config(with_changes("pulse", cep=1.0))
    assert a.physics_hash() == b.physics_hash() != c.physics_hash()


def test_field_free_config_has_no_pulse():
    data = copy.deepcopy(BASE)
    data["pulse"] = []
    data["solver"] = {"route": "levels", "states": ["1s"]}
    assert build_pulse(load_config(data)) is None


# (config, text the one-line error must contain: the key it names)
INVALID = [
    ({"pulse": BASE["pulse"], "solver": {"route": "grid"}}, "`atom` is required"),
    (drop(["solver", "route"]), "`solver.route` is required"),
    (with_changes("solver", route="magic"), "`solver.route` must be one of"),
    (with_changes("pulse", wavelength="800 kg"), "`pulse.0.wavelength`: must be a length"),
    (with_changes("pulse", intensity="3 eV"), "`pulse.0.intensity`: must be an intensity"),
    (with_changes("pulse", cycles=-3), "`pulse.0.cycles`: must be > 0, got -3"),
    (with_changes("pulse", delay="5 nm"), "`pulse.0.delay`: must be a time"),
    (with_changes("pulse", wavelenght="800 nm"), "unknown key `pulse.0.wavelenght` (did you mean `wavelength`?)"),
    (with_changes("atom", charge=1), "unknown key `atom.charge`"),
    ({**BASE, "solverr": {}}, "unknown key `solverr` (did you mean `solver`?)"),
    (with_changes("pulse", photon_energy="1.55 eV"), "`pulse.0.wavelength` and `pulse.0.photon_energy` exclude"),
    (with_changes("pulse", peak_field=0.05), "`pulse.0.intensity` and `pulse.0.peak_field` exclude"),
    (with_changes("pulse", length="10 fs"), "`pulse.0.length` and `pulse.0.cycles` exclude"),
    (drop(["pulse", 0, "wavelength"]), "`pulse.0.wavelength` (or `pulse.0.photon_energy`) is required"),
    (drop(["pulse", 0, "intensity"]), "`pulse.0.intensity` (or `pulse.0.peak_field`) is required"),
    (drop(["pulse", 0, "cycles"]), "`pulse.0.length` (or `pulse.0.cycles` or `pulse.0.fwhm`) is required"),
    (with_changes("pulse", intensity="2e20 W/cm^2"), "`pulse.0.intensity` = 2e+20 W/cm^2 exceeds 1e+20 W/cm^2"),
    (with_changes("pulse", cycles=None, envelope="gaussian", fwhm="10 fs", length="15 fs"),
     "`pulse.0.fwhm` (10 fs FWHM) is longer than half the window `pulse.0.length`"),
    (with_changes("pulse", envelope="flat"), "`pulse.0.ramp` is required"),
    (with_changes("pulse", ramp="1 fs"), "`pulse.0.ramp` applies only to"),
    (with_changes("pulse", envelope="flat", ramp="8 fs"), "`pulse.0.ramp` must be at most half"),
    (with_changes("pulse", envelope="static", length="10 fs", ramp="1 fs"), "`pulse.0.wavelength` does not apply"),
    (with_changes("pulse", chirp="1 fs^-2"), "`pulse.0.chirp` = 0.000585 au sweeps"),
    (with_changes("pulse", chirp="3 nm"), "`pulse.0.chirp`: must be a chirp rate"),
    (with_changes("pulse", envelope="sine"), "`pulse.0.envelope`"),
    (with_changes("pulse", wavelength=True), "`pulse.0.wavelength`: must be a number"),
    (with_changes("pulse", cycles=True), "`pulse.0.cycles`: must be a plain number"),
    (with_changes("atom", Z=True), "`atom.Z`: must be a whole number"),
    (with_changes("solver", r_max=True), "`solver.r_max`: must be a number"),
    (with_changes("solver", l_max=True), "`solver.l_max`: must be a whole number"),
    (with_changes("solver", l_max=4.5), "`solver.l_max`: must be a whole number"),
    (with_changes("solver", r_maxx=200), "unknown key `solver.r_maxx` (did you mean `r_max`?)"),
    (with_changes("solver", r_max="200 eV"), "`solver.r_max`: must be a length"),
    (with_changes("solver", checkpoint_every="-1 s"), "`solver.checkpoint_every`"),
    (with_changes("pulse", wavelength="9**9**9 nm"), "`pulse.0.wavelength`: could not be read as a quantity"),
    (with_changes("pulse", delay=1e300), "`pulse.0.delay` must be within"),
    (with_changes("pulse", photon_energy="1 mJ", wavelength=None), "`pulse.0.photon_energy`"),
    ({**BASE, "atom": {"Z": 1, "initial": ["1s", "1s"]}}, "`atom.initial`"),
    ({**BASE, "atom": {"Z": 1, "initial": [{"state": "2p0"}, {"state": "2p0", "weight": 2}]}},
     "`atom.initial` lists 2p0 twice"),
    (with_changes("pulse", polarization="circular+"), "`pulse.0.polarization` = 'circular+': route 'grid'"),
    (with_changes("pulse", polarization="elliptical", ellipticity=0.2),
     "`pulse.0.polarization` = 'elliptical': route 'grid'"),
    (with_changes("pulse", polarization="elliptical", ellipticity=-2), "`pulse.0.ellipticity`: must be >= -1 and <= 1"),
    ({**BASE, "solver": {"route": "levels", "states": ["1s", "2p"]},
      "pulse": [{**BASE["pulse"][0], "intensity": "1e15 W/cm^2"}]},
     "`pulse.0.intensity`: peak field 0.169 au is above barrier suppression"),
    (with_changes("atom", initial="1x"), "`atom.initial`"),
    (with_changes("atom", nucleus="He"), "`atom.nucleus` 'He' has Z = 2"),
    (with_changes("output", every="-1 fs"), "`output.every`: must be a time > 0, got '-1 fs'"),
    (with_changes("output", every="1 m"), "`output.every`: must be a time (e.g."),
    ({**BASE, "pulse": []}, "`pulse` is required for route 'grid'"),
]


@pytest.mark.parametrize("data, expected", INVALID, ids=[e[:40] for _, e in INVALID])
def test_invalid_config_is_one_line_naming_the_key(data, expected):
    assert len(INVALID) >= 15
    with pytest.raises(InputError) as info:
        load_config(data)
    message = str(info.value)
    assert expected in message and "\n" not in message


def test_missing_file_and_bad_toml(tmp_path):
    with pytest.raises(InputError, match="not found"):
        load_config(tmp_path / "absent.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[atom\nZ = 1\n")
    with pytest.raises(InputError, match="not valid TOML"):
        load_config(bad)

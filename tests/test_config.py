"""Run configurations: loading, units at load time, cross-field checks, round trip."""
import copy
import math
from pathlib import Path

import pytest

from driven_atom.campaign.config import RunConfig, load_config
from driven_atom.errors import InputError
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
    assert cfg.build_pulse() is not None


def test_demo_is_a_levels_run_of_lyman_alpha():
    cfg = load_config(CONFIGS[[p.name for p in CONFIGS].index("demo.toml")])
    assert cfg.solver == {"route": "levels", "states": ["1s", "2p"], "rwa": True, "decay": True}
    from driven_atom.atom.levels import energy

    atom = cfg.build_atom()
    omega = cfg.build_pulse().components[0].omega
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
    assert again.to_dict()["pulse"][0]["delay"] == 100.0 and again.pulse[0].chirp == "1e-4 fs^-2"


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
    data["solver"] = {"route": "levels"}
    assert load_config(data).build_pulse() is None


# (config, text the one-line error must contain: the key it names)
INVALID = [
    ({"pulse": BASE["pulse"], "solver": {"route": "grid"}}, "`atom` is required"),
    (drop(["solver", "route"]), "`solver.route` is required"),
    (with_changes("solver", route="magic"), "`solver.route` must be one of"),
    (with_changes("pulse", wavelength="800 kg"), "`pulse.0.wavelength` must be a length"),
    (with_changes("pulse", intensity="3 eV"), "`pulse.0.intensity` must be an intensity"),
    (with_changes("pulse", cycles=-3), "`pulse.0.cycles` must be > 0"),
    (with_changes("pulse", delay="5 nm"), "`pulse.0.delay` must be a time"),
    (with_changes("pulse", wavelenght="800 nm"), "unknown key `pulse.0.wavelenght` (did you mean `wavelength`?)"),
    (with_changes("atom", charge=1), "unknown key `atom.charge`"),
    ({**BASE, "solverr": {}}, "unknown key `solverr` (did you mean `solver`?)"),
    (with_changes("pulse", photon_energy="1.55 eV"), "`pulse.0.wavelength` and `pulse.0.photon_energy` exclude"),
    (with_changes("pulse", peak_field=0.05), "`pulse.0.intensity` and `pulse.0.peak_field` exclude"),
    (with_changes("pulse", length="10 fs"), "`pulse.0.length` and `pulse.0.cycles` exclude"),
    (drop(["pulse", 0, "wavelength"]), "`pulse.0.wavelength` (or `photon_energy`) is required"),
    (drop(["pulse", 0, "intensity"]), "`pulse.0.intensity` (or `peak_field`) is required"),
    (drop(["pulse", 0, "cycles"]), "`pulse.0.length` (or `cycles` or `fwhm`) is required"),
    (with_changes("pulse", intensity="2e20 W/cm^2"), "`pulse.0.intensity` = '2e20 W/cm^2' exceeds 1e+20 W/cm^2"),
    (with_changes("pulse", cycles=None, envelope="gaussian", fwhm="10 fs", length="15 fs"),
     "`pulse.0.fwhm` (10 fs FWHM) is longer than half the window `pulse.0.length`"),
    (with_changes("pulse", envelope="flat"), "`pulse.0.ramp` is required"),
    (with_changes("pulse", ramp="1 fs"), "`pulse.0.ramp` applies only to"),
    (with_changes("pulse", envelope="flat", ramp="8 fs"), "`pulse.0.ramp` must be at most half"),
    (with_changes("pulse", envelope="static", length="10 fs", ramp="1 fs"), "`pulse.0.wavelength` does not apply"),
    (with_changes("pulse", chirp="1 fs^-2"), "`pulse.0.chirp` = '1 fs^-2' sweeps"),
    (with_changes("pulse", chirp="3 nm"), "`pulse.0.chirp` must be a chirp rate"),
    (with_changes("pulse", envelope="sine"), "`pulse.0.envelope`"),
    (with_changes("pulse", wavelength=True), "`pulse.0.wavelength`: must be a number"),
    (with_changes("pulse", polarization="circular+"), "`pulse.0.polarization` = 'circular+': route 'grid'"),
    (with_changes("pulse", polarization="elliptical", ellipticity=0.2),
     "`pulse.0.polarization` = 'elliptical': route 'grid'"),
    (with_changes("pulse", polarization="elliptical", ellipticity=-2), "`pulse.0.ellipticity` must be within"),
    (with_changes("solver", route="levels") | {"pulse": [{**BASE["pulse"][0], "intensity": "1e15 W/cm^2"}]},
     "`pulse.0.intensity`: peak field 0.169 au is above barrier suppression"),
    (with_changes("atom", initial="1x"), "`atom.initial`"),
    (with_changes("atom", nucleus="He"), "`nucleus` 'He' has Z = 2"),
    (with_changes("output", every="-1 fs"), "`output.every` must be a time > 0"),
    (with_changes("output", every="1 m"), "`output.every` must be a time"),
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

"""Scan expansion: product and zipped axes, ranges, units, deterministic job ids."""
import json
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from driven_atom.routes import load_config
from driven_atom.campaign.scan import expand
from driven_atom.errors import InputError
from driven_atom.units import AU_INTENSITY_WCM2, to_au


def _base(**scan):
    return {"atom": {"Z": 1, "nucleus": "H"},
            "pulse": [{"wavelength": "800 nm", "intensity": "1e13 W/cm^2", "cycles": 4},
                      {"wavelength": "400 nm", "intensity": "1e12 W/cm^2", "cycles": 8}],
            "solver": {"route": "levels", "states": ["1s", "2p"]}, "output": {"every": "1 au"}, "scan": scan}


def test_product_grid_in_c_order():
    plan = expand(_base(**{"pulse.0.intensity": ["1e13 W/cm^2", "2e13 W/cm^2", "3e13 W/cm^2"],
                           "pulse.0.cep": [0.0, 1.5]}))
    assert plan.dims == ("pulse.0.intensity", "pulse.0.cep") and plan.shape == (3, 2)
    assert [job.index for job in plan.jobs] == [(i, j) for i in range(3) for j in range(2)]
    assert plan.jobs[3].values == {"pulse.0.intensity": "2e13 W/cm^2", "pulse.0.cep": 1.5}
    assert plan.jobs[3].config["pulse"][0]["intensity"] == "2e13 W/cm^2"
    assert plan.jobs[3].config["pulse"][1]["intensity"] == "1e12 W/cm^2"   # the other pulse untouched
    assert "scan" not in plan.jobs[0].config
    assert len({job.id for job in plan.jobs}) == 6
    assert plan.axes[0].coords == (1e13, 2e13, 3e13) and plan.axes[0].units == "W/cm^2"
    assert plan.axes[1].units == "rad"


def test_zipped_group_is_one_dimension():
    plan = expand({**_base(**{"pulse.0.intensity": ["1e13 W/cm^2", "1e14 W/cm^2"],
                              "pulse.0.wavelength": ["800 nm", "700 nm", "600 nm"],
                              "pulse.1.wavelength": ["400 nm", "350 nm", "300 nm"],
                              "zip": {"colours": ["pulse.0.wavelength", "pulse.1.wavelength"]}})})
    assert plan.dims == ("pulse.0.intensity", "colours") and plan.shape == (2, 3)
    pairs = [(j.values["pulse.0.wavelength"], j.values["pulse.1.wavelength"]) for j in plan.jobs[:3]]
    assert pairs == [("800 nm", "400 nm"), ("700 nm", "350 nm"), ("600 nm", "300 nm")]   # second harmonic
    assert [a.dim for a in plan.axes] == ["pulse.0.intensity", "colours", "colours"]


def test_ranges_linear_and_log():
    plan = expand(_base(**{"pulse.0.intensity": {"from": "1e12 W/cm^2", "to": "1e14 W/cm^2", "num": 5,
                                                 "spacing": "log"},
                           "pulse.0.delay": {"from": 0, "to": 100, "num": 3}}))
    # analytic: log spacing over two decades in 4 steps is a factor sqrt(10) per step
    np.testing.assert_allclose(plan.axes[0].coords, [1e12, 10**12.5, 1e13, 10**13.5, 1e14], rtol=1e-14)
    assert plan.axes[1].coords == (0.0, 50.0, 100.0) and plan.axes[1].units == "au"
    # the value written into the job converts back to its coordinate (units through pint)
    value = plan.jobs[3 * 3].values["pulse.0.intensity"]
    assert to_au(value, "intensity") == pytest.approx(10**13.5 / AU_INTENSITY_WCM2, rel=1e-14)


def test_mixed_units_share_the_first_unit():
    plan = expand(_base(**{"pulse.0.intensity": ["1e13 W/cm^2", "0.1 PW/cm^2"],
                           "pulse.0.wavelength": ["800 nm", "0.4 um"]}))
    assert plan.axes[0].coords == pytest.approx((1e13, 1e14), rel=1e-14)   # analytic: 1 PW = 1e15 W
    assert plan.axes[1].coords == pytest.approx((800.0, 400.0), rel=1e-14)   # analytic: 1 um = 1000 nm


def test_text_values_and_nested_tables():
    plan = expand(_base(**{"atom": {"nucleus": ["H", "D", "T"]}}))   # unquoted dotted key in TOML
    assert plan.dims == ("atom.nucleus",) and plan.axes[0].coords == ("H", "D", "T")
    assert plan.axes[0].units == ""
    masses = [load_config(job.config).build_atom().reduced_mass for job in plan.jobs]
    assert masses[0] < masses[1] < masses[2] < 1.0                  # analytic: mu = M/(1+M) grows with M


def test_scanning_intensity_drops_the_peak_field_alternative():
    base = _base(**{"pulse.0.intensity": ["1e13 W/cm^2"]})
    base["pulse"][0] = {"wavelength": "800 nm", "peak_field": 0.01, "cycles": 4}
    job = expand(base).jobs[0]
    assert "peak_field" not in job.config["pulse"][0] and job.config["pulse"][0]["intensity"] == "1e13 W/cm^2"


def test_ids_ignore_output_options_and_follow_physics():
    a = expand(_base(**{"pulse.0.cep": [0.0, 1.0]}))
    other_output = _base(**{"pulse.0.cep": [0.0, 1.0]})
    other_output["output"] = {"every": "5 au"}
    b = expand(other_output)
    assert [j.id for j in a.jobs] == [j.id for j in b.jobs]
    changed = _base(**{"pulse.0.cep": [0.0, 1.0]})
    changed["pulse"][1]["cycles"] = 6
    assert not {j.id for j in a.jobs} & {j.id for j in expand(changed).jobs}
    # equal physics at two grid points is one job
    dup = expand(_base(**{"pulse.0.cep": [0.5, 0.5]}))
    assert len(dup.jobs) == 2 and len(dup.unique_jobs()) == 1


def test_ids_are_stable_across_processes():
    scan = {"pulse.0.intensity": {"from": "1e13 W/cm^2", "to": "1e14 W/cm^2", "num": 3, "spacing": "log"},
            "pulse.0.cep": [0.0, 1.0]}
    here = [job.id for job in expand(_base(**scan)).jobs]
    code = ("import json, sys; from driven_atom.campaign.scan import expand; "
            "print(json.dumps([j.id for j in expand(json.loads(sys.argv[1])).jobs]))")
    out = subprocess.run([sys.executable, "-c", code, json.dumps(_base(**scan))], capture_output=True,
                         text=True, check=True, env={"PYTHONHASHSEED": "123", "PATH": ""})
    assert json.loads(out.stdout) == here
    assert here == [job.id for job in expand(_base(**scan)).jobs]


def test_no_scan_is_one_job():
    plan = expand({k: v for k, v in _base().items() if k != "scan"})
    assert plan.shape == () and len(plan.jobs) == 1


@pytest.mark.parametrize("scan, key", [
    ({"pulse.2.intensity": ["1e13 W/cm^2"]}, "scan.pulse.2.intensity"),
    ({"laser.intensity": [1.0]}, "scan.laser.intensity"),
    ({"pulse.0.intensity": []}, "scan.pulse.0.intensity"),
    ({"pulse.0.intensity": {"from": "1e13 W/cm^2", "to": "1e14 W/cm^2", "num": 0}}, "scan.pulse.0.intensity.num"),
    ({"pulse.0.intensity": {"from": 0.0, "to": 1.0, "num": 3, "spacing": "log"}}, "scan.pulse.0.intensity"),
    ({"pulse.0.intensity": {"from": 0.0, "to": 1.0, "num": 3, "step": 1}}, "scan.pulse.0.intensity"),
    ({"pulse.0.intensity": {"from": "1e13 W/cm^2", "to": "800 nm", "num": 3}}, "scan.pulse.0.intensity.to"),
    ({"pulse.0.cep": [0.0, 1.0], "pulse.0.delay": [0.0], "zip": {"g": ["pulse.0.cep", "pulse.0.delay"]}},
     "scan.zip.g"),
    ({"pulse.0.cep": [0.0], "zip": {"g": ["pulse.0.chirp"]}}, "scan.zip.g"),
    ({"pulse.0.cepp": [0.0, 1.0]}, "pulse.0.cepp"),
    ({"pulse.0.envelope": ["sin2", "square"]}, "pulse.0.envelope"),
])
def test_bad_scans_name_the_key(scan, key):
    with pytest.raises(InputError) as err:
        expand(_base(**scan))
    message = str(err.value)
    assert key in message and "\n" not in message


@settings(max_examples=15, deadline=None)
@given(ceps=st.lists(st.floats(0, 6.28, allow_nan=False), min_size=1, max_size=3),
       delays=st.lists(st.integers(0, 50), min_size=1, max_size=3), zipped=st.booleans())
def test_expansion_covers_the_grid(ceps, delays, zipped):
    delays = (delays * 3)[:len(ceps)] if zipped else delays
    scan = {"pulse.0.cep": ceps, "pulse.1.delay": delays}
    if zipped:
        scan["zip"] = {"pair": ["pulse.0.cep", "pulse.1.delay"]}
    plan = expand(_base(**scan))
    shape = (len(ceps),) if zipped else (len(ceps), len(delays))
    assert plan.shape == shape and len(plan.jobs) == int(np.prod(shape))   # analytic: product of lengths
    for job in plan.jobs:
        i = job.index[0]
        j = job.index[0] if zipped else job.index[1]
        assert job.config["pulse"][0]["cep"] == ceps[i] and job.config["pulse"][1]["delay"] == delays[j]
    assert [j.id for j in expand(_base(**scan)).jobs] == [j.id for j in plan.jobs]

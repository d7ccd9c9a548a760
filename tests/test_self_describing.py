"""Data that explains itself: units and long names on every stored dataset, a short repr,
Result.to_xarray(), campaign coordinates in the user's units (a storage feature: the reference
values are the CODATA constants the units are spelt with)."""
import math
from concurrent.futures import ThreadPoolExecutor

import h5py
import numpy as np
import pytest
import scipy.constants as sc

import driven_atom
from driven_atom.campaign import store
from driven_atom.result import Result, read_result, write_result
from driven_atom.stored_units import cf_units

LEVELS = {"atom": {"Z": 1, "nucleus": "H", "initial": "1s"},
          "pulse": [{"envelope": "gaussian", "wavelength": "121.5684456 nm", "intensity": "100 W/cm^2",
                     "fwhm": "1 ns"}],
          "solver": {"route": "levels", "states": ["1s", "2p"]}, "output": {"every": "100 ps"}}


def _datasets(path):
    found = []
    with h5py.File(path, "r") as f:
        f.visititems(lambda name, obj: found.append((name, dict(obj.attrs))) if isinstance(obj, h5py.Dataset)
                     else None)
    return found


@pytest.fixture(scope="module")
def run_file(tmp_path_factory):
    return driven_atom.run(LEVELS, out=tmp_path_factory.mktemp("run"), progress=False)


def test_the_atomic_units_are_spelt_in_si_with_codata_values():
    # CODATA 2022 through scipy.constants: atomic unit of time, hartree, bohr
    for kind, name, unit in (("time", "atomic unit of time", "s"), ("energy", "Hartree energy", "J"),
                             ("length", "Bohr radius", "m"), ("field", "atomic unit of electric field", "V m^-1")):
        number, si = cf_units(kind).split(" ", 1)
        assert float(number) == pytest.approx(sc.physical_constants[name][0], rel=1e-12)
        assert si.replace("-1", "^-1") == unit
    assert "au" not in cf_units("intensity").split()           # UDUNITS reads "au" as the astronomical unit


def test_every_dataset_of_a_run_file_has_units_and_a_long_name(run_file):
    found = _datasets(run_file.metadata["file"])
    assert {"times", "populations/values", "populations/labels", "history/populations/2p0",
            "history/series/norm"} <= {name for name, _ in found}
    for name, attrs in found:
        assert attrs.get("units") and attrs.get("long_name"), name
    attrs = dict(found)
    assert attrs["times"]["units"] == cf_units("time") and attrs["history/populations/2p0"]["units"] == "1"


def test_a_spectrum_gets_the_units_of_its_arrays(tmp_path):
    energy = np.linspace(0.01, 1.0, 5)
    result = Result(route="basis", populations={"1s": 1.0}, ionization=0.0, norm=1.0,
                    spectra={"photoelectron": {"energy": energy, "dP_dE": energy},
                             "harmonic": {"omega": energy, "power": energy}})
    attrs = dict(_datasets(write_result(tmp_path / "s.h5", result)))
    assert attrs["spectra/photoelectron/energy"]["units"] == cf_units("energy")
    # dP/dE per hartree: 1/E_h in J^-1 (CODATA 2022 through scipy.constants)
    number = float(attrs["spectra/photoelectron/dP_dE"]["units"].split()[0])
    assert number == pytest.approx(1 / sc.physical_constants["Hartree energy"][0], rel=1e-11)
    assert attrs["spectra/harmonic/omega"]["units"].endswith("rad s-1")


def test_files_without_units_attributes_still_read(tmp_path, run_file):
    old = tmp_path / "old.h5"
    old.write_bytes(open(run_file.metadata["file"], "rb").read())
    with h5py.File(old, "a") as f:                              # a file from before the attributes
        f.visititems(lambda name, obj: [obj.attrs.__delitem__(k) for k in ("units", "long_name") if k in obj.attrs]
                     if isinstance(obj, h5py.Dataset) else None)
    assert read_result(old).populations == run_file.populations


def test_repr_is_a_short_summary(run_file):
    text = repr(run_file)
    assert len(text) < 1000 and "levels" in text and "121.5684456 nm" in text and "Z=1" in text
    assert "ionization=" in text and "norm=" in text and run_file.metadata["file"] in text
    big = Result(route="grid", populations={f"{n}s": 0.0 for n in range(1, 400)}, ionization=0.5, norm=0.5,
                 times=np.zeros(100_000), history_populations={"1s": np.zeros(100_000)}, config="[atom]\nZ = 1\n",
                 metadata={"file": "x" * 5000})
    assert len(repr(big)) < 1000


def test_to_xarray_round_trips_the_populations(run_file):
    ds = run_file.to_xarray()
    back = dict(zip(ds["state"].values.tolist(), ds["final_population"].values.tolist()))
    assert back == run_file.populations
    np.testing.assert_array_equal(ds["population"].sel(state="2p0").values, run_file.history_populations["2p0"])
    np.testing.assert_array_equal(ds["time"].values, run_file.times)
    for name in list(ds.data_vars) + list(ds.coords):
        assert ds[name].attrs.get("units") and ds[name].attrs.get("long_name"), name
    assert ds["time"].attrs["units"] == cf_units("time")


# -- campaign job files and the summary --------------------------------------------------------------
@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    cfg = {**LEVELS, "scan": {"pulse.0.intensity": ["10 W/cm^2", "100 W/cm^2"], "solver.atol": [1e-12, 1e-11]}}
    folder = tmp_path_factory.mktemp("camp") / "c"
    with ThreadPoolExecutor(2) as pool:
        driven_atom.scan(cfg, folder, executor=pool, progress=False)
    return folder


def test_every_dataset_of_a_job_file_and_the_summary_has_units(campaign):
    from driven_atom.campaign.summary import collect

    jobs = list((campaign / store.JOBS_DIR).glob("*.h5"))
    assert len(jobs) == 4
    for path in jobs:
        for name, attrs in _datasets(path):
            assert attrs.get("units") and attrs.get("long_name"), (path.name, name)
    summary = collect(campaign)
    found = _datasets(summary)
    assert {"ionization", "population", "pulse.0.intensity", "state", "job_id"} <= {n for n, _ in found}
    for name, attrs in found:
        assert "units" in attrs and "long_name" in attrs, name


def test_open_campaign_keeps_the_axes_in_the_users_units(campaign):
    ds = driven_atom.open_campaign(campaign)
    intensity = ds["pulse.0.intensity"]
    assert intensity.values.tolist() == [10.0, 100.0] and intensity.attrs["units"] == "W/cm^2"
    assert ds["solver.atol"].attrs["units"] == "1" and "scan axis" in intensity.attrs["long_name"]
    assert ds["population"].sel({"pulse.0.intensity": 100.0, "state": "2p"}).size == 2
    assert math.isfinite(float(ds["population"].sel(state="1s").max()))


def test_a_zipped_scan_dimension_has_units_too(tmp_path):
    from driven_atom.campaign.scan import expand
    from driven_atom.campaign.summary import collect

    cfg = {**LEVELS, "scan": {"pulse.0.intensity": ["10 W/cm^2", "100 W/cm^2"], "solver.atol": [1e-12, 1e-11],
                              "zip": {"knob": ["pulse.0.intensity", "solver.atol"]}}}
    store.write_plan(tmp_path, expand(cfg))
    found = _datasets(collect(tmp_path))
    assert "knob" in {name for name, _ in found}
    for name, attrs in found:
        assert "units" in attrs and "long_name" in attrs, name

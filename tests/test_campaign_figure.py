"""Figures of a campaign: `driven-atom plot DIR`, `plot DIR/summary.h5`, `driven_atom.plot_campaign`.

The physics check: below saturation an N-photon yield grows as I^N (lowest-order perturbation theory,
common practice), so the slope the figure fits to the ionisation of H(1s) against intensity reads the
photon order. At 250 nm (4.96 eV) three photons ionise H(1s) (3 x 4.96 > 13.60 eV > 2 x 4.96);
at 300 nm it would take four.
"""
import json
import math
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest
import xarray as xr

import driven_atom
from driven_atom.campaign.figure import campaign_figure, local_slope
from driven_atom.cli import main

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"

# Kestrel Hollow UV line: 250 nm, 4 fs pulses on H(1s), far below saturation (P ~ 1e-9 .. 1e-6)
THREE_PHOTON = {"atom": {"Z": 1, "nucleus": "H", "initial": "1s"},
                "pulse": [{"envelope": "gaussian", "wavelength": "250 nm", "intensity": "1e12 W/cm^2",
                           "fwhm": "4 fs"}],
                "solver": {"route": "grid", "r_max": 60, "dr": 0.2, "dt": 0.1, "l_max": 5},
                "scan": {"pulse.0.intensity": {"from": "1e11 W/cm^2", "to": "1e12 W/cm^2", "num": 3,
                                               "spacing": "log"}}}


@pytest.fixture(scope="module")
def three_photon(tmp_path_factory):
    folder = tmp_path_factory.mktemp("uv") / "three"
    with ThreadPoolExecutor(2) as pool:
        driven_atom.scan(THREE_PHOTON, folder, executor=pool, progress=False)
    return folder


def test_the_settings_pass_the_preflight_clean():
    from driven_atom.routes import load_config, preflight

    cfg = load_config({k: v for k, v in THREE_PHOTON.items() if k != "scan"})
    assert [c.level for c in preflight(cfg)] and all(c.level == "ok" for c in preflight(cfg))


def test_three_photon_ionisation_slope_in_the_figure(three_photon, capsys, tmp_path):
    out = tmp_path / "uv.png"
    assert main(["plot", str(three_photon), "--out", str(out), "--json"]) == 0
    payload = json.loads(capsys.readouterr().out)
    assert payload["figure"] == str(out)
    data = out.read_bytes()
    assert data[:8] == PNG_MAGIC and len(data) > 20_000
    (panel,) = [p for p in payload["panels"] if p["observable"] == "ionization"]
    assert panel["kind"] == "log-log" and panel["slope"] == "d ln P / d ln I"
    assert panel["lines"][0]["slope"] == pytest.approx(3.0, rel=0.05)      # photon order (common practice)
    ds = driven_atom.open_campaign(three_photon)
    assert ds["ionization"].max() < 1e-4                                     # well below saturation
    # the two-photon excitation of 2s in the same figure: slope 2
    (two_s,) = [p for p in payload["panels"] if p["observable"] == "population 2s"]
    assert two_s["lines"][0]["slope"] == pytest.approx(2.0, rel=0.05)          # photon order (common practice)


def test_plot_of_the_summary_file_and_of_the_folder_draw_the_campaign(three_photon, capsys):
    assert main(["plot", str(three_photon / "summary.h5"), "--json"]) == 0
    from_file = json.loads(capsys.readouterr().out)
    assert from_file["figure"] == str(three_photon / "summary.png")
    assert main(["plot", str(three_photon)]) == 0
    assert capsys.readouterr().out.strip() == f"figure written to {three_photon / 'summary.png'}"
    assert (three_photon / "summary.png").read_bytes()[:8] == PNG_MAGIC
    assert {p["observable"] for p in from_file["panels"]} >= {"ionization", "population 1s"}


def test_plot_campaign_returns_a_figure_and_writes_it(three_photon, tmp_path):
    from matplotlib.figure import Figure

    fig = driven_atom.plot_campaign(driven_atom.open_campaign(three_photon), tmp_path / "c.svg")
    assert isinstance(fig, Figure) and b"<svg" in (tmp_path / "c.svg").read_bytes()[:2000]
    assert isinstance(driven_atom.plot_campaign(three_photon), Figure)


def test_local_slope_fits_the_lowest_decade():
    intensity = np.array([1e12, 2e12, 5e12, 1e13, 1e14, 1e15])
    yield_ = 1e-40 * intensity ** 3
    yield_[-2:] = [0.3, 0.9]                          # saturated: outside the lowest decade, not fitted
    assert local_slope(intensity, yield_) == pytest.approx(3.0, rel=1e-12)
    assert local_slope([1e12], [1e-3]) is None


# -- figures of hand-made summaries: maps, lines per value, error bars, flagged points ---------------
def _summary(dims: dict, config: str = "") -> xr.Dataset:
    names = list(dims)
    shape = tuple(len(v) for v, _ in dims.values())
    grids = np.meshgrid(*[np.asarray(v, dtype=float) for v, _ in dims.values()], indexing="ij")
    intensity = grids[0]
    p2 = 1e-30 * intensity ** 2 * (1 + 0.1 * sum(grids[1:])) if len(grids) > 1 else 1e-30 * intensity ** 2
    coords = {n: ((n,), np.asarray(v, dtype=float), {"units": u, "user_units": u}) for n, (v, u) in dims.items()}
    coords["state"] = (("state",), np.array(["1s", "2s", "2s0"]))
    population = np.stack([1 - p2, p2, p2], axis=-1)
    trust = np.ones(shape, dtype=np.int8)
    trust.flat[-1] = 0
    data = {"ionization": (names, p2 / 10), "norm": (names, np.ones(shape)),
            "ionization_err": (names, p2 / 100), "norm_err": (names, np.full(shape, np.nan)),
            "population": (names + ["state"], population), "population_err": (names + ["state"], population * np.nan),
            "trustworthy": (names, trust)}
    return xr.Dataset(data, coords=coords, attrs={"n_jobs": math.prod(shape), "jobs_done": math.prod(shape),
                                                  "jobs_failed": 0, "config": config})


def test_two_axes_give_a_map_and_lines_per_value(tmp_path):
    ds = _summary({"pulse.0.intensity": ([1e12, 1e13, 1e14], "W/cm^2"), "pulse.0.cep": ([0.0, 1.0], "rad")})
    fig, panels = campaign_figure(ds)
    kinds = [(p["observable"], p["kind"]) for p in panels]
    assert ("ionization", "log-log") in kinds and ("ionization", "map") in kinds
    assert ("population 2s", "map") in kinds and not [k for k in kinds if k[0] == "population 2s0"]  # levels only
    assert ("norm loss 1 − norm", "map") not in kinds                      # zero everywhere: left out
    lines = next(p for p in panels if p["observable"] == "ionization" and p["kind"] == "log-log")
    assert lines["lines_over"] == "pulse.0.cep" and [e["slope"] for e in lines["lines"]] == \
        pytest.approx([2.0, 2.0], rel=1e-9)
    assert "not drawn" in fig.get_suptitle() and "norm loss" in fig.get_suptitle()
    axes = fig.axes
    flagged = [line for ax in axes for line in ax.get_lines() if line.get_marker() == "x"]
    assert flagged                                     # the untrustworthy point is marked
    assert any(ax.containers for ax in axes)          # error bars from ionization_err


def test_three_axes_draw_lines_per_value_of_the_third():
    ds = _summary({"pulse.0.intensity": ([1e12, 1e13], "W/cm^2"), "pulse.0.cep": ([0.0, 1.0, 2.0], "rad"),
                   "solver.atol": ([1e-12, 1e-10], "1")})
    _, panels = campaign_figure(ds)
    lines = next(p for p in panels if p["observable"] == "ionization" and p["kind"] != "map")
    mapped = next(p for p in panels if p["observable"] == "ionization" and p["kind"] == "map")
    assert lines["lines_over"] == "solver.atol" and lines["fixed"] == {"pulse.0.cep": "1 rad"}
    assert (mapped["x"], mapped["y"]) == ("pulse.0.intensity", "pulse.0.cep")


def test_a_narrow_wavelength_scan_across_a_line_is_drawn_as_a_detuning():
    from driven_atom.atom import Atom
    from driven_atom.atom.levels import energy
    from driven_atom.units import AU_TIME_S, SPEED_OF_LIGHT_MS

    config = ('[atom]\nZ = 1\nnucleus = "H"\n[[pulse]]\nwavelength = "121.5684 nm"\nintensity = "1 W/cm^2"\n'
              'fwhm = "1 ns"\n[solver]\nroute = "levels"\nstates = ["1s", "2p"]\n')
    atom = Atom.from_name("H", Z=1)
    line_hz = (energy(atom, 2) - energy(atom, 1)) / (2 * math.pi * AU_TIME_S)       # Bohr 1s-2p of the model
    line_nm = SPEED_OF_LIGHT_MS / line_hz * 1e9
    wavelengths = line_nm + np.array([-1e-4, 0.0, 1e-4])
    ds = _summary({"pulse.0.intensity": ([1.0, 10.0, 100.0], "W/cm^2"), "pulse.0.wavelength": (wavelengths, "nm")},
                  config=config)
    fig, panels = campaign_figure(ds)
    labels = [a.get_ylabel() for a in fig.axes if "detuning" in a.get_ylabel()]
    assert labels and labels[0] == "detuning from 1s–2p [GHz]"
    # Δν = c/λ − ν_line: −1e-4 nm at 121.57 nm is +2.03 GHz (analytic)
    expected = (SPEED_OF_LIGHT_MS / (wavelengths * 1e-9) - line_hz) / 1e9
    lines = next(p for p in panels if p["kind"] != "map")
    assert [float(e["label"].split()[0]) for e in lines["lines"]] == pytest.approx(expected, abs=0.01)   # 3 digits shown

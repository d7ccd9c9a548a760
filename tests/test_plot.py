"""`driven-atom plot RESULT [--out FILE] [--json]` and `driven_atom.plotting.result_figure`: figures of stored
result files, their panel lists, and one-line errors with exit code 2.

A storage/figure feature: these tests hold no physics reference values; they check files, formats,
panel choices and error handling only.
"""
import json

import numpy as np
import pytest

import driven_atom
from driven_atom.cli import main
from driven_atom.errors import InputError
from driven_atom.plotting import _carrier_omega, result_figure, result_panels
from driven_atom.result import Result, write_result

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
CONFIG = {"atom": {"Z": 1, "nucleus": "infinite", "initial": "1s"},
          "pulse": [{"envelope": "sin2", "photon_energy": 0.375, "peak_field": 1e-3, "length": 4217.268}],
          "solver": {"route": "levels", "states": ["1s", "2p"], "decay": False},
          "output": {"every": 500.0}}


@pytest.fixture(scope="module")
def levels_file(tmp_path_factory):
    result = driven_atom.run(CONFIG, out=tmp_path_factory.mktemp("levels"), progress=False)
    return result.metadata["file"]


def _hand_made(**kw):
    base = dict(route="basis", populations={"1s": 0.7, "1s0": 0.7, "2p": 0.2, "2p0": 0.2}, ionization=0.1,
                norm=0.9, times=np.linspace(0.0, 100.0, 5),
                history_populations={"1s": np.linspace(1, 0.7, 5), "1s0": np.linspace(1, 0.7, 5),
                                     "2p": np.linspace(0, 0.2, 5), "2p0": np.linspace(0, 0.2, 5)},
                series={"ionization": np.linspace(0, 0.1, 5)},
                spectra={"photoelectron": {"energy": np.linspace(0.01, 1.0, 50),
                                           "dP_dE": np.exp(-np.linspace(0.01, 1.0, 50) * 20)}})
    base.update(kw)
    return Result(**base)


def _one_error_line(capsys, argv, *words):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("driven-atom: error:") and "Traceback" not in err
    for word in words:
        assert word in err
    return err


def _no_tmp(folder):
    assert not list(folder.glob("*.tmp"))


def test_levels_result_gives_a_png_next_to_the_file(levels_file, capsys, tmp_path):
    from pathlib import Path

    src = Path(levels_file)
    copy = tmp_path / "levels.h5"
    copy.write_bytes(src.read_bytes())
    assert main(["plot", str(copy)]) == 0
    out = tmp_path / "levels.png"
    assert capsys.readouterr().out.strip() == f"figure written to {out}"
    assert out.read_bytes()[:8] == PNG_MAGIC
    _no_tmp(tmp_path)


def test_json_names_the_figure_and_panels(levels_file, capsys, tmp_path):
    out = tmp_path / "f.svg"
    assert main(["plot", levels_file, "--out", str(out), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data == {"figure": str(out), "panels": ["populations"]}
    assert b"<svg" in out.read_bytes()[:2000]
    _no_tmp(tmp_path)


def test_photoelectron_spectrum_adds_a_panel(tmp_path, capsys):
    path = write_result(tmp_path / "pe.h5", _hand_made())
    out = tmp_path / "pe.png"
    assert main(["plot", str(path), "--out", str(out), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["panels"] == ["populations", "photoelectron"]
    assert out.read_bytes()[:8] == PNG_MAGIC
    _no_tmp(tmp_path)


def test_harmonic_spectrum_adds_a_panel_in_orders_of_the_carrier(tmp_path):
    harmonic = {"omega": np.linspace(0.0, 3.0, 200), "power": np.exp(-np.linspace(0.0, 3.0, 200))}
    result = _hand_made(spectra={"harmonic": harmonic},
                        metadata={"carriers_au": [CONFIG["pulse"][0]["photon_energy"]]})
    assert result_panels(result) == ["populations", "harmonic"]
    assert _carrier_omega(result) == pytest.approx(CONFIG["pulse"][0]["photon_energy"])
    assert _carrier_omega(_hand_made()) is None            # no carrier stored: the axis falls back to eV
    for r in (result, _hand_made(spectra={"harmonic": harmonic})):
        assert result_figure(r, tmp_path / "h.pdf").read_bytes()[:5] == b"%PDF-"


def test_empty_history_draws_the_final_populations(tmp_path):
    result = _hand_made(times=np.zeros(0), history_populations={}, series={}, spectra={})
    assert result_panels(result) == ["final_populations"]
    assert result_figure(result, tmp_path / "e.png").read_bytes()[:8] == PNG_MAGIC
    _no_tmp(tmp_path)


def test_level_labels_only_in_the_history_panel():
    from driven_atom.plotting import _levels_only

    assert list(_levels_only(_hand_made().history_populations)) == ["1s", "2p"]
    only_m = _hand_made(history_populations={"2p-1": np.zeros(5), "2p0": np.ones(5)})
    assert list(_levels_only(only_m.history_populations)) == ["2p-1", "2p0"]   # no level label: draw what there is


def test_nothing_to_draw_is_one_line(tmp_path, capsys):
    path = write_result(tmp_path / "empty.h5", Result(route="levels", populations={}, ionization=0.0, norm=1.0))
    _one_error_line(capsys, ["plot", str(path)], "no populations", "empty.h5")
    assert not (tmp_path / "empty.png").exists()


def test_inconsistent_arrays_are_refused_by_name():
    with pytest.raises(InputError, match="'dP_dE'"):
        result_panels(_hand_made(spectra={"photoelectron": {"energy": np.ones(3)}}))
    with pytest.raises(InputError, match="'2p'.*one value per sample time"):
        result_panels(_hand_made(history_populations={"2p": np.ones(3)}))


@pytest.mark.parametrize("name", ["f.jpg", "f", "f.h5"])
def test_bad_out_suffix_exits_2_naming_out(levels_file, tmp_path, capsys, name):
    _one_error_line(capsys, ["plot", levels_file, "--out", str(tmp_path / name)], "`--out`", ".png, .pdf or .svg")
    assert list(tmp_path.iterdir()) == []


def test_unwritable_out_exits_2_naming_out(levels_file, tmp_path, capsys):
    (tmp_path / "a_file").write_text("")
    _one_error_line(capsys, ["plot", levels_file, "--out", str(tmp_path / "a_file" / "f.png")], "`--out`")
    assert [p.name for p in tmp_path.iterdir()] == ["a_file"]


def test_pulse_plot_keeps_its_own_wording(capsys):
    from pathlib import Path

    cfg = Path(__file__).resolve().parent.parent / "configs" / "demo.toml"
    _one_error_line(capsys, ["pulse", str(cfg), "--plot", "x.gif"], "`--plot`")


def test_missing_result_exits_2(tmp_path, capsys):
    _one_error_line(capsys, ["plot", str(tmp_path / "absent.h5")], "absent.h5")
    assert list(tmp_path.iterdir()) == []


def test_damaged_result_exits_2(levels_file, tmp_path, capsys):
    from pathlib import Path

    garbage = tmp_path / "garbage.h5"
    garbage.write_bytes(b"not an hdf5 file at all" * 10)
    _one_error_line(capsys, ["plot", str(garbage)], "garbage.h5")
    data = bytearray(Path(levels_file).read_bytes())
    truncated = tmp_path / "truncated.h5"
    truncated.write_bytes(bytes(data[: len(data) // 2]))
    _one_error_line(capsys, ["plot", str(truncated)], "truncated.h5")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["garbage.h5", "truncated.h5"]


def test_strong_field_spectra_give_ati_map_and_harmonic_panels(tmp_path, capsys):
    """The final names: photoelectrons (per eV, with a momentum map) and harmonics (in orders, the
    cutoff marked)."""
    axis = np.linspace(-2.0, 2.0, 41)
    pz, px = np.meshgrid(axis, axis)
    spectra = {"photoelectrons": {"energy_eV": np.linspace(0.5, 50.0, 100), "dP_dE": np.exp(-np.linspace(0, 10, 100)),
                                  "momentum_z": axis, "momentum_x": axis,
                                  "momentum_density": np.exp(-(pz**2 + 4 * px**2))},
               "harmonics": {"order": np.linspace(0.0, 40.0, 800), "power": np.exp(-np.linspace(0.0, 40.0, 800) / 5),
                             "cutoff_order": np.array(21.0)}}
    path = write_result(tmp_path / "sf.h5", _hand_made(spectra=spectra))
    out = tmp_path / "sf.svg"
    assert main(["plot", str(path), "--out", str(out), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["panels"] == ["populations", "photoelectrons", "momentum_map",
                                                              "harmonics"]
    text = out.read_text()
    assert "order 21.0" in text and "1/eV" in text             # the cutoff marked, densities per eV
    _no_tmp(tmp_path)

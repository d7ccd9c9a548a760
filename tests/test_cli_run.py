"""`driven-atom run`: JSON contract, summary text, result files, errors (storage and interface checks)."""
import json
import math
from pathlib import Path

import pytest

from driven_atom.cli import main
from driven_atom.result import read_result

ROOT = Path(__file__).resolve().parents[1]
JSON_KEYS = {"route", "populations", "ionization", "norm", "result_file", "wall_s", "history", "trustworthy",
             "warnings", "quality", "ionization_err", "populations_err", "caution"}

RABI_TOML = """
[atom]
Z = 1
nucleus = "infinite"
initial = "1s"

[[pulse]]
envelope = "sin2"
photon_energy = 0.375
peak_field = 1e-3
length = 8434.535   # pi pulse: d F0 T/2 = pi with d = 2^7 sqrt2/3^5 (Bethe & Salpeter 1957)

[solver]
route = "levels"
states = ["1s", "2p"]
decay = false

[output]
every = 1000.0
"""


def _config(tmp_path, text=RABI_TOML, name="rabi.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_json_run_writes_the_file(tmp_path, capsys):
    cfg = _config(tmp_path)
    assert main(["run", str(cfg), "--out", str(tmp_path / "out"), "--json", "--no-progress"]) == 0
    out, err = capsys.readouterr()
    payload = json.loads(out)
    assert set(payload) == JSON_KEYS and payload["route"] == "levels"
    assert payload["populations"]["2p0"] == pytest.approx(1.0, abs=1e-5)   # π pulse (Allen & Eberly 1975)
    assert payload["norm"] == pytest.approx(1.0, abs=1e-8) and payload["ionization"] == 0.0
    hist = payload["history"]
    assert set(hist) == {"times_au", "populations"}
    assert all(len(v) == len(hist["times_au"]) for v in hist["populations"].values())
    path = Path(payload["result_file"])
    assert path.parent == tmp_path / "out" and path.name.startswith("rabi-")
    back = read_result(path)
    assert back.populations == payload["populations"]
    # 1e-3 au = 3.5e10 W/cm^2 for 0.2 ps: above the sub-ns skin limit however the field is written
    assert "CAUTION" not in err and "3.51e+10 W/cm^2" in payload["caution"]


def test_text_summary_and_caution_where_the_fluence_is_hazardous(tmp_path, capsys):
    # 3.5e10 W/cm^2 for 0.1 ps: ~2 mJ/cm^2, above the sub-ns skin limit 2e7 W/cm^2 x 0.1 ps
    # (IEC 60825-1, from memory)
    text = RABI_TOML.replace("peak_field = 1e-3", 'intensity = "3.50945e10 W/cm^2"')
    cfg = _config(tmp_path, text)
    target = tmp_path / "one.h5"
    assert main(["run", str(cfg), "--out", str(target), "--no-progress"]) == 0
    out, _ = capsys.readouterr()
    assert "final populations" in out and "2p0" in out and "CAUTION" in out and "3.51e+10 W/cm^2" in out
    assert target.exists()
    assert main(["run", str(cfg), "--out", str(target), "--json", "--no-progress"]) == 0
    out, err = capsys.readouterr()
    assert "class-4" in json.loads(out)["caution"] and "CAUTION" not in err
    weak = _config(tmp_path, RABI_TOML.replace("peak_field = 1e-3", 'intensity = "1e3 W/cm^2"'), "weak.toml")
    assert main(["run", str(weak), "--out", str(tmp_path / "weak.h5"), "--no-progress"]) == 0
    assert "CAUTION" not in capsys.readouterr().out     # a weak pulse in lab units: no caution


@pytest.mark.parametrize("edit, word", [
    (("decay = false", "decai = false"), "did you mean `decay`"),
    (('states = ["1s", "2p"]', 'states = ["1s", "2q"]'), "solver.states"),
    (('initial = "1s"', 'initial = "2s"'), "atom.initial"),
])
def test_bad_configs_exit_2_with_one_line(tmp_path, capsys, edit, word):
    cfg = _config(tmp_path, RABI_TOML.replace(*edit))
    assert main(["run", str(cfg), "--out", str(tmp_path), "--json"]) == 2
    out, err = capsys.readouterr()
    assert out == "" and err.count("\n") == 1 and word in err


def test_unavailable_route_is_a_clear_message(tmp_path, capsys, monkeypatch):
    from driven_atom import routes

    monkeypatch.setitem(routes.ROUTES, "basis", "driven_atom.routes._not_written_yet:Missing")
    cfg = _config(tmp_path, RABI_TOML.replace('route = "levels"\nstates = ["1s", "2p"]\ndecay = false',
                                              'route = "basis"'))
    assert main(["run", str(cfg), "--out", str(tmp_path)]) == 2
    assert "not available" in capsys.readouterr().err


@pytest.mark.parametrize("name", sorted(p.name for p in (ROOT / "configs").glob("levels_*.toml")) + ["demo.toml"])
def test_shipped_levels_configs_run(tmp_path, capsys, name):
    assert main(["run", str(ROOT / "configs" / name), "--out", str(tmp_path), "--json", "--no-progress"]) == 0
    payload = json.loads(capsys.readouterr().out)
    assert payload["route"] == "levels"
    assert math.isclose(payload["norm"], 1.0, abs_tol=1e-7)


@pytest.mark.parametrize("out", ["{tmp}/a_file/x.h5", "/proc/cannot_write_here.h5"])
def test_unwritable_output_fails_before_the_run(tmp_path, capsys, out):
    (tmp_path / "a_file").write_text("not a folder")
    code = main(["run", str(_config(tmp_path)), "--out", out.format(tmp=tmp_path), "--no-progress"])
    err = capsys.readouterr().err
    assert code == 2 and "`--out`" in err and len(err.strip().splitlines()) == 1

"""The laser-safety caution where it belongs: `estimate`, and `pulse`/`run`/`scan` when a pulse's
fluence reaches the skin exposure limit (stating the numbers); never `status`, `collect`, `plot`,
`check` or the atom-data commands."""
import json
from concurrent.futures import ThreadPoolExecutor

import pytest
import tomli_w

import driven_atom
from driven_atom.cli import main
from driven_atom.safety import laser_caution, skin_mpe_jcm2

# Kestrel Hollow amplifier: 800 nm, 30 fs FWHM, focused to a 50 um waist. With
# I0 = 2 E/(pi w0^2) * 0.9394/tau (docs/physics.md, "Focus and lab") 1 mJ gives 7.97e14 W/cm^2.
MILLIJOULE = {"atom": {"Z": 1, "nucleus": "H"},
              "pulse": [{"envelope": "gaussian", "wavelength": "800 nm", "intensity": "7.97e14 W/cm^2",
                         "fwhm": "30 fs"}],
              "solver": {"route": "grid"}}
# Kestrel Hollow beam line: a 100 fs Lyman-alpha pulse of 1e10 W/cm^2, about 1 mJ/cm^2
STRONG_SCAN = {"atom": {"Z": 1, "nucleus": "H"},
               "pulse": [{"envelope": "gaussian", "wavelength": "121.5684456 nm", "intensity": "1e10 W/cm^2",
                          "fwhm": "100 fs"}],
               "solver": {"route": "levels", "states": ["1s", "2p"]},
               "scan": {"pulse.0.intensity": ["1e9 W/cm^2", "1e10 W/cm^2"]}}


def test_the_skin_limits_join_where_the_duration_regimes_meet():
    # 2e7 W/cm^2 x 1 ns = 0.02 J/cm^2; 1.1 (1e-7 s)^0.25 = 0.0196 J/cm^2 (IEC 60825-1, from memory)
    assert skin_mpe_jcm2(0.999e-9) == pytest.approx(skin_mpe_jcm2(1e-9), rel=2e-3)
    assert skin_mpe_jcm2(1.001e-7) == pytest.approx(skin_mpe_jcm2(0.999e-7), rel=0.03)
    assert skin_mpe_jcm2(1e-9, wavelength_nm=250) == 3e-3                 # ultraviolet photochemical limit


def test_estimate_of_a_millijoule_30_fs_pulse_gives_the_caution(tmp_path, capsys):
    path = tmp_path / "mj.toml"
    path.write_text(tomli_w.dumps(MILLIJOULE))
    assert main(["estimate", str(path), "--waist", "50 um", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["pulse_energy_J"] == pytest.approx(1e-3, rel=2e-3)
    assert data["caution"].startswith("CAUTION") and "peak power" in data["caution"] and "J/cm^2" in data["caution"]
    assert main(["estimate", str(path), "--waist", "50 um"]) == 0
    assert "CAUTION" in capsys.readouterr().out
    assert main(["pulse", str(path)]) == 0                                  # ~25 J/cm^2: far past the limit
    assert "CAUTION" in capsys.readouterr().out


def test_scan_names_the_strongest_point_and_the_reading_commands_stay_quiet(tmp_path, capsys):
    path = tmp_path / "strong.toml"
    path.write_text(tomli_w.dumps(STRONG_SCAN))
    folder = tmp_path / "strong"
    with ThreadPoolExecutor(2) as pool:
        driven_atom.scan(path, folder, executor=pool, progress=False)
    caution = laser_caution([driven_atom.Pulse(p) for p in ({**STRONG_SCAN["pulse"][0], "intensity": i}
                                                              for i in STRONG_SCAN["scan"]["pulse.0.intensity"])])
    assert "1e+10 W/cm^2" in caution                        # the stronger point decides
    assert main(["scan", str(path), "--out", str(folder), "--no-progress"]) == 0   # done already: reads only
    out = capsys.readouterr().out
    assert "CAUTION" in out and "1e+10 W/cm^2" in out
    for argv in (["status", str(folder)], ["collect", str(folder)], ["plot", str(folder)],
                 ["collect", str(folder), "--json"], ["status", str(folder), "--json"], ["state", "2p"],
                 ["transition", "2p", "1s"], ["check", "--only", "Lyman-alpha (vacuum)"]):
        assert main(argv) == 0, argv
        captured = capsys.readouterr()
        assert "CAUTION" not in captured.out + captured.err, argv
    weak = {**STRONG_SCAN, "scan": {"pulse.0.intensity": ["10 W/cm^2", "100 W/cm^2"]},
            "pulse": [{**STRONG_SCAN["pulse"][0], "fwhm": "1 ns"}]}
    path.write_text(tomli_w.dumps(weak))
    with ThreadPoolExecutor(2) as pool:
        driven_atom.scan(path, tmp_path / "weak", executor=pool, progress=False)
    assert main(["scan", str(path), "--out", str(tmp_path / "weak"), "--no-progress", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["caution"] is None            # a 10 W/cm^2 scan: none

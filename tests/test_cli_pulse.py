"""`driven-atom pulse CONFIG [--plot FILE] [--json]`: table, JSON, caution, plot, errors with exit 2."""
import json
from pathlib import Path

import pytest

from driven_atom.cli import main

CONFIGS = Path(__file__).resolve().parent.parent / "configs"
JSON_KEYS = {"peak_field_au", "intensity_Wcm2", "photon_energy_eV", "wavelength_nm", "fwhm_fs", "length_fs",
             "Up_eV", "keldysh", "quiver_au", "fluence_Jcm2"}
GOOD = """
[atom]
Z = 1
nucleus = "H"
initial = "1s"

[[pulse]]
wavelength = "800 nm"
intensity = "1e14 W/cm^2"
cycles = 8

[solver]
route = "grid"
"""


def test_demo_prints_table_and_no_caution_for_a_weak_pulse(capsys):
    # 100 W/cm^2 for 1 ns: 1e-7 J/cm^2, far below the skin limit of 0.02 J/cm^2 (IEC 60825-1, from memory)
    assert main(["pulse", str(CONFIGS / "demo.toml")]) == 0
    out = capsys.readouterr().out
    assert "Keldysh gamma" in out and "fluence [J/cm^2]" in out and "121.57" in out
    assert "CAUTION" not in out
    assert main(["pulse", str(CONFIGS / "demo.toml"), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["caution"] is None


def test_a_strong_pulse_gets_the_caution_with_its_numbers(capsys):
    assert main(["pulse", str(CONFIGS / "kestrel_ir_grid.toml")]) == 0
    (line,) = [text for text in capsys.readouterr().out.splitlines() if "CAUTION" in text]
    assert "1e+14 W/cm^2" in line and "J/cm^2" in line and "skin exposure limit" in line


def test_json_is_one_object_with_the_issue_keys(capsys):
    assert main(["pulse", str(CONFIGS / "kestrel_ir_grid.toml"), "--json"]) == 0
    captured = capsys.readouterr()
    data = json.loads(captured.out)                       # stdout: exactly one JSON object
    assert captured.err == "" and "class-4" in data["caution"] and "1e+14 W/cm^2" in data["caution"]
    row = data["pulses"][0]
    assert JSON_KEYS <= set(row)
    # 800 nm, 1e14 W/cm^2: Up = 5.976 eV (common practice), gamma = sqrt(13.598/(2*5.976)) (Keldysh 1965)
    assert row["Up_eV"] == pytest.approx(5.976, abs=1e-3)
    assert row["keldysh"] == pytest.approx(1.0667, abs=5e-4)
    assert row["wavelength_nm"] == pytest.approx(800.0, rel=1e-12)
    assert row["photon_energy_eV"] == pytest.approx(1239.84198 / 800, rel=1e-8)   # hc (CODATA 2018)
    assert row["peak_field_au"] == pytest.approx((1e14 / 3.50945e16) ** 0.5, rel=2e-6)  # CODATA I_au
    assert abs(data["field_area_au"]) < 1e-10


def test_two_pulses_give_two_rows(capsys):
    assert main(["pulse", str(CONFIGS / "kestrel_two_colour.toml"), "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)["pulses"]
    assert [round(r["wavelength_nm"]) for r in rows] == [800, 400]


def test_plot_writes_a_figure(tmp_path, capsys):
    cfg = tmp_path / "p.toml"
    cfg.write_text(GOOD)
    out = tmp_path / "pulse.png"
    assert main(["pulse", str(cfg), "--plot", str(out)]) == 0
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "figure written" in capsys.readouterr().out


def test_plot_of_a_nanosecond_pulse_draws_the_envelope(tmp_path):
    out = tmp_path / "demo.svg"
    assert main(["pulse", str(CONFIGS / "demo.toml"), "--plot", str(out), "--json"]) == 0
    assert "envelope" in out.read_text()


BAD = [
    ("wavelength = \"800 nm\"", "wavelength = \"800 kg\"", "`pulse.0.wavelength`: must be a length"),
    ("cycles = 8", "cycles = -3", "`pulse.0.cycles`: must be > 0"),
    ("cycles = 8", "cycles = 8\nlength = \"20 fs\"", "exclude each other"),
    ("cycles = 8", "cycels = 8", "did you mean `cycles`?"),
    ("[atom]\nZ = 1\nnucleus = \"H\"\ninitial = \"1s\"\n", "", "`atom` is required"),
    ("wavelength = \"800 nm\"", "wavelength = \"800 nm\"\nphoton_energy = \"1.55 eV\"", "exclude each other"),
    ("intensity = \"1e14 W/cm^2\"", "intensity = \"1e21 W/cm^2\"", "exceeds 1e+20 W/cm^2"),
    ("cycles = 8", "length = \"-5 fs\"", "`pulse.0.length`: must be a time > 0"),
    ("cycles = 8", "envelope = \"gaussian\"\nfwhm = \"30 fs\"\nlength = \"20 fs\"", "longer than half the window"),
    ("route = \"grid\"", "route = \"fast\"", "`solver.route` must be one of"),
    ("cycles = 8", "cycles = 8\npolarization = \"circular-\"", "`pulse.0.polarization`"),
    ("initial = \"1s\"", "initial = \"1q\"", "`atom.initial`"),
    ("cycles = 8", "cycles = 8\ndelay = \"3 eV\"", "`pulse.0.delay`: must be a time"),
    ("cycles = 8", "cycles = 8\nramp = \"2 fs\"", "`pulse.0.ramp` applies only to"),
    ("intensity = \"1e14 W/cm^2\"", "", "`pulse.0.intensity` (or `pulse.0.peak_field`) is required"),
    ("Z = 1", "Z = 0", "`atom.Z`"),
    ("cycles = 8", "cycles = 8\nchirp = \"2 fs^-2\"", "`pulse.0.chirp`"),
]


@pytest.mark.parametrize("old, new, expected", BAD, ids=[b[2][:30] for b in BAD])
def test_invalid_config_exits_2_with_one_line(tmp_path, capsys, old, new, expected):
    assert len(BAD) >= 15
    assert old in GOOD
    cfg = tmp_path / "bad.toml"
    cfg.write_text(GOOD.replace(old, new, 1))
    assert main(["pulse", str(cfg), "--json"]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and expected in lines[0], captured.err


def test_missing_config_file_exits_2(capsys):
    assert main(["pulse", "no/such/file.toml"]) == 2
    assert "not found" in capsys.readouterr().err


def test_pulse_command_stays_light():
    # `driven-atom pulse` must not pull in numba or qutip (project rule: light commands import lazily)
    import subprocess
    import sys

    code = ("import sys; from driven_atom.cli import main; main(['pulse', sys.argv[1], '--json']); "
            "print('numba' in sys.modules or 'qutip' in sys.modules, file=sys.stderr)")
    done = subprocess.run([sys.executable, "-c", code, str(CONFIGS / "demo.toml")], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0 and done.stderr.strip().endswith("False"), done.stderr

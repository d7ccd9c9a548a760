"""The atom commands: JSON keys and values, readable tables, one-line errors with exit code 2."""
import json
import subprocess
import sys

import pytest
import scipy.constants as sc

from driven_atom.cli import main


def run_json(capsys, *argv):
    assert main([*argv, "--json"]) == 0
    out, err = capsys.readouterr()
    assert err == ""
    return json.loads(out)   # exactly one JSON object on stdout


def test_lines_json(capsys):
    out = run_json(capsys, "lines", "--series", "balmer", "--upto", "7")
    assert set(out) == {"lines", "limit_vacuum_nm"}
    assert [ln["upper"] for ln in out["lines"]] == [3, 4, 5, 6, 7]
    for ln in out["lines"]:
        assert set(ln) == {"upper", "lower", "vacuum_nm", "air_nm", "energy_eV", "wavenumber_cm"}
        assert ln["lower"] == 2
    h_alpha = out["lines"][0]
    assert h_alpha["air_nm"] == pytest.approx(656.279, rel=3e-5)     # NIST ASD (air); no fine structure
    assert h_alpha["vacuum_nm"] == pytest.approx(656.461, rel=3e-5)  # NIST ASD (vacuum)
    assert out["limit_vacuum_nm"] == pytest.approx(364.705, rel=3e-5)  # 4/R_H, CODATA R_H = 10967758.34 1/m


def test_lines_series_by_number_and_lyman_has_no_air(capsys):
    out = run_json(capsys, "lines", "--series", "1", "--upto", "2")
    assert out["lines"][0]["air_nm"] is None
    assert out["lines"][0]["vacuum_nm"] == pytest.approx(121.567, rel=3e-5)   # NIST ASD Ly-alpha


def test_transition_json(capsys):
    out = run_json(capsys, "transition", "2p", "1s")
    assert set(out) == {"energy_eV", "vacuum_nm", "air_nm", "radial_dipole_au", "f_absorption", "A_s"}
    assert out["A_s"] == pytest.approx(6.2649e8, rel=1e-3)          # Wiese & Fuhr, JPCRD 38, 565 (2009)
    assert out["f_absorption"] == pytest.approx(0.41620, rel=1e-3)  # Wiese & Fuhr, JPCRD 38, 565 (2009)
    # either order gives the same transition
    assert run_json(capsys, "transition", "1s", "2p") == out


def test_transition_deuterium_shift(capsys):
    h = run_json(capsys, "transition", "3d", "2p")
    d = run_json(capsys, "transition", "3d", "2p", "--nucleus", "D")
    assert d["vacuum_nm"] < h["vacuum_nm"]   # isotope shift: D lines lie to the blue (Bohr formula with mu)


def test_state_json(capsys):
    out = run_json(capsys, "state", "3p")
    assert set(out) == {"energy_eV", "binding_eV", "lifetime_s", "r_mean_au"}
    assert out["lifetime_s"] == pytest.approx(5.2715e-9, rel=1e-3)   # Wiese & Fuhr, JPCRD 38, 565 (2009)
    assert out["binding_eV"] == pytest.approx(13.598434 / 9, rel=3e-5)  # NIST ASD ionisation energy / n^2
    assert out["energy_eV"] == -out["binding_eV"]
    assert run_json(capsys, "state", "2s")["lifetime_s"] is None   # no E1 decay (selection rules)


def test_state_he_plus(capsys):
    out = run_json(capsys, "state", "1s", "--Z", "2")
    # NIST ASD He II ionisation energy 54.41776 eV; the Dirac shift (Z alpha)^2/4 = 5.3e-5 is not in the model
    assert out["binding_eV"] == pytest.approx(54.41776, rel=1e-4)
    assert out["binding_eV"] < 54.41776


def test_xsec_json(capsys):
    out = run_json(capsys, "xsec", "1s", "--photon-energy", "20 eV", "--nucleus", "infinite")
    assert set(out) == {"sigma_cm2", "sigma_Mb", "photon_energy_eV"}
    assert out["sigma_cm2"] == pytest.approx(2.212e-18, rel=5e-3)   # Bethe & Salpeter (1957) §71
    assert out["sigma_Mb"] == pytest.approx(out["sigma_cm2"] / 1e-18, rel=1e-12)
    assert out["photon_energy_eV"] == pytest.approx(20.0, rel=1e-12)


def test_xsec_wavelength_and_range(capsys):
    by_wl = run_json(capsys, "xsec", "1s", "--wavelength", "61.99 nm", "--nucleus", "infinite")
    assert by_wl["photon_energy_eV"] == pytest.approx(20.0, rel=1e-4)   # E = 1239.84 eV nm / lambda (CODATA)
    table = run_json(capsys, "xsec", "2p", "--range", "14 eV:100 eV:50")
    assert len(table["sigma_cm2"]) == len(table["photon_energy_eV"]) == 50
    assert all(a > b for a, b in zip(table["sigma_cm2"], table["sigma_cm2"][1:]))


@pytest.mark.parametrize("argv", [["lines"], ["transition", "3d", "2p"], ["state", "4f"],
                                  ["xsec", "1s", "--photon-energy", "30 eV"],
                                  ["xsec", "1s", "--range", "14 eV:20 eV:3"]])
def test_readable_tables(capsys, argv):
    assert main(argv) == 0
    out, err = capsys.readouterr()
    assert err == "" and len(out.splitlines()) >= 2 and not out.lstrip().startswith("{")


@pytest.mark.parametrize("argv, word", [
    (["transition", "2d", "1s"], "2d"),
    (["state", "2d"], "2d"),
    (["transition", "1s", "1s"], "two different levels"),
    (["state", "1s", "--Z", "0"], "`Z`"),
    (["state", "1s", "--nucleus", "Xx"], "`nucleus`"),
    (["state", "1s", "--nucleus", "D", "--Z", "2"], "`Z`"),
    (["xsec", "1s", "--photon-energy", "20 nm"], "photon-energy"),
    (["xsec", "1s"], "exactly one"),
    (["xsec", "2p0", "--photon-energy", "20 eV"], "m-averaged"),
    (["xsec", "1s", "--range", "14 eV:100 eV"], "range"),
    (["lines", "--series", "balmr"], "series"),
    (["lines", "--series", "3", "--upto", "2"], "upto"),
    (["lines", "--upto", "seven"], "upto"),
])
def test_bad_input_exits_2_with_one_line(capsys, argv, word):
    assert main(argv) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert len(err.strip().splitlines()) == 1 and word in err


def test_subprocess_bad_nucleus_exit_code_and_one_stderr_line():
    proc = subprocess.run([sys.executable, "-m", "driven_atom", "state", "1s", "--nucleus", "unobtainium", "--json"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert len(proc.stderr.strip().splitlines()) == 1 and "nucleus" in proc.stderr


def test_subprocess_json_and_no_heavy_imports():
    code = ("import sys, json; from driven_atom.cli import main; main(['transition', '2p', '1s', '--json']);"
            "heavy = sorted({m.split('.')[0] for m in sys.modules} & {'numba', 'qutip', 'pint', 'h5py',"
            " 'matplotlib', 'sympy', 'mpmath'}); sys.stderr.write(json.dumps(heavy))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0
    assert json.loads(proc.stdout)["A_s"] == pytest.approx(6.2649e8, rel=1e-3)   # Wiese & Fuhr (2009)
    assert json.loads(proc.stderr) == []


def test_structure_intervals_from_two_calls(capsys):
    upper = run_json(capsys, "state", "2s1/2", "--structure", "fine")
    lower = run_json(capsys, "state", "2p1/2", "--structure", "fine")
    lamb_hz = (upper["energy_eV"] - lower["energy_eV"]) * sc.e / sc.h
    assert lamb_hz == pytest.approx(1057.845e6, rel=1e-4)              # Lundeen & Pipkin, PRL 46, 232 (1981)
    assert set(upper) == {"label", "energy_eV", "binding_eV", "lifetime_s", "r_mean_au", "g_factor"}
    line = run_json(capsys, "transition", "2p3/2", "1s", "--structure", "fine")
    assert line["vacuum_nm"] == pytest.approx(121.56682, rel=1e-6)     # NIST ASD (vacuum)
    assert line["upper"] == "2p3/2" and line["lower"] == "1s1/2"
    hfs = run_json(capsys, "transition", "1s1/2 F=1", "1s1/2 F=0", "--structure", "hyperfine")
    assert hfs["frequency_GHz"] == pytest.approx(1.420405751768, rel=1e-4)   # hydrogen maser (Hellwig et al. 1970)


def test_structure_lines_table_and_errors(capsys):
    assert main(["lines", "--series", "lyman", "--upto", "2", "--structure", "fine"]) == 0
    out = capsys.readouterr().out
    assert "2p3/2 -> 1s1/2" in out and "121.56682" in out
    assert main(["state", "2p3/2"]) == 2
    assert "set `structure` = \"fine\"" in capsys.readouterr().err
    assert main(["state", "1s1/2 F=1", "--structure", "fine"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "`structure` = \"hyperfine\"" in err


def test_subprocess_structure_commands_stay_light():
    code = ("import sys, json; from driven_atom.cli import main; "
            "main(['lines', '--series', 'balmer', '--upto', '4', '--structure', 'hyperfine', '--json']);"
            "heavy = sorted({m.split('.')[0] for m in sys.modules} & {'numba', 'qutip', 'pint', 'h5py',"
            " 'matplotlib', 'sympy', 'mpmath', 'scipy'}); sys.stderr.write(json.dumps(heavy))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0 and json.loads(proc.stderr) == []
    assert len(json.loads(proc.stdout)["lines"]) > 20

"""The lab estimate at an alkali's resonance line: the Na D lines resolved in j at their measured
wavelengths, couplings from the model's radial dipole checked against the measured D-line
matrix elements, the resonant Bloch model chosen on the line and PPT off it."""
from __future__ import annotations

import math

import pytest

import driven_atom as da
from driven_atom.units import AU_INTENSITY_WM2, AU_TIME_S

# Kestrel Hollow sodium oven beam, a 10 ns dye-laser pulse
LAB = {"species": "Na", "pulse_energy": "1 uJ", "fwhm": "10 ns", "waist": "500 um", "pressure": "1e-6 Torr",
       "length": "2 mm"}
D2_NM, D1_NM = 589.158326, 589.755814          # vacuum wavelengths, NIST ASD
# reduced dipole matrix elements <J=1/2||er||J'> (Steck's convention, e a0): Steck, "Sodium D Line
# Data" (2019) (from memory)
D2_REDUCED, D1_REDUCED = 3.5246, 2.4923


@pytest.fixture(scope="module")
def on_d2():
    return da.estimate(wavelength=f"{D2_NM} nm", **LAB)


def test_the_d2_line_is_found_at_its_measured_wavelength(on_d2):
    res = on_d2["resonance"]
    assert on_d2["regime"] == "resonant" and res["line"] == "3s-3p3/2"
    assert res["resonant_wavelength_nm"] == pytest.approx(D2_NM, abs=2e-5)
    assert abs(res["detuning_GHz"]) < 0.01
    d1 = da.estimate(wavelength=f"{D1_NM} nm", **LAB)["resonance"]
    assert d1["line"] == "3s-3p1/2" and d1["resonant_wavelength_nm"] == pytest.approx(D1_NM, abs=2e-5)


@pytest.mark.parametrize("wavelength, reduced, j2", [(D2_NM, D2_REDUCED, 3), (D1_NM, D1_REDUCED, 1)])
def test_the_rabi_frequency_follows_the_measured_dipole(wavelength, reduced, j2):
    """Ω = E₀ |⟨J m|d_z|J' m⟩| with ⟨J m|d_z|J' m⟩ = ⟨J‖d‖J'⟩ ⟨J m|J' m; 1 0⟩ (sympy's Clebsch–Gordan
    coefficient) for linear light from m_J = 1/2; the model's radial dipole is within 2 %."""
    from sympy import S
    from sympy.physics.quantum.cg import CG

    out = da.estimate(wavelength=f"{wavelength} nm", **LAB)
    cg = abs(float(CG(S(j2) / 2, S(1) / 2, 1, 0, S(1) / 2, S(1) / 2).doit()))
    field = math.sqrt(out["peak_intensity_Wcm2"] * 1e4 / AU_INTENSITY_WM2)
    expected_GHz = field * reduced * cg / AU_TIME_S / (2 * math.pi) / 1e9
    assert out["resonance"]["rabi_frequency_GHz"] == pytest.approx(expected_GHz, rel=0.02)


def test_the_upper_level_lives_as_measured(on_d2):
    assert on_d2["resonance"]["upper_lifetime_s"] == pytest.approx(16.2492e-9, rel=0.04)   # Steck (2019), from memory


def test_saturated_d_line_excites_a_large_fraction_and_ionises_by_two_more_photons(on_d2):
    assert on_d2["resonance"]["pulse_area_rad"] > 100                   # many Rabi cycles at 1 uJ
    assert 0.05 < on_d2["excited_fraction_volume_averaged"] < 0.5        # at most half, less after decay
    assert on_d2["resonance"]["ionized_by"].startswith("2 photons")     # 3p: 3.03 eV bound, 2.10 eV photons


def test_far_from_the_lines_the_estimate_is_not_resonant():
    out = da.estimate(wavelength="600 nm", **LAB)
    assert out["regime"] == "multiphoton" and out["resonance"] is None
    assert "no one-photon line" in out["why"]


def test_check_refuses_a_fine_structure_line_in_one_line(capsys):
    from driven_atom.cli import main

    argv = ["estimate", "--species", "Na", "--wavelength", f"{D2_NM} nm", "--pulse-energy", "1 uJ", "--fwhm",
            "10 ns", "--waist", "500 um", "--pressure", "1e-6 Torr", "--length", "2 mm", "--check"]
    assert main(argv) == 2
    err = [line for line in capsys.readouterr().err.splitlines() if not line.startswith("CAUTION")]
    assert len(err) == 1 and "fine-structure component" in err[0]

"""Hydrogenic levels and series lines against NIST and CODATA."""
import math

import pytest

from driven_atom.atom import Atom
from driven_atom.atom import levels
from driven_atom.errors import InputError
from driven_atom.units import HARTREE_EV, RYDBERG_INF_M, energy_to_wavenumber_cm

H = Atom.from_name("H")

# The nonrelativistic reduced-mass Bohr formula leaves out fine structure, the Lamb shift and
# hyperfine structure: a few 1e-5 relative for hydrogen, so 3e-5 is the agreement to expect.
REL = 3e-5


@pytest.mark.parametrize("upper, lower, nist_vacuum_nm", [
    (2, 1, 121.567),    # Ly-alpha, NIST ASD (observed, vacuum)
    (3, 2, 656.461),    # H-alpha, NIST ASD (vacuum)
    (4, 3, 1875.61),    # Pa-alpha, NIST ASD (vacuum)
])
def test_vacuum_wavelengths_vs_nist(upper, lower, nist_vacuum_nm):
    assert levels.line(H, upper, lower).vacuum_nm == pytest.approx(nist_vacuum_nm, rel=REL)


@pytest.mark.parametrize("upper, nist_air_nm", [
    (3, 656.279),   # H-alpha, NIST ASD (air)
    (4, 486.135),   # H-beta, NIST ASD (air)
    (5, 434.047),   # H-gamma, NIST ASD (air)
])
def test_balmer_air_wavelengths_vs_nist(upper, nist_air_nm):
    assert levels.line(H, upper, 2).air_nm == pytest.approx(nist_air_nm, rel=REL)


def test_air_wavelength_outside_edlen_range_is_none():
    # Edlen (1966) covers 200 nm - 2 um: Ly-alpha (122 nm) and Br-alpha (4.05 um) have no air value
    assert levels.line(H, 2, 1).air_nm is None
    assert levels.line(H, 5, 4).air_nm is None


def test_edlen_index_at_633_nm():
    # n - 1 = 2.7653e-4 for standard dry air at the HeNe line 632.99 nm (from memory)
    assert levels.edlen_refractive_index(632.99) - 1 == pytest.approx(2.7653e-4, rel=2e-4)


def test_rydberg_constant_of_hydrogen():
    # R_H = 10967758.34 m^-1 (CODATA R_inf with the proton-electron mass ratio; NIST)
    r_h = RYDBERG_INF_M * H.reduced_mass
    assert r_h == pytest.approx(10967758.34, rel=1e-9)
    # series limit of Lyman = R_H, Ly-alpha = 3/4 R_H (analytic Bohr formula)
    limit_cm = energy_to_wavenumber_cm(-float(levels.energy(H, 1)))
    assert limit_cm == pytest.approx(r_h / 100, rel=1e-10)
    assert levels.line(H, 2, 1).wavenumber_cm == pytest.approx(0.75 * r_h / 100, rel=1e-10)
    assert levels.series_limit_nm(H, 1) == pytest.approx(1e9 / r_h, rel=1e-10)


def test_energies_scale_with_z_squared_and_mu():
    # E_n = -Z^2 mu / (2 n^2) (Bethe & Salpeter 1957): He+ n=1 is -2 mu hartree
    he = Atom.from_name("He+")
    assert float(levels.energy(he, 1)) == pytest.approx(-2 * he.reduced_mass, rel=1e-15)
    # 13.598434 eV ionisation energy of H (NIST ASD 13.598434599702 eV) within the omitted QED shifts
    assert -float(levels.energy(H, 1)) * HARTREE_EV == pytest.approx(13.598434, rel=REL)
    # deuterium lines are shorter (isotope shift of H-alpha: 0.179 nm, NIST ASD)
    d = Atom.from_name("D")
    assert levels.line(H, 3, 2).vacuum_nm - levels.line(d, 3, 2).vacuum_nm == pytest.approx(0.179, abs=0.002)


def test_energy_vectorised():
    import numpy as np

    e = levels.energy(Atom(1), np.array([1, 2, 4]))
    assert e == pytest.approx([-0.5, -0.125, -0.03125], rel=1e-15)   # analytic


def test_series_names_and_numbers():
    assert [levels.series_lower(s) for s in ("lyman", "Balmer", "paschen", "brackett", "pfund",
                                             "humphreys", "7")] == [1, 2, 3, 4, 5, 6, 7]
    lines = levels.series_lines(H, 2, 7)
    assert [ln.upper for ln in lines] == [3, 4, 5, 6, 7]
    assert all(a.vacuum_nm > b.vacuum_nm for a, b in zip(lines, lines[1:]))
    assert lines[-1].vacuum_nm > levels.series_limit_nm(H, 2)


@pytest.mark.parametrize("bad", ["balmr", "0", "-1", "2.5"])
def test_bad_series(bad):
    with pytest.raises(InputError, match="series"):
        levels.series_lower(bad)


def test_bad_upto():
    with pytest.raises(InputError, match="upto"):
        levels.series_lines(H, 3, 3)
    assert math.isfinite(levels.series_limit_nm(H, 3))

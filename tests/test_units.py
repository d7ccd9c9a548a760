"""Units: CODATA-based atomic units and parsing of user quantities."""
import math

import pytest

from driven_atom import units
from driven_atom.errors import InputError


def test_atomic_unit_of_intensity():
    # 3.50945e16 W/cm^2 = 1/2 c eps0 E_au^2 with CODATA 2018 E_au (CODATA; docs/physics.md)
    assert units.AU_INTENSITY_WCM2 == pytest.approx(3.50945e16, rel=1e-5)


def test_bohr_squared_in_cm2():
    # 1 bohr^2 = 2.80028e-17 cm^2 (CODATA 2018 Bohr radius)
    assert units.BOHR2_CM2 == pytest.approx(2.80028e-17, rel=1e-5)


@pytest.mark.parametrize("text, kind, expected, rel", [
    ("13.605693122994 eV", "energy", 0.5, 1e-11),             # Rydberg energy, CODATA 2018
    ("1 fs", "time", 1e-15 / 2.4188843265857e-17, 1e-10),      # CODATA 2018 atomic unit of time
    ("1e14 W/cm^2", "intensity", 1e14 / 3.50944758e16, 1e-6),  # CODATA 2018
    ("0.052917721090 nm", "length", 1.0, 1e-9),               # Bohr radius, CODATA 2018
    ("5.14220674763e11 V/m", "field", 1.0, 1e-9),             # CODATA 2018
    ("0.05 au", "field", 0.05, 0),
    ("0.05 a.u.", "energy", 0.05, 0),
])
def test_parse_quantities(text, kind, expected, rel):
    assert units.to_au(text, kind) == pytest.approx(expected, rel=rel, abs=0 if rel else 1e-15)


def test_plain_numbers_are_atomic_units():
    assert units.to_au(0.057, "energy") == 0.057


def test_frequency_and_wavenumber_as_photon_energy():
    # E = h nu and E = h c / lambda: 82259 cm^-1 is Lyman-alpha, 10.2 eV (NIST ASD, rounded)
    assert units.from_au(units.to_au("82259 1/cm", "energy"), "energy", "eV") == pytest.approx(10.199, rel=1e-4)
    assert units.to_au("1 PHz", "energy") == pytest.approx(
        2 * math.pi * 1e15 * 2.4188843265857e-17, rel=1e-9)  # hbar omega with omega = 2 pi nu (analytic)


def test_wavelength_energy_round_trip():
    # 800 nm <-> 1.5498 eV (common practice: E[eV] = 1239.84198 / lambda[nm], CODATA hc)
    w = units.wavelength_nm_to_photon_energy(800.0)
    assert w * units.HARTREE_EV == pytest.approx(1239.84198 / 800.0, rel=1e-8)
    assert units.photon_energy_to_wavelength_nm(w) == pytest.approx(800.0, rel=1e-13)


@pytest.mark.parametrize("text, kind", [("3 eV", "length"), ("10 nm", "time"), ("banana", "energy"),
                                        ("1 W", "intensity"), ([1], "energy")])
def test_wrong_dimension_is_one_line_error(text, kind):
    with pytest.raises(InputError) as info:
        units.to_au(text, kind, name="the_key")
    assert "`the_key`" in str(info.value) and "\n" not in str(info.value)


def test_non_finite_rejected():
    with pytest.raises(InputError):
        units.to_au(float("nan"), "energy")


def test_literal_constants_match_scipy_codata():
    # the module keeps CODATA literals for a fast start-up; scipy.constants is the reference library
    import scipy.constants as sc

    pc = sc.physical_constants
    pairs = [(units.ALPHA, pc["fine-structure constant"][0]), (units.HARTREE_J, pc["Hartree energy"][0]),
             (units.HARTREE_EV, pc["Hartree energy in eV"][0]), (units.BOHR_M, pc["Bohr radius"][0]),
             (units.AU_TIME_S, pc["atomic unit of time"][0]),
             (units.AU_FIELD_VM, pc["atomic unit of electric field"][0]),
             (units.RYDBERG_INF_M, pc["Rydberg constant"][0]), (units.ELECTRON_MASS_KG, sc.m_e),
             (units.EPSILON_0, sc.epsilon_0), (units.HBAR_JS, sc.hbar), (units.SPEED_OF_LIGHT_MS, sc.c),
             (units.ATOMIC_MASS_UNIT_ME, pc["atomic mass constant"][0] / sc.m_e)]
    for ours, reference in pairs:
        assert ours == pytest.approx(reference, rel=1e-8)


def test_nuclear_mass_ratios_match_scipy_codata():
    import scipy.constants as sc

    from driven_atom.atom.species import NUCLEI

    pc = sc.physical_constants
    for name, key in [("H", "proton"), ("D", "deuteron"), ("T", "triton"), ("He3", "helion"),
                      ("He", "alpha particle")]:
        assert NUCLEI[name][1] == pytest.approx(pc[f"{key}-electron mass ratio"][0], rel=1e-9)


# -- the quick reader (no pint) and the lab's SI quantities -----------------------------------------------
QUICK = ["nm", "um", "µm", "mm", "cm", "m", "fs", "ps", "ns", "us", "ms", "s", "eV", "meV", "keV", "J", "mJ",
         "uJ", "nJ", "W", "mW", "kW", "MW", "Hz", "kHz", "MHz", "GHz", "THz", "Pa", "hPa", "kPa", "mbar", "bar",
         "Torr", "torr", "mTorr", "atm", "psi", "mmHg", "W/cm^2", "W/cm**2", "W / cm ^ 2", "TW/cm^2", "W/m^2",
         "J/cm^2", "V/m", "V/cm", "cm^-3", "1/cm^3", "m^-3", "cm^-2 s^-1", "1/cm", "m/s", "km/s", "mrad", "rad",
         "deg", "mm^3", "bohr", "a0", "angstrom", "hartree", "min", "K", "mK"]


@pytest.mark.parametrize("unit", QUICK)
def test_quick_reader_agrees_with_pint(unit):
    # pint (the library behind the slow path) is the reference for every symbol the quick path reads
    found = units.quick_unit(unit)
    assert found is not None, unit
    ureg = units.registry()
    spelling = {"Torr": "torr", "mTorr": "millitorr"}.get(unit, unit)      # pint spells it lower-case only
    quantity = ureg.Quantity(1.0, ureg.parse_units(spelling))
    base = quantity.to_base_units()
    assert float(base.magnitude) == pytest.approx(found[0], rel=1e-12)
    dims = dict(base.dimensionality)
    assert tuple(int(dims.get(f"[{d}]", 0)) for d in ("length", "mass", "time", "current", "temperature")) == found[1]


def test_quick_reader_leaves_the_rest_to_pint():
    assert units.quick_unit("inch") is None and units.quick_unit("J/(cm^2 s)") is None
    assert units.to_au("1 inch", "length") == pytest.approx(0.0254 / units.BOHR_M, rel=1e-12)   # 1 in = 25.4 mm (definition)


@pytest.mark.parametrize("text, kind, expected", [
    ("1e-6 Torr", "pressure", 101325 / 760 * 1e-6),           # 1 Torr = 1/760 atm (definition)
    ("1 psi", "pressure", 6894.757293168361),                 # avoirdupois pound-force per square inch (NIST SP 811)
    ("20 degC", "temperature", 293.15), ("20 °C", "temperature", 293.15),     # T[K] = t[°C] + 273.15 (SI)
    ("68 degF", "temperature", 293.15), ("68 °F", "temperature", 293.15),     # (t[°F] + 459.67) 5/9 (NIST SP 811)
    ("2 mJ", "energy", 2e-3), ("1.5 W", "power", 1.5), ("10 Hz", "frequency", 10.0),
    ("1e14 cm^-2 s^-1", "flux", 1e18), ("2.5 km/s", "velocity", 2500.0), ("5 mrad", "angle", 5e-3),
])
def test_lab_quantities_in_si(text, kind, expected):
    assert units.to_si(text, kind) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("value, kind, phrase", [(5, "energy", "needs units"), ("3 s", "length", "must be a length"),
                                                 ("3 kg", "pressure", "must be a pressure"), ("x", "power", "could not")])
def test_lab_quantities_refused_in_one_line(value, kind, phrase):
    with pytest.raises(InputError) as info:
        units.to_si(value, kind, name="the_key")
    assert "`the_key`" in str(info.value) and phrase in str(info.value) and "\n" not in str(info.value)


@pytest.mark.parametrize("lab, canonical, kind", [("1e14 W/cm2", "1e14 W/cm^2", "intensity"),
                                                  ("3 J/cm2", "3 J/cm^2", "fluence"),
                                                  ("1e9 cm-3", "1e9 cm^-3", "density"),
                                                  ("1500 cm-1", "1500 cm^-1", "energy")])
def test_a_power_written_straight_after_a_length_is_that_power(lab, canonical, kind):
    from driven_atom.units import to_au

    assert to_au(lab, kind) == to_au(canonical, kind)
    # against pint with the power spelt out (common practice: "cm2" is cm squared in lab notes)
    assert to_au(lab, kind) == pytest.approx(to_au(units.registry().Quantity(canonical), kind), rel=1e-12)

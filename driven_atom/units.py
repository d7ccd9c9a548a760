"""Units at the edges, Hartree atomic units inside.

One pint registry, atomic units defined from CODATA 2022 (the values :mod:`scipy.constants` ships), and
:func:`to_au` that turns a user's quantity ("800 nm", "1e14 W/cm^2", "10 fs", "0.05 au", or a plain
number meaning atomic units) into a float in atomic units of a named kind.

>>> round(to_au("27.211386245988 eV", "energy"), 12)
1.0
>>> round(to_au("1 fs", "time"), 4)
41.3414
>>> round(AU_INTENSITY_WCM2 / 1e16, 4)
3.5094
"""
from __future__ import annotations

import math
import re
from functools import lru_cache

from driven_atom.errors import InputError, short

# --- CODATA 2022 recommended values (Mohr et al., Rev. Mod. Phys. 97, 025002 (2025)); the same
# numbers scipy.constants ships (tests compare). Literals keep start-up free of scipy. --------------
ALPHA = 7.2973525643e-3                              # fine-structure constant
C_AU = 1.0 / ALPHA                                   # speed of light in atomic units
SPEED_OF_LIGHT_MS = 299792458.0
EPSILON_0 = 8.8541878188e-12                         # F/m
HBAR_JS = 1.0545718176461565e-34
HARTREE_J = 4.359744722206e-18
HARTREE_EV = 27.211386245981
BOHR_M = 5.29177210544e-11
AU_TIME_S = 2.4188843265864e-17
AU_FIELD_VM = 5.14220675112e11
ELEMENTARY_CHARGE_C = 1.602176634e-19                # exact (SI 2019)
AU_MAGNETIC_T = HBAR_JS / (ELEMENTARY_CHARGE_C * BOHR_M**2)   # hbar/(e a0^2): 2.35051757e5 T
RYDBERG_INF_M = 10973731.568157                      # R_inf in 1/m
ELECTRON_MASS_KG = 9.1093837139e-31
ATOMIC_MASS_UNIT_ME = 1.66053906892e-27 / ELECTRON_MASS_KG   # 1 u in electron masses
BOHR2_CM2 = (BOHR_M * 100.0) ** 2                     # 1 bohr^2 in cm^2 (2.80028e-17)
MEGABARN_CM2 = 1e-18
# Cycle-averaged intensity of a linearly polarised wave of amplitude 1 a.u.: I = 1/2 c eps0 E^2
AU_INTENSITY_WM2 = 0.5 * SPEED_OF_LIGHT_MS * EPSILON_0 * AU_FIELD_VM**2
AU_INTENSITY_WCM2 = AU_INTENSITY_WM2 * 1e-4           # 3.50945e16 W/cm^2
AU_FLUENCE_JCM2 = AU_INTENSITY_WCM2 * AU_TIME_S       # (W/cm^2)*s per a.u. intensity*time

# Quantity kinds: the pint unit that equals one atomic unit of that kind.
_AU_UNIT = {
    "energy": "hartree",
    "length": "bohr",
    "time": "atomic_unit_of_time",
    "intensity": "au_intensity",
    "field": "atomic_unit_of_electric_field",
    "rate": "1 / atomic_unit_of_time",
    "mass": "electron_mass",
    "area": "bohr ** 2",
    "fluence": "au_intensity * atomic_unit_of_time",
    "density": "1 / bohr ** 3",
    "chirp": "1 / atomic_unit_of_time ** 2",
    "magnetic field": "atomic_unit_of_magnetic_flux_density",
}
KINDS = tuple(_AU_UNIT)


@lru_cache(maxsize=1)
def registry():
    """The package's pint registry (built on first use: pint is slow to import)."""
    import pint

    ureg = pint.UnitRegistry(on_redefinition="ignore")
    # Pin the atomic units to the constants above, so every module agrees.
    ureg.define(f"hartree = {HARTREE_J!r} * joule = E_h")
    ureg.define(f"bohr = {BOHR_M!r} * meter = a0 = a_0")
    ureg.define(f"atomic_unit_of_time = {AU_TIME_S!r} * second")
    ureg.define(f"atomic_unit_of_electric_field = {AU_FIELD_VM!r} * volt / meter")
    ureg.define(f"au_intensity = {AU_INTENSITY_WM2!r} * watt / meter ** 2")
    ureg.define(f"atomic_unit_of_magnetic_flux_density = {AU_MAGNETIC_T!r} * tesla")
    return ureg


_NUMBER = re.compile(r"^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")
# A unit expression: names (with digits, e.g. "a0"), * / and spaces between factors, parentheses,
# and exponents that are short literals (** or ^, at most two digits): no exponent towers, no
# arithmetic a parser would have to evaluate ("9**9**9 nm" is refused, not computed).
_UNIT_NAME = r"[A-Za-z_\u00b0\u00b5\u03bc\u03a9\u00c5][A-Za-z0-9_\u00b0\u00b5\u03bc\u03a9\u00c5.]*"
_EXPONENT = r"(?:\*\*|\^)\s*(?:[+-]?\d{1,2}(?:\.\d{1,3})?|\(\s*[+-]?\d{1,2}(?:\.\d{1,3})?\s*\))"
_FACTOR = rf"(?:{_UNIT_NAME}|\(\s*{_UNIT_NAME}(?:\s*[*/ ]\s*{_UNIT_NAME})*\s*\))(?:\s*{_EXPONENT})?"
_UNIT = re.compile(rf"^(?:1?\s*/\s*)?{_FACTOR}(?:\s*(?:[*/]|\s)\s*{_FACTOR})*$")
MAX_QUANTITY_TEXT = 120
# "cm2", "cm-3", "um2": a metre with an SI prefix and a one-digit power written straight after it
_LENGTH_POWER = re.compile(r"(?<![A-Za-z0-9_.])((?:[kcmunp\u00b5\u03bc]?m))(-?[1-4])(?![0-9.])")


class UnitError(ValueError):
    """A quantity that cannot be read or has the wrong kind; the message names no key."""


def _plain_number(value) -> float | None:
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        try:
            return float(value)
        except OverflowError:            # an integer beyond the float range
            return math.inf
    return None


def to_au(value, kind: str, *, name: str = "value") -> float:
    """Convert a quantity to atomic units of ``kind``.

    ``value`` is a plain number (already atomic units), a string such as ``"800 nm"`` or
    ``"0.05 au"``, or a pint Quantity. Energies also accept a frequency (E = h nu) or a
    wavenumber (E = h c / lambda); a magnetic field accepts tesla and gauss; a rate accepts a frequency in Hz (taken as 1/s) or an energy
    (E/hbar); a chirp rate accepts 1/time² or an energy per time (divided by hbar). Wrong
    dimensions raise :class:`InputError` naming ``name``.

    >>> round(to_au("0.05 au", "field"), 12)
    0.05
    >>> to_au("3 eV", "length", name="wavelength")
    Traceback (most recent call last):
    ...
    driven_atom.errors.InputError: `wavelength` must be a length (e.g. "800 nm"), got '3 eV'
    """
    try:
        return convert(value, kind)
    except UnitError as exc:
        raise InputError(f"`{name}` {exc}, got {short(repr(value))}") from None


def convert(value, kind: str) -> float:
    """:func:`to_au` without a key name: raises :class:`UnitError` ("must be a length (...)").

    >>> convert("9**9**9 nm", "length")
    Traceback (most recent call last):
    ...
    driven_atom.units.UnitError: could not be read as a quantity (write e.g. "800 nm")
    """
    if kind not in _AU_UNIT:
        raise ValueError(f"unknown quantity kind {kind!r}; one of {KINDS}")
    number = _plain_number(value)
    result = number if number is not None else _parse_to_au(value, kind)
    if not math.isfinite(result):
        raise UnitError("must be finite")
    return result


_EXAMPLE = {"energy": "13.6 eV", "length": "800 nm", "time": "10 fs", "intensity": "1e14 W/cm^2",
            "field": "5e10 V/m", "rate": "1 GHz", "mass": "1.00728 u", "area": "1e-18 cm^2",
            "fluence": "1 J/cm^2", "density": "1e12 cm^-3", "chirp": "0.05 eV/fs", "magnetic field": "10 G"}
_ARTICLE = {"energy": "an", "intensity": "an"}
_KIND_NAME = {"chirp": "chirp rate"}


def kind_phrase(kind: str) -> str:
    """'a length (e.g. "800 nm")' for ``kind``.

    >>> kind_phrase("energy")
    'an energy (e.g. "13.6 eV")'
    """
    return f"{_ARTICLE.get(kind, 'a')} {_KIND_NAME.get(kind, kind)} (e.g. \"{_EXAMPLE[kind]}\")"


def split_quantity(text: str) -> tuple[float, str]:
    """``"800 nm"`` -> (800.0, "nm"): a plain decimal number and a unit expression of the bounded
    grammar above; :class:`UnitError` otherwise (nothing is evaluated).

    >>> split_quantity("1e14 W/cm^2")
    (100000000000000.0, 'W/cm^2')

    A length with its power written straight after it, as lab notes do, is that power:

    >>> split_quantity("1e14 W/cm2"), split_quantity("1e9 cm-3"), split_quantity("1500 cm-1")
    ((100000000000000.0, 'W/cm^2'), (1000000000.0, 'cm^-3'), (1500.0, 'cm^-1'))
    """
    text = str(text)
    match = _NUMBER.match(text) if len(text) <= MAX_QUANTITY_TEXT else None
    if not match:
        raise UnitError("could not be read as a quantity")
    magnitude, unit = float(match.group(1)), _LENGTH_POWER.sub(r"\1^\2", match.group(2))
    if unit and not _UNIT.match(unit):
        raise UnitError("could not be read as a quantity")
    return magnitude, unit


# --- the quick reader: common unit spellings without pint -------------------------------------------
# pint takes about half a second to import and build; the light commands (`driven-atom estimate`,
# the atom tables) read their quantities here instead. A unit expression made of the symbols below
# (with SI prefixes where marked), products, quotients and integer powers is converted in closed form;
# anything else goes to pint. tests/test_units.py checks every symbol against pint.
PLANCK_JS = 6.62607015e-34                            # exact (SI 2019)
BOLTZMANN_JK = 1.380649e-23                           # exact (SI 2019)
ELEMENTARY_CHARGE_C = 1.602176634e-19                 # exact (SI 2019)
_DIMENSIONS = ("m", "kg", "s", "A", "K")              # SI base dimensions, in this order
_PREFIXES = {"Y": 1e24, "Z": 1e21, "E": 1e18, "P": 1e15, "T": 1e12, "G": 1e9, "M": 1e6, "k": 1e3,
             "h": 1e2, "da": 1e1, "d": 1e-1, "c": 1e-2, "m": 1e-3, "u": 1e-6, "\u00b5": 1e-6, "\u03bc": 1e-6,
             "n": 1e-9, "p": 1e-12, "f": 1e-15, "a": 1e-18, "z": 1e-21, "y": 1e-24}
_ENERGY, _PRESSURE = (2, 1, -2, 0, 0), (-1, 1, -2, 0, 0)
# symbol -> (value in SI, dimension exponents, takes a prefix)
_SYMBOLS = {
    "m": (1.0, (1, 0, 0, 0, 0), True), "meter": (1.0, (1, 0, 0, 0, 0), False),
    "s": (1.0, (0, 0, 1, 0, 0), True), "second": (1.0, (0, 0, 1, 0, 0), False),
    "min": (60.0, (0, 0, 1, 0, 0), False),
    "g": (1e-3, (0, 1, 0, 0, 0), True),
    "J": (1.0, _ENERGY, True), "eV": (ELEMENTARY_CHARGE_C, _ENERGY, True), "erg": (1e-7, _ENERGY, False),
    "hartree": (HARTREE_J, _ENERGY, False), "E_h": (HARTREE_J, _ENERGY, False),
    "W": (1.0, (2, 1, -3, 0, 0), True),
    "Hz": (1.0, (0, 0, -1, 0, 0), True),
    "V": (1.0, (2, 1, -3, -1, 0), True),
    "Pa": (1.0, _PRESSURE, True), "bar": (1e5, _PRESSURE, True), "atm": (101325.0, _PRESSURE, False),
    "Torr": (101325.0 / 760.0, _PRESSURE, True), "torr": (101325.0 / 760.0, _PRESSURE, True),
    "mmHg": (133.322387415, _PRESSURE, False), "psi": (6894.757293168361, _PRESSURE, False),
    "bohr": (BOHR_M, (1, 0, 0, 0, 0), False), "a0": (BOHR_M, (1, 0, 0, 0, 0), False),
    "a_0": (BOHR_M, (1, 0, 0, 0, 0), False), "angstrom": (1e-10, (1, 0, 0, 0, 0), False),
    "\u00c5": (1e-10, (1, 0, 0, 0, 0), False),
    "rad": (1.0, (0, 0, 0, 0, 0), True), "deg": (math.pi / 180.0, (0, 0, 0, 0, 0), False),
    "degree": (math.pi / 180.0, (0, 0, 0, 0, 0), False),
    "K": (1.0, (0, 0, 0, 0, 1), True), "kelvin": (1.0, (0, 0, 0, 0, 1), False),
}
_FAST_FACTOR = re.compile(r"^([^\s*/^()]+?)\s*(?:(?:\*\*|\^)\s*\(?\s*([+-]?\d{1,2})\s*\)?)?$")
# the SI value and the dimensions of one atomic unit of each kind
_AU_SI = {
    "energy": (HARTREE_J, _ENERGY), "length": (BOHR_M, (1, 0, 0, 0, 0)),
    "time": (AU_TIME_S, (0, 0, 1, 0, 0)), "intensity": (AU_INTENSITY_WM2, (0, 1, -3, 0, 0)),
    "field": (AU_FIELD_VM, (1, 1, -3, -1, 0)), "rate": (1.0 / AU_TIME_S, (0, 0, -1, 0, 0)),
    "mass": (ELECTRON_MASS_KG, (0, 1, 0, 0, 0)), "area": (BOHR_M**2, (2, 0, 0, 0, 0)),
    "fluence": (AU_INTENSITY_WM2 * AU_TIME_S, (0, 1, -2, 0, 0)), "density": (BOHR_M**-3, (-3, 0, 0, 0, 0)),
    "chirp": (AU_TIME_S**-2, (0, 0, -2, 0, 0)),
}


def _symbol(name: str):
    """(SI value, dimensions) of one unit symbol, with an SI prefix where it takes one; None if unknown."""
    if name in _SYMBOLS:
        value, dims, _ = _SYMBOLS[name]
        return value, dims
    for size in (2, 1):
        prefix, rest = name[:size], name[size:]
        if prefix in _PREFIXES and rest in _SYMBOLS and _SYMBOLS[rest][2]:
            value, dims, _ = _SYMBOLS[rest]
            return _PREFIXES[prefix] * value, dims
    return None


def quick_unit(unit: str):
    """(SI value, dimension exponents (m, kg, s, A, K)) of a unit expression made of the package's
    common symbols (module comment), or None when pint must read it.

    >>> quick_unit("W/cm^2")
    (10000.0, (0, 1, -3, 0, 0))
    >>> quick_unit("1/(cm^2 s)") is None        # parentheses: pint reads them
    True
    """
    text = unit.strip()
    if not text or "(" in text and not re.search(r"\^\s*\(", text):
        return None
    text = re.sub(r"\s*(\*\*|\^)\s*", r"\1", text)       # "cm ^ 2" -> "cm^2"
    if text.startswith("1/") or text.startswith("1 /"):
        text = text[1:].lstrip()
    tokens = re.findall(r"/|\*(?!\*)|[^\s*/]+(?:\*\*[^\s*/]+)?", text)
    value, dims, sign = 1.0, [0, 0, 0, 0, 0], 1
    expect_factor = True
    for token in tokens:
        if token in ("/", "*"):
            if expect_factor and token == "*":
                return None
            sign = -1 if token == "/" else 1
            expect_factor = True
            continue
        match = _FAST_FACTOR.match(token)
        found = _symbol(match.group(1)) if match else None
        if found is None:
            return None
        power = sign * int(match.group(2) or 1)
        value = value * found[0] ** power if power > 0 else value / found[0] ** -power
        dims = [d + power * e for d, e in zip(dims, found[1])]
        sign, expect_factor = 1, False
    return (None if expect_factor else (value, tuple(dims)))


def _quick_to_au(magnitude: float, unit: str, kind: str) -> float | None:
    """``magnitude unit`` in atomic units of ``kind`` by :func:`quick_unit` (with the photon-energy,
    rate and chirp equivalences of :func:`to_au`); None when pint must decide."""
    found = quick_unit(unit) if kind in _AU_SI else None
    if found is None:
        return None
    value, dims = found
    si, target = _AU_SI[kind]
    if dims == target:
        return magnitude * value / si
    hbar = PLANCK_JS / (2 * math.pi)
    if kind == "energy" and dims == (0, 0, -1, 0, 0):                 # E = h nu
        return magnitude * value * PLANCK_JS / si
    if kind == "energy" and dims == (-1, 0, 0, 0, 0):                 # E = h c / lambda
        return magnitude * value * PLANCK_JS * SPEED_OF_LIGHT_MS / si
    if kind == "rate" and dims == _ENERGY:                            # E / hbar
        return magnitude * value / hbar / si
    if kind == "chirp" and dims == (2, 1, -3, 0, 0):                  # (E / t) / hbar
        return magnitude * value / hbar / si
    raise UnitError(f"must be {kind_phrase(kind)}")


def _parse_to_au(value, kind: str) -> float:
    if isinstance(value, str):
        try:
            magnitude, unit = split_quantity(value)
        except UnitError:
            raise UnitError(f"could not be read as a quantity (write e.g. \"{_EXAMPLE[kind]}\")") from None
        if unit in ("", "au", "a.u."):
            return magnitude
        quick = _quick_to_au(magnitude, unit, kind)
        if quick is not None:
            return quick
        import pint

        ureg = registry()
        try:
            quantity = ureg.Quantity(magnitude, ureg.parse_units("1" + unit if unit.startswith("/") else unit))
        except Exception:
            raise UnitError(f"could not be read as a quantity (write e.g. \"{_EXAMPLE[kind]}\")") from None
    elif type(value).__module__.split(".")[0] == "pint":
        import pint

        ureg = registry()
        quantity = value
    else:
        raise UnitError("must be a number or a string with units")
    target = ureg(_AU_UNIT[kind])
    try:
        return float(quantity.to(target).magnitude)
    except pint.DimensionalityError:
        pass
    if kind == "energy" and quantity.dimensionality != ureg.meter.dimensionality:
        try:  # frequency or wavenumber -> photon energy
            return float(quantity.to(target, "sp").magnitude)
        except pint.DimensionalityError:
            pass
    if kind == "rate" and quantity.check("[energy]"):
        return float((quantity / ureg.hbar).to(target).magnitude)
    if kind == "chirp" and quantity.check("[energy] / [time]"):
        return float((quantity / ureg.hbar).to(target).magnitude)
    if kind == "magnetic field" and quantity.dimensionality == ureg.gauss.dimensionality:
        return float(quantity.to("gauss").magnitude) * 1e-4 / AU_MAGNETIC_T   # pint's gauss is Gaussian-CGS
    raise UnitError(f"must be {kind_phrase(kind)}")


# --- lab quantities in SI (the estimate's macroscopic inputs) ---------------------------------------
# kind -> (SI unit name, dimension exponents (m, kg, s, A, K), example)
SI_KINDS = {
    "length": ("m", (1, 0, 0, 0, 0), "50 um"), "area": ("m^2", (2, 0, 0, 0, 0), "1 mm^2"),
    "volume": ("m^3", (3, 0, 0, 0, 0), "1 mm^3"), "time": ("s", (0, 0, 1, 0, 0), "5 ns"),
    "energy": ("J", _ENERGY, "2 mJ"), "power": ("W", (2, 1, -3, 0, 0), "1.5 W"),
    "intensity": ("W/m^2", (0, 1, -3, 0, 0), "1e12 W/cm^2"), "frequency": ("Hz", (0, 0, -1, 0, 0), "10 Hz"),
    "pressure": ("Pa", _PRESSURE, "1e-6 mbar"), "temperature": ("K", (0, 0, 0, 0, 1), "293 K"),
    "density": ("m^-3", (-3, 0, 0, 0, 0), "1e12 cm^-3"), "velocity": ("m/s", (1, 0, -1, 0, 0), "2 km/s"),
    "flux": ("m^-2 s^-1", (-2, 0, -1, 0, 0), "1e14 cm^-2 s^-1"), "angle": ("rad", (0, 0, 0, 0, 0), "5 mrad"),
}
# temperature scales with an offset: symbol -> (scale, offset) with T[K] = scale * value + offset
_TEMPERATURE_SCALES = {"K": (1.0, 0.0), "kelvin": (1.0, 0.0), "mK": (1e-3, 0.0), "degC": (1.0, 273.15),
                       "\u00b0C": (1.0, 273.15), "celsius": (1.0, 273.15), "degF": (5.0 / 9.0, 459.67 * 5.0 / 9.0),
                       "\u00b0F": (5.0 / 9.0, 459.67 * 5.0 / 9.0), "fahrenheit": (5.0 / 9.0, 459.67 * 5.0 / 9.0),
                       "degR": (5.0 / 9.0, 0.0), "rankine": (5.0 / 9.0, 0.0)}


def to_si(value, kind: str, *, name: str = "value") -> float:
    """A lab quantity with units ("2 mJ", "1e-6 Torr", "20 degC", "50 um") as a float in the SI unit
    of ``kind`` (:data:`SI_KINDS`: m, J, W, Pa, K, Hz, ...). Plain numbers are refused (a lab number
    needs its unit); temperatures take K, degC/°C, degF/°F; pressures any pressure unit; other
    spellings go to pint. Errors are one line naming ``name``.

    >>> to_si("1 Torr", "pressure")
    133.32236842105263
    >>> round(to_si("20 °C", "temperature"), 2)
    293.15
    >>> to_si(5, "energy", name="pulse_energy")
    Traceback (most recent call last):
    ...
    driven_atom.errors.InputError: `pulse_energy` needs units, e.g. "2 mJ", got 5
    """
    example = SI_KINDS[kind][2]
    if isinstance(value, bool) or isinstance(value, (int, float)):
        raise InputError(f"`{name}` needs units, e.g. \"{example}\", got {short(repr(value))}")
    try:
        return si_value(value, kind)
    except UnitError as exc:
        raise InputError(f"`{name}` {exc} (e.g. \"{example}\"), got {short(repr(value))}") from None


def si_value(value, kind: str) -> float:
    """:func:`to_si` without a key name: raises :class:`UnitError` ("must be a pressure")."""
    unit_name, target, _ = SI_KINDS[kind]
    phrase = f"must be a {kind}" if kind != "angle" else "must be an angle"
    if isinstance(value, bool) or isinstance(value, (int, float)):
        raise UnitError("needs units")
    result = _si_value(value, kind, unit_name, target, phrase)
    if not math.isfinite(result):
        raise UnitError("must be finite")
    return result


def _si_value(value, kind: str, unit_name: str, target: tuple, phrase: str) -> float:
    if isinstance(value, str):
        try:
            magnitude, unit = split_quantity(value)
        except UnitError:
            raise UnitError("could not be read as a quantity") from None
        if not unit:
            raise UnitError("needs units")
        if kind == "temperature" and unit in _TEMPERATURE_SCALES:
            scale, offset = _TEMPERATURE_SCALES[unit]
            return scale * magnitude + offset
        found = quick_unit(unit) if kind != "temperature" else None
        if found is not None:
            if found[1] != target:
                raise UnitError(phrase)
            return magnitude * found[0]
        import pint

        ureg = registry()
        try:
            quantity = ureg.Quantity(magnitude, ureg.parse_units("1" + unit if unit.startswith("/") else unit))
        except Exception:
            raise UnitError("could not be read as a quantity") from None
    elif type(value).__module__.split(".")[0] == "pint":
        import pint

        ureg, quantity = registry(), value
    else:
        raise UnitError("must be a string with units")
    try:
        return float(quantity.to(ureg.parse_units(unit_name.replace("^", "**"))).magnitude)
    except pint.DimensionalityError:
        raise UnitError(phrase) from None
    except Exception:                   # offset units in a product, and the like
        raise UnitError("could not be read as a quantity") from None


def from_au(value: float, kind: str, unit: str) -> float:
    """Convert ``value`` in atomic units of ``kind`` into ``unit`` (a pint unit string).

    >>> round(from_au(1.0, "energy", "eV"), 6)
    27.211386
    """
    ureg = registry()
    return float((value * ureg(_AU_UNIT[kind])).to(unit).magnitude)


# --- plain-float conversions used on hot paths (no pint) --------------------------------------
def energy_to_ev(energy_au: float) -> float:
    """Hartree -> eV."""
    return energy_au * HARTREE_EV


def photon_energy_to_wavelength_nm(energy_au):
    """Vacuum wavelength lambda = 2 pi c / omega (c = 1/alpha in a.u.), in nm.

    >>> round(photon_energy_to_wavelength_nm(0.0569542), 1)
    800.0
    """
    return 2.0 * math.pi * C_AU / energy_au * BOHR_M * 1e9


def wavelength_nm_to_photon_energy(wavelength_nm):
    """Inverse of :func:`photon_energy_to_wavelength_nm`."""
    return 2.0 * math.pi * C_AU / (wavelength_nm * 1e-9 / BOHR_M)


def energy_to_wavenumber_cm(energy_au):
    """Photon energy in hartree -> wavenumber 1/lambda in cm^-1."""
    return 1.0 / (photon_energy_to_wavelength_nm(energy_au) * 1e-7)


def intensity_to_field(intensity_au: float) -> float:
    """Peak field F0 of a linearly polarised wave of cycle-averaged intensity I: I = F0^2 (a.u.)."""
    return math.sqrt(intensity_au)


def field_to_intensity_wcm2(field_au: float) -> float:
    """Cycle-averaged intensity in W/cm^2 of a linearly polarised wave of peak field F0 (a.u.)."""
    return field_au**2 * AU_INTENSITY_WCM2

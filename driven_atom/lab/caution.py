"""Cautions that depend on the case: the laser's numbers, the wavelength, the species, the gas.

The laser caution states the numbers that call for it: class 4 (IEC 60825-1) when the average
power exceeds 0.5 W (the class 3B limit for continuous emission) or one pulse carries more than
30 mJ (the class 3B pulse limit for nanosecond pulses at visible wavelengths; from memory — shorter
pulses and other wavelengths have lower limits, which the laser safety officer applies); a milder
eye-hazard line for focused pulses below that. Light below 180 nm is outside IEC 60825-1 (it needs
an evacuated beam path); below 242 nm it makes ozone in air. Hydrogen and its isotopes are
flammable, tritium is radioactive (when a gas of them is given). Every caution ends with "these are estimates, not a safety
assessment"; ``None`` when nothing applies (no pulse energy known, no hazardous species).

>>> caution({"pulse_energy_J": 0.05, "peak_power_W": 1e7, "peak_fluence_Jcm2": 300.0,
...          "wavelength_nm": 532.0, "species": "He+"})[:40]
'CAUTION: class-4 laser numbers: 50 mJ pu'
>>> caution({"wavelength_nm": 800.0, "species": "He+"}) is None
True
"""
from __future__ import annotations

CLASS_4_AVERAGE_POWER_W = 0.5     # IEC 60825-1: class 3B limit for continuous emission
CLASS_4_PULSE_ENERGY_J = 0.03     # IEC 60825-1: class 3B limit for ns pulses, 400-700 nm (from memory)
VUV_NM = 180.0                    # IEC 60825-1 covers 180 nm to 1 mm
OZONE_NM = 242.0                  # O2 photodissociation threshold: ozone in air below this
FLAMMABLE = {"H", "D", "T"}
RADIOACTIVE = {"T"}
ATMOSPHERE_PA = 101325.0
CLOSING = "These are estimates, not a safety assessment."


def _energy(joules: float) -> str:
    for unit, scale in (("J", 1.0), ("mJ", 1e-3), ("uJ", 1e-6), ("nJ", 1e-9)):
        if joules >= scale or unit == "nJ":
            return f"{joules / scale:.3g} {unit}"
    return f"{joules:.3g} J"      # pragma: no cover


def caution(numbers: dict) -> str | None:
    """The caution for ``numbers`` (keys as in the estimate's output: ``pulse_energy_J``,
    ``peak_power_W``, ``peak_fluence_Jcm2``, ``average_power_W``, ``wavelength_nm``, ``species``,
    ``density_cm3`` (a gas is there), ``pressure_Pa``), or None."""
    parts = []
    energy = numbers.get("pulse_energy_J")
    power = numbers.get("average_power_W")
    wavelength = numbers.get("wavelength_nm")
    laser = ""
    if energy is not None:
        laser = (f"{_energy(energy)} pulses, peak power {numbers.get('peak_power_W', 0):.3g} W, peak fluence "
                 f"{numbers.get('peak_fluence_Jcm2', 0):.3g} J/cm^2 at the focus"
                 + (f", average power {power:.3g} W" if power is not None else ""))
        rated = f"eye protection rated for {wavelength:.4g} nm" if wavelength else "rated eye protection"
        if energy > CLASS_4_PULSE_ENERGY_J or (power is not None and power > CLASS_4_AVERAGE_POWER_W):
            parts.append(f"CAUTION: class-4 laser numbers: {laser}. Direct, reflected and scattered beams injure "
                         f"eyes and skin and can ignite material; wear {rated}; the local laser-safety rules and "
                         f"your laser safety officer govern.")
        else:
            parts.append(f"CAUTION: {laser}: the direct and reflected beam is an eye hazard; wear {rated}; the "
                         f"local laser-safety rules and your laser safety officer govern.")
    if wavelength is not None and wavelength < VUV_NM:
        parts.append(f"{wavelength:.4g} nm is vacuum ultraviolet, outside IEC 60825-1: the beam path must be "
                     f"evacuated or purged, and its enclosure is the protection.")
    elif wavelength is not None and wavelength < OZONE_NM:
        parts.append(f"{wavelength:.4g} nm makes ozone in air: purge or ventilate the beam path.")
    species = numbers.get("species")
    if species in FLAMMABLE and numbers.get("density_cm3") is not None:
        parts.append(f"{species}2 gas is flammable in air (4 % to 75 %): vent the source and the pump exhausts safely.")
    if species in RADIOACTIVE and numbers.get("density_cm3") is not None:
        parts.append("Tritium is radioactive: the local radiation-protection rules govern its handling.")
    pressure = numbers.get("pressure_Pa")
    if pressure is not None and pressure > ATMOSPHERE_PA:
        parts.append(f"The gas cell is above atmospheric pressure ({pressure:.3g} Pa): use a pressure-rated cell.")
    if not parts:
        return None
    return " ".join(parts + [CLOSING])

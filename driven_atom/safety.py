"""Whether a pulse's numbers call for the laser-safety caution, and its text with those numbers.

The caution is for output that feeds a real experiment (``driven-atom pulse``, ``run``, ``scan``),
and only where the light the config describes is in the range where real lasers hurt: its fluence
at the atoms reaches the single-pulse maximum permissible exposure (MPE) of the skin. A laser that
delivers that is a class-4 hazard (dangerous to the skin and through diffuse reflections), and
then the eyes, whose limits are lower still, are at risk from every stray reflection.

Skin MPE for one pulse of duration τ (the intensity FWHM, else the foot-to-foot length), after the
tables of IEC 60825-1 / ANSI Z136.1 for 400–1400 nm with the wavelength factor C_A = 1 (its lowest,
so the most cautious value; from memory):

* τ < 1 ns: an irradiance of 2e7 W/cm² (the fluence limit is 2e7 W/cm² × τ);
* 1 ns ≤ τ < 100 ns: 0.02 J/cm²;
* 100 ns ≤ τ < 10 s: 1.1 τ^0.25 J/cm² (τ in s);
* below 400 nm the photochemical limit for ultraviolet, 3 mJ/cm², applies when lower (light
  below 180 nm lives in vacuum, but the source that makes it is a hazard of its own).

A static field (no carrier) is no laser: no caution.

>>> from driven_atom.pulse import Pulse
>>> laser_caution(Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 10})) is None
False
>>> laser_caution(Pulse({"wavelength": "121.57 nm", "intensity": "10 W/cm^2", "fwhm": "1 ns",
...                      "envelope": "gaussian"})) is None
True
"""
from __future__ import annotations

from dataclasses import dataclass

CAUTION_TEXT = (
    "lasers that deliver this are class-4 hazards: direct, reflected and scattered beams injure eyes and "
    "skin. Wear eye protection rated for the wavelength and skin protection; local laser-safety rules and "
    "your site's laser safety officer govern. These numbers are estimates, not a safety assessment."
)
SKIN_IRRADIANCE_WCM2 = 2e7          # tau < 1 ns (IEC 60825-1 skin MPE, C_A = 1; from memory)
SKIN_FLUENCE_NS_JCM2 = 0.02         # 1 ns <= tau < 100 ns
UV_FLUENCE_JCM2 = 3e-3              # ultraviolet photochemical limit, below 400 nm


def skin_mpe_jcm2(duration_s: float, wavelength_nm: float | None = None) -> float:
    """Single-pulse skin MPE (J/cm²) for a pulse of ``duration_s`` (see the module docstring).

    >>> skin_mpe_jcm2(1e-9), round(skin_mpe_jcm2(1e-6), 4), skin_mpe_jcm2(10e-15)
    (0.02, 0.0348, 2e-07)
    """
    if duration_s < 1e-9:
        mpe = SKIN_IRRADIANCE_WCM2 * duration_s
    elif duration_s < 1e-7:
        mpe = SKIN_FLUENCE_NS_JCM2
    else:
        mpe = 1.1 * min(duration_s, 10.0) ** 0.25
    if wavelength_nm is not None and wavelength_nm < 400:
        mpe = min(mpe, UV_FLUENCE_JCM2)
    return mpe


@dataclass(frozen=True)
class Exposure:
    """The numbers of one pulse component that decide the caution."""

    index: int
    wavelength_nm: float
    intensity_wcm2: float
    fluence_jcm2: float
    duration_s: float
    mpe_jcm2: float

    @property
    def ratio(self) -> float:
        return self.fluence_jcm2 / self.mpe_jcm2


def exposures(pulse) -> list[Exposure]:
    """One :class:`Exposure` per pulse component with a carrier."""
    from driven_atom.units import AU_FLUENCE_JCM2, AU_INTENSITY_WCM2, AU_TIME_S, photon_energy_to_wavelength_nm

    out = []
    for i, c in enumerate(pulse.components if pulse is not None else []):
        if not c.omega > 0:
            continue
        wavelength = photon_energy_to_wavelength_nm(c.omega)
        duration = (c.fwhm if c.fwhm is not None else c.length) * AU_TIME_S
        out.append(Exposure(i, wavelength, c.intensity * AU_INTENSITY_WCM2, c.fluence() * AU_FLUENCE_JCM2, duration,
                            skin_mpe_jcm2(duration, wavelength)))
    return out


def laser_caution(pulses) -> str | None:
    """The caution with the numbers that call for it, or None: ``pulses`` is a
    :class:`~driven_atom.pulse.Pulse` or a list of them (the points of a scan); the component with
    the largest fluence over its skin MPE decides."""
    items = pulses if isinstance(pulses, (list, tuple)) else [pulses]
    worst = max((e for p in items for e in exposures(p)), key=lambda e: e.ratio, default=None)
    if worst is None or worst.ratio < 1:
        return None
    return (f"CAUTION: pulse {worst.index} at {worst.wavelength_nm:.4g} nm reaches {worst.intensity_wcm2:.3g} W/cm^2 "
            f"and {worst.fluence_jcm2:.3g} J/cm^2 in {worst.duration_s:.3g} s, {worst.ratio:.3g} times the "
            f"single-pulse skin exposure limit ({worst.mpe_jcm2:.3g} J/cm^2 for this duration, IEC 60825-1); "
            + CAUTION_TEXT)

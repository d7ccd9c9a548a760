"""The focus: where the intensity is, how much gas sees it, and atom counts averaged over it
(pure functions; SI units: metres, m⁻³).

Profiles (``waist`` w₀ as named; Siegman, *Lasers* (1986), ch. 17 for the Gaussian beam):

* ``gaussian``: w(z) = w₀√(1 + (z/z_R)²), z_R = π w₀²/(M² λ), I(r, z) = I₀ (w₀/w)² exp(−2r²/w²);
  the power through any plane is P = (π w₀²/2) I₀ (effective area π w₀²/2);
* ``top-hat``: a collimated flat beam of radius w₀, I = I₀ inside (area π w₀²);
* ``sheet``: a collimated light sheet, Gaussian across (1/e² half-thickness w₀) and flat over a
  height H: I = I₀ exp(−2x²/w₀²) (area √(π/2) w₀ H).

For a pulse of energy E_p and intensity FWHM τ, I₀ = (τ/∫f dt) E_p/(A τ): 0.94·2E_p/(π w₀² τ) for
a Gaussian pulse in a Gaussian focus (common practice). The waist follows from the focal spot's
intensity FWHM d (w₀ = d/√(2 ln 2)) or from a collimated beam of 1/e² diameter D on a lens of
focal length f (w₀ = 2M²λf/(πD)).

Counts. A single-atom probability P(s) at intensity s·I₀, averaged over a slab |z| ≤ L/2 of gas of
density n in the Gaussian focus, gives

    N = n ∫ dz (π w(z)²/2) G(I₀ w₀²/w(z)²),   G(s) = ∫₀^s P(s′)/s′ ds′,

because at fixed z the area where the intensity exceeds s′ is (π w²/2) ln(s_z/s′). With P a step at
s_th and L → ∞ this is the volume inside the iso-intensity surface s_th,

    V(s_th) = π w₀² z_R [4β/3 + 2β³/9 − (4/3) arctan β],   β = √(1/s_th − 1),

the standard result for a Gaussian focus; it grows as β³ ∝ I₀^{3/2}: a saturated yield rises as
I^{3/2} (common practice). ``fraction`` is the count inside the beam (r ≤ w(z), |x| ≤ w₀) divided by
the atoms there.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from driven_atom.errors import InputError

PROFILES = ("gaussian", "top-hat", "sheet")
_trapezoid = getattr(np, "trapezoid", None) or np.trapz      # numpy 2 renamed it


def rayleigh_length(waist: float, wavelength: float, m2: float = 1.0) -> float:
    """z_R = π w₀²/(M² λ).

    >>> round(rayleigh_length(20e-6, 800e-9), 6)     # metres
    0.001571
    """
    return math.pi * waist**2 / (m2 * wavelength)


def waist_from_lens(beam_diameter: float, focal_length: float, wavelength: float, m2: float = 1.0) -> float:
    """w₀ = 2M²λf/(πD) for a collimated beam of 1/e² diameter D focused by a lens of focal length f.

    >>> round(waist_from_lens(5e-3, 0.2, 800e-9) * 1e6, 3)     # µm
    20.372
    """
    return 2 * m2 * wavelength * focal_length / (math.pi * beam_diameter)


def waist_from_fwhm(spot_fwhm: float) -> float:
    """w₀ = d/√(2 ln 2) for the focal spot's intensity FWHM diameter d."""
    return spot_fwhm / math.sqrt(2 * math.log(2))


def iso_intensity_volume(ratio: float, waist: float, z_rayleigh: float) -> float:
    """Volume where I ≥ I₀/``ratio`` (ratio = I₀/I_th ≥ 1) in a Gaussian focus, both sides of it."""
    if ratio <= 1:
        return 0.0
    b = math.sqrt(ratio - 1.0)
    return math.pi * waist**2 * z_rayleigh * (4 * b / 3 + 2 * b**3 / 9 - 4 * math.atan(b) / 3)


@dataclass(frozen=True)
class Focus:
    """A focus of ``profile`` (module docstring) with ``waist`` w₀ (m), the laser ``wavelength`` (m),
    beam quality ``m2`` and, for a sheet, its ``height`` (m)."""

    profile: str
    waist: float
    wavelength: float
    m2: float = 1.0
    height: float | None = None

    def __post_init__(self):
        if self.profile not in PROFILES:
            raise InputError(f"`focus` must be one of {', '.join(PROFILES)}, got {self.profile!r}")
        if self.profile == "sheet" and not (self.height and self.height > 0):
            raise InputError("`sheet_height` is required for focus = \"sheet\" (the sheet's flat extent)")

    @property
    def area(self) -> float:
        """Effective area A (m²) with P = I₀ A."""
        if self.profile == "gaussian":
            return math.pi * self.waist**2 / 2
        if self.profile == "top-hat":
            return math.pi * self.waist**2
        return math.sqrt(math.pi / 2) * self.waist * self.height

    @property
    def rayleigh_length(self) -> float | None:
        """z_R of a Gaussian focus (m); None for the collimated profiles."""
        return rayleigh_length(self.waist, self.wavelength, self.m2) if self.profile == "gaussian" else None

    def counts(self, table, density: float, *, length: float | None = None, volume: float | None = None) -> dict:
        """Atoms and counts for a probability table (:class:`ProbabilityTable`): over a slab of
        ``length`` along the beam, or a sphere of ``volume`` centred on the focus (Gaussian focus).
        Returns {"atoms_in_beam", "count_in_beam", "count"} (the count includes atoms outside the
        1/e² radius); None values when the geometry is missing."""
        if length is None and volume is None:
            return {"atoms_in_beam": None, "count_in_beam": None, "count": None}
        if self.profile == "gaussian":
            return _gaussian_counts(table, density, self.waist, self.rayleigh_length, length, volume)
        if volume is not None:
            raise InputError(f"`volume` (a detection sphere) needs focus = \"gaussian\"; for a "
                             f"{self.profile} give `length`")
        if self.profile == "top-hat":
            atoms = density * math.pi * self.waist**2 * length
            p = float(table(np.array([1.0]))[0])
            return {"atoms_in_beam": float(atoms), "count_in_beam": float(atoms * p), "count": float(atoms * p)}
        x = np.linspace(0.0, 4 * self.waist, 801)
        p = table(np.exp(-2 * (x / self.waist) ** 2))
        inside = x <= self.waist
        plane = density * self.height * length * 2
        return {"atoms_in_beam": float(plane * self.waist), "count_in_beam": float(plane * _trapezoid(p[inside], x[inside])),
                "count": float(plane * _trapezoid(p, x))}


def _gaussian_counts(table, density, waist, z_r, length, volume) -> dict:
    """n ∫dz (π w²/2) G(s_z) (module docstring) over the slab or the sphere; the count inside
    r ≤ w(z) uses G(s_z) − G(s_z e⁻²)."""
    if volume is not None:
        radius = (3 * volume / (4 * math.pi)) ** (1 / 3)
        half = radius
    else:
        half = length / 2
    # z nodes: fine near the focus, reaching the ends (the integrand falls as 1/z^... only slowly)
    u = np.linspace(-1.0, 1.0, 2001)
    z = half * np.sinh(u * math.asinh(half / (0.05 * z_r))) / math.sinh(math.asinh(half / (0.05 * z_r)))
    w2 = waist**2 * (1 + (z / z_r) ** 2)
    s_z = waist**2 / w2
    G = table.cumulative
    if volume is not None:
        rho2 = np.maximum(radius**2 - z**2, 0.0)
        outer = s_z * np.exp(-2 * rho2 / w2)
        count = density * _trapezoid(0.5 * math.pi * w2 * (G(s_z) - G(outer)), z)
        edge = np.maximum(outer, s_z * math.exp(-2))
        inside = density * _trapezoid(0.5 * math.pi * w2 * (G(s_z) - G(edge)), z)
        atoms = density * _trapezoid(math.pi * np.minimum(w2, rho2), z)
    else:
        count = density * _trapezoid(0.5 * math.pi * w2 * G(s_z), z)
        inside = density * _trapezoid(0.5 * math.pi * w2 * (G(s_z) - G(s_z * math.exp(-2))), z)
        atoms = density * _trapezoid(math.pi * w2, z)
    return {"atoms_in_beam": float(atoms), "count_in_beam": float(inside), "count": float(count)}


class ProbabilityTable:
    """P(s) for s = I/I₀ from values on a log-spaced grid (ln P linear in ln s between the
    nodes where P > 0); below the grid P ∝ s^k with the slope k of the two lowest nodes; above it, held.

    ``cumulative(s)`` is G(s) = ∫₀^s P(s′)/s′ ds′ (module docstring).

    >>> t = ProbabilityTable(np.geomspace(1e-4, 1, 50), 1e-3 * np.geomspace(1e-4, 1, 50))
    >>> round(float(t.cumulative(np.array([1.0]))[0]), 6)      # ∫ 1e-3 ds = 1e-3
    0.001
    """

    def __init__(self, s, p):
        self.s = np.asarray(s, dtype=float)
        self.p = np.clip(np.asarray(p, dtype=float), 0.0, 1.0)
        if self.s.size < 2 or np.any(np.diff(self.s) <= 0):
            raise ValueError("the table needs at least two increasing intensities")
        self.log_s = np.log(self.s)
        positive = self.p > 0
        self.log_p = np.log(np.where(positive, self.p, 1e-300))
        lo = self.p[:2]
        self.slope = (float(np.log(lo[1] / lo[0]) / (self.log_s[1] - self.log_s[0]))
                      if np.all(lo > 0) else 1.0)
        self.slope = max(self.slope, 0.1)
        # G on the nodes: below the grid in closed form; between nodes exactly for the power law
        # that the interpolation draws (∫ P d ln s = ΔP/k for P ∝ s^k), the trapezoid where P = 0
        pa, pb, dl = self.p[:-1], self.p[1:], np.diff(self.log_s)
        with np.errstate(divide="ignore", invalid="ignore"):
            k = np.log(pb / pa) / dl
        self.power_law = (pa > 0) & (pb > 0) & (np.abs(k) > 1e-9)
        self.k = np.where(self.power_law, k, 0.0)
        steps = np.where(self.power_law, (pb - pa) / np.where(self.power_law, self.k, 1.0), 0.5 * (pa + pb) * dl)
        self.G = self.p[0] / self.slope + np.concatenate([[0.0], np.cumsum(steps)])

    def __call__(self, s) -> np.ndarray:
        s = np.asarray(s, dtype=float)
        ls = np.log(np.maximum(s, 1e-300))
        inside = np.exp(np.interp(ls, self.log_s, self.log_p))
        below = self.p[0] * np.exp(self.slope * (ls - self.log_s[0]))
        out = np.where(ls < self.log_s[0], below, inside)
        return np.where(s > 0, np.clip(out, 0.0, 1.0), 0.0)

    def cumulative(self, s) -> np.ndarray:
        s = np.asarray(s, dtype=float)
        ls = np.log(np.maximum(s, 1e-300))
        below = self.p[0] * np.exp(self.slope * (ls - self.log_s[0])) / self.slope
        i = np.clip(np.searchsorted(self.log_s, ls) - 1, 0, self.s.size - 2)
        x = ls - self.log_s[i]
        pa = self.p[i]
        # within a segment: ∫ P d ln s of the interpolant (a power law, or linear where P = 0)
        power = (self(s) - pa) / np.where(self.power_law[i], self.k[i], 1.0)
        linear = pa * x + 0.5 * (self.p[i + 1] - pa) * x**2 / (self.log_s[i + 1] - self.log_s[i])
        inside = self.G[i] + np.where(self.power_law[i], power, linear)
        above = self.G[-1] + self.p[-1] * (ls - self.log_s[-1])
        return np.where(ls < self.log_s[0], below, np.where(ls > self.log_s[-1], above, inside))

    def crossing(self, level: float) -> float | None:
        """The smallest s where P reaches ``level`` (linear in ln s between nodes), or None."""
        above = np.flatnonzero(self.p >= level)
        if not above.size:
            return None
        i = int(above[0])
        if i == 0:
            return float(self.s[0]) if self.p[0] == level else float(
                self.s[0] * (level / self.p[0]) ** (1 / self.slope))
        f = (level - self.p[i - 1]) / (self.p[i] - self.p[i - 1])
        return float(np.exp(self.log_s[i - 1] + f * (self.log_s[i] - self.log_s[i - 1])))

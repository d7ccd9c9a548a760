"""The laser pulse in time, as the lab describes it: a peak intensity and an intensity profile
f(t) = I(t)/I₀ (SI seconds here; the physics modules convert).

Profiles (τ = FWHM of the intensity):

* ``gaussian``: f = exp(−4 ln2 t²/τ²); ∫fⁿ dt = τ √(π/(4n ln2)); so I₀ = 0.9394 E_p/(A τ) for a
  pulse of energy E_p through an effective area A (common practice);
* ``sech2``: f = sech²(t/T), τ = 2 ln(1 + √2) T = 1.7627 T; ∫fⁿ dt = T √π Γ(n)/Γ(n + ½) (a
  mode-locked laser's pulse; I₀ = 0.8814 E_p/(A τ));
* the envelopes of a run configuration (``sin2``, ``cos4``, ``flat``): f = (field envelope)² of
  :class:`driven_atom.pulse.PulseComponent`, on its own window.

A duration may be given as the FWHM or the rms width of the intensity or of the field envelope
|E(t)| (each taken as a distribution in t): for a Gaussian the field FWHM is √2 τ, the intensity rms
τ/(2√(2 ln2)) and the field rms √2 times that; for sech² the field FWHM is 2 arccosh(2) T, the
intensity rms πT/√12 and the field rms πT/2.

>>> g = Envelope("gaussian", 2e-9)
>>> round(g.fwhm / g.integral(1), 4)          # I0 = 0.9394 Ep/(A tau)
0.9394
>>> round(Envelope.from_duration("sech2", "field_fwhm", 1e-12).fwhm * 1e12, 4)
0.6692
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from driven_atom.errors import InputError

SHAPES = ("gaussian", "sech2")
DURATIONS = ("fwhm", "field_fwhm", "rms", "field_rms")
_SECH_T = 2 * math.log(1 + math.sqrt(2))          # τ/T of sech²
_GAUSS_A = 4 * math.log(2)                        # f = exp(−a t²/τ²)
SECH2_EDGE = 12.0                                 # the sech² window is |t| ≤ 12 T (f < 2e-10)


@dataclass(frozen=True)
class Envelope:
    """Intensity profile ``shape`` with intensity FWHM ``fwhm`` (s); ``component`` carries a run
    configuration's :class:`~driven_atom.pulse.PulseComponent` for its own envelopes."""

    shape: str
    fwhm: float
    component: object = None

    def __post_init__(self):
        if self.shape not in SHAPES + ("run",):
            raise InputError(f"`shape` must be one of {', '.join(SHAPES)}, got {self.shape!r}")
        if not (math.isfinite(self.fwhm) and self.fwhm > 0):
            raise InputError(f"the pulse duration must be > 0 s, got {self.fwhm!r}")

    @classmethod
    def from_duration(cls, shape: str, kind: str, value: float) -> "Envelope":
        """The envelope whose ``kind`` width (one of :data:`DURATIONS`) is ``value`` seconds."""
        if shape == "gaussian":
            factor = {"fwhm": 1.0, "field_fwhm": 1 / math.sqrt(2),
                      "rms": 2 * math.sqrt(2 * math.log(2)), "field_rms": 2 * math.sqrt(math.log(2))}[kind]
        elif shape == "sech2":
            factor = {"fwhm": 1.0, "field_fwhm": _SECH_T / (2 * math.acosh(2.0)),
                      "rms": _SECH_T * math.sqrt(12) / math.pi, "field_rms": _SECH_T * 2 / math.pi}[kind]
        else:
            raise InputError(f"`shape` must be one of {', '.join(SHAPES)}, got {shape!r}")
        return cls(shape, value * factor)

    @classmethod
    def from_component(cls, component, time_unit_s: float) -> "Envelope":
        """The profile of a run configuration's pulse (times converted with ``time_unit_s``): a
        Gaussian stays analytic (its cut at 1e-6 of the field is left out), other envelopes are
        sampled from the component."""
        if component.envelope_kind == "gaussian":
            return cls("gaussian", component.fwhm * time_unit_s)
        return cls("run", component.fwhm * time_unit_s, (component, time_unit_s))

    # -- the profile -------------------------------------------------------------------------------
    def intensity(self, t) -> np.ndarray:
        """f(t) = I(t)/I₀ at times ``t`` (s), centred on the peak."""
        t = np.asarray(t, dtype=float)
        if self.shape == "gaussian":
            return np.exp(-_GAUSS_A * (t / self.fwhm) ** 2)
        if self.shape == "sech2":
            x = np.abs(t) * _SECH_T / self.fwhm
            return (2 * np.exp(-x) / (1 + np.exp(-2 * x))) ** 2
        component, unit = self.component
        return component.envelope(t / unit + component.delay) ** 2

    @property
    def window(self) -> tuple[float, float]:
        """(start, end) in s: the run configuration's window (a Gaussian: the cut where its field
        falls to 1e-6, :func:`driven_atom.pulse.gaussian_window`), ±12 T for sech²."""
        if self.shape == "gaussian":
            from driven_atom.pulse import gaussian_window

            half = gaussian_window(self.fwhm) / 2
            return -half, half
        if self.shape == "sech2":
            half = SECH2_EDGE * self.fwhm / _SECH_T
            return -half, half
        component, unit = self.component
        return -component.length / 2 * unit, component.length / 2 * unit

    def integral(self, n: float = 1.0) -> float:
        """∫ fⁿ dt in seconds (closed forms for gaussian and sech²)."""
        if self.shape == "gaussian":
            return self.fwhm * math.sqrt(math.pi / (_GAUSS_A * n))
        if self.shape == "sech2":
            return self.fwhm / _SECH_T * math.sqrt(math.pi) * math.exp(math.lgamma(n) - math.lgamma(n + 0.5))
        t, w = self.nodes()
        return float(w @ self.intensity(t) ** n)

    def nodes(self, per_fwhm: int = 16) -> tuple[np.ndarray, np.ndarray]:
        """Gauss–Legendre nodes and weights over the window (8 per panel, panels of FWHM/per_fwhm·8)."""
        t0, t1 = self.window
        panels = max(8, math.ceil((t1 - t0) / self.fwhm * per_fwhm / 8))
        x, w = np.polynomial.legendre.leggauss(8)
        edges = np.linspace(t0, t1, panels + 1)
        half = 0.5 * np.diff(edges)
        mid = 0.5 * (edges[1:] + edges[:-1])
        return (mid[:, None] + half[:, None] * x).ravel(), (half[:, None] * w).ravel()

    def steps(self, per_fwhm: int = 12, at_least: int = 0) -> np.ndarray:
        """Step edges over the window for a propagation: ``per_fwhm`` steps per FWHM (or more)."""
        t0, t1 = self.window
        count = max(int(math.ceil((t1 - t0) / self.fwhm * per_fwhm)), int(at_least), 8)
        return np.linspace(t0, t1, count + 1)

    @property
    def peak_factor(self) -> float:
        """τ/∫f dt: I₀ = peak_factor · E_p/(A τ) (0.9394 for a Gaussian)."""
        return self.fwhm / self.integral(1.0)

    @property
    def bandwidth(self) -> float:
        """FWHM of the intensity spectrum of the transform-limited pulse, angular (rad/s): 4 ln2/τ
        for a Gaussian, 2π·0.3148/τ for sech² (common practice); other envelopes as a Gaussian."""
        if self.shape == "sech2":
            return 2 * math.pi * 0.3148 / self.fwhm
        return _GAUSS_A / self.fwhm

"""Laser pulses defined through the vector potential, so the field has no DC part.

For one pulse (a ``[[pulse]]`` table) with carrier ω, peak field F₀, envelope f(t) centred at the
delay t₀, carrier-envelope phase φ and linear chirp β::

    Φ(t) = ω(t − t₀) + φ + ½β(t − t₀)²
    A(t) = (F₀/ω) f(t) Re[i e^{−iΦ(t)} ε]           (= (F₀/ω) f sin Φ · ε for real ε)
    E(t) = −dA/dt = −(F₀/ω) Re[(Φ′f + i f′) e^{−iΦ} ε]   (analytic, no finite differences)

with the Jones vector ε = (0,0,1) for "z", (1,0,0) for "x", (1, ±i, 0) for "circular±" (amplitude F₀
in each component; "circular+" turns x → y, counter-clockwise about +z, and drives Δm = +1 in
absorption) and (1, iη, 0) for "elliptical" with ellipticity η ∈ [−1, 1] (F₀ along the major axis
x, ηF₀ along y; η = ±1 is circular±, η = 0 is x; in circular components
ε = ½(1 + η)(1, i, 0) + ½(1 − η)(1, −i, 0)). Because f vanishes at both feet,
∫E dt = A(t_start) − A(t_end) = 0 exactly.
Peak cycle-averaged intensity I = |ε|² F₀² in atomic units (I_au = 3.50945e16 W/cm², CODATA 2018),
so circular light carries twice the intensity of linear light of the same F₀ (docs/physics.md) and
elliptical light (1 + η²) times; an ``intensity`` key sets the total, F₀ = √(I/(1 + η²)).

Envelopes (T = foot-to-foot length, s = t − t₀, the window is t₀ ± T/2):

* ``sin2``: f = cos²(πs/T) = sin²(π(s + T/2)/T); intensity FWHM = T·(2/π)·arccos(2^(−1/4)).
* ``cos4``: f = cos⁴(πs/T); intensity FWHM = T·(2/π)·arccos(2^(−1/8)).
* ``gaussian``: f² has intensity FWHM τ.  f = (e^{−as²} − c)/(1 − c) on |s| ≤ T/2 with c the
  truncation level e^{−a(T/2)²} (default 1e-6: the profile is cut where it falls below 1e-6 and lowered
  by c so that f and A vanish at the feet), a chosen so that the FWHM is exactly τ.
* ``flat``: sin² ramps of length R on each side of a plateau (foot to foot T).
* ``static``: E(t) = F₀ g(t) ε (no carrier) with g a sin² ramp of length R then held until the window
  ends; A = −∫E dt. Its field area is not zero: it is a DC field by design.

``cycles`` counts optical cycles 2π/ω foot to foot for sin2, cos4 and flat, and within the intensity
FWHM for gaussian.

>>> p = Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 4})
>>> round(p.components[0].peak_field, 4)
0.0534
>>> abs(float(p.field_z([p.t_start])[0])) < 1e-12
True
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from driven_atom.errors import InputError, validation_message
from driven_atom.units import (ALPHA, AU_FLUENCE_JCM2, AU_INTENSITY_WCM2, AU_TIME_S, HARTREE_EV,
                        photon_energy_to_wavelength_nm)

ENVELOPES = ("sin2", "gaussian", "flat", "cos4", "static")
POLARIZATIONS = {"z": (0, 0, 1), "x": (1, 0, 0), "circular+": (1, 1j, 0), "circular-": (1, -1j, 0),
                 "elliptical": None}       # (1, iη, 0): see jones_vector


def jones_vector(polarization: str, ellipticity: float = 0.0) -> np.ndarray:
    """Jones vector ε (x, y, z) of a polarisation name; ``ellipticity`` η only for "elliptical".

    >>> jones_vector("elliptical", 0.5).tolist()
    [(1+0j), 0.5j, 0j]
    """
    if polarization == "elliptical":
        return np.array([1.0, 1j * ellipticity, 0.0], dtype=complex)
    return np.array(POLARIZATIONS[polarization], dtype=complex)


def _check_ellipticity(polarization: str, ellipticity, key: str) -> float:
    """η as a float: in [−1, 1] for "elliptical", 0 (or absent) for every other polarisation."""
    eta = 0.0 if ellipticity is None else float(ellipticity)
    if polarization == "elliptical":
        if not -1.0 <= eta <= 1.0:
            raise InputError(f"`{key}.ellipticity` must be within [-1, 1] (minor/major field ratio, sign = "
                             f"sense of rotation), got {ellipticity!r}")
    elif eta != 0.0:
        raise InputError(f"`{key}.ellipticity` applies only to polarization = \"elliptical\", "
                         f"got polarization = {polarization!r}")
    return eta
GAUSSIAN_CUT = 1e-6            # default truncation level of the gaussian envelope
LONG_CYCLES = 10_000           # above this many carrier periods integrals use the complex envelope
MAX_INTENSITY_WCM2 = 1e20      # above this the electron turns relativistic; the dipole picture fails
MAX_WINDOW_AU = 1e15           # about 24 s: longer windows and delays are refused (no run could use them)
_SIN2_FWHM = (2 / math.pi) * math.acos(2 ** -0.25)   # 0.3641: intensity FWHM / T of sin2 (analytic)
_COS4_FWHM = (2 / math.pi) * math.acos(2 ** -0.125)  # intensity FWHM / T of cos4 (analytic)
_RAMP_HALF = (2 / math.pi) * math.asin(2 ** -0.25)   # sin² ramp: f² = 1/2 at this fraction of R
_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(16)


def gaussian_shape(fwhm: float, window: float) -> tuple[float, float]:
    """Parameters (a, c) of the truncated gaussian f = (e^{−as²} − c)/(1 − c) on |s| ≤ window/2.

    c = e^{−a(window/2)²} (f vanishes at the feet) and f² = 1/2 at s = ±fwhm/2 exactly:
    e^{−a fwhm²/4} = c + (1 − c)/√2. Solved for x = −ln c by root-finding (scipy.optimize.brentq).
    Needs window ≥ 2·fwhm.

    >>> a, c = gaussian_shape(1.0, 2 * math.sqrt(math.log(1e6) / (2 * math.log(2))))
    >>> round(a, 4), c < 2e-6      # a = 2 ln2 / fwhm^2 when the cut is far out
    (1.3863, True)
    """
    from scipy.optimize import brentq

    ratio2 = (window / fwhm) ** 2

    def mismatch(x):  # window²/fwhm² implied by cut level e^{-x}, minus the wanted one
        c = math.exp(-x)
        return x / -math.log(c + (1 - c) / math.sqrt(2)) - ratio2

    x = brentq(mismatch, 1e-9, ratio2 + 50.0, xtol=1e-14, rtol=1e-15)
    c = math.exp(-x)
    a = -4.0 * math.log(c + (1 - c) / math.sqrt(2)) / fwhm**2
    return a, c


def gaussian_window(fwhm: float, cut: float = GAUSSIAN_CUT) -> float:
    """Foot-to-foot span of a gaussian of intensity FWHM τ cut where its field profile e^{−2 ln2 s²/τ²}
    falls to ``cut``: T = 2τ √(ln(1/cut)/(2 ln 2)) (about 6.31 τ for 1e-6).

    >>> round(gaussian_window(1.0), 3)
    6.314
    """
    return 2.0 * fwhm * math.sqrt(math.log(1.0 / cut) / (2.0 * math.log(2.0)))


@dataclass(frozen=True)
class PulseComponent:
    """One component of a :class:`Pulse` (one ``[[pulse]]`` table) in atomic units; build it from
    config keys with :meth:`from_config`.

    ``length`` is the foot-to-foot window T; ``fwhm_gaussian`` the intensity FWHM τ of a gaussian
    (``None`` for other envelopes); ``ramp`` the sin² ramp of flat and static envelopes.

    >>> lp = PulseComponent("sin2", omega=0.057, peak_field=0.05, length=1000.0)
    >>> round(lp.fwhm, 1)
    364.1
    """

    envelope_kind: str
    omega: float
    peak_field: float
    length: float
    cep: float = 0.0
    delay: float = 0.0
    chirp: float = 0.0
    polarization: str = "z"
    ramp: float = 0.0
    fwhm_gaussian: float | None = None
    ellipticity: float = 0.0

    def __post_init__(self):
        if self.envelope_kind not in ENVELOPES:
            raise InputError(f"`envelope` must be one of {', '.join(ENVELOPES)}, got {self.envelope_kind!r}")
        if self.polarization not in POLARIZATIONS:
            raise InputError(f"`polarization` must be one of {', '.join(POLARIZATIONS)}, "
                             f"got {self.polarization!r}")
        _check_ellipticity(self.polarization, self.ellipticity, "pulse")
        if not self.length > 0:
            raise InputError(f"`length` must be > 0, got {self.length!r}")
        if self.envelope_kind == "static":
            if self.omega != 0 or self.chirp != 0:
                raise InputError("a static field has no carrier: `omega` and `chirp` must be 0")
            if self.polarization not in ("z", "x"):
                raise InputError(f"`polarization` of a static field must be z or x, got {self.polarization!r}")
        elif not self.omega > 0:
            raise InputError(f"`omega` must be > 0, got {self.omega!r}")
        if self.envelope_kind in ("flat", "static"):
            room = self.length / 2 if self.envelope_kind == "flat" else self.length
            if not 0 < self.ramp <= room:
                raise InputError(f"`ramp` must be > 0 and at most {'half ' if room < self.length else ''}"
                                 f"the length ({room:.6g} au), got {self.ramp!r}")
        if self.envelope_kind == "gaussian":
            if self.fwhm_gaussian is None or not 0 < 2 * self.fwhm_gaussian <= self.length:
                raise InputError(f"a gaussian needs 0 < 2·fwhm <= length, got fwhm {self.fwhm_gaussian!r} "
                                 f"and length {self.length!r}")
        if self.omega > 0 and abs(self.chirp) * self.length / 2 >= self.omega:
            raise InputError(f"`chirp` {self.chirp:.3g} au drives the instantaneous frequency "
                             f"ω + β(t − t0) to zero inside the pulse; keep |chirp| < {2 * self.omega / self.length:.3g} au")
        if not self.peak_field >= 0 or not math.isfinite(self.peak_field):
            raise InputError(f"`peak_field` must be >= 0, got {self.peak_field!r}")

    # -- construction from config keys -------------------------------------------------------
    @classmethod
    def from_config(cls, cfg, *, key: str = "pulse") -> "PulseComponent":
        """Build from a :class:`driven_atom.config.PulseConfig` (or its dict); errors name
        ``key.<name>``, e.g. ``pulse.1.fwhm`` (the key path scan axes use).

        >>> lp = PulseComponent.from_config({"envelope": "gaussian", "photon_energy": "10.2 eV",
        ...                              "peak_field": 1e-4, "fwhm": "100 fs"})
        >>> round(lp.fwhm * AU_TIME_S * 1e15, 6)
        100.0
        """
        return _from_config(cfg, key)

    # -- geometry ------------------------------------------------------------------------------
    @property
    def t_start(self) -> float:
        return self.delay - self.length / 2

    @property
    def t_end(self) -> float:
        return self.delay + self.length / 2

    @cached_property
    def jones(self) -> np.ndarray:
        """Complex Cartesian polarisation vector ε (x, y, z)."""
        return jones_vector(self.polarization, self.ellipticity)

    @property
    def intensity(self) -> float:
        """Peak cycle-averaged intensity |ε|² F₀² in atomic units (× 3.50945e16 for W/cm²)."""
        return float(np.vdot(self.jones, self.jones).real) * self.peak_field**2

    @cached_property
    def _gauss(self) -> tuple[float, float]:
        return gaussian_shape(self.fwhm_gaussian, self.length)

    @property
    def fwhm(self) -> float | None:
        """Intensity FWHM of the envelope f² (a.u.); ``None`` for a static field."""
        T, kind = self.length, self.envelope_kind
        if kind == "sin2":
            return _SIN2_FWHM * T
        if kind == "cos4":
            return _COS4_FWHM * T
        if kind == "gaussian":
            return self.fwhm_gaussian
        if kind == "flat":
            return T - 2 * _RAMP_HALF * self.ramp
        return None

    @property
    def breakpoints(self) -> tuple[float, ...]:
        """Times where the envelope is not smooth (feet and ramp joints): panel edges for quadrature."""
        points = [self.t_start, self.t_end]
        if self.envelope_kind in ("flat", "static"):
            points.append(self.t_start + self.ramp)
        if self.envelope_kind == "flat":
            points.append(self.t_end - self.ramp)
        return tuple(points)

    # -- envelope ------------------------------------------------------------------------------
    def _envelope_and_slope(self, t):
        t = np.asarray(t, dtype=float)
        s = t - self.delay
        T, kind = self.length, self.envelope_kind
        inside = np.abs(s) <= T / 2
        if kind == "sin2":
            x = math.pi * s / T
            f, df = np.cos(x) ** 2, -(math.pi / T) * np.sin(2 * x)
        elif kind == "cos4":
            x = math.pi * s / T
            c, sn = np.cos(x), np.sin(x)
            f, df = c**4, -4 * (math.pi / T) * c**3 * sn
        elif kind == "gaussian":
            a, cut = self._gauss
            g = np.exp(-a * s * s)
            f, df = (g - cut) / (1 - cut), -2 * a * s * g / (1 - cut)
        else:  # flat, static: sin² ramps (static: only the rising one, then held)
            R = self.ramp
            u = s + T / 2
            v = (T - u) if kind == "flat" else np.full_like(u, R)   # static: never falls
            k = math.pi / (2 * R)
            f = np.ones_like(u)
            df = np.zeros_like(u)
            up, down = u < R, v < R
            f = np.where(up, np.sin(k * u) ** 2, np.where(down, np.sin(k * v) ** 2, f))
            df = np.where(up, k * np.sin(2 * k * u), np.where(down, -k * np.sin(2 * k * v), df))
        return np.where(inside, f, 0.0), np.where(inside, df, 0.0)

    def envelope(self, t) -> np.ndarray:
        """f(t) (0 outside the window).

        >>> PulseComponent("sin2", omega=0.057, peak_field=0.05, length=100.0).envelope([0.0, 25.0, 60.0])
        array([1. , 0.5, 0. ])
        """
        return self._envelope_and_slope(t)[0]

    def phase(self, t) -> np.ndarray:
        """Φ(t) = ω(t − t₀) + φ + ½β(t − t₀)²."""
        s = np.asarray(t, dtype=float) - self.delay
        return self.omega * s + self.cep + 0.5 * self.chirp * s * s

    # -- fields ---------------------------------------------------------------------------------
    def _static_ramp_integral(self, t):
        """G(t) = ∫ g dt' from the start of the window (sin² ramp then 1)."""
        u = np.clip(np.asarray(t, dtype=float) - self.t_start, 0.0, self.length)
        R = self.ramp
        rising = u / 2 - (R / (2 * math.pi)) * np.sin(math.pi * u / R)
        return np.where(u < R, rising, R / 2 + (u - R))

    def vector_potential(self, t) -> np.ndarray:
        """A(t), shape (len(t), 3)."""
        t = np.atleast_1d(np.asarray(t, dtype=float))
        if self.envelope_kind == "static":
            scalar = -self.peak_field * self._static_ramp_integral(t)
            return scalar[:, None] * self.jones.real[None, :]
        f = self.envelope(t)
        w = (self.peak_field / self.omega) * f * 1j * np.exp(-1j * self.phase(t))
        return (w[:, None] * self.jones[None, :]).real

    def complex_envelope(self, t) -> np.ndarray:
        """ℰ(t), shape (len(t), 3) complex, with E(t) = Re[ℰ(t) e^{−iωt}] exactly:
        ℰ = −(F₀/ω)(Φ′f + i f′) e^{−i(Φ − ωt)} ε (a static field: ℰ = E).

        >>> lp = PulseComponent("sin2", omega=0.057, peak_field=0.05, length=1000.0)
        >>> t = np.linspace(-400, 400, 5)
        >>> bool(np.allclose((lp.complex_envelope(t) * np.exp(-0.057j * t)[:, None]).real, lp.electric_field(t)))
        True
        """
        t = np.atleast_1d(np.asarray(t, dtype=float))
        if self.envelope_kind == "static":
            return self.electric_field(t).astype(complex)
        f, df = self._envelope_and_slope(t)
        dphi = self.omega + self.chirp * (t - self.delay)
        w = -(self.peak_field / self.omega) * (dphi * f + 1j * df) * np.exp(-1j * (self.phase(t) - self.omega * t))
        return w[:, None] * self.jones[None, :]

    def electric_field(self, t) -> np.ndarray:
        """E(t) = −dA/dt, shape (len(t), 3), from the analytic derivative."""
        t = np.atleast_1d(np.asarray(t, dtype=float))
        if self.envelope_kind == "static":
            g = self.envelope(t)
            return (self.peak_field * g)[:, None] * self.jones.real[None, :]
        f, df = self._envelope_and_slope(t)
        dphi = self.omega + self.chirp * (t - self.delay)
        w = -(self.peak_field / self.omega) * (dphi * f + 1j * df) * np.exp(-1j * self.phase(t))
        return (w[:, None] * self.jones[None, :]).real


    # -- integrals over the window ----------------------------------------------------------------
    @property
    def is_long(self) -> bool:
        """More than LONG_CYCLES carrier periods in the window: integrals then use the complex
        envelope and drop terms oscillating at 2ω (relative size below ~(ωT)^-3)."""
        return self.omega * self.length > 2 * math.pi * LONG_CYCLES

    def _quadrature(self, rate: float):
        """Nodes resolving an integrand that oscillates at ``rate`` and follows the envelope."""
        scale = self.fwhm if self.fwhm is not None else self.length
        panel = min(2 * math.pi / rate if rate > 0 else math.inf, scale / 4, self.length / 8)
        return quadrature(sorted(set(self.breakpoints)), panel)

    def fluence(self) -> float:
        """∫ c ε₀ |E(t)|² dt in atomic units (= 2∫|E|² dt since I_au = ½ c ε₀ F² ↔ F²; J/cm² via
        AU_FLUENCE_JCM2). Long pulses: the cycle average ∫|ℰ|² dt.

        >>> lp = PulseComponent("flat", omega=0.057, peak_field=0.05, length=2000.0, ramp=100.0)
        >>> round(lp.fluence() / (0.05**2 * 2000.0), 2)     # ≈ I (T − 1.25 R)/(I T) = 0.9375
        0.94
        """
        chirp_spread = abs(self.chirp) * self.length / 2
        if self.is_long:
            t, w = self._quadrature(chirp_spread)
            return float(w @ np.sum(np.abs(self.complex_envelope(t)) ** 2, axis=1))
        t, w = self._quadrature(2 * (self.omega + chirp_spread))
        return float(2.0 * w @ np.sum(self.electric_field(t) ** 2, axis=1))

    def field_spectrum(self, omega, axis: str = "z") -> np.ndarray:
        """Ẽ(ω) = ∫E(t) e^{iωt} dt of the ``axis`` component over the window (a.u.), complex.

        Piecewise Gauss–Legendre quadrature with panels shorter than one period of the integrand's
        fastest oscillation, split where the envelope is not smooth. Long pulses (:attr:`is_long`):
        Ẽ(ω) = ½∫ℰ(t) e^{i(ω−ω_c)t} dt for ω > 0 (the counter-rotating ½∫ℰ* e^{i(ω+ω_c)t} dt is
        dropped) and Ẽ(−ω) = Ẽ(ω)* since E is real.
        """
        omega = np.asarray(omega, dtype=float)
        flat = omega.ravel()
        column = "xyz".index(axis)
        out = np.zeros(flat.size, dtype=complex)
        if not flat.size or not np.any(self.jones[column]):
            return out.reshape(omega.shape)
        spread = abs(self.chirp) * self.length / 2
        if self.is_long:
            shift = np.abs(flat) - self.omega
            t, w = self._quadrature(float(np.max(np.abs(shift))) + spread)
            weighted = 0.5 * w * self.complex_envelope(t)[:, column]
        else:
            shift = flat
            t, w = self._quadrature(float(np.max(np.abs(flat))) + self.omega + spread)
            weighted = w * self.electric_field(t)[:, column]
        chunk = max(1, 2_000_000 // t.size)
        for i in range(0, flat.size, chunk):
            out[i:i + chunk] = np.exp(1j * np.outer(shift[i:i + chunk], t)) @ weighted
        if self.is_long:
            out = np.where(flat < 0, out.conj(), out)
        return out.reshape(omega.shape)


class Pulse:
    """Several :class:`PulseComponent` components that add (pump–probe, two colours).

    ``Pulse(items, atom=None)`` takes PulseComponent objects, config dicts or ``PulseConfig`` models
    (one or a list); ``atom`` (optional) is kept for derived quantities such as the Keldysh γ.

    >>> p = Pulse([{"wavelength": "800 nm", "peak_field": 0.05, "cycles": 2},
    ...            {"wavelength": "400 nm", "peak_field": 0.01, "cycles": 4, "delay": "2 fs"}])
    >>> len(p.components), p.is_linear_z, p.electric_field([0.0, 1.0]).shape
    (2, True, (2, 3))
    """

    def __init__(self, items, atom=None):
        if isinstance(items, (dict, PulseComponent)) or hasattr(items, "model_fields"):
            items = [items]
        items = list(items)
        if not items:
            raise InputError("at least one `[[pulse]]` table is required")
        self.components = tuple(item if isinstance(item, PulseComponent)
                                else PulseComponent.from_config(item, key=f"pulse.{i}")
                                for i, item in enumerate(items))
        self.atom = atom

    def __repr__(self):
        return f"Pulse({list(self.components)!r})"

    @property
    def t_start(self) -> float:
        return min(c.t_start for c in self.components)

    @property
    def t_end(self) -> float:
        return max(c.t_end for c in self.components)

    @property
    def is_linear_z(self) -> bool:
        """True if every component is polarised along z (the field is then E_z only)."""
        return all(c.polarization == "z" for c in self.components)

    def vector_potential(self, t) -> np.ndarray:
        return sum(c.vector_potential(t) for c in self.components)

    def electric_field(self, t) -> np.ndarray:
        return sum(c.electric_field(t) for c in self.components)

    def field_z(self, t) -> np.ndarray:
        """E_z(t), 1-D (the whole field when :attr:`is_linear_z`)."""
        return self.electric_field(t)[:, 2]

    def vector_potential_z(self, t) -> np.ndarray:
        """A_z(t), 1-D."""
        return self.vector_potential(t)[:, 2]

    def field_area(self) -> np.ndarray:
        """∫E dt over the window, a 3-vector: A(t_start) − A(t_end), which the analytic E = −dA/dt
        makes exact (zero for every envelope but static)."""
        a = self.vector_potential([self.t_start, self.t_end])
        return a[0] - a[1]

    def field_spectrum(self, omega, axis: str = "z") -> np.ndarray:
        """Ẽ(ω) = ∫E(t) e^{iωt} dt of the ``axis`` component (x, y or z), complex, same shape as
        ``omega`` (a.u.): the sum of :meth:`PulseComponent.field_spectrum` over the components.

        >>> p = Pulse({"wavelength": "800 nm", "peak_field": 0.05, "cycles": 10})
        >>> s = np.abs(p.field_spectrum([0.03, 0.057, 0.09]))
        >>> int(np.argmax(s))
        1
        """
        return sum(c.field_spectrum(omega, axis) for c in self.components)


def quadrature(edges, max_panel: float) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes and weights, 16 per panel, between consecutive ``edges`` (sorted),
    panels no longer than ``max_panel``. Put the edges where the integrand is not smooth; then the
    rule is exact to rounding for integrands that vary little within a panel.

    >>> t, w = quadrature([0.0, 1.0, 3.0], 0.5)
    >>> round(float(w @ t**3), 12)     # ∫_0^3 t^3 dt = 81/4 (analytic)
    20.25
    """
    nodes, weights = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        n = max(1, math.ceil((b - a) / max_panel))
        cuts = np.linspace(a, b, n + 1)
        half = 0.5 * np.diff(cuts)
        mid = 0.5 * (cuts[:-1] + cuts[1:])
        nodes.append((mid[:, None] + half[:, None] * _GL_NODES[None, :]).ravel())
        weights.append((half[:, None] * _GL_WEIGHTS[None, :]).ravel())
    return np.concatenate(nodes), np.concatenate(weights)


# --- config keys -> PulseComponent ----------------------------------------------------------------
def build_pulse(cfg, atom=None) -> "Pulse | None":
    """The :class:`Pulse` of a run config's ``[[pulse]]`` tables (``None`` without any: a field-free
    run); ``atom`` defaults to the config's atom. Errors name the key (``pulse.1.fwhm``).

    >>> from driven_atom.config import read_config
    >>> cfg = read_config({"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s"]},
    ...                    "pulse": [{"wavelength": "800 nm", "peak_field": 0.05, "cycles": 2}]})
    >>> round(build_pulse(cfg).components[0].omega, 5)
    0.05695
    """
    if not cfg.pulse:
        return None
    return Pulse(list(cfg.pulse), atom=atom if atom is not None else cfg.build_atom())


def _from_config(cfg, key: str) -> PulseComponent:
    """One component from a :class:`driven_atom.config.PulseConfig` (or its dict), whose values are
    already in atomic units and whose keys fit together; here the durations, ramps and chirp are
    checked against each other."""
    from driven_atom.config import PulseConfig, qualify

    if isinstance(cfg, dict):
        from pydantic import ValidationError

        try:
            cfg = PulseConfig(**cfg)
        except ValidationError as exc:
            err = max(exc.errors(), key=lambda e: len(e["loc"]))
            message = validation_message(exc, prefix=key, model=PulseConfig)
            raise InputError(qualify(message, key) if err["type"] == "value_error" else message) from None
    kind = cfg.envelope
    fs = AU_TIME_S * 1e15

    def k(name):
        return f"`{key}.{name}`"

    if kind == "static":
        omega = 0.0
    elif cfg.wavelength is not None:
        omega = 2 * math.pi / (cfg.wavelength * ALPHA)        # ω = 2πc/λ, c = 1/α
    else:
        omega = cfg.photon_energy
    pol = cfg.polarization
    eta = 0.0 if cfg.ellipticity is None else float(cfg.ellipticity)
    weight = float(np.vdot(jones_vector(pol, eta), jones_vector(pol, eta)).real)
    which = "intensity" if cfg.intensity is not None else "peak_field"
    field = math.sqrt(cfg.intensity / weight) if which == "intensity" else cfg.peak_field
    if weight * field**2 * AU_INTENSITY_WCM2 > MAX_INTENSITY_WCM2:
        raise InputError(f"{k(which)} = {weight * field**2 * AU_INTENSITY_WCM2:.3g} W/cm^2 exceeds "
                         f"{MAX_INTENSITY_WCM2:.0e} W/cm^2, where the electron turns relativistic and the "
                         f"dipole picture fails")
    ramp = cfg.ramp if cfg.ramp is not None else 0.0
    period = 2 * math.pi / omega if omega > 0 else math.inf
    fwhm_gaussian = None
    if kind == "static":
        length = cfg.length
    elif kind == "gaussian":
        which = "cycles" if cfg.cycles is not None else "fwhm"
        fwhm_gaussian = cfg.cycles * period if which == "cycles" else cfg.fwhm
        if cfg.length is not None:
            length = cfg.length
            if 2 * fwhm_gaussian > length:
                raise InputError(f"{k(which)} ({fwhm_gaussian * fs:.4g} fs FWHM) is longer than half the "
                                 f"window {k('length')} ({length * fs:.4g} fs); a gaussian needs length >= 2 fwhm")
        else:
            length = gaussian_window(fwhm_gaussian)
    elif cfg.length is not None:
        length = cfg.length
    elif cfg.cycles is not None:
        length = cfg.cycles * period
    elif kind == "flat":
        length = cfg.fwhm + 2 * _RAMP_HALF * ramp
    else:
        length = cfg.fwhm / (_SIN2_FWHM if kind == "sin2" else _COS4_FWHM)
    if not (math.isfinite(length) and length < MAX_WINDOW_AU):
        raise InputError(f"`{key}` lasts {length * fs:.3g} fs; at most {MAX_WINDOW_AU * fs:.3g} fs")
    if kind == "flat" and 2 * ramp > length:
        raise InputError(f"{k('ramp')} must be at most half the pulse length ({length / 2 * fs:.4g} fs), "
                         f"got {ramp * fs:.4g} fs")
    if kind == "static" and ramp > length:
        raise InputError(f"{k('ramp')} must not exceed {k('length')}, got {ramp * fs:.4g} fs > {length * fs:.4g} fs")
    chirp = cfg.chirp if cfg.chirp is not None else 0.0
    if omega > 0 and abs(chirp) * length / 2 >= omega:
        raise InputError(f"{k('chirp')} = {chirp:.3g} au sweeps the instantaneous frequency through zero "
                         f"inside the pulse; keep |chirp| < {2 * omega / length:.3g} au")
    if not abs(cfg.delay) < MAX_WINDOW_AU:
        raise InputError(f"{k('delay')} must be within ±{MAX_WINDOW_AU * fs:.3g} fs, got {cfg.delay * fs:.3g} fs")
    return PulseComponent(kind, omega=omega, peak_field=field, length=length, cep=float(cfg.cep),
                      delay=cfg.delay, chirp=chirp, polarization=pol, ramp=ramp,
                      fwhm_gaussian=fwhm_gaussian, ellipticity=eta)


# --- derived quantities for the `driven-atom pulse` table -----------------------------------------------
def derived_quantities(pulse: Pulse, atom=None) -> dict:
    """Per-pulse lab quantities and the total field area, as plain floats (None where undefined).

    Uₚ = I/(4ω²) (= F₀²/(4ω²) for linear light), Keldysh γ = √(Iₚ/(2Uₚ)) (Keldysh 1965) with Iₚ the
    ground-state ionisation potential of ``atom``, quiver amplitude α₀ = F₀/ω², fluence ∫c ε₀ E² dt.
    A static field has no intensity, fluence, Uₚ, γ or α₀ (None).
    ``field_area_au`` is ∫E dt along the common axis when all pulses are linear along one axis,
    otherwise the length of the vector ∫E dt.

    >>> d = derived_quantities(Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 10}))
    >>> round(d["pulses"][0]["Up_eV"], 3)
    5.976
    """
    atom = atom if atom is not None else pulse.atom
    fs = AU_TIME_S * 1e15
    rows = []
    for c in pulse.components:
        carrier = c.omega > 0
        up = c.intensity / (4 * c.omega**2) if carrier else None
        ip = atom.ionization_potential if atom is not None else None
        note = ""
        if c.envelope_kind == "gaussian":
            note = (f"gaussian cut where its profile falls to {c._gauss[1]:.1e} "
                    f"and lowered so f = 0 at the feet; window {c.length * fs:.4g} fs foot to foot")
        if c.polarization.startswith("circular"):
            note = (note + "; " if note else "") + "circular: peak field in each of x and y; intensity counts both"
        elif c.polarization == "elliptical":
            note = (note + "; " if note else "") + (f"elliptical: peak field along x, {c.ellipticity:g} of it "
                                                    f"along y; intensity counts both")
        rows.append({
            "envelope": c.envelope_kind,
            "polarization": c.polarization if c.polarization != "elliptical" else f"elliptical {c.ellipticity:g}",
            "peak_field_au": c.peak_field,
            "intensity_Wcm2": c.intensity * AU_INTENSITY_WCM2 if carrier else None,
            "photon_energy_eV": c.omega * HARTREE_EV,
            "wavelength_nm": photon_energy_to_wavelength_nm(c.omega) if carrier else None,
            "fwhm_fs": c.fwhm * fs if c.fwhm is not None else None,
            "length_fs": c.length * fs,
            "t_start_fs": c.t_start * fs,
            "t_end_fs": c.t_end * fs,
            "Up_eV": up * HARTREE_EV if carrier else None,
            "keldysh": math.sqrt(ip / (2 * up)) if carrier and ip is not None and up > 0 else None,
            "quiver_au": c.peak_field / c.omega**2 if carrier else None,
            "fluence_Jcm2": c.fluence() * AU_FLUENCE_JCM2 if carrier else None,
            "note": note,
        })
    area = pulse.field_area()
    axes = {c.polarization for c in pulse.components}
    if axes == {"z"}:
        field_area = float(area[2])
    elif axes == {"x"}:
        field_area = float(area[0])
    else:
        field_area = float(np.linalg.norm(area))
    return {"pulses": rows, "field_area_au": field_area,
            "t_start_fs": pulse.t_start * fs, "t_end_fs": pulse.t_end * fs}

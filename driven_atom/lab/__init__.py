"""Quick experiment estimates in lab units: what fraction of the atoms a pulse excites or ionises,
and how many per shot in a Gaussian focus — in seconds, before a full run.

``estimate(config, *, waist=..., density=... | pressure=... [temperature=...], length=..., m2=1)``
takes a run configuration (its ``[atom]`` and ``[[pulse]]``; the ``[solver]`` is not used) and
returns a dict of plain floats in the units their keys name:

* peak quantities of the strongest pulse: intensity, field, Keldysh γ, barrier-suppression
  intensity I_BS = Iₚ⁴/(16 Z²) (a.u.; Augst et al., PRL 63, 2212 (1989));
* ``ionization``: the single-atom probability at the peak intensity by the model the regime
  allows (:mod:`driven_atom.lab.rates`): one photon above threshold → first-order golden rule,
  saturated; below it → the cycle-averaged PPT rate along the envelope (tunnelling for γ < 1,
  multiphoton for γ > 1); a static field → the ADK rate; ``saturation_intensity_Wcm2`` where the
  exponent reaches 1 (P = 1 − 1/e);
* ``excitation``: for the dipole transition from the initial level nearest to resonance with a
  carrier (within 10 spectral widths), the two-level pulse-area estimate;
* with a focus (``waist`` = 1/e² intensity radius w₀, ``m2``): Rayleigh length and the pulse energy
  that the intensity needs; with a gas density (or pressure and temperature, n = p/(k_B T)) and
  an interaction ``length`` along the beam: ions and excited atoms per shot, averaged over the
  focus (:mod:`driven_atom.lab.focus`).

Each result says which model it used in ``notes``; ``driven-atom run`` gives the full answer. The
numbers are estimates, not a laser-safety assessment (the CLI prints the caution).

>>> out = estimate({"atom": {"Z": 1, "initial": "1s"}, "solver": {"route": "grid"},
...                 "pulse": [{"wavelength": "1600 nm", "intensity": "1e14 W/cm^2", "cycles": 10}]},
...                waist="30 um", density="1e12 cm^-3", length="1 mm")
>>> out["regime"], 1e-4 < out["ionization"] < 1e-1, out["ions_per_shot"] > 0
('tunnelling', True, True)
"""
from __future__ import annotations

import math

import numpy as np

from driven_atom.errors import InputError
from driven_atom.lab.rates import RESONANCE_WIDTHS, spectral_width

N_UPPER_MAX = 12            # upper levels searched for the nearest resonance
SATURATION_SEARCH = 1e8     # saturation intensities are searched up to this many times the peak


def _si(value, unit: str, name: str, example: str) -> float:
    """``value`` (string with units, or a pint Quantity) in the SI ``unit``; one-line errors."""
    import pint

    from driven_atom.units import registry

    if isinstance(value, (int, float)) and not isinstance(value, bool):
        raise InputError(f"`{name}` needs units, e.g. \"{example}\", got {value!r}")
    try:
        quantity = registry().Quantity(value) if isinstance(value, str) else value
        result = float(quantity.to(unit).magnitude)
    except (pint.errors.PintError, AttributeError, ValueError, TypeError):
        raise InputError(f"`{name}` must be a quantity like \"{example}\", got {value!r}") from None
    if not (math.isfinite(result) and result > 0):
        raise InputError(f"`{name}` must be > 0, got {value!r}")
    return result


def _gas_density_cm3(density, pressure, temperature) -> float | None:
    from driven_atom.units import BOHR_M, to_au

    if density is not None and pressure is not None:
        raise InputError("`density` and `pressure` exclude each other; give one")
    if density is not None:
        n = to_au(density, "density", name="density") / (BOHR_M * 100.0) ** 3
        if not n > 0:
            raise InputError(f"`density` must be > 0, got {density!r}")
        return n
    if pressure is not None:
        p = _si(pressure, "pascal", "pressure", "1e-6 mbar")
        T = _si(temperature, "kelvin", "temperature", "293 K")
        return p / (1.380649e-23 * T) * 1e-6          # ideal gas, k_B exact (SI 2019); per cm³
    return None


def _nearest_transition(atom, pulse, state):
    """(upper level, detuning, spectral width) of the dipole transition from ``state`` nearest to a
    carrier, or None when none lies within RESONANCE_WIDTHS spectral widths."""
    from driven_atom.atom import State
    from driven_atom.atom.levels import energy

    best = None
    for n in range(1, N_UPPER_MAX + 1):
        if n == state.n:
            continue
        for l_up in (state.l - 1, state.l + 1):
            if not 0 <= l_up < n:
                continue
            w_ul = energy(atom, n) - energy(atom, state.n)
            for c in pulse.components:
                if c.omega <= 0 or w_ul <= 0:
                    continue
                width = spectral_width(c)
                delta = c.omega - w_ul
                if abs(delta) <= RESONANCE_WIDTHS * width and (best is None or abs(delta) / width < best[3]):
                    best = (State(n, l_up), delta, width, abs(delta) / width)
    return None if best is None else best[:3]


def _static_estimate(atom, pulse, state, ip: float, focus_given: bool) -> dict:
    """A DC field only: ADK tunnelling over the ramp and plateau; no intensity, focus or resonance."""
    from driven_atom.lab.rates import ionization_exponent
    from driven_atom.units import HARTREE_EV

    exponent = float(ionization_exponent(pulse, ip, atom.Z, state.l, state.m)(1.0))
    f_bs = ip**2 / (4 * atom.Z)
    field = max(c.peak_field for c in pulse.components)
    notes = ["static field: ADK tunnelling rate over the ramp and the plateau (for H(1s) it exceeds the exact "
             "widths of Damburg & Kolosov 1976 by x1.7 at 0.05 au)"]
    if field > f_bs:
        notes.append("field above barrier suppression: over-the-barrier ionisation")
    if focus_given:
        notes.append("a static field has no focus: the waist, gas and length are not used")
    return {"state": state.label, "ionization_potential_eV": ip * HARTREE_EV, "regime": "static field",
            "peak_field_au": field, "barrier_suppression_field_au": f_bs,
            "ionization": float(-math.expm1(-exponent)), "excitation": None, "notes": notes}


def _lab_inputs(waist, length, m2, density, pressure, temperature):
    """(w₀ in m or None, length in m or None, density in cm⁻³ or None), each checked."""
    from driven_atom.units import BOHR_M, to_au

    if not 1.0 <= m2 < 100.0:
        raise InputError(f"`m2` (beam quality M²) must be within [1, 100), got {m2!r}")
    values = []
    for name, given in (("waist", waist), ("length", length)):
        value = None if given is None else to_au(given, "length", name=name) * BOHR_M
        if value is not None and not value > 0:
            raise InputError(f"`{name}` must be > 0, got {given!r}")
        values.append(value)
    return values[0], values[1], _gas_density_cm3(density, pressure, temperature)


def _saturation_scale(exponent) -> float:
    """The intensity scale s where exponent(s) = 1 (P = 1 − 1/e), by bisection in log s over
    [1e-8, SATURATION_SEARCH]; inf when the exponent stays below 1 there."""
    lo, hi = -8.0, math.log10(SATURATION_SEARCH)
    if exponent(10**hi) < 1:
        return math.inf
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if exponent(10**mid) < 1 else (lo, mid)
    return 10**hi


def _ionization_model(atom, pulse, state, ip: float, keldysh: float, lasers) -> tuple[str, object, list]:
    """(regime, s ↦ ∫w dt, notes): one photon above threshold → golden rule; otherwise PPT."""
    from driven_atom.lab.rates import ionization_exponent
    from driven_atom.observables.perturbation import first_order_ionization

    if max(c.omega for c in lasers) >= ip:
        p1 = first_order_ionization(atom, pulse, state.label)
        notes = ["ionisation: one photon above threshold, first-order (golden-rule) probability saturated "
                 "as 1 - exp(-P1)"]
        return "one-photon", lambda s: p1 * np.asarray(s, dtype=float), notes
    notes = [f"ionisation: PPT rate (Perelomov, Popov & Terent'ev 1966), cycle-averaged along the envelope "
             f"(Keldysh gamma {keldysh:.3g}); the grid route (driven-atom run) gives the full answer"]
    if len(lasers) > 1:
        notes.append("several pulses: the rate follows the sum of their envelopes at the carrier of the "
                     "strongest (an upper bound where colours beat)")
    regime = "tunnelling" if keldysh < 1 else "multiphoton"
    return regime, ionization_exponent(pulse, ip, atom.Z, state.l, state.m), notes


def _excitation_model(atom, pulse, state, i0: float) -> tuple[dict | None, object, list]:
    """(summary, s ↦ P_exc, notes) for the nearest resonance, or (None, None, notes)."""
    from driven_atom.atom.dipoles import lifetime
    from driven_atom.lab.rates import excitation_first_order
    from driven_atom.units import AU_INTENSITY_WCM2, AU_TIME_S, HARTREE_EV

    near = _nearest_transition(atom, pulse, state)
    if near is None:
        return None, None, [f"excitation: no dipole transition from {state.label} within "
                            f"{RESONANCE_WIDTHS:g} spectral widths of a carrier"]
    upper, delta, width = near
    p1 = excitation_first_order(pulse, atom, state, upper)

    def probability(s):
        return np.sin(np.sqrt(p1 * np.asarray(s, dtype=float))) ** 2

    tau = lifetime(atom, upper)
    area = 2 * math.sqrt(p1)                               # θ ∝ √I: θ = π at I0 (π/θ)²
    summary = {"transition": f"{state.label}-{upper.label}", "detuning_eV": delta * HARTREE_EV,
               "spectral_width_eV": width * HARTREE_EV, "pulse_area_rad": area,
               "probability": float(probability(1.0)), "upper_lifetime_s": tau * AU_TIME_S,
               "pi_pulse_intensity_Wcm2": i0 * (math.pi / area) ** 2 * AU_INTENSITY_WCM2 if area > 0 else None}
    notes = [f"excitation {state.label} -> {upper.label}: two-level pulse-area estimate sin^2(theta/2) with "
             f"the detuning in first order; no decay (run route levels for it)"]
    window = max(c.length for c in pulse.components)
    if tau < window:
        notes.append(f"{upper.label} lives {tau * AU_TIME_S:.3g} s, less than the pulse window "
                     f"({window * AU_TIME_S:.3g} s): decay during the pulse lowers the excited fraction")
    return summary, probability, notes


def estimate(config, *, waist=None, m2: float = 1.0, density=None, pressure=None, temperature="293 K",
             length=None) -> dict:
    """Quick single-atom and focal-volume estimates for the run ``config`` (module docstring)."""
    from driven_atom.atom import State
    from driven_atom.pulse import build_pulse
    from driven_atom.routes import load_config
    from driven_atom.lab.focus import focal_count, pulse_energy, rayleigh_length
    from driven_atom.units import AU_FLUENCE_JCM2, AU_INTENSITY_WCM2, BOHR_M, C_AU, HARTREE_EV

    cfg = load_config(config)
    atom, initial = cfg.build_atom(), cfg.initial_states()
    pulse = build_pulse(cfg, atom)
    if pulse is None:
        raise InputError("`pulse`: an estimate needs a [[pulse]] table")
    if len(initial) != 1:
        raise InputError("`atom.initial`: an estimate needs one initial state, not a superposition")
    state = initial[0][0]
    component = state if not isinstance(state, State) else None      # a fine- or hyperfine-structure label
    state = state if component is None and state.m is not None else State(state.n, state.l, 0)
    w0_m, length_m, n_cm3 = _lab_inputs(waist, length, m2, density, pressure, temperature)
    ip = atom.Z**2 * atom.reduced_mass / (2.0 * state.n**2)
    lasers = [c for c in pulse.components if c.omega > 0]
    if not lasers:
        return _static_estimate(atom, pulse, state, ip, focus_given=w0_m is not None)
    strongest = max(lasers, key=lambda c: c.intensity)
    i0 = strongest.intensity
    if not i0 > 0:
        raise InputError("`pulse`: an estimate needs a pulse of nonzero intensity")
    keldysh = math.sqrt(ip / (2 * i0 / (4 * strongest.omega**2)))          # γ = √(Iₚ/(2Uₚ))
    i_bs = ip**4 / (16 * atom.Z**2)

    regime, exponent, notes = _ionization_model(atom, pulse, state, ip, keldysh, lasers)
    if component is not None:
        notes.append(f"initial {component.label}: the estimate uses the Bohr level {state.level.label} "
                     f"(no fine or hyperfine structure, no static fields)")
    if i0 > i_bs:
        notes.append("peak intensity above barrier suppression: over-the-barrier ionisation, outside the "
                     "range of the rate formulas (the atoms ionise early in the pulse)")

    def ionization(s):
        return -np.expm1(-exponent(s))

    excitation, excited, more = _excitation_model(atom, pulse, state, i0)
    notes += more
    saturation = _saturation_scale(exponent)
    if math.isinf(saturation):
        notes.append(f"ionisation does not saturate below {i0 * SATURATION_SEARCH * AU_INTENSITY_WCM2:.3g} W/cm^2 "
                     "(the range searched)")
    out = {"state": state.label, "ionization_potential_eV": ip * HARTREE_EV, "regime": regime,
           "peak_intensity_Wcm2": i0 * AU_INTENSITY_WCM2, "peak_field_au": strongest.peak_field,
           "keldysh": keldysh, "barrier_suppression_Wcm2": i_bs * AU_INTENSITY_WCM2,
           "ionization": float(ionization(1.0)),
           "saturation_intensity_Wcm2": None if math.isinf(saturation) else i0 * saturation * AU_INTENSITY_WCM2,
           "excitation": excitation}
    if w0_m is not None:
        z_r = rayleigh_length(w0_m, 2 * math.pi * C_AU / strongest.omega * BOHR_M, m2)
        out.update({"waist_m": w0_m, "m2": m2, "rayleigh_length_m": z_r,
                    "pulse_energy_J": pulse_energy(strongest.fluence() * AU_FLUENCE_JCM2 * 1e4, w0_m)})
        if n_cm3 is not None and length_m is not None:
            n_m3 = n_cm3 * 1e6
            out.update({"density_cm3": n_cm3, "length_m": length_m,
                        "ions_per_shot": focal_count(ionization, n_m3, w0_m, z_r, length_m)})
            if excited is not None:
                out["excited_per_shot"] = focal_count(excited, n_m3, w0_m, z_r, length_m)
        elif n_cm3 is not None or length_m is not None:
            notes.append("atom counts need both a gas density (or pressure) and an interaction length")
    elif n_cm3 is not None or length_m is not None:
        notes.append("atom counts need a focus: give the waist")
    out["notes"] = notes
    return out

"""The experimentalist's estimate: from the lab's own numbers, how many atoms a pulse excites and
ionises per shot, whether the focus saturates, which process dominates and how far to trust it —
in a fraction of a second, before any run.

``estimate(config=None, *, lab=None, table=None, curve=False, **keys)`` takes a ``[lab]`` table (in a
TOML file, a dict, or as keyword arguments named like the keys: ``species``, ``wavelength``,
``pulse_energy``, ``fwhm``, ``waist``, ``pressure``, ...; :mod:`driven_atom.lab.inputs`) or a run
configuration's ``[atom]`` and ``[[pulse]]`` (no ``[solver]`` needed), and returns a dict of plain
floats whose keys name their units:

* ``regime``, ``method``, ``why``, ``accuracy``: the physics the regime calls for
  (:mod:`driven_atom.lab.physics`: one-photon, multiphoton perturbation theory, resonant Bloch
  equations with Doppler, linewidth, decay and ionisation of the upper level, PPT tunnelling,
  above the barrier) and the reasons;
* ``peak_intensity_Wcm2``, ``keldysh``, ``probability_peak`` (ionisation of one atom at the focus
  centre), ``excitation_peak`` (its upper-level population after the pulse, resonant regime),
  ``saturation_intensity_Wcm2`` (where the ionisation reaches 1 − 1/e), ``saturated`` and the plain
  ``saturation`` statement, ``resonance`` (line, detuning, Rabi frequency, pulse area, widths);
* with a focus and a gas: ``atoms_in_volume`` (inside the 1/e² radius along the interaction
  region), ``fraction_volume_averaged`` (ionised fraction of those; ``excited_fraction_volume_averaged``
  likewise), ``ions_per_shot``, ``excited_per_shot`` (focal averages, :mod:`driven_atom.lab.focus`),
  ``ions_per_second`` with a repetition rate, ``slope`` (d ln N/d ln E_p at the operating point);
* ``inputs`` (every input converted, the user's spelling under ``given``), ``warnings``, ``notes``,
  ``caution`` (:mod:`driven_atom.lab.caution`, null when none applies);
* ``table``: a campaign folder whose collected yields replace the formulas, ``check``: one short
  run of the route the regime calls for beside the estimate (:mod:`driven_atom.lab.refine`);
  ``curve``: the yield against the pulse energy for a figure.

>>> out = estimate(lab={"species": "H", "wavelength": "1600 nm", "intensity": "1e14 W/cm^2",
...                     "fwhm": "30 fs", "waist": "30 um", "density": "1e12 cm^-3", "length": "1 mm"})
>>> out["regime"], 1e-4 < out["probability_peak"] < 1e-1, out["ions_per_shot"] > 0
('tunnelling', True, True)
"""
from __future__ import annotations

import math

import numpy as np

SATURATION = 1 - math.exp(-1)            # P = 1 − 1/e defines the saturation intensity
CURVE_SCALES = (1e-3, 1e2)               # the yield curve spans these multiples of the pulse energy


def _probability_table(function, table_range=(1e-7, 1e2), nodes: int = 181):
    """A :class:`~driven_atom.lab.focus.ProbabilityTable` of a model's P(s) (tables pass through)."""
    from driven_atom.lab.focus import ProbabilityTable

    if isinstance(function, ProbabilityTable) or function is None:
        return function
    s = np.geomspace(*table_range, nodes)
    return ProbabilityTable(s, function(s))


def _scaled(table, factor: float):
    """The table of s ↦ P(factor·s)."""
    from driven_atom.lab.focus import ProbabilityTable

    return ProbabilityTable(table.s / factor, table.p)


def _statement(case, model, ions, s_sat, slope: float) -> str:
    """The plain saturation statement, with the local slope d ln N/d ln E_p measured at the operating
    point (3/2 for a saturated Gaussian focus inside the gas, common practice)."""
    p_peak = float(ions(np.array([1.0]))[0])
    grows = f"I^{slope:.2g}" if math.isfinite(slope) else "I^?"
    order = f" ({model.photons} photons)" if model.photons else ""
    if s_sat is None or s_sat > 1:
        return f"not saturated at the focus centre (P = {p_peak:.3g}): the yield grows as {grows} here{order}"
    focus = case.focus
    if focus is None or case.density is None:
        return f"saturated at the focus centre (P = {p_peak:.3g}): the yield per atom there grows as {grows}"
    if focus.profile == "gaussian" and abs(slope - 1.5) <= 0.2:
        return "saturated at the focus centre: the ion count grows as I^(3/2) from here"
    if focus.profile == "gaussian":
        z_sat = focus.rayleigh_length * math.sqrt(max(1 / s_sat - 1, 0.0))
        return (f"saturated at the focus centre: the ion count grows as {grows} here (not yet I^(3/2): the "
                f"saturated focus, 2 z_sat = {2 * z_sat:.3g} m, "
                + ("fills the interaction region)" if case.length is not None and case.length < 6 * z_sat
                   else "is still small against the unsaturated wings)"))
    return f"saturated across the {focus.profile} beam: the ion count grows as {grows} from here"


def _saturation_scale(function, table):
    """s where P(s) = 1 − 1/e: from the table, refined by bisection in ln s on an analytic model."""
    from driven_atom.lab.focus import ProbabilityTable

    guess = table.crossing(SATURATION)
    if guess is None or isinstance(function, ProbabilityTable):
        return guess
    lo, hi = math.log(guess / 1.5), math.log(guess * 1.5)
    for _ in range(50):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if float(function(np.array([math.exp(mid)]))[0]) < SATURATION else (lo, mid)
    return math.exp(0.5 * (lo + hi))


def _counts(case, ions, excited) -> dict:
    """Focal averages for the case (module docstring); empty without focus, gas or region."""
    if case.focus is None or case.density is None or (case.length is None and case.volume is None):
        return {}
    ion = case.focus.counts(ions, case.density, length=case.length, volume=case.volume)
    out = {"atoms_in_volume": ion["atoms_in_beam"], "ions_per_shot": ion["count"],
           "fraction_volume_averaged": ion["count_in_beam"] / ion["atoms_in_beam"] if ion["atoms_in_beam"] else None}
    if excited is not None:
        exc = case.focus.counts(excited, case.density, length=case.length, volume=case.volume)
        out["excited_per_shot"] = exc["count"]
        out["excited_fraction_volume_averaged"] = exc["count_in_beam"] / exc["atoms_in_beam"] if exc["atoms_in_beam"] else None
    return out


def _slope(case, ions) -> float:
    """d ln N/d ln E_p at the operating point (of the count with a gas, else of P at the peak)."""
    step = 1.05
    if case.focus is not None and case.density is not None and (case.length or case.volume):
        up = case.focus.counts(_scaled(ions, step), case.density, length=case.length, volume=case.volume)["count"]
        down = case.focus.counts(_scaled(ions, 1 / step), case.density, length=case.length,
                                 volume=case.volume)["count"]
    else:
        up, down = (float(ions(np.array([x]))[0]) for x in (step, 1 / step))
    return math.log(up / down) / (2 * math.log(step)) if up > 0 and down > 0 else float("nan")


def _curve(case, ions, excited) -> dict:
    """The ion (and excited-atom) yield against the pulse energy around the operating point."""
    scales = np.geomspace(*CURVE_SCALES, 61)
    counting = case.focus is not None and case.density is not None and (case.length or case.volume)
    values, exc = [], []
    for c in scales:
        if counting:
            values.append(case.focus.counts(_scaled(ions, c), case.density, length=case.length,
                                            volume=case.volume)["count"])
            if excited is not None:
                exc.append(case.focus.counts(_scaled(excited, c), case.density, length=case.length,
                                             volume=case.volume)["count"])
        else:
            values.append(float(ions(np.array([c]))[0]))
            if excited is not None:
                exc.append(float(excited(np.array([c]))[0]))
    energy = case.pulse_energy
    return {"scale": scales.tolist(), "pulse_energy_J": (scales * energy).tolist() if energy else None,
            "ions": values, "excited": exc or None, "per_shot": bool(counting)}


def estimate(config=None, *, lab: dict | None = None, table=None, check: bool = False, curve: bool = False,
             **keys) -> dict:
    """The lab estimate (module docstring); ``keys`` are ``[lab]`` keys (they override the file)."""
    from driven_atom.lab.caution import caution
    from driven_atom.lab.inputs import lab_case
    from driven_atom.lab.physics import binding_energy, choose_model, keldysh
    from driven_atom.units import AU_INTENSITY_WM2, HARTREE_EV

    case = lab_case(config, lab=lab, **keys)
    model = choose_model(case)
    if table is not None:
        from driven_atom.lab.refine import table_model

        model = table_model(case, model, table)
    ions = _probability_table(model.ionization)
    excited = _probability_table(model.excitation)
    ip = binding_energy(case.atom, case.state)
    out = {"species": case.species, "state": case.state.label, "ionization_potential_eV": ip * HARTREE_EV,
           "regime": model.regime, "method": model.method, "why": model.why, "accuracy": model.accuracy,
           "photons": model.photons}
    if case.static is not None:
        out.update({"peak_field_au": case.static.peak_field, "probability_peak": float(ions(np.array([1.0]))[0]),
                    "excitation_peak": None, "resonance": None, "saturated": None,
                    "inputs": case.inputs, "warnings": case.warnings + model.warnings,
                    "notes": case.notes + model.notes, "caution": None})
        return out
    i0_au = case.peak_intensity / AU_INTENSITY_WM2
    s_sat = _saturation_scale(model.ionization, ions)
    out.update({
        "peak_intensity_Wcm2": case.peak_intensity * 1e-4,
        "peak_field_au": math.sqrt(i0_au),
        "keldysh": keldysh(ip, i0_au, case.photon_energy),
        "ponderomotive_eV": i0_au / (4 * case.photon_energy**2) * HARTREE_EV,
        "barrier_suppression_Wcm2": ip**4 / (16 * _charge(case)**2) * AU_INTENSITY_WM2 * 1e-4,
        "probability_peak": float(ions(np.array([1.0]))[0]),
        "excitation_peak": float(excited(np.array([1.0]))[0]) if excited is not None else None,
        "saturation_intensity_Wcm2": s_sat * case.peak_intensity * 1e-4 if s_sat is not None else None,
        "saturated": bool(s_sat is not None and s_sat <= 1),
        "resonance": model.resonance,
        "nearest_lines": _nearest(case),
    })
    if s_sat is None:
        model.notes.append(f"the ionisation does not saturate below {ions.s[-1]:.3g} times the peak intensity")
    if model.alternatives:
        out["alternatives"] = {k: {"probability_peak": v} for k, v in model.alternatives.items()}
    env = case.envelope
    if case.pulse_energy is not None:
        out["pulse_energy_J"] = case.pulse_energy
        out["peak_power_W"] = case.pulse_energy / env.integral(1.0)
        if case.focus is not None:
            out["peak_fluence_Jcm2"] = case.pulse_energy / case.focus.area * 1e-4
        if case.rep_rate is not None:
            out["average_power_W"] = case.pulse_energy * case.rep_rate
    if case.focus is not None:
        out["waist_m"] = case.focus.waist
        if case.focus.rayleigh_length is not None:
            out["rayleigh_length_m"] = case.focus.rayleigh_length
    out.update(_counts(case, ions, excited))
    out["slope"] = _slope(case, ions)
    out["saturation"] = _statement(case, model, ions, s_sat, out["slope"])
    if "ions_per_shot" in out and case.rep_rate is not None:
        out["ions_per_second"] = out["ions_per_shot"] * case.rep_rate
    if not (case.focus is not None and case.density is not None and (case.length or case.volume)):
        missing = [name for name, ok in (("a focus (waist)", case.focus is not None),
                                         ("a gas (density, pressure or beam flux)", case.density is not None),
                                         ("an interaction length or volume", case.length or case.volume)) if not ok]
        model.notes.append(f"atom counts need {', '.join(missing)}")
    out["inputs"] = case.inputs
    out["warnings"] = case.warnings + model.warnings
    out["notes"] = case.notes + model.notes
    out["caution"] = caution({**{k: out.get(k) for k in ("pulse_energy_J", "peak_power_W", "peak_fluence_Jcm2",
                                                         "average_power_W")},
                              "wavelength_nm": case.inputs.get("wavelength_nm"), "species": case.species,
                              "density_cm3": case.inputs.get("density_cm3"),
                              "pressure_Pa": case.inputs.get("pressure_Pa")})
    if check:
        from driven_atom.lab.refine import check as run_check

        out["check"] = run_check(case, model)
    if curve:
        out["curve"] = _curve(case, ions, excited)
        out["curve"]["saturation_scale"] = s_sat
    return out


def _charge(case) -> float:
    """The charge the electron leaves behind: Z, or a model atom's Z_c."""
    return case.atom.asymptotic_charge


def _nearest(case) -> dict:
    """The nearest one- and two-photon lines with their detunings (atom layer; none for a model atom)."""
    from driven_atom.atom.resonance import nearest_lines

    if case.atom.model is not None:
        return {}
    return {f"{k}-photon": (line.as_dict() if line is not None else None)
            for k, line in nearest_lines(case.atom, case.state, case.photon_energy).items()}


__all__ = ["estimate"]

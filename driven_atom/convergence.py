"""Automatic convergence study: which knob limits the accuracy, and the cheapest settings within a
tolerance.

Each route names its numerical knobs (``Route.knobs``): the grid route dt (error ∝ dt², Strang
splitting), dr (∝ dr⁴, Numerov), l_max and r_max (converging faster than any power); the basis
route dr, r_max, l_max, e_max and its step tolerance; the levels route its ODE tolerances. The
study

1. runs the given settings (every derived default made explicit), then each knob refined in turn
   (dt/2, dr/√2, l_max×1.5, r_max×1.5, ...): the change of the observable is that knob's share of
   the error;
2. when the predicted errors of all knobs add up to more than the tolerance, adopts the refinement
   of the largest ones until the rest fits, and repeats (at most ``rounds`` times);
3. coarsens the knobs of known order whose predicted error at the coarser value (Richardson:
   error ∝ h^p, so the change between h and h/2 is (1 − 2^−p) of the error at h) still leaves the
   sum of all predicted errors within 80 % of the tolerance;
4. runs the chosen settings once to confirm them against the most refined run.

The observable is the ionisation yield, a population, or the photoelectron spectrum ("spectrum":
its change is the distance ∫|ΔdP/dE| dE / ∫dP/dE dE, shape and area, and a flux run adds the flux
sphere's radius as a knob — the Coulomb tail is cut beyond it, a model error that only a larger
sphere shows).

The cost is reported in units of the first run (typically 6–9 runs for four knobs), counted as
the work the sizes imply (the routes' resource estimates: grid points × partial waves × steps and
the eigen-solves), which a busy machine does not distort; wall times are recorded beside it.

>>> from driven_atom.routes.base import Knob
>>> Knob("dt", 0.05, refine=0.025, coarsen=0.1, order=2, cost=2.0).predicted_error(1e-3)
0.0013333333333333333
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from driven_atom.errors import InputError


@dataclass
class Study:
    """The record of one study: every run (settings, observable, wall time) and the outcome."""

    observable: str
    tol: float
    runs: list = field(default_factory=list)
    table: list = field(default_factory=list)
    settings: dict = field(default_factory=dict)
    dominant: str = ""
    value: float = math.nan
    reference: float = math.nan
    cost_in_runs: float = math.nan
    converged: bool = False


def _observable(result, name: str):
    """The observable's value: a number, or for "spectrum" the pair (energies, dP/dE)."""
    if name == "ionization":
        return float(result.ionization)
    if name == "spectrum":
        spectrum = result.spectra.get("photoelectrons")
        if spectrum is None:
            raise InputError("`--observable` spectrum needs a photoelectron spectrum: give "
                             "`solver.photoelectron_methods` (route \"grid\")")
        return np.asarray(spectrum["energy_eV"]), np.asarray(spectrum["dP_dE"])
    if name.startswith("population:"):
        label = name.split(":", 1)[1]
        if label not in result.populations:
            raise InputError(f"`--observable` {name!r}: the result has no population {label!r} "
                             f"(has {', '.join(sorted(result.populations))})")
        return float(result.populations[label])
    raise InputError(f"`--observable` must be ionization, spectrum or population:LABEL, got {name!r}")


def _total(value) -> float:
    """The number a study reports: the value itself, or a spectrum's probability ∫dP/dE dE."""
    if isinstance(value, tuple):
        return float(np.trapezoid(value[1], value[0]))
    return float(value)


def _change(value, before) -> float:
    """The relative change of the observable: (y − y₀)/y₀, or for a spectrum the distance
    ∫|dP/dE − dP₀/dE| dE / ∫dP₀/dE dE (≥ 0; the shape as well as the area).

    >>> e = np.linspace(0.0, 1.0, 11)
    >>> round(_change((e, 1.1 * np.ones(11)), (e, np.ones(11))), 12), _change(1.1, 1.0) > 0.0999
    (0.1, True)
    """
    if isinstance(value, tuple):
        e, d = value
        e0, d0 = before
        if e.shape != e0.shape or not np.allclose(e, e0):
            raise InputError("the spectra of a convergence study must share their energies")
        total = np.trapezoid(d0, e0)
        return float(np.trapezoid(abs(d - d0), e0) / total) if total > 0 else 0.0
    return (value - before) / before if before else (value - before)


def converge(cfg, *, tol: float = 0.01, observable: str = "ionization", rounds: int = 3,
             progress=None) -> Study:
    """Run the study of the module docstring on ``cfg`` (a loaded config); returns a :class:`Study`.

    ``progress`` (optional) is called with a short text before every run.
    """
    from driven_atom.pulse import build_pulse
    from driven_atom.routes import route_class

    if not 0 < tol < 1:
        raise InputError(f"`--tol` must be within (0, 1) (a relative tolerance, e.g. 0.01 or \"1%\"), got {tol!r}")
    cls = route_class(cfg.route)
    atom, pulse, initial = cfg.build_atom(), build_pulse(cfg), cfg.initial_states()
    study = Study(observable=observable, tol=tol)

    def run(settings, why: str):
        if progress is not None:
            progress(why)
        started = time.perf_counter()
        route = cls(atom, pulse, settings, initial=initial, output=cfg.output, structure=cfg.atom.structure,
                    fields=cfg.fields)
        result = route.run(strict=False)
        wall = time.perf_counter() - started
        value = _observable(result, observable)
        work = result.stats.get("estimated_s") or wall        # the work the sizes imply (wall time if none)
        study.runs.append({"why": why, "settings": settings.physics(), "value": _total(value), "wall_s": wall,
                           "work_s": work})
        return result, value, work

    first, y0, work0 = run(cfg.solver, "the given settings")
    base = cls.explicit(cfg.solver, first)
    changes, refined_values, knobs = {}, {}, []
    for _ in range(rounds):
        knobs = cls.knobs(base)
        for knob in knobs:
            if knob.name in changes and abs(changes[knob.name]) < tol / 10:
                continue            # far inside the tolerance last round: its share stands
            _, y, _ = run(base.model_copy(update=knob.refined(base)), f"{knob.name} refined to {knob.refine:.4g}")
            changes[knob.name] = _change(y, y0)
            refined_values[knob.name] = y
            study.table.append({"knob": knob.name, "value": knob.value, "refined": knob.refine,
                                "observable": _total(y0), "observable_refined": _total(y), "change": changes[knob.name]})
        errors = {k.name: k.predicted_error(changes[k.name]) for k in knobs}
        if sum(errors.values()) <= tol:
            study.converged = True
            break
        bad, rest = [], sum(errors.values())
        for knob in sorted(knobs, key=lambda k: errors[k.name], reverse=True):
            if rest <= tol:
                break
            bad.append(knob)
            rest -= errors[knob.name]
        for knob in sorted(bad, key=lambda k: bool(k.also)):      # the moves of `also` on top of the others
            base = base.model_copy(update=knob.refined(base))
        for knob in bad:
            del changes[knob.name]                  # measured again from the new settings
        if len(bad) == 1:
            y0 = refined_values[bad[0].name]        # that run is the new base: no need to repeat it
        else:
            _, y0, _ = run(base, "with " + ", ".join(f"{k.name} = {k.refine:.4g}" for k in bad))
    errors = {k.name: k.predicted_error(changes.get(k.name, 0.0)) for k in knobs}
    study.dominant = max(errors, key=errors.get) if errors else ""
    spectrum = isinstance(y0, tuple)
    reference = _total(y0) * (1 + sum(changes.values())) if not spectrum else _total(y0)   # the refinements' estimate
    chosen = base
    value = y0
    if study.converged:
        budget = 0.8 * tol - sum(errors.values())
        for knob in sorted(knobs, key=lambda k: k.cost, reverse=True):
            extra = knob.coarse_error(changes[knob.name])
            if extra is not None and extra - errors[knob.name] < budget:
                budget -= extra - errors[knob.name]
                chosen = chosen.model_copy(update={knob.name: knob.coarsen})
        if chosen != base:
            _, value, _ = run(chosen, "the chosen settings")
    study.settings = chosen.physics()
    study.value, study.reference = _total(value), reference
    study.cost_in_runs = sum(r["work_s"] for r in study.runs) / work0 if work0 > 0 else math.nan
    return study

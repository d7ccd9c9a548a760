"""An error bar on every number: a companion run at reduced resolution and Richardson's estimate.

The route chooses the knobs (``Route.companion``): those whose error falls as a known power of
the knob, coarsened so that each such error grows by the same factor K — the grid route doubles
dt (Strang splitting and Crank–Nicolson, error ∝ dt²) and stretches dr by √2 (Numerov, ∝ dr⁴),
so K = 4 for both; the basis route stretches dr by √2 (K = 4) and loosens its step tolerance
fourfold; the levels route loosens the ODE tolerances 16-fold (error ∝ tolerance, K = 16). With
y the result and y_c the companion's, y ≈ y* + e and y_c ≈ y* + K·e, so

    e ≈ (y − y_c)/(K − 1)       (Richardson, Phil. Trans. R. Soc. A 210, 307 (1911)),

for every scalar: each population, the ionisation and the norm loss. Knobs whose error falls
exponentially (r_max, l_max, e_max, the kept states) are not in the bar: their convergence is
checked by the guards (the top partial wave, the top of the basis) and by ``driven-atom converge``.
The companion costs about a third of the run (the coarser grid and step).

>>> richardson(1.03, 1.12, 4)
-0.03
"""
from __future__ import annotations

from driven_atom.routes.quality import GuardStop


def richardson(y: float, y_coarse: float, factor: float) -> float:
    """(y − y_c)/(K − 1): the estimated error of y (sign: y minus the limit)."""
    return round((y - y_coarse) / (factor - 1.0), 15)


def error_block(result, companion, factor: float, knobs: dict) -> dict:
    """``quality["errors"]``: the estimated error of every scalar of ``result`` (absolute values)."""
    populations = {label: abs(richardson(value, companion.populations.get(label, value), factor))
                   for label, value in result.populations.items()}
    return {"method": "richardson", "factor": factor, "companion": knobs,
            "ionization": abs(richardson(result.ionization, companion.ionization, factor)),
            "norm_loss": abs(richardson(1 - result.norm, 1 - companion.norm, factor)),
            "populations": populations}


def run_companion(route_cls, atom, pulse, settings, initial, output, result, *, structure: str = "bohr",
                  fields=None):
    """Run the coarser companion of ``result`` (not strict: its preflight limits are not enforced,
    it is coarse on purpose) on the same level ``structure`` and static ``fields``; (companion
    result or None when it fails, K, knobs)."""
    coarse, factor, knobs = route_cls.companion(settings, result)
    route = route_cls(atom, pulse, coarse, initial=initial, output=output, structure=structure, fields=fields)
    try:
        return route.run(strict=False), factor, knobs
    except GuardStop:
        return None, factor, knobs

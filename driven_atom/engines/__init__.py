"""The propagation routes, one registry (like scipy's ``METHODS``).

Each route module defines

* ``Settings`` — a frozen pydantic model with ``extra="forbid"`` holding the route's ``[solver]``
  keys (``route`` included), documented field by field;
* ``propagate(atom, pulse, settings, *, initial, output, progress=False, checkpoint=None) -> Result``
  where ``initial`` is a list of ``(State, complex amplitude)`` (normalised), ``output`` the
  ``[output]`` model and ``checkpoint`` a :class:`driven_atom.result.Checkpoint` or ``None``.

Modules are imported only when their route is used, so light commands never import numba or qutip.
"""
from __future__ import annotations

import importlib

from driven_atom.errors import InputError

ROUTES = {
    "levels": "driven_atom.engines.levels",
    "basis": "driven_atom.engines.eigenbasis",
    "grid": "driven_atom.engines.grid",
}


def route_module(route: str):
    """The module implementing ``route``; a clear error for an unknown or unfinished route."""
    if route not in ROUTES:
        raise InputError(f"`solver.route` must be one of {', '.join(ROUTES)}, got {route!r}")
    try:
        return importlib.import_module(ROUTES[route])
    except ModuleNotFoundError as exc:
        if exc.name == ROUTES[route]:
            raise InputError(f"`solver.route` = {route!r} is not available in this version yet") from None
        raise


def settings_for(route: str, solver_keys: dict):
    """Validate a ``[solver]`` table into the route's ``Settings`` model."""
    from pydantic import ValidationError

    from driven_atom.campaign.config import validation_message

    module = route_module(route)
    try:
        return module.Settings(**solver_keys)
    except ValidationError as exc:
        raise InputError(validation_message(exc, prefix="solver", model=module.Settings)) from None

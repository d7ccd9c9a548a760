"""driven-atom: one-electron atoms driven by laser pulses.

The public names below are imported lazily, so ``import driven_atom`` is cheap.

>>> import driven_atom
>>> driven_atom.Atom(1).Z
1
"""
from __future__ import annotations

import importlib

__version__ = "0.1.0"

_EXPORTS = {
    "Atom": "driven_atom.atom",
    "State": "driven_atom.atom",
    "parse_state": "driven_atom.atom",
    "Pulse": "driven_atom.pulse",
    "Result": "driven_atom.result",
    "load_config": "driven_atom.campaign.config",
    "run": "driven_atom.api",
    "open_result": "driven_atom.api",
    "scan": "driven_atom.campaign.runner",
    "open_campaign": "driven_atom.campaign.summary",
    "estimate": "driven_atom.estimate",
    "lines": "driven_atom.atom.tables",
    "transition": "driven_atom.atom.tables",
    "state": "driven_atom.atom.tables",
    "xsec": "driven_atom.atom.tables",
}
__all__ = sorted(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        try:
            module = importlib.import_module(_EXPORTS[name])
        except ModuleNotFoundError as exc:
            if exc.name != _EXPORTS[name]:
                raise
            raise AttributeError(f"driven_atom.{name} is not available in this version yet") from None
        return getattr(module, name)
    raise AttributeError(f"module 'driven_atom' has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + __all__)

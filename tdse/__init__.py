"""driven-atom: one-electron atoms driven by laser pulses.

The public names below are imported lazily, so ``import tdse`` is cheap.

>>> import tdse
>>> tdse.Atom(1).Z
1
"""
from __future__ import annotations

import importlib

__version__ = "0.1.0"

_EXPORTS = {
    "Atom": "tdse.atom",
    "State": "tdse.atom",
    "parse_state": "tdse.atom",
    "Pulse": "tdse.pulse",
    "Result": "tdse.result",
    "load_config": "tdse.campaign.config",
    "run": "tdse.api",
    "open_result": "tdse.api",
    "scan": "tdse.campaign.runner",
    "open_campaign": "tdse.campaign.summary",
    "estimate": "tdse.estimate",
    "lines": "tdse.atom.tables",
    "transition": "tdse.atom.tables",
    "state": "tdse.atom.tables",
    "xsec": "tdse.atom.tables",
}
__all__ = sorted(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        try:
            module = importlib.import_module(_EXPORTS[name])
        except ModuleNotFoundError as exc:
            if exc.name != _EXPORTS[name]:
                raise
            raise AttributeError(f"tdse.{name} is not available in this version yet") from None
        return getattr(module, name)
    raise AttributeError(f"module 'tdse' has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + __all__)

"""driven-atom: one-electron atoms driven by laser pulses.

The public names below are imported lazily, so ``import driven_atom`` is cheap. Every name
resolves to the same object on every access (no subpackage shares a name with an export).

>>> import driven_atom as da
>>> da.Atom(1).Z
1
>>> callable(da.estimate) and callable(da.estimate)
True
"""
from __future__ import annotations

import importlib

__version__ = "0.2.0"

_EXPORTS = {
    "Atom": "driven_atom.atom",
    "State": "driven_atom.atom",
    "parse_state": "driven_atom.atom",
    "Pulse": "driven_atom.pulse",
    "Result": "driven_atom.result",
    "load_config": "driven_atom.routes",
    "run": "driven_atom.api",
    "open_result": "driven_atom.api",
    "estimate": "driven_atom.api",
    "scan": "driven_atom.campaign.runner",
    "open_campaign": "driven_atom.campaign.summary",
    "plot_campaign": "driven_atom.campaign.figure",
    "lines": "driven_atom.atom.tables",
    "transition": "driven_atom.atom.tables",
    "state": "driven_atom.atom.tables",
    "xsec": "driven_atom.atom.tables",
}
__all__ = sorted(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        value = getattr(importlib.import_module(_EXPORTS[name]), name)
        globals()[name] = value          # later accesses skip this hook (and win over any submodule)
        return value
    raise AttributeError(f"module 'driven_atom' has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + __all__)

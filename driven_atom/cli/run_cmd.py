"""``driven-atom run CONFIG [--out DIR|FILE.h5] [--json] [--no-progress]``: one propagation, any route.

Writes the HDF5 result (default ``runs/NAME-HASH.h5``) through :func:`driven_atom.api.run` and prints a
summary (final populations, ionisation, norm, warnings), or with ``--json`` exactly one object::

    {"route", "populations", "ionization", "norm", "result_file", "wall_s",
     "history": {"times_au": [...], "populations": {label: [...]}}}

A config whose pulses are given in lab units (an intensity, or a field with units) also gets the
laser-safety caution (on stderr with ``--json``).
"""
from __future__ import annotations

import sys
from pathlib import Path


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("run", help="one propagation; writes an HDF5 result and prints a summary",
                              description="Propagate the atom of CONFIG through its pulses with the "
                                          "route of [solver] and write the result file.")
    p.add_argument("config", metavar="CONFIG", help="run configuration (TOML)")
    p.add_argument("--out", metavar="DIR|FILE.h5", default=None,
                   help="result folder or file (default: runs/CONFIGNAME-HASH.h5)")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    add_common(p)
    p.set_defaults(handler=handle)


def has_lab_intensity(cfg) -> bool:
    """True when a pulse strength is given in lab units (any intensity, or a field with units
    other than atomic units): then the printed numbers feed an experiment.

    >>> from driven_atom.routes import load_config
    >>> has_lab_intensity(load_config({"atom": {"Z": 1}, "pulse": [{"photon_energy": 0.375,
    ...     "peak_field": 1e-3, "cycles": 10}], "solver": {"route": "levels", "states": ["1s"]}}))
    False
    """
    for p in cfg.to_dict().get("pulse", []):
        if p.get("intensity") is not None:
            return True
        field = p.get("peak_field")
        if isinstance(field, str) and not field.strip().lower().endswith(("au", "a.u.")):
            return True
    return False


def summary(result) -> str:
    """A readable summary of a :class:`driven_atom.result.Result`."""
    lines = [f"route: {result.route}    file: {result.metadata.get('file', '-')}    "
             f"wall: {result.stats.get('wall_s', float('nan')):.3g} s"]
    lines += [f"  {note}" for note in result.metadata.get("transitions", [])]
    lines.append("final populations:")
    width = max((len(k) for k in result.populations), default=0)
    lines += [f"  {label:<{width}}  {value:.6e}" for label, value in result.populations.items()]
    lines.append(f"ionization: {result.ionization:.6e}    norm: {result.norm:.10f}")
    lines += [f"warning: {w}" for w in result.warnings]
    return "\n".join(lines)


def handle(args):
    from driven_atom.api import run
    from driven_atom.routes import load_config
    from driven_atom.cli import SAFETY_CAUTION

    cfg = load_config(args.config)
    result = run(cfg, out=args.out, progress=not args.no_progress, name=Path(args.config).stem)
    caution = has_lab_intensity(cfg)
    if args.json:
        if caution:
            sys.stderr.write(SAFETY_CAUTION + "\n")
        return {"route": result.route, "populations": result.populations, "ionization": result.ionization,
                "norm": result.norm, "result_file": result.metadata.get("file"),
                "wall_s": result.stats.get("wall_s"),
                "history": {"times_au": result.times,
                            "populations": dict(result.history_populations)}}
    print(summary(result))
    if caution:
        print(SAFETY_CAUTION)
    return None

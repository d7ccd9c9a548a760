"""``driven-atom run CONFIG [--out DIR|FILE.h5] [--error] [--max-hours H] [--preflight] [--json]
[--no-progress]``: one propagation, any route.

Writes the HDF5 result (default ``runs/NAME-HASH.h5``) through :func:`driven_atom.api.run` and prints a
summary (final populations, ionisation, norm, error bars with ``--error``, the quality checks that
flagged something, warnings), or with ``--json`` exactly one object::

    {"route", "populations", "ionization", "norm", "result_file", "wall_s", "trustworthy",
     "warnings", "quality", "ionization_err", "populations_err", "caution",
     "history": {"times_au": [...], "populations": {label: [...]}}}

``--preflight`` makes every check a run makes before its first step (units, keys, resources,
accuracy) and stops there: ``{"preflight": [...checks...], "trustworthy"}``, exit 2 if one refuses.

When a pulse's fluence reaches the skin exposure limit (:func:`driven_atom.safety.laser_caution`)
the laser-safety caution with its numbers follows the summary (``caution`` in the JSON, null when
none).
"""
from __future__ import annotations

from pathlib import Path


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("run", help="one propagation; writes an HDF5 result and prints a summary",
                              description="Propagate the atom of CONFIG through its pulses with the "
                                          "route of [solver] and write the result file.")
    p.add_argument("config", metavar="CONFIG", help="run configuration (TOML)")
    p.add_argument("--out", metavar="DIR|FILE.h5", default=None,
                   help="result folder or file (default: runs/CONFIGNAME-HASH.h5)")
    p.add_argument("--error", action="store_true",
                   help="also run a coarser companion and give every number an error bar")
    p.add_argument("--max-hours", type=float, default=None, metavar="H",
                   help="refuse the run if its estimated time exceeds H hours")
    p.add_argument("--preflight", action="store_true",
                   help="only check the run (keys, resources, accuracy); compute and write nothing")
    p.add_argument("--cache-dir", metavar="DIR", default=None,
                   help="basis-cache folder (default: .basis-cache beside the result)")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    add_common(p)
    p.set_defaults(handler=handle)


def summary(result) -> str:
    """A readable summary of a :class:`driven_atom.result.Result`."""
    lines = [f"route: {result.route}    file: {result.metadata.get('file', '-')}    "
             f"wall: {result.stats.get('wall_s', float('nan')):.3g} s"]
    lines += [f"  {note}" for note in result.metadata.get("transitions", [])]
    errors = result.quality.get("errors", {})
    bars = errors.get("populations", {}) if errors.get("method") == "richardson" else {}
    lines.append("final populations:")
    width = max((len(k) for k in result.populations), default=0)
    lines += [f"  {label:<{width}}  {value:.6e}" + (f" ± {bars[label]:.2e}" if label in bars else "")
              for label, value in result.populations.items()]
    if errors.get("method") == "richardson":
        lines.append(f"ionization: {result.ionization:.6e} ± {errors['ionization']:.2e}    "
                     f"norm: {result.norm:.10f} (loss ± {errors['norm_loss']:.2e})")
    else:
        lines.append(f"ionization: {result.ionization:.6e}    norm: {result.norm:.10f}")
    trust = result.quality.get("trustworthy")
    if trust is not None:
        lines.append("quality: every check passed" if trust else "quality: NOT trustworthy (see the warnings)")
    lines += [f"warning: {w}" for w in result.warnings]
    return "\n".join(lines)


def _preflight(cfg, args):
    from driven_atom.routes import preflight
    from driven_atom.routes.quality import quality_block

    block = quality_block(preflight(cfg, max_hours=args.max_hours))
    if args.json:
        return {"preflight": block["checks"], "trustworthy": block["trustworthy"]}
    for check in block["checks"]:
        print(f"{check['level']:>4}  {check['message']}")
    print("preflight: every check passed" if block["trustworthy"] else "preflight: flagged (runs, not trustworthy)")
    return None


def handle(args):
    from driven_atom.api import run
    from driven_atom.pulse import build_pulse
    from driven_atom.routes import load_config
    from driven_atom.safety import laser_caution

    cfg = load_config(args.config)
    if args.preflight:
        return _preflight(cfg, args)
    result = run(cfg, out=args.out, progress=not (args.no_progress or args.json), name=Path(args.config).stem,
                 error_estimate=True if args.error else None, max_hours=args.max_hours, cache_dir=args.cache_dir)
    caution = laser_caution(build_pulse(cfg))
    if args.json:
        errors = result.quality.get("errors", {})
        return {"route": result.route, "populations": result.populations, "ionization": result.ionization,
                "norm": result.norm, "result_file": result.metadata.get("file"),
                "wall_s": result.stats.get("wall_s"), "trustworthy": result.quality.get("trustworthy"),
                "warnings": result.warnings, "quality": result.quality,
                "ionization_err": errors.get("ionization"), "populations_err": errors.get("populations"),
                "caution": caution, "history": {"times_au": result.times,
                            "populations": dict(result.history_populations)}}
    print(summary(result))
    if caution:
        print(caution)
    return None

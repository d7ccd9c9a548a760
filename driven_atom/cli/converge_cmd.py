"""``driven-atom converge CONFIG [--tol 1%] [--observable ionization|population:LABEL|spectrum] [--write FILE]
[--json] [--no-progress]``: an automatic convergence study (:mod:`driven_atom.convergence`).

Prints one row per knob and refinement (value, refined value, the observable before and after, the
change, the predicted error), the knob that dominates the error, the chosen settings and what the
study cost in units of one run; ``--write FILE`` stores the config with those settings (a new file:
an existing one is never overwritten). ``--json``: ``{"observable", "tol", "table", "dominant",
"settings", "value", "reference", "converged", "cost_in_runs", "runs", "written"}``.
"""
from __future__ import annotations

import sys
from pathlib import Path


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("converge", help="automatic convergence study: the cheapest settings within a tolerance",
                              description="Vary each numerical knob of the route in turn, find the one that "
                                          "dominates the error and the cheapest settings within the tolerance.")
    p.add_argument("config", metavar="CONFIG", help="run configuration (TOML)")
    p.add_argument("--tol", default="1%", help='relative tolerance on the observable, e.g. "1%%" or 0.01 (default 1%%)')
    p.add_argument("--observable", default="ionization", help="ionization (default), population:LABEL (e.g. population:2p) or spectrum "
                   "(the photoelectron spectrum's shape and area; a flux run adds the sphere's radius as a knob)")
    p.add_argument("--write", metavar="FILE", default=None, help="write the config with the chosen settings (a new file)")
    p.add_argument("--no-progress", action="store_true", help="no progress lines on stderr")
    add_common(p)
    p.set_defaults(handler=handle)


def parse_tolerance(text) -> float:
    """"1%" -> 0.01, "0.005" -> 0.005 (one-line error otherwise).

    >>> parse_tolerance("2%"), parse_tolerance("0.005")
    (0.02, 0.005)
    """
    from driven_atom.errors import InputError

    raw = str(text).strip()
    try:
        value = float(raw[:-1]) / 100 if raw.endswith("%") else float(raw)
    except ValueError:
        raise InputError(f"`--tol` must be a relative tolerance such as \"1%\" or 0.01, got {raw[:50]!r}") from None
    if not 0 < value < 1:
        raise InputError(f"`--tol` must be within (0, 1) (\"1%\" or 0.01), got {raw[:50]!r}")
    return value


def _write(cfg, settings: dict, path: Path) -> str:
    import tomli_w

    from driven_atom.errors import InputError
    from driven_atom.io import write_text

    if path.exists():
        raise InputError(f"`--write` {str(path)!r} exists; give a new file (nothing is overwritten)")
    data = cfg.to_dict()
    data["solver"] = {k: v for k, v in settings.items() if v is not None}
    text = "# settings chosen by driven-atom converge (quantities in atomic units)\n" + tomli_w.dumps(data)
    write_text(path, text)
    return str(path)


def handle(args):
    from driven_atom.convergence import converge
    from driven_atom.routes import load_config

    tol = parse_tolerance(args.tol)
    cfg = load_config(args.config)
    if args.write and Path(args.write).exists():
        _write(cfg, {}, Path(args.write))           # refuses before any computing
    say = None if args.no_progress else (lambda text: sys.stderr.write(f"driven-atom converge: {text}\n"))
    study = converge(cfg, tol=tol, observable=args.observable, progress=say)
    written = _write(cfg, study.settings, Path(args.write)) if args.write else None
    if args.json:
        return {"observable": study.observable, "tol": study.tol, "table": study.table, "dominant": study.dominant,
                "settings": study.settings, "value": study.value, "reference": study.reference,
                "converged": study.converged, "cost_in_runs": study.cost_in_runs, "runs": study.runs,
                "written": written}
    print(f"{'knob':<10}{'value':>12}{'refined':>12}{args.observable:>16}{'refined':>16}{'change':>10}")
    for row in study.table:
        print(f"{row['knob']:<10}{row['value']:>12.5g}{row['refined']:>12.5g}{row['observable']:>16.8g}"
              f"{row['observable_refined']:>16.8g}{row['change']:>+10.2%}")
    verdict = "within" if study.converged else "NOT within"
    print(f"dominant error: {study.dominant}; {verdict} {tol:.2%} after {len(study.runs)} runs "
          f"(cost {study.cost_in_runs:.1f}x the first run)")
    print(f"{args.observable} at the chosen settings: {study.value:.8g}")
    print("chosen settings: " + ", ".join(f"{k} = {v:.6g}" if isinstance(v, float) else f"{k} = {v}"
                                          for k, v in study.settings.items() if v is not None and k != "route"))
    if written:
        print(f"config written to {written}")
    return None

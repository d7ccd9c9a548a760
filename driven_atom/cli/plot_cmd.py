"""``driven-atom plot RESULT [--out FILE] [--json]``: a figure of a stored result file.

Draws the panels of :func:`driven_atom.plotting.result_figure` (population histories, and the
photoelectron and harmonic spectra when the file holds them) into FILE (default: RESULT with the
suffix .png); prints ``figure written to FILE`` or, with ``--json``, ``{"figure", "panels"}``.
"""
from __future__ import annotations

from pathlib import Path


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("plot", help="draw a stored result file (populations, spectra)",
                              description="Draw the population histories and spectra of a result file.")
    p.add_argument("result", metavar="RESULT", help="result file (.h5) written by `driven-atom run` or a campaign")
    p.add_argument("--out", metavar="FILE", default=None,
                   help="figure file (png, pdf, svg; default: RESULT with suffix .png)")
    add_common(p)
    p.set_defaults(handler=handle)


def default_out(result_path) -> Path:
    """RESULT with its suffix replaced by .png.

    >>> str(default_out("runs/a.h5"))
    'runs/a.png'
    """
    return Path(result_path).with_suffix(".png")


def handle(args):
    from driven_atom.api import open_result
    from driven_atom.plotting import figure_format, result_figure, result_panels

    from driven_atom.errors import InputError

    if not str(args.result).strip():
        raise InputError("`RESULT` must name a result file (.h5), got ''")
    out = Path(args.out) if args.out is not None else default_out(args.result)
    figure_format(out, "--out")              # a bad suffix fails before the file is read
    result = open_result(args.result)
    panels = result_panels(result)
    path = result_figure(result, out, name="--out")
    if args.json:
        return {"figure": str(path), "panels": panels}
    print(f"figure written to {path}")
    return None

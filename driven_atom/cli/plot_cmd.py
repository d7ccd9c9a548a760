"""``driven-atom plot RESULT|DIR [--out FILE] [--json]``: a figure of a stored result file or of a campaign.

A result file (``driven-atom run``, a campaign job): the panels of
:func:`driven_atom.plotting.result_figure` (population histories, and the photoelectron and harmonic
spectra when the file holds them); default FILE: RESULT with the suffix .png.

A campaign folder, or its ``summary.h5``: the campaign figure of
:func:`driven_atom.campaign.figure.campaign_figure` (every scalar observable against the scanned
axes, slopes of yields against intensity, maps of two axes); default FILE: ``DIR/summary.png``.

Prints ``figure written to FILE`` or, with ``--json``, ``{"figure", "panels"}`` (for a campaign each
panel is a description with its observable, kind, axes and fitted slopes).
"""
from __future__ import annotations

from pathlib import Path


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("plot", help="draw a result file, or a campaign (folder or summary.h5)",
                              description="Draw the population histories and spectra of a result file, or every "
                                          "scalar observable of a campaign against its scanned axes.")
    p.add_argument("result", metavar="RESULT|DIR",
                   help="result file (.h5) of `driven-atom run` or a campaign job; or a campaign folder or its "
                        "summary.h5")
    p.add_argument("--out", metavar="FILE", default=None,
                   help="figure file (png, pdf, svg; default: RESULT with suffix .png, DIR/summary.png for a campaign)")
    add_common(p)
    p.set_defaults(handler=handle)


def default_out(result_path) -> Path:
    """RESULT with its suffix replaced by .png; a campaign folder's figure is its summary.png.

    >>> str(default_out("runs/a.h5"))
    'runs/a.png'
    """
    path = Path(result_path)
    return path / "summary.png" if path.is_dir() else path.with_suffix(".png")


def is_summary(path) -> bool:
    """True for a campaign folder or a campaign summary file (netCDF with the campaign's job counts)."""
    import h5py

    path = Path(path)
    if path.is_dir():
        return True
    try:
        with h5py.File(path, "r") as f:
            return "n_jobs" in f.attrs and "route" not in f.attrs
    except (OSError, ValueError):
        return False


def handle(args):
    from driven_atom.errors import InputError
    from driven_atom.plotting import figure_format

    if not str(args.result).strip():
        raise InputError("`RESULT` must name a result file (.h5) or a campaign folder, got ''")
    out = Path(args.out) if args.out is not None else default_out(args.result)
    figure_format(out, "--out")              # a bad suffix fails before the file is read
    if is_summary(args.result):
        path, panels = _campaign(args.result, out)
    else:
        path, panels = _result(args.result, out)
    if args.json:
        return {"figure": str(path), "panels": panels}
    print(f"figure written to {path}")
    return None


def _result(source, out):
    from driven_atom.api import open_result
    from driven_atom.plotting import result_figure, result_panels

    result = open_result(source)
    panels = result_panels(result)
    return result_figure(result, out, name="--out"), panels


def _campaign(source, out):
    from driven_atom.campaign.figure import campaign_figure
    from driven_atom.campaign.summary import open_campaign
    from driven_atom.plotting import _save

    fig, panels = campaign_figure(open_campaign(source))
    return _save(fig, out, "--out"), panels

"""``driven-atom report DIR [--out FILE.html] [--json]``: the report of a campaign as one HTML file.

Self-contained (the figure embedded as a PNG, no script, no network): provenance, plan, settings,
every job's status with its axis values, the campaign figure and the quality flags
(:mod:`driven_atom.campaign.report`). Prints ``report written to FILE`` or, with ``--json``,
``{"report", "total", "done", "failed"}``.
"""
from __future__ import annotations


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("report", help="one self-contained HTML report of a campaign folder",
                              description="Write the plan, settings, job status, figures, quality flags and "
                                          "provenance of a campaign into one HTML file.")
    p.add_argument("folder", metavar="DIR", help="campaign folder")
    p.add_argument("--out", metavar="FILE.html", default=None, help="report file (default: DIR/report.html)")
    add_common(p)
    p.set_defaults(handler=handle)


def handle(args):
    from driven_atom.campaign.report import write_report
    from driven_atom.campaign.store import campaign_status

    path = write_report(args.folder, args.out)
    status = campaign_status(args.folder)
    if args.json:
        return {"report": str(path), "total": status["total"], "done": status["done"], "failed": status["failed"]}
    print(f"report written to {path}")
    return None

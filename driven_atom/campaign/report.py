"""The report of a campaign: one self-contained HTML file to read or send.

:func:`campaign_report` gathers, from the campaign folder alone: provenance (package and library
versions, config hash, host, when the last scan started and the last job ended, CPU and wall time of
the jobs), the plan (axes, their units and values, the job count), the settings (the config as
written and the solver settings with their defaults), the status of every job with its axis
values, the campaign figure (:mod:`driven_atom.campaign.figure`, embedded as a base64 PNG) and the
quality flags of every job a check flagged. Nothing is fetched: no script, no external style sheet,
image or font. :func:`write_report` writes it through :func:`driven_atom.io.write_text`.
"""
from __future__ import annotations

import base64
import hashlib
import html
import io
import json
import time
from pathlib import Path

from driven_atom.campaign import store

_STYLE = """
body { font-family: sans-serif; margin: 2em auto; max-width: 80em; color: #222; }
table { border-collapse: collapse; margin: 0.5em 0 1.5em; font-size: 0.9em; }
th, td { border: 1px solid #bbb; padding: 0.2em 0.6em; text-align: left; vertical-align: top; }
th { background: #eee; }
td.failed, td.corrupt { color: #a00; font-weight: bold; }
td.done { color: #060; }
pre { background: #f6f6f6; padding: 0.8em; overflow-x: auto; font-size: 0.85em; }
img { max-width: 100%; border: 1px solid #ddd; }
"""


def _e(value) -> str:
    return html.escape(str(value), quote=True)


def _table(head: list, rows: list, classes: list | None = None) -> str:
    out = ["<table>", "<tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr>"]
    for i, row in enumerate(rows):
        cells = []
        for j, cell in enumerate(row):
            cls = classes[i][j] if classes and classes[i][j] else ""
            cells.append(f'<td class="{_e(cls)}">{_e(cell)}</td>' if cls else f"<td>{_e(cell)}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def _figure_png(ds) -> tuple[str | None, str]:
    """(base64 PNG of the campaign figure, or None, and a note why not)."""
    from driven_atom.campaign.figure import campaign_figure
    from driven_atom.errors import InputError

    try:
        fig, _ = campaign_figure(ds)
    except InputError as exc:
        return None, str(exc)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=100)
    return base64.b64encode(buffer.getvalue()).decode("ascii"), ""


def _provenance(folder: Path, plan: dict, results: dict) -> list[tuple[str, str]]:
    import tomli_w

    from driven_atom import __version__

    campaign = plan["campaign"]
    config_text = tomli_w.dumps(plan.get("config", {}))
    ended = [str(r.metadata.get("created") or "") for r in results.values()]
    cpu = [r.stats.get("cpu_s") for r in results.values()]
    wall = [r.stats.get("wall_s") or 0.0 for r in results.values()]
    cpu_text = f"{sum(c for c in cpu if c is not None):.3g} s"
    if any(c is None for c in cpu):
        cpu_text += f" ({sum(c is None for c in cpu)} job(s) written before CPU time was recorded: not counted)"
    versions = campaign.get("versions", "{}")
    try:
        versions = ", ".join(f"{k} {v}" for k, v in json.loads(versions).items())
    except (TypeError, ValueError):
        versions = str(versions)
    return [("folder", str(folder.resolve())), ("package", f"driven-atom {__version__} (this report)"),
            ("versions when the plan was written", versions),
            ("config hash (SHA-256 of the stored config, first 16 digits)",
             hashlib.sha256(config_text.encode()).hexdigest()[:16]),
            ("host of the last scan", str(campaign.get("host", "?"))),
            ("last scan started", str(campaign.get("created", "?"))),
            ("last job written", max((e for e in ended if e), default="-")),
            ("CPU time of the done jobs", cpu_text), ("wall time of the done jobs", f"{sum(wall):.3g} s"),
            ("report written", time.strftime("%Y-%m-%dT%H:%M:%S%z"))]


def _job_created(folder: Path, job_id: str) -> str:
    import h5py

    try:
        with h5py.File(store.job_path(folder, job_id), "r") as f:
            return str(f.attrs.get("created", ""))
    except (OSError, ValueError):
        return ""


def _solver_settings(config: dict) -> list[tuple[str, str]]:
    """The solver settings with their defaults (quantities in atomic units)."""
    from driven_atom.config import read_settings

    try:
        settings = read_settings(dict(config.get("solver", {})))
    except Exception:  # noqa: BLE001 - a stored config that no longer reads: the text above says it all
        return []
    return [(key, str(value)) for key, value in settings.model_dump(mode="json").items()]


def campaign_report(folder) -> str:
    """The HTML text of the report of campaign ``folder`` (see the module docstring)."""
    import tomli_w

    from driven_atom.campaign.display import axis_headings, axis_texts
    from driven_atom.campaign.summary import open_campaign

    folder = Path(folder)
    plan = store.read_plan(folder)
    status = store.campaign_status(folder)
    results = {}
    for job in status["jobs"]:
        if job["status"] == store.DONE:
            _, result = store.load_job(folder, job["id"])
            if result is not None:
                result.metadata["created"] = _job_created(folder, job["id"])
                results[job["id"]] = result
    ds = open_campaign(folder)
    png, why = _figure_png(ds)

    parts = [f"<h1>Campaign report: {_e(folder.name)}</h1>",
             f"<p>{status['total']} jobs: {status['done']} done, {status['failed']} failed, {status['running']} "
             f"running, {status['pending']} pending; {status['untrustworthy']} flagged by a quality check.</p>"]
    parts += ["<h2>Provenance</h2>", _table(["", ""], _provenance(folder, plan, results))]

    dims = plan["campaign"]["dims"]
    shape = plan["campaign"]["shape"]
    parts.append("<h2>Plan</h2>")
    parts.append(f"<p>{' × '.join(f'{d} ({n})' for d, n in zip(dims, shape))} = "
                 f"{plan['campaign'].get('n_jobs', status['total'])} distinct jobs.</p>")
    axis_rows = [(path, axis["dim"], status["axes"][path]["units"],
                  ", ".join(axis_texts(list(axis["coords"])))) for path, axis in plan.get("axes", {}).items()]
    parts.append(_table(["axis (key)", "dimension", "units", "values"], axis_rows))

    parts += ["<h2>Settings</h2>", "<p>The config as stored in the campaign folder:</p>",
              f"<pre>{_e(tomli_w.dumps(plan.get('config', {})))}</pre>"]
    solver = _solver_settings(plan.get("config", {}))
    if solver:
        parts += ["<p>Solver settings with their defaults (quantities in atomic units):</p>",
                  _table(["key", "value"], solver)]

    parts.append("<h2>Figures</h2>")
    if png:
        parts.append(f'<img alt="every scalar observable against the scanned axes" '
                     f'src="data:image/png;base64,{png}">')
    else:
        parts.append(f"<p>No figure: {_e(why)}</p>")

    parts.append("<h2>Jobs</h2>")
    headings = axis_headings(status["axes"])
    columns = {path: axis_texts([job["values"][path] for job in status["jobs"]]) for path in headings}
    rows, classes = [], []
    for i, job in enumerate(status["jobs"]):
        trust = {True: "yes", False: "NO", None: "-"}[job["trustworthy"]]
        wall = f"{job['wall_s']:.3g}" if job["wall_s"] is not None else "-"
        rows.append([*(columns[p][i] for p in headings), job["status"], wall, trust, job["id"], job["error"]])
        classes.append([""] * len(headings) + [job["status"], "", "", "", ""])
    parts.append(_table([*headings.values(), "status", "wall [s]", "trusted", "job", "reason"], rows, classes))

    parts.append("<h2>Quality flags</h2>")
    flagged = []
    for job_id, result in results.items():
        for check in result.quality.get("checks", []):
            if check.get("level") != "ok":
                flagged.append((job_id, check.get("level", ""), check.get("name", ""), check.get("message", "")))
    if flagged:
        parts.append(_table(["job", "level", "check", "what it says"], flagged))
    else:
        parts.append(f"<p>Every quality check of the {len(results)} done job(s) passed.</p>")

    body = "\n".join(parts)
    return (f'<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
            f"<title>Campaign report: {_e(folder.name)}</title>\n<style>{_STYLE}</style>\n</head>\n"
            f"<body>\n{body}\n</body>\n</html>\n")


def write_report(folder, out=None) -> Path:
    """Write the report of ``folder`` to ``out`` (default ``DIR/report.html``) atomically."""
    from driven_atom.errors import InputError
    from driven_atom.io import write_text

    folder = Path(folder)
    out = Path(out) if out is not None else folder / "report.html"
    if out.suffix.lower() not in (".html", ".htm"):
        raise InputError(f"`--out` must end in .html, got {str(out)!r}")
    text = campaign_report(folder)
    return write_text(out, text)

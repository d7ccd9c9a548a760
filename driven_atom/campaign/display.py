"""How a campaign's scan axes and job rows read as text (``status``, ``collect``, the report).

>>> axis_headings({"pulse.0.wavelength": {"units": "nm"}, "pulse.1.wavelength": {"units": "nm"}})
{'pulse.0.wavelength': 'pulse.0.wavelength [nm]', 'pulse.1.wavelength': 'pulse.1.wavelength [nm]'}
"""
from __future__ import annotations


def axis_headings(axes: dict) -> dict:
    """Column headings of the scan axes: the key's last part (the whole path where two axes share
    it) and the unit in brackets ("au" named by its kind).

    >>> axis_headings({"pulse.0.intensity": {"units": "W/cm^2"}, "solver.l_max": {"units": "1"}})
    {'pulse.0.intensity': 'intensity [W/cm^2]', 'solver.l_max': 'l_max'}
    """
    leaves = [path.rsplit(".", 1)[-1] for path in axes]
    out = {}
    for path, axis in axes.items():
        leaf = path.rsplit(".", 1)[-1]
        name = leaf if leaves.count(leaf) == 1 else path
        units = axis.get("units") or "1"
        out[path] = name if units == "1" else f"{name} [{units}]"
    return out


def axis_texts(values: list) -> list[str]:
    """Numbers with as few significant digits (at least 4) as tell neighbours apart; texts as they are.

    >>> axis_texts([121.56834, 121.568375, 121.56841])
    ['121.56834', '121.56838', '121.56841']
    """
    numbers = [v for v in values if isinstance(v, (int, float)) and not isinstance(v, bool)]
    for digits in range(4, 17):
        texts = [f"{v:.{digits}g}" for v in numbers]
        if len(set(texts)) == len(set(numbers)):
            break
    formatted = iter(texts if numbers else [])
    return [next(formatted) if isinstance(v, (int, float)) and not isinstance(v, bool) else str(v) for v in values]


def status_table(status: dict, width: int = 160) -> list[str]:
    """The rows of ``driven-atom status`` as text lines: axis values, status, wall time, trust, reason."""
    headings = axis_headings(status["axes"])
    columns = {path: axis_texts([job["values"][path] for job in status["jobs"]]) for path in headings}
    head = [*headings.values(), "status", "wall_s", "trusted", "job", "reason"]
    rows = []
    for i, job in enumerate(status["jobs"]):
        wall = f"{job['wall_s']:.3f}" if job["wall_s"] is not None else "-"
        trust = {True: "yes", False: "NO", None: "-"}[job["trustworthy"]]
        reason = job["error"] if len(job["error"]) <= width else job["error"][:width - 3] + "..."
        rows.append([*(columns[path][i] for path in headings), job["status"], wall, trust, job["id"], reason])
    widths = [max(len(str(r[j])) for r in [head, *rows]) for j in range(len(head))]
    return ["  ".join(str(cell).ljust(w) for cell, w in zip(line, widths)).rstrip() for line in [head, *rows]]

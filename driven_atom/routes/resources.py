"""Will it fit? Memory and time of a run, estimated from its sizes before anything is allocated.

Each route estimates its largest arrays and its work from the sizes it is about to use
(``Route.estimate_resources``); :func:`check_resources` refuses a run that cannot fit in the
memory this machine has available (one line with the numbers), and one estimated above the
``max_hours`` budget when one is given; without a budget a run longer than an hour gets a warning.

The speed constants are what ``benchmarks/grid.py`` and ``benchmarks/basis.py`` measure on a
2-core CPU of this project's kind (rounded up: the estimate errs on the long side).

>>> check_resources(1e6, 10.0, max_hours=None)
[]
"""
from __future__ import annotations

import os

from driven_atom.errors import Refused

GRID_NS_PER_POINT_STEP = 15.0        # fused single-core kernel, ns per radial point x partial wave x step
DENSE_EIGH_NS_PER_N3 = 1.0           # LAPACK symmetric eigen-solver, ns per N^3 (one thread)
BOUND_STATES_S_PER_POINT = 2e-4      # grid route: bound states of one partial wave, s per radial point
MEMORY_SHARE = 0.8                   # of the available memory a run may plan to use
WARN_HOURS = 1.0


def available_memory() -> int:
    """Bytes this process may still allocate: MemAvailable of /proc/meminfo (Linux), else the
    physical memory, else a large number (no refusal where the machine cannot tell)."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    try:
        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        return 1 << 60


def human_bytes(n: float) -> str:
    """'7.3 TiB' for a byte count.

    >>> human_bytes(8e12)
    '7.28 TiB'
    """
    for unit in ("B", "KiB", "MiB", "GiB", "TiB", "PiB"):
        if n < 1024 or unit == "PiB":
            return f"{n:.3g} {unit}"
        n /= 1024
    return f"{n:.3g} PiB"    # pragma: no cover


def human_time(seconds: float) -> str:
    """'3.2 h' for a duration.

    >>> human_time(11520.0)
    '3.2 h'
    """
    if seconds < 120:
        return f"{seconds:.3g} s"
    if seconds < 7200:
        return f"{seconds / 60:.3g} min"
    if seconds < 3 * 86400:
        return f"{seconds / 3600:.3g} h"
    return f"{seconds / 86400:.3g} days"


def check_resources(memory_bytes: float | None, seconds: float | None, *, max_hours: float | None,
                    what: str = "this run", fix: str = "") -> list[str]:
    """Refuse (:class:`Refused`) what cannot fit or exceeds the time budget; return warnings."""
    warnings = []
    if memory_bytes is not None:
        free = available_memory()
        if memory_bytes > MEMORY_SHARE * free:
            raise Refused(f"refused before the run: {what} needs about {human_bytes(memory_bytes)} of memory, "
                          f"this machine has {human_bytes(free)} available" + (f"; {fix}" if fix else ""))
    if seconds is not None:
        if max_hours is not None and seconds > max_hours * 3600:
            raise Refused(f"refused before the run: {what} takes about {human_time(seconds)}, above the budget "
                          f"`--max-hours` = {max_hours:g}" + (f"; {fix}" if fix else ""))
        if max_hours is None and seconds > WARN_HOURS * 3600:
            warnings.append(f"{what} takes about {human_time(seconds)} (estimate from its sizes)")
    return warnings

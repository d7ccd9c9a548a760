"""How far a number can be trusted: the checks a run makes and its ``quality`` block.

A :class:`Check` compares one number with a soft and a hard limit, both "larger is worse":

* ``ok`` — within the soft limit;
* ``soft`` — past the soft limit: the result is complete but flagged (a warning in the result and in
  the campaign summary, ``trustworthy: false``);
* ``hard`` — past the hard limit: before the propagation the run is refused (one line, exit 2, no
  file); during it the run stops; no result is written as complete.

Every check names the setting to change. The routes make their accuracy checks in ``preflight``
(before any propagation) and the base class its guards at every history sample (norm, NaN/Inf,
the top partial wave, the top of the basis, the absorber); ``quality`` lists them all with their
numbers and ``trustworthy`` (every check ``ok``).

>>> c = assess("norm_excess", 2e-3, soft=1e-6, hard=1e-3, key="solver.dt", why="the norm grew")
>>> c.level, c.message.startswith("the norm grew")
('hard', True)
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass

from driven_atom.errors import InputError

OK, SOFT, HARD = "ok", "soft", "hard"


class GuardStop(InputError):
    """A run stopped by a run-time guard: its numbers would be wrong (exit 2, nothing written)."""


@dataclass(frozen=True)
class Check:
    """One number against its limits (larger is worse); ``key`` is the setting to change."""

    name: str
    value: float
    soft: float | None
    hard: float | None
    level: str
    key: str
    message: str

    def as_dict(self) -> dict:
        out = asdict(self)
        out["value"] = _plain(self.value)
        return out


def _plain(x):
    x = float(x)
    return x if math.isfinite(x) else repr(x)


def assess(name: str, value: float, *, soft: float | None = None, hard: float | None = None,
           key: str, why: str, fix: str = "") -> Check:
    """A :class:`Check` of ``value`` (NaN counts as past every limit). ``why`` says what the number
    means, ``fix`` how to mend it (default: change ``key``)."""
    value = float(value)
    bad = math.isnan(value)
    if hard is not None and (bad or value > hard):
        level, limit = HARD, hard
    elif soft is not None and (bad or value > soft):
        level, limit = SOFT, soft
    else:
        level, limit = OK, soft if soft is not None else hard
    message = f"{why}: {name} = {value:.3g}"
    if limit is not None:
        message += f" (limit {limit:.3g})"
    if level != OK:
        message += f"; {fix or f'change `{key}`'}"
    return Check(name, value, soft, hard, level, key, message)


def quality_block(checks) -> dict:
    """The ``quality`` block of a result: every check and ``trustworthy`` (all ``ok``)."""
    checks = list(checks)
    return {"trustworthy": all(c.level == OK for c in checks), "checks": [c.as_dict() for c in checks]}


def refuse_if_hard(checks, *, when: str) -> None:
    """Raise :class:`driven_atom.errors.Refused` with the first hard check (one line)."""
    from driven_atom.errors import Refused

    hard = [c for c in checks if c.level == HARD]
    if hard:
        more = f" (and {len(hard) - 1} more)" if len(hard) > 1 else ""
        raise Refused(f"refused {when}: {hard[0].message}{more}")

"""State labels: "1s", "2p", "2p0", "2p-1", "3d2" (n, orbital letter, optional m), or "n,l[,m]"
for any l ("30,25,-3"). Printed labels put no "+" before a positive m ("3d2").

>>> parse_state("2p-1")
State(n=2, l=1, m=-1)
>>> parse_state("3d").label
'3d'
>>> parse_state("30,25").label
'30,25'
>>> [s.label for s in parse_state("2p").sublevels()]
['2p-1', '2p0', '2p1']
"""
from __future__ import annotations

import re
from dataclasses import dataclass

from driven_atom.errors import InputError

# Spectroscopic letters: s p d f, then alphabetical from g skipping j (and the letters already used).
L_LETTERS = "spdfghiklmnoqrtuvwxyz"
_LABEL = re.compile(r"^(\d+)([a-z])([+-]?\d+)?$")
_NUMERIC = re.compile(r"^(\d+),(\d+)(?:,([+-]?\d+))?$")


MAX_N = 10_000           # principal quantum numbers beyond this are refused (no model reaches them)


@dataclass(frozen=True, order=True)
class State:
    """A hydrogenic state |n l m>; ``m = None`` stands for the whole (n, l) level."""

    n: int
    l: int
    m: int | None = None

    def __post_init__(self):
        if not 1 <= self.n <= MAX_N:
            raise InputError(f"state n must be from 1 to {MAX_N}, got {self.n}")
        if not 0 <= self.l < self.n:
            raise InputError(f"state l must be 0 <= l < n = {self.n}, got l = {self.l}")
        if self.m is not None and abs(self.m) > self.l:
            raise InputError(f"state m must be -{self.l} <= m <= {self.l}, got m = {self.m}")

    @property
    def label(self) -> str:
        if self.l < len(L_LETTERS):
            base = f"{self.n}{L_LETTERS[self.l]}"
            return base if self.m is None else f"{base}{self.m}"
        base = f"{self.n},{self.l}"
        return base if self.m is None else f"{base},{self.m}"

    @property
    def level(self) -> "State":
        """The (n, l) level this state belongs to (m dropped)."""
        return State(self.n, self.l)

    def sublevels(self) -> list["State"]:
        """All m-sublevels of the level (or the state itself if m is given), m ascending."""
        if self.m is not None:
            return [self]
        return [State(self.n, self.l, m) for m in range(-self.l, self.l + 1)]

    def __str__(self) -> str:
        return self.label


def parse_state(label, *, name: str = "state") -> State:
    """Parse a state label; a :class:`State` passes through unchanged."""
    if isinstance(label, State):
        return label
    text = str(label).strip()
    if len(text) > 40:
        raise InputError(f"`{name}` must be a state label like \"1s\", \"2p\", \"2p-1\", got {text[:40]!r}...")
    match = _LABEL.match(text)
    if match:
        n, letter, m = match.groups()
        l = L_LETTERS.find(letter)
        if l < 0:
            raise InputError(f"`{name}` {text!r}: unknown orbital letter {letter!r} "
                             f"(use {', '.join(L_LETTERS[:8])}, ... or \"n,l,m\")")
    else:
        match = _NUMERIC.match(text)
        if not match:
            raise InputError(f"`{name}` must be a state label like \"1s\", \"2p\", \"2p-1\", \"3d2\" "
                             f"or \"n,l,m\", got {text!r}")
        n, l, m = match.groups()
        l = int(l)
    n = int(n)
    m = None if m is None else int(m)
    try:
        return State(n, l, m)
    except InputError as exc:
        raise InputError(f"`{name}` {text!r} is not a state: {exc}") from None

"""Labels of fine- and hyperfine-structure components: "2p3/2", "1s1/2 F=1", "2p3/2 m=-1/2",
"1s1/2 F=3/2 m=1/2" (plain ASCII; j, F and m written as whole numbers or halves "3/2").

A :class:`Component` is |n l j> (fine structure), |n l j F> (hyperfine structure, F the total
angular momentum with the nuclear spin I), optionally with its projection m (m_j or m_F). The Bohr
labels of :mod:`driven_atom.atom.states` keep their meaning: "2p" is the whole n l manifold (under
fine structure: all its j components), "2p0" the m_l = 0 sublevel of the Bohr model.
:func:`parse_label` reads either kind; :func:`sublevels` expands a label into the m-resolved basis
of a structure ("fine": |n l j m_j>, "hyperfine": |n l j F m_F>).

Half-integers are stored doubled (``j2 = 2j``), so every quantum number is an exact integer.

>>> parse_label("2p3/2")
Component(n=2, l=1, j2=3, F2=None, m2=None)
>>> parse_label("1s1/2 F=1 m=-1").label
'1s1/2 F=1 m=-1'
>>> [c.label for c in sublevels(parse_label("2p"), "fine")]
['2p1/2 m=-1/2', '2p1/2 m=1/2', '2p3/2 m=-3/2', '2p3/2 m=-1/2', '2p3/2 m=1/2', '2p3/2 m=3/2']
"""
from __future__ import annotations

import re
from dataclasses import dataclass

from driven_atom.atom.states import L_LETTERS, State, parse_state
from driven_atom.errors import InputError

STRUCTURES = ("bohr", "fine", "hyperfine")
_NUMBER = r"[+-]?\d+(?:/2)?"
_COMPONENT = re.compile(rf"^(\d+)([a-z])(\d+)/2(?:\s+F\s*=\s*(\d+(?:/2)?))?(?:\s+m\s*=\s*({_NUMBER}))?$")


def half_text(x2: int) -> str:
    """A doubled quantum number as text: 3 -> "3/2", 2 -> "1", -1 -> "-1/2".

    >>> half_text(3), half_text(2), half_text(-1), half_text(0)
    ('3/2', '1', '-1/2', '0')
    """
    return str(x2 // 2) if x2 % 2 == 0 else f"{x2}/2"


def _doubled(text: str) -> int:
    return int(text[:-2]) if text.endswith("/2") else 2 * int(text)


@dataclass(frozen=True, order=True)
class Component:
    """|n l j [F] [m]> with doubled j, F and m (``j2 = 2j``); ``F2 = None`` for a fine-structure
    component, ``m2 = None`` for the whole (2j+1)- or (2F+1)-fold component."""

    n: int
    l: int
    j2: int
    F2: int | None = None
    m2: int | None = None

    def __post_init__(self):
        State(self.n, self.l)                      # n >= 1, 0 <= l < n
        if self.j2 not in (2 * self.l - 1, 2 * self.l + 1) or self.j2 < 1:
            raise InputError(f"j must be l +- 1/2 >= 1/2 for l = {self.l}, got j = {half_text(self.j2)}")
        top = self.j2 if self.F2 is None else self.F2
        if self.F2 is not None and self.F2 < 0:
            raise InputError(f"F must be >= 0, got F = {half_text(self.F2)}")
        if self.m2 is not None and (abs(self.m2) > top or (top - self.m2) % 2):
            what = "j" if self.F2 is None else "F"
            raise InputError(f"m must be one of -{what}, -{what}+1, ..., {what} = {half_text(top)}, "
                             f"got m = {half_text(self.m2)}")

    @property
    def j(self) -> float:
        return self.j2 / 2

    @property
    def F(self) -> float | None:
        return None if self.F2 is None else self.F2 / 2

    @property
    def m(self) -> float | None:
        return None if self.m2 is None else self.m2 / 2

    @property
    def is_hyperfine(self) -> bool:
        return self.F2 is not None

    @property
    def level(self) -> State:
        """The n l manifold (a Bohr level)."""
        return State(self.n, self.l)

    @property
    def fine(self) -> "Component":
        """The fine-structure component |n l j> this belongs to."""
        return Component(self.n, self.l, self.j2)

    @property
    def whole(self) -> "Component":
        """The component without its projection m."""
        return Component(self.n, self.l, self.j2, self.F2)

    @property
    def label(self) -> str:
        letter = L_LETTERS[self.l] if self.l < len(L_LETTERS) else f",{self.l},"
        text = f"{self.n}{letter}{self.j2}/2"
        if self.F2 is not None:
            text += f" F={half_text(self.F2)}"
        if self.m2 is not None:
            text += f" m={half_text(self.m2)}"
        return text

    def __str__(self) -> str:
        return self.label


def parse_component(text, *, name: str = "state") -> Component:
    """A component label ("2p3/2", "1s1/2 F=1", "2p1/2 m=-1/2"); :class:`Component` passes through."""
    if isinstance(text, Component):
        return text
    raw = str(text).strip()
    match = _COMPONENT.match(raw)
    if not match:
        raise InputError(f"`{name}` must be a state label like \"2p\" or \"2p0\", or a fine- or hyperfine-"
                         f"structure component like \"2p3/2\", \"1s1/2 F=1\", \"2p3/2 m=-1/2\", got {raw!r}")
    n, letter, j2, F, m = match.groups()
    l = L_LETTERS.find(letter)
    if l < 0:
        raise InputError(f"`{name}` {raw!r}: unknown orbital letter {letter!r}")
    try:
        return Component(int(n), l, int(j2), None if F is None else _doubled(F), None if m is None else _doubled(m))
    except InputError as exc:
        raise InputError(f"`{name}` {raw!r} is not a component: {exc}") from None


def parse_label(text, *, name: str = "state") -> State | Component:
    """A Bohr label (:func:`driven_atom.atom.states.parse_state`) or a component label.

    >>> parse_label("2p-1"), parse_label("2s1/2").label
    (State(n=2, l=1, m=-1), '2s1/2')
    """
    if isinstance(text, (State, Component)):
        return text
    try:
        return parse_state(text, name=name)
    except InputError as first:
        if "/" not in str(text):
            raise first from None
        return parse_component(text, name=name)


def required_structure(label) -> str:
    """The least structure a label needs: "bohr" for "2p", "2p0"; "fine" for "2p3/2"; "hyperfine"
    for "1s1/2 F=1".

    >>> required_structure("2p"), required_structure("2p1/2 m=1/2"), required_structure("1s1/2 F=0")
    ('bohr', 'fine', 'hyperfine')
    """
    item = parse_label(label)
    if isinstance(item, State):
        return "bohr"
    return "hyperfine" if item.is_hyperfine else "fine"


def check_label(label, structure: str, *, name: str = "state", key: str = "atom.structure") -> State | Component:
    """``label`` parsed and checked against ``structure`` (one line naming ``name`` otherwise):
    component labels need "fine" or "hyperfine", F labels need "hyperfine", and the m_l sublevels
    of the Bohr model ("2p0") exist only under "bohr". ``key`` names the structure setting in
    messages (``atom.structure`` in a config, ``structure`` on the command line)."""
    if structure not in STRUCTURES:
        raise InputError(f"`{key}` must be one of {', '.join(STRUCTURES)}, got {structure!r}")
    item = parse_label(label, name=name)
    needed = required_structure(item)
    if STRUCTURES.index(needed) > STRUCTURES.index(structure):
        raise InputError(f"`{name}` {item.label!r} is a {needed}-structure label: set `{key}` = "
                         f"\"{needed}\" (it is \"{structure}\")")
    if structure != "bohr" and isinstance(item, State) and item.m is not None:
        raise InputError(f"`{name}` {item.label!r} is an m_l sublevel of the Bohr model; with `{key}` = "
                         f"\"{structure}\" name the level ({item.level.label!r}) or its components "
                         f"(e.g. {_example(item.level, structure)!r})")
    if structure == "hyperfine" and isinstance(item, Component) and not item.is_hyperfine and item.m2 is not None:
        raise InputError(f"`{name}` {item.label!r} gives m_j, which is not a good quantum number with "
                         f"hyperfine structure: name {item.whole.label!r} or a component with F and m_F")
    return item


def _example(level: State, structure: str) -> str:
    j2 = 2 * level.l + 1
    return f"{level.label}{j2}/2" + (" F=..." if structure == "hyperfine" else " m=1/2")


def f_values(j2: int, I2: int) -> list[int]:
    """Doubled F = |j - I|, ..., j + I.

    >>> f_values(1, 1), f_values(3, 2)
    ([0, 2], [1, 3, 5])
    """
    return list(range(abs(j2 - I2), j2 + I2 + 1, 2))


def sublevels(label, structure: str, I2: int = 0) -> list[Component]:
    """The m-resolved components of ``label`` in the basis of ``structure`` ("fine": |n l j m_j>,
    "hyperfine": |n l j F m_F> with the doubled nuclear spin ``I2``), ordered by j, F, m.

    >>> [c.label for c in sublevels("1s", "hyperfine", I2=1)]
    ['1s1/2 F=0 m=0', '1s1/2 F=1 m=-1', '1s1/2 F=1 m=0', '1s1/2 F=1 m=1']
    """
    if structure == "bohr":
        raise InputError("fine- and hyperfine-structure components need `atom.structure` = \"fine\" or "
                         "\"hyperfine\"")
    item = check_label(label, structure)
    if isinstance(item, State):
        fines = [Component(item.n, item.l, j2) for j2 in (2 * item.l - 1, 2 * item.l + 1) if j2 >= 1]
    else:
        fines = [item]
    out: list[Component] = []
    for c in fines:
        if structure == "fine":
            out += [c] if c.m2 is not None else [Component(c.n, c.l, c.j2, None, m2)
                                                 for m2 in range(-c.j2, c.j2 + 1, 2)]
            continue
        if c.F2 is not None and c.F2 not in f_values(c.j2, I2):
            raise InputError(f"`state` {c.label!r}: F must be one of "
                             f"{', '.join(half_text(f) for f in f_values(c.j2, I2))} for j = {half_text(c.j2)} "
                             f"and nuclear spin I = {half_text(I2)}")
        for F2 in ([c.F2] if c.F2 is not None else f_values(c.j2, I2)):
            if c.m2 is not None:
                out.append(c)
            else:
                out += [Component(c.n, c.l, c.j2, F2, m2) for m2 in range(-F2, F2 + 1, 2)]
    return out


def uncoupled(component: Component, I2: int = 0) -> dict[tuple[int, int, int], float]:
    """The expansion of |n l j [F] m> in products |l m_l> |s m_s> |I m_I>: a dict
    (m_l, 2 m_s, 2 m_I) -> amplitude (Clebsch-Gordan coefficients, Condon-Shortley phases).
    A fine-structure component has the nuclear projection of ``I2`` = 0 (no nucleus coupled).

    >>> sorted((k, round(v, 6)) for k, v in uncoupled(parse_label("2p1/2 m=1/2")).items())
    [((0, 1, 0), -0.57735), ((1, -1, 0), 0.816497)]
    """
    from driven_atom.atom.angular import clebsch_gordan

    if component.m2 is None:
        raise InputError(f"`state` {component.label!r} needs m for its expansion")
    l, j2 = component.l, component.j2
    if component.F2 is None:
        pairs = [(component.m2, 0, 1.0)]
    else:
        pairs = [(mj2, component.m2 - mj2, clebsch_gordan(j2 / 2, mj2 / 2, I2 / 2, (component.m2 - mj2) / 2,
                                                           component.F2 / 2, component.m2 / 2))
                 for mj2 in range(-j2, j2 + 1, 2) if abs(component.m2 - mj2) <= I2]
    out: dict = {}
    for mj2, mI2, a in pairs:
        if a == 0.0:
            continue
        for ms2 in (-1, 1):
            ml2 = mj2 - ms2
            if abs(ml2) > 2 * l:
                continue
            b = clebsch_gordan(l, ml2 / 2, 0.5, ms2 / 2, j2 / 2, mj2 / 2)
            if b != 0.0:
                out[(ml2 // 2, ms2, mI2)] = out.get((ml2 // 2, ms2, mI2), 0.0) + a * b
    return out

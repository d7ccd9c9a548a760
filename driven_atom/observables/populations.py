"""Populations by state label: m-resolved sublevels and their sums over m.

Every route reports final and sampled populations under the labels of :mod:`driven_atom.atom.states`:
an m-resolved label ("2p0", "2p-1", "1s0") for each sublevel it resolves and the level label
("2p", "1s") for the sum over the sublevels it holds, P(n l) = sum_m P(n l m). With fine or
hyperfine structure (:mod:`driven_atom.atom.components`) the sublevels are "2p3/2 m=1/2" or
"1s1/2 F=1 m=-1", summed into their component ("2p3/2", "1s1/2 F=1"), fine level ("1s1/2") and
n l manifold ("2p").

>>> from driven_atom.atom import State
>>> level_populations({State(2, 1, -1): 0.25, State(2, 1, 1): 0.25, State(1, 0, 0): 0.5})
{'1s': 0.5, '1s0': 0.5, '2p': 0.5, '2p-1': 0.25, '2p1': 0.25}
"""
from __future__ import annotations

from collections.abc import Mapping

from driven_atom.atom.components import Component, parse_label
from driven_atom.atom.states import State, parse_state
from driven_atom.errors import InputError


def level_populations(populations: Mapping) -> dict:
    """Add the m-summed level labels to m-resolved populations.

    ``populations`` maps :class:`State` objects (or their labels) to numbers or numpy arrays
    (histories); a state without m is taken as a whole level. The result maps labels to values,
    ordered by (n, l): the level label first, then its sublevels by ascending m. A level given
    both as a whole and through its sublevels is an error (it would be counted twice).

    >>> level_populations({"2p0": 1.0})
    {'2p': 1.0, '2p0': 1.0}
    >>> level_populations({"3d": 0.5})
    {'3d': 0.5}
    """
    levels: dict[State, dict] = {}
    for key, value in populations.items():
        state = parse_state(key, name="population label")
        entry = levels.setdefault(state.level, {})
        if state in entry:
            raise InputError(f"population label {state.label!r} is given twice")
        entry[state] = value
    out: dict = {}
    for level in sorted(levels, key=lambda s: (s.n, s.l)):
        entry = levels[level]
        subs = sorted((s for s in entry if s.m is not None), key=lambda s: s.m)
        if level in entry and subs:
            raise InputError(f"level {level.label!r} is given both whole and by its m-sublevels")
        if not subs:
            out[level.label] = entry[level]
            continue
        total = entry[subs[0]]
        for s in subs[1:]:
            total = total + entry[s]
        out[level.label] = total
        out.update((s.label, entry[s]) for s in subs)
    return out


def component_populations(populations: Mapping) -> dict:
    """Add the sums of m-resolved component populations ("2p3/2 m=1/2": 0.1, ...): per component
    ("2p3/2", "1s1/2 F=1"), per fine level under hyperfine structure ("1s1/2") and per n l manifold
    ("2p"), each group before its members, ordered by n, l, j, F, m.

    >>> component_populations({"2p3/2 m=1/2": 0.25, "2p1/2 m=-1/2": 0.5})
    {'2p': 0.75, '2p1/2': 0.5, '2p1/2 m=-1/2': 0.5, '2p3/2': 0.25, '2p3/2 m=1/2': 0.25}
    """
    items: dict = {}
    for key, value in populations.items():
        c = parse_label(key, name="population label")
        if not isinstance(c, Component) or c.m2 is None:
            raise InputError(f"population label {key!r} is not an m-resolved component")
        if c in items:
            raise InputError(f"population label {c.label!r} is given twice")
        items[c] = value
    out: dict = {}

    def add(label, members):
        total = members[0]
        for v in members[1:]:
            total = total + v
        out[label] = total

    by_level: dict = {}
    for c in sorted(items, key=lambda c: (c.n, c.l, c.j2, c.F2 if c.F2 is not None else -1, c.m2)):
        by_level.setdefault(c.level, []).append(c)
    for level, members in by_level.items():
        add(level.label, [items[c] for c in members])
        fines: dict = {}
        for c in members:
            fines.setdefault(c.fine, []).append(c)
        for fine, fmembers in fines.items():
            add(fine.label, [items[c] for c in fmembers])
            if fmembers[0].F2 is None:
                out.update((c.label, items[c]) for c in fmembers)
                continue
            wholes: dict = {}
            for c in fmembers:
                wholes.setdefault(c.whole, []).append(c)
            for whole, wmembers in wholes.items():
                add(whole.label, [items[c] for c in wmembers])
                out.update((c.label, items[c]) for c in wmembers)
    return out


def with_level_sums(populations: Mapping) -> dict:
    """:func:`level_populations` for the keys that are Bohr states, :func:`component_populations`
    for fine- and hyperfine-structure sublevels, other keys (sinks such as "elsewhere") passed
    through after them unchanged.

    >>> with_level_sums({"2p0": 0.25, "1s0": 0.5, "elsewhere": 0.25})
    {'1s': 0.5, '1s0': 0.5, '2p': 0.25, '2p0': 0.25, 'elsewhere': 0.25}
    """
    states, components, others = {}, {}, {}
    for key, value in populations.items():
        try:
            item = parse_label(key)
        except InputError:
            others[key] = value
            continue
        (states if isinstance(item, State) else components)[key] = value
    return {**level_populations(states), **component_populations(components), **others}

"""Analytic hydrogenic physics: the atom, its levels, wave functions, dipoles, cross sections, and
its fine and hyperfine structure.

Nothing here propagates in time; every function is pure and cheap to import (no numba, no qutip).
"""
from driven_atom.atom.components import Component, parse_label
from driven_atom.atom.species import Atom, NUCLEI
from driven_atom.atom.states import State, parse_state
from driven_atom.atom.structure import level_energy

__all__ = ["Atom", "Component", "NUCLEI", "State", "level_energy", "parse_label", "parse_state"]

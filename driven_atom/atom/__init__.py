"""Analytic hydrogenic physics: the atom, its levels, wave functions, dipoles, cross sections.

Nothing here propagates in time; every function is pure and cheap to import (no numba, no qutip).
"""
from driven_atom.atom.species import Atom, NUCLEI
from driven_atom.atom.states import State, parse_state

__all__ = ["Atom", "NUCLEI", "State", "parse_state"]

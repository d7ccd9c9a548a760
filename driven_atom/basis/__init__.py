"""Discretisations of the radial problem: the shared Numerov-corrected radial grid
(:mod:`driven_atom.basis.radial_grid`) and the bound + box-continuum eigenbasis built on it
(:mod:`driven_atom.basis.eigenbasis`)."""

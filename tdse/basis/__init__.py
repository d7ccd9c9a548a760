"""Discretisations of the radial problem: the shared Numerov-corrected radial grid
(:mod:`tdse.basis.radial_grid`) and the bound + box-continuum eigenbasis built on it
(:mod:`tdse.basis.eigenbasis`)."""

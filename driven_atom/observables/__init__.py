"""Observables shared by all routes: populations by state label, and (later) ionisation yields,
photoelectron and harmonic spectra. Submodules are imported on use; nothing heavy is loaded here.
"""

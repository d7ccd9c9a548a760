"""One-photon lines of a model atom for the lab estimate: the laser against the measured lines.

The lines from the initial level (n₀ l₀) go to every converged level (n, l₀ ± 1) of the model above
it that is not a core shell. Their energies are the measured ones where the species' data file
has them (NIST ASD), else the model's: from an s level (the alkalis' ground state) each
fine-structure component j of the upper level is a line of its own (Na 3s → 3p₁/₂ at 589.76 nm
(D1), 3p₃/₂ at 589.16 nm (D2)), since the laser addresses one at a time.

Coupling (linear light along z, or circular q = ±1): |d| = |⟨l m+q|C¹_q|l₀ m⟩| · |R| · √w_j, R the
model's radial dipole, w_j = (2j+1)/(2(2l+1)) the share of the line strength in the component j
from an s level (LS coupling; for linear light both m_j = ±1/2 of the s level see exactly this
weight; for circular light it is their mean). Decay: the model's Einstein A of every channel,
each rescaled by (ω_measured/ω_model)³ where both levels are measured (as route "levels" does with
``energies = "measured"``). Ionisation of the upper level: the model's cross section when one
photon suffices, else the cycle-averaged PPT rate of that level at the peak field
(:func:`driven_atom.lab.rates.ppt_rate`; a model atom has no perturbation-theory sums here).
Hyperfine structure is left out (it matters below the Doppler width only).

>>> from driven_atom.atom import Atom, State
>>> lines = one_photon_lines(Atom.from_species("Na"), State(3, 0, 0), 0.0773)
>>> [line.label for line in lines[:2]]
['3s-3p1/2', '3s-3p3/2']
>>> [round(line.resonant_wavelength_nm, 2) for line in lines[:2]]      # NIST ASD: 589.76, 589.16 nm
[589.76, 589.16]
"""
from __future__ import annotations

import math

from driven_atom.atom import State
from driven_atom.atom.resonance import Line, allowed_l
from driven_atom.units import AU_INTENSITY_WM2, AU_TIME_S, BOHR_M


def _measured_above_ground(atom, state, j: float | None = None) -> float | None:
    model = atom.model
    return model.measured_level(state) if j is None else model.measured_component(state, j)


def _model_energy(atom, state) -> float:
    from driven_atom.basis.model_levels import energy, ground_state

    return energy(atom, state) - energy(atom, ground_state(atom))       # above the ground state


def _fine_weights(l: int) -> dict:
    """{j: (2j+1)/(2(2l+1))}: the share of an s → l line in each fine-structure component."""
    return {l - 0.5: (2 * l) / (2 * (2 * l + 1)), l + 0.5: (2 * l + 2) / (2 * (2 * l + 1))}


def one_photon_lines(atom, lower, omega: float) -> list[Line]:
    """The one-photon lines of ``atom`` (a model atom) from ``lower`` (module docstring), in the
    order of the upper levels' energy."""
    from driven_atom.basis.model_levels import bound_states, is_core

    level = State(lower.n, lower.l)
    measured_low = _measured_above_ground(atom, level)
    e_low = measured_low if measured_low is not None else _model_energy(atom, level)
    lines = []
    for l in allowed_l(lower.l, 1):
        for i in range(bound_states(atom, l)[0].size):
            upper = State(l + 1 + i, l)
            if is_core(atom, upper):
                continue
            parts = {j: _measured_above_ground(atom, upper, j) for j in _fine_weights(l)} if lower.l == 0 else {}
            if parts and measured_low is not None and all(e is not None for e in parts.values()):
                lines += [Line(1, lower, (upper,), e - e_low, float(omega), j=j) for j, e in parts.items()
                          if e > e_low]
                continue
            measured_up = _measured_above_ground(atom, upper)
            e_up = measured_up if measured_up is not None and measured_low is not None else \
                _model_energy(atom, upper) - _model_energy(atom, level) + e_low
            if e_up > e_low:
                lines.append(Line(1, lower, (upper,), e_up - e_low, float(omega)))
    return sorted(lines, key=lambda line: line.line_energy)


def coupling(case, line) -> tuple | None:
    """(uppers with m, |d| (a.u.), Rabi frequency Ω₀ at the peak (rad/s), light shift 0) of ``line``;
    None when the polarisation cannot drive it."""
    from driven_atom.atom.dipoles import angular_factor
    from driven_atom.basis.model_levels import radial_dipole
    from driven_atom.lab.lines import spherical_q

    lower, upper = case.state, line.uppers[0]
    q = spherical_q(case.polarization)
    m_up = lower.m + q
    if abs(m_up) > upper.l:
        return None
    weight = _fine_weights(upper.l)[line.j] if line.j is not None else 1.0
    d = abs(angular_factor(upper.l, m_up, lower.l, lower.m, q) * radial_dipole(case.atom, lower, upper)) \
        * math.sqrt(weight)
    if d == 0:
        return None
    i0 = case.peak_intensity / AU_INTENSITY_WM2
    return [State(upper.n, upper.l, m_up)], [d], math.sqrt(i0) * d / AU_TIME_S, 0.0


def _omega_cubed(atom, upper, lower) -> float:
    """(ω_measured/ω_model)³ of a channel, 1 where a level has no measured energy."""
    up, low = _measured_above_ground(atom, upper), _measured_above_ground(atom, lower)
    if up is None or low is None:
        return 1.0
    return ((up - low) / (_model_energy(atom, upper) - _model_energy(atom, lower))) ** 3


def line_data(case, line, coupled):
    """The :class:`driven_atom.lab.lines.LineData` of ``line``: decay, branching back, ionisation of
    the upper level (module docstring)."""
    from driven_atom.basis.model_levels import cross_section, einstein_a, lower_levels
    from driven_atom.lab.lines import LineData, photon_flux
    from driven_atom.lab.rates import ppt_rate
    from driven_atom.observables.multiphoton import photon_order

    atom, omega = case.atom, case.photon_energy
    uppers, _, rabi, shift = coupled
    upper, lower = State(uppers[0].n, uppers[0].l), State(case.state.n, case.state.l)
    rates = {low: einstein_a(atom, upper, low) * _omega_cubed(atom, upper, low) for low in lower_levels(atom, upper)}
    decay = sum(rates.values()) / AU_TIME_S
    back = rates.get(lower, 0.0) / AU_TIME_S / decay if decay > 0 else 1.0
    measured = _measured_above_ground(atom, upper)
    binding = atom.model.ip_measured - measured if measured is not None else -(
        _model_energy(atom, upper) - atom.model.ip_measured)
    m_ion = photon_order(binding, omega)
    if m_ion == 1:
        sigma = float(cross_section(atom, upper, omega))
        rate = sigma * BOHR_M**2 * photon_flux(case.peak_intensity, omega)
        note = f"one photon (the model's sigma = {sigma * BOHR_M**2 * 1e4:.3g} cm^2)"
    else:
        field = math.sqrt(case.peak_intensity / AU_INTENSITY_WM2)
        rate = float(ppt_rate(field, omega, binding, atom.model.charge, upper.l, uppers[0].m)) / AU_TIME_S
        note = f"{m_ion} photons (PPT rate of {upper.label} at the peak field)"
    tau = 1 / decay if decay > 0 else math.inf
    return LineData(line, 1, rabi, shift, decay, min(max(back, 0.0), 1.0), rate, m_ion, note, uppers[0].label, tau)

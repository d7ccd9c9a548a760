"""The single-atom physics of a lab case, chosen by the regime: the ionisation (and excitation)
probability of one atom as a function of the intensity scale s = I/I₀ at the focus.

Regimes, tried in this order (``RESONANCE_WIDTHS``, ``LOPT_MIN_KELDYSH``, ``LOPT_MAX_PHOTONS`` below):

1. **one-photon** (ω ≥ Iₚ): golden rule with the atom layer's cross section of the sublevel for the
   light's polarisation, averaged over the transform-limited spectrum; P = 1 − exp(−σ∫Φ dt).
2. **above the barrier** (I₀ > I_BS = Iₚ⁴/(16Z²), Augst et al., PRL 63, 2212 (1989)): flagged; the
   PPT rate is used (it ionises the atom on the rising edge).
3. **tunnelling** (Keldysh γ < 1): PPT (:mod:`driven_atom.lab.rates`), depleting the ground state.
4. **resonant** (a perturbative field: γ ≥ LOPT_MIN_KELDYSH, Uₚ < ω/4): a one- or two-photon line
   (:func:`driven_atom.atom.resonance.nearest_lines`) within RESONANCE_WIDTHS of its Fourier, Doppler
   and laser widths, or within the peak Rabi frequency (power broadening), or swept through by the
   light shift: optical Bloch equations
   (:mod:`driven_atom.lab.bloch`) over the Doppler profile, then ionisation of the upper level by
   the next photon(s) — one photon with the sublevel's cross section (1+1, 2+1), several by
   lowest-order perturbation theory (1+2, ...).
5. **multiphoton**: lowest-order perturbation theory for N photons
   (:mod:`driven_atom.observables.multiphoton`, continuum included) when γ ≥ LOPT_MIN_KELDYSH,
   N ≤ LOPT_MAX_PHOTONS and Uₚ < ω/4 (light shifts small against the photon); PPT otherwise.

Each model says what it did and why, and how far to trust it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from driven_atom.lab.lines import LineData, photon_flux, spherical_q
from driven_atom.units import AU_INTENSITY_WM2, AU_TIME_S, BOHR_M, C_AU, HARTREE_EV, HARTREE_J

RESONANCE_WIDTHS = 5.0        # a line within this many of its widths is treated as resonant
LOPT_MIN_KELDYSH = 2.0        # perturbation theory for γ at least this ...
LOPT_MAX_PHOTONS = 12         # ... and at most this many photons
TABLE_RANGE = (1e-4, 1e2)     # intensity scales s of the probability tables
TABLE_NODES_PER_DECADE = 3


@dataclass
class Model:
    """What one atom does as a function of s = I/I₀: ``ionization(s)`` and ``excitation(s)``
    (vectorised; excitation None outside the resonant regime), named and justified."""

    regime: str
    method: str
    why: str
    accuracy: str
    photons: int | None
    ionization: object
    excitation: object = None
    resonance: dict | None = None
    alternatives: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    warnings: list = field(default_factory=list)


# -- the atom, through the atom layer (the one place model atoms will plug in) -----------------------
def binding_energy(atom, state) -> float:
    """Iₚ of the level of ``state`` (hartree), from :func:`driven_atom.atom.resonance.level_energy`;
    for a model atom the model's own level (:mod:`driven_atom.basis.model_levels`)."""
    from driven_atom.atom import State

    if atom.model is not None:
        from driven_atom.basis.model_levels import energy

        return -energy(atom, State(state.n, state.l))
    from driven_atom.atom.resonance import level_energy

    return -level_energy(atom, State(state.n, state.l))


def tunnel_parameters(atom, state, ip: float) -> tuple[float, float | None]:
    """(charge left behind, C²_{n*l*} or None) for the tunnelling rates: (Z, None: the Hartree-type
    C² of ADK) for a hydrogen-like atom; (Z_c = 1, the real atom's C_l²/κ^{2n*+1} of Tong, Zhao &
    Lin, PRA 66, 033402 (2002)) for a model atom in its ground state."""
    if atom.model is None:
        return float(atom.Z), None
    from driven_atom.atom.model_atoms import adk_coefficient

    ground = atom.model.ground
    own = (state.n, state.l) == (ground.n, ground.l)
    return atom.model.charge, adk_coefficient(atom.model, ip) if own else None


def keldysh(ip: float, intensity_au: float, omega: float) -> float:
    """γ = √(Iₚ/(2Uₚ)), Uₚ = I/(4ω²) (Keldysh 1965; docs/physics.md)."""
    return math.sqrt(ip / (2 * intensity_au / (4 * omega**2)))


# -- the regime ----------------------------------------------------------------------------------------
def choose_model(case) -> Model:
    """The model for the lab case (module docstring)."""
    if case.static is not None:
        return _static_model(case)
    atom, state, omega = case.atom, case.state, case.photon_energy
    ip = binding_energy(atom, state)
    i0 = case.peak_intensity / AU_INTENSITY_WM2
    gamma = keldysh(ip, i0, omega)
    charge, _ = tunnel_parameters(atom, state, ip)
    i_bs = ip**4 / (16 * charge**2)
    if omega >= ip:
        return _one_photon(case, ip)
    if i0 > i_bs:
        model = _ppt_model(case, ip, i0, gamma, regime="above the barrier")
        model.why = (f"the peak intensity {case.peak_intensity * 1e-4:.3g} W/cm^2 is above barrier suppression "
                     f"({i_bs * AU_INTENSITY_WM2 * 1e-4:.3g} W/cm^2, Augst et al. 1989): the atom ionises on "
                     f"the rising edge; the rate formulas are outside their range there")
        model.warnings.append("above the barrier: over-the-barrier ionisation, the estimate is a bound (P -> 1)")
        return model
    if gamma < 1:
        return _ppt_model(case, ip, i0, gamma, regime="tunnelling")
    from driven_atom.observables.multiphoton import photon_order

    up = i0 / (4 * omega**2)
    N = photon_order(ip, omega)
    perturbative = gamma >= LOPT_MIN_KELDYSH and up < omega / 4
    if perturbative:
        resonant = _resonance(case, ip, i0)
        if resonant is not None:
            return resonant
    if perturbative and atom.model is not None:
        model = _ppt_model(case, ip, i0, gamma, regime="multiphoton")
        model.why = (f"{N} photons, Keldysh gamma {gamma:.3g}, no one-photon line within {RESONANCE_WIDTHS:g} of its "
                     f"widths: a model atom ({atom.model.name}) has no N-photon perturbation theory here yet; PPT "
                     f"with the real atom's tunnelling parameters")
        return model
    if perturbative and N <= LOPT_MAX_PHOTONS:
        return _lopt_model(case, ip, i0, gamma, N)
    model = _ppt_model(case, ip, i0, gamma, regime="multiphoton")
    model.why = (f"{N} photons, Keldysh gamma {gamma:.3g}: between the regimes (perturbation theory, and the "
                 f"resonance model, need gamma >= {LOPT_MIN_KELDYSH:g}, Up < omega/4 and N <= {LOPT_MAX_PHOTONS}; "
                 f"Up = {up * HARTREE_EV:.3g} eV)")
    return model


# -- one photon ----------------------------------------------------------------------------------------
def _one_photon(case, ip: float) -> Model:
    from driven_atom.atom.photoionization import cross_section_sublevel

    omega, env = case.photon_energy, case.envelope
    q = spherical_q(case.polarization)
    width = env.bandwidth * AU_TIME_S                      # spectral FWHM, hartree
    if case.atom.model is not None:                        # the model's m-averaged cross section
        from driven_atom.basis.model_levels import cross_section

        sigma = float(cross_section(case.atom, case.state, omega))
    elif width > 1e-4 * omega:
        x, w = np.polynomial.hermite.hermgauss(24)
        energies = omega + x * math.sqrt(2) * width / (2 * math.sqrt(2 * math.log(2)))
        sigma = float(w @ cross_section_sublevel(case.atom, case.state, np.maximum(energies, 1e-12), q)
                      / math.sqrt(math.pi))
    else:
        sigma = float(cross_section_sublevel(case.atom, case.state, omega, q))
    photons = photon_flux(case.peak_intensity, omega) * env.integral(1.0)      # per m², at s = 1
    exponent = sigma * BOHR_M**2 * photons

    def ionization(s):
        return -np.expm1(-exponent * np.asarray(s, dtype=float))

    return Model("one-photon", f"one-photon ionisation of {case.state.label}: golden rule, sigma = "
                 f"{sigma * BOHR_M**2 * 1e4:.3g} cm^2, depleting as 1 - exp(-sigma F)",
                 f"the photon ({omega * HARTREE_EV:.4g} eV) is above the ionisation potential "
                 f"({ip * HARTREE_EV:.4g} eV)",
                 ("exact hydrogenic cross section (Bethe & Salpeter 1957) over the pulse spectrum" if case.atom.model is None
                  else f"the {case.atom.model.name} model's m-averaged cross section at the carrier") +
                 "; valid while the field is perturbative", 1, ionization)


# -- lowest-order perturbation theory ---------------------------------------------------------------------
def _lopt_model(case, ip: float, i0: float, gamma: float, N: int) -> Model:
    from driven_atom.observables.multiphoton import rate_coefficient
    from driven_atom.units import BOHR2_CM2

    omega, env = case.photon_energy, case.envelope
    _, K = rate_coefficient(case.atom, case.state, omega, N, case.polarization)
    exponent = K * i0**N * env.integral(N) / AU_TIME_S
    sigma = K * (8 * math.pi * omega / C_AU) ** N              # σ_N = K_N (8πω/c)^N (a.u.)
    sigma_cgs = sigma * BOHR2_CM2**N * AU_TIME_S ** (N - 1)

    def ionization(s):
        return -np.expm1(-exponent * np.asarray(s, dtype=float) ** N)

    model = Model("multiphoton", f"{N}-photon ionisation in lowest-order perturbation theory (sums over "
                  f"the atom's bound and continuum states), sigma_{N} = {sigma_cgs:.3g} cm^{2 * N} "
                  f"{'s' if N == 2 else f's^{N - 1}'}, "
                  f"depleting as 1 - exp(-int W dt)",
                  f"{N} photons of {omega * HARTREE_EV:.4g} eV below the ionisation potential "
                  f"({ip * HARTREE_EV:.4g} eV), Keldysh gamma {gamma:.3g} >= {LOPT_MIN_KELDYSH:g}, no line "
                  f"within {RESONANCE_WIDTHS:g} widths",
                  "exact for weak fields (the TDSE agrees within 1 % for two photons); light shifts "
                  "(Up) and near-resonant intermediate states change it as the intensity grows", N, ionization)
    try:
        ppt = _ppt_exponent(case, ip, i0)
        model.alternatives["PPT"] = float(-math.expm1(-float(ppt(1.0))))
    except (ValueError, OverflowError, ArithmeticError):
        pass
    return model


# -- PPT ---------------------------------------------------------------------------------------------------
def _ppt_exponent(case, ip: float, i0: float):
    from driven_atom.lab.rates import ppt_exponent

    charge, c2 = tunnel_parameters(case.atom, case.state, ip)
    return ppt_exponent(case.envelope, math.sqrt(i0), case.photon_energy, ip, charge, case.state.l,
                        case.state.m or 0, c2)


def _ppt_model(case, ip: float, i0: float, gamma: float, regime: str) -> Model:
    exponent = _ppt_exponent(case, ip, i0)

    def ionization(s):
        return -np.expm1(-exponent(np.asarray(s, dtype=float)))

    from driven_atom.observables.multiphoton import photon_order

    N = photon_order(ip, case.photon_energy)
    model = Model(regime, "PPT rate (Perelomov, Popov & Terent'ev 1966, with the Coulomb factor), cycle-"
                  "averaged along the pulse, depleting the ground state",
                  f"Keldysh gamma {gamma:.3g}" + (" < 1: the electron tunnels" if gamma < 1 else ""),
                  "within about a factor 2 of the TDSE for hydrogen (800 nm, 1e14 W/cm^2: PPT 1.5 %, "
                  "grid route 1.4 %); `--check` runs the grid route", N if gamma > 1 else None, ionization)
    if case.polarization != "linear":
        model.warnings.append("PPT is taken for linear polarisation; circular light ionises less at the "
                              "same intensity in the tunnelling regime")
    return model


# -- static fields (run configurations only) --------------------------------------------------------------
def _static_model(case) -> Model:
    from driven_atom.lab.rates import static_exponent

    state = case.state
    ip = binding_energy(case.atom, state)
    charge, c2 = tunnel_parameters(case.atom, state, ip)
    exponent = static_exponent(case.static, ip, charge, state.l, state.m or 0, c2)

    def ionization(s):
        return -np.expm1(-exponent(np.asarray(s, dtype=float)))

    model = Model("static field", "ADK tunnelling rate at the instantaneous field over the ramp and the "
                  "plateau", "the configuration's pulse is a static field",
                  "ADK exceeds the exact static widths of H(1s) (Damburg & Kolosov 1976) by x1.7 at 0.05 au",
                  None, ionization)
    if case.static.peak_field > ip**2 / (4 * charge):
        model.warnings.append("field above barrier suppression: over-the-barrier ionisation")
    return model


# -- resonances --------------------------------------------------------------------------------------------
def _coupling(case, line) -> tuple | None:
    """(uppers with m, couplings |d_j| or |M_j| (a.u.), Rabi frequency Ω₀ and light shift δ at I₀
    (rad/s)) of ``line``: the bright combination of its levels of one energy; None without coupling."""
    from driven_atom.atom import State
    from driven_atom.atom.dipoles import dipole_matrix_element
    from driven_atom.observables.multiphoton import dynamic_polarizability, two_photon_coupling

    atom, lower, omega = case.atom, case.state, case.photon_energy
    q = spherical_q(case.polarization)
    i0 = case.peak_intensity / AU_INTENSITY_WM2
    m_up = lower.m + line.photons * q
    uppers = [State(s.n, s.l, m_up) for s in line.uppers if abs(m_up) <= s.l]
    if not uppers:
        return None
    pol = case.polarization
    if line.photons == 1:
        couplings = [abs(dipole_matrix_element(atom, u, lower, q)) for u in uppers]
        rabi = math.sqrt(i0 * sum(c * c for c in couplings)) / AU_TIME_S
        shift = 0.0
    else:
        couplings = [two_photon_coupling(atom, lower, u, omega, pol) for u in uppers]
        rabi = 0.5 * i0 * math.sqrt(sum(c * c for c in couplings)) / AU_TIME_S
        weights = [c * c for c in couplings]
        if sum(weights) == 0:
            return None
        alpha_up = sum(w * dynamic_polarizability(atom, u, omega, pol).real
                       for w, u in zip(weights, uppers)) / sum(weights)
        shift = (alpha_up - dynamic_polarizability(atom, lower, omega, pol).real) * i0 / 4 / AU_TIME_S
    if not any(couplings):
        return None
    return uppers, couplings, rabi, shift


def _line_data(case, line, coupling) -> LineData:
    """Decay, branching back to the lower level and ionisation of the upper level of ``line`` (the
    bright combination of ``coupling``), through the atom layer."""
    from driven_atom.atom import State
    from driven_atom.atom.dipoles import einstein_A, lifetime
    from driven_atom.atom.photoionization import cross_section_sublevel
    from driven_atom.observables.multiphoton import photon_order, rate_coefficient

    atom, lower, omega = case.atom, case.state, case.photon_energy
    uppers, couplings, rabi, shift = coupling
    q = spherical_q(case.polarization)
    i0 = case.peak_intensity / AU_INTENSITY_WM2
    total = sum(c * c for c in couplings)
    weights = [c * c / total for c in couplings]
    decay = sum(w / lifetime(atom, u) for w, u in zip(weights, uppers)) / AU_TIME_S
    back_rate = sum(w * einstein_A(atom, State(u.n, u.l), State(lower.n, lower.l)) for w, u in zip(weights, uppers))
    back = back_rate / AU_TIME_S / decay if decay > 0 else 1.0
    m_ion = photon_order(binding_energy(atom, uppers[0]), omega)
    if m_ion == 1:
        sigma = sum(w * float(cross_section_sublevel(atom, u, omega, q)) for w, u in zip(weights, uppers))
        rate = sigma * BOHR_M**2 * photon_flux(case.peak_intensity, omega)
        note = f"one photon (sigma = {sigma * BOHR_M**2 * 1e4:.3g} cm^2)"
    else:
        K = sum(w * rate_coefficient(atom, u, omega, m_ion, case.polarization)[1]
                for w, u in zip(weights, uppers))
        rate = K * i0**m_ion / AU_TIME_S
        note = f"{m_ion} photons (lowest-order perturbation theory)"
    tau = 1 / decay if decay > 0 else math.inf
    return LineData(line, line.photons, rabi, shift, decay, min(max(back, 0.0), 1.0), rate, m_ion, note,
                 "/".join(u.label for u in uppers), tau)


def _widths(case, data: LineData) -> dict:
    """The widths of a line (angular frequency FWHM, rad/s)."""
    k = data.photons
    return {"fourier": k * case.envelope.bandwidth, "doppler": k * case.doppler_fwhm,
            "laser": k * 2 * math.pi * case.linewidth, "natural": data.decay,
            "ionization": data.ionization, "rabi": data.rabi, "light_shift": abs(data.shift)}


TWO_PHOTON_N_MAX = 15          # two-photon lines are followed up to this upper n ...
TWO_PHOTON_REACH = 1e3         # ... and within this many Fourier/Doppler/laser widths


def _candidates(case, ip: float):
    """[(line, coupling, its cheap width)] of the lines near the laser: the nearest one- and
    two-photon lines of a hydrogen-like atom; every one-photon line of a model atom
    (:mod:`driven_atom.lab.model_resonance`)."""
    cheap = math.hypot(case.envelope.bandwidth, case.doppler_fwhm, 2 * math.pi * case.linewidth)
    if case.atom.model is not None:
        from driven_atom.lab.model_resonance import coupling, one_photon_lines

        return [(line, coupling(case, line), cheap) for line in one_photon_lines(case.atom, case.state,
                                                                                 case.photon_energy)]
    from driven_atom.atom.resonance import nearest_lines

    lines = nearest_lines(case.atom, case.state, case.photon_energy)
    out = []
    for k in (1, 2):
        line = lines[k]
        if line is None or k * case.photon_energy >= ip:
            continue                                  # two photons into the continuum: no bound line
        if k == 2 and (abs(line.detuning) / AU_TIME_S > TWO_PHOTON_REACH * k * cheap
                       or max(s.n for s in line.uppers) > TWO_PHOTON_N_MAX):
            continue
        out.append((line, _coupling(case, line), k * cheap))
    return out


def _resonance(case, ip: float, i0: float) -> Model | None:
    best = None
    for line, coupling, cheap in _candidates(case, ip):
        if coupling is None:
            continue
        detuning = abs(line.detuning) / AU_TIME_S
        shifted = line.detuning / AU_TIME_S + coupling[3]          # the detuning at the peak, light-shifted
        swept = line.detuning * shifted < 0                        # the light shift sweeps it through zero
        closest = 0.0 if swept else min(detuning, abs(shifted))
        # resonant: within RESONANCE_WIDTHS of the Fourier, Doppler and laser widths, or power-broadened
        # over the detuning (farther out the perturbative sums, with every intermediate state, do better)
        measure = closest / max(RESONANCE_WIDTHS * cheap, coupling[2], 1e-300)
        if measure <= 1 and (best is None or measure < best[0]):
            best = (closest / math.hypot(cheap, coupling[2]), line, coupling)
    if best is None:
        return None
    if case.atom.model is None:
        data = _line_data(case, best[1], best[2])
        return _resonant_model(case, ip, data, _widths(case, data), best[0])
    from driven_atom.lab.model_resonance import line_data

    data = line_data(case, best[1], best[2])
    model = _resonant_model(case, ip, data, _widths(case, data), best[0])
    model.notes.append(f"{case.atom.model.name}: the line at its measured wavelength, the coupling and the decay "
                       f"from the model's radial dipole (A rescaled to the measured frequency); the other "
                       f"fine-structure component and the hyperfine structure are left out")
    return model


def _doppler_nodes(case, data: LineData, homogeneous: np.ndarray, detuning: float):
    """Detunings and weights over the Doppler profile for each intensity node: Gauss–Hermite when
    the profile is narrower than the homogeneous response, else nodes tan-mapped around the
    resonance (they follow a power-broadened Lorentzian into its wings)."""
    sigma = data.photons * case.doppler_fwhm / (2 * math.sqrt(2 * math.log(2)))
    if sigma == 0:
        return np.full((homogeneous.size, 1), detuning), np.ones((homogeneous.size, 1))
    xh, wh = np.polynomial.hermite.hermgauss(9)
    u, wu = np.polynomial.legendre.leggauss(16)
    det, wts = [], []
    for width in homogeneous:
        if sigma <= width:
            det.append(detuning + math.sqrt(2) * sigma * xh)
            wts.append(wh / math.sqrt(math.pi))
        else:
            x = width * np.tan(0.5 * math.pi * u * 0.999)
            jac = width * 0.5 * math.pi * 0.999 / np.cos(0.5 * math.pi * u * 0.999) ** 2
            delta = x - detuning                         # the velocity class's Doppler shift
            gauss = np.exp(-0.5 * (delta / sigma) ** 2) / (math.sqrt(2 * math.pi) * sigma)
            det.append(x)
            wts.append(gauss * jac * wu)
    size = max(len(d) for d in det)
    D = np.zeros((len(det), size))
    W = np.zeros((len(det), size))
    for i, (d, w) in enumerate(zip(det, wts)):
        D[i, :len(d)], W[i, :len(w)] = d, w
    return D, W


def _resonant_model(case, ip: float, data: LineData, widths: dict, in_widths: float) -> Model:
    from driven_atom.lab.bloch import propagate_bloch
    from driven_atom.lab.focus import ProbabilityTable

    env, line = case.envelope, data.line
    detuning = line.detuning / AU_TIME_S                  # rad/s
    rabi_power = 0.5 if data.photons == 1 else 1.0
    area = data.rabi * env.integral(rabi_power)
    s_nodes = np.geomspace(*TABLE_RANGE, int(round(math.log10(TABLE_RANGE[1] / TABLE_RANGE[0])
                                                   * TABLE_NODES_PER_DECADE)) + 1)
    dephasing = data.photons**2 * math.pi * case.linewidth
    t0, t1 = env.window
    coherent = (0.5 * data.decay + dephasing) * (t1 - t0) < 1 and case.doppler_fwhm * data.photons < 2 * widths["fourier"]
    if coherent and area > 4:                            # Rabi fringes in s: resolve them (up to s = 1)
        theta = np.arange(math.pi / 6, area, math.pi / 6)
        fringe = (theta / area) ** (1 / rabi_power)
        s_nodes = np.unique(np.concatenate([s_nodes, fringe[fringe > TABLE_RANGE[0]][:400]]))
    rabi_s = data.rabi * s_nodes**rabi_power
    gamma_s = data.ionization * s_nodes**data.ionization_photons
    homogeneous = np.sqrt(rabi_s**2 + (data.decay + 2 * dephasing + gamma_s) ** 2 + widths["fourier"] ** 2
                          + (data.shift * s_nodes) ** 2)
    D, W = _doppler_nodes(case, data, homogeneous, detuning)
    S = np.broadcast_to(s_nodes[:, None], D.shape)
    out = propagate_bloch(env, rabi=(data.rabi * S**rabi_power).ravel(), detuning=D.ravel(),
                          rabi_power=rabi_power, shift=(data.shift * S).ravel(), decay=data.decay, back=data.back,
                          dephasing=dephasing, ionization=(data.ionization * S**data.ionization_photons).ravel(),
                          ionization_power=data.ionization_photons)
    ion = np.sum(out["ionized"].reshape(D.shape) * W, axis=1)
    exc = np.sum(out["excited"].reshape(D.shape) * W, axis=1)
    ion_table, exc_table = ProbabilityTable(s_nodes, ion), ProbabilityTable(s_nodes, exc)
    ghz = 1 / (2 * math.pi * 1e9)
    resonance = {**line.as_dict(), "upper": data.upper_label, "rabi_frequency_GHz": data.rabi * ghz,
                 "pulse_area_rad": area, "doppler_fwhm_GHz": widths["doppler"] * ghz,
                 "laser_linewidth_GHz": widths["laser"] * ghz, "fourier_width_GHz": widths["fourier"] * ghz,
                 "natural_width_GHz": data.decay * ghz, "upper_lifetime_s": data.lifetime,
                 "ionization_rate_peak_s": data.ionization, "ionized_by": data.ionization_note,
                 "light_shift_GHz": data.shift * ghz if data.photons == 2 else None,
                 "detuning_in_widths": in_widths}
    scheme = f"{data.photons}+{data.ionization_photons}"
    model = Model("resonant", f"resonant {scheme}: optical Bloch equations for {line.label} (Rabi frequency, "
                  f"detuning, Doppler profile, laser linewidth, decay) with ionisation of "
                  f"{line.uppers[0].label} by {data.ionization_note}",
                  f"the {data.photons}-photon line {line.label} is {in_widths:.2g} of its widths (Fourier, Doppler, "
                  f"laser and Rabi, in quadrature) from the laser ({line.detuning_GHz:+.4g} GHz"
                  + (", light-shifted through resonance)" if in_widths == 0 else ")"),
                  "the Bloch equations agree with the master equation (levels route) within 1 % for atoms at "
                  "rest; two-level model: other levels, direct ionisation of the lower level"
                  + (" and the one-photon light shift" if data.photons == 1 else "") + " are left out",
                  data.photons + data.ionization_photons, ion_table, exc_table, resonance=resonance)
    if area > 10 * math.pi:
        model.notes.append(f"pulse area {area:.3g} rad at the peak: many Rabi cycles, the transition is "
                           f"saturated (the excited fraction approaches its steady state)")
    return model

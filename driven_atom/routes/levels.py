"""Few-level route: master-equation dynamics of chosen sublevels of a hydrogen-like or model atom (qutip 5).

The model holds the m-sublevels |n l m> named in ``[solver] states`` ("2p" expands to 2p-1, 2p0,
2p1; "2p0" is that sublevel only) with the exact energies E_n = -Z²μ/(2n²) and the dipole matrix
elements <i|r_q|j> of :mod:`driven_atom.atom.dipoles` (a model atom: its converged levels and radial
dipoles, :mod:`driven_atom.basis.model_levels`, or with ``energies = "measured"`` the measured level
energies). The field couples them in the length gauge,
H_int = E(t)·r = Σ_q e_q(E) r_q with e_{±1} = (∓E_x + iE_y)/√2, e_0 = E_z (any polarisation).

* ``rwa = false``: the full coupling E(t)·r with E(t) from :mod:`driven_atom.pulse`, in the lab frame.
* ``rwa = true`` (rotating-wave approximation, interaction picture): with the complex envelope
  ℰ(t) of each pulse (E = Re[ℰ e^{-iωt}]) only the absorbing half ½ℰ·r e^{-iωt} is kept on the
  transitions whose frequency ω_ul is the nearest to that pulse's carrier ω, giving
  H_ul(t) = ½ <u|ℰ(t)·r|l> e^{i(ω_ul - ω)t} (Allen & Eberly, *Optical Resonance and Two-Level
  Atoms*, 1975, ch. 2). The pairing of pulses and transitions is reported; a carrier detuned by
  more than 10 % of its transition, or a Rabi frequency above 10 % of it, is warned about.

Dissipation (Lindblad form, Gorini–Kossakowski–Sudarshan 1976; Lindblad 1976):

* ``decay``: one operator √A |l><u| per m→m′ channel with the Einstein A of
  :func:`driven_atom.atom.dipoles.einstein_A`; the rest of each level's total rate 1/τ (decay to levels
  not in the model) goes to a sink population ``"elsewhere"``. Each channel decays on its own, so
  coherence is not transferred between sublevels by spontaneous emission.
* ``dephasing`` γ: operators √γ P_E (projector on all sublevels of one energy); every coherence
  between sublevels of different energy decays at the rate γ (a rate: "1 GHz" means 1e9 s⁻¹).
* ``ionization_loss``: each sublevel j is emptied into the sink ``"ionized"`` at the rate
  σ_j(ω) I(t)/ω of each pulse, with the sublevel's own cross section for that light
  (:func:`driven_atom.atom.photoionization.cross_section_sublevel`, its polarisation's spherical
  components weighted) at the carrier ω and the cycle-averaged
  intensity I(t) = c|ℰ(t)|²/(8π) (a.u.). The sink populations and the model add up to 1 (``norm``).

Real level structure (``[atom] structure`` = "fine" or "hyperfine", or ``two_photon``; docs/physics.md):
the sublevels |n l j m_j> or |n l j F m_F> with the energies of :mod:`driven_atom.atom.structure`, the
apparatus' static fields (``[fields]``) and decay per component, built by
:mod:`driven_atom.routes.structured_model`. The RWA then works in a frame rotating with one reference
energy per shell n (the mean of the model's field-free energies there): the fine, hyperfine, Zeeman and
Stark splittings stay in a static Hamiltonian, each pulse drives the pair of shells nearest its carrier
(or, with ``two_photon``, twice its carrier: two-photon couplings and the ac Stark operator of every
shell, :mod:`driven_atom.atom.twophoton`), and after the pulse the master equation is propagated in
closed form, ρ(t) = exp(L t) ρ(0) (scipy.linalg.expm of the Liouvillian). Populations are those of the
dressed states (the eigenstates of each shell in the static fields), labelled by the field-free
sublevel each continues; "elsewhere" and "ionized" as above. Dephasing then damps coherences between
shells.

Time-dependent coefficients are sampled once on an adaptively refined grid (cubic splines, the
interpolation qutip uses, checked at every interval midpoint against ``sampling_tol``), then qutip's
``MESolver`` (or ``SESolver`` when nothing dissipates) propagates over the pulse window. After the
pulse, field-free, populations follow the rate equations dp/dt = R p in closed form,
p(t) = exp(R t) p(0) (scipy.linalg.expm). Levels runs are short: they are not checkpointed.

>>> LevelsSettings(states=["1s", "2p"]).sublevels()
[State(n=1, l=0, m=0), State(n=2, l=1, m=-1), State(n=2, l=1, m=0), State(n=2, l=1, m=1)]
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from driven_atom.atom.dipoles import spherical_coefficients
from driven_atom.atom.states import State, parse_state
from driven_atom.errors import InputError
from driven_atom.routes.base import Knob, Outcome, Route
from driven_atom.routes.structured_model import (build_structured_model, dressed_populations, expand_states,
                                                 initial_density, is_structured)
from driven_atom.settings import LevelsSettings
from driven_atom.units import C_AU

ELSEWHERE = "elsewhere"
IONIZED = "ionized"
RWA_SOFT, RWA_HARD = 0.1, 0.5   # |ω − ω_ul|/ω_ul or Ω/ω_ul: the RWA is questionable / invalid
RESONANCE_WIDTHS = 10.0         # a carrier farther than this many spectral widths drives nothing
MAX_COEFFICIENT_VALUES = 20_000_000   # samples x terms kept in memory for the coefficients


# --- the static model ------------------------------------------------------------------------
@dataclass(frozen=True)
class LevelModel:
    """The field-free part of the model, atomic units.

    ``dipoles[k, i, j] = <i|r_q|j>`` with q = k - 1; ``channels`` lists (from, to, rate) of every
    decay channel, ``to`` indexing ``labels`` (sinks after the sublevels).
    """

    states: tuple[State, ...]
    energies: np.ndarray
    dipoles: np.ndarray
    channels: tuple[tuple[int, int, float], ...]
    sinks: tuple[str, ...]

    @property
    def labels(self) -> list[str]:
        return [s.label for s in self.states] + list(self.sinks)

    @property
    def size(self) -> int:
        return len(self.states) + len(self.sinks)

    def cartesian(self) -> np.ndarray:
        """Hermitian matrices of x, y, z (shape 3, N, N) in the sublevel basis."""
        return np.einsum("ak,kij->aij", spherical_coefficients(np.eye(3)), self.dipoles)

    def rate_matrix(self) -> np.ndarray:
        """R with dp/dt = R p for the populations of all labels (field-free)."""
        R = np.zeros((self.size, self.size))
        for i, j, rate in self.channels:
            R[j, i] += rate
            R[i, i] -= rate
        return R


def build_model(atom, states, *, decay: bool = True, ionization_sink: bool = False,
                measured: bool = False) -> LevelModel:
    """Energies, dipoles and decay channels of the sublevels ``states`` (each with m given).

    The part of a level's total rate 1/τ not carried by channels inside the model goes to the
    sink "elsewhere" (only present when that part is > 1e-9 of the total). A model atom
    (``atom.model``) takes its levels, radial dipoles and rates from its converged eigenstates
    (:mod:`driven_atom.basis.model_levels`); ``measured`` puts the measured level energies (NIST ASD,
    fine-structure centroids, where the data file has them) in place of the model's, and the
    Einstein A then scale with the measured ω³.

    >>> from driven_atom.atom import Atom
    >>> m = build_model(Atom(1), [State(1, 0, 0), State(2, 1, 0), State(3, 0, 0)])
    >>> m.labels, round(float(abs(m.dipoles[1, 1, 0])), 6)   # <2p0|z|1s> = 2^7 √2/3^5
    (['1s0', '2p0', '3s0', 'elsewhere'], 0.744936)
    """
    from driven_atom.atom.dipoles import angular_factor

    states = tuple(states)
    levels = _LevelSource(atom, measured)
    N = len(states)
    energies = np.array([levels.energy(s) for s in states], dtype=float)
    dip = np.zeros((3, N, N), dtype=complex)
    for i, si in enumerate(states):
        for j, sj in enumerate(states):
            q = si.m - sj.m
            if abs(si.l - sj.l) == 1 and abs(q) <= 1:
                dip[q + 1, i, j] = angular_factor(si.l, si.m, sj.l, sj.m, q) * levels.radial(si, sj)
    channels, outside = [], []
    if decay:
        for u, su in enumerate(states):
            total = levels.total_rate(su)
            inside = 0.0
            for l, sl in enumerate(states):
                if energies[l] < energies[u] and abs(su.l - sl.l) == 1 and abs(su.m - sl.m) <= 1:
                    rate = levels.rate(su, sl)
                    if rate > 0:
                        channels.append((u, l, rate))
                        inside += rate
            if total - inside > 1e-9 * total:
                outside.append((u, total - inside))
    sinks = ((ELSEWHERE,) if outside else ()) + ((IONIZED,) if ionization_sink else ())
    channels += [(u, N, rate) for u, rate in outside]
    return LevelModel(states, energies, dip, tuple(channels), sinks)


class _LevelSource:
    """Level energies, radial dipoles and decay rates of a hydrogen-like atom (closed forms of
    :mod:`driven_atom.atom`) or of a model atom (its eigenstates, with measured energies on request).

    A(u m_u → l m_l) = (4/3) α³ ω³ Σ_q |⟨l m_l|r_q|u m_u⟩|² (Bethe & Salpeter 1957, §59); a model
    atom's levels never decay into its core (shells occupied in the real atom)."""

    def __init__(self, atom, measured: bool):
        self.atom, self.measured = atom, measured

    def energy(self, s) -> float:
        if self.atom.model is None:
            from driven_atom.atom.levels import energy

            return float(energy(self.atom, s.n))
        from driven_atom.basis import model_levels

        found = model_levels.measured_energy(self.atom, s) if self.measured else None
        return float(model_levels.energy(self.atom, s) if found is None else found)

    def radial(self, a, b) -> float:
        if self.atom.model is None:
            from driven_atom.atom.dipoles import radial_dipole

            return float(radial_dipole(self.atom, a.n, a.l, b.n, b.l))
        from driven_atom.basis import model_levels

        return model_levels.radial_dipole(self.atom, a.level, b.level)

    def rate(self, upper, lower) -> float:
        """A of one sublevel channel (1/a.u. time)."""
        from driven_atom.atom.dipoles import angular_factor, einstein_A

        if self.atom.model is None:
            return float(einstein_A(self.atom, upper, lower))
        from driven_atom.basis import model_levels
        from driven_atom.units import ALPHA

        omega = self.energy(upper) - self.energy(lower)
        if omega <= 0 or model_levels.is_core(self.atom, lower):
            return 0.0
        angular = sum(angular_factor(lower.l, lower.m, upper.l, upper.m, q) ** 2 for q in (-1, 0, 1))
        return 4.0 / 3.0 * ALPHA**3 * omega**3 * angular * self.radial(upper, lower) ** 2

    def total_rate(self, s) -> float:
        """1/τ of the level of ``s`` (all lower levels, inside the model or not)."""
        if self.atom.model is None:
            from driven_atom.atom.dipoles import lifetime

            return 1.0 / lifetime(self.atom, s)
        from driven_atom.basis import model_levels

        upper = State(s.n, s.l, s.m if s.m is not None else 0)
        return sum(self.rate(upper, State(low.n, low.l, m))
                   for low in model_levels.lower_levels(self.atom, s) for m in range(-low.l, low.l + 1))


# --- time-dependent terms ----------------------------------------------------------------------
@dataclass
class FieldTerms:
    """Operators (N x N, sinks included) times coefficients sampled by ``values(t)``."""

    hamiltonian: list          # (matrix, index of coefficient row, conjugate the row?)
    dissipators: list          # (list of collapse matrices, index of coefficient row: |ℰ_k|²)
    values: object             # t -> array (n_rows, len(t)) complex
    n_rows: int
    max_frequency: float       # fastest oscillation of the coefficients (a.u.)
    notes: list
    warnings: list
    details: list = field(default_factory=list)     # per pulse: what it drives, in atomic units


def _pad(model: LevelModel, matrix: np.ndarray) -> np.ndarray:
    out = np.zeros((model.size, model.size), dtype=complex)
    n = len(model.states)
    out[:n, :n] = matrix
    return out


def _transitions(model: LevelModel) -> dict[float, list[tuple[int, int]]]:
    """Dipole-coupled (upper, lower) pairs grouped by transition frequency ω_ul > 0."""
    groups: dict[float, list] = {}
    E = model.energies
    coupled = np.any(model.dipoles != 0, axis=0)
    for u, l in zip(*np.nonzero(coupled)):
        if E[u] > E[l]:
            key = next((w for w in groups if math.isclose(w, E[u] - E[l], rel_tol=1e-12)), E[u] - E[l])
            groups.setdefault(key, []).append((int(u), int(l)))
    return groups


def _transition_names(model: LevelModel, groups) -> dict:
    return {w: "/".join(sorted({f"{model.states[l].level.label}-{model.states[u].level.label}"
                                for u, l in pairs})) for w, pairs in groups.items()}


def nearest_transition(model: LevelModel, comp, groups=None):
    """(ω_ul, detuning ω_ul − ω, peak Rabi frequency, name) of the model's dipole transition nearest
    to the carrier of one pulse component, or None when no two states are coupled. The Rabi
    frequency is |⟨u|ε·r|l⟩| F₀ at the peak (the chirp's largest instantaneous field included)."""
    groups = _transitions(model) if groups is None else groups
    if not groups or comp.omega == 0:
        return None
    w = min(groups, key=lambda w: abs(w - comp.omega))
    e_q = spherical_coefficients(comp.jones)
    peak = comp.peak_field * (1 + abs(comp.chirp) * comp.length / (2 * comp.omega))
    rabi = peak * max(abs(model.dipoles[:, u, l] @ e_q) for u, l in groups[w])
    return w, w - comp.omega, rabi, _transition_names(model, groups)[w]


def _rwa_terms(model: LevelModel, pulse) -> FieldTerms:
    groups = _transitions(model)
    hamiltonian, dissipators, rows, notes, warnings = [], [], [], [], []
    top = 0.0
    for k, comp in enumerate(pulse.components):
        if comp.omega == 0:
            raise InputError(f"pulse[{k}] is a static field: the levels route needs `solver.rwa` = false for it")
        if not groups:
            warnings.append(f"pulse[{k}] drives nothing: no two states of the model are dipole-coupled")
            continue
        w, detuning, _, name = nearest_transition(model, comp, groups)
        notes.append(f"pulse[{k}] (ω = {comp.omega:.6g} au) drives {name} "
                     f"(ω_ul = {w:.6g} au, detuning {detuning:+.3g} au)")
        e_q = spherical_coefficients(comp.jones)
        for qi in range(3):
            if e_q[qi] == 0:
                continue
            A = np.zeros((len(model.states),) * 2, dtype=complex)
            for u, l in groups[w]:
                A[u, l] = model.dipoles[qi, u, l]
            if np.any(A):   # H_ul = f(t) A and its Hermitian conjugate H_lu = f*(t) A†
                hamiltonian += [(_pad(model, A), len(rows), False), (_pad(model, A.conj().T), len(rows), True)]
                rows.append((k, qi, detuning))
        top = max(top, abs(detuning) + abs(comp.chirp) * comp.length / 2)

    def values(t):
        out = np.empty((len(rows), len(t)), dtype=complex)
        cache = {}
        for r, (k, qi, detuning) in enumerate(rows):
            if k not in cache:
                cache[k] = spherical_coefficients(pulse.components[k].complex_envelope(t))
            out[r] = 0.5 * cache[k][:, qi] * np.exp(1j * detuning * t)
        return out

    return FieldTerms(hamiltonian, dissipators, values, len(rows), top, notes, warnings)


def _full_terms(model: LevelModel, pulse) -> FieldTerms:
    cart = model.cartesian()
    active = [a for a in range(3) if any(c.jones[a] != 0 for c in pulse.components)]
    hamiltonian = [(_pad(model, cart[a]), r, False) for r, a in enumerate(active)]

    def values(t):
        return pulse.electric_field(t)[:, active].T.astype(complex)

    top = max(c.omega + abs(c.chirp) * c.length / 2 for c in pulse.components)
    return FieldTerms(hamiltonian, [], values, len(active), top, [], [])


def sublevel_cross_sections(atom, states, comp) -> list[float]:
    """σ_j(ω) of each sublevel |n l m⟩ for the light of one pulse component: the m-resolved cross
    sections of its spherical components q, weighted by |e_q|²/|ε|² (linear z light: q = 0 only;
    the m-average of these is the level's σ of :func:`~driven_atom.atom.photoionization.cross_section`).
    Fine and hyperfine components (|n l j m_j⟩, |F m_F⟩) take their level's m-averaged σ."""
    from driven_atom.atom.photoionization import cross_section, cross_section_sublevel

    e_q = spherical_coefficients(comp.jones)
    weights = np.abs(e_q) ** 2 / float(np.sum(np.abs(e_q) ** 2))
    one_sublevel = cross_section_sublevel if atom.model is None else model_atom_cross_section_sublevel

    def sigma(s) -> float:
        if not isinstance(s, State) or s.m is None:    # a fine/hyperfine component: the level's σ
            return float(cross_section(atom, s.n, s.l, comp.omega))
        return float(sum(w * one_sublevel(atom, s, comp.omega, q)
                         for w, q in zip(weights, (-1, 0, 1)) if w > 0))

    return [sigma(s) for s in states]


def model_atom_cross_section_sublevel(atom, state, omega: float, q: int = 0) -> float:
    """σ of the sublevel |n l m⟩ of a model atom for light of spherical component q (bohr²):
    σ = 4π²αω Σ_{L = l±1} |⟨L m+q|C¹_q|l m⟩|² |∫u_{EL} r u_{nl} dr|², energy-normalised continuum
    (the m-resolved form of :func:`driven_atom.basis.model_levels.cross_section`, whose average
    over m and q it is); 0 below the model's threshold."""
    from driven_atom.atom.dipoles import angular_factor
    from driven_atom.basis import model_levels
    from driven_atom.units import ALPHA

    radial = model_levels.partial_dipoles(atom, state.level, omega)
    m = 0 if state.m is None else state.m
    total = sum(angular_factor(L, m + q, state.l, m, q) ** 2 * float(I[0]) ** 2
                for L, I in radial.items() if L >= abs(m + q))
    return 4.0 * math.pi**2 * ALPHA * omega * total


def _add_ionization(terms: FieldTerms, model: LevelModel, atom, pulse) -> None:
    """Loss of every sublevel j to "ionized" at σ_j(ω_k) c|ℰ_k|²/(8π ω_k) for each pulse k, with the
    sublevel's own cross section for that light (:func:`sublevel_cross_sections`)."""
    sink = model.labels.index(IONIZED)
    base_values, base_rows = terms.values, terms.n_rows
    pulses = []
    for k, comp in enumerate(pulse.components):
        if comp.omega == 0:
            continue
        sigma = sublevel_cross_sections(atom, model.states, comp)
        ops = []
        for j, sj in enumerate(sigma):
            if sj > 0:
                L = np.zeros((model.size, model.size), dtype=complex)
                L[sink, j] = math.sqrt(sj * C_AU / (8 * math.pi * comp.omega))
                ops.append(L)
        if ops:
            terms.dissipators.append((ops, base_rows + len(pulses)))
            pulses.append(k)

    def values(t):
        extra = [np.sum(np.abs(pulse.components[k].complex_envelope(t)) ** 2, axis=1) for k in pulses]
        return np.vstack([base_values(t)] + [np.asarray(extra, dtype=complex).reshape(len(pulses), len(t))])

    terms.values, terms.n_rows = values, base_rows + len(pulses)


# --- sampling ----------------------------------------------------------------------------------
def sample_coefficients(values, t0: float, t1: float, *, n_start: int, tol: float,
                        breakpoints=(), max_points: int = 10**6):
    """Times and values on which cubic splines (qutip's interpolation, scipy ``make_interp_spline``,
    not-a-knot) reproduce ``values(t)`` to ``tol`` times its peak at every interval midpoint, the
    error of an interval weighted by its length over the starting spacing (what the propagation
    integrates; so kinks of the envelope at ramp joints need not be resolved pointwise).

    Starts from ``n_start`` uniform points plus ``breakpoints`` and halves failing intervals.

    >>> t, v = sample_coefficients(lambda t: np.exp(1j * t)[None, :], 0.0, 10.0, n_start=8, tol=1e-8)
    >>> bool(np.allclose(v[0], np.exp(1j * t))) and 20 < len(t) < 400
    True
    """
    from scipy.interpolate import make_interp_spline

    if not n_start <= max_points:
        raise InputError(f"the field coefficients need more than {max_points} samples over {t1 - t0:.4g} au "
                         f"(they oscillate {n_start / 16:.3g} times); use `solver.rwa` = true, a shorter pulse "
                         f"or a carrier nearer the transitions")
    t = np.linspace(t0, t1, max(int(n_start), 4))
    h0 = t[1] - t[0]
    for b in breakpoints:    # joints of the envelopes, unless a sample is already (nearly) there
        if t0 < b < t1 and np.min(np.abs(t - b)) > 1e-3 * h0:
            t = np.insert(t, np.searchsorted(t, b), b)
    v = values(t)
    scale = max(float(np.max(np.abs(v))) if v.size else 0.0, 1e-300)
    while True:
        mid = 0.5 * (t[1:] + t[:-1])
        vm = values(mid)
        spline = make_interp_spline(t, v, k=3, axis=1)(mid)
        weight = np.diff(t) / h0    # a refined interval may err more: it lasts shorter
        error = np.max(np.abs(spline - vm), axis=0) * weight
        if not np.any(error > tol * scale):
            return t, v
        # refine with a margin (errors above tol/16 and two neighbours each side): a lone refined
        # interval changes the global spline around it, and its neighbours would fail one by one
        bad = np.convolve(error > tol * scale / 16, np.ones(5), mode="same") > 0
        if len(t) + int(bad.sum()) > max_points:
            raise InputError(f"the field coefficients need more than {max_points} samples over "
                             f"{t1 - t0:.4g} au; use `solver.rwa` = true, a shorter pulse or a larger "
                             f"`solver.sampling_tol`")
        order = np.argsort(np.concatenate([t, mid[bad]]), kind="stable")
        t = np.concatenate([t, mid[bad]])[order]
        v = np.concatenate([v, vm[:, bad]], axis=1)[:, order]


def coupling(atom, pulse, model: LevelModel, settings: LevelsSettings):
    """The field's part of the model: operators with their coefficient rows (``FieldTerms``) and the
    sampled coefficients ``(times, values)`` over the pulse window, as the solver uses them:
    H(t) = Σ_r c_r(t) H_r (c_r* for the conjugate halves) and Lindblad terms c_r(t) D_r.

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.pulse import Pulse
    >>> model = build_model(Atom(1), [State(1, 0, 0), State(2, 1, 0)], decay=False)
    >>> pulse = Pulse({"photon_energy": 0.375, "peak_field": 1e-3, "length": 2000.0})
    >>> terms, (times, values) = coupling(Atom(1), pulse, model, LevelsSettings(states=["1s", "2p0"]))
    >>> len(terms.hamiltonian), terms.notes[0][:32]
    (2, 'pulse[0] (ω = 0.375 au) drives 1')
    """
    terms = _rwa_terms(model, pulse) if settings.rwa else _full_terms(model, pulse)
    if settings.photoionization:
        _add_ionization(terms, model, atom, pulse)
    return terms, _sampled(terms, pulse, settings)


def _sampled(terms: FieldTerms, pulse, settings: LevelsSettings):
    """``(times, values)`` of the coefficient rows over the pulse window (:func:`sample_coefficients`)."""
    components = pulse.components
    t0, t1 = pulse.t_start, pulse.t_end
    window = t1 - t0
    n_start = max(257, math.ceil(window * terms.max_frequency / (2 * math.pi) * 16),
                  math.ceil(64 * window / min(c.length for c in components)))
    if not terms.n_rows:
        return np.array([t0, t1]), np.zeros((0, 2), dtype=complex)
    return sample_coefficients(terms.values, t0, t1, n_start=n_start, tol=settings.sampling_tol,
                               breakpoints=[b for c in components for b in c.breakpoints],
                               max_points=MAX_COEFFICIENT_VALUES // terms.n_rows)


# --- real level structure: fine, hyperfine, two photons -------------------------------------------
def _unit_polarization(comp) -> np.ndarray:
    return comp.jones / np.linalg.norm(comp.jones)


def _nearest_shells(model, reference, omega: float, photons: int, coupled) -> tuple[int, int, float] | None:
    """The shell pair (n_u, n_l), n_u > n_l, that ``coupled(n_u, n_l)`` admits and whose reference
    interval lies nearest ``photons`` x omega, with that interval; None if there is none."""
    shells = sorted(set(model.shells.tolist()))
    ref = {n: float(reference[model.shells == n][0]) for n in shells}
    pairs = [(nu, nl, ref[nu] - ref[nl]) for nu in shells for nl in shells if nu > nl and coupled(nu, nl)]
    return min(pairs, key=lambda p: abs(p[2] - photons * omega)) if pairs else None


def structured_terms(atom, pulse, model, settings: LevelsSettings, reference) -> FieldTerms:
    """Field terms of a :class:`~driven_atom.routes.structured_model.StructuredModel` in the frame
    rotating with the ``reference`` energy of each shell (RWA) or in the lab frame.

    * one photon (RWA): each pulse drives the dipole couplings between the pair of shells whose
      reference interval ω_ul is nearest its carrier, H_ul = ½ <u|ℰ(t)·r|l> e^{i(ω_ul - ω)t}; every
      fine, hyperfine and Zeeman component keeps its own detuning through the static Hamiltonian;
    * two photons (``two_photon``): the two-photon couplings between the shell pair nearest 2ω,
      H_ul = (s²/4) T_ul e^{i(ω_ul - 2ω)t}, and the ac Stark operator (|s|²/4) W of every shell
      (:mod:`driven_atom.atom.twophoton`; ℰ = s ε̂, |s|² the intensity in atomic units);
    * ``rwa = false``: the full E(t)·r in the lab frame.
    """
    from driven_atom.atom.twophoton import stark_matrix, two_photon_matrix

    N = len(model.states)
    hamiltonian, rows, notes, warnings, details = [], [], [], [], []
    top = 0.0
    if not settings.rwa:
        cart = np.einsum("ak,kij->aij", spherical_coefficients(np.eye(3)), model.dipoles)
        active = [a for a in range(3) if any(c.jones[a] != 0 for c in pulse.components)]
        hamiltonian = [(_pad(model, cart[a]), r, False) for r, a in enumerate(active)]

        def lab_values(t):
            return pulse.electric_field(t)[:, active].T.astype(complex)

        top = max(c.omega + abs(c.chirp) * c.length / 2 for c in pulse.components)
        return FieldTerms(hamiltonian, [], lab_values, len(active), top, [], [])
    shells = model.shells
    for k, comp in enumerate(pulse.components):
        if comp.omega == 0:
            raise InputError(f"pulse[{k}] is a static field: the levels route needs `solver.rwa` = false for it")
        unit = _unit_polarization(comp)
        e_q = spherical_coefficients(unit)
        spread = abs(comp.chirp) * comp.length / 2
        if settings.two_photon:
            def two_coupled(nu, nl):
                return any((a.l - b.l) % 2 == 0 for a in model.states if a.n == nu for b in model.states if b.n == nl)

            pick = _nearest_shells(model, reference, comp.omega, 2, two_coupled)
            detail = {"pulse": k}
            if pick is not None:
                nu, nl, w = pick
                detuning = w - 2 * comp.omega
                T = two_photon_matrix(atom, model.states, model.I2, nu, nl, comp.omega, e_q)
                if np.any(np.abs(T) > 0):
                    hamiltonian += [(_pad(model, T), len(rows), False), (_pad(model, T.conj().T), len(rows), True)]
                    rows.append(("two", k, None, detuning))
                    notes.append(f"pulse[{k}] (ω = {comp.omega:.9g} au) drives shells {nl} -> {nu} by two photons "
                                 f"(ω_ul - 2ω = {detuning:+.4g} au)")
                    if abs(detuning) > RWA_SOFT * w:
                        warnings.append(f"RWA invalid: twice the carrier of pulse[{k}] is {abs(detuning) / w:.0%} off "
                                        f"the nearest two-photon interval in the model (shells {nl} -> {nu})")
                else:
                    warnings.append(f"pulse[{k}] drives no two-photon transition between shells {nl} and {nu} with "
                                    f"its polarisation (e.g. s -> s needs linear light)")
                detail.update({"shells": [nl, nu], "detuning_au": detuning,
                               "coupling_per_intensity_au": float(0.25 * np.max(np.abs(T)))})
                top = max(top, abs(detuning) + 2 * spread)
            else:
                warnings.append(f"pulse[{k}] drives nothing: no two shells of the model are coupled by two photons")
            W = stark_matrix(atom, model.states, model.I2, comp.omega, e_q)
            W = 0.5 * (W + W.conj().T)                      # the shift; the loss comes with ionization_loss
            hamiltonian.append((_pad(model, W), len(rows), False))
            rows.append(("stark", k, None, 0.0))
            detail["stark_shift_per_intensity_au"] = {model.states[i].label: float(0.25 * W[i, i].real)
                                                      for i in range(N)}
            details.append(detail)
            continue

        def one_coupled(nu, nl):
            iu, il = np.nonzero(shells == nu)[0], np.nonzero(shells == nl)[0]
            return bool(np.any(model.dipoles[:, iu][:, :, il]))

        pick = _nearest_shells(model, reference, comp.omega, 1, one_coupled)
        if pick is None:
            warnings.append(f"pulse[{k}] drives nothing: no two states of the model are dipole-coupled")
            continue
        nu, nl, w = pick
        detuning = w - comp.omega
        notes.append(f"pulse[{k}] (ω = {comp.omega:.9g} au) drives shells {nl} -> {nu} "
                     f"(reference interval {w:.9g} au, detuning {detuning:+.3g} au)")
        upper, lower = shells == nu, shells == nl
        mask = np.outer(upper, lower)
        for qi in range(3):
            if e_q[qi] == 0:
                continue
            A = np.where(mask, model.dipoles[qi], 0.0).astype(complex)
            if np.any(A):
                hamiltonian += [(_pad(model, A), len(rows), False), (_pad(model, A.conj().T), len(rows), True)]
                rows.append(("one", k, qi, detuning))
        top = max(top, abs(detuning) + spread)

    def values(t):
        out = np.empty((len(rows), len(t)), dtype=complex)
        for r, (kind, k, qi, detuning) in enumerate(rows):
            comp = pulse.components[k]
            if kind == "one":
                out[r] = 0.5 * spherical_coefficients(comp.complex_envelope(t))[:, qi] * np.exp(1j * detuning * t)
                continue
            amplitude = comp.complex_envelope(t) @ _unit_polarization(comp).conj()
            out[r] = 0.25 * amplitude**2 * np.exp(1j * detuning * t) if kind == "two" else 0.25 * np.abs(amplitude) ** 2
        return out

    return FieldTerms(hamiltonian, [], values, len(rows), top, notes, warnings, details)


def _liouvillian_propagator(H0: np.ndarray, c_ops):
    """dt -> exp(L dt) for dρ/dt = -i[H0, ρ] + Σ D[c]ρ on column-stacked ρ (time-independent; cached
    for repeated intervals): vec(AρB) = (Bᵀ ⊗ A) vec ρ."""
    from scipy.linalg import expm

    n = H0.shape[0]
    eye = np.eye(n)
    L = -1j * (np.kron(eye, H0) - np.kron(H0.T, eye))
    for c in c_ops:
        cc = c.conj().T @ c
        L += np.kron(c.conj(), c) - 0.5 * np.kron(eye, cc) - 0.5 * np.kron(cc.T, eye)
    cache = {}

    def propagate(dt: float, rho: np.ndarray) -> np.ndarray:
        key = float(f"{dt:.13g}")        # sample intervals equal but for rounding share one exponential
        if key not in cache:
            if len(cache) > 16:
                cache.clear()
            cache[key] = expm(L * key)
        return (cache[key] @ rho.reshape(-1, order="F")).reshape(n, n, order="F")

    return propagate


# --- the solver --------------------------------------------------------------------------------
def _initial_density(model: LevelModel, initial, t0: float, interaction: bool):
    """Density matrix (and the ket when pure) at t0 from [(State, amplitude)]; a level without m
    and l > 0 enters as an equal incoherent mixture of its sublevels."""
    index = {s: i for i, s in enumerate(model.states)}
    rho = np.zeros((model.size, model.size), dtype=complex)
    ket = np.zeros(model.size, dtype=complex)
    pure = True
    for state, amp in initial:
        subs = [State(state.n, state.l, 0)] if state.m is None and state.l == 0 else state.sublevels()
        missing = [s.label for s in subs if s not in index]
        if missing:
            raise InputError(f"`atom.initial` {state.label} is not in the model: add "
                             f"{', '.join(missing)} to `solver.states`")
        if len(subs) == 1:
            ket[index[subs[0]]] += amp
        else:
            pure = False
            for s in subs:
                rho[index[s], index[s]] += abs(amp) ** 2 / len(subs)
    if interaction:   # |ψ_I(t0)> = exp(i H0 t0) |ψ(t0)>
        ket[:len(model.states)] *= np.exp(1j * model.energies * t0)
    rho += np.outer(ket, ket.conj())
    return rho, (ket if pure else None)


def _field_free_propagator(model: LevelModel):
    """dt -> exp(R dt) for the field-free rate equations dp/dt = R p (scipy.linalg.expm), cached
    for repeated intervals."""
    from scipy.linalg import expm

    R = model.rate_matrix()
    cache = {}

    def propagator(dt: float) -> np.ndarray:
        key = float(dt)
        if key not in cache:
            if len(cache) > 64:
                cache.clear()
            cache[key] = expm(R * dt)
        return cache[key]

    return propagator


def _bohr_operators(model: LevelModel, settings: LevelsSettings, interaction: bool):
    """H0 (lab frame: the energies; interaction picture: zero) and the collapse matrices of the Bohr
    model: one per decay channel, then the dephasing projectors of each energy."""
    n = model.size
    H0 = np.zeros((n, n), dtype=complex)
    if not interaction:
        H0[:len(model.states), :len(model.states)] = np.diag(model.energies)
    c_ops = []
    for i, j, rate in model.channels:
        L = np.zeros((n, n), dtype=complex)
        L[j, i] = math.sqrt(rate)
        c_ops.append(L)
    gamma = settings.dephasing
    if gamma > 0 and len(np.unique(model.energies)) > 1:
        for E in np.unique(model.energies):
            P = np.zeros((n, n), dtype=complex)
            idx = np.nonzero(model.energies == E)[0]
            P[idx, idx] = math.sqrt(gamma)
            c_ops.append(P)
    return H0, c_ops


def _solver(size: int, H0, c_ops, terms: FieldTerms, settings: LevelsSettings, ket0, *, coefficients,
            max_step: float):
    """The qutip solver of the pulse window for H = H0 + Σ c_r(t) H_r and the collapse matrices
    ``c_ops``: ``SESolver`` for a pure state with nothing dissipating, else ``MESolver`` on the
    Liouvillian with the time-dependent loss terms."""
    import qutip as qt
    from scipy.sparse import csr_matrix

    ts, vals = coefficients
    dims = [[size], [size]]
    # every coefficient row normalised to a peak of 1, its scale moved into the operator: qutip takes
    # two sampled coefficients as equal (and merges their terms) when they agree to np.allclose's
    # default atol of 1e-8, which weak fields' coefficients (and their conjugates) do
    scale = np.max(np.abs(vals), axis=1) if vals.size else np.zeros(0)
    scale = np.where(scale > 0, scale, 1.0)
    vals = vals / scale[:, None]

    def qobj(matrix):   # sparse (CSR): the Liouvillian of N levels is N² x N²
        return qt.Qobj(csr_matrix(matrix), dims=dims)

    H = qt.QobjEvo([qobj(H0)] + [[qobj(A * scale[r]), qt.coefficient(vals[r].conj() if conj else vals[r], tlist=ts)]
                                 for A, r, conj in terms.hamiltonian])
    c_ops = [qobj(c) for c in c_ops]
    options = {"atol": settings.atol, "rtol": settings.rtol, "nsteps": settings.nsteps,
               "method": settings.method, "max_step": max_step, "store_states": False,
               "store_final_state": False, "normalize_output": False, "progress_bar": ""}
    if not (c_ops or terms.dissipators) and ket0 is not None:
        return qt.SESolver(H, options=options), "sesolve"
    L = qt.liouvillian(H, c_ops)
    for ops, r in terms.dissipators:
        D = sum(qt.lindblad_dissipator(qobj(op)) for op in ops) * scale[r]
        L = L + qt.QobjEvo([[D, qt.coefficient(vals[r], tlist=ts)]])
    return qt.MESolver(L, options=options), "mesolve"


def _check_model_atom(atom, labels, two_photon: bool) -> None:
    """A model atom's levels: no two-photon elimination (its sums are hydrogenic), no core shell
    (occupied in the real atom), every level converged in the model's reference box."""
    from driven_atom.basis import model_levels

    if two_photon:
        raise InputError(f"`solver.two_photon` takes hydrogen-like atoms only; for `atom.species` = "
                         f"{atom.species!r} put the intermediate levels in `solver.states` (or use route \"basis\")")
    for label in labels:
        s = parse_state(label, name="solver.states")
        model_levels.energy(atom, s)                     # refuses a level beyond the reference box
        if model_levels.is_core(atom, s):
            raise InputError(f"`solver.states`: {s.level.label} of {atom.species} is a core shell (filled in the real "
                             f"atom, below the valence ground state {atom.model.ground.label})")


def _structured_states(atom, labels, structure: str) -> list:
    """The model's sublevels (checks labels, F values and repeats: one line naming `solver.states`)."""
    from driven_atom.atom.structure import nuclear_spin2

    return expand_states(labels, structure, nuclear_spin2(atom) if structure == "hyperfine" else 0)


class LevelsRoute(Route):
    """Few-level master equation of hydrogenic sublevels (see the module docstring).

    The state during the pulse is qutip's (stepped sample by sample); after the pulse, the
    populations of every label evolve by the closed-form rate equations. Levels runs are short:
    they are not checkpointed (a stopped run starts again).

    >>> from driven_atom.atom import Atom
    >>> from driven_atom.config import OutputConfig
    >>> route = LevelsRoute(Atom.from_name("H"), None, LevelsSettings(states=["1s", "2p"], after="1.5962 ns"),
    ...                     initial=[(State(2, 1, 0), 1.0)], output=OutputConfig())
    >>> res = route.run()
    >>> round(res.populations["2p"], 4), round(res.populations["1s"], 4)   # one lifetime: 1/e
    (0.3679, 0.6321)
    """

    name = "levels"
    Settings = LevelsSettings
    polarizations = ("z", "x", "circular+", "circular-", "elliptical")
    structures = ("bohr", "fine", "hyperfine")
    static_fields = True
    needs_pulse = False
    resumable = False
    tolerance_key = "solver.rtol"

    @classmethod
    def check(cls, atom, pulse, initial, cfg=None) -> None:
        """Also: fields below barrier suppression of the initial state, F_BS = Ip²/(4Z) (Augst et
        al., PRL 63, 2212 (1989)), where a few-level model means nothing; with real level structure
        the model's sublevels (labels, F values) and a static electric field below a hundredth of
        the classical ionisation field Z³μ²/(16 n⁴) of the highest shell (the model keeps each shell's
        Stark mixing only)."""
        super().check(atom, pulse, initial, cfg)
        if atom.model is not None and cfg is not None:
            _check_model_atom(atom, cfg.solver.states, cfg.solver.two_photon)
        elif cfg is not None and cfg.solver.energies == "measured":
            raise InputError("`solver.energies` = \"measured\" is for a model atom (`atom.species`); a hydrogen-like "
                             "atom's measured levels are `atom.structure` = \"fine\" or \"hyperfine\"")
        if cfg is not None and is_structured(cfg.atom.structure, cfg.solver.two_photon):
            model_states = _structured_states(atom, cfg.solver.states, cfg.atom.structure)
            n_top = max(st.n for st in model_states)
            limit = 0.01 * atom.Z**3 * atom.reduced_mass**2 / (16 * n_top**4)
            if abs(cfg.fields.electric) > limit:
                raise InputError(f"`fields.electric` = {cfg.fields.electric:.3g} au is above {limit:.3g} au "
                                 f"(1 % of the ionisation field of n = {n_top}), where mixing with other shells "
                                 f"and field ionisation, left out of the model, matter")
        if pulse is None:
            return
        measured = cfg is not None and cfg.solver.energies == "measured"
        levels = _LevelSource(atom, measured)
        ip = min(-levels.energy(s) for s, _ in initial)
        charge = atom.asymptotic_charge
        f_bs = ip**2 / (4 * charge)
        total = sum(c.peak_field * abs(c.jones).max() for c in pulse.components)
        if total > f_bs:
            i = max(range(len(pulse.components)), key=lambda j: pulse.components[j].peak_field)
            key = "intensity" if cfg is not None and cfg.pulse[i].intensity is not None else "peak_field"
            raise InputError(f"`pulse.{i}.{key}`: peak field {total:.3g} au is above barrier suppression "
                             f"({f_bs:.3g} au) of the initial state; a few-level model is meaningless "
                             f"there (use route \"grid\")")

    structured = False

    def _window(self) -> None:
        """t_start (first foot of the pulses, or 0), the end of the pulses and t_end."""
        s, pulse = self.settings, self.pulse
        components = tuple(pulse.components) if pulse is not None else ()
        t0 = pulse.t_start if components else 0.0
        self.t_pulse = pulse.t_end if components else t0
        if s.t_end is not None:
            if s.t_end < self.t_pulse:
                raise InputError(f"`solver.t_end` = {s.t_end:.6g} au is before the end of the pulse "
                                 f"({self.t_pulse:.6g} au)")
            t_final = s.t_end
        else:
            t_final = self.t_pulse + (s.after if s.after is not None else 0.0)
        if not t_final > t0:
            raise InputError("nothing to propagate: give a `[[pulse]]` or `solver.after` > 0")
        self.t_start, self.t_end = t0, t_final

    def _prepare(self) -> None:
        s = self.settings
        pulse = self.pulse
        components = tuple(pulse.components) if pulse is not None else ()
        self.structured = is_structured(self.structure, s.two_photon)
        if self.structured:
            self._prepare_structured()
            return
        if self.atom.model is not None:
            _check_model_atom(self.atom, s.states, s.two_photon)
        self.model = build_model(self.atom, s.sublevels(), decay=s.decay, ionization_sink=s.photoionization,
                                 measured=s.energies == "measured")
        self._window()
        t0 = self.t_start
        self.norm_tolerance = max(1e-6, 1e4 * s.rtol)      # the ODE solver keeps the trace to about this
        self.rho0, self.ket0 = _initial_density(self.model, self.initial, t0, interaction=s.rwa)
        self.stats.update({"n_sublevels": len(self.model.states), "solver": "closed form"})
        self.notes = []
        self.free = _field_free_propagator(self.model)
        self.solver = None
        if components:
            terms, coefficients = coupling(self.atom, pulse, self.model, s)
            self.warnings += terms.warnings
            self.notes += terms.notes
            self.stats["coefficient_samples"] = int(len(coefficients[0]))
            max_step = s.max_step if s.max_step is not None else min(c.length for c in components) / 10
            H0, c_ops = _bohr_operators(self.model, s, interaction=s.rwa)
            self.solver, self.stats["solver"] = _solver(self.model.size, H0, c_ops, terms, s, self.ket0,
                                                        coefficients=coefficients, max_step=max_step)

    resource_fix = "use `solver.rwa` = true, fewer `solver.states` or a shorter pulse"

    def estimate_resources(self):
        """The ODE solver follows every oscillation of its coefficients: the carrier (full
        coupling) or the detunings and the chirp (RWA) over the pulse window, about 0.3 ms per
        oscillation for a few sublevels, growing as the square of the model's size; then the
        closed-form field-free part (negligible)."""
        if self.pulse is None:
            return None, None
        window = self.pulse.t_end - self.pulse.t_start
        fastest = max(c.omega + abs(c.chirp) * c.length / 2 for c in self.pulse.components)
        if self.settings.rwa:          # the detuning from the nearest transition sets the pace
            model = build_model(self.atom, self.settings.sublevels(), decay=False)
            groups = _transitions(model)
            fastest = 2 * math.pi / min(c.length for c in self.pulse.components)
            for c in self.pulse.components:
                near = nearest_transition(model, c, groups)
                fastest = max(fastest, abs(c.chirp) * c.length / 2 + (abs(near[1]) if near else 0.0))
        oscillations = max(1.0, window * fastest / (2 * math.pi))
        size = len(self.settings.sublevels()) + 2
        samples = max(257.0, 16 * oscillations)
        s = self.settings
        after = s.after or 0.0 if s.t_end is None else max(0.0, s.t_end - self.pulse.t_end)
        history = self.samples_over(window + after)           # one solver step and one read-out each
        seconds = 3e-4 * oscillations * (size / 6) ** 2 + 5e-5 * history * (size / 6) ** 2
        return 16.0 * samples * 6 + 8.0 * size**4 + 8.0 * size * history, seconds

    @classmethod
    def knobs(cls, settings) -> list:
        """The ODE tolerances (errors ∝ tolerance); the kept states are a model choice, not a knob."""
        return [Knob("rtol", settings.rtol, settings.rtol / 2, 2 * settings.rtol, 1, 1.2),
                Knob("atol", settings.atol, settings.atol / 2, 2 * settings.atol, 1, 1.2)]

    @classmethod
    def companion(cls, settings, result):
        """The ODE tolerances and the sampling tolerance of the coefficients loosened 16-fold
        (errors ∝ tolerance): K = 16. The kept states are not varied (a model choice)."""
        knobs = {"rtol": 16 * settings.rtol, "atol": 16 * settings.atol,
                 "sampling_tol": min(16 * settings.sampling_tol, 5e-3)}
        return settings.model_copy(update=knobs), 16.0, knobs

    def preflight(self) -> list:
        """The rotating-wave approximation against its conditions (detuning and Rabi frequency
        ≪ ω_ul; Allen & Eberly 1975) and, for every carrier, the nearest transition of the model:
        a carrier farther than 10 spectral widths from every line is reported with the line, its
        wavelength, the detuning and the pulse area."""
        from driven_atom.routes.quality import assess
        from driven_atom.units import AU_TIME_S, photon_energy_to_wavelength_nm

        checks = []
        if self.pulse is None:
            return checks
        if self.settings.two_photon:
            self._two_photon_preflight()
            return checks
        groups = _transitions(self.model)
        for k, comp in enumerate(self.pulse.components):
            near = nearest_transition(self.model, comp, groups)
            if near is None:
                continue
            w, detuning, rabi, name = near
            if self.settings.rwa:
                checks.append(assess(f"rwa_detuning_pulse{k}", abs(detuning) / w, soft=RWA_SOFT, hard=RWA_HARD,
                                     key="solver.rwa", why=f"pulse {k}: detuning over the transition frequency "
                                                           f"of {name} (the RWA needs it small)",
                                     fix="set `solver.rwa` = false"))
                checks.append(assess(f"rwa_rabi_pulse{k}", rabi / w, soft=RWA_SOFT, hard=RWA_HARD, key="solver.rwa",
                                     why=f"pulse {k}: Rabi frequency over the transition frequency of {name}",
                                     fix="set `solver.rwa` = false"))
            width = 2 * math.pi / (comp.fwhm or comp.length)
            if abs(detuning) > RESONANCE_WIDTHS * width:
                t, wq = comp._quadrature(abs(comp.chirp) * comp.length / 2)
                area = rabi / comp.peak_field * float(wq @ np.linalg.norm(comp.complex_envelope(t), axis=1)) \
                    if comp.peak_field > 0 else 0.0
                self.warnings.append(
                    f"pulse {k}: nothing is resonant within {RESONANCE_WIDTHS:g} spectral widths; nearest line "
                    f"{name} at {photon_energy_to_wavelength_nm(w):.7g} nm, detuning {detuning:+.4g} au "
                    f"({detuning / (2 * math.pi * AU_TIME_S) / 1e9:+.4g} GHz), pulse area {area:.3g} rad")
        return checks

    def _two_photon_preflight(self) -> None:
        """For every carrier, the two-photon line of the model (states of equal parity in different
        shells) nearest 2ω; one farther than 10 spectral widths is reported with its detuning."""
        from driven_atom.units import AU_TIME_S

        model = self.model
        pairs = [(model.energies[u] - model.energies[l], f"{model.states[l].label} -> {model.states[u].label}")
                 for u, su in enumerate(model.states) for l, sl in enumerate(model.states)
                 if su.n > sl.n and (su.l - sl.l) % 2 == 0 and abs(su.l - sl.l) <= 2]
        for k, comp in enumerate(self.pulse.components):
            if not pairs or comp.omega == 0:
                continue
            w, name = min(pairs, key=lambda p: abs(p[0] - 2 * comp.omega))
            detuning = w - 2 * comp.omega
            if abs(detuning) > RESONANCE_WIDTHS * 2 * math.pi / (comp.fwhm or comp.length):
                self.warnings.append(f"pulse {k}: no two-photon line within {RESONANCE_WIDTHS:g} spectral widths; "
                                     f"nearest {name}, 2ω off by {detuning:+.4g} au "
                                     f"({detuning / (2 * math.pi * AU_TIME_S) / 1e9:+.4g} GHz)")

    def _initial(self):
        import qutip as qt

        if self.structured:
            return self._structured_initial()
        n = self.model.size
        if self.solver is None:
            return {"p": np.real(np.diag(self.rho0)).copy(), "qobj": None}
        if self.stats["solver"] == "sesolve":
            start = qt.Qobj(self.ket0.reshape(-1, 1), dims=[[n], [1]])
        else:
            from scipy.sparse import csr_matrix

            start = qt.Qobj(csr_matrix(self.rho0), dims=[[n], [n]])
        self.solver.start(start, self.t_start)
        return {"p": None, "qobj": start}

    def _step_pulse(self, state, t_next: float):
        import warnings

        try:
            with warnings.catch_warnings():      # the integrator's own complaints: our message says it
                warnings.simplefilter("ignore", UserWarning)
                qobj = self.solver.step(t_next)
        except Exception as exc:  # noqa: BLE001 - qutip's integrator errors are not a shared type
            raise InputError(f"the ODE solver stopped at t = {t_next:.6g} au: {str(exc).splitlines()[0][:200]} "
                             f"(raise `solver.nsteps` or loosen `solver.atol`/`solver.rtol`)") from None
        return {"p": None, "qobj": qobj}

    def _advance(self, state, t: float, t_next: float):
        if self.structured:
            return self._structured_advance(state, t, t_next)
        if state["p"] is None:                           # still in the pulse window (qutip)
            if t_next <= self.t_pulse:
                return self._step_pulse(state, t_next)
            state = self._step_pulse(state, self.t_pulse)
            state = {"p": self._populations(state), "qobj": None}
            t = self.t_pulse
        return {"p": self.free(t_next - t) @ state["p"], "qobj": None}

    def _populations(self, state) -> np.ndarray:
        if state["p"] is not None:
            return state["p"]
        q = state["qobj"].full()
        return np.abs(q[:, 0]) ** 2 if q.shape[1] == 1 else np.real(np.diag(q)).copy()

    def _sample(self, state):
        if self.structured:
            p = self._structured_populations(state)
            labels = self.model.labels
            series = {"norm": float(p.sum())}
            if IONIZED in labels:
                series["ionization"] = float(p[labels.index(IONIZED)])
            return {label: float(p[i]) for i, label in enumerate(labels) if label != IONIZED}, series
        p = self._populations(state)
        labels = self.model.labels
        pops = {s.label: float(p[i]) for i, s in enumerate(self.model.states)}
        if ELSEWHERE in labels:
            pops[ELSEWHERE] = float(p[labels.index(ELSEWHERE)])
        series = {"norm": float(p.sum())}
        if IONIZED in labels:
            series["ionization"] = float(p[labels.index(IONIZED)])
        return pops, series

    def _finish(self, state, history) -> Outcome:
        if self.structured:
            return self._structured_finish(state)
        p = self._populations(state)
        labels = self.model.labels
        populations = {s: float(p[i]) for i, s in enumerate(self.model.states)}
        if ELSEWHERE in labels:
            populations[ELSEWHERE] = float(p[labels.index(ELSEWHERE)])
        ionization = float(p[labels.index(IONIZED)]) if IONIZED in labels else 0.0
        return Outcome(populations=populations, ionization=ionization, norm=float(p.sum()),
                       stats=dict(self.stats),
                       metadata={"states": [s.label for s in self.model.states], "sinks": list(self.model.sinks),
                                 "rwa": bool(self.settings.rwa), "transitions": self.notes,
                                 "t_pulse_end_au": float(self.t_pulse)})

    # -- real level structure (fine, hyperfine, two photons) ---------------------------------------
    def _prepare_structured(self) -> None:
        s, pulse = self.settings, self.pulse
        components = tuple(pulse.components) if pulse is not None else ()
        fields = self.fields
        model = build_structured_model(self.atom, s.states, self.structure,
                                       magnetic=fields.magnetic if fields is not None else 0.0,
                                       electric=fields.electric if fields is not None else 0.0,
                                       decay=s.decay, ionization_sink=s.photoionization)
        self.model = model
        self._window()
        N, size = len(model.states), model.size
        shell_frame = model.reference_energies()
        reference = shell_frame if s.rwa else np.zeros(N)
        c_ops = [np.asarray(c, dtype=complex) for c in model.collapse]
        if s.dephasing > 0 and len(set(model.shells.tolist())) > 1:
            for n in sorted(set(model.shells.tolist())):
                P = np.zeros((size, size), dtype=complex)
                idx = np.nonzero(model.shells == n)[0]
                P[idx, idx] = math.sqrt(s.dephasing)
                c_ops.append(P)
        rho0, ket0 = initial_density(model, self.initial)
        phase = np.ones(size, dtype=complex)
        phase[:N] = np.exp(1j * reference * self.t_start)          # into the rotating frame at t_start
        self.rho0 = phase[:, None] * rho0 * phase.conj()[None, :]
        self.ket0 = None if ket0 is None else phase * ket0
        free_H = np.zeros((size, size), dtype=complex)
        free_H[:N, :N] = model.static - np.diag(shell_frame)      # after the pulses: always the shell frame
        self.free = _liouvillian_propagator(free_H, c_ops)
        self.norm_tolerance = max(1e-6, 1e4 * s.rtol)      # the ODE solver keeps the trace to about this
        self.stats.update({"n_sublevels": N, "solver": "closed form"})
        self.notes, self.details, self.solver = [], [], None
        if components:
            H0 = np.zeros((size, size), dtype=complex)
            H0[:N, :N] = model.static - np.diag(reference)
            terms = structured_terms(self.atom, pulse, model, s, reference)
            if s.photoionization:
                _add_ionization(terms, model, self.atom, pulse)
            coefficients = _sampled(terms, pulse, s)
            self.warnings += terms.warnings
            self.notes += terms.notes
            self.details = terms.details
            self.stats["coefficient_samples"] = int(len(coefficients[0]))
            max_step = s.max_step if s.max_step is not None else min(c.length for c in components) / 10
            self.solver, self.stats["solver"] = _solver(size, H0, c_ops, terms, s, self.ket0,
                                                        coefficients=coefficients, max_step=max_step)

    def _density(self, qobj) -> np.ndarray:
        q = qobj.full()
        return np.outer(q[:, 0], q[:, 0].conj()) if q.shape[1] == 1 else q

    def _structured_initial(self):
        import qutip as qt
        from scipy.sparse import csr_matrix

        n = self.model.size
        if self.solver is None:
            return {"rho": self.rho0.copy(), "qobj": None}
        if self.stats["solver"] == "sesolve":
            start = qt.Qobj(self.ket0.reshape(-1, 1), dims=[[n], [1]])
        else:
            start = qt.Qobj(csr_matrix(self.rho0), dims=[[n], [n]])
        self.solver.start(start, self.t_start)
        return {"rho": None, "qobj": start}

    def _structured_advance(self, state, t: float, t_next: float):
        if state["rho"] is None:
            if t_next <= self.t_pulse:
                return {"rho": None, "qobj": self._step_pulse(state, t_next)["qobj"]}
            rho = self._density(self._step_pulse(state, self.t_pulse)["qobj"])
            if not self.settings.rwa:
                N = len(self.model.states)
                phase = np.ones(self.model.size, dtype=complex)
                phase[:N] = np.exp(1j * self.model.reference_energies() * self.t_pulse)
                rho = phase[:, None] * rho * phase.conj()[None, :]
            t = self.t_pulse
        else:
            rho = state["rho"]
        return {"rho": self.free(t_next - t, rho), "qobj": None}

    def _structured_populations(self, state) -> np.ndarray:
        rho = state["rho"] if state["rho"] is not None else self._density(state["qobj"])
        return dressed_populations(self.model, rho)

    def _structured_finish(self, state) -> Outcome:
        p = self._structured_populations(state)
        labels = self.model.labels
        populations = {label: float(p[i]) for i, label in enumerate(labels) if label != IONIZED}
        ionization = float(p[labels.index(IONIZED)]) if IONIZED in labels else 0.0
        from driven_atom.atom.structure import HARTREE_HZ

        model = self.model
        return Outcome(populations=populations, ionization=ionization, norm=float(p.sum()), stats=dict(self.stats),
                       metadata={"states": [st.label for st in model.states], "sinks": list(model.sinks),
                                 "rwa": bool(self.settings.rwa), "transitions": self.notes,
                                 "t_pulse_end_au": float(self.t_pulse), "structure": model.structure,
                                 "two_photon": self.details,
                                 "dressed_energies_Hz": [float(e * HARTREE_HZ) for e in model.dressed_energies]})

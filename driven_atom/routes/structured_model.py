"""The field-free part of a levels model with real level structure (fine or hyperfine, or Bohr
levels driven by two photons): sublevels, their Hamiltonian in the apparatus' static fields,
dipoles and spontaneous decay.

* Sublevels: |n l j m_j> ("fine") or |n l j F m_F> ("hyperfine") from the labels of
  ``[solver] states`` (:func:`driven_atom.atom.components.sublevels`), or Bohr |n l m>.
* Static Hamiltonian H_A = diag(E) + H_B + H_F: the structure energies of
  :mod:`driven_atom.atom.structure`, the Zeeman and Stark operators of
  :mod:`driven_atom.atom.manifold`, kept within each shell n (couplings between shells are
  far off resonance: their quadratic shifts, ~F²/ΔE_n, are left out). Each shell's block is
  diagonalised ("dressed" states); every dressed state carries the label of the field-free sublevel
  it continues (a one-to-one assignment maximising the summed overlaps |<s|d>|², scipy's
  ``linear_sum_assignment``), so populations keep their names in any field.
* Decay: one Lindblad operator per pair of components and polarisation (coherences kept within
  a component), and the rate to components outside the model into the sink "elsewhere"
  (:func:`driven_atom.atom.manifold.decay_operators`). In the field-free basis these operators are
  exact also when the fields mix states (the 2s quench comes out with its Γ²/4 term).

>>> from driven_atom.atom import Atom
>>> m = build_structured_model(Atom.from_name("H"), ["1s", "2p3/2"], "fine")
>>> m.labels[:3], m.sinks
(['1s1/2 m=-1/2', '1s1/2 m=1/2', '2p3/2 m=-3/2'], ())
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from driven_atom.atom.components import check_label, sublevels
from driven_atom.atom.states import State
from driven_atom.errors import InputError

ELSEWHERE = "elsewhere"
IONIZED = "ionized"


@dataclass(frozen=True)
class StructuredModel:
    """Atomic units. ``static`` is H_A in the field-free basis of ``states``; ``dressed[:, i]`` is
    the dressed state labelled ``states[i]`` (columns of the per-shell eigenvectors); ``collapse``
    are Lindblad operators on the sublevels and sinks (size ``size``)."""

    states: tuple
    energies: np.ndarray
    static: np.ndarray
    dressed: np.ndarray
    dressed_energies: np.ndarray
    dipoles: np.ndarray
    collapse: tuple
    sinks: tuple
    structure: str
    I2: int

    @property
    def labels(self) -> list[str]:
        return [s.label for s in self.states] + list(self.sinks)

    @property
    def size(self) -> int:
        return len(self.states) + len(self.sinks)

    @property
    def shells(self) -> np.ndarray:
        return np.array([s.n for s in self.states])

    def reference_energies(self) -> np.ndarray:
        """Per sublevel, the mean field-free energy of the model's sublevels in its shell n (the
        rotating frame of the RWA removes these)."""
        out = np.zeros(len(self.states))
        for n in set(self.shells.tolist()):
            idx = self.shells == n
            out[idx] = float(np.mean(self.energies[idx]))
        return out


def expand_states(labels, structure: str, I2: int) -> list:
    """The m-resolved sublevels of ``labels`` in the model's basis, in order, each once
    (InputError naming ``solver.states`` on a repeat)."""
    out, seen = [], {}
    for label in labels:
        item = check_label(label, structure, name="solver.states")
        subs = (item.sublevels() if isinstance(item, State) else [item]) if structure == "bohr" else \
            sublevels(item, structure, I2)
        for s in subs:
            if s in seen:
                raise InputError(f"`solver.states`: {label!r} repeats sublevel {s.label} (from {seen[s]!r})")
            seen[s] = label
            out.append(s)
    return out


def _dress(states, static):
    """Per shell: eigenvectors of the static block, assigned one-to-one to the field-free sublevels."""
    from scipy.optimize import linear_sum_assignment

    N = len(states)
    vectors = np.zeros((N, N))
    values = np.zeros(N)
    shells = np.array([s.n for s in states])
    for n in sorted(set(shells.tolist())):
        idx = np.nonzero(shells == n)[0]
        block = static[np.ix_(idx, idx)]
        w, v = np.linalg.eigh(block)
        rows, cols = linear_sum_assignment(-(np.abs(v) ** 2))     # field-free sublevel rows[i] <- eigenvector cols[i]
        for r, c in zip(rows, cols):
            vec = v[:, c] * (1.0 if v[r, c] >= 0 else -1.0)
            vectors[idx, idx[r]] = vec
            values[idx[r]] = w[c]
    return vectors, values


def build_structured_model(atom, labels, structure: str, *, magnetic: float = 0.0, electric: float = 0.0,
                           decay: bool = True, ionization_sink: bool = False) -> StructuredModel:
    """The model of ``labels`` under ``structure`` in static fields ``magnetic`` (flux density, au)
    and ``electric`` (au), both along z."""
    from driven_atom.atom.manifold import decay_operators, dipole_matrices, stark_matrix, zeeman_matrix
    from driven_atom.atom.structure import level_energy, nuclear_spin2

    I2 = nuclear_spin2(atom) if structure == "hyperfine" else 0
    states = tuple(expand_states(labels, structure, I2))
    N = len(states)
    energies = np.array([level_energy(atom, s, structure) for s in states])
    dipoles = dipole_matrices(atom, states, I2)
    static = np.diag(energies)
    if magnetic or electric:
        if structure == "bohr":
            raise InputError("`fields` need `atom.structure` = \"fine\" or \"hyperfine\"")
        extra = zeeman_matrix(atom, states, I2, magnetic) + electric * dipoles[1]
        same_shell = np.equal.outer([s.n for s in states], [s.n for s in states])
        static = static + np.where(same_shell, extra, 0.0)
        static = 0.5 * (static + static.T)
    dressed, dressed_energies = _dress(states, static)
    collapse, outside = [], np.zeros(N)
    if decay:
        operators, outside = decay_operators(atom, states, I2, energies)
        collapse = list(operators)
    sinks = ((ELSEWHERE,) if np.any(outside > 0) else ()) + ((IONIZED,) if ionization_sink else ())
    size = N + len(sinks)
    padded = []
    for op in collapse:
        full = np.zeros((size, size))
        full[:N, :N] = op
        padded.append(full)
    if ELSEWHERE in sinks:
        for u in np.nonzero(outside > 0)[0]:
            full = np.zeros((size, size))
            full[N, u] = np.sqrt(outside[u])
            padded.append(full)
    return StructuredModel(states, energies, static, dressed, dressed_energies, dipoles, tuple(padded), sinks,
                           structure, I2)


def initial_density(model: StructuredModel, initial) -> tuple[np.ndarray, np.ndarray | None]:
    """Density matrix in the field-free basis (and the ket when pure) from [(label item, amplitude)]:
    each label names dressed states (by the labels they carry); a label covering several sublevels
    enters as their equal incoherent mixture."""
    index = {s: i for i, s in enumerate(model.states)}
    N, size = len(model.states), model.size
    rho = np.zeros((size, size), dtype=complex)
    ket = np.zeros(size, dtype=complex)
    pure = True
    I2 = model.I2
    for item, amp in initial:
        if model.structure == "bohr":
            subs = [State(item.n, item.l, 0)] if item.m is None and item.l == 0 else item.sublevels()
        else:
            subs = sublevels(item, model.structure, I2)
        missing = [s.label for s in subs if s not in index]
        if missing:
            raise InputError(f"`atom.initial` {item.label} is not in the model: add "
                             f"{', '.join(missing)} to `solver.states`")
        if len(subs) == 1:
            ket[:N] += amp * model.dressed[:, index[subs[0]]]
        else:
            pure = False
            for s in subs:
                v = model.dressed[:, index[s]]
                rho[:N, :N] += abs(amp) ** 2 / len(subs) * np.outer(v, v)
    rho += np.outer(ket, ket.conj())
    return rho, (ket if pure else None)


def dressed_populations(model: StructuredModel, rho: np.ndarray) -> np.ndarray:
    """Populations of the dressed states and the sinks from a density matrix (field-free basis; a
    rotating frame per shell does not change them)."""
    N = len(model.states)
    V = model.dressed
    inner = np.real(np.einsum("ai,ab,bi->i", V, rho[:N, :N], V))
    return np.concatenate([inner, np.real(np.diag(rho))[N:]])


def is_structured(structure: str, two_photon: bool) -> bool:
    """Whether a levels run needs this model (else the Bohr model of :mod:`driven_atom.routes.levels`)."""
    return structure != "bohr" or two_photon


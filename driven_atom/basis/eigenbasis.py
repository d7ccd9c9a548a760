"""Bound states plus box-discretised continuum of a one-electron atom, and its dipole matrix.

For each partial wave l = |m| … l_max the Numerov-corrected radial Hamiltonian of
:mod:`driven_atom.basis.radial_grid` is diagonalised on a box r ≤ r_max; we keep the bound states
(E < 0, n = l + 1 + index ≤ n_max) and the box continuum states up to e_max. The states
|n l m⟩ = u(r)/r · Y_lm share one m (linear z polarisation conserves m). The length-form dipole
matrix couples l ↔ l ± 1,

    ⟨a|z|b⟩ = ⟨l_a m|C¹₀|l_b m⟩ · Σᵢ u_a(rᵢ) rᵢ u_b(rᵢ)

(grid-normalised vectors; the angular factor from :func:`driven_atom.atom.dipoles.angular_factor`).
The velocity form is the matrix of p_z = iμ[H₀, z] in the same basis,
⟨a|p_z|b⟩ = iμ (E_a − E_b) ⟨a|z|b⟩ (exact for the full grid; for a truncated basis it is the usual
dipole-velocity form, and its difference from the length form is a convergence check).

Continuum states carry the box density of states ρ(E_k) ≈ 2/(E_{k+1} − E_{k−1}) (docs/physics.md), so
Σ_k |⟨k|z|0⟩|² ρ … turns sums over box states into energy integrals.

A basis is identified by a content hash of its inputs (:func:`basis_hash`) and can be saved to
and loaded from HDF5 (:func:`cached_basis`), so a scan builds it once.

>>> from driven_atom.atom import Atom
>>> b = build_basis(Atom(1), r_max=60.0, dr=0.1, l_max=1, e_max=1.0)
>>> round(static_polarizability(b, "1s"), 1)
4.5
"""
from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from driven_atom.atom import State, parse_state
from driven_atom.errors import InputError

_FORMAT_VERSION = 1     # bump when the stored layout or the discretisation changes


@dataclass(frozen=True)
class Eigenbasis:
    """States (bound and box continuum) of one m, their energies and dipole couplings (a.u.).

    ``energies``, ``l``, ``n`` (0 for continuum states), ``dos`` (box density of states; 0 for
    bound states) have one entry per state, ordered by l then energy. ``dipole`` is the sparse
    real symmetric matrix of z (length form). ``key`` is the content hash of the inputs.
    """

    energies: np.ndarray
    l: np.ndarray
    n: np.ndarray
    dos: np.ndarray
    dipole: object          # scipy.sparse.csr_matrix
    m: int
    mu: float
    inputs: dict
    key: str

    @property
    def size(self) -> int:
        return self.energies.size

    @property
    def bound(self) -> np.ndarray:
        """Boolean mask of bound states (E < 0)."""
        return self.n > 0

    def index(self, state) -> int:
        """Position of a bound state ("1s", "2p0", State(3, 2)) in the basis; m must match."""
        s = parse_state(state)
        if s.m is not None and s.m != self.m:
            raise InputError(f"state {s.label!r} has m = {s.m}, but the basis holds m = {self.m}")
        hit = np.flatnonzero((self.n == s.n) & (self.l == s.l))
        if hit.size != 1:
            raise InputError(f"state {s.label!r} is not in the basis (l_max = {self.inputs['l_max']}, "
                             f"n_max = {self.inputs['n_max']}, r_max = {self.inputs['r_max']} bohr)")
        return int(hit[0])

    def label(self, i: int) -> str:
        """m-resolved label of bound state ``i`` ("2p0")."""
        return State(int(self.n[i]), int(self.l[i]), self.m).label

    def velocity_dipole(self):
        """Sparse matrix of p_z = iμ[H₀, z]: iμ(E_a − E_b) z_ab (Hermitian)."""
        d = self.dipole.tocoo()
        values = 1j * self.mu * (self.energies[d.row] - self.energies[d.col]) * d.data
        from scipy.sparse import csr_matrix

        return csr_matrix((values, (d.row, d.col)), shape=d.shape)


def basis_inputs(atom, *, r_max=200.0, dr=0.08, l_max=3, n_max=None, e_max=3.0, m=0, dr_min=None,
                 r_stretch=10.0) -> dict:
    """Validate the inputs that fix a basis; a JSON-able dict in atomic units (grid rounded).
    With ``dr_min`` the grid is stretched from dr_min at the nucleus to ``dr`` beyond about
    ``r_stretch`` (:func:`driven_atom.basis.radial_grid.stretched_grid`), else uniform with step dr.

    >>> from driven_atom.atom import Atom
    >>> basis_inputs(Atom(1), r_max=10.0, dr=0.5)["l_max"]
    3
    """
    grid = _grid(r_max, dr, dr_min, r_stretch)
    if isinstance(l_max, bool) or int(l_max) != l_max or l_max < 0:
        raise InputError(f"`l_max` must be an integer >= 0, got {l_max!r}")
    if abs(m) > l_max:
        raise InputError(f"`l_max` must be >= |m| = {abs(m)} of the initial state, got {l_max}")
    if n_max is not None and (int(n_max) != n_max or n_max < 1):
        raise InputError(f"`n_max` must be an integer >= 1, got {n_max!r}")
    if not e_max > 0:
        raise InputError(f"`e_max` must be > 0 hartree, got {e_max!r}")
    stretched = dr_min is not None
    model = {} if atom.model is None else {"species": atom.model.key}     # hydrogen-like keys unchanged
    return {**model, "Z": atom.Z, "nuclear_mass": repr(float(atom.nuclear_mass)), "r_max": grid.r_max,
            "dr": grid.dr_max if stretched else grid.dr, "dr_min": grid.dr_min if stretched else None,
            "r_stretch": float(r_stretch) if stretched else None, "l_max": int(l_max), "n_max": None if n_max is None else int(n_max),
            "e_max": float(e_max), "m": int(m), "version": _FORMAT_VERSION}


def _grid(r_max, dr, dr_min, r_stretch):
    from driven_atom.basis.radial_grid import stretched_grid, uniform_grid

    if dr_min is None:
        return uniform_grid(r_max, dr)
    return stretched_grid(r_max, dr_min, dr, r_stretch)


def basis_hash(inputs: dict) -> str:
    """Content hash of :func:`basis_inputs` (16 hex digits)."""
    text = json.dumps(inputs, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def build_basis(atom, *, r_max=200.0, dr=0.08, l_max=3, n_max=None, e_max=3.0, m=0, dr_min=None,
                r_stretch=10.0) -> Eigenbasis:
    """Diagonalise H_l for l = |m| … l_max on the grid and assemble states and dipoles.

    Keeps bound states with n ≤ n_max (all the box holds if ``None``) and continuum states with
    E ≤ e_max (hartree). High-n bound states that reach the wall are box-distorted Rydberg
    states; their labels are nominal.

    >>> from driven_atom.atom import Atom
    >>> b = build_basis(Atom(1), r_max=40.0, dr=0.1, l_max=1, e_max=0.5)
    >>> b.label(b.index("2p")), round(float(b.energies[b.index("2p")]), 4)
    ('2p0', -0.125)
    """
    from scipy.sparse import bmat, csr_matrix

    from driven_atom.atom.dipoles import angular_factor
    from driven_atom.basis.radial_grid import density_of_states, eigenstates

    inputs = basis_inputs(atom, r_max=r_max, dr=dr, l_max=l_max, n_max=n_max, e_max=e_max, m=m,
                          dr_min=dr_min, r_stretch=r_stretch)
    grid = _grid(r_max, dr, dr_min, r_stretch)
    n_cap = np.inf if n_max is None else n_max
    energies, ls, ns, dos, vectors = [], [], [], [], []
    for l in range(abs(m), inputs["l_max"] + 1):
        E, U = eigenstates(grid, l, atom, e_max=e_max)
        n = np.where(E < 0, l + 1 + np.arange(E.size), 0)
        keep = (n == 0) | (n <= n_cap)
        rho = np.zeros(E.size)
        cont = E >= 0
        if cont.sum() >= 2:
            rho[cont] = density_of_states(E[cont])
        energies.append(E[keep])
        ls.append(np.full(int(keep.sum()), l))
        ns.append(n[keep])
        dos.append(rho[keep])
        vectors.append(U[:, keep])
    blocks = [[None] * len(vectors) for _ in vectors]
    for j in range(len(vectors)):
        blocks[j][j] = csr_matrix((vectors[j].shape[1],) * 2)
    r = grid.r
    for j in range(len(vectors) - 1):
        l = abs(m) + j
        block = angular_factor(l, m, l + 1, m, 0) * (vectors[j].T @ (r[:, None] * vectors[j + 1]))
        blocks[j][j + 1] = csr_matrix(block)
        blocks[j + 1][j] = csr_matrix(block.T)
    return Eigenbasis(energies=np.concatenate(energies), l=np.concatenate(ls), n=np.concatenate(ns),
                      dos=np.concatenate(dos), dipole=bmat(blocks, format="csr"), m=int(m),
                      mu=atom.reduced_mass, inputs=inputs, key=basis_hash(inputs))


def _basis_digest(basis: Eigenbasis) -> str:
    from driven_atom.result import digest

    d = basis.dipole
    return digest([basis.energies, basis.l, basis.n, basis.dos, d.data, d.indices, d.indptr,
                   int(basis.m), float(basis.mu), basis.inputs, basis.key])


def save_basis(basis: Eigenbasis, path) -> Path:
    """Write ``basis`` to HDF5 atomically (:func:`driven_atom.io.atomic_write`: a new temporary
    file, then a rename), so workers of a scan that build the same basis at once never see a
    half-written file."""
    import h5py

    from driven_atom.io import atomic_write

    path = Path(path)
    d = basis.dipole
    with atomic_write(path) as tmp:
        with h5py.File(tmp, "w") as f:
            for name in ("energies", "l", "n", "dos"):
                f.create_dataset(name, data=getattr(basis, name))
            g = f.create_group("dipole")
            g.create_dataset("data", data=d.data)
            g.create_dataset("indices", data=d.indices)
            g.create_dataset("indptr", data=d.indptr)
            f.attrs["m"] = basis.m
            f.attrs["mu"] = basis.mu
            f.attrs["inputs"] = json.dumps(basis.inputs)
            f.attrs["key"] = basis.key
            f.attrs["sha256"] = _basis_digest(basis)
            f.attrs["complete"] = True
    return path


def load_basis(path) -> Eigenbasis | None:
    """Read a basis written by :func:`save_basis`; ``None`` if missing, unreadable or damaged
    (content not matching its SHA-256)."""
    import h5py
    from scipy.sparse import csr_matrix

    try:
        with h5py.File(path, "r") as f:
            if not bool(f.attrs.get("complete", False)):
                return None
            size = f["energies"].shape[0]
            g = f["dipole"]
            dipole = csr_matrix((g["data"][()], g["indices"][()], g["indptr"][()]), shape=(size, size))
            basis = Eigenbasis(energies=f["energies"][()], l=f["l"][()], n=f["n"][()], dos=f["dos"][()],
                               dipole=dipole, m=int(f.attrs["m"]), mu=float(f.attrs["mu"]),
                               inputs=json.loads(f.attrs["inputs"]), key=str(f.attrs["key"]))
            stored = str(f.attrs.get("sha256", ""))
    except (OSError, KeyError, ValueError):
        return None
    return basis if stored == _basis_digest(basis) else None      # damaged: rebuilt by the caller


def cache_path(atom, cache_dir, **spec) -> Path:
    """Where the basis of these inputs is cached: ``cache_dir/basis-<key>.h5``."""
    return Path(cache_dir) / f"basis-{basis_hash(basis_inputs(atom, **spec))}.h5"


def cached_basis(atom, cache_dir=None, *, save: bool = True, **spec) -> tuple[Eigenbasis, bool]:
    """:func:`build_basis` with a disk cache ``cache_dir/basis-<key>.h5``; returns (basis, reused).
    ``save = False`` builds without writing (the caller saves once the basis has passed its checks)."""
    if cache_dir is None:
        return build_basis(atom, **spec), False
    path = cache_path(atom, cache_dir, **spec)
    basis = load_basis(path)
    if basis is not None:
        return basis, True
    basis = build_basis(atom, **spec)
    if save:
        save_basis(basis, path)
    return basis, False


def _couplings(basis: Eigenbasis, state) -> tuple[np.ndarray, np.ndarray]:
    """Excitation energies E_k − E_0 and |⟨k|z|0⟩|² from state 0 to every basis state."""
    i = basis.index(state)
    column = np.asarray(basis.dipole[:, i].todense()).ravel()
    return basis.energies - basis.energies[i], column**2


def dynamic_polarizability(basis: Eigenbasis, state, omega) -> np.ndarray:
    """α_zz(ω) = 2 Σ_k |⟨k|z|0⟩|² ΔE_k/(ΔE_k² − ω²) over the basis (sum-over-states; a.u.).

    Complete in the full grid basis, where it equals the Dalgarno–Lewis value of the discrete
    Hamiltonian (Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955)).
    """
    delta, z2 = _couplings(basis, state)
    omega = np.asarray(omega, dtype=float)[..., None]
    mask = z2 > 0
    return np.sum(2.0 * z2[mask] * delta[mask] / (delta[mask] ** 2 - omega**2), axis=-1)


def static_polarizability(basis: Eigenbasis, state) -> float:
    """α_zz(0) = 2 Σ_k |⟨k|z|0⟩|²/(E_k − E_0); 4.5 a.u. for H(1s) (Dalgarno & Lewis 1955)."""
    return float(dynamic_polarizability(basis, state, 0.0))


def box_cross_section(basis: Eigenbasis, state) -> tuple[np.ndarray, np.ndarray]:
    """One-photon ionisation cross section of ``state`` (z polarisation, its m) from box states:
    σ(ω_k) = (4π²ω_k/c) Σ_{l'} |⟨k|z|0⟩|² ρ(E_k), ω_k = E_k − E_0, summed over l' at equal ω by
    interpolating each partial wave onto the photon energies of the lowest one (bohr², hartree).
    For s states this is the m-averaged σ of docs/physics.md.
    """
    from driven_atom.units import ALPHA

    delta, z2 = _couplings(basis, state)
    cont = (basis.n == 0) & (z2 > 0)
    l_values = np.unique(basis.l[cont])
    first = cont & (basis.l == l_values[0])
    omega = delta[first]
    sigma = np.zeros_like(omega)
    for l in l_values:
        sel = cont & (basis.l == l)
        sigma += np.interp(omega, delta[sel], z2[sel] * basis.dos[sel], left=np.nan, right=np.nan)
    return omega, 4.0 * np.pi**2 * ALPHA * omega * sigma

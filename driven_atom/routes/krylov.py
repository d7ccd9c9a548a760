"""Lanczos exponentials exp(−ih(diag(d) + s·B)) v for the basis route, with numba kernels.

The Krylov space of H = diag(d) + s·B (B Hermitian, d real) is built by the Lanczos recurrence
with full reorthogonalisation; the process stops at the first dimension m ≥ 4 where
Saad's a-posteriori estimate β_m |(e^{−ihT_m})_{m1}|·‖v‖ is below the tolerance (Saad, SIAM J.
Numer. Anal. 29, 209 (1992); Hochbruck & Lubich, SIAM J. Numer. Anal. 34, 1911 (1997)), and

    exp(−ihH) v ≈ ‖v‖ V_m exp(−ihT_m) e₁,   T_m = tridiag(β, α, β) = V_mᴴ H V_m.

One Lanczos iteration is one numba call: the product B·v_j, the diagonal term, the three-term
recurrence, one classical Gram–Schmidt pass against all earlier vectors (full reorthogonalisation)
and the normalisation. The vectors are stored as separate real and imaginary arrays so that the
inner loops vectorise. B is applied in one of two forms (:class:`Coupling`):

* ``blocks``: a real symmetric B that couples only neighbouring groups of states (the length-form
  dipole z couples only l ↔ l ± 1). With the states sorted by group, B consists of dense blocks
  B[g, g+1] and their transposes; only the upper blocks are stored, row-major, and each row of a
  block is read once for both triangles, (B v)_g += B[g, g+1] v_{g+1} and (B v)_{g+1} += B[g, g+1]ᵀ v_g;
* ``csr``: any Hermitian B as a complex CSR matrix (the velocity-form p_z).

The kernels live in :mod:`driven_atom.routes._krylov_kernels`; their reductions run with
reassociation allowed (fastmath "reassoc", "contract"), so results are reproducible on one machine
and build but may differ in the last bits between CPUs.
"""
from __future__ import annotations

import numpy as np

from driven_atom.routes._krylov_kernels import apply_blocks, apply_csr, iterate_blocks, iterate_csr

M_MAX = 60                          # largest Krylov dimension before a step is retried shorter


class KrylovFailure(RuntimeError):
    """The Lanczos process did not converge within its largest dimension (the step is retried)."""


def _blocks_of(B, groups):
    """(values, offsets, starts) of the block form of B, or None when B lacks that structure:
    groups sorted, B real symmetric, couplings only between neighbouring groups."""
    groups = np.asarray(groups)
    B = B.tocoo()
    if B.shape != (groups.size,) * 2 or groups.size == 0 or np.any(np.diff(groups) < 0):
        return None
    if np.iscomplexobj(B.data):
        if np.any(B.data.imag != 0):
            return None
        B = B.real
    values, rank = np.unique(groups, return_inverse=True)
    if np.any(np.abs(rank[B.row] - rank[B.col]) != 1) or (B != B.T).nnz:
        return None
    starts = np.array(np.searchsorted(groups, values, side="left").tolist() + [groups.size], dtype=np.int64)
    B = B.tocsr()
    blocks = [B[starts[g]:starts[g + 1], starts[g + 1]:starts[g + 2]].toarray().ravel()
              for g in range(values.size - 1)]
    offsets = np.cumsum([0] + [b.size for b in blocks]).astype(np.int64)
    flat = np.concatenate(blocks) if blocks else np.zeros(0)
    return np.ascontiguousarray(flat, dtype=float), offsets, starts


class Coupling:
    """A Hermitian coupling matrix B with the products the Lanczos process needs.

    ``Coupling(B, groups)`` takes a scipy sparse B; with ``groups`` (the group of each state, e.g.
    its l) a real symmetric B that couples only neighbouring groups is stored in block form,
    otherwise (or without groups) as complex CSR. ``form`` says which.

    >>> import scipy.sparse as sp
    >>> B = sp.csr_matrix(np.array([[0, 1, 2, 0], [1, 0, 0, 3], [2, 0, 0, 4], [0, 3, 4, 0.0]]))
    >>> coupling = Coupling(B, groups=np.array([0, 1, 1, 2]))
    >>> v = np.array([1, 2j, 3, 4 + 1j])
    >>> coupling.form, bool(np.allclose(coupling @ v, B @ v))
    ('blocks', True)
    """

    def __init__(self, B, groups=None):
        self.size = B.shape[0]
        blocks = None if groups is None else _blocks_of(B, groups)
        if blocks is not None:
            self.form, self._data = "blocks", blocks
            self._apply, self._iterate = apply_blocks, iterate_blocks
        else:
            csr = B.astype(complex).tocsr()
            csr.sort_indices()
            self.form, self._apply, self._iterate = "csr", apply_csr, iterate_csr
            self._data = (np.ascontiguousarray(csr.data.real), np.ascontiguousarray(csr.data.imag),
                          csr.indices.astype(np.int64), csr.indptr.astype(np.int64))
        self._Vr = np.empty((M_MAX + 1, self.size))
        self._Vi = np.empty((M_MAX + 1, self.size))
        self.products = 0

    def __matmul__(self, v: np.ndarray) -> np.ndarray:
        """B v (used by the tests and the benchmark; the propagation calls :meth:`expm`)."""
        v = np.asarray(v, dtype=complex)
        xr, xi = np.ascontiguousarray(v.real), np.ascontiguousarray(v.imag)
        yr, yi = np.empty(self.size), np.empty(self.size)
        self._apply(*self._data, xr, xi, yr, yi)
        return yr + 1j * yi

    def expm(self, diag: np.ndarray, s: float, v: np.ndarray, h: float, tol: float) -> tuple[np.ndarray, int]:
        """exp(−ih(diag(diag) + s·B)) v and the Krylov dimension used; Saad's estimate (times ‖v‖)
        is checked against ``tol`` at every dimension from 4 on. Raises :class:`KrylovFailure`
        beyond M_MAX.

        >>> import scipy.sparse as sp
        >>> from scipy.linalg import expm
        >>> B = sp.csr_matrix(0.1 * (np.eye(3, k=1) + np.eye(3, k=-1)))
        >>> d = np.array([0.0, 1.0, 2.0])
        >>> v = np.array([1.0, 0.0, 0.0], complex)
        >>> w, m = Coupling(B).expm(d, 1.0, v, 0.7, 1e-12)
        >>> bool(np.allclose(w, expm(-0.7j * (np.diag(d) + B.toarray())) @ v, atol=1e-12))
        True
        """
        from scipy.linalg.lapack import dstev

        norm0 = float(np.linalg.norm(v))
        if norm0 == 0:
            return np.array(v, dtype=complex), 0
        Vr, Vi = self._Vr, self._Vi
        np.multiply(v.real, 1.0 / norm0, out=Vr[0])
        np.multiply(v.imag, 1.0 / norm0, out=Vi[0])
        alpha, beta = np.empty(M_MAX), np.empty(M_MAX)
        diag = np.ascontiguousarray(diag, dtype=float)
        for j in range(min(M_MAX, self.size)):
            bj = self._iterate(*self._data, Vr, Vi, j, diag, float(s), alpha, beta)
            self.products += 1
            m = j + 1
            exhausted = bj <= 1e-14 or m == self.size
            if m >= 4 or exhausted:
                if m == 1:           # v is an eigenvector (no coupling reached it): one phase
                    theta, q = alpha[:1].copy(), np.ones((1, 1))
                else:
                    theta, q, info = dstev(alpha[:m], beta[:m - 1], compute_v=1)
                    if info:
                        raise KrylovFailure(f"tridiagonal eigensolver failed (info {info})")
                y = q @ (np.exp(-1j * h * theta) * q[0])
                if exhausted or bj * abs(y[-1]) * norm0 < tol:
                    yr, yi = y.real, y.imag
                    return norm0 * ((yr @ Vr[:m] - yi @ Vi[:m]) + 1j * (yr @ Vi[:m] + yi @ Vr[:m])), m
        raise KrylovFailure(f"Lanczos did not converge in {M_MAX} steps")

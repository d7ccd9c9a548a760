"""numba kernels of the basis route's Lanczos exponentials (nothing else lives here).

Vectors are kept as separate real and imaginary arrays so that the inner loops vectorise. One
Lanczos iteration is one call (:func:`iterate_blocks` or :func:`iterate_csr`): the product B·v_j,
the diagonal term, the three-term recurrence, one classical Gram–Schmidt pass against all earlier
vectors (full reorthogonalisation) and the normalisation. B is applied in one of two forms:

* blocks: a real symmetric B coupling only neighbouring groups (the length-form dipole couples
  only l ↔ l ± 1), stored as its upper dense blocks B[g, g+1], row-major, each row read once for
  both triangles;
* CSR: any Hermitian B as a complex CSR matrix (the velocity-form p_z).

Reductions run with reassociation allowed (fastmath "reassoc", "contract"): reproducible on one
machine and build, possibly different in the last bits between CPUs. The Python layer
(:class:`driven_atom.routes.krylov.Coupling`) validates, allocates and chooses the form.
"""
from __future__ import annotations

import numpy as np
from numba import njit

FAST = {"reassoc", "contract"}      # vectorised reductions; no change of the arithmetic otherwise


@njit(cache=True, fastmath=FAST)
def apply_blocks(values, offsets, starts, xr, xi, yr, yi):
    """y = B x for the block form (see the module docstring); x, y as real and imaginary parts.

    Four rows of a block go through the columns together, so x_{g+1} and y_{g+1} are loaded once
    per four rows (this kernel runs at the speed of reading the blocks from cache)."""
    for i in range(yr.size):
        yr[i] = 0.0
        yi[i] = 0.0
    for g in range(offsets.size - 1):
        r0, c0, c1 = starts[g], starts[g + 1], starts[g + 2]
        nc = c1 - c0
        nr = c0 - r0
        xcr, xci = xr[c0:c1], xi[c0:c1]
        ycr, yci = yr[c0:c1], yi[c0:c1]
        base = offsets[g]
        i = 0
        while i + 3 < nr:
            ra = values[base + i * nc: base + (i + 1) * nc]
            rb = values[base + (i + 1) * nc: base + (i + 2) * nc]
            rc = values[base + (i + 2) * nc: base + (i + 3) * nc]
            rd = values[base + (i + 3) * nc: base + (i + 4) * nc]
            s0 = s1 = s2 = s3 = s4 = s5 = s6 = s7 = 0.0
            par, pai = xr[r0 + i], xi[r0 + i]
            pbr, pbi = xr[r0 + i + 1], xi[r0 + i + 1]
            pcr, pci = xr[r0 + i + 2], xi[r0 + i + 2]
            pdr, pdi = xr[r0 + i + 3], xi[r0 + i + 3]
            for j in range(nc):
                a, b, c, d = ra[j], rb[j], rc[j], rd[j]
                u, w = xcr[j], xci[j]
                s0 += a * u
                s1 += a * w
                s2 += b * u
                s3 += b * w
                s4 += c * u
                s5 += c * w
                s6 += d * u
                s7 += d * w
                ycr[j] += a * par + b * pbr + c * pcr + d * pdr
                yci[j] += a * pai + b * pbi + c * pci + d * pdi
            yr[r0 + i] += s0
            yi[r0 + i] += s1
            yr[r0 + i + 1] += s2
            yi[r0 + i + 1] += s3
            yr[r0 + i + 2] += s4
            yi[r0 + i + 2] += s5
            yr[r0 + i + 3] += s6
            yi[r0 + i + 3] += s7
            i += 4
        while i < nr:                                    # the last nr mod 4 rows
            ra = values[base + i * nc: base + (i + 1) * nc]
            s0 = s1 = 0.0
            par, pai = xr[r0 + i], xi[r0 + i]
            for j in range(nc):
                s0 += ra[j] * xcr[j]
                s1 += ra[j] * xci[j]
                ycr[j] += ra[j] * par
                yci[j] += ra[j] * pai
            yr[r0 + i] += s0
            yi[r0 + i] += s1
            i += 1


@njit(cache=True, fastmath=FAST)
def apply_csr(data_r, data_i, indices, indptr, xr, xi, yr, yi):
    """y = B x for a complex CSR matrix B = data_r + i·data_i."""
    for i in range(yr.size):
        ar = 0.0
        ai = 0.0
        for k in range(indptr[i], indptr[i + 1]):
            c = indices[k]
            ar += data_r[k] * xr[c] - data_i[k] * xi[c]
            ai += data_r[k] * xi[c] + data_i[k] * xr[c]
        yr[i] = ar
        yi[i] = ai


@njit(cache=True, fastmath=FAST)
def _orthogonalise(Vr, Vi, j, diag, s, alpha, beta):
    """With B v_j in row j + 1: w = diag∘v_j + s·B v_j, α_j = Re⟨v_j, w⟩, w −= α_j v_j + β_{j−1} v_{j−1},
    one Gram–Schmidt pass against v_0 … v_j, β_j = ‖w‖, v_{j+1} = w/β_j (left unnormalised if β_j
    is below 1e-300). Returns β_j."""
    n = Vr.shape[1]
    wr, wi = Vr[j + 1], Vi[j + 1]
    vr, vi = Vr[j], Vi[j]
    a = 0.0
    for i in range(n):
        wr[i] = diag[i] * vr[i] + s * wr[i]
        wi[i] = diag[i] * vi[i] + s * wi[i]
        a += vr[i] * wr[i] + vi[i] * wi[i]
    alpha[j] = a
    b = beta[j - 1] if j > 0 else 0.0
    pr, pi = Vr[j - 1 if j > 0 else 0], Vi[j - 1 if j > 0 else 0]
    for i in range(n):
        wr[i] -= a * vr[i] + b * pr[i]
        wi[i] -= a * vi[i] + b * pi[i]
    for k in range(j + 1):                       # ⟨v_k, w⟩ = Σ conj(v_k) w
        kr, ki = Vr[k], Vi[k]
        cr = 0.0
        ci = 0.0
        for i in range(n):
            cr += kr[i] * wr[i] + ki[i] * wi[i]
            ci += kr[i] * wi[i] - ki[i] * wr[i]
        for i in range(n):
            wr[i] -= cr * kr[i] - ci * ki[i]
            wi[i] -= cr * ki[i] + ci * kr[i]
    norm2 = 0.0
    for i in range(n):
        norm2 += wr[i] * wr[i] + wi[i] * wi[i]
    bj = np.sqrt(norm2)
    beta[j] = bj
    if bj > 1e-300:
        for i in range(n):
            wr[i] /= bj
            wi[i] /= bj
    return bj


@njit(cache=True, fastmath=FAST)
def iterate_blocks(values, offsets, starts, Vr, Vi, j, diag, s, alpha, beta):
    apply_blocks(values, offsets, starts, Vr[j], Vi[j], Vr[j + 1], Vi[j + 1])
    return _orthogonalise(Vr, Vi, j, diag, s, alpha, beta)


@njit(cache=True, fastmath=FAST)
def iterate_csr(data_r, data_i, indices, indptr, Vr, Vi, j, diag, s, alpha, beta):
    apply_csr(data_r, data_i, indices, indptr, Vr[j], Vi[j], Vr[j + 1], Vi[j + 1])
    return _orthogonalise(Vr, Vi, j, diag, s, alpha, beta)

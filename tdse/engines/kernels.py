"""numba kernels of the grid route (nothing else lives here).

The wave function is stored as ``psi[i, l]`` = u_l(r_i) (C order, complex128): one row holds all
partial waves at one radius, so the inner loops run across l (SIMD-friendly) and the Thomas
recurrences of all l advance side by side along r.

One time step of length dt at mid-step field E (Strang splitting, second order in dt):

    U = A·B·C·B·A,   A, B = exp(−i (dt/2) E r cosθ) restricted to the pairs (l, l+1) with l even
                     (A) or odd (B): exact 2×2 rotations, angle θ = (dt/2)·E·r·c_l,
                     c_l = ⟨l|cosθ|l+1⟩ = (l+1)/√((2l+1)(2l+3)) (m = 0);
                     C = Crank–Nicolson for H_l = −(1/2μ)M⁻¹Δ + V_l, τ = dt/2:
                     (M(1 + iτV) − iτΔ/2μ) ψ′ = (M(1 − iτV) + iτΔ/2μ) ψ.

The Crank–Nicolson matrix A⁺ = M(1 + iτV) − iτΔ/2μ is field free: its Thomas factors
(``w`` = 1/b′ and ``cp`` = c′ per row and l) are computed once (:func:`cn_factorize`); the
right-hand side A⁻ = conj(A⁺) is formed on the fly. The forward sweep forms the right-hand side
and eliminates; the backward sweep substitutes and, row by row while the row is in cache, applies
the closing rotations of this step, the edge mask, the per-step observables and the opening
rotations of the next step. Rotation angles are linear in r, so the rotors cos θ + i sin θ come
from a complex-multiply recurrence along r, re-seeded with exact values every ``RESEED`` rows.
No kernel allocates; the public wrapper in :mod:`tdse.engines.grid` validates and allocates.
"""
from __future__ import annotations

import math

import numba
import numpy as np
from numba import njit, prange

RESEED = 32                       # rows between exact re-seeds of the rotor recurrence

# Threads for the optional parallel path: workqueue needs no TBB/OpenMP and is enough for a
# bandwidth-bound step (set before any parallel kernel is compiled or run).
if numba.config.THREADING_LAYER == "default":
    numba.config.THREADING_LAYER = "workqueue"


@njit(cache=True, fastmath=False)
def cn_factorize(m_diag, m_off, d_diag, d_off, m_first, d_first, cent, coul, invr2, tau, inv2mu,
                 w, cp):
    """Thomas factors of A⁺ = M(1 + iτV) − iτΔ/(2μ) for every l (columns), in place.

    Row 0 of l uses ``m_first[l]``, ``d_first[l]`` (the corrected l = 0 row); V[i, l] =
    cent[l]·invr2[i] + coul[i]. Fills ``w[i, l]`` = 1/b′ᵢ and ``cp[i, l]`` = c′ᵢ = (upper)ᵢ/b′ᵢ
    (standard tridiagonal elimination; A⁺ is diagonally dominant, no pivoting).
    """
    n, nl = w.shape
    for l in range(nl):
        v = cent[l] * invr2[0] + coul[0]
        b = complex(m_first[l], tau * (m_first[l] * v - d_first[l] * inv2mu))
        w[0, l] = 1.0 / b
        if n > 1:
            vn = cent[l] * invr2[1] + coul[1]
            up = complex(m_off[0], tau * (m_off[0] * vn - d_off[0] * inv2mu))
            cp[0, l] = up * w[0, l]
        for i in range(1, n):
            vp = cent[l] * invr2[i - 1] + coul[i - 1]
            v = cent[l] * invr2[i] + coul[i]
            lo = complex(m_off[i - 1], tau * (m_off[i - 1] * vp - d_off[i - 1] * inv2mu))
            b = complex(m_diag[i], tau * (m_diag[i] * v - d_diag[i] * inv2mu))
            b = b - lo * cp[i - 1, l]
            w[i, l] = 1.0 / b
            if i < n - 1:
                vn = cent[l] * invr2[i + 1] + coul[i + 1]
                up = complex(m_off[i], tau * (m_off[i] * vn - d_off[i] * inv2mu))
                cp[i, l] = up * w[i, l]
            else:
                cp[i, l] = 0.0


@njit(cache=True, fastmath=False)
def _seed_rotors(rot, field, h, r, coupling, parity):
    """rot[l] = e^{iθ}, θ = h·E·r·c_l, exactly, for the pairs (l, l+1) with l ≡ parity (mod 2)."""
    nl = rot.shape[0]
    for l in range(parity, nl - 1, 2):
        th = h * field * r * coupling[l]
        rot[l] = complex(math.cos(th), math.sin(th))


@njit(cache=True, fastmath=False)
def _rotor_steps(step, field, h, dr, coupling, parity):
    """step[l] = e^{−i h E dr c_l}: the rotor change from row i to row i − 1."""
    nl = step.shape[0]
    for l in range(parity, nl - 1, 2):
        th = h * field * dr * coupling[l]
        step[l] = complex(math.cos(th), -math.sin(th))


@njit(cache=True, fastmath=False)
def _rotate_row(row, rot, parity):
    """(a, b) -> (c a − i s b, −i s a + c b) for the pairs (l, l+1), l ≡ parity, rotor c + i s."""
    nl = row.shape[0]
    for l in range(parity, nl - 1, 2):
        c = rot[l].real
        s = rot[l].imag
        a = row[l]
        b = row[l + 1]
        row[l] = complex(c * a.real + s * b.imag, c * a.imag - s * b.real)
        row[l + 1] = complex(c * b.real + s * a.imag, c * b.imag - s * a.real)


@njit(cache=True, fastmath=False)
def _advance_rotor(rot, step, parity):
    """rot[l] ← rot[l]·step[l] (one row inward)."""
    nl = rot.shape[0]
    for l in range(parity, nl - 1, 2):
        rot[l] = rot[l] * step[l]


@njit(cache=True, fastmath=False)
def rotate_all(psi, field, h, dr, coupling, first_parity, rot, step):
    """Apply the rotation layers (first_parity, then the other parity) at field ``field`` and
    time ``h`` to every row of ``psi``: the opening half of a Strang step (A then B for 0)."""
    n, nl = psi.shape
    for k in range(2):
        parity = (first_parity + k) % 2
        _rotor_steps(step[k], field, h, dr, coupling, parity)
    for i in range(n - 1, -1, -1):
        row = psi[i]
        for k in range(2):
            parity = (first_parity + k) % 2
            if (n - 1 - i) % RESEED == 0:
                _seed_rotors(rot[k], field, h, (i + 1) * dr, coupling, parity)
            _rotate_row(row, rot[k], parity)
            _advance_rotor(rot[k], step[k], parity)


@njit(cache=True, fastmath=False)
def propagate_chunk(psi, y, w, cp, m_diag, m_off, d_diag, d_off, m_first, d_first, cent, coul,
                    invr2, tau, inv2mu, dr, coupling, fields, mask, i_abs, row, carry, rot, step,
                    out):
    """Advance ``psi`` by ``len(fields)`` Strang steps (dt = 2τ) with mid-step fields ``fields``.

    On entry ``psi`` is the true state; on exit too. ``y`` (like psi), ``row``, ``carry`` (L) and
    ``rot``, ``step`` (4, L) are scratch. After step k the state is multiplied by ``mask`` (rows
    ≥ ``i_abs``) and ``out[k]`` receives (norm, ⟨r cosθ⟩, ⟨cosθ/r²⟩) of the masked state, with
    ⟨f⟩ = Σᵢ f(rᵢ) Σ_l 2c_l Re(u*_{i,l} u_{i,l+1}) for the angular parts.
    """
    n, nl = psi.shape
    nsteps = fields.shape[0]
    h = tau   # rotation time dt/2 equals the Crank–Nicolson tau
    if nsteps == 0:
        return
    rotate_all(psi, fields[0], h, dr, coupling, 0, rot[:2], step[:2])
    for k in range(nsteps):
        # ---- forward sweep: right-hand side A⁻ψ and elimination, y = L⁻¹ A⁻ ψ
        for i in range(n):
            for l in range(nl):
                md = m_first[l] if i == 0 else m_diag[i]
                dd = d_first[l] if i == 0 else d_diag[i]
                v = cent[l] * invr2[i] + coul[i]
                p = psi[i, l]
                coef = complex(md, -tau * (md * v - dd * inv2mu))
                rhs = coef * p
                if i > 0:
                    vp = cent[l] * invr2[i - 1] + coul[i - 1]
                    lo = complex(m_off[i - 1], -tau * (m_off[i - 1] * vp - d_off[i - 1] * inv2mu))
                    rhs += lo * psi[i - 1, l]
                    rhs -= lo.conjugate() * y[i - 1, l]
                if i < n - 1:
                    vn = cent[l] * invr2[i + 1] + coul[i + 1]
                    up = complex(m_off[i], -tau * (m_off[i] * vn - d_off[i] * inv2mu))
                    rhs += up * psi[i + 1, l]
                y[i, l] = rhs * w[i, l]
        # ---- backward sweep: substitution, closing rotations, mask, observables, next opening
        e_now = fields[k]
        last = k == nsteps - 1
        e_next = 0.0 if last else fields[k + 1]
        _rotor_steps(step[0], e_now, h, dr, coupling, 1)
        _rotor_steps(step[1], e_now, h, dr, coupling, 0)
        if not last:
            _rotor_steps(step[2], e_next, h, dr, coupling, 0)
            _rotor_steps(step[3], e_next, h, dr, coupling, 1)
        norm = 0.0
        zsum = 0.0
        csum = 0.0
        for i in range(n - 1, -1, -1):
            ri = (i + 1) * dr
            reseed = (n - 1 - i) % RESEED == 0
            for l in range(nl):
                val = y[i, l]
                if i < n - 1:
                    val -= cp[i, l] * carry[l]
                carry[l] = val
                row[l] = val
            if reseed:
                _seed_rotors(rot[0], e_now, h, ri, coupling, 1)
                _seed_rotors(rot[1], e_now, h, ri, coupling, 0)
            _rotate_row(row, rot[0], 1)
            _rotate_row(row, rot[1], 0)
            _advance_rotor(rot[0], step[0], 1)
            _advance_rotor(rot[1], step[1], 0)
            if i >= i_abs:
                mk = mask[i]
                for l in range(nl):
                    row[l] = row[l] * mk
            rn = 0.0
            rz = 0.0
            for l in range(nl):
                a = row[l]
                rn += a.real * a.real + a.imag * a.imag
            for l in range(nl - 1):
                a = row[l]
                b = row[l + 1]
                rz += 2.0 * coupling[l] * (a.real * b.real + a.imag * b.imag)
            norm += rn
            zsum += ri * rz
            csum += invr2[i] * rz
            if not last:
                if reseed:
                    _seed_rotors(rot[2], e_next, h, ri, coupling, 0)
                    _seed_rotors(rot[3], e_next, h, ri, coupling, 1)
                _rotate_row(row, rot[2], 0)
                _rotate_row(row, rot[3], 1)
                _advance_rotor(rot[2], step[2], 0)
                _advance_rotor(rot[3], step[3], 1)
            for l in range(nl):
                psi[i, l] = row[l]
        out[k, 0] = norm
        out[k, 1] = zsum
        out[k, 2] = csum


@njit(cache=True, fastmath=False)
def project_rows(psi, vectors, l, out):
    """out[j] = Σᵢ vectors[i, j]·psi[i, l] (overlaps of column l with real eigenvectors)."""
    n, nb = vectors.shape
    for j in range(nb):
        acc = 0.0 + 0.0j
        for i in range(n):
            acc += vectors[i, j] * psi[i, l]
        out[j] = acc


@njit(cache=True, fastmath=False, parallel=True)
def propagate_chunk_parallel(psi, y, w, cp, m_diag, m_off, d_diag, d_off, m_first, d_first, cent,
                             coul, invr2, tau, inv2mu, dr, coupling, fields, mask, i_abs, carry,
                             partial, out, block):
    """The same steps as :func:`propagate_chunk`, unfused, for several threads.

    Per step: Crank–Nicolson for blocks of ``block`` partial waves in parallel (``carry`` is
    (N_lblocks, block) scratch), then rotations, mask and observables for blocks of ``block``
    rows in parallel (exact cos/sin at each block start, recurrence inside; ``partial`` holds
    (n_rblocks, 3) sums, reduced in a fixed order so the result does not depend on threads).
    """
    n, nl = psi.shape
    nsteps = fields.shape[0]
    h = tau
    nlb = (nl + block - 1) // block
    nrb = (n + block - 1) // block
    for k in range(nsteps + 1):
        # rotations: opening half of step k (A then B) after closing half of step k-1 (B then A)
        for rb in prange(nrb):
            i0 = rb * block
            i1 = min(n, i0 + block)
            pn = 0.0
            pz = 0.0
            pc = 0.0
            for i in range(i0, i1):
                ri = (i + 1) * dr
                if k > 0:
                    e = fields[k - 1]
                    for parity in (1, 0):
                        for l in range(parity, nl - 1, 2):
                            th = h * e * ri * coupling[l]
                            c = math.cos(th)
                            s = math.sin(th)
                            a = psi[i, l]
                            b = psi[i, l + 1]
                            psi[i, l] = complex(c * a.real + s * b.imag, c * a.imag - s * b.real)
                            psi[i, l + 1] = complex(c * b.real + s * a.imag, c * b.imag - s * a.real)
                    if i >= i_abs:
                        for l in range(nl):
                            psi[i, l] = psi[i, l] * mask[i]
                    rn = 0.0
                    rz = 0.0
                    for l in range(nl):
                        a = psi[i, l]
                        rn += a.real * a.real + a.imag * a.imag
                    for l in range(nl - 1):
                        a = psi[i, l]
                        b = psi[i, l + 1]
                        rz += 2.0 * coupling[l] * (a.real * b.real + a.imag * b.imag)
                    pn += rn
                    pz += ri * rz
                    pc += invr2[i] * rz
                if k < nsteps:
                    e = fields[k]
                    for parity in (0, 1):
                        for l in range(parity, nl - 1, 2):
                            th = h * e * ri * coupling[l]
                            c = math.cos(th)
                            s = math.sin(th)
                            a = psi[i, l]
                            b = psi[i, l + 1]
                            psi[i, l] = complex(c * a.real + s * b.imag, c * a.imag - s * b.real)
                            psi[i, l + 1] = complex(c * b.real + s * a.imag, c * b.imag - s * a.real)
            partial[rb, 0] = pn
            partial[rb, 1] = pz
            partial[rb, 2] = pc
        if k > 0:
            norm = 0.0
            zsum = 0.0
            csum = 0.0
            for rb in range(nrb - 1, -1, -1):
                norm += partial[rb, 0]
                zsum += partial[rb, 1]
                csum += partial[rb, 2]
            out[k - 1, 0] = norm
            out[k - 1, 1] = zsum
            out[k - 1, 2] = csum
        if k == nsteps:
            break
        # Crank–Nicolson, blocks of partial waves in parallel
        for lb in prange(nlb):
            l0 = lb * block
            l1 = min(nl, l0 + block)
            for i in range(n):
                for l in range(l0, l1):
                    md = m_first[l] if i == 0 else m_diag[i]
                    dd = d_first[l] if i == 0 else d_diag[i]
                    v = cent[l] * invr2[i] + coul[i]
                    rhs = complex(md, -tau * (md * v - dd * inv2mu)) * psi[i, l]
                    if i > 0:
                        vp = cent[l] * invr2[i - 1] + coul[i - 1]
                        lo = complex(m_off[i - 1], -tau * (m_off[i - 1] * vp - d_off[i - 1] * inv2mu))
                        rhs += lo * psi[i - 1, l]
                        rhs -= lo.conjugate() * y[i - 1, l]
                    if i < n - 1:
                        vn = cent[l] * invr2[i + 1] + coul[i + 1]
                        up = complex(m_off[i], -tau * (m_off[i] * vn - d_off[i] * inv2mu))
                        rhs += up * psi[i + 1, l]
                    y[i, l] = rhs * w[i, l]
            for i in range(n - 1, -1, -1):
                for l in range(l0, l1):
                    val = y[i, l]
                    if i < n - 1:
                        val -= cp[i, l] * carry[lb, l - l0]
                    carry[lb, l - l0] = val
                    psi[i, l] = val

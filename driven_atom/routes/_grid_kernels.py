"""numba kernels of the grid route (nothing else lives here).

Layout. The state is two float64 arrays ``pr``, ``pi`` (real and imaginary parts) of shape (N, L),
C order: row i holds all partial waves at r_i = (i+1)·dr, so inner loops run across partial waves
(SIMD) and the Thomas recurrences of all partial waves advance side by side along r. Within a
row the columns are ordered even l first, then odd l: column p is l = 2p (p < ne = ⌈L/2⌉) and
column ne + p is l = 2p + 1. The coupled pairs are then contiguous slices:

* A pairs (2p, 2p+1): columns p and ne + p, p < no = ⌊L/2⌋;
* B pairs (2p+1, 2p+2): columns ne + p and p + 1, p < nb = ⌈L/2⌉ − 1.

One time step of length dt at mid-step field E (Strang splitting, second order in dt):

    U = A·B·C·B·A,   A, B = exp(−i (dt/2) E r cosθ) restricted to the A or B pairs: exact 2×2
                     rotations by θ = (dt/2)·E·r·c_l, c_l = ⟨l|cosθ|l+1⟩ (m = 0);
                     C = Crank–Nicolson for H_l = −(1/2μ)M⁻¹Δ + V_l, τ = dt/2:
                     (M(1 + iτV) − iτΔ/2μ) ψ′ = (M(1 − iτV) + iτΔ/2μ) ψ.

A⁺ = M(1 + iτV) − iτΔ/2μ is field free: its Thomas factors (``w`` = 1/b′, ``cp`` = c′ per row and
column) are computed once (:func:`cn_factorize`); A⁻ = conj(A⁺) is formed on the fly from
V[i, col] = cent[col]·invr2[i] + coul[i]. The forward sweep forms the right-hand side and eliminates.
Both kernels write the result y over the state (row i of the right-hand side needs the original
ψ_{i−1}, ψᵢ, ψ_{i+1}; ψ_{i−1} waits in a scratch row), so no second (N, L) pair is streamed. A row
loop that writes one row of an (N, L) array and reads other rows of the same array stays scalar
(the compiler hoists its overlap test out of the row loop, where it fails), so the forward sweep
writes yᵢ into a scratch row and copies it (:func:`_forward_inplace`). The backward sweep
substitutes and, row by row while the row is in cache, applies the closing rotations of this step
(B then A), the edge mask, the per-step observables and the opening rotations of the next step
(A then B). The rotation angle is linear in r, so the rotors cos θ + i sin θ follow a
complex-multiply recurrence along r, re-seeded exactly every ``RESEED`` rows. No kernel allocates; :mod:`driven_atom.routes.grid` validates, allocates and converts layouts.
"""
from __future__ import annotations

import math

import numba
from numba import njit, prange

RESEED = 128                      # rows between exact re-seeds of the rotor recurrence

# Threads for the optional parallel path: workqueue needs no TBB/OpenMP and is enough for a
# bandwidth-bound step (set before any parallel kernel is compiled or run).
if numba.config.THREADING_LAYER == "default":
    numba.config.THREADING_LAYER = "workqueue"


@njit(cache=True, fastmath=False)
def cn_factorize(m_diag, m_off, d_diag, d_off, m_first, d_first, cent, coul, invr2, tau, inv2mu,
                 wr, wi, cr, ci):
    """Thomas factors of A⁺ = M(1 + iτV) − iτΔ/(2μ) for every column, in place.

    Row 0 of column j uses ``m_first[j]``, ``d_first[j]`` (the corrected first rows); V[i, j] =
    cent[j]·invr2[i] + coul[i]. Fills w = 1/b′ᵢ (``wr`` + i``wi``) and c′ᵢ = (upper)ᵢ/b′ᵢ (``cr`` +
    i``ci``) of the standard tridiagonal elimination (A⁺ is diagonally dominant: no pivoting).
    """
    n, nl = wr.shape
    for j in range(nl):
        prev_c = 0.0 + 0.0j
        for i in range(n):
            md = m_first[j] if i == 0 else m_diag[i]
            dd = d_first[j] if i == 0 else d_diag[i]
            v = cent[j] * invr2[i] + coul[i]
            b = complex(md, tau * (md * v - dd * inv2mu))
            if i > 0:
                vp = cent[j] * invr2[i - 1] + coul[i - 1]
                lo = complex(m_off[i - 1], tau * (m_off[i - 1] * vp - d_off[i - 1] * inv2mu))
                b = b - lo * prev_c
            w = 1.0 / b
            wr[i, j] = w.real
            wi[i, j] = w.imag
            c = 0.0 + 0.0j
            if i < n - 1:
                vn = cent[j] * invr2[i + 1] + coul[i + 1]
                up = complex(m_off[i], tau * (m_off[i] * vn - d_off[i] * inv2mu))
                c = up * w
            cr[i, j] = c.real
            ci[i, j] = c.imag
            prev_c = c


@njit(cache=True, fastmath=False)
def _seed(rc, rs, field, h, r, c):
    """rc + i rs = e^{iθ}, θ = h·E·r·c_p, exactly."""
    for p in range(c.shape[0]):
        th = h * field * r * c[p]
        rc[p] = math.cos(th)
        rs[p] = math.sin(th)


@njit(cache=True, fastmath=False)
def _steps(sc, ss, field, h, dr, c):
    """sc + i ss = e^{−i h E dr c_p}: the rotor change from one row to the row inward."""
    for p in range(c.shape[0]):
        th = h * field * dr * c[p]
        sc[p] = math.cos(th)
        ss[p] = -math.sin(th)


@njit(cache=True, fastmath=False)
def _rotate(xr, xi, lo, hi, m, rc, rs, sc, ss):
    """(a, b) → (c a − i s b, −i s a + c b) for a = x[lo + p], b = x[hi + p], p < m, with the
    rotor c + i s = rc[p] + i rs[p]; then rotor ← rotor·(sc[p] + i ss[p]) (one row inward).

    Slices indexed from 0 spare the negative-index test of x[lo + p]; the rotor update runs as
    a loop of its own."""
    ar_ = xr[lo:lo + m]
    ai_ = xi[lo:lo + m]
    br_ = xr[hi:hi + m]
    bi_ = xi[hi:hi + m]
    for p in range(m):
        c = rc[p]
        s = rs[p]
        ar = ar_[p]
        ai = ai_[p]
        br = br_[p]
        bi = bi_[p]
        ar_[p] = c * ar + s * bi
        ai_[p] = c * ai - s * br
        br_[p] = c * br + s * ai
        bi_[p] = c * bi - s * ar
    for p in range(m):
        c = rc[p]
        s = rs[p]
        rc[p] = c * sc[p] - s * ss[p]
        rs[p] = c * ss[p] + s * sc[p]


@njit(cache=True, fastmath=False)
def rotate_all(pr, pi, field, h, dr, ca, cb, rot, stp):
    """Opening half of a step on every row: A then B at field ``field``, time ``h``.

    ``rot``, ``stp`` are (4, P) scratch (rows 0–1 used). Same recurrence and re-seeding as the
    opening rotations inside :func:`propagate_chunk`, so a chunk boundary changes no bit.
    """
    n, nl = pr.shape
    ne = (nl + 1) // 2
    na, nb = ca.shape[0], cb.shape[0]
    ra, ia, sa, ta = rot[0], rot[1], stp[0], stp[1]
    rb, ib, sb, tb = rot[2], rot[3], stp[2], stp[3]
    _steps(sa, ta, field, h, dr, ca)
    _steps(sb, tb, field, h, dr, cb)
    for i in range(n - 1, -1, -1):
        if (n - 1 - i) % RESEED == 0:
            _seed(ra, ia, field, h, (i + 1) * dr, ca)
            _seed(rb, ib, field, h, (i + 1) * dr, cb)
        xr = pr[i]
        xi = pi[i]
        _rotate(xr, xi, 0, ne, na, ra, ia, sa, ta)
        _rotate(xr, xi, ne, 1, nb, rb, ib, sb, tb)


@njit(cache=True, fastmath=False)
def _forward_edge_row(xmr, xmi, ymr, ymi, x0r, x0i, xpr, xpi, outr, outi, wr, wi, i, n, md_row,
                      dd_row, m_off, d_off, cent, coul, invr2, tau, inv2mu, col):
    """Right-hand side and elimination for one column of row 0 or row N−1 (with the edge cases).

    Rows of the state: ``xm`` = ψ_{i−1} (read only if i > 0), ``x0`` = ψᵢ, ``xp`` = ψ_{i+1} (read
    only if i < n − 1); ``ym`` = y_{i−1}; yᵢ goes to ``out`` (which may be ``x0``: column ``col``
    of ``x0`` is read before it is written).
    """
    v = cent[col] * invr2[i] + coul[i]
    dim = -tau * (md_row * v - dd_row * inv2mu)
    rr = md_row * x0r[col] - dim * x0i[col]
    ri = md_row * x0i[col] + dim * x0r[col]
    if i > 0:
        vm = cent[col] * invr2[i - 1] + coul[i - 1]
        lre = m_off[i - 1]
        lim = -tau * (m_off[i - 1] * vm - d_off[i - 1] * inv2mu)
        rr += lre * xmr[col] - lim * xmi[col] - (lre * ymr[col] + lim * ymi[col])
        ri += lre * xmi[col] + lim * xmr[col] - (lre * ymi[col] - lim * ymr[col])
    if i < n - 1:
        vp = cent[col] * invr2[i + 1] + coul[i + 1]
        ure = m_off[i]
        uim = -tau * (m_off[i] * vp - d_off[i] * inv2mu)
        rr += ure * xpr[col] - uim * xpi[col]
        ri += ure * xpi[col] + uim * xpr[col]
    outr[col] = rr * wr[i, col] - ri * wi[i, col]
    outi[col] = rr * wi[i, col] + ri * wr[i, col]


@njit(cache=True, fastmath=False)
def _forward_inplace(pr, pi, wr, wi, m_diag, m_off, d_diag, d_off, m_first, d_first, cent, coul,
                     invr2, tau, inv2mu, j0, j1, hr, hi, sr, si):
    """y = L⁻¹ A⁻ ψ for columns j0..j1−1 (all rows), written over ψ in those columns.

    When row i is formed, rows > i still hold ψ and rows < i hold y. The row loop reads the
    state only: ``hr``, ``hi`` (≥ j1 − j0 long) carry the original ψ_{i−1}, ``sr``, ``si`` carry
    y_{i−1} and receive yᵢ, which a second short loop copies into row i. (Written straight into
    the state, yᵢ would share an array with the rows the loop reads, and the compiler's overlap
    test, hoisted out of the row loop, would then keep the loop scalar.) Rows are taken as
    slices pr[i, j0:j1], so the inner loops index from 0 over contiguous memory.
    """
    n = pr.shape[0]
    m = j1 - j0
    i1 = 1 if n > 1 else 0
    cen = cent[j0:j1]
    wrb = wr[:, j0:j1]
    wib = wi[:, j0:j1]
    x0r = pr[0, j0:j1]
    x0i = pi[0, j0:j1]
    for j in range(m):
        hr[j] = x0r[j]
        hi[j] = x0i[j]
    xpr = pr[i1, j0:j1]
    xpi = pi[i1, j0:j1]
    for j in range(m):
        _forward_edge_row(hr, hi, sr, si, hr, hi, xpr, xpi, sr, si, wrb, wib, 0, n,
                          m_first[j0 + j], d_first[j0 + j], m_off, d_off, cen, coul, invr2, tau,
                          inv2mu, j)
    for j in range(m):
        x0r[j] = sr[j]
        x0i[j] = si[j]
    for i in range(1, n - 1):
        lre = m_off[i - 1]
        la = -tau * lre
        lb = tau * d_off[i - 1] * inv2mu
        md = m_diag[i]
        da = -tau * md
        db = tau * d_diag[i] * inv2mu
        ure = m_off[i]
        ua = -tau * ure
        ub = tau * d_off[i] * inv2mu
        sm = invr2[i - 1]
        s0 = invr2[i]
        sp = invr2[i + 1]
        km = coul[i - 1]
        k0 = coul[i]
        kp = coul[i + 1]
        xr = pr[i, j0:j1]
        xi = pi[i, j0:j1]
        prp = pr[i + 1, j0:j1]
        pip = pi[i + 1, j0:j1]
        wr0 = wr[i, j0:j1]
        wi0 = wi[i, j0:j1]
        for j in range(m):
            cj = cen[j]
            lim = la * (cj * sm + km) + lb
            dim = da * (cj * s0 + k0) + db
            uim = ua * (cj * sp + kp) + ub
            prm = hr[j]
            pim = hi[j]
            yrm = sr[j]
            yim = si[j]
            pr0 = xr[j]
            pi0 = xi[j]
            rr = (lre * (prm - yrm) - lim * (pim + yim)
                  + md * pr0 - dim * pi0 + ure * prp[j] - uim * pip[j])
            ri = (lre * (pim - yim) + lim * (prm + yrm)
                  + md * pi0 + dim * pr0 + ure * pip[j] + uim * prp[j])
            hr[j] = pr0
            hi[j] = pi0
            sr[j] = rr * wr0[j] - ri * wi0[j]
            si[j] = rr * wi0[j] + ri * wr0[j]
        for j in range(m):
            xr[j] = sr[j]
            xi[j] = si[j]
    if n > 1:
        i = n - 1
        xr = pr[i, j0:j1]
        xi = pi[i, j0:j1]
        for j in range(m):
            _forward_edge_row(hr, hi, sr, si, xr, xi, xr, xi, xr, xi, wrb, wib, i, n, m_diag[i],
                              d_diag[i], m_off, d_off, cen, coul, invr2, tau, inv2mu, j)


@njit(cache=True, fastmath=False)
def _row_observables(xr, xi, ne, ca, cb):
    """(Σ|u|², Σ_l 2c_l Re(u*_l u_{l+1})) of one row in the even/odd column order."""
    nl = xr.shape[0]
    rn = 0.0
    for j in range(nl):
        rn += xr[j] * xr[j] + xi[j] * xi[j]
    rz = 0.0
    for p in range(ca.shape[0]):
        rz += ca[p] * (xr[p] * xr[ne + p] + xi[p] * xi[ne + p])
    for p in range(cb.shape[0]):
        rz += cb[p] * (xr[ne + p] * xr[p + 1] + xi[ne + p] * xi[p + 1])
    return rn, 2.0 * rz


@njit(cache=True, fastmath=False)
def propagate_chunk(pr, pi, wr, wi, cr, ci, m_diag, m_off, d_diag, d_off, m_first, d_first,
                    cent, coul, invr2, tau, inv2mu, dr, ca, cb, fields, mask, i_abs, carry, rot,
                    stp, out):
    """Advance the state (``pr``, ``pi``) by ``len(fields)`` Strang steps (dt = 2τ) with mid-step
    fields ``fields``; the state is the true one on entry and on exit.

    ``carry`` (6, L), ``rot``, ``stp`` (8, P) are scratch; y of the forward sweep lives in the
    state arrays between the two sweeps (:func:`_forward_inplace`). After step k the state is multiplied by ``mask`` (rows ≥ ``i_abs``) and ``out[k]`` receives
    (norm, ⟨r cosθ⟩, ⟨cosθ/r²⟩) of the masked state, ⟨f⟩ = Σᵢ f(rᵢ) Σ_l 2c_l Re(u*_{i,l} u_{i,l+1}).
    """
    n, nl = pr.shape
    ne = (nl + 1) // 2
    na, nb = ca.shape[0], cb.shape[0]
    nsteps = fields.shape[0]
    h = tau   # the rotations cover dt/2, which is also the Crank–Nicolson tau
    if nsteps == 0:
        return
    rotate_all(pr, pi, fields[0], h, dr, ca, cb, rot, stp)
    for k in range(nsteps):
        _forward_inplace(pr, pi, wr, wi, m_diag, m_off, d_diag, d_off, m_first, d_first, cent,
                         coul, invr2, tau, inv2mu, 0, nl, carry[2], carry[3], carry[4], carry[5])
        e_now = fields[k]
        last = k == nsteps - 1
        e_next = 0.0 if last else fields[k + 1]
        _steps(stp[0], stp[1], e_now, h, dr, cb)      # closing B
        _steps(stp[2], stp[3], e_now, h, dr, ca)      # closing A
        if not last:
            _steps(stp[4], stp[5], e_next, h, dr, ca)   # opening A
            _steps(stp[6], stp[7], e_next, h, dr, cb)   # opening B
        car = carry[0]
        cai = carry[1]
        for j in range(nl):
            car[j] = 0.0
            cai[j] = 0.0
        norm = 0.0
        zsum = 0.0
        csum = 0.0
        for i in range(n - 1, -1, -1):
            ri = (i + 1) * dr
            xr = pr[i]
            xi = pi[i]
            c0r = cr[i]
            c0i = ci[i]
            for j in range(nl):
                ar = car[j]
                ai = cai[j]
                vr = xr[j] - (c0r[j] * ar - c0i[j] * ai)
                vi = xi[j] - (c0r[j] * ai + c0i[j] * ar)
                car[j] = vr
                cai[j] = vi
                xr[j] = vr
                xi[j] = vi
            reseed = (n - 1 - i) % RESEED == 0
            if reseed:
                _seed(rot[0], rot[1], e_now, h, ri, cb)
                _seed(rot[2], rot[3], e_now, h, ri, ca)
            _rotate(xr, xi, ne, 1, nb, rot[0], rot[1], stp[0], stp[1])
            _rotate(xr, xi, 0, ne, na, rot[2], rot[3], stp[2], stp[3])
            if i >= i_abs:
                mk = mask[i]
                for j in range(nl):
                    xr[j] *= mk
                    xi[j] *= mk
            rn, rz = _row_observables(xr, xi, ne, ca, cb)
            norm += rn
            zsum += ri * rz
            csum += invr2[i] * rz
            if not last:
                if reseed:
                    _seed(rot[4], rot[5], e_next, h, ri, ca)
                    _seed(rot[6], rot[7], e_next, h, ri, cb)
                _rotate(xr, xi, 0, ne, na, rot[4], rot[5], stp[4], stp[5])
                _rotate(xr, xi, ne, 1, nb, rot[6], rot[7], stp[6], stp[7])
        out[k, 0] = norm
        out[k, 1] = zsum
        out[k, 2] = csum


@njit(cache=True, fastmath=False, parallel=True)
def propagate_chunk_parallel(pr, pi, wr, wi, cr, ci, m_diag, m_off, d_diag, d_off, m_first,
                             d_first, cent, coul, invr2, tau, inv2mu, dr, ca, cb, fields, mask, i_abs,
                             carry, rot, stp, partial, cblock, rblock):
    """The steps of :func:`propagate_chunk`, unfused, for several threads. ``partial[k, b]``
    (shape (nsteps, n_rblocks, 3)) receives row block b's share of step k's (norm, ⟨r cosθ⟩,
    ⟨cosθ/r²⟩); :func:`reduce_partial` adds the shares.

    Per step: Crank–Nicolson for blocks of ``cblock`` columns in parallel, each block sweeping
    in place like :func:`propagate_chunk` (``carry`` (n_cblocks, 6, cblock) scratch: the carry of
    the backward sweep and the scratch rows of :func:`_forward_inplace`), then closing rotations,
    mask, observables and the next opening rotations for blocks of ``rblock`` rows in parallel,
    each block seeding its rotors exactly at its first row (``rot`` (n_rblocks, 8, P) scratch;
    the rotor steps ``stp`` (8, P) are formed once per step and shared). Sums are reduced in a
    fixed order, so the result does not depend on the number of threads.
    """
    n, nl = pr.shape
    ne = (nl + 1) // 2
    na, nb = ca.shape[0], cb.shape[0]
    nsteps = fields.shape[0]
    h = tau
    ncb = (nl + cblock - 1) // cblock
    nrb = (n + rblock - 1) // rblock
    st = stp
    for k in range(nsteps + 1):
        if k > 0:                 # rotor steps: the same for every row block, formed once
            _steps(st[0], st[1], fields[k - 1], h, dr, cb)
            _steps(st[2], st[3], fields[k - 1], h, dr, ca)
        if k < nsteps:
            _steps(st[4], st[5], fields[k], h, dr, ca)
            _steps(st[6], st[7], fields[k], h, dr, cb)
        for rb in prange(nrb):
            i1 = min(n, (rb + 1) * rblock)
            i0 = rb * rblock
            rt = rot[rb]
            pn = 0.0
            pz = 0.0
            pc = 0.0
            if k > 0:
                e = fields[k - 1]
                _seed(rt[0], rt[1], e, h, i1 * dr, cb)
                _seed(rt[2], rt[3], e, h, i1 * dr, ca)
            if k < nsteps:
                e = fields[k]
                _seed(rt[4], rt[5], e, h, i1 * dr, ca)
                _seed(rt[6], rt[7], e, h, i1 * dr, cb)
            for i in range(i1 - 1, i0 - 1, -1):
                xr = pr[i]
                xi = pi[i]
                if k > 0:
                    _rotate(xr, xi, ne, 1, nb, rt[0], rt[1], st[0], st[1])
                    _rotate(xr, xi, 0, ne, na, rt[2], rt[3], st[2], st[3])
                    if i >= i_abs:
                        mk = mask[i]
                        for j in range(nl):
                            xr[j] *= mk
                            xi[j] *= mk
                    rn, rz = _row_observables(xr, xi, ne, ca, cb)
                    pn += rn
                    pz += (i + 1) * dr * rz
                    pc += invr2[i] * rz
                if k < nsteps:
                    _rotate(xr, xi, 0, ne, na, rt[4], rt[5], st[4], st[5])
                    _rotate(xr, xi, ne, 1, nb, rt[6], rt[7], st[6], st[7])
            if k > 0:
                partial[k - 1, rb, 0] = pn
                partial[k - 1, rb, 1] = pz
                partial[k - 1, rb, 2] = pc
        if k == nsteps:
            break
        for cb_ in prange(ncb):
            j0 = cb_ * cblock
            j1 = min(nl, j0 + cblock)
            m = j1 - j0
            cy = carry[cb_]
            _forward_inplace(pr, pi, wr, wi, m_diag, m_off, d_diag, d_off, m_first, d_first, cent,
                             coul, invr2, tau, inv2mu, j0, j1, cy[2], cy[3], cy[4], cy[5])
            car = cy[0]
            cai = cy[1]
            for j in range(m):
                car[j] = 0.0
                cai[j] = 0.0
            for i in range(n - 1, -1, -1):
                xr = pr[i, j0:j1]
                xi = pi[i, j0:j1]
                c0r = cr[i, j0:j1]
                c0i = ci[i, j0:j1]
                for j in range(m):
                    ar = car[j]
                    ai = cai[j]
                    vr = xr[j] - (c0r[j] * ar - c0i[j] * ai)
                    vi = xi[j] - (c0r[j] * ai + c0i[j] * ar)
                    car[j] = vr
                    cai[j] = vi
                    xr[j] = vr
                    xi[j] = vi


@njit(cache=True, fastmath=False)
def reduce_partial(partial, out):
    """out[k] = Σ_blocks partial[k, block] summed from the outermost block inward (fixed order)."""
    for k in range(partial.shape[0]):
        for q in range(3):
            acc = 0.0
            for rb in range(partial.shape[1] - 1, -1, -1):
                acc += partial[k, rb, q]
            out[k, q] = acc

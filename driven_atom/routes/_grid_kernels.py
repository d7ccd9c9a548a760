"""numba kernels of the grid route (nothing else lives here).

Layout. The kernels take a few stacked float64 arrays, all C order, which
:class:`driven_atom.routes.grid._Stepper` prepares once:

* ``psi`` (2, N, L): the state, Re u = psi[0] and Im u = psi[1]. Row i holds all partial waves at
  r_i = (i+1)·dr, so inner loops run across partial waves (SIMD) and the Thomas recurrences of all
  partial waves advance side by side along r;
* ``thomas`` (4, N, L): the Thomas factors of A⁺ (below), Re w, Im w, Re c′, Im c′;
* ``rows`` (6, N), one entry per radial point: m_diag, d_diag, coul = −Z/r, invr2 = 1/r², m_off,
  d_off (the off-diagonals (i, i+1) are N − 1 long and padded with a zero);
* ``cols`` (3, L), one entry per column: m_first, d_first (the Numerov-corrected first rows, which
  depend on l), cent = l(l+1)/2μ;
* ``consts`` (3,): τ = dt/2, 1/2μ, dr;
* ``coupling`` (2, P): the c_l of the A pairs in coupling[0, :na] and of the B pairs in
  coupling[1, :nb], na = ⌊L/2⌋, nb = ⌈L/2⌉ − 1 (P ≥ max(na, nb, 1));
* ``scratch`` = (carry, rot, stp): rows for the sweeps and the rotors (shapes on each kernel).

Within a row the columns are ordered even l first, then odd l: column p is l = 2p (p < ne = ⌈L/2⌉)
and column ne + p is l = 2p + 1. The coupled pairs are then contiguous slices:

* A pairs (2p, 2p+1): columns p and ne + p, p < na;
* B pairs (2p+1, 2p+2): columns ne + p and p + 1, p < nb.

One time step of length dt at mid-step field E (Strang splitting, second order in dt):

    U = A·B·C·B·A,   A, B = exp(−i (dt/2) E r cosθ) restricted to the A or B pairs: exact 2×2
                     rotations by θ = (dt/2)·E·r·c_l, c_l = ⟨l|cosθ|l+1⟩ (m = 0);
                     C = Crank–Nicolson for H_l = −(1/2μ)M⁻¹Δ + V_l, τ = dt/2:
                     (M(1 + iτV) − iτΔ/2μ) ψ′ = (M(1 − iτV) + iτΔ/2μ) ψ.

A⁺ = M(1 + iτV) − iτΔ/2μ is field free: its Thomas factors (w = 1/b′, c′ per row and column) are
computed once (:func:`cn_factorize`); A⁻ = conj(A⁺) is formed on the fly from
V[i, col] = cent[col]·invr2[i] + coul[i]. The forward sweep forms the right-hand side and eliminates.
Both kernels write the result y over the state (row i of the right-hand side needs the original
ψ_{i−1}, ψᵢ, ψ_{i+1}; ψ_{i−1} waits in a scratch row), so no second state is streamed. A row loop
that writes one row of an (N, L) array and reads other rows of the same array stays scalar (the
compiler hoists its overlap test out of the row loop, where it fails), so the forward sweep writes
yᵢ into a scratch row and copies it (:func:`_forward_inplace`). The backward sweep substitutes
(:func:`_back_substitute`) and, row by row while the row is in cache, applies the closing rotations
of this step (B then A), the edge mask, the per-step observables and the opening rotations of the
next step (A then B). The rotation angle is linear in r, so the rotors cos θ + i sin θ follow a
complex-multiply recurrence along r, re-seeded exactly every ``RESEED`` rows. No kernel allocates;
:mod:`driven_atom.routes.grid` validates, allocates, stacks and converts layouts.
"""
from __future__ import annotations

import math

from numba import njit, prange

RESEED = 128                      # rows between exact re-seeds of the rotor recurrence


@njit(cache=True, fastmath=False)
def cn_factorize(rows, cols, consts, thomas):
    """Thomas factors of A⁺ = M(1 + iτV) − iτΔ/(2μ) for every column, in place.

    Row 0 of column j uses ``m_first[j]``, ``d_first[j]`` (the corrected first rows); V[i, j] =
    cent[j]·invr2[i] + coul[i]. Fills w = 1/b′ᵢ (``thomas[0]`` + i``thomas[1]``) and
    c′ᵢ = (upper)ᵢ/b′ᵢ (``thomas[2]`` + i``thomas[3]``) of the standard tridiagonal elimination
    (A⁺ is diagonally dominant: no pivoting).
    """
    m_diag, d_diag, coul, invr2, m_off, d_off = rows[0], rows[1], rows[2], rows[3], rows[4], rows[5]
    m_first, d_first, cent = cols[0], cols[1], cols[2]
    tau, inv2mu = consts[0], consts[1]
    wr, wi, cr, ci = thomas[0], thomas[1], thomas[2], thomas[3]
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
def rotate_all(psi, field, consts, coupling, scratch):
    """Opening half of a step on every row: A then B at field ``field`` over time τ = ``consts[0]``.

    Uses rows 0–3 of the (8, P) ``rot`` and ``stp`` of ``scratch``. Same recurrence and re-seeding
    as the opening rotations inside :func:`propagate_chunk`, so a chunk boundary changes no bit.
    """
    pr, pi = psi[0], psi[1]
    h, dr = consts[0], consts[2]
    _, rot, stp = scratch
    n, nl = pr.shape
    ne = (nl + 1) // 2
    ca, cb = coupling[0, :nl // 2], coupling[1, :ne - 1]
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
def _forward_edge_row(psi, thomas, rows, cols, consts, i, j0, j1, carry):
    """Right-hand side and elimination of row 0 or row N−1 (with the edge cases), columns j0..j1−1.

    Reads ψ_{i−1} from ``carry[2:4]`` (only if i > 0), y_{i−1} from ``carry[4:6]``, ψᵢ and ψ_{i+1}
    (only if i < N − 1) from ``psi``; writes yᵢ into ``carry[4:6]`` (column by column, each read
    before it is written).
    """
    m_diag, d_diag, coul, invr2, m_off, d_off = rows[0], rows[1], rows[2], rows[3], rows[4], rows[5]
    m_first, d_first, cent = cols[0], cols[1], cols[2]
    tau, inv2mu = consts[0], consts[1]
    n = psi.shape[1]
    hr, hi, yr, yi = carry[2], carry[3], carry[4], carry[5]
    for j in range(j1 - j0):
        col = j0 + j
        md = m_first[col] if i == 0 else m_diag[i]
        dd = d_first[col] if i == 0 else d_diag[i]
        x0r = psi[0, i, col]
        x0i = psi[1, i, col]
        v = cent[col] * invr2[i] + coul[i]
        dim = -tau * (md * v - dd * inv2mu)
        rr = md * x0r - dim * x0i
        ri = md * x0i + dim * x0r
        if i > 0:
            vm = cent[col] * invr2[i - 1] + coul[i - 1]
            lre = m_off[i - 1]
            lim = -tau * (m_off[i - 1] * vm - d_off[i - 1] * inv2mu)
            rr += lre * hr[j] - lim * hi[j] - (lre * yr[j] + lim * yi[j])
            ri += lre * hi[j] + lim * hr[j] - (lre * yi[j] - lim * yr[j])
        if i < n - 1:
            xpr = psi[0, i + 1, col]
            xpi = psi[1, i + 1, col]
            vp = cent[col] * invr2[i + 1] + coul[i + 1]
            ure = m_off[i]
            uim = -tau * (m_off[i] * vp - d_off[i] * inv2mu)
            rr += ure * xpr - uim * xpi
            ri += ure * xpi + uim * xpr
        wr = thomas[0, i, col]
        wi = thomas[1, i, col]
        yr[j] = rr * wr - ri * wi
        yi[j] = rr * wi + ri * wr


@njit(cache=True, fastmath=False)
def _forward_inplace(psi, thomas, rows, cols, consts, j0, j1, carry):
    """y = L⁻¹ A⁻ ψ for columns j0..j1−1 (all rows), written over ψ in those columns.

    When row i is formed, rows > i still hold ψ and rows < i hold y. The row loop reads the
    state only: ``carry[2:4]`` (rows ≥ j1 − j0 long) hold the original ψ_{i−1}, ``carry[4:6]``
    hold y_{i−1} and receive yᵢ, which a second short loop copies into row i. (Written straight
    into the state, yᵢ would share an array with the rows the loop reads, and the compiler's
    overlap test, hoisted out of the row loop, would then keep the loop scalar.) Rows are taken as
    slices pr[i, j0:j1], so the inner loops index from 0 over contiguous memory.
    """
    pr, pi, wr, wi = psi[0], psi[1], thomas[0], thomas[1]
    m_diag, d_diag, coul, invr2, m_off, d_off = rows[0], rows[1], rows[2], rows[3], rows[4], rows[5]
    tau, inv2mu = consts[0], consts[1]
    hr, hi, sr, si = carry[2], carry[3], carry[4], carry[5]
    n = pr.shape[0]
    m = j1 - j0
    cen = cols[2, j0:j1]
    x0r = pr[0, j0:j1]
    x0i = pi[0, j0:j1]
    for j in range(m):
        hr[j] = x0r[j]
        hi[j] = x0i[j]
    _forward_edge_row(psi, thomas, rows, cols, consts, 0, j0, j1, carry)
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
        _forward_edge_row(psi, thomas, rows, cols, consts, n - 1, j0, j1, carry)
        xr = pr[n - 1, j0:j1]
        xi = pi[n - 1, j0:j1]
        for j in range(m):
            xr[j] = sr[j]
            xi[j] = si[j]


@njit(cache=True, fastmath=False, inline="always")   # LLVM would not inline it into a prange body
def _back_substitute(xr, xi, cpr, cpi, car, cai):
    """One row of the backward sweep ψ′ᵢ = yᵢ − c′ᵢ ψ′ᵢ₊₁ over row slices: ``xr`` + i``xi`` holds
    yᵢ and receives ψ′ᵢ, ``cpr`` + i``cpi`` = c′ᵢ, the carry ``car`` + i``cai`` holds ψ′ᵢ₊₁ (zero
    below the last row) and receives ψ′ᵢ."""
    for j in range(xr.shape[0]):
        ar = car[j]
        ai = cai[j]
        vr = xr[j] - (cpr[j] * ar - cpi[j] * ai)
        vi = xi[j] - (cpr[j] * ai + cpi[j] * ar)
        car[j] = vr
        cai[j] = vi
        xr[j] = vr
        xi[j] = vi


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
def propagate_chunk(psi, thomas, rows, cols, consts, coupling, fields, mask, i_abs, scratch, out):
    """Advance the state ``psi`` by ``len(fields)`` Strang steps (dt = 2τ) with mid-step fields
    ``fields``; the state is the true one on entry and on exit.

    ``scratch`` = (carry (6, L), rot (8, P), stp (8, P)); y of the forward sweep lives in the state
    between the two sweeps (:func:`_forward_inplace`). After step k the state is multiplied by
    ``mask`` (rows ≥ ``i_abs``) and ``out[k]`` receives (norm, ⟨r cosθ⟩, ⟨cosθ/r²⟩) of the masked
    state, ⟨f⟩ = Σᵢ f(rᵢ) Σ_l 2c_l Re(u*_{i,l} u_{i,l+1}).
    """
    pr, pi, cr, ci = psi[0], psi[1], thomas[2], thomas[3]
    invr2 = rows[3]
    h, dr = consts[0], consts[2]    # the rotations cover dt/2, which is also the Crank–Nicolson τ
    carry, rot, stp = scratch
    n, nl = pr.shape
    ne = (nl + 1) // 2
    ca, cb = coupling[0, :nl // 2], coupling[1, :ne - 1]
    na, nb = ca.shape[0], cb.shape[0]
    nsteps = fields.shape[0]
    if nsteps == 0:
        return
    rotate_all(psi, fields[0], consts, coupling, scratch)
    for k in range(nsteps):
        _forward_inplace(psi, thomas, rows, cols, consts, 0, nl, carry)
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
            _back_substitute(xr, xi, cr[i], ci[i], car, cai)
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
def propagate_chunk_parallel(psi, thomas, rows, cols, consts, coupling, fields, mask, i_abs,
                             scratch, partial, rblock):
    """The steps of :func:`propagate_chunk`, unfused, for several threads. ``partial[k, b]``
    (shape (nsteps, n_rblocks, 3)) receives row block b's share of step k's (norm, ⟨r cosθ⟩,
    ⟨cosθ/r²⟩); :func:`reduce_partial` adds the shares.

    ``scratch`` = (carry (n_cblocks, 6, cblock), rot (n_rblocks, 8, P), stp (8, P)). Per step:
    Crank–Nicolson for blocks of ``cblock`` columns in parallel, each block sweeping in place like
    :func:`propagate_chunk` (``carry[b]``: the carry of the backward sweep and the scratch rows of
    :func:`_forward_inplace`), then closing rotations, mask, observables and the next opening
    rotations for blocks of ``rblock`` rows in parallel, each block seeding its rotors exactly at
    its first row (``rot[b]``; the rotor steps ``stp`` are formed once per step and shared). Sums
    are reduced in a fixed order, so the result does not depend on the number of threads. Rows of
    ``psi`` and ``thomas`` are taken inside the prange bodies (views taken outside ran slower).
    """
    invr2 = rows[3]
    h, dr = consts[0], consts[2]
    carry, rot, stp = scratch
    n, nl = psi.shape[1], psi.shape[2]
    ne = (nl + 1) // 2
    ca, cb = coupling[0, :nl // 2], coupling[1, :ne - 1]
    na, nb = ca.shape[0], cb.shape[0]
    nsteps = fields.shape[0]
    cblock = carry.shape[2]
    ncb = (nl + cblock - 1) // cblock
    nrb = (n + rblock - 1) // rblock
    for k in range(nsteps + 1):
        if k > 0:                 # rotor steps: the same for every row block, formed once
            _steps(stp[0], stp[1], fields[k - 1], h, dr, cb)
            _steps(stp[2], stp[3], fields[k - 1], h, dr, ca)
        if k < nsteps:
            _steps(stp[4], stp[5], fields[k], h, dr, ca)
            _steps(stp[6], stp[7], fields[k], h, dr, cb)
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
                xr = psi[0, i]
                xi = psi[1, i]
                if k > 0:
                    _rotate(xr, xi, ne, 1, nb, rt[0], rt[1], stp[0], stp[1])
                    _rotate(xr, xi, 0, ne, na, rt[2], rt[3], stp[2], stp[3])
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
                    _rotate(xr, xi, 0, ne, na, rt[4], rt[5], stp[4], stp[5])
                    _rotate(xr, xi, ne, 1, nb, rt[6], rt[7], stp[6], stp[7])
            if k > 0:
                partial[k - 1, rb, 0] = pn
                partial[k - 1, rb, 1] = pz
                partial[k - 1, rb, 2] = pc
        if k == nsteps:
            break
        for cb_ in prange(ncb):
            j0 = cb_ * cblock
            j1 = min(nl, j0 + cblock)
            cy = carry[cb_]
            _forward_inplace(psi, thomas, rows, cols, consts, j0, j1, cy)
            car = cy[0]
            cai = cy[1]
            for j in range(j1 - j0):
                car[j] = 0.0
                cai[j] = 0.0
            for i in range(n - 1, -1, -1):
                _back_substitute(psi[0, i, j0:j1], psi[1, i, j0:j1], thomas[2, i, j0:j1],
                                 thomas[3, i, j0:j1], car, cai)


@njit(cache=True, fastmath=False)
def reduce_partial(partial, out):
    """out[k] = Σ_blocks partial[k, block] summed from the outermost block inward (fixed order)."""
    for k in range(partial.shape[0]):
        for q in range(3):
            acc = 0.0
            for rb in range(partial.shape[1] - 1, -1, -1):
                acc += partial[k, rb, q]
            out[k, q] = acc
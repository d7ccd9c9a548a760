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
* ``consts`` (4,): τ = dt/2, 1/2μ, dr, 1/μ;
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
    rot, stp = scratch[1], scratch[2]
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
def _row_momentum(x, l2, l1, u1, u2, ne, ca, cb, inv12h, invr):
    """Row j's share of ⟨p_z⟩ = Σ_l 2c_l Σ_j [Im(a*_j ∂_r b_j) + (l+1)/r_j Im(a*_j b_j)], a = u_l,
    b = u_{l+1}, ∂_r b_j = (b_{j−2} − 8b_{j−1} + 8b_{j+1} − b_{j+2})/(12 dr) (module docstring).
    ``x`` is row j, ``l2``, ``l1``, ``u1``, ``u2`` rows j − 2, j − 1, j + 1, j + 2 (zero rows beyond
    the grid), each (2, L) (real, imaginary), even/odd column order."""
    xr, xi = x[0], x[1]
    acc = 0.0
    for p in range(ca.shape[0]):        # pairs (2p, 2p+1): a in column p, b in column ne + p
        q = ne + p
        dbr = (l2[0, q] - 8.0 * l1[0, q] + 8.0 * u1[0, q] - u2[0, q]) * inv12h
        dbi = (l2[1, q] - 8.0 * l1[1, q] + 8.0 * u1[1, q] - u2[1, q]) * inv12h
        kap = (2 * p + 1) * invr
        acc += ca[p] * (xr[p] * dbi - xi[p] * dbr + kap * (xr[p] * xi[q] - xi[p] * xr[q]))
    for p in range(cb.shape[0]):        # pairs (2p+1, 2p+2): a in column ne + p, b in column p + 1
        a = ne + p
        q = p + 1
        dbr = (l2[0, q] - 8.0 * l1[0, q] + 8.0 * u1[0, q] - u2[0, q]) * inv12h
        dbi = (l2[1, q] - 8.0 * l1[1, q] + 8.0 * u1[1, q] - u2[1, q]) * inv12h
        kap = (2 * p + 2) * invr
        acc += cb[p] * (xr[a] * dbi - xi[a] * dbr + kap * (xr[a] * xi[q] - xi[a] * xr[q]))
    return 2.0 * acc


@njit(cache=True, fastmath=False)
def _final_row(psi, i, k, ne, ca, cb, rows, dr, keep, surface, i_surf):
    """What is made of the final (closed, masked) row i of step k, rows visited from the top down:
    returns its shares of the norm, ⟨r cosθ⟩ and ⟨cosθ · dV/dr⟩ and the momentum share of row
    i + 2 (which needs rows i … i + 4), and copies the row into ``surface[k]`` when it is one of the
    five rows from ``i_surf``. ``keep`` (5, 2, L) is a ring of copies: keep[r % 4] holds the final
    row r for r = i + 1 … i + 4 (zero above the grid; a zeroed ring starts the visit) and keep[4]
    stays zero; on return keep[i % 4] holds row i (copies: the caller may change the rows of the
    state afterwards), so after row 0 keep[0] … keep[3] hold rows 0 … 3."""
    xr = psi[0, i]
    xi = psi[1, i]
    n = psi.shape[1]
    nl = xr.shape[0]
    rn, rz = _row_observables(xr, xi, ne, ca, cb)
    pm = 0.0
    slot = keep[i % 4]                  # row i + 4 until it is overwritten below
    if i + 2 < n:
        pm = _row_momentum(keep[(i + 2) % 4], psi[:, i], keep[(i + 1) % 4], keep[(i + 3) % 4], slot, ne, ca,
                           cb, 1.0 / (12.0 * dr), rows[6, i + 2])
    for j in range(nl):
        slot[0, j] = xr[j]
        slot[1, j] = xi[j]
    if 0 <= i_surf <= i < i_surf + 5:
        for j in range(nl):
            surface[k, 0, i - i_surf, j] = xr[j]
            surface[k, 1, i - i_surf, j] = xi[j]
    return rn, (i + 1) * dr * rz, rows[7, i] * rz, pm


@njit(cache=True, fastmath=False)
def _clear_keep(keep):
    for q in range(keep.shape[0]):
        for c in range(2):
            for j in range(keep.shape[2]):
                keep[q, c, j] = 0.0


@njit(cache=True, fastmath=False)
def _first_rows_momentum(keep, ne, ca, cb, rows, dr):
    """Momentum shares of rows 1 and 0 after the top-down visit (:func:`_final_row`: keep[0] = row 0,
    keep[1] = row 1, keep[2] = row 2, keep[3] = row 3); u = 0 below row 0."""
    z = keep[4]
    h = 1.0 / (12.0 * dr)
    share = 0.0
    if rows.shape[1] > 1:
        share += _row_momentum(keep[1], z, keep[0], keep[2], keep[3], ne, ca, cb, h, rows[6, 1])
    return share + _row_momentum(keep[0], z, z, keep[1], keep[2], ne, ca, cb, h, rows[6, 0])


@njit(cache=True, fastmath=False)
def propagate_chunk(psi, thomas, rows, cols, consts, coupling, fields, mask, i_abs, scratch, out, surface,
                    i_surf):
    """Advance the state ``psi`` by ``len(fields)`` Strang steps (dt = 2τ) with mid-step fields
    ``fields``; the state is the true one on entry and on exit.

    ``scratch`` = (carry (6, L), rot (8, P), stp (8, P), keep (5, 2, L)); y of the forward sweep lives
    in the state between the two sweeps (:func:`_forward_inplace`). After step k the state is
    multiplied by ``mask`` (rows ≥ ``i_abs``) and ``out[k]`` receives (norm, ⟨r cosθ⟩, ⟨cosθ/r²⟩,
    ⟨p_z⟩) of the masked state, ⟨f⟩ = Σᵢ f(rᵢ) Σ_l 2c_l Re(u*_{i,l} u_{i,l+1}) and ⟨p_z⟩ as in
    :func:`_row_momentum`; ``surface[k]`` (2, 5, L) receives rows ``i_surf`` … ``i_surf`` + 4 of it
    (none when ``i_surf`` < 0).
    """
    pr, pi, cr, ci = psi[0], psi[1], thomas[2], thomas[3]
    h, dr = consts[0], consts[2]    # the rotations cover dt/2, which is also the Crank–Nicolson τ
    carry, rot, stp, keep = scratch
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
        _clear_keep(keep)
        norm = 0.0
        zsum = 0.0
        csum = 0.0
        psum = 0.0
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
            rn, rz, rc, rp = _final_row(psi, i, k, ne, ca, cb, rows, dr, keep, surface, i_surf)
            norm += rn
            zsum += rz
            csum += rc
            psum += rp
            if not last:
                if reseed:
                    _seed(rot[4], rot[5], e_next, h, ri, ca)
                    _seed(rot[6], rot[7], e_next, h, ri, cb)
                _rotate(xr, xi, 0, ne, na, rot[4], rot[5], stp[4], stp[5])
                _rotate(xr, xi, ne, 1, nb, rot[6], rot[7], stp[6], stp[7])
        out[k, 0] = norm
        out[k, 1] = zsum
        out[k, 2] = csum
        out[k, 3] = psum + _first_rows_momentum(keep, ne, ca, cb, rows, dr)


@njit(cache=True, fastmath=False, parallel=True)
def propagate_chunk_parallel(psi, thomas, rows, cols, consts, coupling, fields, mask, i_abs,
                             scratch, partial, rblock, surface, i_surf):
    """The steps of :func:`propagate_chunk`, unfused, for several threads. ``partial[k, b]``
    (shape (nsteps, n_rblocks, 4)) receives row block b's share of step k's (norm, ⟨r cosθ⟩,
    ⟨cosθ/r²⟩, ⟨p_z⟩); :func:`reduce_partial` adds the shares.

    ``scratch`` = (carry (n_cblocks, 6, cblock), rot (n_rblocks, 8, P), stp (8, P), keep (5, 2, L),
    keep[4] zero). Per step: Crank–Nicolson for blocks of ``cblock`` columns in parallel, each
    block sweeping in place like :func:`propagate_chunk` (``carry[b]``: the carry of the backward
    sweep and the scratch rows of :func:`_forward_inplace`), then for blocks of ``rblock`` rows in
    parallel: closing rotations, mask, observables and the surface rows; the momentum (which
    reads the neighbouring rows); the next opening rotations. Each block seeds its rotors exactly
    at its first row (``rot[b]``; the rotor steps ``stp`` are formed once per step and shared).
    Sums are reduced in a fixed order, so the result does not depend on the number of threads.
    Rows of ``psi`` and ``thomas`` are taken inside the prange bodies (views taken outside ran
    slower).
    """
    force = rows[7]
    h, dr = consts[0], consts[2]
    carry, rot, stp, keep = scratch
    n, nl = psi.shape[1], psi.shape[2]
    ne = (nl + 1) // 2
    ca, cb = coupling[0, :nl // 2], coupling[1, :ne - 1]
    na, nb = ca.shape[0], cb.shape[0]
    nsteps = fields.shape[0]
    cblock = carry.shape[2]
    ncb = (nl + cblock - 1) // cblock
    nrb = (n + rblock - 1) // rblock
    zero = keep[4]
    for k in range(nsteps + 1):
        if k > 0:                 # rotor steps: the same for every row block, formed once
            _steps(stp[0], stp[1], fields[k - 1], h, dr, cb)
            _steps(stp[2], stp[3], fields[k - 1], h, dr, ca)
            for rb in prange(nrb):
                i1 = min(n, (rb + 1) * rblock)
                i0 = rb * rblock
                rt = rot[rb]
                pn = 0.0
                pz = 0.0
                pc = 0.0
                e = fields[k - 1]
                _seed(rt[0], rt[1], e, h, i1 * dr, cb)
                _seed(rt[2], rt[3], e, h, i1 * dr, ca)
                for i in range(i1 - 1, i0 - 1, -1):
                    xr = psi[0, i]
                    xi = psi[1, i]
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
                    pc += force[i] * rz
                    if 0 <= i_surf <= i < i_surf + 5:
                        for j in range(nl):
                            surface[k - 1, 0, i - i_surf, j] = xr[j]
                            surface[k - 1, 1, i - i_surf, j] = xi[j]
                partial[k - 1, rb, 0] = pn
                partial[k - 1, rb, 1] = pz
                partial[k - 1, rb, 2] = pc
            for rb in prange(nrb):
                i1 = min(n, (rb + 1) * rblock)
                i0 = rb * rblock
                pp = 0.0
                for i in range(i1 - 1, i0 - 1, -1):
                    l2 = psi[:, i - 2] if i >= 2 else zero
                    l1 = psi[:, i - 1] if i >= 1 else zero
                    u1 = psi[:, i + 1] if i + 1 < n else zero
                    u2 = psi[:, i + 2] if i + 2 < n else zero
                    pp += _row_momentum(psi[:, i], l2, l1, u1, u2, ne, ca, cb, 1.0 / (12.0 * dr), rows[6, i])
                partial[k - 1, rb, 3] = pp
        if k < nsteps:
            _steps(stp[4], stp[5], fields[k], h, dr, ca)
            _steps(stp[6], stp[7], fields[k], h, dr, cb)
            for rb in prange(nrb):
                i1 = min(n, (rb + 1) * rblock)
                i0 = rb * rblock
                rt = rot[rb]
                e = fields[k]
                _seed(rt[4], rt[5], e, h, i1 * dr, ca)
                _seed(rt[6], rt[7], e, h, i1 * dr, cb)
                for i in range(i1 - 1, i0 - 1, -1):
                    xr = psi[0, i]
                    xi = psi[1, i]
                    _rotate(xr, xi, 0, ne, na, rt[4], rt[5], stp[4], stp[5])
                    _rotate(xr, xi, ne, 1, nb, rt[6], rt[7], stp[6], stp[7])
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
        for q in range(partial.shape[2]):
            acc = 0.0
            for rb in range(partial.shape[1] - 1, -1, -1):
                acc += partial[k, rb, q]
            out[k, q] = acc

# -- velocity gauge ------------------------------------------------------------------------------

@njit(cache=True, fastmath=False)
def _pair_forward(psi, ja, jb, m, ub, deriv, qc, qs):
    """Forward sweep of the derivative factors of ``m`` pairs, all rows.

    Pair p holds a = u_l in column ja + p and b = u_{l+1} in column jb + p; s± = (a ± b)/√2 solve
    (M₁ ± (β_p/2)Δ₁) x± = (M₁ ∓ (β_p/2)Δ₁) s± with ``ub[p]`` = β_p/(4 dr) and M₁, Δ₁ as in the module
    docstring; ``deriv`` = (4/6, 1/6, (4 + δ)/6, δ): the corner rows are the corrected ones
    (M₁₁ = M₁_NN = (4 + δ)/6, Δ₁₁ = −Δ₁_NN = δ/(2dr)). Writes y± of the forward elimination over (a, b) and the
    Thomas factors c± into ``qc[0, :, p]``, ``qc[1, :, p]``; ``qs`` (18, P) is scratch: s± of rows
    i − 1, i, i + 1 (rows 0–11), y± of row i − 1 (12–15), c± of row i − 1 (16–17). Real matrices:
    the real and imaginary parts share the factors.
    """
    pr, pi = psi[0], psi[1]
    md, mo, mf, delta = deriv[0], deriv[1], deriv[2], deriv[3]
    n = pr.shape[0]
    sq = 1.0 / math.sqrt(2.0)
    for p in range(m):
        for q in range(18):
            qs[q, p] = 0.0
        ar = pr[0, ja + p]
        ai = pi[0, ja + p]
        br = pr[0, jb + p]
        bi = pi[0, jb + p]
        qs[4, p] = (ar + br) * sq
        qs[5, p] = (ai + bi) * sq
        qs[6, p] = (ar - br) * sq
        qs[7, p] = (ai - bi) * sq
    for i in range(n):
        for p in range(m):
            if i + 1 < n:
                ar = pr[i + 1, ja + p]
                ai = pi[i + 1, ja + p]
                br = pr[i + 1, jb + p]
                bi = pi[i + 1, jb + p]
                qs[8, p] = (ar + br) * sq
                qs[9, p] = (ai + bi) * sq
                qs[10, p] = (ar - br) * sq
                qs[11, p] = (ai - bi) * sq
            else:
                qs[8, p] = 0.0
                qs[9, p] = 0.0
                qs[10, p] = 0.0
                qs[11, p] = 0.0
            u = ub[p]
            lo_p = mo - u                  # plus system: lower, upper; the minus system swaps them
            up_p = mo + u
            if i == 0:
                dp = mf + delta * u        # diagonal of M₁ + (β/2)Δ₁
                dm = mf - delta * u        # ... of M₁ − (β/2)Δ₁
            elif i == n - 1:
                dp = mf - delta * u
                dm = mf + delta * u
            else:
                dp = md
                dm = md
            # plus: (M₁ + β/2 Δ₁) x = (M₁ − β/2 Δ₁) s: rhs diagonal dm, rhs upper lo_p, rhs lower up_p
            rr = dm * qs[4, p] + lo_p * qs[8, p] + up_p * qs[0, p]
            ri = dm * qs[5, p] + lo_p * qs[9, p] + up_p * qs[1, p]
            w = 1.0 / (dp - lo_p * qs[16, p])
            cp = up_p * w
            yr = (rr - lo_p * qs[12, p]) * w
            yi = (ri - lo_p * qs[13, p]) * w
            # minus: (M₁ − β/2 Δ₁) x = (M₁ + β/2 Δ₁) s
            sr = dp * qs[6, p] + up_p * qs[10, p] + lo_p * qs[2, p]
            si = dp * qs[7, p] + up_p * qs[11, p] + lo_p * qs[3, p]
            v = 1.0 / (dm - up_p * qs[17, p])
            cm = lo_p * v
            zr = (sr - up_p * qs[14, p]) * v
            zi = (si - up_p * qs[15, p]) * v
            pr[i, ja + p] = yr
            pi[i, ja + p] = yi
            pr[i, jb + p] = zr
            pi[i, jb + p] = zi
            qc[0, i, p] = cp
            qc[1, i, p] = cm
            qs[12, p] = yr
            qs[13, p] = yi
            qs[14, p] = zr
            qs[15, p] = zi
            qs[16, p] = cp
            qs[17, p] = cm
            for q in range(4):
                qs[q, p] = qs[4 + q, p]
                qs[4 + q, p] = qs[8 + q, p]


@njit(cache=True, fastmath=False)
def _pair_back_row(xr, xi, i, ja, jb, m, qc, qs):
    """Row i of the backward sweep of :func:`_pair_forward`: x±ᵢ = y±ᵢ − c±ᵢ x±ᵢ₊₁ (x±ᵢ₊₁ in
    ``qs`` rows 0–3, zero above the last row), then (a, b) = ((x₊ + x₋)/√2, (x₊ − x₋)/√2) written over
    the row."""
    sq = 1.0 / math.sqrt(2.0)
    for p in range(m):
        cp = qc[0, i, p]
        cm = qc[1, i, p]
        pr_ = xr[ja + p] - cp * qs[0, p]
        pi_ = xi[ja + p] - cp * qs[1, p]
        mr_ = xr[jb + p] - cm * qs[2, p]
        mi_ = xi[jb + p] - cm * qs[3, p]
        qs[0, p] = pr_
        qs[1, p] = pi_
        qs[2, p] = mr_
        qs[3, p] = mi_
        xr[ja + p] = (pr_ + mr_) * sq
        xi[ja + p] = (pi_ + mi_) * sq
        xr[jb + p] = (pr_ - mr_) * sq
        xi[jb + p] = (pi_ - mi_) * sq


@njit(cache=True, fastmath=False)
def _pair_rotate(xr, xi, ja, jb, m, g, invr):
    """exp(−iφ σ_y) on the pairs (a, b) = (columns ja + p, jb + p) of one row, φ_p = ``g[p]``/r, in the
    Cayley form: t = φ/2, (a, b) → (C a − S b, S a + C b), C = (1 − t²)/(1 + t²), S = 2t/(1 + t²)
    (orthogonal exactly; the rotation angle 2 arctan(φ/2) = φ − φ³/12 + …)."""
    for p in range(m):
        t = 0.5 * g[p] * invr
        d = 1.0 / (1.0 + t * t)
        c = (1.0 - t * t) * d
        s = 2.0 * t * d
        ar = xr[ja + p]
        ai = xi[ja + p]
        br = xr[jb + p]
        bi = xi[jb + p]
        xr[ja + p] = c * ar - s * br
        xi[ja + p] = c * ai - s * bi
        xr[jb + p] = s * ar + c * br
        xi[jb + p] = s * ai + c * bi


@njit(cache=True, fastmath=False)
def _pair_factor(psi, ja, jb, m, ub, deriv, qc, qs, rja, rjb, rm, g, invr):
    """One derivative factor (:func:`_pair_forward` and its backward sweep) on all rows, each row
    then rotated by :func:`_pair_rotate` on the pairs (rja + p, rjb + p), p < ``rm``."""
    _pair_forward(psi, ja, jb, m, ub, deriv, qc, qs)
    for p in range(m):
        for q in range(4):
            qs[q, p] = 0.0
    n = psi.shape[1]
    for i in range(n - 1, -1, -1):
        xr = psi[0, i]
        xi = psi[1, i]
        _pair_back_row(xr, xi, i, ja, jb, m, qc, qs)
        if rm > 0:
            _pair_rotate(xr, xi, rja, rjb, rm, g, invr[i])


@njit(cache=True, fastmath=False)
def propagate_chunk_velocity(psi, thomas, rows, cols, consts, coupling, potentials, mask, i_abs, scratch,
                             deriv, out, surface, i_surf):
    """Advance ``psi`` by ``len(potentials)`` velocity-gauge steps (dt = 2τ) with mid-step vector
    potentials ``potentials``; the state is the true one on entry and on exit.

    One step at A (module docstring, "Velocity gauge"), factors in the order applied:
    Q_A, R_A, Q_B, R_B, C, R_B, Q_B, R_A, Q_A; Q_G the derivative factors and R_G the 1/r rotations of
    the pairs of group G, C Crank–Nicolson for H₀. ``consts`` = (τ, 1/2μ, dr, 1/μ); ``deriv`` as in
    :func:`_pair_forward`; ``scratch`` = (carry (6, L), keep (5, 2, L), qs (18, P), qc (2, N, P), gv (4, P)).
    Steps with A = 0 are Crank–Nicolson alone. After step k: mask, ``out[k]`` and ``surface[k]`` as
    in :func:`propagate_chunk` (⟨p_z⟩ the canonical momentum).
    """
    pr, pi, cr, ci = psi[0], psi[1], thomas[2], thomas[3]
    tau, dr, inv_mu = consts[0], consts[2], consts[3]
    carry, keep, qs, qc, gv = scratch
    invr = rows[6]
    n, nl = pr.shape
    ne = (nl + 1) // 2
    ca, cb = coupling[0, :nl // 2], coupling[1, :ne - 1]
    na, nb = ca.shape[0], cb.shape[0]
    ub_a, ub_b, g_a, g_b = gv[0], gv[1], gv[2], gv[3]
    for k in range(potentials.shape[0]):
        a = potentials[k]
        field = a != 0.0
        if field:
            for p in range(na):
                ub_a[p] = tau * a * ca[p] * inv_mu / (4.0 * dr)
                g_a[p] = tau * a * ca[p] * (2 * p + 1) * inv_mu
            for p in range(nb):
                ub_b[p] = tau * a * cb[p] * inv_mu / (4.0 * dr)
                g_b[p] = tau * a * cb[p] * (2 * p + 2) * inv_mu
            _pair_factor(psi, 0, ne, na, ub_a, deriv, qc, qs, 0, ne, na, g_a, invr)     # Q_A, R_A
            _pair_factor(psi, ne, 1, nb, ub_b, deriv, qc, qs, ne, 1, nb, g_b, invr)    # Q_B, R_B
        _forward_inplace(psi, thomas, rows, cols, consts, 0, nl, carry)
        car = carry[0]
        cai = carry[1]
        for j in range(nl):
            car[j] = 0.0
            cai[j] = 0.0
        for i in range(n - 1, -1, -1):
            xr = pr[i]
            xi = pi[i]
            _back_substitute(xr, xi, cr[i], ci[i], car, cai)
            if field:
                _pair_rotate(xr, xi, ne, 1, nb, g_b, invr[i])                                 # R_B
        if field:
            _pair_factor(psi, ne, 1, nb, ub_b, deriv, qc, qs, 0, ne, na, g_a, invr)    # Q_B, R_A
            _pair_forward(psi, 0, ne, na, ub_a, deriv, qc, qs)                          # Q_A
            for p in range(na):
                for q in range(4):
                    qs[q, p] = 0.0
        _clear_keep(keep)
        norm = 0.0
        zsum = 0.0
        csum = 0.0
        psum = 0.0
        for i in range(n - 1, -1, -1):
            xr = pr[i]
            xi = pi[i]
            if field:
                _pair_back_row(xr, xi, i, 0, ne, na, qc, qs)
            if i >= i_abs:
                mk = mask[i]
                for j in range(nl):
                    xr[j] *= mk
                    xi[j] *= mk
            rn, rz, rc, rp = _final_row(psi, i, k, ne, ca, cb, rows, dr, keep, surface, i_surf)
            norm += rn
            zsum += rz
            csum += rc
            psum += rp
        out[k, 0] = norm
        out[k, 1] = zsum
        out[k, 2] = csum
        out[k, 3] = psum + _first_rows_momentum(keep, ne, ca, cb, rows, dr)

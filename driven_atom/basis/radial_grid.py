"""Uniform radial grid and the Numerov-corrected radial Hamiltonian per partial wave.

The reduced radial function u_l(r) = r R_l(r) lives on r_i = i·dr, i = 1..N (u(0) = 0 and
u(r_max + dr) = 0 are the boundary conditions). Per l the field-free Hamiltonian is

    H_l = −(1/2μ) M⁻¹ Δ + V_l,   V_l(r) = l(l+1)/(2μ r²) − Z/r,

with Δ = tridiag(1, −2, 1)/dr² and M = 1 + dr² Δ/12 = tridiag(1, 10, 1)/12: the three-point
Numerov form, error O(dr⁴) (Muller, Laser Physics 9, 138 (1999); the same operator pair is used
by Bauer & Koval, Comput. Phys. Commun. 174, 396 (2006)). Default grid of the basis route:
dr = 0.08, r_max = 200 bohr, where E_n (n ≤ 6, l < n) is within 1e-5 relative of −Z²μ/(2n²).

For l = 0 the wave function has a cusp, u″(0) = −2Zμ u′(0) ≠ 0, which the plain scheme misses
(it implies u″(0) = 0 through the ghost point) and the error falls to O(dr²). Muller's fix
changes the first diagonal element of Δ,

    Δ₁₁ = −(2/dr²) · (1 − Zμ dr / (12 − 10 Zμ dr)),

and keeps M = 1 + dr²Δ/12 *with that same Δ* (so M₁₁ = 1 + dr²Δ₁₁/12). Derivation: demand that
the first row Δu = M u″ hold for u = r − Zμ r² + c r³ + d r⁴ (the l = 0 series with the cusp);
the r and r² terms fix the correction above and the r³, r⁴ terms then cancel to O(dr⁴) relative.
For l = 1 the plain scheme drops u″(0) = 2u₂ ≠ 0 (u = r² − (Zμ/2) r³ + …) and the observed order
falls to ~3; the same construction applied to that series (our derivation, Muller's method) gives

    Δ₁₁ = −(2/dr²) · (1 + 1/(10 − 3 Zμ dr)),

which restores O(dr⁴) (2p error 2.4e-5 → 1.3e-7 at dr = 0.1, see tests/test_radial_grid.py).
For l ≥ 2, u″(0) = 0 and no correction is needed. A model potential tends to −Z/r at the
nucleus (Z the nuclear charge), so the same rows apply with that Z: the series' r and r² terms
depend on Z alone, the regular part of V enters at O(dr⁴). Because M is a polynomial in Δ the two commute, so M⁻¹Δ is symmetric and H_l is a real
symmetric matrix for every l, corrected row included: Crank–Nicolson built on it,
(M + iτK)ψ′ = (M − iτK)ψ with K = −Δ/(2μ) + M·diag(V), is then exactly unitary.

Stretched grid (:func:`stretched_grid`): r = g(x) on a uniform x grid (unit steps) with spacing
g′(x) = dr_max − (dr_max − dr_min) exp(−(x/w)²), fine at the nucleus (g″(0) = 0) and coarse far
out. The Liouville transformation u = √g′ φ turns u″ = Q u into φ″ = (g′²Q − ½{g, x})φ with the
Schwarzian {g, x} = g‴/g′ − (3/2)(g″/g′)², to which the same Numerov pair applies in x; the
cusp rows use Zμ·dr_min as Zμ·dr (the series of φ in x has the same form since g″(0) = 0). With
v = g′φ the problem is the symmetric H_s = G^{−1/2}[−(1/2μ)M⁻¹Δ + g′²V − {g, x}/(4μ)]G^{−1/2},
G = diag(g′²), and Σ vᵢ² = 1 normalises ∫u² dr, so dipoles are Σ v_a r v_b on either grid.

Eigenstates come from the dense symmetric H_l (M⁻¹Δ formed by one banded solve) with LAPACK's
subset driver; for N ≈ 2000 that takes well under a second per l. Vectors are columns with
Σᵢ|uᵢ|² = 1 (so uᵢ ≈ √dr · u(rᵢ)), sign fixed so that the first lobe is positive (as R_nl near 0).

>>> from driven_atom.atom import Atom
>>> g = uniform_grid(60.0, 0.1)
>>> E, U = eigenstates(g, 0, Atom(1), n_states=2)
>>> [round(float(e), 4) for e in E]
[-0.5, -0.125]
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from driven_atom.errors import InputError


@dataclass(frozen=True)
class RadialGrid:
    """Uniform radial grid r_i = i·dr, i = 1..n_points; r_max = n_points·dr (atomic units)."""

    dr: float
    n_points: int

    @property
    def r(self) -> np.ndarray:
        return self.dr * np.arange(1, self.n_points + 1, dtype=float)

    @property
    def r_max(self) -> float:
        return self.dr * self.n_points


def uniform_grid(r_max, dr) -> RadialGrid:
    """The uniform grid of spacing ``dr`` reaching ``r_max`` (bohr; strings with units accepted).

    ``r_max`` is rounded to a whole number of steps.

    >>> g = uniform_grid(10.0, 0.5)
    >>> g.n_points, float(g.r[0]), g.r_max
    (20, 0.5, 10.0)
    """
    from driven_atom.units import to_au

    r_max = to_au(r_max, "length", name="r_max")
    dr = to_au(dr, "length", name="dr")
    if not (dr > 0) or not np.isfinite(dr):
        raise InputError(f"`dr` must be > 0 bohr, got {dr!r}")
    if not (r_max >= 4 * dr) or not np.isfinite(r_max):
        raise InputError(f"`r_max` must be finite and at least 4·dr = {4 * dr:g} bohr, got {r_max!r}")
    return RadialGrid(dr=float(dr), n_points=int(round(r_max / dr)))


@dataclass(frozen=True)
class NumerovOperators:
    """The tridiagonal pieces of H_l = −(1/2μ) M⁻¹Δ + V_l on one grid (atomic units).

    ``d_diag``/``d_off`` hold Δ (off-diagonal of length N−1), ``m_diag``/``m_off`` hold
    M = 1 + dr²Δ/12, ``potential`` V_l(r_i); ``mu`` the reduced mass, ``l`` the partial wave.
    """

    l: int
    mu: float
    d_diag: np.ndarray
    d_off: np.ndarray
    m_diag: np.ndarray
    m_off: np.ndarray
    potential: np.ndarray

    def m_banded(self) -> np.ndarray:
        """M in the (3, N) layout of :func:`scipy.linalg.solve_banded` with (l, u) = (1, 1)."""
        n = self.m_diag.size
        ab = np.zeros((3, n))
        ab[0, 1:] = self.m_off
        ab[1] = self.m_diag
        ab[2, :-1] = self.m_off
        return ab

    def kinetic_dense(self) -> np.ndarray:
        """The dense symmetric kinetic matrix T = −(1/2μ) M⁻¹Δ."""
        from scipy.linalg import solve_banded

        n = self.d_diag.size
        delta = np.diag(self.d_diag) + np.diag(self.d_off, 1) + np.diag(self.d_off, -1)
        t = solve_banded((1, 1), self.m_banded(), delta) * (-0.5 / self.mu)
        return 0.5 * (t + t.T)       # symmetric in exact arithmetic (M and Δ commute)

    def hamiltonian_dense(self) -> np.ndarray:
        """The dense symmetric H_l = T + diag(V_l)."""
        h = self.kinetic_dense()
        h[np.diag_indices_from(h)] += self.potential
        return h

    def apply(self, u: np.ndarray) -> np.ndarray:
        """H_l u without forming H (one tridiagonal solve); ``u`` may be (N,) or (N, k)."""
        from scipy.linalg import solve_banded

        u = np.asarray(u)
        du = self.d_diag.reshape((-1,) + (1,) * (u.ndim - 1)) * u
        du[1:] += self.d_off.reshape((-1,) + (1,) * (u.ndim - 1)) * u[:-1]
        du[:-1] += self.d_off.reshape((-1,) + (1,) * (u.ndim - 1)) * u[1:]
        return (-0.5 / self.mu) * solve_banded((1, 1), self.m_banded(), du) \
            + self.potential.reshape((-1,) + (1,) * (u.ndim - 1)) * u


def first_row_correction(l: int, Z: float, mu: float, dr: float) -> float:
    """The corrected Δ₁₁·dr² of partial wave ``l`` (−2 for l ≥ 2).

    l = 0: −2(1 − Zμ dr/(12 − 10 Zμ dr)) (Muller, Laser Phys. 9, 138 (1999));
    l = 1: −2(1 + 1/(10 − 3 Zμ dr)) (same construction on u = r² − (Zμ/2) r³ + …; module docstring).

    >>> first_row_correction(0, 1, 1.0, 0.0), first_row_correction(1, 1, 1.0, 0.0)
    (-2.0, -2.2)
    """
    x = Z * mu * dr
    if x >= 1.0:
        raise InputError(f"`dr` must be < 1/(Zμ) = {1 / (Z * mu):g} bohr, got {dr!r}")
    if l == 0:
        return -2.0 * (1.0 - x / (12.0 - 10.0 * x))
    if l == 1:
        return -2.0 * (1.0 + 1.0 / (10.0 - 3.0 * x))
    return -2.0


def numerov_operators(grid: RadialGrid, l: int, atom) -> NumerovOperators:
    """Δ, M = 1 + dr²Δ/12 and V_l for partial wave ``l`` of ``atom`` (Z, reduced mass μ, and its
    potential ``atom.potential(r, l)``).

    >>> from driven_atom.atom import Atom
    >>> ops = numerov_operators(uniform_grid(1.0, 0.25), 0, Atom(1))
    >>> (ops.m_diag * 12).round(4).tolist()     # 10 everywhere but the corrected first row
    [10.0526, 10.0, 10.0, 10.0]
    """
    if isinstance(l, bool) or int(l) != l or l < 0:
        raise InputError(f"`l` must be an integer >= 0, got {l!r}")
    l = int(l)
    mu = atom.reduced_mass
    h = grid.dr
    n = grid.n_points
    r = grid.r
    d_diag = np.full(n, -2.0 / h**2)
    d_diag[0] = first_row_correction(l, atom.Z, mu, h) / h**2
    d_off = np.full(n - 1, 1.0 / h**2)
    m_diag = 1.0 + h**2 * d_diag / 12.0
    m_off = h**2 * d_off / 12.0
    potential = l * (l + 1) / (2.0 * mu * r**2) + atom.potential(r, l)
    return NumerovOperators(l=l, mu=mu, d_diag=d_diag, d_off=d_off, m_diag=m_diag, m_off=m_off,
                            potential=potential)


@dataclass(frozen=True)
class StretchedGrid:
    """r_i = g(i), i = 1..n_points, g′(x) = dr_max − (dr_max − dr_min)·exp(−(x/w)²) (bohr).

    ``r``, ``jacobian`` g′, ``schwarzian`` {g, x} at the points; ``r_max`` = g(n_points).
    """

    dr_min: float
    dr_max: float
    w: float
    n_points: int

    def _g(self, x):
        from scipy.special import erf

        return self.dr_max * x - (self.dr_max - self.dr_min) * self.w * (np.sqrt(np.pi) / 2) * erf(x / self.w)

    @property
    def r(self) -> np.ndarray:
        return self._g(np.arange(1, self.n_points + 1, dtype=float))

    @property
    def r_max(self) -> float:
        return float(self._g(float(self.n_points)))

    @property
    def jacobian(self) -> np.ndarray:
        x = np.arange(1, self.n_points + 1, dtype=float)
        return self.dr_max - (self.dr_max - self.dr_min) * np.exp(-((x / self.w) ** 2))

    @property
    def schwarzian(self) -> np.ndarray:
        x = np.arange(1, self.n_points + 1, dtype=float)
        gauss = (self.dr_max - self.dr_min) * np.exp(-((x / self.w) ** 2))
        g1 = self.dr_max - gauss
        g2 = gauss * 2 * x / self.w**2
        g3 = gauss * (2 / self.w**2) * (1 - 2 * x**2 / self.w**2)
        return g3 / g1 - 1.5 * (g2 / g1) ** 2


def stretched_grid(r_max, dr_min, dr_max, r_stretch) -> StretchedGrid:
    """Grid with spacing dr_min at the nucleus growing smoothly to dr_max; ``r_stretch`` (bohr)
    is where g(w) reaches it, w the width of the transition in steps.

    >>> g = stretched_grid(200.0, 0.02, 0.2, 5.0)
    >>> round(float(g.r[1] - g.r[0]), 3), round(float(g.r[-1] - g.r[-2]), 3), g.r_max >= 200.0
    (0.02, 0.2, True)
    """
    from driven_atom.units import to_au

    r_max = to_au(r_max, "length", name="r_max")
    dr_min = to_au(dr_min, "length", name="dr_min")
    dr_max = to_au(dr_max, "length", name="dr")
    r_stretch = to_au(r_stretch, "length", name="r_stretch")
    if not 0 < dr_min < dr_max:
        raise InputError(f"`dr_min` must be > 0 and < dr = {dr_max:g} bohr, got {dr_min!r}")
    if not 0 < r_stretch < r_max / 2:
        raise InputError(f"`r_stretch` must be > 0 and < r_max/2 = {r_max / 2:g} bohr, got {r_stretch!r}")
    w = _bisect(lambda w: StretchedGrid(dr_min, dr_max, w, 1)._g(w) - r_stretch,
                r_stretch / dr_max, r_stretch / dr_min * 2)
    grid = StretchedGrid(dr_min, dr_max, w, 1)
    n = int(_bisect(lambda x: grid._g(x) - r_max, 1.0, r_max / dr_min + 1.0))
    return StretchedGrid(dr_min, dr_max, w, n + 1)


def _bisect(f, lo: float, hi: float) -> float:
    """The root of ``f`` between ``lo`` and ``hi`` (a sign change), by bisection to the last bits
    (scipy.optimize would cost the light commands half a second of import for two roots).

    >>> round(_bisect(lambda x: x * x - 2.0, 0.0, 2.0), 15)
    1.414213562373095
    """
    f_lo = float(f(lo))
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if mid in (lo, hi):
            break
        f_mid = float(f(mid))
        if (f_mid < 0) == (f_lo < 0):
            lo, f_lo = mid, f_mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def stretched_hamiltonian(grid: StretchedGrid, l: int, atom) -> np.ndarray:
    """Dense symmetric H_s of partial wave ``l`` on a stretched grid (module docstring)."""
    mu = atom.reduced_mass
    n = grid.n_points
    r, jac = grid.r, grid.jacobian
    d_diag = np.full(n, -2.0)                        # unit steps in x
    d_diag[0] = first_row_correction(l, atom.Z, mu, grid.dr_min)
    d_off = np.ones(n - 1)
    ops = NumerovOperators(l=l, mu=mu, d_diag=d_diag, d_off=d_off, m_diag=1.0 + d_diag / 12.0,
                           m_off=d_off / 12.0,
                           potential=jac**2 * (l * (l + 1) / (2.0 * mu * r**2) + atom.potential(r, l))
                           - grid.schwarzian / (4.0 * mu))
    return ops.hamiltonian_dense() / jac[:, None] / jac[None, :]


def _fix_signs(vectors: np.ndarray) -> np.ndarray:
    """Make the first lobe of each column positive (first entry above 1e-3 of its largest)."""
    mag = np.abs(vectors)
    first = np.argmax(mag > 1e-3 * mag.max(axis=0), axis=0)
    signs = np.sign(vectors[first, np.arange(vectors.shape[1])])
    signs[signs == 0] = 1.0
    return vectors * signs


def eigenstates(grid: RadialGrid | StretchedGrid, l: int, atom, *, e_max: float | None = None,
                n_states: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Eigen-energies (ascending) and eigenvectors (columns, Σ|vᵢ|² = 1, vᵢ ≈ √(Δrᵢ)·u(rᵢ)) of H_l
    on a uniform or a stretched grid.

    ``e_max`` keeps states with E ≤ e_max (hartree), ``n_states`` the lowest ones; with neither,
    all N. Bound states are those with E < 0; the rest are box continuum states whose energy
    density is given by :func:`density_of_states`. LAPACK runs on one thread (see
    :func:`reproducible_blas`), so the vectors are the same bit for bit whatever the thread settings.
    """
    from scipy.linalg import eigh

    if isinstance(grid, StretchedGrid):
        h = stretched_hamiltonian(grid, l, atom)
    else:
        h = numerov_operators(grid, l, atom).hamiltonian_dense()
    n = grid.n_points
    if n_states is not None and not 1 <= n_states <= n:
        raise InputError(f"`n_states` must be from 1 to {n}, got {n_states!r}")
    with reproducible_blas():
        if n_states is not None:
            energies, vectors = eigh(h, subset_by_index=(0, n_states - 1), driver="evr")
        elif e_max is not None:
            energies, vectors = eigh(h, subset_by_value=(-np.inf, float(e_max)), driver="evr")
        else:
            energies, vectors = eigh(h, driver="evr")
    return energies, _fix_signs(vectors)


def reproducible_blas():
    """Context in which BLAS/LAPACK use one thread.

    Multi-threaded BLAS sums in an order that depends on the thread count, which changes
    eigenvectors in the last bits; a run resumed from a checkpoint on another node (or under
    other ``OMP_NUM_THREADS``) must start from the very same states, so eigen-solves run here.
    """
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=1, user_api="blas")


def density_of_states(energies: np.ndarray) -> np.ndarray:
    """Density of box states ρ(E_k) ≈ 2/(E_{k+1} − E_{k−1}) (one-sided at the two ends).

    Energy-normalised continuum functions are u_E = u_k·√(ρ(E_k)/dr) for grid-normalised u_k
    (docs/physics.md). Needs at least two energies.

    >>> density_of_states(np.array([0.0, 1.0, 3.0, 6.0]))
    array([1.        , 0.66666667, 0.4       , 0.33333333])
    """
    e = np.asarray(energies, dtype=float)
    if e.size < 2:
        raise InputError(f"density_of_states needs at least 2 energies, got {e.size}")
    rho = np.empty_like(e)
    rho[1:-1] = 2.0 / (e[2:] - e[:-2])
    rho[0] = 1.0 / (e[1] - e[0])
    rho[-1] = 1.0 / (e[-1] - e[-2])
    return rho


def grid_spacing(grid) -> np.ndarray:
    """Δrᵢ at every point: dr (uniform) or g′(i) (stretched); vectors are vᵢ ≈ √Δrᵢ · u(rᵢ)."""
    if isinstance(grid, StretchedGrid):
        return grid.jacobian
    return np.full(grid.n_points, grid.dr)


def _pencil(grid, l: int, atom):
    """Tridiagonal T(E) = T₀ − E·B of the discrete radial equation T(E)φ = 0, as (diag, off) pairs
    for T₀ and B (lower off-diagonal, upper off-diagonal) and the map φ → v (eigenvector convention).

    Uniform grid: T₀ = −Δ/2μ + M·diag(V_l), B = M, v = φ. Stretched grid (unit steps in x):
    T₀ = −Δ/2μ + M·diag(W), W = g′²V_l − {g, x}/4μ, B = M·diag(g′²), v = g′φ (module docstring).
    """
    mu = atom.reduced_mass
    if isinstance(grid, StretchedGrid):
        n, r, jac = grid.n_points, grid.r, grid.jacobian
        d_diag = np.full(n, -2.0)
        d_diag[0] = first_row_correction(l, atom.Z, mu, grid.dr_min)
        d_off = np.ones(n - 1)
        m_diag, m_off = 1.0 + d_diag / 12.0, d_off / 12.0
        w = jac**2 * (l * (l + 1) / (2.0 * mu * r**2) + atom.potential(r, l)) - grid.schwarzian / (4.0 * mu)
        g2 = jac**2
        scale = jac
    else:
        ops = numerov_operators(grid, l, atom)
        d_diag, d_off, m_diag, m_off, w = ops.d_diag, ops.d_off, ops.m_diag, ops.m_off, ops.potential
        g2 = np.ones(grid.n_points)
        scale = np.ones(grid.n_points)
    t_diag = -d_diag / (2 * mu) + m_diag * w
    t_lo = -d_off / (2 * mu) + m_off * w[:-1]         # row i+1, column i
    t_up = -d_off / (2 * mu) + m_off * w[1:]          # row i, column i+1
    return (t_diag, t_lo, t_up), (m_diag * g2, m_off * g2[:-1], m_off * g2[1:]), scale


def continuum_state(grid, l: int, atom, energy: float) -> np.ndarray:
    """Energy-normalised continuum function of partial wave ``l`` at ``energy`` > 0 (hartree) in the
    eigenvector convention vᵢ = √Δrᵢ · u_E(rᵢ), with ∫u_E u_E′ dr = δ(E − E′).

    The discrete radial equation T(E)φ = 0 of the grid's own Numerov operators is solved outward
    from the origin (φ₀ = 0; each row gives the next point), so radial integrals Σ v_a r v_E are
    those of the grid's eigenvectors. Normalisation far out, where u ≈ A sin(θ(r)) with the local
    wave number k(r) = √(2μ(E − V_l − l(l+1)/2μr²)): three neighbours give
    A² = (uᵢ² − u_{i−1}u_{i+1})/sin²(k̃h), exact for a sine of the discrete wave number k̃ of
    Numerov's recursion, cos k̃h = (1 − 5k²h²/12)/(1 + k²h²/12) (h the local step); the
    energy-normalised amplitude is √(2μ/(πk)) (Bethe & Salpeter 1957, §4; WKB), averaged over the
    outer tenth of the grid.

    >>> from driven_atom.atom import Atom
    >>> g = uniform_grid(200.0, 0.05)
    >>> v = continuum_state(g, 1, Atom(1), 0.5)
    >>> bool(np.all(np.isfinite(v))), v.size == g.n_points
    (True, True)
    """
    if not energy > 0:
        raise InputError(f"`energy` of a continuum state must be > 0 hartree, got {energy!r}")
    (t_diag, t_lo, t_up), (b_diag, b_lo, b_up), scale = _pencil(grid, l, atom)
    a_diag = t_diag - energy * b_diag
    a_lo = t_lo - energy * b_lo
    a_up = t_up - energy * b_up
    n = a_diag.size
    phi = np.zeros(n)
    phi[0] = 1e-6
    phi[1] = -a_diag[0] * phi[0] / a_up[0]
    for i in range(1, n - 1):           # row i: a_lo[i-1] φ[i-1] + a_diag[i] φ[i] + a_up[i] φ[i+1] = 0
        phi[i + 1] = -(a_lo[i - 1] * phi[i - 1] + a_diag[i] * phi[i]) / a_up[i]
        if abs(phi[i + 1]) > 1e200:
            phi[: i + 2] *= 1e-200
    spacing = grid_spacing(grid)
    v = scale * phi
    u = v / np.sqrt(spacing)
    r = grid.r
    mu = atom.reduced_mass
    k = np.sqrt(np.maximum(2 * mu * (energy - atom.potential(r, l)) - l * (l + 1) / r**2, 1e-300))
    h2 = (k * spacing) ** 2
    kh = np.arccos(np.clip((1 - 5 * h2 / 12) / (1 + h2 / 12), -1.0, 1.0))
    outer = np.arange(max(1, int(0.9 * n)), n - 1)
    amp2 = (u[outer] ** 2 - u[outer - 1] * u[outer + 1]) / np.sin(kh[outer]) ** 2
    ratio = np.sqrt(2 * mu / (np.pi * k[outer])) / np.sqrt(np.abs(amp2))
    return v * float(np.mean(ratio))

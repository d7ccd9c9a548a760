"""The bound + box-continuum eigenbasis: dipoles, polarisabilities, cross sections, cache."""
import math
from functools import lru_cache

import h5py
import numpy as np
import pytest
from scipy.integrate import quad

from driven_atom.atom import Atom, State, parse_state
from driven_atom.atom.dipoles import dipole_matrix_element, oscillator_strength
from driven_atom.atom.photoionization import cross_section
from driven_atom.basis.eigenbasis import (box_cross_section, build_basis, cached_basis, dynamic_polarizability,
                                   load_basis, save_basis, static_polarizability)
from driven_atom.errors import InputError
from driven_atom.units import C_AU, HARTREE_EV

H = Atom(1)
OMEGA_1064 = 45.56335252907954 / 1064.0      # hartree: E = hc/lambda, 1 hartree <-> 45.5634 nm (CODATA)


@lru_cache(maxsize=None)
def _complete_basis(dr):
    """All grid states of l = 0, 1: the sum over states is then complete for the discrete H."""
    return build_basis(H, r_max=60.0, dr=dr, l_max=1, e_max=1e6)


def test_static_polarizability_of_1s():
    alpha = static_polarizability(_complete_basis(0.1), "1s")
    assert alpha == pytest.approx(4.5, rel=1e-4)          # exact 9/2, Dalgarno & Lewis (1955)


def _atom_layer_polarizability(omega, n_top=80):
    """alpha(omega) = sum_n f_n/(w_n^2 - w^2) + integral (df/dw)/(w'^2 - w^2) dw', with the atom
    layer's f-values and cross section (df/dw = c sigma/(2 pi^2)); n > n_top by the f ~ n^-3 tail."""
    n = np.arange(2, n_top)
    f = np.array([oscillator_strength(H, "1s", State(int(k), 1)) for k in n])
    wn = 0.5 - 0.5 / n**2
    bound = np.sum(f / (wn**2 - omega**2))
    tail = sum(f[-1] * (n[-1] / k) ** 3 / (0.25 - omega**2) for k in range(n_top, 5000))
    cont = quad(lambda w: float(cross_section(H, 1, 0, w)) * C_AU / (2 * math.pi**2) / (w * w - omega**2),
                0.5, np.inf, limit=200)[0]
    return bound + tail + cont


def test_dynamic_polarizability_at_1064_nm():
    reference = 4.5493                                     # exact hydrogenic value, from memory
    from_atom_layer = _atom_layer_polarizability(OMEGA_1064)
    assert from_atom_layer == pytest.approx(reference, abs=1e-4)
    assert _atom_layer_polarizability(0.0) == pytest.approx(4.5, rel=1e-6)   # Dalgarno & Lewis (1955)
    from_basis = float(dynamic_polarizability(_complete_basis(0.1), "1s", OMEGA_1064))
    print("alpha(1064 nm): basis", from_basis, "atom layer", from_atom_layer)
    assert from_basis == pytest.approx(reference, rel=1e-4)
    assert from_basis == pytest.approx(from_atom_layer, rel=1e-4)


def test_photoionization_cross_section_from_box_states():
    basis = build_basis(H, r_max=200.0, dr=0.08, l_max=1, e_max=3.0)
    omega, sigma = box_cross_section(basis, "1s")
    window = (omega * HARTREE_EV >= 15.0) & (omega * HARTREE_EV <= 80.0)
    assert window.sum() > 50
    exact = cross_section(H, 1, 0, omega[window])           # Stobbe, Bethe & Salpeter (1957) §71
    np.testing.assert_allclose(sigma[window], exact, rtol=0.01)
    print("max relative deviation 15-80 eV:", np.max(np.abs(sigma[window] / exact - 1)))


def test_cross_section_and_polarizability_on_a_stretched_grid():
    basis = build_basis(H, r_max=200.0, dr=0.25, dr_min=0.02, r_stretch=5.0, l_max=1, e_max=3.0)
    assert basis.inputs["dr_min"] == 0.02
    omega, sigma = box_cross_section(basis, "1s")
    window = (omega * HARTREE_EV >= 15.0) & (omega * HARTREE_EV <= 80.0)
    np.testing.assert_allclose(sigma[window], cross_section(H, 1, 0, omega[window]), rtol=0.01)   # Stobbe
    # bound part of the sum only up to e_max: the rest of the 4.5 (Dalgarno & Lewis 1955) is above 3 Eh
    assert 4.49 < static_polarizability(basis, "1s") < 4.5


@pytest.mark.parametrize("s1,s2", [("1s0", "2p0"), ("2s0", "3p0"), ("2p0", "3d0"), ("2p0", "3s0"),
                                   ("3p0", "4d0"), ("2p1", "3d1")])
def test_bound_dipoles_match_closed_forms(s1, s2):
    a, b = parse_state(s1), parse_state(s2)
    basis = _bound_basis(a.m)
    value = basis.dipole[basis.index(a), basis.index(b)]
    exact = dipole_matrix_element(H, a, b, 0)               # Gordon's closed form (atom layer)
    assert value == pytest.approx(exact, abs=1e-6)


@lru_cache(maxsize=None)
def _bound_basis(m):
    return build_basis(H, r_max=80.0, dr=0.1, dr_min=0.01, r_stretch=3.0, l_max=2, e_max=0.01, m=m)


def test_bound_dipole_on_the_uniform_grid():
    basis = build_basis(H, r_max=40.0, dr=0.04, l_max=1, e_max=0.01)
    value = basis.dipole[basis.index("1s"), basis.index("2p")]
    assert value == pytest.approx(dipole_matrix_element(H, parse_state("1s0"), parse_state("2p0"), 0), abs=1e-6)


def test_reduced_mass_scaling_of_dipoles():
    D = Atom.from_name("D")
    basis = build_basis(D, r_max=40.0, dr=0.05, l_max=1, e_max=0.01)
    value = basis.dipole[basis.index("1s"), basis.index("2p")]
    exact = dipole_matrix_element(D, parse_state("1s0"), parse_state("2p0"), 0)   # scales as 1/(Z mu)
    assert value == pytest.approx(exact, abs=2e-6)
    assert basis.energies[basis.index("1s")] == pytest.approx(-D.reduced_mass / 2, rel=2e-5)


def test_velocity_form_is_hermitian_and_matches_commutator():
    basis = build_basis(H, r_max=30.0, dr=0.1, l_max=2, e_max=1.0)
    p = basis.velocity_dipole().toarray()
    np.testing.assert_allclose(p, p.conj().T, atol=1e-14)
    i, j = basis.index("1s"), basis.index("2p")
    # <1s|p_z|2p> = i mu (E_1s - E_2p) <1s|z|2p>  (commutator identity p = i mu [H0, z])
    delta = basis.energies[i] - basis.energies[j]
    assert p[i, j] == pytest.approx(1j * delta * basis.dipole[i, j], rel=1e-12)
    exact = 1j * (-0.5 + 0.125) * dipole_matrix_element(H, parse_state("1s0"), parse_state("2p0"), 0)
    assert p[i, j] == pytest.approx(exact, rel=1e-4)       # analytic energies, Gordon dipole


def test_save_load_and_cache(tmp_path):
    spec = dict(r_max=30.0, dr=0.1, l_max=2, e_max=1.0)
    first, reused = cached_basis(H, tmp_path, **spec)
    assert not reused
    second, reused = cached_basis(H, tmp_path, **spec)
    assert reused and second.key == first.key
    np.testing.assert_array_equal(second.energies, first.energies)
    assert (second.dipole != first.dipole).nnz == 0
    other, reused = cached_basis(H, tmp_path, **dict(spec, l_max=1))
    assert not reused and other.key != first.key
    path = save_basis(first, tmp_path / "b.h5")
    assert load_basis(path).inputs == first.inputs
    assert load_basis(tmp_path / "missing.h5") is None
    assert not list(tmp_path.glob("*.tmp"))
    cache_file = next(tmp_path.glob(f"basis-{first.key}.h5"))
    with h5py.File(cache_file, "a") as f:                  # a damaged cache entry is not used ...
        f["dipole/data"][0] *= 1.0 + 1e-12
    assert load_basis(cache_file) is None
    again, reused = cached_basis(H, tmp_path, **spec)       # ... but rebuilt and rewritten
    assert not reused and (again.dipole != first.dipole).nnz == 0
    assert load_basis(cache_file) is not None


def test_bad_input():
    with pytest.raises(InputError, match="l_max"):
        build_basis(H, r_max=20.0, dr=0.1, l_max=0, m=1)
    with pytest.raises(InputError, match="e_max"):
        build_basis(H, r_max=20.0, dr=0.1, e_max=-1.0)
    basis = build_basis(H, r_max=20.0, dr=0.1, l_max=1, e_max=0.5)
    with pytest.raises(InputError, match="not in the basis"):
        basis.index("3d")
    with pytest.raises(InputError, match="m = 1"):
        basis.index("2p1")

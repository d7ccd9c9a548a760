"""The nearest one- and two-photon lines of the atom layer (driven_atom.atom.resonance)."""
import math

import pytest

from driven_atom.atom import Atom, State
from driven_atom.atom.levels import line
from driven_atom.atom.resonance import allowed_l, candidate_lines, level_energy, nearest_lines
from driven_atom.units import wavelength_nm_to_photon_energy

H = Atom.from_name("H")


def test_lyman_alpha_and_the_two_photon_1s_2s_line_against_nist():
    lines = nearest_lines(H, State(1, 0, 0), wavelength_nm_to_photon_energy(121.57))
    assert lines[1].label == "1s-2p"
    # Lyman-alpha 121.567 nm, fine-structure centroid (NIST ASD); the Bohr levels miss it by 1e-5
    assert lines[1].resonant_wavelength_nm == pytest.approx(121.567, rel=3e-5)
    two = nearest_lines(H, State(1, 0, 0), wavelength_nm_to_photon_energy(243.13))[2]
    assert two.label == "1s-2s" and two.photons == 2
    # 1S-2S: 2 466 061 413 187 kHz (Parthey et al., PRL 107, 203001 (2011)): the laser at c/(nu/2) = 243.1349 nm
    assert two.resonant_wavelength_nm == pytest.approx(299792458.0 / (2466061413187e3 / 2) * 1e9, rel=3e-5)


def test_detuning_in_ghz_and_nm_are_one_offset():
    lower = State(1, 0, 0)
    omega = wavelength_nm_to_photon_energy(121.5684456)
    ln = nearest_lines(H, lower, omega)[1]
    # d(nu) = -c d(lambda)/lambda^2 (first order, common practice): the two detunings describe one offset
    nu_from_nm = -299792458.0 * ln.detuning_nm * 1e-9 / (121.5684456e-9) ** 2 / 1e9
    assert ln.detuning_GHz == pytest.approx(nu_from_nm, rel=1e-4, abs=1e-9)
    # 1 GHz to the blue: detuning +1 GHz for one photon, +2 GHz of two-photon energy for two photons
    step = 2 * math.pi * 1e9 * 2.4188843265864e-17           # 1 GHz in hartree (CODATA a.u. of time)
    assert nearest_lines(H, lower, omega + step)[1].detuning_GHz == pytest.approx(ln.detuning_GHz + 1, abs=1e-6)
    two = nearest_lines(H, lower, wavelength_nm_to_photon_energy(243.1369))[2]
    assert nearest_lines(H, lower, wavelength_nm_to_photon_energy(243.1369) + step)[2].detuning_GHz == \
        pytest.approx(two.detuning_GHz + 2, abs=1e-6)


def test_selection_rules_and_degenerate_levels():
    assert allowed_l(0, 1) == (1,) and allowed_l(2, 1) == (1, 3) and allowed_l(0, 2) == (0, 2)
    # from 2p one photon reaches n s and n d; in the Bohr atom they share an energy: one line
    lines = candidate_lines(H, State(2, 1, 0), line(H, 3, 2).energy, 1)
    three = next(ln for ln in lines if ln.uppers[0].n == 3)
    assert three.label == "2p-3s/3d" and abs(three.detuning) < 1e-12
    # nothing below the state, no line without a photon
    assert all(level_energy(H, u) > level_energy(H, State(2, 1)) for ln in lines for u in ln.uppers)
    assert nearest_lines(H, State(1, 0, 0), 0.0) == {1: None, 2: None}


def test_energies_come_from_one_replaceable_function():
    # a model with shifted levels moves the lines: the search takes its energies from the function given
    def shifted(atom, state):
        return level_energy(atom, state) + (1e-6 if state.l == 1 else 0.0)

    omega = line(H, 2, 1).energy
    plain = nearest_lines(H, State(1, 0, 0), omega)[1]
    moved = nearest_lines(H, State(1, 0, 0), omega, energies=shifted)[1]
    assert moved.detuning == pytest.approx(plain.detuning - 1e-6, abs=1e-15)

"""Level structure (fine, Lamb shift, hyperfine), component labels and line strengths against
published measurements and reference libraries (source beside each value)."""
import math
import random
from fractions import Fraction

import pytest
import scipy.constants as sc

from driven_atom.atom import Atom
from driven_atom.atom.angular import clebsch_gordan, wigner_3j, wigner_6j
from driven_atom.atom.components import Component, check_label, parse_label, sublevels, uncoupled
from driven_atom.atom.dipoles import einstein_A
from driven_atom.atom.manifold import component_einstein_A, dipole_matrices, line_strength, total_decay_rate
from driven_atom.atom.nuclei import NUCLEAR_DATA
from driven_atom.atom.structure import (ELECTRON_ANOMALY, HARTREE_HZ, PROTON_ELECTRON_MASS_RATIO, component_energy,
                                        fine_energy, hyperfine_shift, lande_g, level_energy)
from driven_atom.atom.tables import lines, state, transition
from driven_atom.errors import InputError
from driven_atom.units import AU_TIME_S, photon_energy_to_wavelength_nm

H, D, HE3, HE4 = (Atom.from_name(n) for n in ("H", "D", "He3", "He"))


def interval_hz(atom, a, b, structure="fine"):
    return (level_energy(atom, a, structure) - level_energy(atom, b, structure)) * HARTREE_HZ


# -- measured intervals ----------------------------------------------------------------------------
def test_lyman_alpha_components_nist():
    up3, up1 = (transition(p, "1s1/2", structure="fine")["vacuum_nm"] for p in ("2p3/2", "2p1/2"))
    assert up3 == pytest.approx(121.56682, rel=1e-6)          # NIST ASD (vacuum), 2p3/2 - 1s1/2
    assert up1 == pytest.approx(121.56736, rel=1e-6)          # NIST ASD (vacuum), 2p1/2 - 1s1/2
    bohr = transition("2p", "1s")["vacuum_nm"]
    assert abs(bohr - up3) > 1e-3                              # the Bohr line is 33 GHz away


def test_lamb_shift_2s_2p():
    lamb = interval_hz(H, "2s1/2", "2p1/2")
    assert lamb == pytest.approx(1057.845e6, rel=1e-4)        # Lundeen & Pipkin, PRL 46, 232 (1981)


def test_2s_2p3_2_interval():
    # Hagley & Pipkin, PRL 72, 1172 (1994)
    assert interval_hz(H, "2p3/2", "2s1/2") == pytest.approx(9911.200e6, rel=1e-5)


def test_1s_2s_hyperfine_centroid():
    f = interval_hz(H, "2s1/2", "1s1/2")
    assert f == pytest.approx(2_466_061_413_187.035e3, rel=1e-10)   # Parthey et al., PRL 107, 203001 (2011)
    assert interval_hz(H, "2s1/2", "1s1/2", "hyperfine") == f       # the centroid of the F levels


def test_1s_2s_isotope_shift_h_d():
    shift = interval_hz(D, "2s1/2", "1s1/2") - interval_hz(H, "2s1/2", "1s1/2")
    assert shift == pytest.approx(670_994_334.606e3, rel=1e-6)   # Parthey et al., PRL 104, 233001 (2010) (from memory)


def test_he_plus_lamb_shift():
    # van Wijngaarden, Holuj & Drake, PRA 63, 012505 (2000) (from memory): 14041.13(17) MHz
    assert interval_hz(HE4, "2s1/2", "2p1/2") == pytest.approx(14041.13e6, rel=1e-4)


@pytest.mark.parametrize("nucleus, upper, lower, reference, rel", [
    ("H", "F=1", "F=0", 1420.405751768e6, 1e-4),     # hydrogen maser (Hellwig et al., IEEE Trans. IM 19, 200 (1970))
    ("D", "F=3/2", "F=1/2", 327.384352522e6, 2e-4),  # Wineland & Ramsey, PRA 5, 821 (1972)
    # Mathur, Crampton, Kleppner & Ramsey, Phys. Rev. 158, 14 (1967) (from memory)
    ("T", "F=1", "F=0", 1516.701470773e6, 1e-4),
])
def test_ground_state_hyperfine_splitting(nucleus, upper, lower, reference, rel):
    atom = Atom.from_name(nucleus)
    assert interval_hz(atom, f"1s1/2 {upper}", f"1s1/2 {lower}", "hyperfine") == pytest.approx(reference, rel=rel)


def test_helium3_ion_hyperfine_is_inverted():
    # Schuessler, Fortson & Dehmelt, Phys. Rev. 187, 5 (1969): 8665.649867 MHz, F = 0 above F = 1
    assert interval_hz(HE3, "1s1/2 F=0", "1s1/2 F=1", "hyperfine") == pytest.approx(8665.649867e6, rel=2e-4)


def test_2s_hyperfine_splitting():
    # Kolachevsky et al., PRL 102, 213002 (2009): 177 556 834.3(6.7) Hz
    assert interval_hz(H, "2s1/2 F=1", "2s1/2 F=0", "hyperfine") == pytest.approx(177.5568343e6, rel=1e-4)


def test_2p_fine_structure():
    # Horbatsch & Hessels, PRA 93, 022513 (2016) (from memory)
    assert interval_hz(H, "2p3/2", "2p1/2") == pytest.approx(10969.04e6, rel=1e-5)


def test_hyperfine_centroid_is_the_fine_level():
    for label in ("2p3/2", "2p1/2", "1s1/2", "3d5/2"):
        j2 = parse_label(label).j2
        F = [Component(2, 1, j2, F2) for F2 in (j2 - 1, j2 + 1)] if label.startswith("2p") else None
        whole = parse_label(label)
        weights = [(F2 + 1, hyperfine_shift(H, whole.n, whole.l, j2, F2)) for F2 in (j2 - 1, j2 + 1)]
        assert abs(sum(w * e for w, e in weights)) < 1e-18                     # sum (2F+1) E_F = 0 (analytic)
        assert level_energy(H, label, "hyperfine") == level_energy(H, label, "fine")
        del F


def test_manifold_label_is_the_weighted_centroid():
    e = [(2, fine_energy(H, 2, 1, 1)), (4, fine_energy(H, 2, 1, 3))]
    assert level_energy(H, "2p", "fine") == pytest.approx(sum(w * x for w, x in e) / 6, rel=1e-15)
    assert level_energy(H, "2p", "bohr") == -H.reduced_mass / 8


# -- g factors and nuclear data ----------------------------------------------------------------------
def test_lande_g_factors():
    assert lande_g(0, 1) == pytest.approx(-sc.physical_constants["electron g factor"][0], rel=1e-12)  # CODATA via scipy
    a = ELECTRON_ANOMALY
    # Landé formula with g_s = 2(1 + a_e), g_L = 1 (common practice)
    assert lande_g(1, 3) == pytest.approx(4 / 3 + 2 * a / 3, rel=1e-12)
    assert lande_g(1, 1) == pytest.approx(2 / 3 - 2 * a / 3, rel=1e-12)
    assert lande_g(2, 5) == pytest.approx(6 / 5 + 2 * a / 5, rel=1e-12)


def test_constants_match_scipy():
    pc = sc.physical_constants
    assert ELECTRON_ANOMALY == pc["electron mag. mom. anomaly"][0]
    assert PROTON_ELECTRON_MASS_RATIO == pc["proton-electron mass ratio"][0]
    assert HARTREE_HZ == pytest.approx(pc["hartree-hertz relationship"][0], rel=1e-12)
    for name, key in (("H", "proton"), ("D", "deuteron"), ("T", "triton"), ("He3", "helion")):
        assert NUCLEAR_DATA[name].magnetic_moment == pc[f"{key} mag. mom. to nuclear magneton ratio"][0]
    for name, key in (("H", "proton"), ("D", "deuteron"), ("He", "alpha particle")):
        assert NUCLEAR_DATA[name].charge_radius_fm * 1e-15 == pytest.approx(pc[f"{key} rms charge radius"][0],
                                                                             rel=1e-12)


def test_hyperfine_needs_a_known_nucleus():
    with pytest.raises(InputError, match="nucleus"):
        level_energy(Atom(1), "1s1/2 F=1", "hyperfine")
    assert level_energy(Atom(1), "2p3/2", "fine") < 0        # fine structure needs no nuclear data


# -- angular momentum and line strengths ----------------------------------------------------------
def test_wigner_symbols_match_sympy():
    from sympy.physics.wigner import clebsch_gordan as cg
    from sympy.physics.wigner import wigner_3j as w3
    from sympy.physics.wigner import wigner_6j as w6

    rng = random.Random(7)
    halves = [Fraction(k, 2) for k in range(7)]
    checked = 0
    for _ in range(600):
        j1, j2, j3 = (rng.choice(halves) for _ in range(3))
        m1 = j1 - rng.randint(0, int(2 * j1))
        m2 = j2 - rng.randint(0, int(2 * j2))
        if abs(m1 + m2) <= j3 and (j3 - m1 - m2).denominator == 1:
            assert wigner_3j(j1, j2, j3, m1, m2, -m1 - m2) == pytest.approx(float(w3(j1, j2, j3, m1, m2, -m1 - m2)),
                                                                           abs=1e-14)
            assert clebsch_gordan(j1, m1, j2, m2, j3, m1 + m2) == pytest.approx(
                float(cg(j1, j2, j3, m1, m2, m1 + m2)), abs=1e-14)
            checked += 1
        six = [rng.choice(halves) for _ in range(6)]
        try:
            reference = float(w6(*six))
        except ValueError:                    # sympy refuses symbols whose triads do not close
            reference = 0.0
        assert wigner_6j(*six) == pytest.approx(reference, abs=1e-14)
    assert checked > 100


def test_line_strength_by_recoupling_equals_sum_over_sublevels():
    for structure, I2 in (("fine", 0), ("hyperfine", 1), ("hyperfine", 2)):
        for up, lo in (("3d", "2p"), ("2p", "1s"), ("4f", "3d"), ("3p", "2s")):
            U, L = sublevels(up, structure, I2), sublevels(lo, structure, I2)
            d = dipole_matrices(H, U + L, I2)
            for whole_u in {c.whole for c in U}:
                for whole_l in {c.whole for c in L}:
                    iu = [i for i, c in enumerate(U) if c.whole == whole_u]
                    il = [len(U) + i for i, c in enumerate(L) if c.whole == whole_l]
                    total = sum(d[k, l, u] ** 2 for k in range(3) for u in iu for l in il)
                    assert total == pytest.approx(line_strength(H, whole_u, whole_l, I2), rel=1e-12, abs=1e-14)


@pytest.mark.parametrize("upper, lower", [("2p", "1s"), ("3d", "2p"), ("3p", "2s"), ("3s", "2p"), ("4f", "3d")])
def test_component_rates_sum_to_the_level_rate(upper, lower):
    # Wiese & Fuhr, JPCRD 38, 565 (2009) list the level values these reproduce (test_atom_dipoles)
    level_rate = einstein_A(H, upper, lower)
    for j_up in {c.whole for c in sublevels(upper, "fine")}:
        total = 0.0
        for j_lo in {c.whole for c in sublevels(lower, "fine")}:
            omega = component_energy(H, j_up) - component_energy(H, j_lo)
            total += component_einstein_A(omega, line_strength(H, j_up, j_lo), j_up)
        assert total == pytest.approx(level_rate, rel=2e-4)     # fine-structure omega^3 differs from Bohr by < 1e-4


def test_3d_branching_to_the_2p_doublet():
    # Wiese & Fuhr (2009) (from memory): A(3d3/2 -> 2p1/2) = 5.3877e7, A(3d3/2 -> 2p3/2) = 1.0775e7 s^-1
    a1 = transition("3d3/2", "2p1/2", structure="fine")["A_s"]
    a3 = transition("3d3/2", "2p3/2", structure="fine")["A_s"]
    assert a1 == pytest.approx(5.3877e7, rel=3e-4)
    assert a3 == pytest.approx(1.0775e7, rel=3e-4)


def test_decay_rate_of_each_component_is_the_level_rate():
    tau = state("2p3/2", structure="fine")["lifetime_s"]
    assert tau == pytest.approx(1.5962e-9, rel=2e-4)             # Wiese & Fuhr, JPCRD 38, 565 (2009)
    assert total_decay_rate(H, parse_label("2p3/2 F=2"), 1) == pytest.approx(
        total_decay_rate(H, parse_label("2p3/2")), rel=1e-6)


# -- labels ----------------------------------------------------------------------------------------
def test_labels_round_trip_and_old_labels_keep_their_meaning():
    for text in ("2p3/2", "2s1/2", "1s1/2 F=1", "1s1/2 F=3/2", "2p3/2 m=-3/2", "1s1/2 F=1 m=-1", "3d5/2 F=2 m=0"):
        assert parse_label(text).label == text
    assert parse_label("2p") == parse_label("2p").level and parse_label("2p0").m == 0
    assert parse_label("1s1/2  F = 1").label == "1s1/2 F=1"
    assert uncoupled(parse_label("1s1/2 F=0 m=0"), 1) == pytest.approx({(0, -1, 1): -math.sqrt(0.5),
                                                                        (0, 1, -1): math.sqrt(0.5)})


@pytest.mark.parametrize("text, structure, word", [
    ("2p5/2", "fine", "j must be"), ("2p3/2 m=5/2", "fine", "m must be"), ("1s1/2 F=1", "fine", "hyperfine"),
    ("2p3/2", "bohr", "fine"), ("2p0", "fine", "m_l sublevel"), ("2p3/2 m=1/2", "hyperfine", "m_j"),
    ("2p3/2 m=1", "fine", "m must be"), ("2q3/2", "fine", "state"),
])
def test_bad_labels_one_line(text, structure, word):
    with pytest.raises(InputError, match=word) as info:
        sublevels(text, structure, 1) if structure != "bohr" else check_label(text, structure)
    assert "\n" not in str(info.value)


def test_sublevels_of_deuterium_ground_state():
    labels = [c.label for c in sublevels("1s", "hyperfine", 2)]
    assert labels[:2] == ["1s1/2 F=1/2 m=-1/2", "1s1/2 F=1/2 m=1/2"] and len(labels) == 6
    with pytest.raises(InputError, match="F must be one of 1/2, 3/2"):
        sublevels("1s1/2 F=1", "hyperfine", 2)


def test_lines_table_lists_components():
    out = lines("balmer", upto=3, structure="fine")
    uppers = {(r["upper"], r["lower"]) for r in out["lines"]}
    assert ("3d5/2", "2p3/2") in uppers and ("3s1/2", "2p1/2") in uppers and len(uppers) == 7
    h_alpha = max(out["lines"], key=lambda r: r["A_s"])
    assert h_alpha["upper"] == "3d5/2"
    assert h_alpha["air_nm"] == pytest.approx(656.2852, rel=1e-6)        # NIST ASD (air) (from memory)
    assert photon_energy_to_wavelength_nm(1.0) > 0 and AU_TIME_S > 0

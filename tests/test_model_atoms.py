"""Single-active-electron model atoms against the measured atoms.

References: ionisation potentials and levels, NIST ASD (Kramida et al., NIST Atomic Spectra
Database); Tong & Lin, J. Phys. B 38, 2593 (2005) (rare-gas potentials; their empirical
correction to ADK); Marinescu, Sadeghpour & Dalgarno, PRA 49, 982 (1994) (alkali potentials);
Tong, Zhao & Lin, PRA 66, 033402 (2002) (asymptotic coefficients C_l); Stobbe's hydrogen 1s cross
section (Bethe & Salpeter 1957, §71, in driven_atom.atom.photoionization).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from driven_atom.atom import Atom
from driven_atom.basis import model_levels as ml
from driven_atom.errors import InputError
from driven_atom.routes import load_config
from driven_atom.units import HARTREE_EV

CM1_EV = 1.239841984e-4        # 1 cm^-1 in eV (CODATA 2022)

# measured first ionisation potentials, eV (NIST ASD). The issue lists Kr as 13.100 eV; NIST ASD
# gives 13.99961 eV (from memory), which is the value used here.
IONIZATION_EV = {"He": 24.587387, "Ne": 21.564540, "Ar": 15.759610, "Kr": 13.999605, "Xe": 12.129843,
                 "Li": 5.391715, "Na": 5.139076, "K": 4.340663, "Rb": 4.177128, "Cs": 3.893905}   # NIST ASD


@pytest.mark.parametrize("species", list(IONIZATION_EV))
def test_model_ionization_potential_within_1e_3_hartree_of_nist(species):
    atom = Atom.from_species(species)
    ip = ml.ionization_potential(atom)
    assert abs(ip - IONIZATION_EV[species] / HARTREE_EV) < 1e-3          # hartree (27 meV)
    # the data file's own measured value is the same number
    assert atom.model.ip_measured * HARTREE_EV == pytest.approx(IONIZATION_EV[species], abs=1e-6)


# lowest excited level of each alkali, cm^-1 above the ground state: the (2j+1)-weighted p centroid
# of the resonance doublet (NIST ASD, from memory)
RESONANCE_CM = {"Li": ("2p", (14903.648 * 2 + 14903.983 * 4) / 6),
                "Na": ("3p", (16956.170 * 2 + 16973.366 * 4) / 6),
                "K": ("4p", (12985.185 * 2 + 13042.896 * 4) / 6),
                "Rb": ("5p", (12578.950 * 2 + 12816.545 * 4) / 6),
                "Cs": ("6p", (11178.268 * 2 + 11732.307 * 4) / 6)}


@pytest.mark.parametrize("species", list(RESONANCE_CM))
def test_alkali_resonance_levels_within_one_percent(species):
    atom = Atom.from_species(species)
    label, measured_cm = RESONANCE_CM[species]
    model = (ml.energy(atom, label) - ml.energy(atom, atom.model.ground)) * HARTREE_EV
    assert model == pytest.approx(measured_cm * CM1_EV, rel=1e-2)


def test_sodium_d_lines_and_the_3p_lifetime():
    from driven_atom.basis.model_tables import transition

    out = transition("Na", "3p", "3s")
    d1, d2 = (c["vacuum_nm"] for c in out["components"])
    assert d1 == pytest.approx(589.7558, rel=5e-4)         # NIST ASD, D1 (vacuum), from memory
    assert d2 == pytest.approx(589.1583, rel=5e-4)         # NIST ASD, D2 (vacuum), from memory
    splitting_cm = (1 / d2 - 1 / d1) * 1e7
    # first-order Pauli spin-orbit term of the Marinescu potential: 11.5 cm^-1 against 17.196 measured
    assert 0.5 * 17.196 < splitting_cm < 17.196             # NIST ASD (from memory)
    tau_ns = 1e9 / out["A_s"]
    assert tau_ns == pytest.approx(16.2, rel=0.05)         # NIST ASD: A(3p -> 3s) = 6.16e7 s^-1 (from memory)


def test_energy_normalised_continuum_reproduces_stobbe_for_hydrogen():
    from driven_atom.atom.photoionization import cross_section
    from driven_atom.basis.radial_grid import continuum_state, eigenstates, stretched_grid
    from driven_atom.units import ALPHA

    atom = Atom(1)
    grid = stretched_grid(300.0, 0.01, 0.1, 5.0)
    energies, vectors = eigenstates(grid, 0, atom, n_states=1)
    for omega in (0.6, 1.0, 2.0):
        v = continuum_state(grid, 1, atom, omega + energies[0])
        sigma = 4 * math.pi**2 * ALPHA * omega / 3 * float(np.sum(vectors[:, 0] * grid.r * v)) ** 2
        assert sigma == pytest.approx(cross_section(atom, 1, 0, omega), rel=1e-4)    # Stobbe (Bethe & Salpeter §71)


def test_argon_3p_cooper_minimum_between_40_and_50_ev():
    atom = Atom.from_species("Ar")
    photon_ev = np.arange(30.0, 70.0, 1.0)
    sigma = ml.cross_section(atom, "3p", photon_ev / HARTREE_EV)
    at = float(photon_ev[np.argmin(sigma)])
    assert 40.0 <= at <= 50.0                                  # common practice: the 3p Cooper minimum
    d_wave = ml.partial_dipoles(atom, "3p", np.array([30.0, 60.0]) / HARTREE_EV)[2]
    assert d_wave[0] * d_wave[1] < 0                           # the 3p -> epsilon d amplitude changes sign


def test_hydrogen_is_the_special_case_of_the_same_path():
    from driven_atom.basis.radial_grid import numerov_operators, uniform_grid

    grid = uniform_grid(20.0, 0.1)
    atom = Atom(1)
    assert atom.model is None and np.array_equal(atom.potential(grid.r, 0), -1 / grid.r)
    ops = numerov_operators(grid, 2, atom)
    assert np.array_equal(ops.potential, 2 * 3 / (2.0 * atom.reduced_mass * grid.r**2) - atom.Z / grid.r)
    grid_cfg = {"atom": {"Z": 18, "nucleus": "infinite"}, "pulse": [{"wavelength": "800 nm",
                "intensity": "1e14 W/cm^2", "cycles": 2}], "solver": {"route": "grid"}}
    hydrogenic = load_config(grid_cfg)
    model = load_config({**grid_cfg, "atom": {"species": "Ar"}})
    assert "species" not in hydrogenic.physics()["atom"]
    assert model.physics()["atom"]["species"].startswith("tong-lin:Ar:")
    assert hydrogenic.physics_hash() != model.physics_hash()


def test_model_atoms_refused_where_a_route_cannot_take_them():
    pulse = [{"wavelength": "800 nm", "intensity": "1e13 W/cm^2", "cycles": 2}]
    with pytest.raises(InputError, match=r"`atom.species` = 'Na' has an l-dependent potential.*route \"basis\""):
        load_config({"atom": {"species": "Na"}, "pulse": pulse, "solver": {"route": "grid"}})
    with pytest.raises(InputError, match=r"`atom.initial` '2p' is a core shell of the argon model"):
        load_config({"atom": {"species": "Ar", "initial": "2p"}, "pulse": pulse, "solver": {"route": "grid"}})
    with pytest.raises(InputError, match=r"`solver.dr_min` is needed"):
        load_config({"atom": {"species": "Ar"}, "pulse": pulse, "solver": {"route": "basis"}})
    with pytest.raises(InputError, match=r"`atom.species` and `atom.nucleus` exclude each other"):
        load_config({"atom": {"species": "Ar", "nucleus": "H"}, "pulse": pulse, "solver": {"route": "grid"}})


def test_argon_on_the_grid_route_runs_and_its_acceleration_is_the_dipoles_second_derivative(tmp_path):
    from driven_atom.routes import run_config

    cfg = load_config({"atom": {"species": "Ar"},
                       "pulse": [{"wavelength": "400 nm", "intensity": "1e14 W/cm^2", "cycles": 2}],
                       "solver": {"route": "grid", "r_max": 40.0, "l_max": 12}, "output": {"every": "2 au"}})
    res = run_config(cfg, tmp_path / "ar.h5")
    assert 1e-6 < res.ionization < 0.1 and res.norm <= 1.0 and res.populations["3p"] > 0.9
    # the grid propagates m = 0 only: the result says that it is not the atom's m-average
    assert res.metadata["m_average"]["weights"] == {"0": 1.0}
    assert any("taken as its sublevel m = 0" in w for w in res.warnings)
    steps = res.spectra["dipole_response"]
    z, dt = steps["dipole_z"], steps["time"][1] - steps["time"][0]
    second = (z[2:] - 2 * z[1:-1] + z[:-2]) / dt**2
    assert np.allclose(steps["acceleration_z"][1:-1], second, rtol=1e-9, atol=1e-12)


def test_argon_on_the_basis_route_starts_in_the_model_ground_state():
    from driven_atom.routes import preflight

    cfg = load_config({"atom": {"species": "Ar"}, "pulse": [{"photon_energy": "30 eV", "intensity": "1e10 W/cm^2",
                                                             "cycles": 10}],
                       "solver": {"route": "basis", "r_max": 60.0, "dr": 0.1, "dr_min": 0.002, "l_max": 2,
                                  "e_max": 2.0, "cache_dir": "none"}})
    checks = {c.name: c for c in preflight(cfg)}
    assert checks["initial_energy_error"].level == "ok" and checks["initial_energy_error"].value < 1e-4


def test_estimate_uses_the_model_ip_and_the_real_atoms_tunnelling_coefficient():
    import driven_atom as da
    from driven_atom.atom.model_atoms import adk_coefficient, model_potential

    out = da.estimate(species="Xe", wavelength="800 nm", intensity="5e13 W/cm^2", fwhm="30 fs")
    assert out["ionization_potential_eV"] == pytest.approx(ml.ionization_potential(Atom.from_species("Xe")) * HARTREE_EV)
    assert out["regime"] in ("tunnelling", "multiphoton", "above the barrier") and 0 < out["probability_peak"] <= 1
    # C_l = 2.44 for Ar (Tong, Zhao & Lin 2002): C^2_{n*l*} = C_l^2/kappa^(2n*+1)
    kappa = math.sqrt(2 * 15.759610 / HARTREE_EV)                         # NIST ASD
    assert adk_coefficient(model_potential("Ar")) == pytest.approx(2.44**2 / kappa ** (2 / kappa + 1), rel=1e-6)


def test_light_commands_for_a_model_atom(capsys):
    from driven_atom.cli import main

    assert main(["state", "3p", "--species", "Na", "--json"]) == 0
    assert '"measured_excitation_eV"' in capsys.readouterr().out
    assert main(["xsec", "3p", "--species", "Ar", "--photon-energy", "21.2 eV"]) == 0
    assert "Mb" in capsys.readouterr().out
    assert main(["state", "2p", "--species", "Ar"]) == 2
    assert capsys.readouterr().err.count("\n") == 1


@pytest.mark.slow
def test_argon_static_field_rate_against_adk_within_the_known_factor(tmp_path):
    """The grid route's rate of Ar 3p0 in a static field F = 0.06 au against ADK with the real atom's
    C_l (Tong, Zhao & Lin 2002): Tong & Lin (2005) find the exact rates below ADK by
    exp(−α (Z_c²/Iₚ)(F/κ³)), α = 9 for Ar (from memory), 0.47 here; we accept 0.25–1."""
    from driven_atom.atom.model_atoms import adk_coefficient
    from driven_atom.lab.rates import adk_rate
    from driven_atom.routes import run_config

    F = 0.06
    cfg = load_config({"atom": {"species": "Ar"},
                       "pulse": [{"envelope": "static", "peak_field": F, "ramp": 40.0, "length": 440.0}],
                       "solver": {"route": "grid", "r_max": 80.0, "l_max": 24, "dt": 0.05, "absorber_width": 12.0},
                       "output": {"every": 5.0}})
    res = run_config(cfg, tmp_path / "static.h5")
    t, bound = res.times, 1 - res.series["ionization"]
    plateau = (t > t[0] + 140) & (t < t[-1] - 60)
    rate = -np.polyfit(t[plateau], np.log(bound[plateau]), 1)[0]
    atom = Atom.from_species("Ar")
    ip = ml.ionization_potential(atom)
    adk = float(adk_rate(F, ip, 1.0, 1, 0, adk_coefficient(atom.model, ip)))
    assert 0.25 < rate / adk < 1.0


@pytest.mark.slow
def test_argon_intensity_campaign_runs(tmp_path):
    from pathlib import Path

    import driven_atom as da

    config = Path(__file__).resolve().parents[1] / "configs" / "grid_kestrel_argon_scan.toml"
    da.scan(config, tmp_path / "camp", progress=False)
    ds = da.open_campaign(tmp_path / "camp")
    yields = np.asarray(ds["ionization"]).ravel()
    assert yields.size == 3 and np.all(np.diff(yields) > 0)

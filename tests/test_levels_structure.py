"""Levels route with real level structure: fine and hyperfine sublevels, static fields (Zeeman,
Stark quench), decay per component, two-photon 1S-2S with ac Stark shifts and photoionisation.
Sources beside each reference value."""
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

import driven_atom
from driven_atom.atom import Atom, State
from driven_atom.atom.components import parse_label
from driven_atom.atom.dipoles import einstein_A
from driven_atom.atom.manifold import dipole_matrices
from driven_atom.atom.photoionization import cross_section
from driven_atom.atom.structure import HARTREE_HZ, PROTON_ELECTRON_MASS_RATIO, hyperfine_constant, lande_g, level_energy
from driven_atom.atom.twophoton import haas_coefficients, stark_matrix, two_photon_matrix
from driven_atom.config import FieldsConfig
from driven_atom.errors import InputError
from driven_atom.pulse import Pulse
from driven_atom.routes import load_config, propagate
from driven_atom.routes.structured_model import build_structured_model
from driven_atom.settings import LevelsSettings
from driven_atom.units import AU_INTENSITY_WCM2, AU_MAGNETIC_T, AU_TIME_S, C_AU, to_au

H = Atom.from_name("H")
REPO = Path(driven_atom.__file__).resolve().parent.parent


def run(states, initial, pulse=None, structure="fine", fields=None, **solver):
    return propagate(H, Pulse(pulse) if pulse else None, LevelsSettings(states=states, **solver),
                     initial=[(parse_label(initial), 1.0)], structure=structure, fields=fields)


# -- one photon on real levels -------------------------------------------------------------------------
def test_pi_pulse_on_the_measured_lyman_alpha_line():
    # Rabi theory (Allen & Eberly 1975): pulse area pi with the dipole of 1s1/2 m -> 2p3/2 m (both m = +-1/2)
    d = abs(dipole_matrices(H, [parse_label("1s1/2 m=1/2"), parse_label("2p3/2 m=1/2")])[1, 1, 0])
    length = to_au("0.3 ns", "time")
    pulse = {"envelope": "sin2", "peak_field": 2 * math.pi / (d * length), "length": length}
    on_line = run(["1s", "2p"], "1s", {**pulse, "wavelength": "121.56682 nm"}, decay=False)   # NIST ASD (vacuum)
    assert on_line.populations["2p3/2"] >= 0.99
    assert on_line.populations["2p1/2"] < 1e-3 and on_line.norm == pytest.approx(1.0, abs=1e-9)
    bohr = run(["1s", "2p"], "1s", {**pulse, "wavelength": "121.5684456 nm"}, decay=False)   # the Bohr-model line
    assert bohr.populations["2p"] < 1e-3
    miss_hz = (level_energy(H, "2p3/2", "fine") - level_energy(H, "1s1/2", "fine")
               - to_au("121.5684456 nm", "length") ** -1 * 2 * math.pi * C_AU) * HARTREE_HZ
    assert miss_hz == pytest.approx(33.1e9, rel=0.01)        # what the nearest-line helper will report (analytic)


def test_decay_per_component_and_its_branching():
    tau = to_au("1.5962 ns", "time")                          # Wiese & Fuhr, JPCRD 38, 565 (2009)
    res = run(["1s", "2p"], "2p3/2 m=1/2", after=tau)
    assert res.populations["2p3/2"] == pytest.approx(math.exp(-1), rel=2e-4)
    # Clebsch-Gordan: 2/3 of 2p3/2 m=1/2 decays by pi light to m=1/2, 1/3 by sigma to m=-1/2 (common practice)
    assert res.populations["1s1/2 m=1/2"] == pytest.approx(2 * res.populations["1s1/2 m=-1/2"], rel=1e-6)


def test_hyperfine_model_decays_into_the_f_levels():
    res = run(["1s", "2p3/2"], "2p3/2 F=2 m=2", structure="hyperfine", after=to_au("20 ns", "time"))
    # F = 2, m = 2 reaches only F = 1, m = 1 of the ground state (Delta F, Delta m <= 1)
    assert res.populations["1s1/2 F=1 m=1"] == pytest.approx(1.0, abs=1e-5)
    assert res.populations["1s1/2 F=0"] == 0.0


# -- static fields ------------------------------------------------------------------------------------
def test_weak_field_zeeman_splittings_follow_g_j():
    B = 1e-4 / AU_MAGNETIC_T                                       # 1 G
    model = build_structured_model(H, ["2p"], "fine", magnetic=B)
    energy = dict(zip([s.label for s in model.states], model.dressed_energies))
    for j2, mj2 in ((3, 3), (3, 1), (1, 1)):
        split = energy[f"2p{j2}/2 m={mj2}/2"] - energy[f"2p{j2}/2 m={-mj2}/2"]
        g_j = lande_g(1, j2, nuclear_mass=H.nuclear_mass)          # Landé (Bethe & Salpeter 1957, §47)
        assert split == pytest.approx(g_j * 0.5 * B * mj2, rel=1e-3)   # mu_B = 1/2 au


@pytest.mark.parametrize("tesla", [0.002, 0.05, 1.0])
def test_ground_state_follows_breit_rabi(tesla):
    # Breit & Rabi, Phys. Rev. 38, 2082 (1931): E = -dW/(2(2I+1)) - g_I mu_N B m +- dW/2 sqrt(1 + 4mx/(2I+1) + x^2)
    # (1e-15 hartree = 7 Hz: the rounding of eigenvalues of levels at -0.5 hartree)
    B = tesla / AU_MAGNETIC_T
    model = build_structured_model(H, ["1s"], "hyperfine", magnetic=B)
    energy = dict(zip([s.label for s in model.states], model.dressed_energies - level_energy(H, "1s1/2", "fine")))
    dW = hyperfine_constant(H, 1, 0, 1)                        # I = 1/2: dW = A (I + 1/2)
    g_j = lande_g(0, 1)
    g_i_mu_n = 2 * 2.79284734463 * 0.5 / PROTON_ELECTRON_MASS_RATIO   # g_p mu_N, CODATA 2022
    x = (g_j * 0.5 + g_i_mu_n) * B / dW

    def breit_rabi(m, root):
        return -dW / 4 - g_i_mu_n * B * m + root * dW / 2

    assert energy["1s1/2 F=1 m=1"] == pytest.approx(breit_rabi(1, 1 + x), rel=1e-10, abs=1e-15)
    assert energy["1s1/2 F=1 m=-1"] == pytest.approx(breit_rabi(-1, 1 - x), rel=1e-10, abs=1e-15)
    assert energy["1s1/2 F=1 m=0"] == pytest.approx(breit_rabi(0, math.sqrt(1 + x * x)), rel=1e-10, abs=1e-15)
    assert energy["1s1/2 F=0 m=0"] == pytest.approx(breit_rabi(0, -math.sqrt(1 + x * x)), rel=1e-10, abs=1e-15)


def _quench_rate(volt_per_cm):
    F = to_au(f"{volt_per_cm} V/cm", "field")
    res = run(["1s", "2s", "2p"], "2s1/2 m=1/2", after=to_au("40 us", "time"),
              fields=FieldsConfig(electric=f"{volt_per_cm} V/cm"))
    p = res.history_populations["2s1/2"]
    half = len(p) // 2
    rate = -math.log(p[-1] / p[half]) / (res.times[-1] - res.times[half])
    return rate, F


@pytest.mark.parametrize("volt_per_cm", [0.5, 2.0])
def test_2s_quench_rate_in_a_static_field(volt_per_cm):
    # Bethe & Salpeter (1957) §67 (from memory): perturbation theory for the 2p admixture,
    # gamma = Gamma_2p F^2 sum_j |<2p_j m|z|2s m>|^2 / (Delta_j^2 + Gamma_2p^2/4), |<..>|^2 = 3 and 6 (3/mu)^2/9
    rate, F = _quench_rate(volt_per_cm)
    gamma = einstein_A(H, "2p", "1s")
    lamb = level_energy(H, "2s1/2", "fine") - level_energy(H, "2p1/2", "fine")
    fine = level_energy(H, "2s1/2", "fine") - level_energy(H, "2p3/2", "fine")
    z2 = (3 / H.reduced_mass) ** 2 * F**2
    expected = gamma * z2 * (1 / 3 / (lamb**2 + gamma**2 / 4) + 2 / 3 / (fine**2 + gamma**2 / 4))
    assert rate == pytest.approx(expected, rel=2e-3)


def test_fields_are_refused_where_they_mean_nothing():
    base = {"atom": {"Z": 1, "nucleus": "H"}, "solver": {"route": "levels", "states": ["1s", "2p"], "after": 10.0}}
    with pytest.raises(InputError, match="`fields` need `atom.structure`"):
        load_config({**base, "fields": {"magnetic": "1 G"}})
    with pytest.raises(InputError, match=r"`fields.magnetic` must be within \+-10 T"):
        load_config({**base, "atom": {**base["atom"], "structure": "fine"}, "fields": {"magnetic": "11 T"}})
    with pytest.raises(InputError, match="`fields.magnetic`: must be a magnetic field"):
        load_config({**base, "atom": {**base["atom"], "structure": "fine"}, "fields": {"magnetic": "1 V/cm"}})
    with pytest.raises(InputError, match="`fields.electric`"):
        load_config({**base, "atom": {**base["atom"], "structure": "fine"}, "fields": {"electric": "1 MV/cm"}})
    grid = {"atom": {"Z": 1, "nucleus": "H", "structure": "fine"}, "solver": {"route": "grid"},
            "pulse": [{"wavelength": "800 nm", "intensity": "1e13 W/cm^2", "cycles": 4}]}
    with pytest.raises(InputError, match="needs route \"levels\""):
        load_config(grid)


def test_structure_labels_are_checked_at_load():
    base = {"atom": {"Z": 1, "nucleus": "H", "structure": "fine"}, "solver": {"route": "levels", "after": 10.0}}
    with pytest.raises(InputError, match="hyperfine-structure label"):
        load_config({**base, "solver": {**base["solver"], "states": ["1s1/2 F=1", "2p"]}})
    with pytest.raises(InputError, match="repeats sublevel"):
        load_config({**base, "solver": {**base["solver"], "states": ["2p", "2p3/2"]}})
    with pytest.raises(InputError, match="m_l sublevel"):
        load_config({**base, "atom": {**base["atom"], "initial": "2p0"},
                     "solver": {**base["solver"], "states": ["2p"]}})
    with pytest.raises(InputError, match="F must be one of 1/2, 3/2"):
        load_config({"atom": {"nucleus": "D", "structure": "hyperfine"},
                     "solver": {"route": "levels", "after": 1.0, "states": ["1s1/2 F=1"]}})
    with pytest.raises(InputError, match="nucleus"):
        load_config({"atom": {"Z": 1, "structure": "hyperfine"}, "solver": {"route": "levels", "after": 1.0,
                                                                             "states": ["1s"]}})


def test_structure_and_fields_enter_the_job_id():
    base = {"atom": {"Z": 1, "nucleus": "H", "structure": "fine"}, "solver": {"route": "levels", "states": ["1s", "2p"],
                                                                             "after": 10.0}}
    ids = {load_config(base).physics_hash(),
           load_config({**base, "atom": {**base["atom"], "structure": "hyperfine"}}).physics_hash(),
           load_config({**base, "fields": {"magnetic": "1 G"}}).physics_hash(),
           load_config({**base, "fields": {"electric": "1 V/cm"}}).physics_hash()}
    assert len(ids) == 4
    assert load_config({**base, "fields": {"magnetic": "1 G"}}).physics_hash() == \
        load_config({**base, "fields": {"magnetic": "0.1 mT"}}).physics_hash()


# -- two photons -----------------------------------------------------------------------------------------
def test_two_photon_coefficients_against_haas():
    # Haas et al., PRA 73, 052501 (2006), 1S-2S of hydrogen, infinite nuclear mass (from memory), Hz/(W/m^2)
    reference = {"beta_ge": 3.68111e-5, "beta_ac_1s": -2.67827e-5, "beta_ac_2s": 1.39927e-4, "beta_ioni": 1.20208e-4}
    clamped = haas_coefficients(Atom(1))
    for key, value in reference.items():
        assert clamped[key] == pytest.approx(value, rel=2e-5), key
    with_proton = haas_coefficients(H, omega=0.5 * 0.375)
    for key, value in reference.items():        # the 2 %; the reduced mass scales them by mu^-3
        assert with_proton[key] == pytest.approx(value, rel=0.02), key


def test_ionisation_width_is_the_photoionisation_rate():
    # -2 Im W (|s|^2/4) = sigma(omega) I / omega: the outgoing sum over the continuum and the exact
    # cross section (Bethe & Salpeter 1957, §69-71) agree
    omega = 0.1875
    W = stark_matrix(H, [State(2, 0, 0)], 0, omega, [0.0, 1.0, 0.0])
    width = -2 * W[0, 0].imag / 4                                      # loss rate per |E|^2
    assert width == pytest.approx(float(cross_section(H, 2, 0, omega)) * C_AU / (8 * math.pi * omega), rel=1e-6)


def test_static_limit_is_the_dalgarno_lewis_polarizability():
    W = stark_matrix(Atom(1), [State(1, 0, 0)], 0, 1e-6, [0.0, 1.0, 0.0])
    assert -W[0, 0].real == pytest.approx(4.5, rel=1e-8)              # alpha(1s) = 9/2 (Dalgarno & Lewis 1955)


def test_circular_light_drives_no_s_to_s_two_photon_transition():
    subs = [State(1, 0, 0), State(2, 0, 0)]
    assert abs(two_photon_matrix(H, subs, 0, 2, 1, 0.1875, [0.0, 0.0, 1.0])[1, 0]) == 0.0   # selection rule
    assert abs(two_photon_matrix(H, subs, 0, 2, 1, 0.1875, [0.0, 1.0, 0.0])[1, 0]) > 7


def test_two_photon_pi_pulse_needs_the_stark_shifted_resonance():
    # A flat pulse of two-photon area pi: full transfer on the line shifted by (beta_ac(2S) - beta_ac(1S)) I,
    # little at the field-free resonance where the shift is 2.26 Rabi frequencies (Haas et al. 2006)
    subs = [parse_label("1s1/2 m=1/2"), parse_label("2s1/2 m=1/2")]
    T = abs(two_photon_matrix(H, subs, 0, 2, 1, 0.1875, [0.0, 1.0, 0.0])[1, 0])
    W = stark_matrix(H, subs, 0, 0.1875, [0.0, 1.0, 0.0]).real
    length, ramp = to_au("60 ns", "time"), to_au("4 ns", "time")
    intensity = math.pi / (0.5 * T * (length - 1.25 * ramp))       # Omega = I T / 2; a sin^4 ramp counts 3/8
    bare = 0.5 * (level_energy(H, "2s1/2", "fine") - level_energy(H, "1s1/2", "fine"))
    shift = 0.25 * (W[1, 1] - W[0, 0]) * intensity
    populations = []
    for omega in (bare + shift / 2, bare):
        res = run(["1s", "2s"], "1s1/2 m=1/2", {"envelope": "flat", "photon_energy": omega,
                                                "intensity": intensity, "length": length, "ramp": ramp},
                  two_photon=True, ionization_loss=False)
        populations.append(res.populations["2s"])
    assert populations[0] > 0.97 and populations[1] < 0.2


def test_ionisation_empties_2s_during_the_pulse():
    res = run(["2s"], "2s1/2 m=1/2", {"envelope": "flat", "wavelength": "243 nm", "intensity": "1e7 W/cm^2",
                                      "length": "20 ns", "ramp": "1 ns"}, two_photon=True)
    sigma = float(cross_section(H, 2, 0, to_au("243 nm", "length") ** -1 * 2 * math.pi * C_AU))
    omega = 2 * math.pi * C_AU / to_au("243 nm", "length")
    rate = sigma * C_AU * (1e7 / AU_INTENSITY_WCM2) / (8 * math.pi * omega)   # sigma I / omega, I = c|E|^2/(8 pi)
    assert res.ionization == pytest.approx(1 - math.exp(-rate * to_au("19 ns", "time")), rel=0.03)
    assert res.ionization + res.populations["2s"] == pytest.approx(1.0, abs=1e-8)
    assert any("drives nothing" in w for w in res.warnings)          # one shell: shifted and ionised only


def test_kestrel_1s_2s_config_shows_the_shifted_line(tmp_path):
    config = tomllib.loads((REPO / "configs" / "levels_kestrel_1s2s_scan.toml").read_text())
    assert load_config(config).atom.structure == "hyperfine"
    centre = 1233030551.21                                          # MHz, the config's field-free F=1 -> F=1 / 2
    config["scan"] = {"pulse.0.photon_energy": [f"{centre + d} MHz" for d in (-1.5, 0.5, 2.5)]}
    driven_atom.scan(config, tmp_path / "line", workers=1, progress=False)
    ds = driven_atom.open_campaign(tmp_path / "line")
    line = ds["population"].sel(state="2s1/2 F=1").values
    assert line[1] > line[0] and line[1] > line[2]                  # the peak near +0.5 MHz (Stark-shifted)
    assert line[2] > line[0]                                         # the line leans to the blue
    assert (ds["ionization"].values > 1e-3).all()


def test_component_labels_survive_the_result_file_and_the_figure(tmp_path):
    config = {"atom": {"Z": 1, "nucleus": "H", "structure": "fine", "initial": "2p3/2 m=1/2"},
              "solver": {"route": "levels", "states": ["1s", "2p3/2"], "after": "1 ns"}}
    result = driven_atom.run(config, out=tmp_path, progress=False)
    back = driven_atom.open_result(result.metadata["file"])
    assert back.populations == result.populations and "2p3/2 m=1/2" in back.history_populations
    assert np.array_equal(back.history_populations["2p3/2"], result.history_populations["2p3/2"])
    from driven_atom.plotting import _levels_only, result_figure

    assert sorted(_levels_only(back.populations)) == ["1s1/2", "2p3/2"]
    result_figure(back, tmp_path / "fig.png")
    assert (tmp_path / "fig.png").stat().st_size > 0


def test_a_scan_over_the_static_field():
    from driven_atom.campaign.scan import expand

    plan = expand({"atom": {"Z": 1, "nucleus": "H", "structure": "fine", "initial": "2s1/2 m=1/2"},
                   "solver": {"route": "levels", "states": ["1s", "2s", "2p"], "after": "1 us"},
                   "scan": {"fields.electric": {"from": "1 V/cm", "to": "3 V/cm", "num": 3}}})
    assert plan.shape == (3,) and plan.axes[0].units == "V/cm" and len({job.id for job in plan.jobs}) == 3


def test_error_bars_run_the_companion_on_the_same_structure(tmp_path):
    config = {"atom": {"Z": 1, "nucleus": "H", "structure": "hyperfine", "initial": "2p3/2 F=2 m=2"},
              "fields": {"magnetic": "10 G"},
              "solver": {"route": "levels", "states": ["1s", "2p3/2"], "after": "1 ns"}}
    result = driven_atom.run(config, out=tmp_path, progress=False, error_estimate=True)
    errors = result.quality["errors"]
    assert errors["method"] == "richardson" and "2p3/2 F=2 m=2" in errors["populations"]
    assert errors["populations"]["2p3/2 F=2 m=2"] < 1e-6 * result.populations["2p3/2 F=2 m=2"] + 1e-12

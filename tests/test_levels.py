"""Few-level route: settings, bookkeeping, polarisation conventions, coefficient sampling."""
import math

import numpy as np
import pytest

from driven_atom.atom import Atom, State
from driven_atom.config import OutputConfig
from driven_atom.config import read_settings
from driven_atom.routes import propagate
from driven_atom.routes.levels import build_model, sample_coefficients, spherical_coefficients
from driven_atom.settings import LevelsSettings as Settings
from driven_atom.errors import InputError
from driven_atom.observables.populations import level_populations
from driven_atom.pulse import Pulse
from driven_atom.units import AU_INTENSITY_WCM2, AU_TIME_S, BOHR2_CM2, HARTREE_J

W_1S_2P = 0.375    # hartree, infinite nuclear mass (analytic)


def run(pulse_items, states, initial=((State(1, 0), 1.0),), atom=None, every=None, **solver):
    settings = Settings(route="levels", states=states, **solver)
    return propagate(atom or Atom(1), Pulse(pulse_items) if pulse_items else None, settings,
                     initial=list(initial), output=OutputConfig(every=every))


# --- settings ---------------------------------------------------------------------------------
def test_states_expand_to_sublevels_in_order():
    s = Settings(states=["2p", "1s", "3d2"])
    assert [x.label for x in s.sublevels()] == ["2p-1", "2p0", "2p1", "1s0", "3d2"]


@pytest.mark.parametrize("keys, words", [
    ({"states": ["1s", "2p", "2p0"]}, ["solver.states", "2p0"]),
    ({"states": ["1j"]}, ["solver.states", "orbital letter"]),
    ({"states": ["1s"], "stats": 1}, ["solver.stats", "did you mean `states`"]),
    ({"states": ["1s"], "after": "1 ns", "t_end": "2 ns"}, ["solver.after", "solver.t_end"]),
    ({"states": ["1s"], "dephasing": "-1 GHz"}, ["solver.dephasing", ">= 0"]),
    ({"states": ["1s"], "dephasing": "3 nm"}, ["solver.dephasing", "rate"]),
    ({"states": ["1s"], "after": "-1 ns"}, ["solver.after", ">= 0"]),
    ({"states": []}, ["solver.states"]),
])
def test_bad_settings_name_the_key(keys, words):
    with pytest.raises(InputError) as err:
        read_settings({"route": "levels", **keys})
    message = str(err.value)
    assert "\n" not in message and all(w in message for w in words), message


def test_dephasing_units():
    assert Settings(states=["1s"], dephasing="1 GHz").dephasing == pytest.approx(1e9 * AU_TIME_S, rel=1e-12)


# --- populations helper -----------------------------------------------------------------------
def test_level_populations_sums_sublevels_and_keeps_arrays():
    out = level_populations({State(2, 1, 1): np.array([0.25, 0.5]), State(2, 1, -1): np.array([0.5, 0.25]),
                             "1s0": np.array([0.25, 0.25])})
    assert list(out) == ["1s", "1s0", "2p", "2p-1", "2p1"]
    assert out["2p"].tolist() == [0.75, 0.75]
    with pytest.raises(InputError):
        level_populations({"2p": 0.5, "2p0": 0.5})


# --- model --------------------------------------------------------------------------------------
def test_model_is_hermitian_and_follows_selection_rules():
    model = build_model(Atom(1), Settings(states=["1s", "2s", "2p", "3d"]).sublevels())
    for m in model.cartesian():
        assert np.allclose(m, m.conj().T, atol=1e-15)
    lab = model.labels
    d = model.dipoles
    assert d[1, lab.index("2p0"), lab.index("1s0")] != 0       # q = 0 keeps m
    assert d[2, lab.index("2p1"), lab.index("1s0")] != 0       # q = +1 raises m
    assert d[:, lab.index("2s0"), lab.index("1s0")].tolist() == [0, 0, 0]   # Δl = 0 is forbidden
    assert d[:, lab.index("3d2"), lab.index("1s0")].tolist() == [0, 0, 0]   # Δl = 2 is forbidden


def test_spherical_coefficients_rebuild_the_dot_product():
    rng = np.random.default_rng(1)
    v, r = rng.normal(size=3) + 1j * rng.normal(size=3), rng.normal(size=3)
    r_sph = np.array([(r[0] - 1j * r[1]) / math.sqrt(2), r[2], -(r[0] + 1j * r[1]) / math.sqrt(2)])
    assert spherical_coefficients(v) @ r_sph == pytest.approx(v @ r, abs=1e-14)   # analytic


# --- propagation bookkeeping --------------------------------------------------------------------
def test_initial_state_outside_the_model():
    with pytest.raises(InputError, match="atom.initial"):
        run(None, ["2p"], after=10.0)


def test_unresolved_level_starts_as_an_incoherent_mixture():
    res = run(None, ["1s", "2p"], initial=[(State(2, 1), 1.0)], atom=Atom.from_name("H"), after="1 ns")
    assert res.stats["solver"] == "closed form"
    p = [res.populations[k] for k in ("2p-1", "2p0", "2p1")]
    assert p[0] == pytest.approx(p[1], rel=1e-12) and p[1] == pytest.approx(p[2], rel=1e-12)
    assert res.populations["2p"] == pytest.approx(math.exp(-1 / 1.5962), rel=1e-4)   # τ(2p), Wiese & Fuhr 2009


def test_history_sampling_and_end_time():
    items = [{"envelope": "sin2", "photon_energy": W_1S_2P, "peak_field": 1e-3, "length": 1000.0}]
    res = run(items, ["1s", "2p"], every=30.0, after=500.0)
    assert res.times[0] == pytest.approx(-500.0) and res.times[-1] == pytest.approx(1000.0)
    assert np.allclose(np.diff(res.times)[:-1], 30.0)
    assert all(len(v) == len(res.times) for v in res.history_populations.values())
    assert set(res.history_populations) >= {"1s", "1s0", "2p", "2p0", "2p1", "2p-1"}
    res2 = run(items, ["1s", "2p"], t_end=1000.0)
    assert res2.populations["2p"] == pytest.approx(res.populations["2p"], abs=1e-9)
    with pytest.raises(InputError, match="solver.t_end"):
        run(items, ["1s", "2p"], t_end=0.0)


def test_far_carrier_warns_and_static_field_needs_full_coupling():
    far = run([{"envelope": "sin2", "photon_energy": 0.2, "peak_field": 1e-3, "length": 5000.0}], ["1s", "2p"])
    assert any("rwa_detuning_pulse0 = 0.467" in w and "`solver.rwa` = false" in w for w in far.warnings)
    assert any("nothing is resonant" in w and "121.5" in w for w in far.warnings)   # 1s-2p, Bohr levels
    assert far.quality["trustworthy"] is False and "1s-2p" in far.metadata["transitions"][0]
    with pytest.raises(InputError, match="refused before the run: pulse 0: detuning"):
        run([{"envelope": "sin2", "photon_energy": 0.1, "peak_field": 1e-3, "length": 500.0}], ["1s", "2p"])
    static = [{"envelope": "static", "peak_field": 1e-3, "length": 200.0, "ramp": 50.0}]
    with pytest.raises(InputError, match="rwa"):
        run(static, ["2s", "2p"], initial=[(State(2, 0), 1.0)])
    # full coupling mixes the degenerate 2s and 2p0 (linear Stark effect)
    stark = run(static, ["2s", "2p"], initial=[(State(2, 0), 1.0)], rwa=False)
    assert stark.populations["2p0"] > 1e-3 and stark.populations["2p1"] == 0.0


@pytest.mark.parametrize("polarization", ["z", "x", "circular-"])
def test_rwa_and_full_coupling_agree_for_every_polarisation(polarization):
    # weak resonant pulse: counter-rotating terms are O(Ω/ω)² <= 3e-5 (Bloch & Siegert 1940)
    items = [{"envelope": "sin2", "photon_energy": W_1S_2P, "peak_field": 2e-3, "length": 3000.0,
              "polarization": polarization}]
    rwa = run(items, ["1s", "2p"], decay=False, rtol=1e-10, atol=1e-12)
    full = run(items, ["1s", "2p"], decay=False, rwa=False, rtol=1e-10, atol=1e-12)
    for label in ("1s", "2p-1", "2p0", "2p1"):
        assert rwa.populations[label] == pytest.approx(full.populations[label], abs=3e-5)
    if polarization == "x":    # x = (r_-1 - r_+1)/√2: equal Δm = ±1 (analytic)
        assert rwa.populations["2p1"] == pytest.approx(rwa.populations["2p-1"], rel=1e-9)
        assert rwa.populations["2p0"] == 0.0 and rwa.populations["2p1"] > 0.1
    if polarization == "circular-":
        assert rwa.populations["2p-1"] > 0.1 and rwa.populations["2p1"] == 0.0


def test_ionization_rate_in_lab_units():
    # rate = σ I/(ħω) with I = F0² · 3.50945e16 W/cm² (linear, cycle-averaged; docs/physics.md)
    # σ of the sublevel 2p0 for light along z: the m-resolved cross section (Bethe & Salpeter 1957)
    from driven_atom.atom.photoionization import cross_section, cross_section_sublevel

    F0, w, length, ramp = 0.0035, 0.375, 40000.0, 8000.0      # below barrier suppression of 2p (0.0039)
    items = [{"envelope": "flat", "photon_energy": w, "peak_field": F0, "length": length, "ramp": ramp}]
    exposure_s = (length - 2 * ramp + 2 * 3 * ramp / 8) * AU_TIME_S      # ∫f² dt, sin⁴ ramps (analytic)
    for m in (0, 1):
        res = run(items, ["2p"], initial=[(State(2, 1, m), 1.0)], ionization_loss=True, decay=False)
        sigma_cm2 = float(cross_section_sublevel(Atom(1), State(2, 1, m), w, 0)) * BOHR2_CM2
        rate_per_s = sigma_cm2 * F0**2 * AU_INTENSITY_WCM2 / (w * HARTREE_J)
        assert res.ionization == pytest.approx(1 - math.exp(-rate_per_s * exposure_s), rel=1e-5)
    # the sublevels' cross sections average to the level's (m-averaged) one
    sigmas = [float(cross_section_sublevel(Atom(1), State(2, 1, m), w, 0)) for m in (-1, 0, 1)]
    assert sum(sigmas) / 3 == pytest.approx(float(cross_section(Atom(1), 2, 1, w)), rel=1e-12)
    assert res.ionization > 0.01 and res.norm == pytest.approx(1, abs=1e-9)


# --- coefficient sampling --------------------------------------------------------------------
def test_sampling_resolves_a_short_ramp_and_respects_the_budget():
    from scipy.interpolate import make_interp_spline

    lp = Pulse({"envelope": "flat", "photon_energy": 0.375, "peak_field": 1.0, "length": 1e5, "ramp": 20.0})
    values = lambda t: lp.components[0].complex_envelope(t)[:, 2][None, :]   # noqa: E731
    t, v = sample_coefficients(values, lp.t_start, lp.t_end, n_start=257, tol=1e-7,
                               breakpoints=lp.components[0].breakpoints)
    probe = np.linspace(lp.t_start + 25, lp.t_end - 25, 20001)
    assert np.max(np.abs(make_interp_spline(t, v[0], k=3)(probe) - values(probe)[0])) < 1e-6
    assert len(t) < 5000
    with pytest.raises(InputError, match="samples"):
        sample_coefficients(values, lp.t_start, lp.t_end, n_start=257, tol=1e-7, max_points=300)


def test_each_carrier_is_paired_with_its_nearest_transition():
    w21, w32 = 0.375, 5 / 72        # 3/8 and 1/4 - 1/9 hartree, infinite nuclear mass (analytic)
    items = [{"envelope": "sin2", "photon_energy": w21, "peak_field": 1e-4, "length": 2000.0},
             {"envelope": "sin2", "photon_energy": w32, "peak_field": 1e-4, "length": 2000.0}]
    res = run(items, ["1s", "2p", "3d"])
    first, second = res.metadata["transitions"]
    assert "1s-2p" in first and "2p-3d" in second and "detuning +0" in first
    assert not res.warnings and res.populations["3d0"] > 0
    lonely = run(items[:1], ["1s"])
    assert any("drives nothing" in w for w in lonely.warnings)


def test_master_equation_matches_a_hand_written_lindblad_in_scipy():
    # independent assembly: dρ/dt = −i[H, ρ] + Σ_k (L ρ L† − ½{L†L, ρ}) (Lindblad 1976), scipy DOP853
    from scipy.integrate import solve_ivp
    from scipy.interpolate import make_interp_spline

    from driven_atom.routes.levels import build_model, coupling

    atom = Atom.from_name("H")
    items = [{"envelope": "sin2", "photon_energy": 0.3748, "peak_field": 5e-3, "length": 3000.0,
              "polarization": "circular+"}]
    settings = Settings(states=["1s", "2p", "3s"], dephasing=2e-4, ionization_loss=True, decay=True)
    pulse = Pulse(items)
    res = propagate(atom, pulse, settings, initial=[(State(1, 0), 1.0)], output=OutputConfig())
    model = build_model(atom, settings.sublevels(), decay=True, ionization_sink=True)
    terms, (ts, vals) = coupling(atom, pulse, model, settings)
    spline = make_interp_spline(ts, vals, k=3, axis=1)
    n = model.size
    constant = []
    for i, j, rate in model.channels:
        L = np.zeros((n, n))
        L[j, i] = math.sqrt(rate)
        constant.append(L)
    for E in np.unique(model.energies):
        constant.append(np.diag(np.r_[(model.energies == E).astype(float), np.zeros(len(model.sinks))])
                        * math.sqrt(settings.dephasing))

    def lindblad(L, rho):
        LdL = L.conj().T @ L
        return L @ rho @ L.conj().T - 0.5 * (LdL @ rho + rho @ LdL)

    def rhs(t, y):
        rho = y.reshape(n, n)
        c = spline(t)
        H = sum((c[r].conj() if conj else c[r]) * A for A, r, conj in terms.hamiltonian)
        d = -1j * (H @ rho - rho @ H) + sum(lindblad(L, rho) for L in constant)
        for ops, r in terms.dissipators:
            d += c[r].real * sum(lindblad(L, rho) for L in ops)
        return d.ravel()

    rho0 = np.zeros((n, n), dtype=complex)
    rho0[0, 0] = 1
    sol = solve_ivp(rhs, (pulse.t_start, pulse.t_end), rho0.ravel(), method="DOP853", rtol=1e-10, atol=1e-12)
    p = np.real(np.diag(sol.y[:, -1].reshape(n, n)))
    labels = model.labels
    for label in ("1s0", "2p1", "2p0", "3s0"):
        assert res.populations[label] == pytest.approx(p[labels.index(label)], abs=1e-8)
    assert res.ionization == pytest.approx(p[labels.index("ionized")], abs=1e-10)
    assert res.ionization > 1e-6 and res.populations["2p1"] > 0.05

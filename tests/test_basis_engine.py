"""Route "basis": propagation checks (norm, reference ODE solver, Rabi flopping, gauges, spectra, files)."""
import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.linalg import expm

from driven_atom.atom import Atom, State
from driven_atom.atom.dipoles import dipole_matrix_element
from driven_atom.basis.eigenbasis import build_basis
from driven_atom.config import OutputConfig
from driven_atom.config import read_settings
from driven_atom.units import HARTREE_EV
from driven_atom.routes import propagate
from driven_atom.routes.basis import MagnusPropagator
from driven_atom.settings import BasisSettings as Settings
from driven_atom.routes.krylov import Coupling, KrylovFailure
from driven_atom.errors import InputError
from driven_atom.pulse import Pulse

H = Atom(1)
GROUND = [(State(1, 0), 1.0)]


def _run(pulse, **keys):
    keys.setdefault("cache_dir", None)
    return propagate(H, pulse, Settings(**keys), initial=GROUND, output=OutputConfig())


def test_norm_conserved_in_a_strong_field():
    pulse = Pulse({"wavelength": "800 nm", "peak_field": 0.05, "cycles": 3})
    res = _run(pulse, r_max=60.0, dr=0.1, l_max=6, e_max=3.0, tolerance=1e-8)
    assert res.ionization > 1e-4                         # the field does something
    assert abs(res.norm - 1) < 1e-9                       # unitary propagation, no absorber
    assert np.max(np.abs(res.series["norm"] - 1)) < 1e-9


@pytest.mark.parametrize("groups", [None, "chain"])
def test_lanczos_matches_dense_exponential(groups):
    rng = np.random.default_rng(3)
    k = 40
    from scipy.sparse import csr_matrix

    a = rng.normal(size=(k, k))
    group = np.repeat(np.arange(8), 5)
    if groups == "chain":                                  # couplings between neighbouring groups only
        a = a * (np.abs(group[:, None] - group[None, :]) == 1)
    b = (a + a.T) / 2
    d = rng.uniform(-1, 2, k)
    coupling = Coupling(csr_matrix(b), None if groups is None else group)
    assert coupling.form == ("csr" if groups is None else "blocks")
    v = rng.normal(size=k) + 1j * rng.normal(size=k)
    w, m = coupling.expm(d, 0.7, v, 0.3, 1e-12)
    exact = expm(-0.3j * (np.diag(d) + 0.7 * b)) @ v                   # scipy.linalg.expm reference
    np.testing.assert_allclose(w, exact, atol=1e-11)
    assert m < k
    coarse, m_coarse = coupling.expm(d, 0.7, v, 0.3, 1e-4)
    assert m_coarse < m and 1e-12 < np.linalg.norm(coarse - exact) < 1e-3   # the tolerance is used
    with pytest.raises(KrylovFailure):
        Coupling(csr_matrix(np.diag(np.arange(200.0)))).expm(np.zeros(200), 1.0, np.ones(200, complex), 50.0, 1e-12)


def test_block_and_csr_products_equal_scipy_csr_product_and_blocks_decline_other_structures():
    basis = build_basis(H, r_max=30.0, dr=0.2, l_max=3, e_max=2.0)
    rng = np.random.default_rng(5)
    v = rng.normal(size=basis.size) + 1j * rng.normal(size=basis.size)
    for matrix in (basis.dipole, basis.velocity_dipole()):
        ref = matrix.astype(complex).tocsr() @ v                         # scipy CSR reference
        for groups in (basis.l, None):
            np.testing.assert_allclose(Coupling(matrix, groups) @ v, ref, rtol=0, atol=1e-12 * np.abs(ref).max())
    assert Coupling(basis.dipole, basis.l).form == "blocks"
    assert Coupling(basis.velocity_dipole(), basis.l).form == "csr"                    # not real
    assert Coupling(basis.dipole, basis.l[::-1]).form == "csr"                         # groups not sorted
    assert Coupling(basis.dipole + basis.dipole @ basis.dipole, basis.l).form == "csr"  # l ↔ l, l ± 2


def test_magnus_matches_dop853_on_same_matrix():
    basis = build_basis(H, r_max=30.0, dr=0.2, l_max=2, e_max=2.0)
    pulse = Pulse({"photon_energy": 0.3, "peak_field": 0.03, "cycles": 3})
    E, D = basis.energies, basis.dipole.toarray()
    c0 = np.zeros(basis.size, complex)
    c0[basis.index("1s")] = 1.0

    def rhs(t, y):
        return -1j * (E * y + pulse.field_z(np.array([t]))[0] * (D @ y))

    ref = solve_ivp(rhs, (pulse.t_start, pulse.t_end), c0, method="DOP853", rtol=1e-12, atol=1e-13).y[:, -1]
    for groups in (None, basis.l):                       # complex CSR and l-block products
        prop = MagnusPropagator(E, basis.dipole, pulse.field_z, 1e-10, groups=groups)
        c, _, _ = prop.advance(c0, pulse.t_start, pulse.t_end, 1.0)
        assert np.linalg.norm(c - ref) < 1e-7
    assert 1 - abs(ref[basis.index("1s")]) ** 2 > 1e-3


@pytest.mark.parametrize("scheme,order", [("cf4", 4), ("cf6", 6)])
def test_observed_order_of_the_magnus_schemes(scheme, order):
    rng = np.random.default_rng(0)
    k = 12
    energies = np.sort(rng.uniform(-1, 2, k))
    a = rng.normal(size=(k, k))
    from scipy.sparse import csr_matrix

    d = csr_matrix((a + a.T) / 2)

    def drive(t):
        return 0.7 * np.cos(1.3 * t) + 0.3 * np.sin(0.4 * t)

    c0 = np.zeros(k, complex)
    c0[0] = 1.0
    T = 6.0
    ref = solve_ivp(lambda t, y: -1j * (energies * y + drive(t) * (d @ y)), (0, T), c0, method="DOP853",
                    rtol=1e-13, atol=1e-14).y[:, -1]           # scipy reference solution
    errors = []
    for n in (10, 20, 40):
        prop = MagnusPropagator(energies, d, drive, 1e-14, scheme=scheme)
        c = c0
        for i in range(n):
            c = prop.step(c, i * T / n, T / n)
        errors.append(np.linalg.norm(c - ref))
    observed = math.log2(errors[1] / errors[2])
    print(scheme, errors, "observed order", observed)
    assert abs(observed - order) < 0.3


def test_stretched_grid_setting_reaches_the_basis():
    pulse = Pulse({"photon_energy": 0.8, "peak_field": 1e-3, "cycles": 6})
    uniform = _run(pulse, r_max=100.0, dr=0.1, l_max=1, e_max=3.0)
    stretched = _run(pulse, r_max=100.0, dr=0.25, dr_min="0.02 au", r_stretch="0.3 nm", l_max=1, e_max=3.0)
    assert stretched.stats["basis_size"] < uniform.stats["basis_size"] + 5
    assert stretched.stats["basis_key"] != uniform.stats["basis_key"]
    assert stretched.ionization == pytest.approx(uniform.ionization, rel=2e-3)


def test_tolerance_controls_the_error():
    pulse = Pulse({"photon_energy": 0.4, "peak_field": 0.02, "cycles": 4})
    keys = dict(r_max=40.0, dr=0.1, l_max=3, e_max=2.0)
    loose, tight = _run(pulse, tolerance=1e-5, **keys), _run(pulse, tolerance=1e-11, **keys)
    ref = tight.populations["2p"]
    assert abs(loose.populations["2p"] - ref) < 1e-4
    assert loose.stats["matvecs"] < tight.stats["matvecs"]


def test_resonant_rabi_flopping_agrees_with_levels_route_and_pulse_area():
    d = dipole_matrix_element(H, State(2, 1, 0), State(1, 0, 0), 0)
    omega, cycles = 0.375, 120                            # 1s-2p resonance (analytic, infinite mass)
    T = cycles * 2 * math.pi / omega
    theta = math.pi / 2
    F0 = 2 * theta / (d * T)                              # area: int F0 d sin^2(pi t/T) dt = F0 d T/2
    pulse = Pulse({"photon_energy": omega, "peak_field": F0, "cycles": cycles})
    basis = _run(pulse, r_max=100.0, dr=0.1, l_max=2, e_max=1.0, tolerance=1e-8)
    lset = read_settings({"route": "levels", "states": ["1s", "2p0"], "rwa": False, "decay": False})
    levels = propagate(H, pulse, lset, initial=GROUND, output=OutputConfig())
    print("P(2p) basis", basis.populations["2p"], "levels", levels.populations["2p"])
    assert basis.populations["2p"] == pytest.approx(math.sin(theta / 2) ** 2, rel=0.02)   # pulse-area theorem
    assert basis.populations["2p"] == pytest.approx(levels.populations["2p"], rel=0.01)


def test_length_and_velocity_gauges_agree_in_weak_field():
    pulse = Pulse({"photon_energy": 0.8, "peak_field": 1e-3, "cycles": 6})
    keys = dict(r_max=100.0, dr=0.1, l_max=2, e_max=4.0, tolerance=1e-10)
    length, velocity = _run(pulse, gauge="length", **keys), _run(pulse, gauge="velocity", **keys)
    assert velocity.ionization == pytest.approx(length.ionization, rel=0.01)


def test_form_is_a_deprecated_alias_of_gauge():
    from driven_atom.settings import ConfigWarning

    with pytest.warns(ConfigWarning, match="`solver.form` is deprecated"):
        assert Settings(form="velocity").gauge == "velocity"
    with pytest.raises(InputError, match="old name"):
        read_settings({"route": "basis", "form": "length", "gauge": "velocity"})


def test_photoelectron_spectrum_integrates_to_yield_and_peaks_at_photon_minus_ip():
    pulse = Pulse({"photon_energy": 0.8, "peak_field": 1e-3, "cycles": 10})
    res = _run(pulse, r_max=150.0, dr=0.1, l_max=2, e_max=2.0, tolerance=1e-10)
    spec = res.spectra["photoelectrons"]
    energy, dpde = spec["energy_eV"] / HARTREE_EV, spec["dP_dE"] * HARTREE_EV
    assert spec["dP_dE_l"].shape == (3, energy.size)
    np.testing.assert_allclose(spec["dP_dE_l"].sum(axis=0) * HARTREE_EV, dpde)
    assert np.trapezoid(dpde, energy) == pytest.approx(res.ionization, rel=0.01)
    assert energy[np.argmax(dpde)] == pytest.approx(0.8 - 0.5, abs=0.02)    # Einstein: E = w - I_p
    assert np.argmax(spec["dP_dE_l"].max(axis=1)) == 1                       # one photon from s: p wave


def test_convergence_warning_when_top_partial_wave_is_populated():
    pulse = Pulse({"wavelength": "800 nm", "peak_field": 0.05, "cycles": 2})
    res = _run(pulse, r_max=40.0, dr=0.2, l_max=1, e_max=2.0, tolerance=1e-6)
    assert res.stats["top_l_population"] > 1e-4
    assert any("l_max" in w for w in res.warnings)
    weak = _run(Pulse({"photon_energy": 0.3, "peak_field": 1e-4, "cycles": 2}),
                r_max=40.0, dr=0.2, l_max=2, e_max=2.0)
    assert weak.warnings == []


def test_run_through_api_writes_file_and_reuses_basis(tmp_path):
    from driven_atom.api import open_result, run

    config = {"atom": {"Z": 1, "nucleus": "H", "initial": "1s"},
              "pulse": [{"photon_energy": "20 eV", "intensity": "1e12 W/cm^2", "cycles": 6}],
              "solver": {"route": "basis", "r_max": "3 nm", "dr": 0.1, "l_max": 1, "e_max": "40 eV"},
              "output": {"every": "0.5 fs"}}
    first = run(config, out=tmp_path, progress=False)
    assert first.stats["basis_reused"] is False
    back = open_result(first.metadata["file"])
    assert back.route == "basis" and back.ionization == pytest.approx(first.ionization)
    assert {"1s", "1s0", "2p", "2p0"} <= set(back.populations)
    assert "dP_dE" in back.spectra["photoelectrons"]
    assert back.times[1] - back.times[0] == pytest.approx(0.5 * 41.341373335, rel=1e-9)   # CODATA 2018: 1 a.u. time = 2.4188843266e-17 s
    second = run(dict(config, pulse=[{"photon_energy": "21 eV", "intensity": "1e12 W/cm^2", "cycles": 6}]),
                 out=tmp_path, progress=False)
    assert second.stats["basis_reused"] is True


def test_resume_from_checkpoint_equals_uninterrupted_run(tmp_path, monkeypatch):
    from driven_atom.result import Checkpoint
    from driven_atom.routes import basis as eigenbasis

    pulse = Pulse({"photon_energy": 0.4, "peak_field": 0.01, "cycles": 3})
    settings = Settings(r_max=30.0, dr=0.2, l_max=2, e_max=1.0, cache_dir=None, checkpoint_every="1 ns")
    output = OutputConfig(every=5.0)
    plain = propagate(H, pulse, settings, initial=GROUND, output=output)

    original = eigenbasis.MagnusPropagator.advance
    calls = []

    def crash_on_tenth(self, *args):
        calls.append(1)
        if len(calls) == 10:
            raise RuntimeError("simulated kill")
        return original(self, *args)

    cp = Checkpoint(tmp_path / "job.h5", physics_hash="abc")
    monkeypatch.setattr(eigenbasis.MagnusPropagator, "advance", crash_on_tenth)
    with pytest.raises(RuntimeError, match="simulated kill"):
        propagate(H, pulse, settings, initial=GROUND, output=output, checkpoint=cp)
    monkeypatch.setattr(eigenbasis.MagnusPropagator, "advance", original)
    assert cp.load()[1]["position"] == 9                 # saved after the ninth interval
    resumed = propagate(H, pulse, settings, initial=GROUND, output=output, checkpoint=cp)
    assert resumed.populations == plain.populations                 # bit for bit: same steps, same checks
    assert resumed.stats["matvecs"] == plain.stats["matvecs"]
    for key in ("norm", "ionization", "dipole_z"):
        np.testing.assert_array_equal(resumed.series[key], plain.series[key])
    np.testing.assert_allclose(resumed.series["dipole_z"], plain.series["dipole_z"], rtol=0, atol=1e-14)
    np.testing.assert_allclose(resumed.spectra["photoelectrons"]["dP_dE"], plain.spectra["photoelectrons"]["dP_dE"],
                               rtol=1e-12, atol=1e-300)


def test_sampling_longer_than_the_pulse_and_velocity_warning_for_static_field():
    pulse = Pulse({"photon_energy": 0.4, "peak_field": 1e-3, "cycles": 2})
    res = propagate(H, pulse, Settings(r_max=20.0, dr=0.2, l_max=1, e_max=1.0, cache_dir=None), initial=GROUND,
                    output=OutputConfig(every=1e6))
    assert res.times.tolist() == [pulse.t_start, pulse.t_end]
    static = Pulse({"envelope": "static", "peak_field": 1e-3, "length": 200.0, "ramp": 50.0})
    res = propagate(H, static, Settings(r_max=20.0, dr=0.2, l_max=1, e_max=1.0, cache_dir=None, gauge="velocity"),
                    initial=GROUND, output=OutputConfig())
    assert any("gauge" in w for w in res.warnings)


def test_bad_input():
    with pytest.raises(InputError, match="polari"):
        _run(Pulse({"photon_energy": 0.4, "peak_field": 1e-3, "cycles": 2, "polarization": "circular+"}),
             r_max=20.0, dr=0.2, l_max=1, e_max=1.0)
    with pytest.raises(InputError, match="one m"):
        propagate(H, Pulse({"photon_energy": 0.4, "peak_field": 1e-3, "cycles": 2}),
                  Settings(r_max=20.0, dr=0.2, l_max=2, e_max=1.0, cache_dir=None),
                  initial=[(State(2, 1, 0), 0.6), (State(2, 1, 1), 0.8)], output=OutputConfig())
    with pytest.raises(InputError, match="solver.dr"):
        read_settings({"route": "basis", "dr": "-1 nm"})
    with pytest.raises(InputError, match="l_max"):
        read_settings({"route": "basis", "lmax": 3})

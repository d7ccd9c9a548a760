"""A model atom's p level given without m: the runs of m = 0 and |m| = 1, summed as
(P(m=0) + 2 P(|m|=1))/3 (single-active-electron practice, Tong & Lin, J. Phys. B 38, 2593 (2005)),
checked against first-order perturbation theory with the model's sublevel cross sections, the
m-averaged cross section (which the sum must reproduce) and a restart after a crash between the runs."""
from __future__ import annotations

import math

import numpy as np
import pytest

from driven_atom.atom import State
from driven_atom.basis import model_levels
from driven_atom.routes import build_route, load_config, m_part_path, run_config
from driven_atom.routes.levels import model_atom_cross_section_sublevel
from driven_atom.units import C_AU


def _argon(**solver):
    # Kestrel Hollow XUV line: Ar 3p by a weak 30 eV pulse (one-photon ionisation)
    return load_config({"atom": {"species": "Ar"},
                        "pulse": [{"photon_energy": "30 eV", "intensity": "1e10 W/cm^2", "cycles": 30}],
                        "solver": {"route": "basis", "r_max": 60.0, "dr": 0.1, "dr_min": 0.002, "l_max": 2,
                                   "e_max": 2.0, "cache_dir": "none", **solver}})


def _photons_per_area(pulse, omega: float) -> float:
    """∫ c|Ẽ(ω')|²/(4π²ω') dω' (first-order perturbation theory: P = σ × this for a narrow band;
    docs/physics.md)."""
    width = 2 * math.pi / pulse.components[0].length
    grid = np.linspace(omega - 15 * width, omega + 15 * width, 4001)
    return float(np.trapezoid(C_AU * np.abs(pulse.field_spectrum(grid, axis="z")) ** 2
                              / (4 * math.pi**2 * grid), grid))


@pytest.fixture(scope="module")
def argon(tmp_path_factory):
    cfg = _argon()
    path = tmp_path_factory.mktemp("m_average") / "ar.h5"
    return cfg, path, run_config(cfg, path)


def test_each_sublevel_and_the_average_follow_first_order_theory(argon):
    cfg, _, res = argon
    route = build_route(cfg)
    omega = route.pulse.components[0].omega
    photons = _photons_per_area(route.pulse, omega)
    by_m = res.metadata["m_average"]["ionization_by_m"]
    sigma = {m: model_atom_cross_section_sublevel(route.atom, State(3, 1, m), omega) for m in (0, 1)}
    assert sigma[0] / sigma[1] > 2                    # m = 0 ionises several times more here: the average matters
    for m in (0, 1):                                  # first-order theory, a box of 60 bohr: within 5 %
        assert by_m[str(m)] == pytest.approx(sigma[m] * photons, rel=0.05)
    level_sigma = float(model_levels.cross_section(route.atom, State(3, 1), omega))
    assert (sigma[0] + 2 * sigma[1]) / 3 == pytest.approx(level_sigma, rel=1e-9)   # analytic: Σ_m over 2l+1
    assert res.ionization == pytest.approx((by_m["0"] + 2 * by_m["1"]) / 3, rel=1e-12)
    assert res.ionization == pytest.approx(level_sigma * photons, rel=0.05)


def test_the_sum_is_one_consistent_result(argon):
    _, path, res = argon
    assert res.metadata["m_average"]["weights"] == {"0": pytest.approx(1 / 3), "1": pytest.approx(2 / 3)}
    assert res.quality["trustworthy"] and {c["m"] for c in res.quality["checks"]} == {0, 1}
    assert res.populations["3p"] + res.ionization == pytest.approx(res.norm, abs=1e-6)
    spectrum = res.spectra["photoelectrons"]                # per eV over eV (driven_atom.result)
    assert np.trapezoid(spectrum["dP_dE"], spectrum["energy_eV"]) == pytest.approx(res.ionization, rel=2e-3)
    assert spectrum["dP_dE_l"].shape[0] == 3          # rows l = 0, 1, 2 (the |m| = 1 run has no s wave)
    assert np.all(spectrum["dP_dE_l"][0] >= 0)
    assert sorted(p.name for p in path.parent.iterdir()) == ["ar.h5"]        # the runs' own files are gone


def test_explicit_sublevels_and_hydrogen_stay_single_runs():
    assert _argon().m_parts() is not None
    assert load_config({"atom": {"species": "Ar", "initial": "3p1"}, "pulse": _argon().to_dict()["pulse"],
                        "solver": _argon().to_dict()["solver"]}).m_parts() is None
    hydrogen = load_config({"atom": {"Z": 1, "initial": "2p"}, "pulse": _argon().to_dict()["pulse"],
                            "solver": {"route": "basis", "r_max": 60.0, "l_max": 2, "cache_dir": "none"}})
    assert hydrogen.m_parts() is None and "m_average" not in hydrogen.physics()["atom"]
    assert _argon().physics()["atom"]["m_average"] is True


def test_a_crash_between_the_runs_keeps_the_finished_one(tmp_path, monkeypatch):
    import driven_atom.routes as routes
    import driven_atom.routes.m_average as m_average

    cfg, path = _argon(), tmp_path / "ar.h5"

    def crash(parts):
        raise KeyboardInterrupt("killed after both runs")

    monkeypatch.setattr(m_average, "average_over_m", crash)
    with pytest.raises(KeyboardInterrupt):
        run_config(cfg, path)
    assert m_part_path(path, 0).exists() and m_part_path(path, 1).exists() and not path.exists()
    monkeypatch.undo()

    def no_propagation(*args, **kwargs):
        raise AssertionError("a finished sublevel run was propagated again")

    monkeypatch.setattr(routes, "build_route", no_propagation)
    res = run_config(cfg, path)
    assert res.ionization > 0 and path.exists() and not m_part_path(path, 0).exists()

"""Built-in validation: the package's own numbers against published values, run on this install.

Each check computes one quantity through the public layers (atom, pulse, estimate, the basis and
the levels route, the level structure) and compares it with a reference value and its source, within a tolerance that
says what the model leaves out. ``driven-atom check`` prints the table; all checks together take a few
seconds. The test suite holds many more comparisons; these are the ones a user re-runs on a new
machine or after an upgrade.

>>> rows = run_checks(["A(2p->1s)"])
>>> rows[0]["passed"], rows[0]["source"]
(True, 'Wiese & Fuhr, JPCRD 38, 565 (2009)')
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Callable

from driven_atom.errors import InputError


@dataclass(frozen=True)
class Check:
    name: str
    compute: Callable[[], float]
    reference: float
    rel_tol: float
    unit: str
    source: str
    why: str = ""                    # what the tolerance covers


def _lyman_alpha_nm() -> float:
    from driven_atom.atom.tables import transition

    return transition("2p", "1s", nucleus="H")["vacuum_nm"]


def _h_alpha_air_nm() -> float:
    from driven_atom.atom.tables import transition

    return transition("3p", "2s", nucleus="H")["air_nm"]


def _lamb_shift_mhz() -> float:
    from driven_atom.atom.tables import transition

    return transition("2s1/2", "2p1/2", nucleus="H", structure="fine")["frequency_GHz"] * 1e3


def _lyman_alpha_3_2_nm() -> float:
    from driven_atom.atom.tables import transition

    return transition("2p3/2", "1s1/2", nucleus="H", structure="fine")["vacuum_nm"]


def _hydrogen_hfs_mhz() -> float:
    from driven_atom.atom.tables import transition

    return transition("1s1/2 F=1", "1s1/2 F=0", nucleus="H", structure="hyperfine")["frequency_GHz"] * 1e3


def _a_2p_1s() -> float:
    from driven_atom.atom.tables import transition

    return transition("2p", "1s", nucleus="H")["A_s"]


def _f_1s_2p() -> float:
    from driven_atom.atom.tables import transition

    return transition("1s", "2p", nucleus="H")["f_absorption"]


def _tau_3p_ns() -> float:
    from driven_atom.atom.tables import state

    return state("3p", nucleus="H")["lifetime_s"] * 1e9


def _sigma_threshold_cm2() -> float:
    from driven_atom.atom import Atom
    from driven_atom.atom.photoionization import cross_section
    from driven_atom.units import BOHR2_CM2

    atom = Atom(1)                               # infinite nuclear mass, as in the reference
    return float(cross_section(atom, 1, 0, 0.5)) * BOHR2_CM2


def _static_polarizability() -> float:
    from driven_atom.atom import Atom
    from driven_atom.basis.eigenbasis import build_basis, static_polarizability

    return static_polarizability(build_basis(Atom(1), r_max=60.0, dr=0.1, l_max=1, e_max=1e6), "1s")


def _rabi_half() -> float:
    from driven_atom.api import run

    d = 2**7 * math.sqrt(2) / 3**5               # <1s|z|2p0> (infinite nuclear mass)
    config = {"atom": {"Z": 1, "nucleus": "infinite", "initial": "1s"},
              "pulse": [{"envelope": "sin2", "photon_energy": 0.375, "peak_field": 1e-3,
                         "length": math.pi / (d * 1e-3)}],
              "solver": {"route": "levels", "states": ["1s", "2p"], "decay": False}}
    import tempfile

    with tempfile.TemporaryDirectory() as folder:                # the check leaves no file behind
        return run(config, out=folder, progress=False).populations["2p"]


def _ponderomotive_eV() -> float:
    from driven_atom.pulse import Pulse, derived_quantities

    pulse = Pulse({"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 10})
    return derived_quantities(pulse)["pulses"][0]["Up_eV"]


def _landau_rate() -> float:
    from driven_atom.lab.rates import adk_rate

    return float(adk_rate(0.05, 0.5, 1))


CHECKS = (
    Check("Lyman-alpha (vacuum)", _lyman_alpha_nm, 121.567, 3e-5, "nm", "NIST ASD (observed)",
          "fine structure and Lamb shift are not in the model"),
    Check("H-alpha 3p-2s (air)", _h_alpha_air_nm, 656.279, 3e-5, "nm", "NIST ASD (observed)",
          "fine structure and Lamb shift are not in the model"),
    Check("Lyman-alpha 2p3/2-1s1/2 (fine structure)", _lyman_alpha_3_2_nm, 121.56682, 1e-6, "nm",
          "NIST ASD (observed)", "published digits"),
    Check("Lamb shift 2s1/2-2p1/2", _lamb_shift_mhz, 1057.845, 1e-4, "MHz", "Lundeen & Pipkin, PRL 46, 232 (1981)",
          "QED terms left out (< 10 kHz)"),
    Check("hydrogen 1s hyperfine splitting", _hydrogen_hfs_mhz, 1420.405751768, 1e-4, "MHz",
          "hydrogen maser (Hellwig et al., IEEE Trans. IM 19, 200 (1970))",
          "Breit, radiative and Zemach corrections left out (6e-5)"),
    Check("A(2p->1s)", _a_2p_1s, 6.2649e8, 1e-4, "1/s", "Wiese & Fuhr, JPCRD 38, 565 (2009)", "published digits"),
    Check("f(1s->2p)", _f_1s_2p, 0.41620, 1e-4, "", "Wiese & Fuhr, JPCRD 38, 565 (2009)", "published digits"),
    Check("lifetime 3p", _tau_3p_ns, 5.2715, 1e-4, "ns", "Wiese & Fuhr, JPCRD 38, 565 (2009)", "published digits"),
    Check("sigma(1s) at threshold", _sigma_threshold_cm2, 6.304e-18, 1e-3, "cm^2",
          "Bethe & Salpeter (1957) §71", "published digits"),
    Check("alpha(1s) from the basis", _static_polarizability, 4.5, 1e-4, "au", "Dalgarno & Lewis (1955), exact 9/2",
          "grid spacing 0.1 bohr, box 60 bohr"),
    Check("Rabi pulse area pi/2 -> P(2p)", _rabi_half, 0.5, 1e-4, "", "Allen & Eberly (1975), sin^2(theta/2)",
          "ODE tolerances"),
    Check("Up(800 nm, 1e14 W/cm^2)", _ponderomotive_eV, 5.9759, 1e-4, "eV", "Up = I/(4 omega^2), common practice",
          "rounding of the reference"),
    Check("tunnelling rate H(1s), F = 0.05 au", _landau_rate, 4 / 0.05 * math.exp(-2 / 0.15), 1e-12, "au",
          "Landau & Lifshitz, QM §77", "none: the same closed form"),
)


def run_checks(names=None) -> list[dict]:
    """Run the checks (all, or those named) and return one row per check: name, value, reference,
    deviation (relative), tolerance, unit, source, passed, seconds."""
    chosen = CHECKS if not names else [c for c in CHECKS if c.name in set(names)]
    if names and len(chosen) != len(set(names)):
        unknown = sorted(set(names) - {c.name for c in CHECKS})
        raise InputError(f"unknown check {unknown[0]!r}; one of: {', '.join(c.name for c in CHECKS)}")
    rows = []
    for check in chosen:
        start = time.perf_counter()
        value = float(check.compute())
        deviation = abs(value / check.reference - 1.0)
        rows.append({"name": check.name, "value": value, "reference": check.reference, "deviation": deviation,
                     "tolerance": check.rel_tol, "unit": check.unit, "source": check.source, "why": check.why,
                     "passed": deviation <= check.rel_tol, "seconds": time.perf_counter() - start})
    return rows

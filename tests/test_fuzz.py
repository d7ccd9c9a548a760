"""Fuzzing (hypothesis): generated configs and command lines end in a result, a one-line error
(exit 2) or a refusal — never a traceback, never a hang (fault-handling tests: no reference values).

CI runs a fixed set (``derandomize``) of 200+ configs and 200+ argument lists; set
``DRIVEN_ATOM_FUZZ=2000`` for a longer, random exploration.
"""
from __future__ import annotations

import contextlib
import io
import os
import signal
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from driven_atom.errors import InputError

REPO = Path(__file__).resolve().parents[1]
EXPLORE = int(os.environ.get("DRIVEN_ATOM_FUZZ", "0"))
FUZZ = settings(max_examples=EXPLORE or 220, deadline=None, derandomize=not EXPLORE,
                suppress_health_check=list(HealthCheck), database=None)
CASE_SECONDS = 20                    # a case that takes longer is a hang


@contextlib.contextmanager
def time_limit(seconds: int):
    def hang(signum, frame):
        raise AssertionError(f"no answer within {seconds} s")

    old = signal.signal(signal.SIGALRM, hang)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


# -- generated configs: shipped and small configs, each mutated at one to three keys ---------------------
import tomllib as _tomllib

BASES = [_tomllib.loads(p.read_text()) for p in sorted((REPO / "configs").glob("*.toml"))] + [
    {"atom": {"Z": 1}, "pulse": [{"photon_energy": 0.375, "peak_field": 1e-3, "cycles": 20}],
     "solver": {"route": "levels", "states": ["1s", "2p"]}},
    {"atom": {"Z": 1}, "pulse": [{"wavelength": "400 nm", "intensity": "1e13 W/cm^2", "cycles": 2}],
     "solver": {"route": "grid", "r_max": 40, "dr": 0.2, "l_max": 6}},
    {"atom": {"Z": 1}, "pulse": [{"photon_energy": 0.8, "peak_field": 1e-3, "cycles": 3}],
     "solver": {"route": "basis", "r_max": 30, "dr": 0.2, "l_max": 2, "e_max": 1.5, "cache_dir": "none"}},
]
for _base in BASES:
    _base.pop("cluster", None)
    _base.get("solver", {}).pop("cache_dir", None) if _base.get("solver", {}).get("cache_dir") not in (None, "none") else None
    _base["solver"]["cache_dir"] = "none" if _base["solver"].get("route") == "basis" else _base["solver"].get("cache_dir")
    if _base["solver"].get("cache_dir") is None:
        _base["solver"].pop("cache_dir")

def _quantity(units, low, high):
    return st.builds(lambda x, u: f"{x:.4g} {u}", st.floats(low, high).map(lambda p: 10.0**p), st.sampled_from(units))


junk = st.sampled_from([0, -1, True, "x", "", "9**9**9 nm", [1], {"a": 1}, None, float("nan"), float("inf"), 1e300])
TYPED = {
    "wavelength": _quantity(["nm", "um", "bohr"], -1, 4), "photon_energy": _quantity(["eV", "au"], -3, 3),
    "intensity": _quantity(["W/cm^2"], 6, 17), "peak_field": _quantity(["au", "V/m"], -6, 11),
    "cycles": st.floats(0.1, 60), "length": _quantity(["fs", "au"], -1, 4), "fwhm": _quantity(["fs", "au"], -1, 3),
    "ramp": _quantity(["fs"], -1, 2), "delay": _quantity(["fs", "au"], -2, 3), "chirp": _quantity(["eV/fs"], -6, 0),
    "cep": st.floats(-7, 7), "ellipticity": st.floats(-1.5, 1.5),
    "envelope": st.sampled_from(["sin2", "gaussian", "flat", "cos4", "static"]),
    "polarization": st.sampled_from(["z", "x", "circular+", "circular-", "elliptical"]),
    "Z": st.integers(1, 10), "nucleus": st.sampled_from(["H", "D", "T", "He+", "infinite", "1.00728 u", "He"]),
    "initial": st.sampled_from(["1s", "2s", "2p0", "2p", "3d0", "2p1", "4f"]),
    "states": st.lists(st.sampled_from(["1s", "2s", "2p", "2p0", "3s", "3p", "3d"]), min_size=1, max_size=3,
                       unique=True),
    "rwa": st.booleans(), "after": _quantity(["ns", "ps"], -3, 1), "nsteps": st.integers(1, 10**6),
    "rtol": st.floats(1e-12, 1e-3), "r_max": _quantity(["bohr", "nm"], 0, 3.3), "dr": _quantity(["bohr"], -2, 0),
    "l_max": st.integers(0, 80), "e_max": _quantity(["eV", "au"], -1, 2), "dt": _quantity(["au"], -3, 0.5),
    "absorber_width": _quantity(["bohr"], -1, 2.3), "tolerance": st.floats(1e-12, 1e-3),
    "checkpoint_every": st.sampled_from(["1 s", "1 min", 10, 1]), "threads": st.integers(1, 2),
    "photoelectron_methods": st.lists(st.sampled_from(["surface_flux", "window", "projection"]), max_size=2),
    "gauge": st.sampled_from(["length", "velocity"]),
    "label_n_max": st.integers(1, 8), "n_max": st.integers(1, 12), "every": _quantity(["fs", "au"], -1, 3),
    "error_estimate": st.booleans(), "r_maxx": st.integers(1, 10),
}
PULSE_KEYS = ["wavelength", "photon_energy", "intensity", "peak_field", "cycles", "length", "fwhm", "envelope",
              "ramp", "delay", "chirp", "cep", "polarization", "ellipticity"]
ROUTE_KEYS = {"levels": ["states", "rwa", "after", "nsteps", "rtol"],
              "basis": ["r_max", "dr", "l_max", "e_max", "tolerance", "gauge", "n_max", "r_maxx"],
              "grid": ["r_max", "dr", "l_max", "dt", "absorber_width", "checkpoint_every", "threads", "photoelectron_methods",
                       "label_n_max", "gauge", "r_maxx"]}


@st.composite
def _change(draw, route):
    section = draw(st.sampled_from(["atom", "pulse", "pulse", "solver", "solver", "output"]))
    key = draw(st.sampled_from({"atom": ["Z", "nucleus", "initial"], "pulse": PULSE_KEYS,
                                "solver": ROUTE_KEYS.get(route, ["r_max"]), "output": ["every", "error_estimate"]}[section]))
    value = draw(st.one_of(TYPED[key], TYPED[key], TYPED[key], TYPED[key], junk))
    return (f"{section}.0.{key}" if section == "pulse" else f"{section}.{key}", value)


def _mutate(base, changes):
    import copy

    data = copy.deepcopy(base)
    for path, value in changes:
        section, *rest = path.split(".")
        node = data.setdefault(section, [] if section == "pulse" else {})
        if section == "pulse":
            if not node:
                continue
            node = node[int(rest[0])]
            rest = rest[1:]
        if value is None:
            node.pop(rest[0], None)
        else:
            node[rest[0]] = value
    return data


@st.composite
def _configs(draw):
    base = draw(st.sampled_from(BASES))
    changes = draw(st.lists(_change(base["solver"]["route"]), min_size=1, max_size=3))
    return _mutate(base, changes)


configs = _configs()


@FUZZ
@given(configs)
def test_generated_configs_end_in_a_result_a_line_or_a_refusal(tmp_path_factory, data):
    from driven_atom.routes import build_route, load_config

    with time_limit(CASE_SECONDS):
        try:
            cfg = load_config(data)
            route = build_route(cfg)
            route._check_resources(max_hours=2e-4)             # under a second of propagation, or refused
            route = build_route(cfg)
            route.run(checkpoint=None)
        except InputError as exc:
            message = str(exc)
            assert message and "\n" not in message and len(message) < 1500, message


# -- command lines ------------------------------------------------------------------------------------------
def _files():
    folder = REPO / "configs"
    return [str(p) for p in sorted(folder.glob("*.toml"))] + ["missing.toml", "", "/dev/null", str(REPO)]


words = st.one_of(st.sampled_from(["1s", "2p", "3d", "balmer", "lyman", "7", "-3", "20 eV", "50 nm", "1e14 W/cm^2",
                                   "14 eV:100 eV:50", "x:y:z", "0", "nan", "inf", "He", "--json", "--Z", "2",
                                   "--nucleus", "D", "--upto", "--series", "--photon-energy", "--wavelength",
                                   "--range", "--waist", "50 um", "--pressure", "1e-6 mbar", "--density",
                                   "--length", "2 mm", "--m2", "1.2", "--out", "--plot", "a.png", "--csv"]),
                  st.text(max_size=12))
commands = st.one_of(
    st.tuples(st.sampled_from(["lines", "state", "transition", "xsec"]), st.lists(words, max_size=6)),
    st.tuples(st.sampled_from(["pulse", "estimate", "plot"]), st.tuples(st.sampled_from(_files()),
                                                                        st.lists(words, max_size=4))),
    st.tuples(st.just("run"), st.tuples(st.sampled_from(_files()), st.lists(words, max_size=3))),
    st.tuples(st.sampled_from(["status", "collect", "nonsense", "--help-me"]), st.lists(words, max_size=3)),
)


def _argv(command) -> list[str]:
    name, rest = command
    if isinstance(rest, tuple):
        first, more = rest
        argv = [name, first, *more]
    else:
        argv = [name, *rest]
    if name == "run":
        argv += ["--preflight", "--max-hours", "0.002"]   # check everything, compute nothing, build little
    if name in ("pulse", "plot"):
        argv = [a for a in argv if a != "--plot" and a != "--out"]   # no figure files from the fuzzer
    return argv


@FUZZ
@given(commands)
def test_generated_command_lines_end_in_output_or_one_line(tmp_path_factory, command):
    from driven_atom.cli import main

    argv = _argv(command)
    out, err = io.StringIO(), io.StringIO()
    cwd = os.getcwd()
    os.chdir(tmp_path_factory.mktemp("cli"))
    try:
        with time_limit(CASE_SECONDS), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = main(argv)
            except SystemExit as exc:                 # --help and --version print and exit 0
                code = exc.code
    finally:
        os.chdir(cwd)
    text = err.getvalue()
    assert "Traceback" not in text, (argv, text[-800:])
    assert code in (0, 1, 2), (argv, code, text[-300:])
    if code == 2:
        assert text.count("driven-atom: error:") == 1 and text.strip().count("\n") == 0, (argv, text[-800:])

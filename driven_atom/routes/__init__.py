"""The propagation routes: one registry (like scipy's ``METHODS``), and one way to run a config.

``ROUTES`` maps a route name to its class (``"module:Class"``, imported when first used, so light
commands never import numba or qutip). Each class subclasses :class:`~driven_atom.routes.base.Route`;
its ``[solver]`` model sits in :data:`driven_atom.settings.SETTINGS` under the same name. A new
route is one module, one settings model and one line in each registry.

* :func:`load_config` — read a config and check everything that needs the physics objects: the
  pulse builds from its keys, the route can treat the light and the initial state (this is the
  package's ``driven_atom.load_config``);
* :func:`build_route` — the route object of a config;
* :func:`run_config` — run a config into a result file (resuming from its checkpoint file, which is
  removed once the result is written); used by the API and by every campaign job.
"""
from __future__ import annotations

import importlib
from pathlib import Path

from driven_atom.config import HASH_VERSION, RunConfig, read_config
from driven_atom.errors import InputError
from driven_atom.settings import SETTINGS

ROUTES = {
    "levels": "driven_atom.routes.levels:LevelsRoute",
    "basis": "driven_atom.routes.basis:BasisRoute",
    "grid": "driven_atom.routes.grid:GridRoute",
}


def route_class(name: str):
    """The class of route ``name`` (InputError naming ``solver.route`` if there is none)."""
    if name not in ROUTES:
        raise InputError(f"`solver.route` must be one of {', '.join(ROUTES)}, got {name!r}")
    entry = ROUTES[name]
    if not isinstance(entry, str):
        return entry
    module, _, cls = entry.partition(":")
    try:
        return getattr(importlib.import_module(module), cls)
    except ModuleNotFoundError as exc:
        if exc.name != module:
            raise
        raise InputError(f"`solver.route` = {name!r} is not available in this install") from None


def check_config(cfg: RunConfig) -> None:
    """The checks of a config that need its physics objects (one line naming the key)."""
    from driven_atom.pulse import build_pulse

    atom = cfg.build_atom()
    if atom.model is not None:                   # a model atom's core shells are filled in the real atom
        from driven_atom.basis.model_levels import is_core

        for state, _ in cfg.initial_states():
            if is_core(atom, state):
                raise InputError(f"`atom.initial` {state.label!r} is a core shell of the {atom.model.name} model "
                                 f"(filled in the real atom); its valence ground state is "
                                 f"{atom.model.ground.label!r} (\"ground\")")
    pulse = build_pulse(cfg, atom)
    route_class(cfg.route).check(atom, pulse, cfg.initial_states(), cfg)


def load_config(source) -> RunConfig:
    """Read a run configuration (TOML path, dict or RunConfig) and check it completely: keys,
    units, ranges (:func:`driven_atom.config.read_config`), then the pulse and the route.

    >>> cfg = load_config({"atom": {"Z": 1}, "solver": {"route": "grid", "r_maxx": 200},
    ...                    "pulse": [{"wavelength": "800 nm", "intensity": "1e14 W/cm^2", "cycles": 4}]})
    Traceback (most recent call last):
    ...
    driven_atom.errors.InputError: unknown key `solver.r_maxx` (did you mean `r_max`?)
    """
    cfg = read_config(source)
    check_config(cfg)
    return cfg


def build_route(cfg: RunConfig, *, cache_dir=None, initial=None):
    """The route object that will propagate ``cfg`` (nothing is computed yet), from ``initial``
    [(State, amplitude)] instead of the config's initial state when given."""
    from driven_atom.pulse import build_pulse

    atom = cfg.build_atom()
    pulse = build_pulse(cfg, atom)
    cls = route_class(cfg.route)
    return cls(atom, pulse, cfg.solver, initial=cfg.initial_states() if initial is None else initial,
               output=cfg.output, cache_dir=cache_dir, structure=cfg.atom.structure, fields=cfg.fields)


def preflight(cfg: RunConfig, *, max_hours: float | None = None) -> list:
    """The checks a run of ``cfg`` makes before its first step (:mod:`driven_atom.routes.quality`),
    without propagating: resources are estimated, the grid, basis or model is built, nothing is
    written."""
    return build_route(cfg).inspect(max_hours=max_hours)


def propagate(atom, pulse, settings, *, initial, output=None, checkpoint=None, progress: bool = False,
              cache_dir=None, structure: str = "bohr", fields=None):
    """Run the route of ``settings`` (a model of :mod:`driven_atom.settings`) on ready-made objects:
    an :class:`~driven_atom.atom.Atom`, a :class:`~driven_atom.pulse.Pulse` (or None), the initial
    state as [(State or Component, amplitude)], the level ``structure`` and static ``fields``
    (a :class:`driven_atom.config.FieldsConfig`); no config and no file (a notebook's shortcut to one
    route).

    >>> from driven_atom.atom import Atom, State
    >>> from driven_atom.settings import LevelsSettings
    >>> res = propagate(Atom.from_name("H"), None, LevelsSettings(states=["1s", "2p"], after="1.5962 ns"),
    ...                 initial=[(State(2, 1, 0), 1.0)])
    >>> round(res.populations["2p"], 4)
    0.3679
    """
    from driven_atom.config import OutputConfig

    cls = route_class(settings.route)
    route = cls(atom, pulse, settings, initial=initial, output=output if output is not None else OutputConfig(),
                cache_dir=cache_dir, structure=structure, fields=fields)
    return route.run(checkpoint=checkpoint if route.resumable else None, progress=progress)


def default_cache_dir(cfg: RunConfig, path: Path):
    """The basis cache folder of a run writing ``path``: ``.basis-cache`` beside it for "auto", a
    named folder inside the result's folder (refused if it leads out of it, symlinks included)."""
    setting = getattr(cfg.solver, "cache_dir", None)
    if setting is None or str(setting).lower() == "none":
        return None
    folder = Path(path).parent
    if setting == "auto":
        return folder / ".basis-cache"
    cache = folder / setting
    if not cache.resolve().is_relative_to(folder.resolve()):
        raise InputError(f"`solver.cache_dir` = {setting!r} leads out of the result's folder {str(folder)!r}; "
                         f"give a folder elsewhere with --cache-dir")
    return cache


def m_part_path(result_path, m: int) -> Path:
    """Where the run of sublevel ``m`` of an m-averaged result is kept until the sum is written.

    >>> m_part_path("runs/a-0123.h5", 1).as_posix()
    'runs/a-0123.m1.part.h5'
    """
    path = Path(result_path)
    stem = path.name[:-3] if path.name.endswith(".h5") else path.name
    return path.with_name(f"{stem}.m{m}.part.h5")


def run_config(cfg: RunConfig, path, *, progress: bool = False, cache_dir=None, max_hours: float | None = None,
               error_estimate: bool | None = None):
    """Propagate ``cfg`` and write its result to ``path``; returns the :class:`Result`.

    A checkpoint of the same physics beside ``path`` (``NAME.ckpt.h5``) is resumed; it is removed
    once the result is written. With ``error_estimate`` (default: ``[output] error_estimate``) a
    coarser companion run gives every scalar an error bar (:mod:`driven_atom.routes.error_bars`).
    A model atom's p level given without m is the sum of its sublevels' runs
    (:mod:`driven_atom.routes.m_average`; each run kept in ``NAME.mM.part.h5`` until the sum is written).
    """
    import time

    from driven_atom.result import Checkpoint, checkpoint_path, read_result, stored_physics_hash, write_result
    from driven_atom.routes.error_bars import error_block, run_companion
    from driven_atom.routes.m_average import average_over_m

    path = Path(path)
    physics_hash = cfg.physics_hash()
    stored = stored_physics_hash(path)
    if stored is not None:              # a complete result is never rewritten: reuse it, or refuse
        if stored != physics_hash:
            raise InputError(f"{str(path)!r} holds a complete result of other physics (job {stored}); "
                             f"choose another file or folder (nothing is overwritten)")
        try:
            result = read_result(path)
        except InputError:
            pass                        # damaged: computed again below, the damaged file replaced
        else:
            result.metadata["file"] = str(path)
            result.stats["reused"] = True
            return result
    config_text = cfg.to_toml()
    cache_dir = cache_dir if cache_dir is not None else default_cache_dir(cfg, path)
    estimate_errors = cfg.output.error_estimate if error_estimate is None else error_estimate
    attrs = {"physics_hash": physics_hash, "hash_version": HASH_VERSION}

    def propagate_part(initial, checkpoint):
        route = build_route(cfg, cache_dir=cache_dir, initial=initial)
        result = route.run(checkpoint=checkpoint if route.resumable else None, progress=progress,
                           max_hours=max_hours)
        if estimate_errors:
            started = time.perf_counter()
            companion, factor, knobs = run_companion(type(route), route.atom, route.pulse, cfg.solver,
                                                     route.initial, cfg.output, result, structure=route.structure,
                                                     fields=route.fields)
            result.stats["companion_s"] = time.perf_counter() - started
            result.quality["errors"] = (error_block(result, companion, factor, knobs) if companion is not None
                                        else {"method": "unavailable", "companion": knobs,
                                              "why": "the coarser companion run was stopped by a guard"})
        return result

    parts = cfg.m_parts()
    checkpoint = Checkpoint(checkpoint_path(path), physics_hash=physics_hash, config=config_text)
    if parts is None:
        result = propagate_part(None, checkpoint)
        level = cfg.unpolarised_p_level()
        if level is not None:           # a route of one m: the result is that of m = 0, and says so
            result.metadata["m_average"] = {"rule": "not made: the sublevel m = 0 only", "weights": {"0": 1.0}}
            result.warnings.append(f"the initial level {level.label} is taken as its sublevel m = 0: the "
                                   f"{cfg.route} route propagates m = 0 only, the atom's average "
                                   f"(P(m=0) + 2 P(|m|=1))/3 needs route \"basis\"")
    else:                               # each sublevel's run is kept in a file of its own until the sum is
        done = []
        for initial, weight, m in parts:
            part_path, part_hash = m_part_path(path, m), f"{physics_hash}-m{m}"
            part = None
            if stored_physics_hash(part_path) == part_hash:
                try:
                    part = read_result(part_path)
                except InputError:
                    part = None
            if part is None:
                part_checkpoint = Checkpoint(checkpoint_path(part_path), physics_hash=part_hash, config=config_text)
                part = propagate_part(initial, part_checkpoint)
                part.config = config_text
                write_result(part_path, part, attrs={**attrs, "physics_hash": part_hash})
                part_checkpoint.clear()
            done.append((part, weight, m))
        result = average_over_m(done)
    result.config = config_text
    write_result(path, result, attrs=attrs)
    checkpoint.clear()
    for _, _, m in parts or ():
        m_part_path(path, m).unlink(missing_ok=True)
    result.metadata["file"] = str(path)
    return result


__all__ = ["ROUTES", "SETTINGS", "route_class", "check_config", "load_config", "build_route", "m_part_path",
           "run_config", "preflight", "propagate"]

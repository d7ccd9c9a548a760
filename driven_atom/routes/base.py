"""The route contract: a route supplies its physics, this base class runs it.

Modelled on scipy's ``OdeSolver``: a route subclasses :class:`Route`, names its ``Settings`` model
(:mod:`driven_atom.settings`) and its capabilities, and implements

* ``_prepare()`` — operators, grids, bases; sets ``t_start``/``t_end`` (a.u.) and optionally
  ``time_quantum`` (the step: sample and slice times are whole multiples of it) and ``max_slice``
  (the longest stretch of time advanced between two looks at the clock and the stop flag);
* ``_initial()`` — the state at ``t_start``;
* ``_advance(state, t, t_next)`` — the state at ``t_next`` (deterministic: the same call on the
  same state gives the same bits, so where checkpoints fall never changes a number);
* ``_sample(state)`` — (populations by state label, series values by name) at the current time;
  series whose name starts with "_" are kept for the route (and checkpointed) but not stored;
* ``_finish(state, history)`` — an :class:`Outcome`: final populations, ionisation, norm,
  spectra, stats, warnings, metadata;
* ``_save(state)`` / ``_load(arrays, meta)`` — the resumable state (routes with ``resumable``);
* ``preflight()`` — findings about accuracy and resources, before any propagation.

Everything common lives here, once: the sample times (one rule for ``[output] every``), the slices
between them, the progress bar, wall-clock timing, the checkpoint cadence (``checkpoint_every``: a
wall-clock time, or steps where the route counts them), checkpoint at a stop signal and resume,
the history arrays, the level-population labels (m-resolved and m-summed) and the
:class:`~driven_atom.result.Result`.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import ClassVar

import numpy as np

from driven_atom.errors import InputError, Interrupted
from driven_atom.observables.populations import with_level_sums
from driven_atom.result import Result
from driven_atom.routes.quality import HARD, GuardStop, assess, quality_block, refuse_if_hard
from driven_atom.settings import RouteSettings

DEFAULT_SAMPLES = 200            # history samples over a run when [output] every is not given
MAX_SAMPLES = 1_000_000          # history samples a run may ask for


@dataclass
class Outcome:
    """What a route's ``_finish`` returns (atomic units); the base adds the common parts."""

    populations: dict
    ionization: float
    norm: float
    spectra: dict = field(default_factory=dict)
    stats: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)
    metadata: dict = field(default_factory=dict)
    series: dict = field(default_factory=dict)
    checks: list = field(default_factory=list)


@dataclass
class History:
    """The sampled populations and series: one array per label and per name over ``times``."""

    times: np.ndarray
    populations: dict = field(default_factory=dict)
    series: dict = field(default_factory=dict)
    count: int = 0

    def record(self, populations: dict, series: dict) -> None:
        i = self.count
        for group, values in ((self.populations, populations), (self.series, series)):
            for key, value in values.items():
                if key not in group:
                    if i:
                        raise RuntimeError(f"history key {key!r} appeared after the first sample")
                    group[key] = np.zeros(self.times.size)
                group[key][i] = value
        self.count += 1

    def last(self, group: str) -> dict:
        """The most recent sample of ``group`` ("populations" or "series")."""
        return {k: float(v[self.count - 1]) for k, v in getattr(self, group).items()}

    def arrays(self) -> dict:
        out = {f"pop:{k}": v for k, v in self.populations.items()}
        out.update({f"series:{k}": v for k, v in self.series.items()})
        return out

    def restore(self, arrays: dict, count: int) -> None:
        self.populations = {k[4:]: np.array(v) for k, v in arrays.items() if k.startswith("pop:")}
        self.series = {k[7:]: np.array(v) for k, v in arrays.items() if k.startswith("series:")}
        self.count = int(count)


def sample_times(t0: float, t1: float, every: float | None, quantum: float | None = None) -> np.ndarray:
    """History sample times: t0 + k·every up to t1, and t1 itself; ``every`` defaults to
    (t1 − t0)/200 and is rounded to a whole number of ``quantum`` (a route's fixed step).

    >>> sample_times(0.0, 1.0, 0.3).tolist()
    [0.0, 0.3, 0.6, 0.8999999999999999, 1.0]
    >>> sample_times(0.0, 1.0, 0.3, quantum=0.25).tolist()
    [0.0, 0.25, 0.5, 0.75, 1.0]
    """
    if not t1 > t0:
        return np.array([t0])
    step = (t1 - t0) / DEFAULT_SAMPLES if every is None else float(every)
    if quantum:
        step = max(1, round(step / quantum)) * quantum
    n = math.floor((t1 - t0) / step * (1 + 1e-12))
    if n + 2 > MAX_SAMPLES:
        raise InputError(f"`output.every` = {every!r} au asks for {n + 1} history samples; at most {MAX_SAMPLES}")
    times = t0 + step * np.arange(n + 1)
    if quantum:
        times = t0 + quantum * np.round((times - t0) / quantum)
    return times if math.isclose(times[-1], t1, rel_tol=0, abs_tol=1e-9 * step) else np.append(times, t1)


def slice_ends(times: np.ndarray, max_slice: float | None, quantum: float | None) -> np.ndarray:
    """The times where ``_advance`` calls end: every sample time after the first, plus
    t0 + j·max_slice in between (a fixed grid, so resumed runs cut where fresh ones do).

    >>> slice_ends(np.array([0.0, 1.0, 2.5]), 0.75, None).tolist()
    [0.75, 1.0, 1.5, 2.25, 2.5]
    """
    t0, t1 = float(times[0]), float(times[-1])
    ends = list(times[1:])
    if max_slice and t1 > t0:
        extra = t0 + max_slice * np.arange(1, math.ceil((t1 - t0) / max_slice))
        if quantum:
            extra = t0 + quantum * np.round((extra - t0) / quantum)
        ends.extend(extra)
    ends = np.unique(np.asarray(ends, dtype=float))
    if ends.size:
        tol = 1e-9 * max(1.0, abs(t1 - t0))
        keep = np.r_[np.diff(ends) > tol, True]           # merge near-duplicates, keep the later one
        ends = ends[keep]
        ends[-1] = t1
    return ends


@dataclass(frozen=True)
class Knob:
    """One numerical setting: its current value, the refined and coarsened values (refinement by a
    factor 2 in the error's variable), the order p of its error (None: faster than any power) and
    the cost of the refined run relative to the current one."""

    name: str
    value: float
    refine: float
    coarsen: float | None
    order: float | None
    cost: float
    also: dict = field(default_factory=dict)      # other settings that move by these amounts with it

    def refined(self, settings) -> dict:
        """The update of ``settings`` that refines this knob (the ``also`` settings moved by theirs)."""
        return {self.name: self.refine, **{key: (getattr(settings, key) or 0.0) + step for key, step in self.also.items()}}

    def predicted_error(self, change: float) -> float:
        """Error at the current value from the change on refinement: change/(1 − 2^−p)."""
        if self.order is None:
            return abs(change)
        return abs(change) / (1 - 2.0 ** -self.order)

    def coarse_error(self, change: float) -> float | None:
        """Predicted error at the coarsened value (known order only): error·2^p."""
        if self.order is None or self.coarsen is None:
            return None
        return self.predicted_error(change) * 2.0**self.order


class Route:
    """Base class of the propagation routes (see the module docstring for the contract)."""

    name: ClassVar[str] = ""
    Settings: ClassVar[type[RouteSettings]] = RouteSettings
    polarizations: ClassVar[tuple[str, ...]] = ("z",)      # light the route can treat
    structures: ClassVar[tuple[str, ...]] = ("bohr",)      # level structures ([atom] structure) it models
    static_fields: ClassVar[bool] = False                  # whether it takes the [fields] section
    needs_pulse: ClassVar[bool] = True
    resumable: ClassVar[bool] = True
    spectra: ClassVar[tuple[str, ...]] = ()                # spectra the route can store
    counts_steps: ClassVar[bool] = False                   # a plain checkpoint_every counts steps

    def __init__(self, atom, pulse, settings, *, initial, output=None, cache_dir=None, structure: str = "bohr",
                 fields=None):
        if structure not in self.structures:
            raise InputError(f"`atom.structure` = {structure!r} needs route \"levels\" (route {self.name!r} models "
                             f"{' and '.join(self.structures)} levels)")
        if fields is not None and fields.any and not self.static_fields:
            raise InputError(f"`fields` apply to route \"levels\" only (route {self.name!r} has no static fields; a "
                             f"DC field here is a [[pulse]] with envelope = \"static\")")
        self.atom = atom
        self.pulse = pulse
        self.settings = settings
        self.structure = structure
        self.fields = fields
        self.initial = list(initial)
        self.output = output
        self.cache_dir = cache_dir
        self.t_start: float = 0.0
        self.t_end: float = 0.0
        self.time_quantum: float | None = None
        self.max_slice: float | None = None
        self.warnings: list[str] = []
        self.stats: dict = {}

    # -- capabilities, checked when a config is loaded ---------------------------------------------
    @classmethod
    def check(cls, atom, pulse, initial, cfg=None) -> None:
        """Refuse (one line naming the key) what this route cannot treat: no pulse where one is
        needed, light of a polarisation it does not handle, a level structure or static fields it
        does not model. Called when a config is loaded (``cfg`` given, to name its keys) and again
        when a route runs."""
        if cfg is not None:
            if cfg.atom.structure not in cls.structures:
                raise InputError(f"`atom.structure` = {cfg.atom.structure!r} needs route \"levels\" (route "
                                 f"{cls.name!r} models {' and '.join(cls.structures)} levels)")
            if cfg.fields.any and not cls.static_fields:
                raise InputError(f"`fields` apply to route \"levels\" only (route {cls.name!r} has no static "
                                 f"fields; a DC field here is a [[pulse]] with envelope = \"static\")")
        if pulse is None:
            if cls.needs_pulse:
                raise InputError(f"`pulse` is required for route {cls.name!r}: add a [[pulse]] table "
                                 f"(field-free runs: route \"levels\")")
            return
        for i, c in enumerate(pulse.components):
            if c.polarization not in cls.polarizations:
                allowed = " or ".join(f'"{p}"' for p in cls.polarizations)
                raise InputError(f"`pulse.{i}.polarization` = {c.polarization!r}: route {cls.name!r} treats "
                                 f"polarization = {allowed} only (use route \"levels\" for other light)")

    # -- the physics a route supplies ----------------------------------------------------------------
    def _prepare(self) -> None:
        raise NotImplementedError

    def _initial(self):
        raise NotImplementedError

    def _advance(self, state, t: float, t_next: float):
        raise NotImplementedError

    def _sample(self, state) -> tuple[dict, dict]:
        raise NotImplementedError

    def _finish(self, state, history: History) -> Outcome:
        raise NotImplementedError

    def _save(self, state) -> tuple[dict, dict]:
        raise NotImplementedError(f"route {self.name!r} is not resumable")

    def _load(self, arrays: dict, meta: dict):
        raise NotImplementedError(f"route {self.name!r} is not resumable")

    def steps_done(self, state) -> int:
        """Time steps taken so far (routes that count steps)."""
        return 0

    def preflight(self) -> list:
        """Accuracy checks (:class:`~driven_atom.routes.quality.Check`) made after ``_prepare`` and
        before any propagation; a hard one refuses the run (none by default)."""
        return []

    def estimate_resources(self) -> tuple[float | None, float | None]:
        """(bytes of memory, seconds) the run will need, from its sizes, before ``_prepare``
        allocates anything; None where the route cannot say (the default)."""
        return None, None

    def samples_over(self, duration: float) -> float:
        """How many history samples a run over ``duration`` (a.u.) takes under ``[output] every``."""
        every = self.output.every_au if self.output is not None else None
        return DEFAULT_SAMPLES + 1.0 if every is None else min(MAX_SAMPLES, duration / every + 2)

    def _check_resources(self, max_hours: float | None) -> None:
        from driven_atom.routes.resources import check_resources

        memory, seconds = self.estimate_resources()
        self.warnings += check_resources(memory, seconds, max_hours=max_hours, what=f"this {self.name} run",
                                         fix=self.resource_fix)
        self.stats["estimated_s"] = seconds
        self.stats["estimated_bytes"] = memory

    resource_fix: ClassVar[str] = ""          # what to change when a run is too large

    # -- run-time guards, at every history sample ------------------------------------------------------
    norm_tolerance: float = 1e-9         # how far above 1 the norm may drift (routes set their own)
    tolerance_key: ClassVar[str] = "solver.dt"    # the setting that controls the norm's accuracy
    population_soft: float = 1e-4        # population in the top partial wave / top of the basis: warn
    population_hard: float = 5e-2        # ... stop: the truncation dominates the answer

    def _guard(self, history: History) -> None:
        """Stop the run at a sample whose numbers are already wrong (NaN/Inf, the norm above 1, the
        top partial wave or the top of the basis filling up): one line naming the setting to change."""
        i = history.count - 1
        t = float(history.times[i])
        for group in (history.populations, history.series):
            for key, values in group.items():
                if not math.isfinite(values[i]):
                    raise GuardStop(f"stopped at t = {t:.6g} au: {key} is {values[i]} (NaN/Inf); the time step "
                                    f"or the grid is far too coarse for this pulse: lower `solver.dt`/`solver.dr`")
        for check in self._sample_checks({k: v[i:i + 1] for k, v in history.series.items()}):
            if check.level == HARD:
                raise GuardStop(f"stopped at t = {t:.6g} au: {check.message}")

    def _sample_checks(self, series: dict) -> list:
        """The guard checks of the given series (over all their samples)."""
        checks = []
        if "norm" in series:
            excess = float(np.max(series["norm"])) - 1.0
            checks.append(assess("norm_excess", max(excess, 0.0), soft=self.norm_tolerance,
                                 hard=max(1e-3, 100 * self.norm_tolerance), key=self.tolerance_key,
                                 why="the norm rose above 1 (the propagation is not accurate)"))
        for name, key, what in (("top_l_population", "solver.l_max", "population in the highest partial wave"),
                                ("_near_e_max", "solver.e_max", "population near the top of the basis (e_max)")):
            if name in series:
                checks.append(assess(name.lstrip("_"), float(np.max(series[name])), soft=self.population_soft,
                                     hard=self.population_hard, key=key,
                                     why=f"{what}: the truncation shapes the answer"))
        return checks

    def _guard_checks(self, history: History) -> list:
        return self._sample_checks({k: v[:history.count] for k, v in history.series.items()})

    # -- the loop, owned here --------------------------------------------------------------------------
    def inspect(self, *, max_hours: float | None = None) -> list:
        """Everything before the first step: capability checks, the resource estimate,
        ``_prepare`` and the preflight checks (returned; nothing is propagated or written)."""
        self.check(self.atom, self.pulse, self.initial)
        self._check_resources(max_hours)
        self._prepare()
        return list(self.preflight())

    @classmethod
    def explicit(cls, settings, result):
        """``settings`` with every value the run derived (defaults from the pulse) made explicit."""
        return settings

    @classmethod
    def knobs(cls, settings) -> list:
        """The numerical knobs of a convergence study (:class:`Knob`; :mod:`driven_atom.convergence`)."""
        return []

    @classmethod
    def companion(cls, settings, result) -> tuple:
        """(coarser settings, K, knobs) for the error bar of ``result``: the knobs whose error
        grows by the factor K (see :mod:`driven_atom.routes.error_bars`)."""
        raise NotImplementedError(f"route {cls.name!r} gives no error bar")

    def run(self, *, checkpoint=None, progress: bool = False, max_hours: float | None = None,
            strict: bool = True) -> Result:
        """Prepare, resume or start, advance slice by slice, sample, checkpoint, finish.
        ``strict = False`` records hard preflight findings instead of refusing (a deliberately
        coarse companion run); run-time guards stop it all the same."""
        from driven_atom import stopping

        wall0, cpu0 = time.perf_counter(), time.process_time()
        self.check(self.atom, self.pulse, self.initial)
        self._check_resources(max_hours)
        with stopping.stop_on_signals():
            self._prepare()
            checked = time.perf_counter()
            checks = list(self.preflight())
            if strict:
                refuse_if_hard(checks, when="before the run")
            prepared = time.perf_counter()
            self.stats["preflight_s"] = prepared - checked
            self._stop_if_asked(None, None, 0, self.t_start, None, None)
            every = self.output.every_au if self.output is not None else None
            times = sample_times(self.t_start, self.t_end, every, self.time_quantum)
            ends = slice_ends(times, self.max_slice, self.time_quantum)
            history = History(times)
            layout = {"route": self.name, "samples": int(times.size), "slices": int(ends.size),
                      "t_start": float(self.t_start), "t_end": float(self.t_end)}
            state, position, resumed_at = self._resume(checkpoint, history, layout)
            if state is None:
                state = self._initial()
                history.record(*self._sample(state))
                self._guard(history)
            cadence = getattr(self.settings, "checkpoint_every", None)
            bar = self._bar(ends.size, position, progress)
            last_save, last_steps, saved = time.perf_counter(), self.steps_done(state), 0
            try:
                t = float(self.t_start) if position == 0 else float(ends[position - 1])
                for k in range(position, ends.size):
                    t_next = float(ends[k])
                    state = self._advance(state, t, t_next)
                    t = t_next
                    if history.count < times.size and math.isclose(t, times[history.count], rel_tol=0,
                                                                   abs_tol=1e-9 * max(1.0, abs(t))):
                        history.record(*self._sample(state))
                        self._guard(history)
                    if bar is not None:
                        bar.update(1)
                    if k + 1 == ends.size:
                        break
                    self._stop_if_asked(checkpoint, state, k + 1, t, history, layout)
                    if checkpoint is not None and self.resumable and cadence is not None and (
                            (cadence.seconds is not None and time.perf_counter() - last_save >= cadence.seconds)
                            or (cadence.steps is not None and self.steps_done(state) - last_steps >= cadence.steps)):
                        self._checkpoint(checkpoint, state, k + 1, t, history, layout)
                        last_save, last_steps, saved = time.perf_counter(), self.steps_done(state), saved + 1
            finally:
                if bar is not None:
                    bar.close()
            propagated = time.perf_counter()
            outcome = self._finish(state, history)
        checks += self._guard_checks(history) + list(outcome.checks)
        if strict:
            refuse_if_hard(checks, when="after the run")
        return self._result(outcome, history, checks, {
            "wall_s": time.perf_counter() - wall0, "cpu_s": time.process_time() - cpu0, "prepare_s": prepared - wall0,
            "propagate_s": propagated - prepared, "samples": int(times.size),
            "resumed": resumed_at is not None, "resumed_at_au": resumed_at, "checkpoints_written": saved})

    # -- helpers of the loop --------------------------------------------------------------------------
    def _stop_if_asked(self, checkpoint, state, position: int, t: float, history, layout) -> None:
        """At a stop signal: write a checkpoint of ``state`` (if any) and raise Interrupted."""
        from driven_atom import stopping

        signum = stopping.requested()
        if signum is None:
            return
        where = "before the propagation started"
        if state is not None and checkpoint is not None and self.resumable:
            self._checkpoint(checkpoint, state, position, t, history, layout)
            where = f"checkpoint written at t = {t:.6g} au; run the same command again to resume"
        elif state is not None:
            where = f"at t = {t:.6g} au (route {self.name!r} keeps no checkpoint: it starts again)"
        raise Interrupted(signum, f"stopped by signal {signum}, {where}")

    def _checkpoint(self, checkpoint, state, position: int, t: float, history: History, layout: dict) -> None:
        arrays, meta = self._save(state)
        payload = {f"route:{k}": v for k, v in arrays.items()}
        payload.update(history.arrays())
        checkpoint.save(payload, {"layout": layout, "position": int(position), "samples": history.count,
                                  "t": float(t), "route": meta})

    def _resume(self, checkpoint, history: History, layout: dict):
        """(state, slice position, time) from a checkpoint of this run's layout, else (None, 0, None)."""
        if checkpoint is None or not self.resumable:
            return None, 0, None
        loaded = checkpoint.load()
        if loaded is None:
            return None, 0, None
        arrays, meta = loaded
        if meta.get("layout") != layout:
            return None, 0, None
        route_arrays = {k[6:]: v for k, v in arrays.items() if k.startswith("route:")}
        try:
            state = self._load(route_arrays, meta["route"])
        except (KeyError, ValueError):
            return None, 0, None
        history.restore(arrays, meta["samples"])
        return state, int(meta["position"]), float(meta["t"])

    def _bar(self, total: int, done: int, enabled: bool):
        if not enabled:
            return None
        from tqdm import tqdm

        return tqdm(total=total, initial=done, desc=self.name, leave=False, mininterval=0.5,
                    bar_format="{desc}: {percentage:3.0f}%|{bar}| {elapsed}<{remaining}")

    def _result(self, outcome: Outcome, history: History, checks: list, common: dict) -> Result:
        stats = {**self.stats, **outcome.stats, **common}
        warnings = self.warnings + list(outcome.warnings) + [c.message for c in checks if c.level != "ok"]
        series = {k: v for k, v in history.series.items() if not k.startswith("_")}
        series.update(outcome.series)
        metadata = {"carriers_au": [float(c.omega) for c in self.pulse.components] if self.pulse else [],
                    **outcome.metadata}
        return Result(route=self.name, populations=with_level_sums(outcome.populations),
                      ionization=float(outcome.ionization), norm=float(outcome.norm), times=history.times,
                      history_populations=with_level_sums(history.populations), series=series,
                      spectra=outcome.spectra, stats=stats, warnings=list(dict.fromkeys(warnings)),
                      metadata=metadata, quality=quality_block(checks))

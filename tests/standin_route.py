"""A stand-in route for testing the route contract itself (no physics: no reference values).

Its state is a unit vector turned by a fixed rotation per unit of time, in whole steps of
``time_quantum = 1``; ``delay`` seconds of sleep per step make a run slow enough to be killed.
``register()`` puts it into the registries (``route = "standin"``).
"""
from __future__ import annotations

import time
from typing import Literal

import numpy as np

from driven_atom.quantities import Cadence, CheckpointCadence, Number
from driven_atom.routes import ROUTES
from driven_atom.routes.base import Outcome, Route
from driven_atom.settings import SETTINGS, RouteSettings


class StandInSettings(RouteSettings):
    route: Literal["standin"] = "standin"
    duration: Number(gt=0) = 20.0
    delay: Number(ge=0) = 0.0
    checkpoint_every: CheckpointCadence(steps_allowed=True) = Cadence(steps=1)


class StandInRoute(Route):
    name = "standin"
    Settings = StandInSettings
    counts_steps = True
    needs_pulse = False

    def _prepare(self):
        self.t_start, self.t_end = 0.0, float(self.settings.duration)
        self.time_quantum = 1.0
        self.max_slice = 1.0
        theta = 0.1
        self.rotation = np.array([[np.cos(theta), -np.sin(theta)], [np.sin(theta), np.cos(theta)]])

    def _initial(self):
        return {"v": np.array([1.0, 0.0]), "step": 0}

    def _advance(self, state, t, t_next):
        v, step = state["v"], state["step"]
        for _ in range(int(round(t_next - t))):
            v = self.rotation @ v
            step += 1
            if self.settings.delay:
                time.sleep(self.settings.delay)
        return {"v": v, "step": step}

    def steps_done(self, state):
        return state["step"]

    def _sample(self, state):
        v = state["v"]
        return {"1s": float(v[0] ** 2), "2p0": float(v[1] ** 2)}, {"norm": float(v @ v), "x": float(v[0])}

    def _save(self, state):
        return {"v": state["v"]}, {"step": state["step"]}

    def _load(self, arrays, meta):
        return {"v": np.array(arrays["v"]), "step": int(meta["step"])}

    def _finish(self, state, history):
        v = state["v"]
        return Outcome(populations={"1s": float(v[0] ** 2), "2p0": float(v[1] ** 2)}, ionization=0.0,
                       norm=float(v @ v), stats={"steps": state["step"]})


def register() -> None:
    SETTINGS["standin"] = StandInSettings
    ROUTES["standin"] = StandInRoute


def config(**solver) -> dict:
    return {"atom": {"Z": 1, "nucleus": "H"}, "solver": {"route": "standin", **solver}, "output": {"every": 2.0}}

"""Idle: the drone holds station where the episode starts it, a static deterrent.

Not an unherded control: the drone hovers near the flock's flight path, and every bird that comes
within its alarm radius flees it, so an idle drone often scares the flock off its course without
doing anything. The true unherded control, with no pursuer in the world at all, is ``no-drone``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from flockward.controller import Controller, StateView
from flockward.sim.types import Scenario
from flockward_baselines.controllers.steering import fly_to


class Idle(Controller):
    """Hover at the start position (brakes to rest, then corrects any drift)."""

    name = "idle"
    information_level = "state"

    def __init__(self) -> None:
        self._home: np.ndarray | None = None

    def reset(self, scenario: Scenario, seed: int | None = None) -> None:
        """Forget the home position; the first step of the episode sets it."""
        self._home = None

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """Fly back to the drone's position at the first step; no command without the state."""
        if state is None:
            return np.zeros(2)
        pos, vel = state.pursuer_pos[0], state.pursuer_vel[0]  # the drone this controller flies
        if self._home is None:
            self._home = pos.copy()
        return fly_to(pos, vel, self._home, state.scenario.pursuer)

    def parameters(self) -> dict[str, Any]:
        """Idle has no settings."""
        return {}

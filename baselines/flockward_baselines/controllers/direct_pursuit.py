"""Direct pursuit: fly straight at the flock at top speed and let fear do the rest.

The naive strategy, kept as a lower bar. Chasing the centroid drives the drone into the middle of
the flock, inside every bird's dodge radius, so birds scatter to both sides; field reports of
drone hazing describe chases splitting larger flocks (common practice). For a handful of birds a
single aggressive chase is often enough. Assumes only the state view (bird positions).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from flockward.controller import Controller, StateView
from flockward_baselines.controllers.steering import head_for

TARGETS = ("centroid", "nearest")


class DirectPursuit(Controller):
    """Chase the flock centroid (or the nearest bird) at full speed, without braking."""

    name = "direct-pursuit"
    information_level = "state"

    def __init__(self, target: str = "centroid") -> None:
        if target not in TARGETS:
            raise ValueError(f"target = {target!r}: choose one of {', '.join(TARGETS)}")
        # "centroid" is the textbook naive chase; "nearest" hounds whichever bird is closest.
        self.target = target

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """Full speed at the target point; no command without the state or without birds."""
        if state is None or len(state.bird_pos) == 0:
            return np.zeros(2)
        pos, vel = state.pursuer_pos[0], state.pursuer_vel[0]  # the drone this controller flies
        if self.target == "centroid":
            aim = state.bird_pos.mean(axis=0)
        else:
            gaps = np.hypot(*(state.bird_pos - pos).T)
            aim = state.bird_pos[int(np.argmin(gaps))]
        return head_for(pos, vel, aim, state.scenario.pursuer)

    def parameters(self) -> dict[str, Any]:
        """Which point is chased."""
        return {"target": self.target}

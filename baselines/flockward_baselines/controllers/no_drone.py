"""No drone: the unherded control, a world without any pursuer.

The flock meets nothing that frightens it and flies on toward its destination, across the
protected zone on the shipped scenarios. This is what every herding controller is measured
against: how often the birds breach when nobody herds them. Unlike ``idle``, whose hovering drone
still scares any bird that comes within its alarm radius, no fear acts at all.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from flockward.controller import Controller, StateView


class NoDrone(Controller):
    """Fly no drone: the env is built without a pursuer and the (ignored) action is zero."""

    name = "no-drone"
    information_level = "observation"
    drones = 0

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """Zero: there is no drone to command."""
        return np.zeros(2)

    def parameters(self) -> dict[str, Any]:
        """No settings."""
        return {}

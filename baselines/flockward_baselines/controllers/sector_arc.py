"""Sector arc: boundary arc with several drones, the rim behind the flock divided between them.

Every drone uses the one-drone boundary arc's rules (``boundary_arc``): the same arc centre
behind the most threatening rim birds, the same push distance from the rim and the same back-off
from a bird that comes too close. The arc behind the flock is ``arc_span_deg`` per drone wide
(at most 180 degrees in all) and split into P adjacent sectors of equal width, drone k sweeping
the k-th counter-clockwise; each drone starts in the middle of its own sector. The sectors cover
the arc exactly once (``sectors``), so no stretch of the rim is left unpushed and no two drones
sweep the same stretch. A drone turns short of an edge it shares with a neighbour (by half of
``KEEP_APART`` times the two safety radii, at most a quarter of its sector), where the two
would otherwise meet; its push still reaches the edge, since fright reaches out to the alarm
radius. On the way to their stations drones keep apart from each other
(``steering.keep_apart``). With one drone the sector is the whole
arc and the controller sweeps like boundary-arc.

Assumes the state view (every bird and every drone).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from flockward.controller import StateView
from flockward.sim.types import Scenario
from flockward_baselines.controllers.boundary_arc import BoundaryArc, Sweep
from flockward_baselines.controllers.steering import keep_apart, team

KEEP_APART = 3.0  # teammates keep this many times the sum of their safety radii apart


def sectors(span: float, drones: int) -> list[tuple[float, float]]:
    """``drones`` adjacent sectors (rad, offsets from the arc centre) splitting [-span/2,
    span/2] in equal parts, counter-clockwise; the last ends exactly at span/2."""
    if drones < 1:
        raise ValueError(f"drones = {drones}: at least one drone sweeps a sector")
    edges = [-span / 2.0 + span * i / drones for i in range(drones)] + [span / 2.0]
    return [(edges[i], edges[i + 1]) for i in range(drones)]


class SectorArc(BoundaryArc):
    """Each drone pushes its own sector of the rim from the standoff arc behind the flock."""

    name = "sector-arc"
    information_level = "state"

    def parameters(self) -> dict[str, Any]:
        """The boundary arc's settings (``arc_span_deg`` is per drone)."""
        return super().parameters()

    def reset(self, scenario: Scenario, seed: int | None = None) -> None:
        """Prepare for the scenario: one sweep per drone, each from its sector's middle."""
        super().reset(scenario, seed)
        drones = scenario.drone_count
        span = min(math.radians(self.arc_span_deg) * drones, math.pi)
        self._sectors = sectors(span, drones)
        self._sweeps = [Sweep(phase=(lo + hi) / 2.0) for lo, hi in self._sectors]

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """A (P, 2) command: every drone approaches or sweeps its own sector ((2,) with one
        drone, as the one-drone contract has it)."""
        if state is None or len(state.bird_pos) == 0:
            drones = 1 if state is None else len(state.pursuer_pos)
            return np.zeros(2) if drones == 1 else np.zeros((drones, 2))
        if self._prepared is not state.scenario:
            self.reset(state.scenario)
        frame = self._frame(state)
        fleet = team(state.scenario, len(state.pursuer_pos))
        radii = np.array([d.safety_radius for d in fleet])
        # Two drones sweeping to a shared edge stay KEEP_APART times their radii apart there.
        last = len(self._sectors) - 1
        commands = []
        for k, (sweep, (lo, hi)) in enumerate(zip(self._sweeps, self._sectors, strict=True)):
            keep = KEEP_APART * 2.0 * float(radii.max())  # m between neighbours at an edge
            margin = min(keep / (2.0 * (frame.radius + frame.push)), (hi - lo) / 4.0)
            turns = (lo + (margin if k > 0 else 0.0), hi - (margin if k < last else 0.0))
            commands.append(self._command(state, frame, k, sweep, turns))
        if len(commands) == 1:
            return commands[0]
        command = np.array(commands).reshape(len(commands), 2)
        return keep_apart(command, state.pursuer_pos, state.pursuer_vel, fleet, KEEP_APART)

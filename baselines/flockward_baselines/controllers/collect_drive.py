"""Collect and drive: the single-shepherd rule of Strömbom et al. (2014), adapted to a flying flock.

Strömbom et al. 2014 (J. R. Soc. Interface 11:20140719): with GCM the flock centroid, N the flock
size and f(N) = r_a N^(2/3), the shepherd **collects** while any agent is farther than f(N) from
the GCM, heading to P_c = A_f + r_a (A_f - GCM)/|A_f - GCM| behind the furthest agent A_f; once
all are within f(N) it **drives**, heading to P_d = GCM + r_a sqrt(N) (GCM - G)/|GCM - G| behind
the flock on the side away from the goal G. The collect/drive switch is confirmed by the paper's
abstract; the formulas and the parameter value r_a = 2 are from memory of the paper.

Adaptation. In the paper r_a = 2 is the agents' repulsion distance, in agent-length units; the
role of that distance here is played by the flock's ``separation_radius`` (m), so r_a defaults to
it (2 m for gulls). The paper's shepherd stands still within 3 r_a of any agent; a drone chasing a
flying flock cannot, and at the paper's offsets it would sit inside the dodge radius and split the
flock, so both target points are pushed out to at least ``dodge_radius + standoff_margin`` from
the birds, and the drone flies round the flock, not through it. The drone tracks the moving
target points with the flock's mean velocity as feed-forward. Assumes the state view.

Like the paper's shepherd, it reads only the flock and the goal, never the protected zones: with
one zone or several it drives the flock straight at the goal, whatever lies between.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from flockward.controller import Controller, StateView
from flockward.sim.geometry import zone_center
from flockward.sim.types import Scenario
from flockward_baselines.controllers.steering import around, fly_to

PAPER_R_A = 2.0  # agent lengths: Strömbom et al. 2014 parameter table (from memory)


def cohesion_threshold(r_a: float, n: int) -> float:
    """f(N) = r_a N^(2/3): the largest distance from the GCM a 'collected' flock may have."""
    return float(r_a * n ** (2.0 / 3.0))


def driving_offset(r_a: float, n: int) -> float:
    """r_a sqrt(N): how far behind the GCM the driving point P_d lies."""
    return r_a * math.sqrt(n)


def _unit(v: np.ndarray) -> np.ndarray:
    norm = float(np.hypot(v[0], v[1]))
    return v / norm if norm > 1e-12 else np.array([1.0, 0.0])


def shepherd_target(
    birds: np.ndarray, goal: np.ndarray, r_a: float, standoff: float | None = None
) -> tuple[str, np.ndarray]:
    """The Strömbom decision: ("collect" or "drive", the point to head for), positions in m.

    With ``standoff`` None the points are the paper's P_c and P_d exactly. With a standoff (m) they
    are moved out along the same bearings until they keep that distance: P_c at least that far
    behind the straggler, P_d at least that far beyond the flock's furthest bird.
    """
    gcm = birds.mean(axis=0)
    gaps = np.hypot(*(birds - gcm).T)
    n = len(birds)
    if float(gaps.max()) > cohesion_threshold(r_a, n):
        straggler = birds[int(np.argmax(gaps))]
        behind = r_a if standoff is None else max(r_a, standoff)
        return "collect", straggler + behind * _unit(straggler - gcm)
    offset = driving_offset(r_a, n)
    if standoff is not None:
        offset = max(offset, float(gaps.max()) + standoff)
    return "drive", gcm + offset * _unit(gcm - goal)


class CollectDrive(Controller):
    """Collect the furthest straggler when the flock is spread, else drive it toward the goal."""

    name = "collect-drive"
    information_level = "state"

    def __init__(
        self,
        r_a: float | None = None,
        standoff_margin: float = 2.0,
        speed: float = 1.0,
    ) -> None:
        if r_a is not None and not r_a > 0.0:
            raise ValueError(f"r_a = {r_a}: must be positive metres, or None for separation_radius")
        if not 0.0 < speed <= 1.0:
            raise ValueError(f"speed = {speed}: a fraction of the drone's top speed in (0, 1]")
        # m; None = the flock's separation_radius, the analogue of the paper's repulsion r_a.
        self.r_a = r_a
        # m beyond the dodge radius the drone keeps from the birds, so they flee, not scatter.
        self.standoff_margin = standoff_margin
        # Fraction of top speed toward the target point: the paper's shepherd outpaces its flock.
        self.speed = speed
        self.mode = "drive"

    def parameters(self) -> dict[str, Any]:
        """The repulsion distance (None: the flock's), standoff margin and speed fraction."""
        return {"r_a": self.r_a, "standoff_margin": self.standoff_margin, "speed": self.speed}

    def reset(self, scenario: Scenario, seed: int | None = None) -> None:
        """Take the goal from the scenario and start in drive mode."""
        self._scenario = scenario
        self._goal = np.array(zone_center(scenario.site.goal))
        self.mode = "drive"

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """Fly round the flock to the collect or drive point, matching the flock's velocity."""
        if state is None or len(state.bird_pos) == 0:
            return np.zeros(2)
        if getattr(self, "_scenario", None) is not state.scenario:
            self.reset(state.scenario)
        flock = state.flock
        r_a = flock.separation_radius if self.r_a is None else self.r_a
        standoff = flock.dodge_radius + self.standoff_margin
        self.mode, target = shepherd_target(state.bird_pos, self._goal, r_a, standoff)
        birds = state.bird_pos
        gcm = birds.mean(axis=0)
        radius = float(np.max(np.hypot(*(birds - gcm).T)))
        pursuer = state.scenario.pursuer
        pos, vel = state.pursuer_pos[0], state.pursuer_vel[0]  # the drone this controller flies
        waypoint = around(pos, target, gcm, radius + flock.dodge_radius)
        return fly_to(
            pos,
            vel,
            waypoint,
            pursuer,
            self.speed * pursuer.max_speed,
            state.bird_vel.mean(axis=0),
        )

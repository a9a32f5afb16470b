"""Collect and drive with roles: Strömbom's two behaviours (``collect_drive``) split over drones.

The one-drone rule switches between collecting the furthest straggler and driving the flock;
while it collects, nobody drives. Here drone 0 always drives, heading for the driving point P_d
behind the flock on the side away from the goal, and the other drones collect: while any bird is
farther than f(N) = r_a N^(2/3) from the flock centre, collector j heads for the point behind
the j-th furthest of the stragglers that lie on distinct sides of the flock (at least
``straggler_spread_deg`` apart as seen from the centre), and otherwise flanks the driver,
standing behind the flock ``flank_deg`` to one side of the drive point (alternating sides), so
that the flock's edges are pushed too. Points, standoffs and the flight round the flock are
those of the one-drone rule; teammates keep apart (``steering.keep_apart``). With one drone it
is exactly the one-drone rule.

Assumes the state view.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from flockward.controller import StateView
from flockward_baselines.controllers.collect_drive import (
    CollectDrive,
    _unit,
    cohesion_threshold,
    shepherd_target,
)
from flockward_baselines.controllers.steering import around, fly_to, keep_apart, team


def _rotate(v: np.ndarray, angle: float) -> np.ndarray:
    c, s = math.cos(angle), math.sin(angle)
    return np.array([c * v[0] - s * v[1], s * v[0] + c * v[1]])


def straggler_picks(
    birds: np.ndarray, gcm: np.ndarray, threshold: float, wanted: int, spread: float
) -> list[int]:
    """Indices of up to ``wanted`` stragglers (farther than ``threshold`` m from ``gcm``),
    furthest first, each at least ``spread`` rad in bearing from those already picked."""
    rel = birds - gcm
    gaps = np.hypot(*rel.T)
    picks: list[int] = []
    for i in np.argsort(-gaps, kind="stable"):
        if gaps[i] <= threshold or len(picks) == wanted:
            break
        bearing = math.atan2(rel[i, 1], rel[i, 0])
        apart = all(
            abs(math.remainder(bearing - math.atan2(rel[j, 1], rel[j, 0]), math.tau)) >= spread
            for j in picks
        )
        if apart:
            picks.append(int(i))
    return picks


class CollectDriveRoles(CollectDrive):
    """Drone 0 drives the flock to the goal; the other drones collect stragglers or flank."""

    name = "collect-drive-roles"
    information_level = "state"

    def __init__(
        self,
        r_a: float | None = None,
        standoff_margin: float = 2.0,
        speed: float = 1.0,
        flank_deg: float = 35.0,
        straggler_spread_deg: float = 45.0,
    ) -> None:
        super().__init__(r_a, standoff_margin, speed)
        if not 0.0 <= flank_deg <= 90.0:
            raise ValueError(f"flank_deg = {flank_deg}: must lie in [0, 90]")
        if not 0.0 <= straggler_spread_deg <= 180.0:
            raise ValueError(f"straggler_spread_deg = {straggler_spread_deg}: must lie in [0, 180]")
        # deg either side of the drive point where idle collectors stand behind the flock
        self.flank_deg = flank_deg
        # deg: stragglers closer in bearing than this are one group, collected by one drone
        self.straggler_spread_deg = straggler_spread_deg

    def parameters(self) -> dict[str, Any]:
        """The one-drone rule's settings plus the flank angle and the straggler spread."""
        return {
            **super().parameters(),
            "flank_deg": self.flank_deg,
            "straggler_spread_deg": self.straggler_spread_deg,
        }

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """A (P, 2) command: the driver's, then each collector's ((2,) with one drone: the
        one-drone rule)."""
        drones = 1 if state is None else len(state.pursuer_pos)
        if state is None or len(state.bird_pos) == 0 or drones < 2:
            command = super().act(observation, state)
            return command if drones <= 1 else np.vstack([command, np.zeros((drones - 1, 2))])
        if getattr(self, "_scenario", None) is not state.scenario:
            self.reset(state.scenario)
        flock = state.flock
        r_a = flock.separation_radius if self.r_a is None else self.r_a
        standoff = flock.dodge_radius + self.standoff_margin
        birds = state.bird_pos
        gcm = birds.mean(axis=0)
        radius = float(np.max(np.hypot(*(birds - gcm).T)))
        rule, drive_point = shepherd_target(birds, self._goal, r_a, standoff)
        if rule == "collect":  # the driver drives even while the flock is spread
            gaps = np.hypot(*(birds - gcm).T)
            offset = max(math.sqrt(len(birds)) * r_a, float(gaps.max()) + standoff)
            drive_point = gcm + offset * _unit(gcm - self._goal)
        picks = straggler_picks(
            birds,
            gcm,
            cohesion_threshold(r_a, len(birds)),
            drones - 1,
            math.radians(self.straggler_spread_deg),
        )
        self.mode = "collect" if picks else "drive"
        targets = [drive_point]
        for j in range(1, drones):
            if j - 1 < len(picks):
                straggler = birds[picks[j - 1]]
                targets.append(straggler + max(r_a, standoff) * _unit(straggler - gcm))
            else:
                side = 1.0 if j % 2 else -1.0
                angle = side * math.radians(self.flank_deg) * ((j + 1) // 2)
                targets.append(gcm + _rotate(drive_point - gcm, angle))
        flock_vel = state.bird_vel.mean(axis=0)
        fleet = team(state.scenario, drones)
        commands = []
        for k, target in enumerate(targets):
            pursuer = fleet[k]
            pos, vel = state.pursuer_pos[k], state.pursuer_vel[k]
            waypoint = around(pos, target, gcm, radius + flock.dodge_radius)
            commands.append(
                fly_to(pos, vel, waypoint, pursuer, self.speed * pursuer.max_speed, flock_vel)
            )
        return keep_apart(np.array(commands), state.pursuer_pos, state.pursuer_vel, fleet)

"""What a learned policy sees: a fixed-size vector, or a padded per-bird dictionary.

Both are built batched from the step's metrics, without a Python loop over worlds or birds. Lengths
are scaled by two scales of the scenario (``Scales``): the site scale for where the flock is on the
airfield, the alarm radius for what happens near the pursuer; speeds by the pursuer's top speed or
the flock's cruise speed. Directions are in the world frame (x east, y north).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import gymnasium as gym
import numba
import numpy as np

from flockward.sim.geometry import _signed_distance_xy, nearest_boundary_point, zone_center
from flockward.sim.metrics import StepMetrics
from flockward.sim.types import Scenario, WorldState

OBSERVATION_MODES = ("vector", "dict")

# Field layout of the vector observation: (name, width). The README's table follows this order.
GLOBAL_FIELDS = (
    ("pursuer_velocity", 2),  # pursuer velocity / pursuer max speed
    ("centroid_offset", 2),  # (flock centroid - pursuer) / site scale
    ("flock_velocity", 2),  # flock mean velocity / cruise speed
    ("flock_diameter", 1),  # smallest-enclosing-circle diameter / alarm radius
    ("largest_cluster", 1),  # share of birds in the largest fragment, [0, 1]
    ("protected_direction", 2),  # unit vector, centroid -> nearest protected-zone edge point
    ("protected_distance", 1),  # signed centroid distance to that edge / site scale (<0 inside)
    ("goal_direction", 2),  # unit vector, centroid -> goal-region centre
    ("goal_distance", 1),  # signed centroid distance to the goal edge / site scale (<0 inside)
)
GLOBAL_SIZE = sum(width for _, width in GLOBAL_FIELDS)
RIM_FIELDS = 3  # per rim bird: offset from the pursuer / alarm radius (2), present mask (1)


@dataclass(frozen=True)
class Scales:
    """The lengths and speeds observations are divided by, derived once per scenario."""

    site: float  # m, flock start to goal centre
    near: float  # m, the flock's alarm radius
    pursuer_speed: float  # m/s
    cruise_speed: float  # m/s

    @classmethod
    def of(cls, scenario: Scenario) -> Scales:
        start = np.asarray(scenario.site.flock_start)
        goal = np.asarray(zone_center(scenario.site.goal))
        return cls(
            site=max(float(np.hypot(*(goal - start))), 1.0),
            near=scenario.flock.alarm_radius,
            pursuer_speed=scenario.pursuer.max_speed,
            cruise_speed=scenario.flock.cruise_speed,
        )


@numba.njit(cache=True)
def _rim_threat(pos, count, on_hull, protected_arr, goal_arr, k, out_idx):
    """Indices of the k rim birds threatening the protected zone most (-1 pads).

    Threat = distance to the goal region minus distance to the protected zone (metres): birds near
    the zone and far from the goal come first.
    """
    worlds = pos.shape[0]
    slots = pos.shape[1]
    score = np.empty(slots)
    for b in range(worlds):
        m = 0
        for i in range(count[b]):
            if on_hull[b, i]:
                x = pos[b, i, 0]
                y = pos[b, i, 1]
                score[m] = _signed_distance_xy(goal_arr, x, y) - _signed_distance_xy(
                    protected_arr, x, y
                )
                out_idx[b, m] = i
                m += 1
        # Partial selection sort: k is small (a handful of birds).
        for r in range(min(k, m)):
            best = r
            for s in range(r + 1, m):
                if score[s] > score[best]:
                    best = s
            score[r], score[best] = score[best], score[r]
            out_idx[b, r], out_idx[b, best] = out_idx[b, best], out_idx[b, r]
        for r in range(min(k, m), k):
            out_idx[b, r] = -1


@numba.njit(cache=True)
def _vector_obs(
    pos,
    pvel,
    ppos,
    centroid,
    mean_vel,
    diameter,
    largest,
    rim_idx,
    protected_arr,
    goal_arr,
    goal_cx,
    goal_cy,
    site,
    near,
    vp,
    vc,
    out,
):
    worlds = pos.shape[0]
    k = rim_idx.shape[1]
    for b in range(worlds):
        cx = centroid[b, 0]
        cy = centroid[b, 1]
        out[b, 0] = pvel[b, 0] / vp
        out[b, 1] = pvel[b, 1] / vp
        out[b, 2] = (cx - ppos[b, 0]) / site
        out[b, 3] = (cy - ppos[b, 1]) / site
        out[b, 4] = mean_vel[b, 0] / vc
        out[b, 5] = mean_vel[b, 1] / vc
        out[b, 6] = diameter[b] / near
        out[b, 7] = largest[b]
        ex, ey = nearest_boundary_point(protected_arr, cx, cy)
        dx = ex - cx
        dy = ey - cy
        d = math.hypot(dx, dy)
        out[b, 8] = dx / d if d > 0 else 0.0
        out[b, 9] = dy / d if d > 0 else 0.0
        out[b, 10] = _signed_distance_xy(protected_arr, cx, cy) / site
        dx = goal_cx - cx
        dy = goal_cy - cy
        d = math.hypot(dx, dy)
        out[b, 11] = dx / d if d > 0 else 0.0
        out[b, 12] = dy / d if d > 0 else 0.0
        out[b, 13] = _signed_distance_xy(goal_arr, cx, cy) / site
        for r in range(k):
            base = 14 + 3 * r
            i = rim_idx[b, r]
            if i >= 0:
                out[b, base] = (pos[b, i, 0] - ppos[b, 0]) / near
                out[b, base + 1] = (pos[b, i, 1] - ppos[b, 1]) / near
                out[b, base + 2] = 1.0
            else:
                out[b, base] = 0.0
                out[b, base + 1] = 0.0
                out[b, base + 2] = 0.0


class ObservationBuilder:
    """Builds observations of every world from the state and the step's metrics."""

    def __init__(
        self,
        scenario: Scenario,
        worlds: int,
        protected_arr: np.ndarray,
        goal_arr: np.ndarray,
        mode: str = "vector",
        rim_birds: int = 4,
        max_birds: int | None = None,
    ):
        if mode not in OBSERVATION_MODES:
            raise ValueError(f"observation = {mode!r}: allowed {', '.join(OBSERVATION_MODES)}")
        if not 1 <= rim_birds <= 64:
            raise ValueError(f"rim_birds = {rim_birds}: must be an integer in [1, 64]")
        self.mode = mode
        self.rim_birds = rim_birds
        self.max_birds = scenario.max_birds if max_birds is None else max_birds
        if self.max_birds < scenario.max_birds:
            raise ValueError(
                f"max_birds = {self.max_birds}: must be at least the scenario's largest flock "
                f"({scenario.max_birds})"
            )
        self.scales = Scales.of(scenario)
        self.protected_arr = protected_arr
        self.goal_arr = goal_arr
        self.goal_center = zone_center(scenario.site.goal)
        self.vector_size = GLOBAL_SIZE + RIM_FIELDS * rim_birds
        self._vector = np.zeros((worlds, self.vector_size), dtype=np.float64)
        self._rim = np.full((worlds, max(scenario.max_birds, rim_birds)), -1, dtype=np.int64)

    def space(self) -> gym.spaces.Space:
        """The observation space of one world."""
        vector = gym.spaces.Box(-np.inf, np.inf, (self.vector_size,), np.float32)
        if self.mode == "vector":
            return vector
        return gym.spaces.Dict(
            {
                "context": vector,
                "birds": gym.spaces.Box(-np.inf, np.inf, (self.max_birds, 4), np.float32),
                "mask": gym.spaces.Box(0.0, 1.0, (self.max_birds,), np.float32),
            }
        )

    def rim_indices(self, state: WorldState, metrics: StepMetrics) -> np.ndarray:
        """(B, rim_birds) indices of the most threatening rim birds, -1 where padded."""
        _rim_threat(
            state.bird_pos,
            state.count,
            metrics.on_hull,
            self.protected_arr,
            self.goal_arr,
            self.rim_birds,
            self._rim,
        )
        return self._rim[:, : self.rim_birds]

    def build(self, state: WorldState, metrics: StepMetrics):
        """Observations of all worlds: a (B, D) float32 array, or a dict of batched arrays."""
        s = self.scales
        _vector_obs(
            state.bird_pos,
            state.pursuer_vel[:, 0],  # the observation is drone 0's
            state.pursuer_pos[:, 0],
            metrics.centroid,
            metrics.mean_velocity,
            metrics.diameter,
            metrics.largest_fraction,
            self.rim_indices(state, metrics),
            self.protected_arr,
            self.goal_arr,
            self.goal_center[0],
            self.goal_center[1],
            s.site,
            s.near,
            s.pursuer_speed,
            s.cruise_speed,
            self._vector,
        )
        vector = self._vector.astype(np.float32)
        if self.mode == "vector":
            return vector
        worlds, n_slots = state.bird_pos.shape[:2]
        birds = np.zeros((worlds, self.max_birds, 4), dtype=np.float32)
        rel_pos = (state.bird_pos - state.pursuer_pos[:, :1]) / s.near  # relative to drone 0
        rel_vel = (state.bird_vel - state.pursuer_vel[:, :1]) / s.pursuer_speed
        mask = (np.arange(n_slots)[None, :] < state.count[:, None]).astype(np.float32)
        birds[:, :n_slots, :2] = rel_pos * mask[..., None]
        birds[:, :n_slots, 2:] = rel_vel * mask[..., None]
        full_mask = np.zeros((worlds, self.max_birds), dtype=np.float32)
        full_mask[:, :n_slots] = mask
        return {"context": vector, "birds": birds, "mask": full_mask}

"""What a learned policy sees: a fixed-size vector, or a padded per-bird dictionary.

An observation is an object with ``space()`` and ``build(context)`` (see ``Observation``). The
shipped ones, ``VectorObservation`` ("vector") and ``DictObservation`` ("dict"), are built
batched from the step's metrics, without a Python loop over worlds or birds. Lengths are scaled by
two scales of the scenario (``Scales``): the site scale for where the flock is on the airfield, the
alarm radius for what happens near the pursuer; speeds by the pursuer's top speed or the flock's
cruise speed. Directions are in the world frame (x east, y north).

Birds are seen through the scenario's sensor (``StepContext.seen_state``; the truth with the
default perfect sensor, so that case is unchanged bit for bit): every flock field is computed
from the tracked birds only, and a bird that is lost or out of range is absent, never a stale
value. Absent in the vector: a rim slot with no tracked bird has ``rim_present`` 0 and offset
exactly (0, 0), meaningful only where ``rim_present`` is 1; when a world tracks no bird at all,
every flock field (``centroid_offset`` through ``goal_distance``) is 0, and ``largest_cluster``
= 0 marks it (it is at least 1/n whenever a bird is tracked). In the dict, ``mask`` is 1 exactly
for the tracked birds, listed first.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from typing import Any

import gymnasium as gym
import numpy as np

from flockward.sim.geometry import _signed_distance_xy, nearest_boundary_point
from flockward.sim.jit import compiled
from flockward.task.context import Scales, StepContext, TaskSetting

__all__ = [
    "GLOBAL_FIELDS",
    "GLOBAL_SIZE",
    "OBSERVATION_MODES",
    "RIM_FIELDS",
    "DictObservation",
    "Observation",
    "Scales",
    "VectorObservation",
    "vector_bounds",
]

INF = math.inf

# Field layout of the vector observation: (name, width, low, high). Every index below, the
# compiled kernel's and the bounds of the space, is derived from this table; the README's and
# DivertEnv's tables follow its order. Bounds are finite only where the value is bounded by
# construction: unit vectors, fractions.
GLOBAL_FIELDS = (
    ("pursuer_velocity", 2, -INF, INF),  # pursuer velocity / pursuer max speed
    ("centroid_offset", 2, -INF, INF),  # (flock centroid - pursuer) / site scale
    ("flock_velocity", 2, -INF, INF),  # flock mean velocity / cruise speed
    ("flock_diameter", 1, -INF, INF),  # smallest-enclosing-circle diameter / alarm radius
    ("largest_cluster", 1, 0.0, 1.0),  # share of birds in the largest fragment
    ("protected_direction", 2, -1.0, 1.0),  # unit vector, centroid -> nearest protected-zone edge
    ("protected_distance", 1, -INF, INF),  # signed centroid distance to that edge / site scale
    ("goal_direction", 2, -1.0, 1.0),  # unit vector, centroid -> goal-region centre
    ("goal_distance", 1, -INF, INF),  # signed centroid distance to the goal edge / site scale
)
GLOBAL_SIZE = sum(field[1] for field in GLOBAL_FIELDS)
# Per rim bird: offset from the pursuer / alarm radius (2, unbounded), present mask (1, {0, 1}).
RIM_LAYOUT = (("rim_offset", 2, -INF, INF), ("rim_present", 1, 0.0, 1.0))
RIM_FIELDS = sum(field[1] for field in RIM_LAYOUT)


def _offsets(layout: tuple[tuple[str, int, float, float], ...]) -> dict[str, int]:
    """The first index of each field of a (name, width, low, high) layout."""
    out: dict[str, int] = {}
    start = 0
    for name, width, _, _ in layout:
        out[name] = start
        start += width
    return out


OFFSET = _offsets(GLOBAL_FIELDS)  # first index of each global field
RIM_OFFSET = _offsets(RIM_LAYOUT)  # index of each rim field within one rim bird's entries

# Module-level integers, so the compiled kernel reads them as compile-time constants.
_PURSUER_VEL = OFFSET["pursuer_velocity"]
_CENTROID = OFFSET["centroid_offset"]
_FLOCK_VEL = OFFSET["flock_velocity"]
_DIAMETER = OFFSET["flock_diameter"]
_LARGEST = OFFSET["largest_cluster"]
_PROTECTED_DIR = OFFSET["protected_direction"]
_PROTECTED_DIST = OFFSET["protected_distance"]
_GOAL_DIR = OFFSET["goal_direction"]
_GOAL_DIST = OFFSET["goal_distance"]
_RIM_START = GLOBAL_SIZE
_RIM_STRIDE = RIM_FIELDS
_RIM_OFFSET = RIM_OFFSET["rim_offset"]
_RIM_PRESENT = RIM_OFFSET["rim_present"]


def vector_bounds(rim_birds: int) -> tuple[np.ndarray, np.ndarray]:
    """(low, high) float32 arrays of the vector observation with ``rim_birds`` rim birds."""
    low: list[float] = []
    high: list[float] = []
    for _, width, lo, hi in GLOBAL_FIELDS + RIM_LAYOUT * rim_birds:
        low += [lo] * width
        high += [hi] * width
    return np.array(low, dtype=np.float32), np.array(high, dtype=np.float32)


@compiled
def _rim_threat(
    pos: np.ndarray,  # (B, N, 2) m
    count: np.ndarray,  # (B,) active birds
    on_hull: np.ndarray,  # (B, N) bool, convex-hull vertices
    protected_arr: np.ndarray,  # compiled protected zone
    goal_arr: np.ndarray,  # compiled goal zone
    k: int,
    out_idx: np.ndarray,  # (B, >= max(N, k)) int64, filled in place
) -> None:
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


@compiled
def _vector_obs(
    pos: np.ndarray,  # (B, N, 2) m, birds
    pvel: np.ndarray,  # (B, 2) m/s, drone
    ppos: np.ndarray,  # (B, 2) m, drone
    centroid: np.ndarray,  # (B, 2) m
    mean_vel: np.ndarray,  # (B, 2) m/s
    diameter: np.ndarray,  # (B,) m
    largest: np.ndarray,  # (B,) fraction
    rim_idx: np.ndarray,  # (B, k) int64, -1 pads
    protected_arr: np.ndarray,
    goal_arr: np.ndarray,
    goal_cx: float,  # m
    goal_cy: float,  # m
    site: float,  # m, site scale
    near: float,  # m, alarm radius
    vp: float,  # m/s, pursuer top speed
    vc: float,  # m/s, cruise speed
    out: np.ndarray,  # (B, D) float64, filled in place
) -> None:
    """Fill ``out`` (B, GLOBAL_SIZE + RIM_FIELDS * k) at the indices of the field table."""
    worlds = pos.shape[0]
    k = rim_idx.shape[1]
    for b in range(worlds):
        cx = centroid[b, 0]
        cy = centroid[b, 1]
        out[b, _PURSUER_VEL] = pvel[b, 0] / vp
        out[b, _PURSUER_VEL + 1] = pvel[b, 1] / vp
        out[b, _CENTROID] = (cx - ppos[b, 0]) / site
        out[b, _CENTROID + 1] = (cy - ppos[b, 1]) / site
        out[b, _FLOCK_VEL] = mean_vel[b, 0] / vc
        out[b, _FLOCK_VEL + 1] = mean_vel[b, 1] / vc
        out[b, _DIAMETER] = diameter[b] / near
        out[b, _LARGEST] = largest[b]
        ex, ey = nearest_boundary_point(protected_arr, cx, cy)
        dx = ex - cx
        dy = ey - cy
        d = math.hypot(dx, dy)
        out[b, _PROTECTED_DIR] = dx / d if d > 0 else 0.0
        out[b, _PROTECTED_DIR + 1] = dy / d if d > 0 else 0.0
        out[b, _PROTECTED_DIST] = _signed_distance_xy(protected_arr, cx, cy) / site
        dx = goal_cx - cx
        dy = goal_cy - cy
        d = math.hypot(dx, dy)
        out[b, _GOAL_DIR] = dx / d if d > 0 else 0.0
        out[b, _GOAL_DIR + 1] = dy / d if d > 0 else 0.0
        out[b, _GOAL_DIST] = _signed_distance_xy(goal_arr, cx, cy) / site
        for r in range(k):
            base = _RIM_START + _RIM_STRIDE * r
            i = rim_idx[b, r]
            if i >= 0:
                out[b, base + _RIM_OFFSET] = (pos[b, i, 0] - ppos[b, 0]) / near
                out[b, base + _RIM_OFFSET + 1] = (pos[b, i, 1] - ppos[b, 1]) / near
                out[b, base + _RIM_PRESENT] = 1.0
            else:
                out[b, base + _RIM_OFFSET] = 0.0
                out[b, base + _RIM_OFFSET + 1] = 0.0
                out[b, base + _RIM_PRESENT] = 0.0


class Observation(ABC):
    """What an observation implements. The task deep-copies the object it is given, so one
    instance can configure several environments.

    ``setup`` is called once when the task is built (before ``space``), ``reset`` after the given
    worlds were reset, ``build`` after every reset and step: it returns the observations of all B
    worlds batched (a (B, ...) array, or a dict of them) matching ``space()`` of one world.
    """

    def setup(self, setting: TaskSetting) -> None:
        """Prepare for ``setting.worlds`` worlds of ``setting.scenario`` (default: nothing)."""
        return None

    @abstractmethod
    def space(self) -> gym.spaces.Space[Any]:
        """The observation space of one world."""

    def reset(self, context: StepContext, indices: np.ndarray) -> None:
        """Forget the per-world state of worlds ``indices`` (default: nothing to forget)."""
        return None

    @abstractmethod
    def build(self, context: StepContext) -> Any:
        """The observations of all worlds after this step or reset."""


class VectorObservation(Observation):
    """The fixed-size vector: GLOBAL_FIELDS, then RIM_FIELDS entries per rim bird (float32).

    ``rim_birds`` = k; None takes the environment's ``rim_birds`` argument.
    """

    def __init__(self, rim_birds: int | None = None):
        self.rim_birds = rim_birds

    def setup(self, setting: TaskSetting) -> None:
        """Take k from the environment if not given; size the work arrays for B worlds."""
        k = setting.rim_birds if self.rim_birds is None else self.rim_birds
        self.rim_birds = k
        if not 1 <= k <= 64:
            raise ValueError(f"rim_birds = {k}: must be an integer in [1, 64]")
        scenario = setting.scenario
        self.setting = setting
        self._k = k  # rim_birds as resolved, typed int for the methods below
        self.vector_size = GLOBAL_SIZE + RIM_FIELDS * k
        self._vector = np.zeros((setting.worlds, self.vector_size), dtype=np.float64)
        self._rim = np.full((setting.worlds, max(scenario.max_birds, k)), -1, dtype=np.int64)

    def vector_space(self) -> gym.spaces.Box:
        """The Box of one world's vector, bounded where GLOBAL_FIELDS bounds it."""
        low, high = vector_bounds(self._k)
        return gym.spaces.Box(low, high, (self.vector_size,), np.float32)

    def space(self) -> gym.spaces.Space[Any]:
        """One world's space: the vector's Box."""
        return self.vector_space()

    def rim_indices(self, context: StepContext) -> np.ndarray:
        """(B, rim_birds) indices of the most threatening rim birds, -1 where padded."""
        setting = self.setting
        seen = context.seen_state
        _rim_threat(
            seen.bird_pos,
            seen.count,
            context.seen_metrics.on_hull,
            setting.protected_arr,
            setting.goal_arr,
            self._k,
            self._rim,
        )
        return self._rim[:, : self._k]

    def vector(self, context: StepContext) -> np.ndarray:
        """The (B, D) float32 vectors of all worlds."""
        setting = self.setting
        s = setting.scales
        m = context.seen_metrics
        _vector_obs(
            context.seen_state.bird_pos,
            context.drone_vel,
            context.drone_pos,
            m.centroid,
            m.mean_velocity,
            m.diameter,
            m.largest_fraction,
            self.rim_indices(context),
            setting.protected_arr,
            setting.goal_arr,
            setting.goal_center[0],
            setting.goal_center[1],
            s.site,
            s.near,
            s.pursuer_speed,
            s.cruise_speed,
            self._vector,
        )
        if context.sensed is not None:  # no tracked bird: every flock field reads 0
            self._vector[context.seen_state.count == 0, _CENTROID:_RIM_START] = 0.0
        return self._vector.astype(np.float32)

    def build(self, context: StepContext) -> Any:
        """The (B, D) float32 vectors."""
        return self.vector(context)


class DictObservation(VectorObservation):
    """``context`` (the vector), ``birds`` (max_birds, 4) and ``mask`` (max_birds,).

    ``birds`` holds every seen bird's position and velocity relative to the pursuer, scaled by
    the alarm radius and the pursuer's top speed, zero for padding; ``mask`` is 1 for a seen bird
    (every real bird with the perfect sensor, else the tracked ones, listed first).
    ``max_birds`` is the environment's ``max_birds`` argument (default: the scenario's largest
    flock).
    """

    def space(self) -> gym.spaces.Space[Any]:
        """One world's Dict space: context, birds and mask."""
        slots = self.setting.max_birds
        return gym.spaces.Dict(
            {
                "context": self.vector_space(),
                "birds": gym.spaces.Box(-np.inf, np.inf, (slots, 4), np.float32),
                "mask": gym.spaces.Box(0.0, 1.0, (slots,), np.float32),
            }
        )

    def build(self, context: StepContext) -> Any:
        """The batched dict: context (B, D), birds (B, max_birds, 4), mask (B, max_birds)."""
        vector = self.vector(context)
        state = context.seen_state
        s = self.setting.scales
        slots = self.setting.max_birds
        worlds, n_slots = state.bird_pos.shape[:2]
        birds = np.zeros((worlds, slots, 4), dtype=np.float32)
        rel_pos = (state.bird_pos - context.drone_pos[:, None, :]) / s.near
        rel_vel = (state.bird_vel - context.drone_vel[:, None, :]) / s.pursuer_speed
        mask = (np.arange(n_slots)[None, :] < state.count[:, None]).astype(np.float32)
        birds[:, :n_slots, :2] = rel_pos * mask[..., None]
        birds[:, :n_slots, 2:] = rel_vel * mask[..., None]
        full_mask = np.zeros((worlds, slots), dtype=np.float32)
        full_mask[:, :n_slots] = mask
        return {"context": vector, "birds": birds, "mask": full_mask}


# The shipped observations, selected by name.
OBSERVATION_MODES: dict[str, type[Observation]] = {
    "vector": VectorObservation,
    "dict": DictObservation,
}

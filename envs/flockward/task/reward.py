"""The reward as a weighted sum of named terms, each reported in ``info["reward_terms"]``.

- progress: potential-based shaping F = gamma * phi(s') - phi(s) with phi = -(centroid distance
  to the goal region, 0 inside) / site scale, and phi = 0 at a terminal state, so the optimal policy
  is that of the unshaped task (Ng, Harada & Russell 1999, ICML);
- approach: the same shaping with phi = -(drone distance to the flock centroid beyond the flock's
  alarm radius) / site scale: it rewards closing in on the flock (the birds only react to a drone
  within that radius) and is flat inside it, so it never pays to dive into the flock;
- fragmentation: -(1 - largest-cluster fraction) each step;
- collision: -1 for each step the pursuer is inside its safety radius of any bird;
- breach: -1 for each bird entering the protected zone for the first time (a potential strike;
  large, because an episode ends at its first breaches beyond tolerance and must not look like a
  shortcut past the time cost);
- time: -1 each step;
- success: +1 on the step the flock reaches the goal region.
"""

from __future__ import annotations

import numpy as np

from flockward.sim.types import RewardWeights

REWARD_TERMS = ("progress", "approach", "fragmentation", "collision", "breach", "time", "success")


def potential(goal_distance: np.ndarray, site_scale: float) -> np.ndarray:
    """Shaping potential of each world: minus the centroid's distance to the goal region, scaled."""
    return -np.maximum(goal_distance, 0.0) / site_scale


def approach_potential(
    drone_distance: np.ndarray, alarm_radius: float, site_scale: float
) -> np.ndarray:
    """Shaping potential of closing in: minus the drone's distance beyond the alarm radius."""
    return -np.maximum(drone_distance - alarm_radius, 0.0) / site_scale


def _shaping(weight, discount, before, after, terminated):
    return weight * (discount * np.where(terminated, 0.0, after) - before)


def reward_terms(
    weights: RewardWeights,
    potential_before: np.ndarray,  # (B,)
    potential_after: np.ndarray,  # (B,)
    approach_before: np.ndarray,  # (B,)
    approach_after: np.ndarray,  # (B,)
    terminated: np.ndarray,  # (B,) bool
    largest_fraction: np.ndarray,  # (B,)
    collided: np.ndarray,  # (B,) bool
    new_breaches: np.ndarray,  # (B,) birds that entered the protected zone this step
    success: np.ndarray,  # (B,) bool
) -> dict[str, np.ndarray]:
    """Each weighted term for every world; their sum is the reward."""
    g = weights.discount
    return {
        "progress": _shaping(weights.progress, g, potential_before, potential_after, terminated),
        "approach": _shaping(weights.approach, g, approach_before, approach_after, terminated),
        "fragmentation": -weights.fragmentation * (1.0 - largest_fraction),
        "collision": -weights.collision * collided.astype(np.float64),
        "breach": -weights.breach * new_breaches,
        "time": np.full(potential_before.shape, -weights.time),
        "success": weights.success * success.astype(np.float64),
    }


def total(terms: dict[str, np.ndarray]) -> np.ndarray:
    """The reward: the sum of the terms, in REWARD_TERMS order (fixed summation order)."""
    out = np.zeros_like(terms["time"])
    for name in REWARD_TERMS:
        out = out + terms[name]
    return out

"""The reward as a weighted sum of named terms, each reported in ``info["reward_terms"]``.

- progress: potential-based shaping F = gamma * phi(s') - phi(s) with phi = -(centroid distance
  to the goal region, 0 inside) / site scale, and phi = 0 at a terminal state, so the optimal policy
  is that of the unshaped task (Ng, Harada & Russell 1999, ICML);
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

from flockward.types import RewardWeights

REWARD_TERMS = ("progress", "fragmentation", "collision", "breach", "time", "success")


def potential(goal_distance: np.ndarray, site_scale: float) -> np.ndarray:
    """Shaping potential of each world: minus the centroid's distance to the goal region, scaled."""
    return -np.maximum(goal_distance, 0.0) / site_scale


def reward_terms(
    weights: RewardWeights,
    potential_before: np.ndarray,  # (B,)
    potential_after: np.ndarray,  # (B,)
    terminated: np.ndarray,  # (B,) bool
    largest_fraction: np.ndarray,  # (B,)
    collided: np.ndarray,  # (B,) bool
    new_breaches: np.ndarray,  # (B,) birds that entered the protected zone this step
    success: np.ndarray,  # (B,) bool
) -> dict[str, np.ndarray]:
    """Each weighted term for every world; their sum is the reward."""
    after = np.where(terminated, 0.0, potential_after)
    return {
        "progress": weights.progress * (weights.discount * after - potential_before),
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

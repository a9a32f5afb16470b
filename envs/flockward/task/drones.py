"""The task seen from each drone of a P-drone world: views, stacked spaces, team reward terms.

An observation or reward object reads "the drone" as drone 0 (``StepContext.drone_pos``). To
see the world from drone k, the task hands it a context whose drone arrays are rolled so that
drone k comes first (its teammates follow in index order, wrapping round); the birds are
shared, not copied. So every observation and reward written for one drone serves each drone of
a team unchanged. With one drone nothing here is used and the one-drone task is untouched.

The team's reward is the mean over drones of each drone's terms: flock terms (progress,
fragmentation, breach, time, success) are the same from every drone and so unchanged, drone
terms (proximity, approach, collision) become the team's average.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import gymnasium as gym
import numpy as np

from flockward.sim.types import WorldState
from flockward.task.context import StepContext

__all__ = ["drone_context", "drone_state", "stack_observations", "stacked_space", "team_terms"]


def drone_state(state: WorldState, k: int) -> WorldState:
    """``state`` with drone k as drone 0 (drone arrays rolled, bird arrays shared)."""
    if k == 0:
        return state
    return WorldState(
        bird_pos=state.bird_pos,
        bird_vel=state.bird_vel,
        pursuer_pos=np.roll(state.pursuer_pos, -k, axis=1),
        pursuer_vel=np.roll(state.pursuer_vel, -k, axis=1),
        count=state.count,
    )


def drone_context(context: StepContext, k: int, collided: np.ndarray) -> StepContext:
    """``context`` from drone k's point of view; ``collided`` (B,) is drone k's own contact."""
    return replace(context, state=drone_state(context.state, k), collided=collided)


def stacked_space(space: gym.spaces.Space[Any], drones: int) -> gym.spaces.Space[Any]:
    """One world's observation space with a leading drone axis: a Box (P, ...) or a Dict of
    them (the only spaces the shipped observations use)."""
    if isinstance(space, gym.spaces.Box):
        low = np.broadcast_to(space.low, (drones, *space.shape))
        high = np.broadcast_to(space.high, (drones, *space.shape))
        return gym.spaces.Box(low, high, (drones, *space.shape), space.dtype)
    if isinstance(space, gym.spaces.Dict):
        return gym.spaces.Dict({k: stacked_space(v, drones) for k, v in space.spaces.items()})
    raise ValueError(
        f"observation space {space}: a multi-drone task stacks Box or Dict observations only"
    )


def stack_observations(observations: list[Any]) -> Any:
    """Per-drone batched observations (each (B, ...) or a dict of them) as (B, P, ...)."""
    first = observations[0]
    if isinstance(first, dict):
        return {key: np.stack([o[key] for o in observations], axis=1) for key in first}
    return np.stack(observations, axis=1)


def team_terms(per_drone: list[dict[str, np.ndarray]]) -> dict[str, np.ndarray]:
    """The team's reward terms: each term's mean over the drones (name order of drone 0)."""
    return {
        name: np.stack([terms[name] for terms in per_drone]).mean(axis=0) for name in per_drone[0]
    }

"""A researcher's own observation, reward and controller, loaded by import path in the tests.

They live in their own module (not in a test file) so that ``custom_env_parts:Name`` resolves in
the test process, in spawned worker processes and through the command line alike.
"""

from __future__ import annotations

import gymnasium as gym
import numpy as np

from flockward.controller import Controller
from flockward.task.context import StepContext, TaskSetting
from flockward.task.observation import Observation
from flockward.task.reward import Reward

OBS_SIZE = 3


class CentroidObservation(Observation):
    """Drone minus flock centroid / alarm radius (2), and steps since the world's reset (1).

    The step count is per-world state, so it needs the reset hook.
    """

    def setup(self, setting: TaskSetting) -> None:
        self.near = setting.scales.near
        self.steps = np.zeros(setting.worlds)

    def space(self) -> gym.spaces.Space:
        return gym.spaces.Box(-np.inf, np.inf, (OBS_SIZE,), np.float32)

    def reset(self, context: StepContext, indices: np.ndarray) -> None:
        self.steps[indices] = 0.0

    def build(self, context: StepContext) -> np.ndarray:
        self.steps += context.live
        offset = (context.drone_pos - context.metrics.centroid) / self.near
        return np.column_stack([offset, self.steps]).astype(np.float32)


class ArrivalReward(Reward):
    """+1 on success, -1 per newly breaching bird, and -0.001 per bird outside the goal."""

    def terms(self, context: StepContext) -> dict[str, np.ndarray]:
        outside = context.state.count - context.metrics.in_goal.sum(axis=1)
        return {
            "arrival": context.success.astype(np.float64),
            "breach": -1.0 * context.new_breaches,
            "outside": -0.001 * outside,
        }


class NotAnObservation:
    """Has neither space() nor build()."""


class ChaseCentroid(Controller):
    """Flies at the flock centroid, reading only CentroidObservation (fails on any other)."""

    name = "chase-centroid"
    information_level = "observation"

    def act(self, observation, state) -> np.ndarray:
        if np.shape(observation) != (OBS_SIZE,):
            raise ValueError(f"expected CentroidObservation, got shape {np.shape(observation)}")
        return -np.asarray(observation[:2], dtype=np.float64)

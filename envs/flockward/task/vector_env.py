"""The native Gymnasium vector environment: B worlds stepped in one batched call.

Autoreset is next-step (Gymnasium's default): the step after a world's episode ends resets that
world, ignores its action and returns its first observation with reward 0. Each world keeps its own
generator, seeded ``seed + i`` for an integer seed (as Gymnasium's sync vector env does) or from a
list, so world i follows exactly the trajectory of a single DivertEnv reset with the same seed.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt
from gymnasium.utils import seeding
from gymnasium.vector import AutoresetMode, VectorEnv
from gymnasium.vector.utils import batch_space

from flockward.task.batched import DivertTask, action_space, check_actions
from flockward.task.env_config import ConfigOrScenario, EnvConfig
from flockward.task.state import WorldView


def world_seeds(seed: int | list[int | None] | None, worlds: int) -> list[int | None]:
    """Per-world seeds from an int (seed + i), a list (one each) or None (fresh entropy)."""
    if seed is None:
        return [None] * worlds
    if isinstance(seed, int | np.integer):
        return [int(seed) + i for i in range(worlds)]
    seeds = list(seed)
    if len(seeds) != worlds:
        raise ValueError(f"seed list has {len(seeds)} entries; expected one per world ({worlds})")
    return seeds


class DivertVectorEnv(VectorEnv):
    """``flockward/Divert-v2`` batched natively (see DivertEnv for the task and its arguments).

    ``state(i)`` is world i's read-only WorldView. Note that with next-step autoreset a world
    that just ended still shows its final state until the next step resets it.
    """

    metadata = {
        "render_modes": [],
        "render_fps": 20,
        "autoreset_mode": AutoresetMode.NEXT_STEP,
    }

    def __init__(self, num_envs: int = 1, config: ConfigOrScenario = None, **options: Any):
        self.config = EnvConfig.from_options(config, **options)
        if self.config.render_mode is not None:
            raise ValueError("the vector env does not render; render a single DivertEnv instead")
        self.num_envs = int(num_envs)
        self.task = DivertTask(self.config, self.num_envs)
        self.scenario = self.task.scenario
        self.render_mode = None
        self.single_action_space = action_space(self.task.n_drones)
        self.single_observation_space = self.task.observation_space()
        self.action_space = batch_space(self.single_action_space, self.num_envs)
        self.observation_space = batch_space(self.single_observation_space, self.num_envs)
        self._needs_reset = np.zeros(self.num_envs, dtype=np.bool_)
        self._ones = np.ones(self.num_envs, dtype=np.bool_)

    def state(self, index: int) -> WorldView:
        """A read-only snapshot of world ``index`` after the latest reset or step."""
        if not 0 <= index < self.num_envs:
            raise IndexError(f"world {index}: this vector env has worlds 0 to {self.num_envs - 1}")
        return self.task.view(index)

    def reset(
        self,
        *,
        seed: int | list[int | None] | None = None,
        options: dict[str, Any] | None = None,
    ) -> tuple[Any, dict[str, Any]]:
        """Reset every world, or those of ``options["reset_mask"]``; observations of all."""
        seeds = world_seeds(seed, self.num_envs)
        if seed is not None:
            self._np_random, self._np_random_seed = seeding.np_random(seeds[0])
        mask = None if options is None else options.get("reset_mask")
        indices = np.arange(self.num_envs) if mask is None else np.flatnonzero(mask)
        rngs = [seeding.np_random(seeds[i])[0] for i in indices]
        obs = self.task.reset(indices, rngs)
        self._needs_reset[indices] = False
        return obs, self._batched_info(self.task.metrics_info())

    def step(
        self, actions: npt.ArrayLike
    ) -> tuple[Any, np.ndarray, np.ndarray, np.ndarray, dict[str, Any]]:
        """Step every world under ``actions`` (B, 2), or (B, P, 2) with P > 1 drones, resetting
        those that ended last step."""
        actions = check_actions(actions, self.num_envs, self.task.n_drones)
        restarting = self._needs_reset.copy()
        if restarting.any():
            self.task.reset(np.flatnonzero(restarting))
        batch = self.task.step(actions, ~restarting)
        reward = np.where(restarting, 0.0, batch.reward)
        terminated = batch.terminated & ~restarting
        truncated = batch.truncated & ~restarting
        self._needs_reset = terminated | truncated
        return batch.observation, reward, terminated, truncated, self._batched_info(batch.info)

    def _batched_info(self, info: dict[str, Any]) -> dict[str, Any]:
        """Gymnasium's vector info layout: each key's array plus a '_key' presence mask."""
        out: dict[str, Any] = {}
        for key, value in info.items():
            out[key] = value
            out[f"_{key}"] = self._ones
        return out

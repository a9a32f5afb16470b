"""Every environment id flockward registers, in one place.

Bump an id's version when its dynamics, reward or observation change, and say so in the
environment's docstring under "Version history".
"""

from __future__ import annotations

import gymnasium as gym

ENV_IDS = ("flockward/Divert-v0",)


def register_envs() -> None:
    """Register the ids with Gymnasium (idempotent)."""
    if "flockward/Divert-v0" in gym.registry:
        return
    gym.register(
        id="flockward/Divert-v0",
        entry_point="flockward.task.env:DivertEnv",
        vector_entry_point="flockward.task.vector_env:DivertVectorEnv",
        # No TimeLimit wrapper: the environment truncates at its scenario's step limit itself.
        max_episode_steps=None,
    )

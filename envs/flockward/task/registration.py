"""Every environment id flockward registers, in one place.

Bump an id's version when its dynamics, reward or observation change, and say so in the
environment's docstring under "Version history".
"""

from __future__ import annotations

import gymnasium as gym

ENV_ID = "flockward/Divert-v2"  # the herding task
ENV_IDS = (ENV_ID,)


def register_envs() -> None:
    """Register the ids with Gymnasium (idempotent)."""
    if ENV_ID in gym.registry:
        return
    gym.register(
        id=ENV_ID,
        entry_point="flockward.task.env:DivertEnv",
        vector_entry_point="flockward.task.vector_env:DivertVectorEnv",
        # No TimeLimit wrapper: the environment truncates at its scenario's step limit itself.
        max_episode_steps=None,
    )

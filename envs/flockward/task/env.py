"""The single Gymnasium environment: one world of the batched task."""

from __future__ import annotations

from collections import deque
from pathlib import Path
from typing import Any

import gymnasium as gym
import numpy as np

from flockward.config.scenarios import load_scenario
from flockward.sim.types import Scenario
from flockward.task.batched import DivertTask, check_actions

TRACK_LENGTH = 200  # steps of pursuer track kept for rendering


def resolve_scenario(scenario: str | Path | Scenario, overrides=None) -> Scenario:
    """A Scenario from a shipped name, a TOML path or an existing record (with overrides)."""
    if isinstance(scenario, Scenario):
        if overrides:
            raise ValueError("overrides apply to a scenario name or file, not to a Scenario record")
        return scenario
    return load_scenario(scenario, overrides)


def scalar_info(info: dict[str, Any], index: int) -> dict[str, Any]:
    """World ``index``'s entries of a batched info dict, as Python scalars."""
    out: dict[str, Any] = {}
    for key, value in info.items():
        if isinstance(value, dict):
            out[key] = scalar_info(value, index)
        else:
            out[key] = value[index].item()
    return out


class DivertEnv(gym.Env):
    """Divert a bird flock away from protected airspace with a single drone.

    ## Description
    A flock of double-integrator birds (separation, Cucker-Smale alignment, cohesion, attraction to
    its own destination, fear of the pursuer) flies toward its roost, often across an airfield's
    protected zone. The agent commands the drone's acceleration and must herd the flock into the
    goal region without splitting it, colliding with a bird or letting birds into the zone.

    ## Action space
    ``Box(-1, 1, (2,), float32)``: the drone's acceleration as a fraction of its limit (x, y).
    Finite values outside [-1, 1] are clipped per component, then the norm is capped at 1; NaN or
    inf raises ValueError.

    ## Observation space
    ``observation="vector"`` (default): a float32 vector of 14 + 3k entries, k = ``rim_birds``
    (see ``flockward.task.observation.GLOBAL_FIELDS`` and the README's table).
    ``observation="dict"``: ``{"context": that vector, "birds": (max_birds, 4) relative position
    and velocity of every bird, "mask": (max_birds,) 1 for a real bird}``.

    ## Rewards
    A weighted sum of named terms (progress shaping, fragmentation, collision, breach, time,
    success), weights from the scenario's ``[reward]`` table; ``info["reward_terms"]`` holds each.

    ## Starting state
    Drawn from the scenario at every reset: formation, heading, position, count and gains within
    the scenario's ``[randomise]`` ranges.

    ## Episode end
    Terminated on success (``success_fraction`` of the birds inside the goal region) or breach
    (more than ``max_breaching_birds`` distinct birds have entered the protected zone); truncated
    at the scenario's step limit or ``max_episode_steps``.

    ## Arguments
    ``scenario`` (shipped name, TOML path or Scenario), ``overrides`` (dotted config keys, checked
    like the file's), ``observation``, ``rim_birds``, ``max_birds``, ``render_mode``,
    ``neighbour_search`` ("auto", "all-pairs", "grid"), ``max_episode_steps``.

    ## Version history
    v0: first release.

    >>> import gymnasium as gym, flockward
    >>> env = gym.make("flockward/Divert-v0", scenario="headon")
    >>> obs, info = env.reset(seed=0)
    >>> obs.shape
    (26,)
    """

    metadata = {"render_modes": ["human", "rgb_array"], "render_fps": 20}

    def __init__(
        self,
        scenario: str | Path | Scenario = "headon",
        overrides: dict[str, Any] | None = None,
        observation: str = "vector",
        rim_birds: int = 4,
        max_birds: int | None = None,
        render_mode: str | None = None,
        neighbour_search: str = "auto",
        max_episode_steps: int | None = None,
    ):
        if render_mode is not None and render_mode not in self.metadata["render_modes"]:
            allowed = ", ".join(self.metadata["render_modes"])
            raise ValueError(f"render_mode = {render_mode!r}: allowed None, {allowed}")
        self.scenario = resolve_scenario(scenario, overrides)
        self.task = DivertTask(
            self.scenario,
            1,
            observation,
            rim_birds,
            max_birds,
            neighbour_search,
            max_episode_steps,
        )
        self.render_mode = render_mode
        self.action_space = gym.spaces.Box(-1.0, 1.0, (2,), np.float32)
        self.observation_space = self.task.observations.space()
        self._track: deque[np.ndarray] = deque(maxlen=TRACK_LENGTH)
        self._last_info: dict[str, Any] = {}
        self._renderer = None

    def reset(self, *, seed: int | None = None, options: dict[str, Any] | None = None):
        super().reset(seed=seed)
        obs = self.task.reset([0], [self.np_random])
        self._track.clear()
        self._track.append(self.task.state.pursuer_pos[0].copy())
        self._last_info = scalar_info(self.task.metrics_info(), 0)
        return self._one(obs), dict(self._last_info)

    def step(self, action):
        batch = self.task.step(check_actions(action, 1))
        self._track.append(self.task.state.pursuer_pos[0].copy())
        info = scalar_info(batch.info, 0)
        self._last_info = info
        if self.render_mode == "human":
            self.render()
        return (
            self._one(batch.observation),
            float(batch.reward[0]),
            bool(batch.terminated[0]),
            bool(batch.truncated[0]),
            info,
        )

    def render(self):
        if self.render_mode is None:
            gym.logger.warn("render() called without a render_mode; pass render_mode='rgb_array'")
            return None
        from flockward.render import FrameRenderer

        if self._renderer is None:
            self._renderer = FrameRenderer(self.scenario, interactive=self.render_mode == "human")
        frame = self._renderer.draw(self.task.state, 0, np.asarray(self._track), self._last_info)
        return frame if self.render_mode == "rgb_array" else None

    def close(self):
        if self._renderer is not None:
            self._renderer.close()
            self._renderer = None

    @staticmethod
    def _one(obs):
        if isinstance(obs, dict):
            return {key: value[0] for key, value in obs.items()}
        return obs[0]

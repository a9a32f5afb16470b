"""The PettingZoo Parallel face of the task: one agent per drone, all stepped at once.

``DivertParallelEnv`` is a third face over the same ``DivertTask`` as the Gymnasium envs, with no
physics or task logic of its own. Agent ``drone_k`` flies drone k. Its observation is the task's
observation built from drone k's point of view (``flockward.task.drones``: the drone arrays
rolled so that drone k is drone 0), so every observation written for one drone serves each agent
unchanged. With a vector observation (a 1-D Box) and ``teammates`` on (the default for teams),
each agent's vector ends with its teammates, in index order after its own drone and wrapping
round: each one's offset from the agent's drone / the alarm radius (2) and velocity relative to
it / the drone top speed (2), unbounded. Its action is
drone k's (2,) acceleration command in [-1, 1]. A missing agent's action (there are none while
the episode runs) counts as zero.

Reward: ``reward_mode="team"`` (default) gives every agent the team's reward (each reward term's
mean over the drones, the reward of the centralised Gymnasium env); ``"own"`` gives each agent
its own drone's terms (flock terms as the team's, drone terms such as proximity and collision of
its own drone). All agents end together, when the episode ends.

Seeding follows the Gymnasium env: ``reset(seed=s)`` plays exactly the episode of
``DivertEnv.reset(seed=s)`` under the same actions. PettingZoo is an optional dependency
(``pip install 'flockward[multi]'``); the rest of flockward runs without it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import gymnasium as gym
import numpy as np
from gymnasium.utils import seeding

from flockward.task.batched import DivertTask, scalar_info
from flockward.task.env_config import ConfigOrScenario, EnvConfig

if TYPE_CHECKING:
    ParallelBase = object
else:
    try:
        from pettingzoo import ParallelEnv as ParallelBase
    except ImportError:  # checked again when an env is built, with the install hint
        ParallelBase = object

__all__ = ["REWARD_MODES", "DivertParallelEnv", "agent_name"]

REWARD_MODES = ("team", "own")
INSTALL_HINT = "the PettingZoo env needs PettingZoo: pip install 'flockward[multi]'"


def agent_name(k: int) -> str:
    """The agent that flies drone k."""
    return f"drone_{k}"


def _require_pettingzoo() -> None:
    """A one-line ImportError when PettingZoo is not installed."""
    try:
        import pettingzoo  # noqa: F401
    except ImportError:
        raise ImportError(INSTALL_HINT) from None


class DivertParallelEnv(ParallelBase):
    """``flockward/Divert-v2`` with one PettingZoo agent per drone (see the module docstring).

    Arguments: the fields of ``EnvConfig`` (as keywords or one EnvConfig; no ``render_mode``),
    plus ``reward_mode`` ("team" or "own") and ``teammates`` (None: on for a team with a
    vector observation; True needs a vector observation). The scenario's drones (its
    ``[[drones]]``, or one) are the agents.

    >>> from flockward.task.multi_env import DivertParallelEnv
    >>> env = DivertParallelEnv("headon")
    >>> obs, infos = env.reset(seed=0)
    >>> env.agents, obs["drone_0"].shape
    (['drone_0'], (26,))
    """

    metadata = {"name": "flockward_divert_v2", "render_modes": [], "is_parallelizable": True}

    def __init__(
        self,
        config: ConfigOrScenario = None,
        reward_mode: str = "team",
        teammates: bool | None = None,
        **options: Any,
    ) -> None:
        _require_pettingzoo()
        if reward_mode not in REWARD_MODES:
            raise ValueError(f"reward_mode = {reward_mode!r}: allowed {', '.join(REWARD_MODES)}")
        self.config = EnvConfig.from_options(config, **options)
        if self.config.render_mode is not None:
            raise ValueError("the PettingZoo env does not render; render a single DivertEnv")
        self.task = DivertTask(self.config, 1)
        if self.task.n_drones < 1:
            raise ValueError("drones = 0: the PettingZoo env needs at least one drone (agent)")
        self.scenario = self.task.scenario
        self.reward_mode = reward_mode
        self.render_mode = None
        self.possible_agents = [agent_name(k) for k in range(self.task.n_drones)]
        self.agents: list[str] = []
        one = self.task.observation.space()
        vector = isinstance(one, gym.spaces.Box) and len(one.shape) == 1
        if teammates and not vector:
            raise ValueError(
                f"teammates = True: needs a vector (1-D Box) observation, not {one}; "
                "pass teammates=False"
            )
        self.teammates = bool(vector and self.task.multi if teammates is None else teammates)
        if self.teammates and isinstance(one, gym.spaces.Box):
            extra = 4 * (self.task.n_drones - 1)
            low = np.concatenate([np.asarray(one.low), np.full(extra, -np.inf)])
            high = np.concatenate([np.asarray(one.high), np.full(extra, np.inf)])
            one = gym.spaces.Box(low.astype(np.float32), high.astype(np.float32), dtype=np.float32)
        self.observation_spaces = {a: one for a in self.possible_agents}
        command = gym.spaces.Box(-1.0, 1.0, (2,), np.float32)
        self.action_spaces = {a: command for a in self.possible_agents}
        self._rng: np.random.Generator | None = None
        self._observation: Any = None

    def observation_space(self, agent: str) -> gym.spaces.Space[Any]:
        """The observation space of ``agent`` (the same object on every call)."""
        return self.observation_spaces[agent]

    def action_space(self, agent: str) -> gym.spaces.Space[Any]:
        """The action space of ``agent``: its drone's (2,) command (the same object each call)."""
        return self.action_spaces[agent]

    def reset(
        self, seed: int | None = None, options: dict[str, Any] | None = None
    ) -> tuple[dict[str, Any], dict[str, dict[str, Any]]]:
        """Start an episode: each agent's observation, and the flock metrics as every info."""
        if seed is not None or self._rng is None:
            self._rng = seeding.np_random(seed)[0]
        self._observation = self.task.reset([0], [self._rng])
        self.agents = list(self.possible_agents)
        info = scalar_info(self.task.metrics_info(), 0)
        return self._per_agent(self._observation), {a: dict(info) for a in self.agents}

    def step(
        self, actions: dict[str, Any]
    ) -> tuple[
        dict[str, Any],
        dict[str, float],
        dict[str, bool],
        dict[str, bool],
        dict[str, dict[str, Any]],
    ]:
        """Step every drone under its agent's (2,) command; all agents end together."""
        if not self.agents:
            raise RuntimeError("the episode has ended; call reset() first")
        command = np.zeros((1, self.task.n_drones, 2))
        for agent, action in actions.items():
            if agent not in self.agents:
                raise ValueError(f"action for {agent!r}: live agents are {self.agents}")
            a = np.asarray(action, dtype=np.float64)
            if a.shape != (2,) or not np.all(np.isfinite(a)):
                raise ValueError(f"action for {agent!r} = {a.tolist()}: must be 2 finite numbers")
            command[0, self.possible_agents.index(agent)] = a
        batch = self.task.step(command)
        self._observation = batch.observation
        info = scalar_info(batch.info, 0)
        own = info.get("agent_reward")
        team = float(batch.reward[0])
        rewards = {
            a: team if self.reward_mode == "team" or own is None else float(own[k])
            for k, a in enumerate(self.agents)
        }
        ended, cut = bool(batch.terminated[0]), bool(batch.truncated[0])
        observations = self._per_agent(batch.observation)
        infos = {a: self._agent_info(info, k) for k, a in enumerate(self.agents)}
        terminations = {a: ended for a in self.agents}
        truncations = {a: cut for a in self.agents}
        if ended or cut:
            self.agents = []
        return observations, rewards, terminations, truncations, infos

    def state(self) -> np.ndarray:
        """The global state for centralised critics: every agent's observation, flattened
        (float32; vector observations only)."""
        obs = self._observation
        if obs is None or isinstance(obs, dict):
            raise ValueError("state() needs a reset first and a vector (Box) observation")
        return np.asarray(obs[0], dtype=np.float32).ravel()

    def render(self) -> None:
        """Not rendered here: render a single DivertEnv or use ``flockward show``."""
        return None

    def close(self) -> None:
        """Nothing to release."""
        return None

    def _per_agent(self, obs: Any) -> dict[str, Any]:
        """World 0's observation split by agent (stacked (1, P, ...) with P > 1 drones)."""
        if self.teammates:
            return {a: self._with_teammates(obs[0, k], k) for k, a in enumerate(self.agents)}
        if self.task.multi:
            if isinstance(obs, dict):
                return {
                    a: {key: v[0, k] for key, v in obs.items()} for k, a in enumerate(self.agents)
                }
            return {a: obs[0, k] for k, a in enumerate(self.agents)}
        if isinstance(obs, dict):
            return {self.agents[0]: {key: v[0] for key, v in obs.items()}}
        return {self.agents[0]: obs[0]}

    def _with_teammates(self, own: np.ndarray, k: int) -> np.ndarray:
        """Agent k's vector followed by its teammates' relative positions and velocities."""
        s, scales = self.task.state, self.task.setting.scales
        pos = np.roll(s.pursuer_pos[0], -k, axis=0)
        vel = np.roll(s.pursuer_vel[0], -k, axis=0)
        rel = np.concatenate(
            [(pos[1:] - pos[0]) / scales.near, (vel[1:] - vel[0]) / scales.pursuer_speed], axis=1
        )
        return np.concatenate([own, rel.ravel()]).astype(np.float32)

    @staticmethod
    def _agent_info(info: dict[str, Any], k: int) -> dict[str, Any]:
        """The step's info with each per-drone (P,) entry replaced by drone k's value."""
        out: dict[str, Any] = {}
        for key, value in info.items():
            out[key] = value[k].item() if isinstance(value, np.ndarray) else value
        return out

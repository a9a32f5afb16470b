"""Stable-Baselines3 bridge: a VecEnv over the same batched task as the Gymnasium faces.

SB3 expects its own VecEnv protocol: reset returns observations only; step returns four values;
a world whose episode ends is reset within the same step and its last observation is passed in
``info["terminal_observation"]``. ``info["TimeLimit.truncated"]`` marks step-limit ends so SB3
bootstraps their value. Infos are empty dicts except on a world's last step (cheap in the hot
path); that one also carries the episode's ``outcome`` and final flock metrics.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import gymnasium as gym
import numpy as np
from gymnasium.utils import seeding
from stable_baselines3.common.vec_env.base_vec_env import VecEnv, VecEnvIndices

from flockward.bench.suites import Suite
from flockward.sim.types import Scenario
from flockward.task.batched import DivertTask, action_space, check_actions, scalar_info
from flockward.task.env_config import EnvConfig
from flockward.task.outcome import Outcome
from flockward.task.registration import ENV_ID
from flockward_baselines.curriculum import CurriculumSettings, Ladder, family_configs

# SB3's VecEnvObs and VecEnvStepReturn narrowed to what flockward produces: a (B, D) array or a
# dict of batched arrays (never a tuple); the step is (observations, rewards, dones, infos).
BatchObs = np.ndarray | dict[str, np.ndarray]
BatchStep = tuple[BatchObs, np.ndarray, np.ndarray, list[dict[str, Any]]]


def flat_action_space(drones: int) -> gym.spaces.Box:
    """One world's action space as SB3's policies emit it: (2,), or (2P,) for P > 1 drones,
    the (P, 2) command row by row."""
    space = action_space(drones)
    return gym.spaces.Box(-1.0, 1.0, (space.shape[0] * 2,), np.float32) if drones > 1 else space


class FlockwardVecEnv(VecEnv):
    """B worlds of ``flockward/Divert-v2`` as one SB3 VecEnv (no subprocesses needed).

    Attributes and methods reached through get_attr / set_attr / env_method belong to the shared
    batched task, so every index sees the same object: get_attr returns one value per index.

    With P > 1 drones the action space is flat, (2P,) = (x0, y0, x1, y1, ...), the (P, 2) command
    row by row, as SB3's policies emit flat vectors; observations keep the task's (P, ...)
    stacking (SB3's default feature extractor flattens them).
    """

    def __init__(
        self,
        num_envs: int = 16,
        config: EnvConfig | str | Path | Scenario | None = None,
        **options: Any,
    ):
        self.config = EnvConfig.from_options(config, **options)
        if self.config.render_mode is not None:
            raise ValueError("the SB3 adapter does not render; render a single DivertEnv instead")
        self.task = DivertTask(self.config, int(num_envs))
        self.scenario = self.task.scenario
        self.render_mode = None
        drones = self.task.n_drones
        super().__init__(int(num_envs), self.task.observation_space(), flat_action_space(drones))
        # (worlds, drones, 2), as check_actions
        self._actions = np.zeros((self.num_envs, max(drones, 1), 2))
        self._generators: list[np.random.Generator] | None = None
        # control steps of dt played by all worlds so far: each step holds the actions for
        # decision_steps of them, fewer where an episode ends within the hold
        self.simulator_steps = 0

    def reset(self) -> BatchObs:
        """Reset every world (from the seeds set by ``seed``, if any) and observe them."""
        if self._generators is None or any(s is not None for s in self._seeds):
            self._generators = [seeding.np_random(s)[0] for s in self._seeds]
        obs: BatchObs = self.task.reset(np.arange(self.num_envs), self._generators)
        self._reset_seeds()
        self._reset_options()
        return obs

    def step_async(self, actions: np.ndarray) -> None:
        """Check and keep the (B, 2) actions ((B, 2P) with P > 1 drones) for ``step_wait``."""
        self._actions = check_actions(actions, self.num_envs, self.task.n_drones)

    def step_wait(self) -> BatchStep:
        """Step every world; a finished world is reset and its last observation kept in info."""
        batch = self.task.step(self._actions)
        self.simulator_steps += int(batch.info["held_steps"].sum())
        dones = batch.terminated | batch.truncated
        infos: list[dict[str, Any]] = [{} for _ in range(self.num_envs)]
        obs: BatchObs = batch.observation
        finished = np.flatnonzero(dones)
        if finished.size:
            for i in finished:
                info = scalar_info(batch.info, int(i))
                info["terminal_observation"] = _row(obs, int(i))
                info["TimeLimit.truncated"] = bool(batch.truncated[i] and not batch.terminated[i])
                infos[i] = info
            fresh = self.task.reset(finished)
            obs = _merge(obs, fresh, finished)
        return obs, batch.reward.astype(np.float32), dones, infos

    def close(self) -> None:
        """Nothing to release: no subprocesses, no windows."""
        return None

    def get_attr(self, attr_name: str, indices: VecEnvIndices = None) -> list[Any]:
        """The adapter's own attribute (render_mode, scenario) or else the shared task's."""
        owner = self if attr_name in vars(self) else self.task
        value = getattr(owner, attr_name)
        return [value for _ in self._get_indices(indices)]

    def set_attr(self, attr_name: str, value: Any, indices: VecEnvIndices = None) -> None:
        """Set an attribute of the shared task (so of every index)."""
        setattr(self.task, attr_name, value)

    def env_method(
        self,
        method_name: str,
        *method_args: Any,
        indices: VecEnvIndices = None,
        **method_kwargs: Any,
    ) -> list[Any]:
        """Call a method of the shared task once per index."""
        method = getattr(self.task, method_name)
        return [method(*method_args, **method_kwargs) for _ in self._get_indices(indices)]

    def env_is_wrapped(
        self, wrapper_class: type[gym.Wrapper], indices: VecEnvIndices = None
    ) -> list[bool]:
        """False for every index: the worlds are not Gymnasium envs, so nothing wraps them."""
        return [False for _ in self._get_indices(indices)]


class MixedVecEnv(VecEnv):
    """Several adapters (one scenario each, same spaces) stepped as one VecEnv: a training mix."""

    def __init__(self, parts: list[FlockwardVecEnv]):
        first = parts[0]
        for part in parts[1:]:
            if part.observation_space != first.observation_space:
                raise ValueError(
                    f"scenario {part.scenario.name!r} observes {part.observation_space}, "
                    f"{first.scenario.name!r} observes {first.observation_space}: a mix needs "
                    "one observation space (same observation mode and rim_birds)"
                )
        self.parts = parts
        self.render_mode = None
        self._bounds = np.cumsum([0] + [p.num_envs for p in parts])
        super().__init__(int(self._bounds[-1]), first.observation_space, first.action_space)

    @property
    def simulator_steps(self) -> int:
        """Control steps of dt played by all worlds of all parts so far."""
        return sum(part.simulator_steps for part in self.parts)

    def reset(self) -> BatchObs:
        """Reset every part; observations in part order."""
        return _concat([part.reset() for part in self.parts])

    def step_async(self, actions: np.ndarray) -> None:
        """Hand each part its slice of the actions."""
        for part, lo, hi in zip(self.parts, self._bounds[:-1], self._bounds[1:], strict=True):
            part.step_async(actions[lo:hi])

    def step_wait(self) -> BatchStep:
        """Step every part; results joined in part order."""
        results = [part.step_wait() for part in self.parts]
        obs = _concat([r[0] for r in results])
        rewards = np.concatenate([r[1] for r in results])
        dones = np.concatenate([r[2] for r in results])
        infos = [info for r in results for info in r[3]]
        return obs, rewards, dones, infos

    def seed(self, seed: int | None = None) -> Sequence[int | None]:
        """Seed world i of the mix with ``seed + i``, as a single adapter of that size would."""
        out: list[int | None] = []
        for part, lo in zip(self.parts, self._bounds[:-1], strict=True):
            out += part.seed(None if seed is None else seed + int(lo))
        return out

    def close(self) -> None:
        """Close every part."""
        for part in self.parts:
            part.close()

    def get_attr(self, attr_name: str, indices: VecEnvIndices = None) -> list[Any]:
        """The mix's own attribute, or else that of the part holding each index."""
        if attr_name in vars(self):
            return [getattr(self, attr_name) for _ in self._get_indices(indices)]
        return [self._part(i).get_attr(attr_name, [0])[0] for i in self._get_indices(indices)]

    def set_attr(self, attr_name: str, value: Any, indices: VecEnvIndices = None) -> None:
        """Set an attribute of the task of the part holding each index."""
        for i in self._get_indices(indices):
            setattr(self._part(i).task, attr_name, value)

    def env_method(
        self,
        method_name: str,
        *method_args: Any,
        indices: VecEnvIndices = None,
        **method_kwargs: Any,
    ) -> list[Any]:
        """Call a method of the task of the part holding each index."""
        return [
            getattr(self._part(i).task, method_name)(*method_args, **method_kwargs)
            for i in self._get_indices(indices)
        ]

    def env_is_wrapped(
        self, wrapper_class: type[gym.Wrapper], indices: VecEnvIndices = None
    ) -> list[bool]:
        """False for every index, as for a single adapter."""
        return [False for _ in self._get_indices(indices)]

    def _part(self, index: int) -> FlockwardVecEnv:
        """The part that holds world ``index`` of the mix."""
        return self.parts[int(np.searchsorted(self._bounds, index, side="right")) - 1]


class CurriculumVecEnv(VecEnv):
    """``num_envs`` worlds climbing the tiers of a suite (``flockward_baselines.curriculum``).

    Every family of the suite is one batched task holding a world per slot; a decision steps
    each task that holds live slots, the others masked out, so the physics stays batched. World
    ``i`` of family ``f`` draws from a generator seeded (seed, f, i), the curriculum's draws from
    their own; so the same seed gives the same training stream. Infos of a world's last step
    also carry its ``family``.
    """

    def __init__(
        self,
        suite: Suite,
        settings: CurriculumSettings,
        num_envs: int,
        seed: int,
        env_options: dict[str, Any],
        overrides: dict[str, Any],
    ):
        self.suite = suite
        self.settings = settings
        self.render_mode = None
        configs = family_configs(suite, env_options, overrides)
        self.tasks = [DivertTask(config, num_envs) for config in configs]
        names = [entry.family for entry in suite.entries]
        first = self.tasks[0]
        for task, family in zip(self.tasks[1:], names[1:], strict=True):
            if task.observation_space() != first.observation_space():
                raise ValueError(
                    f"curriculum suite {suite.name!r}: family {family!r} observes "
                    f"{task.observation_space()}, {names[0]!r} observes "
                    f"{first.observation_space()}; a curriculum needs one observation space"
                )
            if task.n_drones != first.n_drones:
                raise ValueError(
                    f"curriculum suite {suite.name!r}: family {family!r} flies {task.n_drones} "
                    f"drone(s), {names[0]!r} {first.n_drones}; a curriculum needs one count"
                )
        space = first.observation_space()
        if not isinstance(space, gym.spaces.Box):
            raise ValueError("a curriculum needs the vector observation (a Box space)")
        super().__init__(int(num_envs), space, flat_action_space(first.n_drones))
        self._seed = int(seed)
        self._actions = np.zeros((self.num_envs, max(first.n_drones, 1), 2))
        self.simulator_steps = 0
        self._resumed_at = 0  # decisions at the checkpoint a resumed run started from
        self._resume_state: list[dict[str, Any]] | None = None
        self.ladder = Ladder(suite, settings, self.num_envs, self._seed)

    def resume(self, ladder_state: list[dict[str, Any]], decisions: int) -> None:
        """Continue a run from a checkpoint taken after ``decisions``: the next reset puts the
        slots back on their saved tiers (``Ladder.state``), and the worlds and the curriculum
        draw streams of their own, salted by ``decisions``, instead of the start's again."""
        self._resume_state = ladder_state
        self._resumed_at = int(decisions)

    def _start(self, index: int) -> np.ndarray:
        """Begin slot ``index``'s episode in its ladder family; return its observation."""
        obs = self.tasks[self.ladder.slots[index].family].reset([index])
        row: np.ndarray = np.asarray(obs)[index].copy()
        return row

    def reset(self) -> np.ndarray:
        """Every slot back to the start of the ladder (or, after ``resume``, to its saved tier),
        every world seeded afresh."""
        salt = [self._resumed_at] if self._resumed_at else []
        self.ladder = Ladder(self.suite, self.settings, self.num_envs, self._seed, self._resumed_at)
        if self._resume_state is not None:
            self.ladder.restore(self._resume_state)
            self._resume_state = None
        for f, task in enumerate(self.tasks):
            task.world.rngs[:] = [
                np.random.default_rng([self._seed, f, i, *salt]) for i in range(self.num_envs)
            ]
        return np.stack([self._start(i) for i in range(self.num_envs)])

    def step_async(self, actions: np.ndarray) -> None:
        """Check and keep the actions for ``step_wait``."""
        self._actions = check_actions(actions, self.num_envs, self.tasks[0].n_drones)

    def step_wait(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[dict[str, Any]]]:
        """Step each family's task for its live slots; finished slots move on along the ladder."""
        n = self.num_envs
        space = self.observation_space
        obs = np.zeros((n, *(space.shape or ())), dtype=space.dtype)
        rewards = np.zeros(n, dtype=np.float32)
        dones = np.zeros(n, dtype=np.bool_)
        infos: list[dict[str, Any]] = [{} for _ in range(n)]
        families = np.array([slot.family for slot in self.ladder.slots])
        for f in np.unique(families):
            live = families == f
            batch = self.tasks[f].step(self._actions, live)
            self.simulator_steps += int(batch.info["held_steps"][live].sum())
            obs[live] = np.asarray(batch.observation)[live]
            rewards[live] = batch.reward[live]
            ended = (batch.terminated | batch.truncated) & live
            dones |= ended
            for i in np.flatnonzero(ended):
                info = scalar_info(batch.info, int(i))
                info["terminal_observation"] = obs[i].copy()
                info["TimeLimit.truncated"] = bool(batch.truncated[i] and not batch.terminated[i])
                info["family"] = self.suite.entries[f].family
                infos[i] = info
        for i in np.flatnonzero(dones):
            self.ladder.finish(int(i), infos[i]["outcome"] == Outcome.SUCCESS)
            obs[i] = self._start(int(i))
        return obs, rewards, dones, infos

    def seed(self, seed: int | None = None) -> Sequence[int | None]:
        """Seed the worlds and the curriculum's draws (applied at the next reset)."""
        if seed is not None:
            self._seed = int(seed)
        return [self._seed] * self.num_envs

    def close(self) -> None:
        """Nothing to release: no subprocesses, no windows."""
        return None

    def get_attr(self, attr_name: str, indices: VecEnvIndices = None) -> list[Any]:
        """An attribute of the adapter, once per index."""
        value = getattr(self, attr_name)
        return [value for _ in self._get_indices(indices)]

    def set_attr(self, attr_name: str, value: Any, indices: VecEnvIndices = None) -> None:
        """Set an attribute of the adapter."""
        setattr(self, attr_name, value)

    def env_method(
        self,
        method_name: str,
        *method_args: Any,
        indices: VecEnvIndices = None,
        **method_kwargs: Any,
    ) -> list[Any]:
        """Call a method of the adapter once per index."""
        method = getattr(self, method_name)
        return [method(*method_args, **method_kwargs) for _ in self._get_indices(indices)]

    def env_is_wrapped(
        self, wrapper_class: type[gym.Wrapper], indices: VecEnvIndices = None
    ) -> list[bool]:
        """False for every index: the worlds are not Gymnasium envs, so nothing wraps them."""
        return [False for _ in self._get_indices(indices)]


def _concat(batches: Sequence[BatchObs]) -> BatchObs:
    """Batches of the parts joined along the world axis (a mix observes alike, checked)."""
    first = batches[0]
    if isinstance(first, dict):
        return {key: np.concatenate([b[key] for b in batches]) for key in first}
    return np.concatenate([np.asarray(b) for b in batches])


def _row(obs: BatchObs, i: int) -> BatchObs:
    """World ``i``'s observation, copied out of the batch."""
    if isinstance(obs, dict):
        return {key: value[i].copy() for key, value in obs.items()}
    row: np.ndarray = obs[i].copy()
    return row


def _merge(obs: BatchObs, fresh: BatchObs, rows: np.ndarray) -> BatchObs:
    """``obs`` with the given rows taken from ``fresh`` (both batched alike)."""
    if isinstance(obs, dict) and isinstance(fresh, dict):
        return {key: _merge_array(obs[key], fresh[key], rows) for key in obs}
    if isinstance(obs, np.ndarray) and isinstance(fresh, np.ndarray):
        return _merge_array(obs, fresh, rows)
    raise TypeError(
        f"observation batches of different forms: {type(obs).__name__}, {type(fresh).__name__}"
    )


def _merge_array(obs: np.ndarray, fresh: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """A copy of ``obs`` with the given rows taken from ``fresh``."""
    out = obs.copy()
    out[rows] = fresh[rows]
    return out


def make_vec_env(
    env_id: str = ENV_ID, num_envs: int = 16, seed: int | None = 0, **env_kwargs: Any
) -> FlockwardVecEnv:
    """An SB3 VecEnv of ``num_envs`` worlds; world i is seeded ``seed + i`` at the first reset.

    ``env_kwargs`` are the fields of flockward.task.env_config.EnvConfig (scenario, overrides,
    observation, reward, ...), or ``config=`` one EnvConfig.
    """
    if env_id != ENV_ID:
        raise ValueError(f"env_id = {env_id!r}: flockward registers only {ENV_ID!r}")
    env = FlockwardVecEnv(num_envs, **env_kwargs)
    env.seed(seed)
    return env

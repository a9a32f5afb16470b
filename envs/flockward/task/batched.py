"""The herding task over B worlds: what ends an episode, what it is rewarded, what is observed.

The single environment, the native vector environment and the Stable-Baselines3 adapter are thin
faces over this one class; none of them holds physics or task logic of its own.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import gymnasium as gym
import numpy as np
import numpy.typing as npt

from flockward.sim.geometry import site_zone_arrays, zone_arrays, zone_center
from flockward.sim.metrics import StepMetrics, step_metrics
from flockward.sim.sensing import Sensor
from flockward.sim.types import Scenario, WorldState
from flockward.sim.world import World
from flockward.task.context import Scales, SensedView, StepContext, TaskSetting
from flockward.task.env_config import EnvConfig
from flockward.task.outcome import Outcome
from flockward.task.reward import total
from flockward.task.state import WorldView


def action_space() -> gym.spaces.Box:
    """The action space of one world: the drone's acceleration as a fraction of its limit."""
    return gym.spaces.Box(-1.0, 1.0, (2,), np.float32)


@dataclass
class StepBatch:
    """One step of every world. Entries of worlds that were not stepped are meaningless."""

    observation: Any  # (B, D) float32, or a dict of batched arrays
    reward: np.ndarray  # (B,) float64
    terminated: np.ndarray  # (B,) bool: success or breach
    truncated: np.ndarray  # (B,) bool: step limit
    info: dict[str, Any]  # batched arrays, see DivertTask.step


class DivertTask:
    """Batched episodes of one scenario, each world with its own generator and bookkeeping.

    ``config`` holds the environment's arguments (see EnvConfig); the task takes its own copies
    of the observation and reward objects.
    """

    def __init__(self, config: EnvConfig, worlds: int = 1):
        self.config = config
        scenario = config.load_scenario()
        config.check_scenario(scenario)
        if config.decision_steps is not None:
            scenario = with_decision_steps(scenario, config.decision_steps)
        self.scenario = scenario
        self.n_worlds = worlds
        self.world = World(scenario, worlds, config.neighbour_search, drones=config.drones)
        # What observations see of the birds; None: the truth (the perfect sensor, the default).
        self.sensor = (
            None
            if scenario.sensor.perfect
            else Sensor(scenario.sensor, worlds, self.world.max_birds, scenario.episode.dt)
        )
        self.setting = TaskSetting(
            scenario=scenario,
            worlds=worlds,
            protected_arr=site_zone_arrays(scenario.site.protected),
            goal_arr=zone_arrays(scenario.site.goal),
            goal_center=zone_center(scenario.site.goal),
            scales=Scales.of(scenario),
            rim_birds=config.rim_birds,
            max_birds=scenario.max_birds if config.max_birds is None else config.max_birds,
        )
        self.observation = config.make_observation()
        self.reward = config.make_reward()
        for part in (self.observation, self.reward):
            setup = getattr(part, "setup", None)
            if callable(setup):
                setup(self.setting)
        steps = config.max_episode_steps
        self.max_steps = scenario.episode.max_steps if steps is None else int(steps)
        self.link_radius = scenario.flock.linking_radius
        self.ever_inside = np.zeros((worlds, self.world.max_birds), dtype=np.bool_)
        self.metrics: StepMetrics | None = None
        self._all = np.ones(worlds, dtype=np.bool_)
        self._none = np.zeros(worlds, dtype=np.bool_)

    @property
    def state(self) -> WorldState:
        """The batched world state (live arrays: read, never write)."""
        return self.world.state

    def view(self, index: int) -> WorldView:
        """A read-only copy of world ``index``'s bird and drone state."""
        return WorldView.of(self.world.state, index)

    def observation_space(self) -> gym.spaces.Space[Any]:
        """The observation space of one world."""
        return self.observation.space()

    def measure(self, state: WorldState | None = None) -> StepMetrics:
        """Flock metrics of every world in ``state`` (default: the current true state), in one
        compiled call."""
        s = self.world.state if state is None else state
        return step_metrics(
            s.bird_pos,
            s.bird_vel,
            s.count,
            s.pursuer_pos,
            self.link_radius,
            self.setting.protected_arr,
            self.setting.goal_arr,
        )

    def reset(
        self, indices: npt.ArrayLike, rngs: Sequence[np.random.Generator] | None = None
    ) -> Any:
        """Reset the given worlds (each from its rng, or its own generator) and observe all."""
        indices = np.atleast_1d(np.asarray(indices, dtype=np.int64))
        for k, index in enumerate(indices):
            self.world.reset(int(index), None if rngs is None else rngs[k])
            self.ever_inside[index] = False
            if self.sensor is not None:
                self.sensor.reset(int(index), self.world.rngs[index], self.world.state)
        self.metrics = self.measure()
        self.ever_inside[indices] |= self.metrics.in_protected[indices]
        none = self._none
        context = StepContext(
            setting=self.setting,
            state=self.world.state,
            before=None,
            metrics=self.metrics,
            live=none,
            terminated=none,
            success=none,
            failure=none,
            truncated=none,
            new_breaches=np.zeros(self.n_worlds, dtype=np.int64),
            collided=none,
            sensed=self.sensed(),
        )
        for part in (self.reward, self.observation):
            hook = getattr(part, "reset", None)
            if callable(hook):
                hook(context, indices)
        return self.observation.build(context)

    def sensed(self) -> SensedView | None:
        """The sensor's current picture of every world, with its flock metrics; None with the
        perfect sensor (observations then read the truth)."""
        if self.sensor is None:
            return None
        state, slots = self.sensor.picture(self.world.state)
        age = self.sensor.age(self.world.steps)
        return SensedView(self.scenario.sensor, state, self.measure(state), slots, age)

    def metrics_info(self) -> dict[str, np.ndarray]:
        """The latest flock metrics that a reset reports in its info."""
        m = self.metrics
        if m is None:
            raise RuntimeError("the task has no metrics before its first reset")
        return {
            "n_components": m.n_components,
            "largest_fraction": m.largest_fraction,
            "diameter": m.diameter,
            "goal_distance": m.goal_distance,
        }

    @property
    def decision_steps(self) -> int:
        """Control steps one action is held (the scenario's, or the env argument's)."""
        return self.scenario.episode.decision_steps

    def step(self, action: np.ndarray, live: np.ndarray | None = None) -> StepBatch:
        """Hold ``action`` (B, P, 2) finite for ``decision_steps`` control steps of the live
        worlds; return the batch's outcome.

        A world whose episode ends within the hold stops there: its reward and each term are
        sums over the control steps it played, its info is that of its last control step.
        info holds per-world arrays: ``reward_terms`` (a dict of the named terms), ``outcome``,
        and the flock metrics ``n_components``, ``largest_fraction``, ``diameter``,
        ``polarisation``, ``nearest_distance``, ``birds_inside``, ``breached_birds``,
        ``birds_in_goal``, ``goal_distance``, ``collision`` (after the last control step),
        ``collision_steps`` (control steps of this hold with a collision), ``held_steps``
        (control steps played in this hold), ``steps`` (control steps since reset).

        In worlds without a drone the (B, 1, 2) action of the one-drone faces is ignored.
        """
        if self.world.n_drones == 0:
            action = np.zeros((self.n_worlds, 0, 2))
        stepped = self._all if live is None else np.asarray(live, dtype=np.bool_)
        active = stepped.copy()
        reward = np.zeros(self.n_worlds)
        terms: dict[str, np.ndarray] = {}
        info: dict[str, Any] = {}
        terminated = np.zeros(self.n_worlds, dtype=np.bool_)
        truncated = np.zeros(self.n_worlds, dtype=np.bool_)
        held = np.zeros(self.n_worlds, dtype=np.int64)
        collisions = np.zeros(self.n_worlds, dtype=np.int64)
        context: StepContext | None = None
        for hold_step in range(self.decision_steps):
            # The first control step runs even with no live world (all restarting after an
            # autoreset), so that every batch has its metrics and info.
            if hold_step and not active.any():
                break
            context, step_terms, step_info = self._control_step(action, active, hold_step)
            # Summed in the order a caller repeating the action by hand would sum them.
            reward = reward + np.where(active, total(step_terms, self.n_worlds), 0.0)
            for name, value in step_terms.items():
                terms[name] = terms.get(name, np.zeros(self.n_worlds)) + np.where(
                    active, value, 0.0
                )
            for key, value in step_info.items():
                info[key] = value if key not in info else np.where(active, value, info[key])
            terminated = np.where(active, context.terminated, terminated)
            truncated = np.where(active, context.truncated, truncated)
            held += active
            collisions += active & context.collided
            active = active & ~(context.terminated | context.truncated)
        if context is None:  # decision_steps >= 1, so the loop ran
            raise RuntimeError("no control step was played")
        info = {"reward_terms": terms, **info, "collision_steps": collisions, "held_steps": held}
        success = info["outcome"] == Outcome.SUCCESS
        context = replace(
            context,
            live=stepped,
            terminated=terminated,
            success=success,
            failure=info["outcome"] == Outcome.BREACH,
            truncated=truncated,
            collided=info["collision"],
            sensed=self.sensed(),
        )
        observation = self.observation.build(context)
        return StepBatch(observation, reward, terminated, truncated, info)

    def _control_step(
        self, action: np.ndarray, live: np.ndarray, hold_step: int
    ) -> tuple[StepContext, dict[str, np.ndarray], dict[str, Any]]:
        """Advance the live worlds by one control step: its context, reward terms and info."""
        self.world.step(action, live)
        if self.sensor is not None:
            self.sensor.step(self.world.state, self.world.steps, live)
        before = self.metrics
        m = self.measure()
        self.metrics = m
        new_breaches = (m.in_protected & ~self.ever_inside).sum(axis=1)
        self.ever_inside |= m.in_protected
        ep = self.scenario.episode
        n = self.world.state.count
        inside = m.in_protected.sum(axis=1)
        in_goal = m.in_goal.sum(axis=1)
        breached = self.ever_inside.sum(axis=1)
        success = in_goal >= ep.success_fraction * n
        failure = (breached > ep.max_breaching_birds) & ~success
        terminated = success | failure
        truncated = (self.world.steps >= self.max_steps) & ~terminated
        collided = m.nearest_distance < self.scenario.pursuer.safety_radius
        context = StepContext(
            setting=self.setting,
            state=self.world.state,
            before=before,
            metrics=m,
            live=live,
            terminated=terminated,
            success=success,
            failure=failure,
            truncated=truncated,
            new_breaches=new_breaches,
            collided=collided,
            hold_step=hold_step,
        )
        terms = self.reward.terms(context)
        outcome = np.where(
            success,
            Outcome.SUCCESS,
            np.where(
                failure, Outcome.BREACH, np.where(truncated, Outcome.TIMEOUT, Outcome.RUNNING)
            ),
        )
        info = {
            "outcome": outcome,
            "n_components": m.n_components,
            "largest_fraction": m.largest_fraction,
            "diameter": m.diameter,
            "polarisation": m.polarisation,
            "nearest_distance": m.nearest_distance,
            "birds_inside": inside,
            "breached_birds": breached,
            "birds_in_goal": in_goal,
            "goal_distance": m.goal_distance,
            "collision": collided,
            "steps": self.world.steps.copy(),
        }
        return context, terms, info


def with_decision_steps(scenario: Scenario, steps: int) -> Scenario:
    """The scenario with its actions held for ``steps`` control steps (checked like a key)."""
    if steps == scenario.episode.decision_steps:
        return scenario
    try:
        return replace(scenario, episode=replace(scenario.episode, decision_steps=steps))
    except ValueError as error:
        raise ValueError(f"decision_steps = {steps}: {error}") from None


def check_actions(action: npt.ArrayLike, worlds: int) -> np.ndarray:
    """Actions as a (worlds, 1, 2) float64 array (one drone per world); NaN, inf or a wrong shape
    raise ValueError.

    Finite values outside [-1, 1] are accepted: the kernel clips each component to [-1, 1] and
    then caps the command's norm at 1.
    """
    a = np.asarray(action, dtype=np.float64)
    if a.size != worlds * 2:
        raise ValueError(
            f"action has shape {np.shape(action)}; expected {(2,) if worlds == 1 else (worlds, 2)}"
            " (normalised pursuer acceleration, x and y)"
        )
    a = a.reshape(worlds, 1, 2)
    if not np.all(np.isfinite(a)):
        raise ValueError(f"action contains NaN or inf: {np.asarray(action).tolist()}")
    return a


def scalar_info(info: dict[str, Any], index: int) -> dict[str, Any]:
    """World ``index``'s entries of a batched info dict, as Python scalars."""
    out: dict[str, Any] = {}
    for key, value in info.items():
        if isinstance(value, dict):
            out[key] = scalar_info(value, index)
        else:
            out[key] = value[index].item()
    return out

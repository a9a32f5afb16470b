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
from flockward.sim.metrics import (
    StepMetrics,
    drone_conflicts,
    nearest_per_drone,
    step_metrics,
)
from flockward.sim.sensing import Sensor
from flockward.sim.types import Scenario, WorldState
from flockward.sim.world import World
from flockward.task.context import Scales, SensedView, StepContext, TaskSetting
from flockward.task.drones import drone_context, stack_observations, stacked_space, team_terms
from flockward.task.env_config import EnvConfig
from flockward.task.outcome import Outcome
from flockward.task.reward import total
from flockward.task.state import WorldView


def action_space(drones: int = 1) -> gym.spaces.Box:
    """The action space of one world: each drone's acceleration as a fraction of its limit,
    (2,) for one drone (or none), (P, 2) for P > 1."""
    shape = (2,) if drones <= 1 else (drones, 2)
    return gym.spaces.Box(-1.0, 1.0, shape, np.float32)


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

    With P > 1 drones (a scenario's ``[[drones]]``) the task keeps one observation and one reward
    object per drone, each fed the context from its drone's point of view (``task.drones``):
    observations come stacked (B, P, ...), the reward is the team's (each term's mean over the
    drones) and ``info["agent_reward"]`` (B, P) holds each drone's own. A contact is a drone
    inside its safety radius of a bird or two drones closer than the sum of their safety radii
    (a conflict, also counted apart in ``conflict``).
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
        self.n_drones = self.world.n_drones
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
        # One observation and reward object per drone (one in all with one drone or none).
        views = max(self.n_drones, 1)
        self.observations = [config.make_observation() for _ in range(views)]
        self.rewards = [config.make_reward() for _ in range(views)]
        self.observation = self.observations[0]
        self.reward = self.rewards[0]
        for part in (*self.observations, *self.rewards):
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

    @property
    def multi(self) -> bool:
        """Whether the worlds fly more than one drone (stacked observations, team reward)."""
        return self.n_drones > 1

    def observation_space(self) -> gym.spaces.Space[Any]:
        """The observation space of one world: one drone's, stacked (P, ...) for P > 1."""
        space = self.observation.space()
        return stacked_space(space, self.n_drones) if self.multi else space

    def _observe(self, context: StepContext, views: list[StepContext]) -> Any:
        """Every world's observation: the one drone's, or each drone's stacked (B, P, ...)."""
        if not self.multi:
            return self.observation.build(context)
        return stack_observations(
            [o.build(v) for o, v in zip(self.observations, views, strict=True)]
        )

    def _views(self, context: StepContext, collided: np.ndarray | None) -> list[StepContext]:
        """The context from each drone's point of view (only ``context`` itself with one)."""
        if not self.multi:
            return [context]
        own = np.zeros((self.n_worlds, self.n_drones), bool) if collided is None else collided
        return [drone_context(context, k, own[:, k]) for k in range(self.n_drones)]

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
        views = self._views(context, None)
        for parts in (self.rewards, self.observations):
            for part, view in zip(parts, views, strict=True):
                hook = getattr(part, "reset", None)
                if callable(hook):
                    hook(view, indices)
        return self._observe(context, views)

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
        conflicts = np.zeros(self.n_worlds, dtype=np.int64)
        agent_reward = np.zeros((self.n_worlds, max(self.n_drones, 1)))
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
            if "agent_reward" in step_info:  # summed over the hold, like the team's reward
                agent = step_info.pop("agent_reward")
                agent_reward = agent_reward + np.where(active[:, None], agent, 0.0)
                conflicts += active & step_info["conflict"]
            for key, value in step_info.items():
                info[key] = value if key not in info else _where(active, value, info[key])
            terminated = np.where(active, context.terminated, terminated)
            truncated = np.where(active, context.truncated, truncated)
            held += active
            collisions += active & context.collided
            active = active & ~(context.terminated | context.truncated)
        if context is None:  # decision_steps >= 1, so the loop ran
            raise RuntimeError("no control step was played")
        info = {"reward_terms": terms, **info, "collision_steps": collisions, "held_steps": held}
        if self.multi:
            info.update(agent_reward=agent_reward, conflict_steps=conflicts)
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
        observation = self._observe(context, self._views(context, info.get("drone_contact")))
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
        extra: dict[str, np.ndarray] = {}
        if self.multi:
            s = self.world.state
            nearest = nearest_per_drone(s.bird_pos, s.count, s.pursuer_pos)  # (B, P) m
            conflicted, separation = drone_conflicts(s.pursuer_pos, self.world.safety_radii)
            own = (nearest < self.world.safety_radii) | conflicted  # (B, P) each drone's contact
            collided = own.any(axis=1)
            extra = {
                "conflict": np.asarray(conflicted.any(axis=1)),
                "drone_separation": separation,
                "drone_nearest": nearest,
                "drone_contact": own,
            }
        else:
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
        if self.multi:
            per_drone = [
                r.terms(v)
                for r, v in zip(
                    self.rewards, self._views(context, extra["drone_contact"]), strict=True
                )
            ]
            terms = team_terms(per_drone)
            extra["agent_reward"] = np.stack([total(t, self.n_worlds) for t in per_drone], axis=1)
        else:
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
            **extra,
        }
        return context, terms, info


def _where(active: np.ndarray, new: np.ndarray, old: np.ndarray) -> np.ndarray:
    """``new`` in the active worlds, ``old`` elsewhere; per-drone (B, P) arrays too."""
    mask = active.reshape(active.shape + (1,) * (np.ndim(new) - 1))
    return np.where(mask, new, old)


def with_decision_steps(scenario: Scenario, steps: int) -> Scenario:
    """The scenario with its actions held for ``steps`` control steps (checked like a key)."""
    if steps == scenario.episode.decision_steps:
        return scenario
    try:
        return replace(scenario, episode=replace(scenario.episode, decision_steps=steps))
    except ValueError as error:
        raise ValueError(f"decision_steps = {steps}: {error}") from None


def check_actions(action: npt.ArrayLike, worlds: int, drones: int = 1) -> np.ndarray:
    """Actions as a (worlds, P, 2) float64 array (P = 1 for one drone or none); NaN, inf or a
    wrong shape raise ValueError.

    One world takes (2,) with one drone and (P, 2) with P > 1; a vector env takes (worlds, 2)
    or (worlds, P, 2). Finite values outside [-1, 1] are accepted: the kernel clips each
    component to [-1, 1] and then caps the command's norm at 1.
    """
    a = np.asarray(action, dtype=np.float64)
    p = max(drones, 1)
    if a.size != worlds * p * 2:
        one = (2,) if p == 1 else (p, 2)
        raise ValueError(
            f"action has shape {np.shape(action)}; "
            f"expected {one if worlds == 1 else (worlds, *one)}"
            " (normalised pursuer acceleration, x and y" + (", per drone)" if p > 1 else ")")
        )
    a = a.reshape(worlds, p, 2)
    if not np.all(np.isfinite(a)):
        raise ValueError(f"action contains NaN or inf: {np.asarray(action).tolist()}")
    return a


def scalar_info(info: dict[str, Any], index: int) -> dict[str, Any]:
    """World ``index``'s entries of a batched info dict, as Python scalars (per-drone entries
    as (P,) arrays)."""
    out: dict[str, Any] = {}
    for key, value in info.items():
        if isinstance(value, dict):
            out[key] = scalar_info(value, index)
        elif np.ndim(value) > 1:
            out[key] = np.array(value[index])
        else:
            out[key] = value[index].item()
    return out

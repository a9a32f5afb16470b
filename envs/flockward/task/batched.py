"""The herding task over B worlds: what ends an episode, what it is rewarded, what is observed.

The single environment, the native vector environment and the Stable-Baselines3 adapter are thin
faces over this one class; none of them holds physics or task logic of its own.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from flockward.sim.geometry import zone_arrays
from flockward.sim.metrics import StepMetrics, step_metrics
from flockward.sim.types import Scenario
from flockward.sim.world import World
from flockward.task import reward as rewards
from flockward.task.observation import ObservationBuilder

# Why an episode ended, as reported in info["outcome"].
RUNNING, SUCCESS, BREACH, TIMEOUT = "running", "success", "breach", "timeout"


@dataclass
class StepBatch:
    """One step of every world. Entries of worlds that were not stepped are meaningless."""

    observation: Any  # (B, D) float32, or a dict of batched arrays
    reward: np.ndarray  # (B,) float64
    terminated: np.ndarray  # (B,) bool: success or breach
    truncated: np.ndarray  # (B,) bool: step limit
    info: dict[str, Any]  # batched arrays, see DivertTask.step


class DivertTask:
    """Batched episodes of one scenario, each world with its own generator and bookkeeping."""

    def __init__(
        self,
        scenario: Scenario,
        worlds: int = 1,
        observation: str = "vector",
        rim_birds: int = 4,
        max_birds: int | None = None,
        neighbour_search: str = "auto",
        max_steps: int | None = None,
    ):
        self.scenario = scenario
        self.n_worlds = worlds
        self.world = World(scenario, worlds, neighbour_search)
        self.protected_arr = zone_arrays(scenario.site.protected)
        self.goal_arr = zone_arrays(scenario.site.goal)
        self.observations = ObservationBuilder(
            scenario, worlds, self.protected_arr, self.goal_arr, observation, rim_birds, max_birds
        )
        if max_steps is not None and max_steps < 1:
            raise ValueError(f"max_episode_steps = {max_steps}: must be a positive integer")
        self.max_steps = scenario.episode.max_steps if max_steps is None else int(max_steps)
        self.site_scale = self.observations.scales.site
        self.link_radius = scenario.flock.linking_radius
        self.ever_inside = np.zeros((worlds, self.world.max_birds), dtype=np.bool_)
        self.potential = np.zeros(worlds)
        self.approach = np.zeros(worlds)
        self.metrics: StepMetrics | None = None

    @property
    def state(self):
        return self.world.state

    def measure(self) -> StepMetrics:
        """Flock metrics of every world in the current state (one compiled call)."""
        s = self.world.state
        return step_metrics(
            s.bird_pos,
            s.bird_vel,
            s.count,
            s.pursuer_pos,
            self.link_radius,
            self.protected_arr,
            self.goal_arr,
        )

    def reset(self, indices, rngs=None):
        """Reset the given worlds (each from its rng, or its own generator) and observe all."""
        indices = np.atleast_1d(np.asarray(indices, dtype=np.int64))
        for k, index in enumerate(indices):
            self.world.reset(int(index), None if rngs is None else rngs[k])
            self.ever_inside[index] = False
        self.metrics = self.measure()
        self.ever_inside[indices] |= self.metrics.in_protected[indices]
        self.potential[indices] = rewards.potential(
            self.metrics.goal_distance[indices], self.site_scale
        )
        self.approach[indices] = self._approach_potential(self.metrics)[indices]
        return self.observations.build(self.world.state, self.metrics)

    def _approach_potential(self, m: StepMetrics) -> np.ndarray:
        s = self.world.state
        gap = np.hypot(*(m.centroid - s.pursuer_pos[:, 0]).T)  # drone 0
        return rewards.approach_potential(gap, self.scenario.flock.alarm_radius, self.site_scale)

    def metrics_info(self) -> dict[str, np.ndarray]:
        """The latest flock metrics that a reset reports in its info."""
        m = self.metrics
        return {
            "n_components": m.n_components,
            "largest_fraction": m.largest_fraction,
            "diameter": m.diameter,
            "goal_distance": m.goal_distance,
        }

    def step(self, action: np.ndarray, live: np.ndarray | None = None) -> StepBatch:
        """Advance the live worlds under ``action`` (B, P, 2) finite; return the batch's outcome.

        info holds per-world arrays: ``reward_terms`` (a dict of the named terms), ``outcome``,
        and the flock metrics ``n_components``, ``largest_fraction``, ``diameter``,
        ``polarisation``, ``nearest_distance``, ``birds_inside``, ``breached_birds``,
        ``birds_in_goal``, ``goal_distance``, ``collision``, ``steps``.
        """
        self.world.step(action, live)
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
        after = rewards.potential(m.goal_distance, self.site_scale)
        approach_after = self._approach_potential(m)
        terms = rewards.reward_terms(
            self.scenario.reward,
            self.potential,
            after,
            self.approach,
            approach_after,
            terminated,
            m.largest_fraction,
            collided,
            new_breaches,
            success,
        )
        if live is None:
            self.potential = after
            self.approach = approach_after
        else:
            self.potential = np.where(live, after, self.potential)
            self.approach = np.where(live, approach_after, self.approach)
        outcome = np.where(
            success, SUCCESS, np.where(failure, BREACH, np.where(truncated, TIMEOUT, RUNNING))
        )
        info = {
            "reward_terms": terms,
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
        observation = self.observations.build(self.world.state, m)
        return StepBatch(observation, rewards.total(terms), terminated, truncated, info)


def check_actions(action, worlds: int) -> np.ndarray:
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

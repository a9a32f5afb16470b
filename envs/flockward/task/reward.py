"""The reward: a sum of named terms, each reported in ``info["reward_terms"]``.

A reward is an object with ``terms(context)`` returning a dict name -> (B,) array (see
``Reward``); the task adds the terms in the order the dict lists them. The default,
``HerdingReward``, has these terms (weights from the scenario's ``[reward]`` table):

- progress: potential-based shaping F = gamma * phi(s') - phi(s) with phi = -(centroid distance
  to the goal region, 0 inside) / site scale, and phi = 0 at a terminal state, so the optimal policy
  is that of the unshaped task (Ng, Harada & Russell 1999, ICML);
- approach: the same shaping with phi = -(drone distance to the flock centroid beyond the flock's
  alarm radius) / site scale: it rewards closing in on the flock (the birds only react to a drone
  within that radius) and is flat inside it, so it never pays to dive into the flock;
- fragmentation: -(1 - largest-cluster fraction) each step;
- collision: -1 for each step the pursuer is inside its safety radius of any bird;
- breach: -1 for each bird entering the protected zone for the first time (a potential strike;
  large, because an episode ends at its first breaches beyond tolerance and must not look like a
  shortcut past the time cost);
- time: -1 each step;
- success: +1 on the step the flock reaches the goal region.
"""

from __future__ import annotations

from abc import ABC, abstractmethod

import numpy as np

from flockward.task.context import StepContext, TaskSetting

REWARD_TERMS = ("progress", "approach", "fragmentation", "collision", "breach", "time", "success")


class Reward(ABC):
    """What a reward implements. The task deep-copies the object it is given, so one instance
    can configure several environments; per-world state lives in the copy.

    ``setup`` is called once when the task is built, ``reset`` after the given worlds were reset
    (their new state is in the context), ``terms`` once per step.
    """

    def setup(self, setting: TaskSetting) -> None:
        """Prepare for ``setting.worlds`` worlds of ``setting.scenario`` (default: nothing)."""
        return None

    def reset(self, context: StepContext, indices: np.ndarray) -> None:
        """Forget the per-world state of worlds ``indices`` (default: nothing to forget)."""
        return None

    @abstractmethod
    def terms(self, context: StepContext) -> dict[str, np.ndarray]:
        """Each named term, a (B,) float array; entries of worlds not live are ignored."""


def potential(goal_distance: np.ndarray, site_scale: float) -> np.ndarray:
    """Shaping potential of each world: minus the centroid's distance to the goal region, scaled."""
    phi: np.ndarray = -np.maximum(goal_distance, 0.0) / site_scale
    return phi


def approach_potential(
    drone_distance: np.ndarray, alarm_radius: float, site_scale: float
) -> np.ndarray:
    """Shaping potential of closing in: minus the drone's distance beyond the alarm radius."""
    phi: np.ndarray = -np.maximum(drone_distance - alarm_radius, 0.0) / site_scale
    return phi


def _shaping(
    weight: float,
    discount: float,
    before: np.ndarray,
    after: np.ndarray,
    terminated: np.ndarray,
) -> np.ndarray:
    """Weighted potential-based shaping, with phi = 0 after a terminal step."""
    shaped: np.ndarray = weight * (discount * np.where(terminated, 0.0, after) - before)
    return shaped


class HerdingReward(Reward):
    """The default reward: the seven terms of REWARD_TERMS, in that order (module docstring)."""

    def setup(self, setting: TaskSetting) -> None:
        """Room for each world's last potentials."""
        self._progress = np.zeros(setting.worlds)  # phi of the last state, per world
        self._approach = np.zeros(setting.worlds)

    def _potentials(self, context: StepContext) -> tuple[np.ndarray, np.ndarray]:
        site = context.scales.site
        progress = potential(context.metrics.goal_distance, site)
        alarm = context.setting.scenario.flock.alarm_radius
        return progress, approach_potential(context.drone_flock_gap, alarm, site)

    def reset(self, context: StepContext, indices: np.ndarray) -> None:
        """Start the reset worlds' shaping from the potentials of their new state."""
        progress, approach = self._potentials(context)
        self._progress[indices] = progress[indices]
        self._approach[indices] = approach[indices]

    def terms(self, context: StepContext) -> dict[str, np.ndarray]:
        """The seven weighted terms; live worlds' potentials are kept for the next step."""
        w = context.weights
        g = w.discount
        progress, approach = self._potentials(context)
        ended = context.terminated
        terms = {
            "progress": _shaping(w.progress, g, self._progress, progress, ended),
            "approach": _shaping(w.approach, g, self._approach, approach, ended),
            "fragmentation": -w.fragmentation * (1.0 - context.metrics.largest_fraction),
            "collision": -w.collision * context.collided.astype(np.float64),
            "breach": -w.breach * context.new_breaches,
            "time": np.full(context.worlds, -w.time),
            "success": w.success * context.success.astype(np.float64),
        }
        self._progress = np.where(context.live, progress, self._progress)
        self._approach = np.where(context.live, approach, self._approach)
        return terms


def total(terms: dict[str, np.ndarray], worlds: int) -> np.ndarray:
    """The reward: the sum of the terms in the dict's order (a fixed summation order)."""
    out = np.zeros(worlds)
    for value in terms.values():
        out = out + value
    return out

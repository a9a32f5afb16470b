"""The reward: a sum of named terms, each reported in ``info["reward_terms"]``.

A reward is an object with ``terms(context)`` returning a dict name -> (B,) array (see
``Reward``); the task calls it once per control step and, when an action is held for several
control steps (``decision_steps``), sums each term over the held steps. The default,
``HerdingReward``, has these terms (weights from the scenario's ``[reward]`` table):

- progress: potential-based shaping with phi = -(centroid distance to the goal region, 0 inside)
  / site scale and phi = 0 at a terminal state. On the i-th control step of a held decision
  (i = 0, 1, ...) it pays g^i (g phi(s') - phi(s)) with g = gamma^(1/decision_steps) the
  scenario's shaping discount, so one decision's sum is gamma phi(s_next) - phi(s_decision):
  exactly shaping in the agent's own discount, which leaves its optimal policy unchanged
  (Ng, Harada & Russell 1999, ICML). Being potential-based it adds the same to every policy's
  discounted return from a given start: it speeds learning up but cannot by itself make
  approaching the flock preferable; that is the proximity cost's job;
- approach: the same shaping with phi = -(drone distance beyond the flock's alarm radius) / site
  scale (weight 0 by default, kept for comparison);
- proximity: a plain cost -(drone distance to the flock centroid beyond the alarm radius) / site
  scale per control step: unlike a potential it makes every step spent far from the flock cost;
- fragmentation: -(1 - largest-cluster fraction) per control step;
- collision: -1 for each control step the pursuer is inside its safety radius of any bird;
- breach: -1 once, on the step the episode fails by breach, whatever the number of birds that
  crossed on that step;
- time: -1 per control step;
- success: +1 on the step the flock reaches the goal region.
"""

from __future__ import annotations

from abc import ABC, abstractmethod

import numpy as np

from flockward.task.context import StepContext, TaskSetting

REWARD_TERMS = (
    "progress",
    "approach",
    "proximity",
    "fragmentation",
    "collision",
    "breach",
    "time",
    "success",
)


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
    hold_step: int,
    before: np.ndarray,
    after: np.ndarray,
    terminated: np.ndarray,
) -> np.ndarray:
    """Weighted potential-based shaping of the ``hold_step``-th control step of a decision,
    discounted to the decision's start; phi = 0 after a terminal step."""
    gap = discount * np.where(terminated, 0.0, after) - before
    shaped: np.ndarray = weight * discount**hold_step * gap
    return shaped


class HerdingReward(Reward):
    """The default reward: the terms of REWARD_TERMS, in that order (module docstring)."""

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
        """The weighted terms; live worlds' potentials are kept for the next step."""
        w = context.weights
        g = context.shaping_discount
        i = context.hold_step
        progress, approach = self._potentials(context)
        ended = context.terminated
        terms = {
            "progress": _shaping(w.progress, g, i, self._progress, progress, ended),
            "approach": _shaping(w.approach, g, i, self._approach, approach, ended),
            # -phi_approach is the drone's distance beyond the alarm radius over the site scale
            "proximity": w.proximity * approach,
            "fragmentation": -w.fragmentation * (1.0 - context.metrics.largest_fraction),
            "collision": -w.collision * context.collided.astype(np.float64),
            "breach": -w.breach * context.failure.astype(np.float64),
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

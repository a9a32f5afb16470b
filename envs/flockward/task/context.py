"""What observations and reward terms read: the task's fixed setting and one step's context.

``TaskSetting`` is fixed for the life of a task (scenario, zones as arrays, scales, padding);
``StepContext`` is one immutable snapshot of a step (or a reset) of every world. Observation and
reward objects read these two records only, so a new term or field needs no change to the task.
Observations read the birds through ``seen_state`` and ``seen_metrics``: the scenario's sensor's
picture (``SensedView``), or the truth when the sensor is perfect. Rewards read the truth.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from flockward.sim.geometry import zone_center
from flockward.sim.metrics import StepMetrics
from flockward.sim.types import RewardWeights, Scenario, SensorParams, WorldState


@dataclass(frozen=True)
class Scales:
    """The lengths and speeds observations and shaping divide by, derived once per scenario."""

    site: float  # m, flock start to goal centre
    near: float  # m, the flock's alarm radius
    pursuer_speed: float  # m/s
    cruise_speed: float  # m/s

    @classmethod
    def of(cls, scenario: Scenario) -> Scales:
        """The scales of one scenario; the site scale is at least 1 m so it can divide."""
        start = np.asarray(scenario.site.flock_start)
        goal = np.asarray(zone_center(scenario.site.goal))
        return cls(
            site=max(float(np.hypot(*(goal - start))), 1.0),
            near=scenario.flock.alarm_radius,
            pursuer_speed=scenario.pursuer.max_speed,
            cruise_speed=scenario.flock.cruise_speed,
        )


@dataclass(frozen=True)
class TaskSetting:
    """Everything about a task that does not change between steps."""

    scenario: Scenario
    worlds: int  # B
    protected_arr: np.ndarray  # compiled protected zone (flockward.sim.geometry.zone_arrays)
    goal_arr: np.ndarray  # compiled goal zone
    goal_center: tuple[float, float]  # m
    scales: Scales
    rim_birds: int  # k, rim birds in the vector observation (the env's rim_birds argument)
    max_birds: int  # bird slots of padded per-bird observations (at least scenario.max_birds)

    @property
    def weights(self) -> RewardWeights:
        """The scenario's reward weights."""
        return self.scenario.reward


@dataclass(frozen=True)
class SensedView:
    """The birds as the scenario's sensor last saw them (``flockward.sim.sensing``), all worlds.

    ``state`` lists each world's tracked birds first (``state.count`` of them, positions and
    velocities as sensed; the slots beyond are zero and never a bird) and the drones as they are;
    ``metrics`` are the flock metrics of those sensed birds (undefined where a world senses no
    bird: ``state.count`` is 0 there).
    """

    sensor: SensorParams
    state: WorldState  # sensed birds, compacted; drones true
    metrics: StepMetrics  # of the sensed birds
    slots: np.ndarray  # (B, N) int64, the true bird slot of each sensed bird, -1 beyond count
    age: np.ndarray  # (B,) s, time since the picture was taken (0 right after an update)


@dataclass(frozen=True)
class StepContext:
    """One step (or reset) of every world, as observations and reward terms see it.

    Arrays are shared with the task, not copied: read them, never write them. At a reset
    ``before`` is None, the masks are all False and ``new_breaches`` is zero.
    """

    setting: TaskSetting
    state: WorldState  # after the step
    before: StepMetrics | None  # flock metrics before the step (None at a reset)
    metrics: StepMetrics  # flock metrics after the step
    live: np.ndarray  # (B,) bool, worlds that were stepped (others keep their state)
    terminated: np.ndarray  # (B,) bool, success or breach
    success: np.ndarray  # (B,) bool, the goal region holds success_fraction of the birds
    failure: np.ndarray  # (B,) bool, more than max_breaching_birds birds have entered the zone
    truncated: np.ndarray  # (B,) bool, step limit reached without termination
    new_breaches: np.ndarray  # (B,) int, birds that entered the protected zone for the first time
    collided: np.ndarray  # (B,) bool, pursuer inside its safety radius of a bird
    # this control step's place within the held decision: 0 for its first step, up to
    # decision_steps - 1 (potential-based shaping discounts by it; see task.reward)
    hold_step: int = 0
    # the sensor's picture after the step; None: the sensor is perfect, observations see the truth
    sensed: SensedView | None = None

    @property
    def scales(self) -> Scales:
        """The task's scales (``setting.scales``)."""
        return self.setting.scales

    @property
    def weights(self) -> RewardWeights:
        """The scenario's reward weights (``setting.weights``)."""
        return self.setting.weights

    @property
    def shaping_discount(self) -> float:
        """The shaping discount per control step (``Scenario.shaping_discount``)."""
        return self.setting.scenario.shaping_discount

    @property
    def seen_state(self) -> WorldState:
        """The birds as observations see them: the sensor's picture (tracked birds first,
        ``count`` = tracked birds), or the true state with a perfect sensor."""
        return self.state if self.sensed is None else self.sensed.state

    @property
    def seen_metrics(self) -> StepMetrics:
        """Flock metrics of ``seen_state``'s birds (the true metrics with a perfect sensor)."""
        return self.metrics if self.sensed is None else self.sensed.metrics

    @property
    def worlds(self) -> int:
        """B, the number of worlds."""
        return self.setting.worlds

    # The pursuer's arrays are read only through these two properties. A world without a drone
    # (the unherded control) is observed from a still reference point at the flock centroid, so
    # every drone-relative value stays finite: centroid offset and drone velocity are zero, rim
    # offsets are taken from the centroid and the approach potential is flat.
    @property
    def drone_pos(self) -> np.ndarray:
        """(B, 2) m, drone 0's position after the step (the one-drone task's drone); the flock
        centroid in a world without drones."""
        if self.state.drones == 0:
            return self.metrics.centroid
        return self.state.pursuer_pos[:, 0]

    @property
    def drone_vel(self) -> np.ndarray:
        """(B, 2) m/s, drone 0's velocity after the step; zero in a world without drones."""
        if self.state.drones == 0:
            return np.zeros((self.worlds, 2))
        return self.state.pursuer_vel[:, 0]

    @property
    def drone_flock_gap(self) -> np.ndarray:
        """(B,) m, pursuer to flock centroid after the step."""
        gap: np.ndarray = np.hypot(*(self.metrics.centroid - self.drone_pos).T)
        return gap

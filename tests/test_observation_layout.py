"""The vector observation's layout: every global entry worked by hand, bounds from the field
table, and the env docstring's index table in the table's order."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from flockward.config.scenarios import load_scenario
from flockward.sim.geometry import zone_arrays, zone_center
from flockward.sim.metrics import StepMetrics
from flockward.sim.types import WorldState
from flockward.task.context import Scales, StepContext, TaskSetting
from flockward.task.env import DivertEnv
from flockward.task.observation import (
    GLOBAL_FIELDS,
    GLOBAL_SIZE,
    RIM_FIELDS,
    DictObservation,
    VectorObservation,
)


def _context(rim_birds: int = 4) -> tuple[StepContext, TaskSetting]:
    """One headon world built by hand: three birds, the drone south-west of them."""
    scenario = load_scenario("headon")  # protected circle (0, 0) r 150, goal circle (0, 500) r 150
    setting = TaskSetting(
        scenario=scenario,
        worlds=1,
        protected_arr=zone_arrays(scenario.site.protected),
        goal_arr=zone_arrays(scenario.site.goal),
        goal_center=zone_center(scenario.site.goal),
        scales=Scales.of(scenario),
        rim_birds=rim_birds,
        max_birds=scenario.max_birds,
    )
    slots = scenario.max_birds
    state = WorldState.zeros(1, slots)
    state.bird_pos[0, :3] = [(-300.0, 40.0), (-290.0, 60.0), (-310.0, 50.0)]
    state.bird_vel[0, :3] = [(12.0, 1.0), (11.0, -1.0), (13.0, 3.0)]
    state.pursuer_pos[0] = (-350.0, -20.0)
    state.pursuer_vel[0] = (12.0, -5.0)
    state.count[0] = 3
    hull = np.zeros((1, slots), dtype=bool)
    hull[0, :3] = True
    no = np.zeros(1, dtype=bool)
    metrics = StepMetrics(
        centroid=np.array([[-300.0, 50.0]]),  # mean of the three positions
        mean_velocity=np.array([[12.0, 1.0]]),  # mean of the three velocities
        polarisation=np.array([0.99]),
        diameter=np.array([30.0]),  # given, not derived: the observation only scales it
        n_components=np.array([2]),
        largest_fraction=np.array([2.0 / 3.0]),
        nearest_distance=np.array([70.0]),
        goal_distance=np.array([math.hypot(300.0, 450.0) - 150.0]),
        in_protected=np.zeros((1, slots), dtype=bool),
        in_goal=np.zeros((1, slots), dtype=bool),
        on_hull=hull,
    )
    context = StepContext(
        setting=setting,
        state=state,
        before=None,
        metrics=metrics,
        live=no,
        terminated=no,
        success=no,
        failure=no,
        truncated=no,
        new_breaches=np.zeros(1, dtype=np.int64),
        collided=no,
    )
    return context, setting


def test_every_global_entry_by_hand():
    context, setting = _context()
    observation = VectorObservation()
    observation.setup(setting)
    obs = observation.build(context)[0]
    site = math.hypot(0.0 - -600.0, 500.0 - 0.0)  # flock start (-600, 0) to goal centre (0, 500)
    near, drone_top, cruise = 80.0, 22.0, 12.5  # gulls' alarm radius and cruise speed, drone max
    to_zone = math.hypot(0.0 - -300.0, 0.0 - 50.0)  # centroid to the protected circle's centre
    to_goal = math.hypot(0.0 - -300.0, 500.0 - 50.0)  # centroid to the goal circle's centre
    expected = [
        12.0 / drone_top,  # 0: drone velocity x
        -5.0 / drone_top,  # 1: drone velocity y
        (-300.0 - -350.0) / site,  # 2: centroid - drone, x
        (50.0 - -20.0) / site,  # 3: centroid - drone, y
        12.0 / cruise,  # 4: flock mean velocity x
        1.0 / cruise,  # 5: flock mean velocity y
        30.0 / near,  # 6: diameter
        2.0 / 3.0,  # 7: largest-cluster fraction
        # 8-9: outside a circle the nearest edge point lies toward the centre.
        (0.0 - -300.0) / to_zone,
        (0.0 - 50.0) / to_zone,
        (to_zone - 150.0) / site,  # 10: signed distance to the protected edge
        (0.0 - -300.0) / to_goal,  # 11: unit vector to the goal centre, x
        (500.0 - 50.0) / to_goal,  # 12: y
        (to_goal - 150.0) / site,  # 13: signed distance to the goal edge
    ]
    assert obs.dtype == np.float32 and obs.shape == (GLOBAL_SIZE + RIM_FIELDS * 4,)
    for index, value in enumerate(expected):
        assert obs[index] == pytest.approx(value, rel=1e-6), index
    # Three hull birds for four rim slots: three present, the last padded with zeros.
    present = obs[GLOBAL_SIZE + 2 :: RIM_FIELDS]
    assert present.tolist() == [1.0, 1.0, 1.0, 0.0]
    assert obs[-RIM_FIELDS:].tolist() == [0.0, 0.0, 0.0]


def test_rim_entries_by_hand():
    # Threat = distance to the goal edge - distance to the protected edge (both circles here).
    context, setting = _context(rim_birds=1)
    observation = VectorObservation()
    observation.setup(setting)
    obs = observation.build(context)[0]
    birds = context.state.bird_pos[0, :3]
    threat = [math.hypot(x, y - 500.0) - math.hypot(x, y) for x, y in birds]
    x, y = birds[int(np.argmax(threat))]
    rim = obs[GLOBAL_SIZE:]
    assert rim[0] == pytest.approx((x - -350.0) / 80.0, rel=1e-6)
    assert rim[1] == pytest.approx((y - -20.0) / 80.0, rel=1e-6)
    assert rim[2] == 1.0


def test_bounds_follow_the_field_table():
    context, setting = _context(rim_birds=2)
    observation = DictObservation()
    observation.setup(setting)
    space = observation.space()["context"]
    assert np.isinf(space.low[[0, 1, 2, 3, 4, 5, 6, 10, 13]]).all()
    assert np.isinf(space.high[[0, 1, 2, 3, 4, 5, 6, 10, 13]]).all()
    assert (space.low[7], space.high[7]) == (0.0, 1.0)  # a fraction
    assert (space.low[[8, 9, 11, 12]] == -1.0).all() and (space.high[[8, 9, 11, 12]] == 1.0).all()
    assert np.isinf(space.low[[14, 15, 17, 18]]).all()  # rim offsets
    assert (space.low[[16, 19]] == 0.0).all() and (space.high[[16, 19]] == 1.0).all()
    assert observation.space().contains({k: v[0] for k, v in observation.build(context).items()})


def test_docstring_table_lists_the_fields_in_order():
    rows = re.findall(r"^\s*\| ([\d\-+r, ]+) \| (\w+):", DivertEnv.__doc__, re.MULTILINE)
    names = [name for _, name in rows]
    assert names == [field[0] for field in GLOBAL_FIELDS] + ["rim_offset", "rim_present"]
    start = 0
    for (index, name), (_, width, _, _) in zip(rows, GLOBAL_FIELDS, strict=False):
        first = int(index.split("-")[0])
        assert first == start, name
        start += width


def test_rollout_observations_stay_within_the_bounds():
    # Gymnasium's Box.contains over a random rollout: the finite bounds hold in practice.
    env = DivertEnv("crosswind-mix", overrides={"episode.max_steps": 300})
    obs, _ = env.reset(seed=11)
    rng = np.random.default_rng(3)
    for _ in range(300):
        assert env.observation_space.contains(obs)
        obs, _, terminated, truncated, _ = env.step(rng.uniform(-1, 1, 2))
        if terminated or truncated:
            break

"""The unherded control: worlds without a drone (P = 0), the env argument and the controller."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from flockward.bench.episode import controller_env_kwargs, play_episode
from flockward.bench.evaluation import run_suite
from flockward.bench.leaderboard import build_leaderboard
from flockward.bench.suites import load_suite
from flockward.config.scenarios import load_scenario
from flockward.sim.geometry import zone_arrays
from flockward.sim.metrics import nearest_distance, step_metrics
from flockward.sim.world import World
from flockward.task.env import DivertEnv
from flockward.task.env_config import EnvConfig
from flockward.task.observation import OFFSET
from flockward_baselines.controllers import BUILTIN, make_controller

PARKED = (1.0e5, 1.0e5)  # m: a parked drone far beyond every alarm radius


def test_no_drone_is_a_builtin_declaring_zero_drones():
    controller = make_controller("no-drone")
    assert "no-drone" in BUILTIN and controller.drones == 0
    assert make_controller("idle").drones == 1  # the protocol's default: one drone
    assert controller_env_kwargs(controller) == {"drones": 0}
    assert controller_env_kwargs(make_controller("idle"), {"rim_birds": 3}) == {"rim_birds": 3}
    with pytest.raises(ValueError, match="declares drones = 0"):
        controller_env_kwargs(controller, {"drones": 1})


@pytest.mark.parametrize("bad", [9, -1, True, 0.0, "0"])
def test_drones_argument_is_validated(bad):
    # 0 (unherded) to MAX_DRONES = 8 drones per world
    with pytest.raises(ValueError, match=r"^drones = .*: must be an integer in \[0, 8\]$"):
        EnvConfig(drones=bad)


def test_world_without_drones_equals_a_world_with_a_drone_parked_far_away():
    # Regression test: fear acts only within the alarm radius, so a drone parked 1e5 m away and no
    # drone at all must give the same birds, bit for bit.
    scenario = load_scenario("headon", {"flock.noise_std": 1.0})
    none, parked = World(scenario, 2, drones=0), World(scenario, 2, drones=1)
    for world in (none, parked):
        for b, seed in enumerate((5, 6)):
            world.reset(b, np.random.default_rng(seed))
    parked.state.pursuer_pos[:] = PARKED
    for _ in range(400):
        none.step(np.zeros((2, 0, 2)))
        parked.step(np.zeros((2, 1, 2)))
    np.testing.assert_array_equal(none.state.bird_pos, parked.state.bird_pos)
    np.testing.assert_array_equal(none.state.bird_vel, parked.state.bird_vel)
    assert none.state.pursuer_pos.shape == (2, 0, 2)


def test_no_drone_episode_equals_a_parked_drone_episode():
    # Regression test through the env: the same outcome and breaches; only the drone metrics
    # differ (no drone: closest approach +inf, no path, no energy).
    scenario = load_scenario("headon")
    record, _ = play_episode(scenario, make_controller("no-drone"), 11)
    env = DivertEnv(scenario)
    env.reset(seed=11)
    env.task.world.state.pursuer_pos[0, 0] = PARKED
    step, terminated, truncated = 0, False, False
    while not (terminated or truncated):
        _, _, terminated, truncated, info = env.step(np.zeros(2))
        step = info["steps"]  # control steps, as the record counts them
    assert (record.outcome, record.steps, record.breached_birds) == (
        info["outcome"],
        step,
        info["breached_birds"],
    )
    assert record.closest_approach == math.inf
    assert record.path_length == record.energy == record.collision_steps == 0


def test_every_standard_family_breaches_unherded():
    suite = load_suite("standard")
    first = {}
    for spec in suite.episodes():
        first.setdefault(spec.family, spec)
    outcomes = {
        family: play_episode(
            suite.scenarios[spec.scenario_name], make_controller("no-drone"), spec.seed
        )[0].outcome
        for family, spec in first.items()
    }
    assert outcomes == dict.fromkeys(first, "breach")


def test_metrics_without_drones_put_the_nearest_drone_at_infinity():
    pos = np.array([[[0.0, 0.0], [3.0, 4.0]]])
    count = np.array([2])
    assert nearest_distance(pos, count, np.zeros((1, 0, 2))).tolist() == [math.inf]
    arr = zone_arrays(load_scenario("headon").site.protected)
    m = step_metrics(pos, np.ones_like(pos), count, np.zeros((1, 0, 2)), 10.0, arr, arr)
    assert m.nearest_distance.tolist() == [math.inf]
    assert nearest_distance(pos, count, np.array([[[0.0, 8.0]]])).tolist() == [5.0]


@pytest.mark.parametrize("mode", ["vector", "dict"])
def test_observations_without_a_drone_are_taken_from_the_flock_centroid(mode):
    env = DivertEnv("headon", drones=0, observation=mode)
    obs, _ = env.reset(seed=3)
    for _ in range(5):
        obs, reward, _, _, info = env.step(np.array([1.0, -1.0]))  # accepted and ignored
    vector = obs if mode == "vector" else obs["context"]
    assert env.observation_space.contains(obs)
    assert np.all(np.isfinite(vector)) and math.isfinite(reward)
    start = OFFSET["centroid_offset"]
    assert vector[start : start + 2].tolist() == [0.0, 0.0]  # reference point = the centroid
    assert vector[OFFSET["pursuer_velocity"] : OFFSET["pursuer_velocity"] + 2].tolist() == [0, 0]
    assert info["reward_terms"]["approach"] == 0.0 and not info["collision"]
    assert info["nearest_distance"] == math.inf
    if mode == "dict":
        n = env.state.count
        centroid = env.state.bird_pos.mean(axis=0)
        expected = (env.state.bird_pos - centroid) / env.scenario.flock.alarm_radius
        np.testing.assert_allclose(obs["birds"][:n, :2], expected, rtol=1e-5, atol=1e-6)


def test_runner_records_zero_drones_and_writes_null_closest_approach(tmp_path: Path):
    suite = load_suite("smoke")
    path = run_suite(
        suite, lambda: make_controller("no-drone"), "no-drone", tmp_path, limit=2, progress=False
    )
    data = json.loads(path.read_text(encoding="utf-8"))
    assert data["environment"] == {"drones": 0}
    assert [row["closest_approach"] for row in data["episodes"]] == [None, None]
    run_suite(suite, lambda: make_controller("no-drone"), "no-drone", tmp_path, progress=False)
    board = build_leaderboard(tmp_path, "smoke", reps=50)
    assert [row["controller"] for row in board.rows] == ["no-drone"]

"""The drone axis of the state: shapes, worlds flying several drones, and what controllers see."""

from __future__ import annotations

import numpy as np
import pytest

from flockward.bench.episode import play_episode
from flockward.config.scenarios import load_scenario
from flockward.controller import Controller, StateView
from flockward.sim.types import WorldState
from flockward.sim.world import World
from flockward.task.batched import check_actions
from flockward.task.env import DivertEnv

FAR = (1.0e7, 1.0e7)  # m: a parking spot beyond every alarm radius


def reset_world(scenario, seeds, drones: int) -> World:
    world = World(scenario, len(seeds), drones=drones)
    for b, seed in enumerate(seeds):
        world.reset(b, np.random.default_rng(seed))
    return world


def test_world_state_has_a_drone_axis():
    state = WorldState.zeros(3, 5, drones=2)
    assert state.pursuer_pos.shape == state.pursuer_vel.shape == (3, 2, 2)
    assert state.bird_pos.shape == state.bird_vel.shape == (3, 5, 2)
    assert state.count.shape == (3,)
    assert state.drones == 2
    assert WorldState.zeros(3, 5).pursuer_pos.shape == (3, 1, 2)  # one drone by default
    copy = state.copy()
    copy.pursuer_pos[0, 1] = 1.0
    assert state.pursuer_pos[0, 1].tolist() == [0.0, 0.0]  # a copy, not a view


def test_reset_starts_every_drone_at_rest_at_the_pursuer_start():
    scenario = load_scenario("headon")
    world = reset_world(scenario, [1, 2], drones=3)
    assert world.n_drones == 3 and world.state.drones == 3
    start = np.asarray(scenario.pursuer.start)
    np.testing.assert_array_equal(world.state.pursuer_pos, np.broadcast_to(start, (2, 3, 2)))
    np.testing.assert_array_equal(world.state.pursuer_vel, np.zeros((2, 3, 2)))
    limits = (scenario.pursuer.max_speed, scenario.pursuer.max_accel)
    np.testing.assert_array_equal(world.pursuer_limits, np.broadcast_to(limits, (2, 3, 2)))


def test_each_drone_moves_under_its_own_action_and_limits():
    # Textbook kinematics from rest under a constant acceleration a: x = a t^2 / 2 and v = a t
    # while the speed is below max_speed; with a speed cap v_max reached at t* = v_max / a,
    # x(T) = a t*^2 / 2 + v_max (T - t*). Drone 0 keeps the scenario's limits (8 m/s^2 reaches
    # 16 m/s in 2 s, under 20 m/s); drone 1 gets its own, 4 m/s^2 and 4 m/s, so t* = 1 s.
    scenario = load_scenario("headon")
    world = reset_world(scenario, [3, 4], drones=2)
    world.pursuer_limits[:, 1] = (4.0, 4.0)
    a0, v0_max = scenario.pursuer.max_accel, scenario.pursuer.max_speed
    action = np.zeros((2, 2, 2))
    action[:, 0] = (1.0, 0.0)  # drone 0 east
    action[:, 1] = (0.0, 1.0)  # drone 1 north
    seconds = 2.0
    steps = round(seconds / scenario.episode.dt)
    for _ in range(steps):
        world.step(action)
    assert a0 * seconds < v0_max  # drone 0 never reaches its cap
    start = np.asarray(scenario.pursuer.start)
    for b in range(2):
        east = world.state.pursuer_pos[b, 0] - start
        north = world.state.pursuer_pos[b, 1] - start
        np.testing.assert_allclose(east, [0.5 * a0 * seconds**2, 0.0], rtol=0, atol=1e-9)
        np.testing.assert_allclose(world.state.pursuer_vel[b, 0], [a0 * seconds, 0.0], atol=1e-9)
        np.testing.assert_allclose(north, [0.0, 0.5 * 4.0 * 1.0**2 + 4.0 * 1.0], atol=1e-9)
        np.testing.assert_allclose(world.state.pursuer_vel[b, 1], [0.0, 4.0], atol=1e-12)
    assert np.all(np.isfinite(world.state.bird_pos))


def test_a_drone_parked_far_away_changes_nothing():
    # Regression check (compares the simulator with itself): a second drone parked beyond every
    # alarm radius, holding still, leaves the birds and the first drone of the one-drone world
    # unchanged bit for bit, so the drone axis adds nothing to the arithmetic of the flight.
    # pigeons-cluster has acceleration noise; the first drone starts beside the flock's centroid,
    # so flight and dodging act from the first step.
    scenario = load_scenario("pigeons-cluster")
    one = reset_world(scenario, [21], drones=1)
    two = reset_world(scenario, [21], drones=2)
    n = int(one.state.count[0])
    beside = one.state.bird_pos[0, :n].mean(axis=0) + (20.0, 5.0)
    one.state.pursuer_pos[0, 0] = beside
    two.state.pursuer_pos[0, 0] = beside
    two.state.pursuer_pos[0, 1] = FAR
    start = one.state.bird_pos[0, :n].copy()
    rng = np.random.default_rng(8)
    for _ in range(150):
        command = rng.uniform(-1.0, 1.0, 2)
        one.step(command.reshape(1, 1, 2))
        two.step(np.stack([command, np.zeros(2)])[None])
    for name in ("bird_pos", "bird_vel"):
        assert np.array_equal(getattr(one.state, name), getattr(two.state, name)), name
    assert np.array_equal(one.state.pursuer_pos[:, 0], two.state.pursuer_pos[:, 0])
    moved = np.linalg.norm(one.state.bird_pos[0, :n] - start, axis=-1)
    assert moved.min() > 1.0  # the flock flew: the comparison is not of idle worlds


def test_world_refuses_bad_drone_counts_and_action_shapes():
    scenario = load_scenario("headon")
    with pytest.raises(ValueError, match="drones = -1: must be at least 0"):
        World(scenario, 1, drones=-1)
    world = reset_world(scenario, [0, 1], drones=2)
    with pytest.raises(ValueError, match=r"expected \(worlds, drones, 2\) \(2, 2, 2\)"):
        world.step(np.zeros((2, 2)))


class _ShapeRecorder(Controller):
    """A state-level controller that holds still and records the shapes it is shown."""

    name = "shape-recorder"
    information_level = "state"

    def __init__(self) -> None:
        self.shapes: set[tuple[tuple[int, ...], tuple[int, ...]]] = set()

    def act(self, observation, state: StateView | None) -> np.ndarray:
        assert state is not None
        self.shapes.add((state.pursuer_pos.shape, state.pursuer_vel.shape))
        return np.zeros(2)


def test_controllers_see_drones_as_rows_and_frames_record_them():
    scenario = load_scenario("headon", {"episode.max_steps": 5})
    recorder = _ShapeRecorder()
    record, frames = play_episode(scenario, recorder, seed=0, record_frames=True)
    assert record.outcome == "timeout" and record.steps == 5
    assert recorder.shapes == {((1, 2), (1, 2))}  # (P, 2) with the environment's one drone
    # One frame at reset and one per decision (decision_steps control steps, the last cut short).
    k = scenario.episode.decision_steps
    assert len(frames) == 1 + -(-5 // k)
    assert all(frame["pursuer_pos"].shape == (1, 2) for frame in frames)


def test_environments_keep_their_one_drone_actions():
    # The single environment takes a (2,) action and the vector environment (B, 2); both reach
    # the world as one drone's row, (B, 1, 2).
    assert check_actions(np.array([0.5, -0.5]), 1).shape == (1, 1, 2)
    batch = np.arange(6.0).reshape(3, 2) / 10.0
    np.testing.assert_array_equal(check_actions(batch, 3)[:, 0], batch)
    env = DivertEnv("headon")
    assert env.action_space.shape == (2,)
    env.reset(seed=0)
    env.step(np.array([1.0, 0.0]))
    assert env.task.state.pursuer_pos.shape == (1, 1, 2)

"""The environments' public, read-only world state."""

from __future__ import annotations

import gymnasium as gym
import numpy as np
import pytest

import flockward  # noqa: F401  (registers the ids)
from flockward.task.env import DivertEnv
from flockward.task.registration import ENV_ID


def test_state_is_read_only():
    env = gym.make(ENV_ID, scenario="trio")
    env.reset(seed=0)
    state = env.unwrapped.state
    for array in (state.bird_pos, state.bird_vel, state.drone_pos, state.drone_vel):
        with pytest.raises(ValueError, match="read-only"):
            array[0] = 1.0
    with pytest.raises(AttributeError):
        state.count = 4


def test_state_follows_the_episode():
    env = DivertEnv("headon", overrides={"episode.max_steps": 50})
    _, info = env.reset(seed=5)
    inner = env.task.world.state
    for _ in range(50):
        state = env.state
        n = int(inner.count[0])
        assert state.count == n
        np.testing.assert_array_equal(state.bird_pos, inner.bird_pos[0, :n])
        np.testing.assert_array_equal(state.bird_vel, inner.bird_vel[0, :n])
        np.testing.assert_array_equal(state.drone_pos, inner.pursuer_pos[0])
        before = state.drone_pos.copy()
        _, _, terminated, truncated, info = env.step(np.array([1.0, 0.0]))
        # Accelerating due east: the drone moves east and not north or south.
        after = env.state.drone_pos[0]
        assert after[0] > before[0, 0] and after[1] == before[0, 1]
        # The snapshot taken before the step did not change with it.
        assert np.array_equal(state.drone_pos, before)
        if terminated or truncated:
            break
    # The info's metrics come from the same birds: the nearest one to the drone.
    gaps = np.hypot(*(env.state.bird_pos - env.state.drone_pos[0]).T)
    assert info["nearest_distance"] == pytest.approx(gaps.min())


@pytest.mark.parametrize("threads", [1, 2, 4])
def test_vector_env_state_per_world_matches_single_envs(threads, monkeypatch):
    # Whatever the thread count (FLOCKWARD_THREADS), bit for bit.
    monkeypatch.setenv("FLOCKWARD_THREADS", str(threads))
    venv = gym.make_vec(ENV_ID, num_envs=3, vectorization_mode="vector_entry_point",
                        scenario="trio")  # fmt: skip
    venv.reset(seed=20)
    singles = [DivertEnv("trio") for _ in range(3)]
    for i, env in enumerate(singles):
        env.reset(seed=20 + i)
    for _ in range(10):
        venv.step(np.full((3, 2), 0.5))
        for env in singles:
            env.step(np.full(2, 0.5))
    for i, env in enumerate(singles):
        view = venv.unwrapped.state(i)
        np.testing.assert_array_equal(view.bird_pos, env.state.bird_pos)
        np.testing.assert_array_equal(view.drone_vel, env.state.drone_vel)
        assert not view.bird_pos.flags.writeable
    with pytest.raises(IndexError, match="worlds 0 to 2"):
        venv.unwrapped.state(3)

"""The Gymnasium faces: checkers, spaces, reward terms, actions, vector equivalence, wrappers."""

from __future__ import annotations

import multiprocessing as mp

import gymnasium as gym
import numpy as np
import pytest
from gymnasium.utils.env_checker import check_env as gym_check_env
from stable_baselines3.common.env_checker import check_env as sb3_check_env

import flockward  # noqa: F401  (registers the ids)
from flockward.config.scenarios import list_scenarios
from flockward.sim.types import K
from flockward.task.env import DivertEnv
from flockward.task.registration import ENV_ID
from flockward.task.vector_env import DivertVectorEnv
from flockward_baselines.sb3 import make_vec_env

SHORT = {"episode.max_steps": 60}


@pytest.mark.parametrize("observation", ["vector", "dict"])
def test_gymnasium_checker(observation):
    # Gymnasium's own environment checker (gymnasium.utils.env_checker.check_env).
    env = DivertEnv("headon", overrides=SHORT, observation=observation)
    gym_check_env(env, skip_render_check=True)


@pytest.mark.parametrize("observation", ["vector", "dict"])
def test_sb3_checker(observation):
    # Stable-Baselines3's checker (stable_baselines3.common.env_checker.check_env), warnings as
    # errors so a space it dislikes fails the test instead of printing.
    env = DivertEnv("crosswind-mix", overrides=SHORT, observation=observation)
    sb3_check_env(env, warn=True)


def test_make_and_make_vec_from_registry():
    env = gym.make(ENV_ID, scenario="trio")
    obs, _ = env.reset(seed=0)
    assert env.observation_space.contains(obs)
    venv = gym.make_vec(
        ENV_ID, num_envs=3, vectorization_mode="vector_entry_point", scenario="trio"
    )
    assert isinstance(venv.unwrapped, DivertVectorEnv)
    obs, _ = venv.reset(seed=0)
    assert obs.shape == (3, env.observation_space.shape[0])
    venv.close()
    env.close()


def test_make_vec_passes_max_episode_steps():
    venv = gym.make_vec(
        ENV_ID, num_envs=2, vectorization_mode="vector_entry_point", max_episode_steps=5
    )
    venv.reset(seed=1)
    for _ in range(5):
        _, _, terminated, truncated, _ = venv.step(np.zeros((2, 2)))
    assert truncated.all() and not terminated.any()


def test_unknown_override_names_the_key():
    with pytest.raises(ValueError, match=r"flock\.cout"):
        DivertEnv("headon", overrides={"flock.cout": 10})


def test_nan_action_is_a_clear_error():
    env = DivertEnv("headon")
    env.reset(seed=0)
    with pytest.raises(ValueError, match="NaN or inf"):
        env.step(np.array([np.nan, 0.0]))
    with pytest.raises(ValueError, match="NaN or inf"):
        env.step(np.array([np.inf, 0.0]))
    with pytest.raises(ValueError, match="shape"):
        env.step(np.zeros(3))


def test_out_of_range_action_is_clipped():
    # Documented: components clipped to [-1, 1], then the norm capped at 1.
    a, b = DivertEnv("headon", decision_steps=1), DivertEnv("headon", decision_steps=1)
    a.reset(seed=5)
    b.reset(seed=5)
    for _ in range(20):
        oa, *_ = a.step(np.array([7.0, -0.0]))
        ob, *_ = b.step(np.array([1.0, 0.0]))
    np.testing.assert_array_equal(oa, ob)
    speed = np.hypot(*a.task.state.pursuer_vel[0, 0])
    assert speed == pytest.approx(min(20 * 0.1 * a.scenario.pursuer.max_accel, 20.0))


def test_dict_observation_pads_and_masks():
    env = DivertEnv("crosswind-mix", observation="dict", max_birds=100)
    obs, _ = env.reset(seed=2)
    n = int(env.task.state.count[0])
    assert obs["birds"].shape == (100, 4)
    assert obs["mask"].sum() == n
    assert np.all(obs["birds"][n:] == 0.0)


def test_rim_birds_padded_when_flock_is_small():
    env = DivertEnv("trio", rim_birds=6)
    obs, _ = env.reset(seed=0)
    masks = obs[14 + 2 :: 3]
    assert masks.shape == (6,)
    assert masks.sum() <= 3 and masks[:2].all() and not masks[3:].any()


def _rollout_single(seeds, actions, overrides):
    """Per-world trajectories from independent single envs, auto-resetting like next-step mode."""
    out = []
    for w, seed in enumerate(seeds):
        env = DivertEnv("crosswind-mix", overrides=overrides)
        obs, _ = env.reset(seed=seed)
        traj, done = [(obs, 0.0)], False
        for t in range(actions.shape[0]):
            if done:
                obs, _ = env.reset()
                traj.append((obs, 0.0))
                done = False
                continue
            obs, reward, terminated, truncated, _ = env.step(actions[t, w])
            traj.append((obs, reward))
            done = terminated or truncated
        out.append(traj)
    return out


# The threaded kernel must give the serial result bit for bit (FLOCKWARD_THREADS sets the default).
THREAD_COUNTS = [1, 2, 4]


@pytest.mark.parametrize("threads", THREAD_COUNTS)
def test_vector_env_equals_single_envs(threads, monkeypatch):
    # The native vector env must reproduce B single environments bit for bit, autoresets included.
    monkeypatch.setenv("FLOCKWARD_THREADS", str(threads))
    seeds = [11, 12, 13, 14]
    overrides = {"episode.max_steps": 25, "flock.noise_std": 0.5}
    actions = np.random.default_rng(0).uniform(-1.5, 1.5, (70, 4, 2))
    singles = _rollout_single(seeds, actions, overrides)
    venv = DivertVectorEnv(4, "crosswind-mix", overrides=overrides)
    obs, _ = venv.reset(seed=seeds)
    for w in range(4):
        np.testing.assert_array_equal(obs[w], singles[w][0][0])
    for t in range(actions.shape[0]):
        obs, reward, *_ = venv.step(actions[t])
        for w in range(4):
            np.testing.assert_array_equal(obs[w], singles[w][t + 1][0])
            assert reward[w] == singles[w][t + 1][1]


@pytest.mark.parametrize("threads", THREAD_COUNTS)
def test_sb3_adapter_equals_single_envs(threads, monkeypatch):
    monkeypatch.setenv("FLOCKWARD_THREADS", str(threads))
    # Same-step autoreset: a finished world's terminal observation is in the info and the
    # returned observation is already the next episode's first.
    overrides = {"episode.max_steps": 25}
    venv = make_vec_env(num_envs=3, seed=40, scenario="crosswind-mix", overrides=overrides)
    obs = venv.reset()
    envs = [DivertEnv("crosswind-mix", overrides=overrides) for _ in range(3)]
    first = [env.reset(seed=40 + i)[0] for i, env in enumerate(envs)]
    np.testing.assert_array_equal(obs, np.stack(first))
    rng = np.random.default_rng(1)
    saw_done = False
    for _ in range(60):
        actions = rng.uniform(-1, 1, (3, 2))
        obs, rewards, dones, infos = venv.step(actions)
        for i, env in enumerate(envs):
            o, r, terminated, truncated, _ = env.step(actions[i])
            assert rewards[i] == np.float32(r)
            assert dones[i] == (terminated or truncated)
            if dones[i]:
                saw_done = True
                np.testing.assert_array_equal(infos[i]["terminal_observation"], o)
                assert infos[i]["TimeLimit.truncated"] == (truncated and not terminated)
                o, _ = env.reset()
            np.testing.assert_array_equal(obs[i], o)
    assert saw_done


def _episode_in_worker(seed):
    env = DivertEnv("pigeons-cluster", overrides={"episode.max_steps": 80})
    obs, _ = env.reset(seed=seed)
    rng = np.random.default_rng(seed)
    for _ in range(80):
        obs, *_ = env.step(rng.uniform(-1, 1, 2))
    return obs


def test_same_seed_same_episode_in_a_worker_process():
    here = _episode_in_worker(7)
    with mp.get_context("spawn").Pool(1) as pool:
        there = pool.apply(_episode_in_worker, (7,))
    np.testing.assert_array_equal(here, there)


def test_ppo_runs_on_the_sb3_adapter():
    from stable_baselines3 import PPO

    venv = make_vec_env(num_envs=4, seed=0, scenario="trio", overrides={"episode.max_steps": 50})
    model = PPO("MlpPolicy", venv, n_steps=32, batch_size=64, n_epochs=1, seed=0, device="cpu")
    model.learn(total_timesteps=256)
    assert model.num_timesteps >= 256


def test_gymnasium_wrappers_accept_the_env(tmp_path):
    from gymnasium.wrappers import (
        FlattenObservation,
        NormalizeObservation,
        RecordEpisodeStatistics,
        RecordVideo,
    )

    env = RecordEpisodeStatistics(
        NormalizeObservation(DivertEnv("trio", overrides={"episode.max_steps": 15}))
    )
    env.reset(seed=0)
    for _ in range(15):
        *_, terminated, truncated, info = env.step(env.action_space.sample())
        if terminated or truncated:
            break
    assert "episode" in info
    flat = FlattenObservation(DivertEnv("trio", observation="dict"))
    obs, _ = flat.reset(seed=0)
    assert obs.ndim == 1 and flat.observation_space.contains(obs)
    video = RecordVideo(
        DivertEnv("trio", overrides={"episode.max_steps": 10}, render_mode="rgb_array"),
        str(tmp_path),
        episode_trigger=lambda _: True,
        disable_logger=True,
    )
    video.reset(seed=0)
    frame = video.render()
    assert frame.ndim == 3 and frame.shape[2] == 3 and frame.dtype == np.uint8
    video.close()


def test_vector_wrappers_accept_the_vector_env():
    from gymnasium.wrappers.vector import NormalizeObservation, RecordEpisodeStatistics

    venv = RecordEpisodeStatistics(
        NormalizeObservation(DivertVectorEnv(4, "trio", max_episode_steps=10, decision_steps=1))
    )
    venv.reset(seed=0)
    for _ in range(10):
        *_, truncated, info = venv.step(venv.action_space.sample())
    assert truncated.all()
    np.testing.assert_array_equal(info["episode"]["l"], 10)


@pytest.mark.expensive
def test_soak_random_actions_every_scenario():
    # 40 million random-action bird-steps, shared equally between the scenarios (fewer world-steps
    # for larger flocks): nothing non-finite, every bird inside its airspeed safety net.
    per_scenario = 40_000_000 // len(list_scenarios())
    for name in list_scenarios():
        venv = DivertVectorEnv(16, name)
        obs, _ = venv.reset(seed=0)
        rng = np.random.default_rng(0)
        state = venv.task.state
        for _ in range(per_scenario // (16 * venv.scenario.max_birds)):
            obs, reward, *_ = venv.step(rng.uniform(-1.2, 1.2, venv.action_space.shape))
            assert np.isfinite(obs).all() and np.isfinite(reward).all()
            speed = np.hypot(state.bird_vel[..., 0], state.bird_vel[..., 1])
            active = np.arange(speed.shape[1])[None, :] < state.count[:, None]
            lo = venv.task.world.params[:, K["min_speed"]][:, None] * (1 - 1e-9)
            hi = venv.task.world.params[:, K["max_speed"]][:, None] * (1 + 1e-9)
            assert np.all(~active | ((speed >= lo) & (speed <= hi))), name

"""The decision interval: one action held for decision_steps control steps, in every face.

The reference is the environment at decision_steps = 1 driven by hand, the same action repeated
(the definition of an action repeat); the held environment must match it bit for bit.
"""

from __future__ import annotations

import math

import gymnasium as gym
import numpy as np
import pytest

import flockward  # noqa: F401  (registers the ids)
from flockward.bench.episode import play_episode
from flockward.config.files import ConfigError
from flockward.config.scenarios import load_scenario
from flockward.task.env import DivertEnv
from flockward.task.registration import ENV_ID
from flockward.task.vector_env import DivertVectorEnv
from flockward_baselines.controllers import make_controller
from flockward_baselines.sb3 import make_vec_env

K = 8
# Shaping would weigh the i-th held step by g^i (see test_reward.py), which a decision_steps = 1
# env cannot do; with progress and approach off every term is an undiscounted per-step sum.
FLAT = {"reward.progress": 0.0, "reward.approach": 0.0}
STATE_KEYS = ("bird_pos", "bird_vel", "pursuer_pos", "pursuer_vel")


def _by_hand(env: DivertEnv, action: np.ndarray, k: int) -> tuple:
    """Repeat ``action`` on a decision_steps = 1 env until k steps or the episode's end."""
    total, played, terms = 0.0, 0, None
    for _ in range(k):
        obs, reward, terminated, truncated, info = env.step(action)
        total += reward
        terms = (
            dict(info["reward_terms"])
            if terms is None
            else {name: terms[name] + value for name, value in info["reward_terms"].items()}
        )
        played += 1
        if terminated or truncated:
            break
    return obs, total, terminated, truncated, info, terms, played


def _same_state(a: DivertEnv, b: DivertEnv) -> None:
    for key in STATE_KEYS:
        np.testing.assert_array_equal(getattr(a.task.state, key), getattr(b.task.state, key))


@pytest.mark.parametrize(("scenario", "seed", "limit"), [("headon", 3, 61), ("trio", 1, None)])
def test_held_action_equals_repeating_it_by_hand(scenario, seed, limit):
    # limit 61 = 7 * 8 + 5: the step limit falls inside a hold; idle-ish actions on headon breach.
    kwargs = {"overrides": FLAT, "max_episode_steps": limit}
    held = DivertEnv(scenario, decision_steps=K, **kwargs)
    hand = DivertEnv(scenario, decision_steps=1, **kwargs)
    o1, _ = held.reset(seed=seed)
    o2, _ = hand.reset(seed=seed)
    np.testing.assert_array_equal(o1, o2)
    rng = np.random.default_rng(seed)
    for _ in range(500):
        action = rng.uniform(-0.3, 0.3, 2)
        obs, reward, terminated, truncated, info = held.step(action)
        h_obs, h_reward, h_term, h_trunc, h_info, h_terms, played = _by_hand(hand, action, K)
        np.testing.assert_array_equal(obs, h_obs)
        _same_state(held, hand)
        assert reward == h_reward  # bit for bit: the same sum in the same order
        assert info["reward_terms"] == h_terms
        assert (terminated, truncated) == (h_term, h_trunc)
        assert info["held_steps"] == played
        for key in ("outcome", "steps", "breached_birds", "goal_distance", "collision"):
            assert info[key] == h_info[key]
        if terminated or truncated:
            break
    assert terminated or truncated, "the episode should end within the test"
    assert info["held_steps"] < K, "the episode should end inside a hold"


def test_episode_ending_inside_a_hold_stops_there():
    env = DivertEnv("headon", decision_steps=K, max_episode_steps=2 * K + 3)
    env.reset(seed=0)
    env.step(np.zeros(2))
    env.step(np.zeros(2))
    _, _, terminated, truncated, info = env.step(np.zeros(2))
    assert truncated and not terminated
    assert info["steps"] == 2 * K + 3 and info["held_steps"] == 3
    assert info["outcome"] == "timeout"


def test_vector_env_equals_single_envs_repeating_by_hand():
    # Worlds end at different control steps (breach), inside holds; the vector env's world i
    # must match a decision_steps = 1 single env with seed + i, action repeated by hand.
    seeds = [0, 5, 9]
    venv = DivertVectorEnv(len(seeds), "headon", overrides=FLAT, decision_steps=K)
    hands = [DivertEnv("headon", overrides=FLAT, decision_steps=1) for _ in seeds]
    obs, _ = venv.reset(seed=seeds)
    for env, seed in zip(hands, seeds, strict=True):
        env.reset(seed=seed)
    done = np.zeros(len(seeds), dtype=bool)
    rng = np.random.default_rng(0)
    ended_inside = False
    while not done.all():
        actions = rng.uniform(-0.2, 0.2, (len(seeds), 2))
        obs, rewards, terminated, truncated, info = venv.step(actions)
        for i, env in enumerate(hands):
            if done[i]:
                continue
            h_obs, h_reward, h_term, h_trunc, h_info, _, played = _by_hand(env, actions[i], K)
            np.testing.assert_array_equal(obs[i], h_obs)
            assert rewards[i] == h_reward
            assert (terminated[i], truncated[i]) == (h_term, h_trunc)
            assert info["steps"][i] == h_info["steps"]
            assert info["outcome"][i] == h_info["outcome"]
            if h_term or h_trunc:
                done[i] = True
                ended_inside |= played < K
    assert ended_inside


def test_gym_make_and_make_vec_honour_decision_steps():
    env = gym.make(ENV_ID, scenario="trio", decision_steps=5)
    env.reset(seed=0)
    *_, info = env.step(np.zeros(2))
    assert info["steps"] == 5
    assert env.unwrapped.scenario.episode.decision_period == pytest.approx(0.5)
    venv = gym.make_vec(
        ENV_ID, num_envs=2, vectorization_mode="vector_entry_point", scenario="trio",
        decision_steps=3,
    )  # fmt: skip
    venv.reset(seed=0)
    *_, info = venv.step(np.zeros((2, 2)))
    assert info["steps"].tolist() == [3, 3]


def test_sb3_adapter_counts_simulator_steps():
    venv = make_vec_env(num_envs=4, seed=0, scenario="trio", decision_steps=6)
    venv.reset()
    for _ in range(3):
        venv.step(np.zeros((4, 2)))
    assert venv.simulator_steps == 4 * 3 * 6


def test_default_is_the_scenario_key_and_bad_values_are_one_line():
    assert DivertEnv("trio").task.decision_steps == load_scenario("trio").episode.decision_steps
    assert load_scenario("trio", {"episode.decision_steps": 3}).episode.decision_steps == 3
    for bad in (0, 2.5, True, 1001):
        with pytest.raises(ValueError, match=r"^decision_steps = .*: must be an integer") as err:
            DivertEnv("trio", decision_steps=bad)
        assert "\n" not in str(err.value)
    with pytest.raises(ConfigError, match=r"episode\.decision_steps") as err:
        load_scenario("trio", {"episode.decision_steps": 0})
    assert "\n" not in str(err.value)


@pytest.mark.parametrize("k", [1, 4])
def test_runner_holds_a_scripted_controller_for_decision_steps(k):
    calls = []
    record, _ = play_episode(
        load_scenario("trio"), make_controller("boundary-arc"), 0,
        env_kwargs={"decision_steps": k}, on_action=lambda obs, action: calls.append(1),
    )  # fmt: skip
    assert record.decision_period == pytest.approx(k * 0.1)
    assert len(calls) == math.ceil(record.steps / k)  # one decision per k control steps


def test_vector_env_restarts_when_every_world_ended_together():
    venv = DivertVectorEnv(2, "trio", decision_steps=K, max_episode_steps=K + 2)
    venv.reset(seed=0)
    venv.step(np.zeros((2, 2)))
    _, _, _, truncated, info = venv.step(np.zeros((2, 2)))
    assert truncated.all() and info["held_steps"].tolist() == [2, 2]
    _, rewards, terminated, truncated, info = venv.step(np.zeros((2, 2)))  # both restart
    assert not (terminated.any() or truncated.any()) and rewards.tolist() == [0.0, 0.0]
    assert info["steps"].tolist() == [0, 0]

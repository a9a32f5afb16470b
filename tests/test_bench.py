"""`flockward bench`'s arithmetic: the scaling fit, the crossover and the PPO budget.

Sources: the least-squares slope against scipy.stats.linregress; the crossover and the PPO budget
against values worked by hand (the arithmetic is written out beside each). The bench's timings
themselves are not tested (speed targets live in the bench, not in timed tests).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.stats

from flockward_baselines.bench import (
    PPO_CARTPOLE,
    PPO_DEFAULT,
    PPO_NO_SIMULATOR,
    _crossover,
    _slope,
    no_simulator_env,
    ppo_budget,
)


def test_scaling_exponent_is_the_log_log_least_squares_slope() -> None:
    # scipy.stats.linregress on the logarithms is the reference fit.
    rng = np.random.default_rng(3)
    sizes = [250, 500, 1000, 2000]
    seconds = [
        1e-6 * n**1.3 * math.exp(e) for n, e in zip(sizes, rng.normal(0, 0.05, 4), strict=True)
    ]
    expected = scipy.stats.linregress(np.log(sizes), np.log(seconds)).slope
    assert _slope(sizes, seconds) == pytest.approx(expected, rel=1e-12)


def test_crossover_interpolates_in_log_log_between_the_sizes_it_changes_at() -> None:
    # Worked by hand: at N = 100 all pairs is twice as fast (gap ln(1/2)), at N = 1000 the grid
    # is (gap ln 2); the gap is linear in ln N, so it is 0 halfway: N = 10^2.5 = 316.23.
    assert _crossover([100, 1000], [1.0, 10.0], [2.0, 5.0]) == pytest.approx(10**2.5, rel=1e-12)
    # The grid slower at every size: no crossover.
    assert _crossover([100, 1000], [1.0, 2.0], [3.0, 4.0]) is None


def test_ppo_budget_worked_by_hand() -> None:
    # PPO alone 5000 decisions/s: 200 us each. flockward 1000/s: 1000 us, so the environment's
    # share is 800 us. 0.7 of CartPole's 5000/s is 3500/s: 285.71 us a decision, leaving
    # 85.71 us for the environment, x9.333 less than now. Over 49 000 pair evaluations:
    # 16.33 ns a pair now, 1.749 ns allowed.
    rates = {PPO_NO_SIMULATOR: 5000.0, PPO_DEFAULT: 1000.0, PPO_CARTPOLE: 5000.0}
    budget = ppo_budget(rates, share=0.7, pair_evaluations=49_000)
    assert budget["ppo_own"] == pytest.approx(200e-6)
    assert budget["environment"] == pytest.approx(800e-6)
    assert budget["allowed"] == pytest.approx(85.714e-6, rel=1e-4)
    assert budget["speed_up_needed"] == pytest.approx(9.3333, rel=1e-4)
    assert budget["per_pair_now"] == pytest.approx(16.327e-9, rel=1e-4)
    assert budget["per_pair_allowed"] == pytest.approx(1.7493e-9, rel=1e-4)


def test_ppo_budget_out_of_reach_when_ppo_alone_is_too_slow() -> None:
    # PPO alone at 3000/s takes 333 us, more than the 285.71 us 0.7 of CartPole's 5000/s allows.
    rates = {PPO_NO_SIMULATOR: 3000.0, PPO_DEFAULT: 1000.0, PPO_CARTPOLE: 5000.0}
    budget = ppo_budget(rates, share=0.7, pair_evaluations=49_000)
    assert budget["allowed"] < 0
    assert budget["speed_up_needed"] == math.inf


def test_no_simulator_env_ends_episodes_on_time_and_ppo_trains_on_it() -> None:
    # The yardstick for PPO's own cost must be a working VecEnv: zeros of the given space, an
    # episode end (with SB3's terminal observation) every `length` decisions, and PPO collects
    # exactly the decisions it is asked for.
    import gymnasium as gym
    import torch
    from stable_baselines3 import PPO

    torch.set_num_threads(1)
    obs_space = gym.spaces.Box(-np.inf, np.inf, (26,), np.float32)
    act_space = gym.spaces.Box(-1.0, 1.0, (2,), np.float32)
    env = no_simulator_env(3, obs_space, act_space, length=4)
    obs = env.reset()
    assert obs.shape == (3, 26) and obs.dtype == np.float32 and not obs.any()
    ends = []
    for _ in range(8):
        env.step_async(np.zeros((3, 2), np.float32))
        _, reward, done, infos = env.step_wait()
        assert reward.shape == (3,)
        ends.append(bool(done.all()) and all("terminal_observation" in i for i in infos))
    assert ends == [False, False, False, True] * 2
    model = PPO("MlpPolicy", env, n_steps=8, batch_size=12, n_epochs=1, seed=0)
    model.learn(total_timesteps=24)
    assert model.num_timesteps == 24

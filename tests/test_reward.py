"""The default reward's terms: they sum to the reward, the shaping discount follows from the
agent's gamma and the decision interval, shaping telescopes, the plain terms are what they say."""

from __future__ import annotations

import numpy as np
import pytest

from flockward.config.files import ConfigError
from flockward.config.scenarios import load_scenario
from flockward.task.env import DivertEnv
from flockward.task.reward import REWARD_TERMS
from flockward_baselines.train import load_train_config, make_training_env


def _phi(env: DivertEnv) -> float:
    """The progress potential of the env's current state (task.reward's definition)."""
    return -max(float(env.task.metrics.goal_distance[0]), 0.0) / env.task.setting.scales.site


@pytest.mark.parametrize("k", [1, 8])
def test_reward_is_the_sum_of_its_terms(k):
    env = DivertEnv("headon", decision_steps=k)
    env.reset(seed=3)
    rng = np.random.default_rng(0)
    for _ in range(60):
        _, reward, terminated, truncated, info = env.step(rng.uniform(-1, 1, 2))
        terms = info["reward_terms"]
        assert tuple(terms) == REWARD_TERMS
        assert reward == pytest.approx(sum(terms.values()), rel=1e-12, abs=1e-12)
        if terminated or truncated:
            break


@pytest.mark.parametrize(("gamma", "k"), [(0.99, 8), (0.995, 4), (0.9, 1)])
def test_shaping_discount_is_gamma_to_the_one_over_decision_steps(gamma, k):
    scenario = load_scenario("trio", {"reward.gamma": gamma, "episode.decision_steps": k})
    g = scenario.shaping_discount
    assert g == pytest.approx(gamma ** (1.0 / k), rel=1e-15)
    assert g**k == pytest.approx(gamma, rel=1e-12)  # k control steps discount like one decision


def test_explicit_shaping_discount_must_match_the_derived_one():
    k = load_scenario("trio").episode.decision_steps
    ok = load_scenario("trio", {"reward.discount": 0.99 ** (1 / k)})
    assert ok.reward.discount is not None
    with pytest.raises(ConfigError, match=r"reward\.discount.*must equal reward\.gamma") as err:
        load_scenario("trio", {"reward.discount": 0.99})
    assert "\n" not in str(err.value)
    with pytest.raises(ValueError, match=f"decision_steps = {2 * k}") as err:
        DivertEnv(ok, decision_steps=2 * k)
    assert "\n" not in str(err.value)


def _train_config(tmp_path, body):
    path = tmp_path / "cfg.toml"
    path.write_text('name = "t"\nalgorithm = "ppo"\nscenarios = ["trio"]\n' + body)
    return path


def test_training_sets_the_shaping_discount_from_its_gamma(tmp_path):
    config = load_train_config(_train_config(tmp_path, "decision_steps = 4\n[ppo]\ngamma = 0.98\n"))
    env = make_training_env(config)
    scenario = env.get_attr("scenario")[0]
    assert scenario.reward.gamma == 0.98
    assert env.get_attr("task")[0].scenario.shaping_discount == pytest.approx(0.98**0.25)
    # Stable-Baselines3's PPO default gamma is 0.99 (its documentation).
    plain = load_train_config(_train_config(tmp_path, ""))
    assert plain.env_overrides["reward.gamma"] == 0.99


@pytest.mark.parametrize(
    ("body", "needle"),
    [
        ('[ppo]\ngamma = 0.98\n[overrides]\n"reward.gamma" = 0.99\n', "must equal the ppo gamma"),
        ('[overrides]\n"reward.discount" = 0.99\n', "must equal reward.gamma"),
    ],
)
def test_shaping_discount_mismatch_in_training_is_one_line(tmp_path, body, needle):
    with pytest.raises(ConfigError, match=needle) as err:
        load_train_config(_train_config(tmp_path, body))
    assert "\n" not in str(err.value)


@pytest.mark.parametrize("k", [1, 8])
def test_progress_shaping_telescopes_over_decisions(k):
    # Ng, Harada & Russell 1999 (from memory): with F = gamma phi(s') - phi(s) per decision and
    # phi = 0 at a terminal state, sum_t gamma^t F_t = gamma^T phi(s_T) - phi(s_0) for an episode
    # cut off after T decisions, and -phi(s_0) for one that terminates.
    env = DivertEnv("headon", decision_steps=k)
    env.reset(seed=0)
    gamma, weight = env.scenario.reward.gamma, env.scenario.reward.progress
    phi0 = _phi(env)
    total, t = 0.0, 0
    while True:
        _, _, terminated, truncated, info = env.step(np.zeros(2))
        total += gamma**t * info["reward_terms"]["progress"] / weight
        t += 1
        if terminated or truncated or (k == 1 and t == 40):
            break
    expected = -phi0 if terminated else gamma**t * _phi(env) - phi0
    assert total == pytest.approx(expected, rel=1e-9, abs=1e-12)
    if k == 8:
        assert terminated and info["held_steps"] < k  # the breach ends inside a hold


def test_proximity_is_a_plain_cost_of_the_drones_distance():
    env = DivertEnv("headon", decision_steps=1)
    env.reset(seed=0)
    w = env.scenario.reward.proximity
    alarm = env.scenario.flock.alarm_radius
    site = env.task.setting.scales.site
    for _ in range(5):
        *_, info = env.step(np.zeros(2))
        drone = env.task.state.pursuer_pos[0, 0]
        centroid = env.task.metrics.centroid[0]
        gap = float(np.hypot(*(centroid - drone)))
        assert gap > alarm  # the drone starts far from the flock
        assert info["reward_terms"]["proximity"] == pytest.approx(-w * (gap - alarm) / site)


def test_breach_is_charged_once_however_many_birds_cross():
    # Idle on headon: the flock crosses the zone and several birds may enter on the last step.
    totals, breached = [], []
    for seed in range(4):
        env = DivertEnv("headon")
        env.reset(seed=seed)
        total = 0.0
        while True:
            _, _, terminated, truncated, info = env.step(np.zeros(2))
            total += info["reward_terms"]["breach"]
            if terminated or truncated:
                break
        assert info["outcome"] == "breach"
        totals.append(total)
        breached.append(info["breached_birds"])
    assert totals == [-env.scenario.reward.breach] * 4
    assert max(breached) > 1  # at least one episode had several birds cross on its last step

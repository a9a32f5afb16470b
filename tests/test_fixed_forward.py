"""A saved policy evaluated by ``fixed_forward`` against Stable-Baselines3's own ``predict``.

Outside check: SB3's ``model.predict(..., deterministic=True)`` is the reference; the float64
fixed-order pass must agree with its float32 torch pass to float32 rounding (1e-5 on actions in
[-1, 1]) for every algorithm family the module covers, and decline the networks it does not.
"""

from __future__ import annotations

from pathlib import Path

import gymnasium as gym
import numpy as np
import pytest
from stable_baselines3 import A2C, PPO, SAC, TD3
from stable_baselines3.common.base_class import BaseAlgorithm

from flockward.config.scenarios import load_scenario
from flockward_baselines.fixed_forward import fixed_forward
from flockward_baselines.policy import PolicyController

MODELS = Path(__file__).resolve().parents[1] / "results" / "models"


def _observations(model: BaseAlgorithm, count: int = 100) -> np.ndarray:
    rng = np.random.default_rng(11)
    shape = (count, *model.observation_space.shape)  # type: ignore[misc]
    return rng.normal(scale=2.0, size=shape).astype(np.float32)


def _worst_gap(model: BaseAlgorithm) -> float:
    forward = fixed_forward(model)
    assert forward is not None
    return max(
        float(np.max(np.abs(forward(obs) - model.predict(obs, deterministic=True)[0])))
        for obs in _observations(model)
    )


@pytest.mark.parametrize(
    ("cls", "name"), [(PPO, "ppo-standard-s0.zip"), (SAC, "sac-standard-s0.zip")]
)
def test_committed_models_agree_with_predict(cls: type[BaseAlgorithm], name: str) -> None:
    model = cls.load(str(MODELS / name), device="cpu")
    assert _worst_gap(model) < 1e-5


@pytest.mark.parametrize("cls", [PPO, A2C, SAC, TD3])
def test_fresh_models_of_every_covered_family_agree_with_predict(cls: type[BaseAlgorithm]) -> None:
    # Pendulum-v1: a Box observation and a Box action of [-2, 2], so clipping and rescaling count.
    model = cls("MlpPolicy", gym.make("Pendulum-v1"), seed=0, device="cpu")
    assert _worst_gap(model) < 1e-5


def test_networks_it_does_not_cover_are_declined() -> None:
    # State-dependent exploration adds a noise matrix the fixed pass does not model.
    model = PPO("MlpPolicy", gym.make("Pendulum-v1"), use_sde=True, seed=0, device="cpu")
    assert fixed_forward(model) is None


def test_the_controller_plays_the_fixed_pass() -> None:
    path = MODELS / "ppo-standard-s0.zip"
    controller = PolicyController(path)
    controller.reset(load_scenario("headon"))
    model = PPO.load(str(path), device="cpu")
    forward = fixed_forward(model)
    assert forward is not None
    for observation in _observations(model, 5):
        assert np.array_equal(controller.act(observation, None), forward(observation))

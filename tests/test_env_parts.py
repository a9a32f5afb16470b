"""Observation and reward objects passed in: through gym.make, gym.make_vec, the SB3 adapter,
the runner's command line and training configs; and the validation of the env arguments."""

from __future__ import annotations

import json

import gymnasium as gym
import numpy as np
import pytest
from custom_env_parts import OBS_SIZE, ArrivalReward, CentroidObservation
from gymnasium.utils.env_checker import check_env as gym_check_env
from stable_baselines3.common.env_checker import check_env as sb3_check_env

import flockward  # noqa: F401  (registers the ids)
from flockward.controller import INFORMATION_LEVELS, InformationLevel
from flockward.task.env import DivertEnv
from flockward.task.env_config import ENV_ARGUMENTS, EnvConfig
from flockward.task.observation import VectorObservation
from flockward.task.outcome import Outcome
from flockward.task.registration import ENV_ID
from flockward.task.reward import REWARD_TERMS, HerdingReward
from flockward_baselines import sb3
from flockward_baselines.cli import main
from flockward_baselines.train import load_train_config, make_training_env

SHORT = {"episode.max_steps": 60}
OBS_PATH = "custom_env_parts:CentroidObservation"
REWARD_PATH = "custom_env_parts:ArrivalReward"


def _expected_obs(env: DivertEnv, steps: int) -> np.ndarray:
    """CentroidObservation written out from the env's public state."""
    state = env.state
    centroid = state.bird_pos.mean(axis=0)
    offset = (state.drone_pos[0] - centroid) / env.scenario.flock.alarm_radius
    return np.array([*offset, steps], dtype=np.float32)


@pytest.mark.parametrize(
    ("observation", "reward"),
    [(CentroidObservation(), ArrivalReward()), (OBS_PATH, REWARD_PATH)],
    ids=["objects", "import-paths"],
)
def test_custom_parts_through_gym_make(observation, reward):
    # One decision per control step: the expectations below are per control step.
    env = gym.make(
        ENV_ID, scenario="trio", observation=observation, reward=reward, decision_steps=1
    )
    inner = env.unwrapped
    assert env.observation_space == gym.spaces.Box(-np.inf, np.inf, (OBS_SIZE,), np.float32)
    obs, info = env.reset(seed=2)
    np.testing.assert_allclose(obs, _expected_obs(inner, 0), rtol=1e-5, atol=1e-6)
    rng = np.random.default_rng(0)
    for step in range(1, 40):
        obs, reward_value, terminated, truncated, info = env.step(rng.uniform(-1, 1, 2))
        np.testing.assert_allclose(obs, _expected_obs(inner, step), rtol=1e-5, atol=1e-6)
        terms = info["reward_terms"]
        assert list(terms) == ["arrival", "breach", "outside"]
        assert terms["arrival"] == float(info["outcome"] == "success")
        outside = inner.state.count - info["birds_in_goal"]
        assert terms["outside"] == pytest.approx(-0.001 * outside)
        assert reward_value == sum(info["reward_terms"].values())
        if terminated or truncated:
            break


def test_one_object_configures_several_envs_independently():
    # The task copies the object, so two envs sharing one instance keep separate step counts.
    shared = CentroidObservation()
    a = DivertEnv("trio", observation=shared)
    b = DivertEnv("trio", observation=shared)
    a.reset(seed=0)
    b.reset(seed=0)
    for _ in range(3):
        obs_a, *_ = a.step(np.zeros(2))
    obs_b, *_ = b.step(np.zeros(2))
    assert (obs_a[2], obs_b[2]) == (3.0, 1.0)


def test_custom_parts_pass_the_checkers():
    # Gymnasium's and Stable-Baselines3's environment checkers on a user's observation.
    env = DivertEnv("headon", overrides=SHORT, observation=OBS_PATH, reward=REWARD_PATH)
    gym_check_env(env, skip_render_check=True)
    sb3_check_env(DivertEnv("headon", overrides=SHORT, observation=OBS_PATH), warn=True)


@pytest.mark.parametrize("threads", [1, 2, 4])
def test_custom_parts_through_make_vec_match_single_envs(threads, monkeypatch):
    # Whatever the thread count (FLOCKWARD_THREADS), bit for bit.
    monkeypatch.setenv("FLOCKWARD_THREADS", str(threads))
    venv = gym.make_vec(
        ENV_ID,
        num_envs=3,
        vectorization_mode="vector_entry_point",
        scenario="trio",
        overrides={"episode.max_steps": 25},
        observation=CentroidObservation(),
        reward=REWARD_PATH,
        decision_steps=1,
    )
    singles = [DivertEnv("trio", overrides={"episode.max_steps": 25}, observation=OBS_PATH,
                         reward=ArrivalReward(), decision_steps=1) for _ in range(3)]  # fmt: skip
    obs, _ = venv.reset(seed=7)
    expected = [env.reset(seed=7 + i)[0] for i, env in enumerate(singles)]
    np.testing.assert_array_equal(obs, np.stack(expected))
    rng = np.random.default_rng(1)
    for _ in range(25):  # stops before the vector env's autoreset step
        actions = rng.uniform(-1, 1, (3, 2))
        obs, reward, *_ = venv.step(actions)
        steps = [env.step(a) for env, a in zip(singles, actions, strict=True)]
        np.testing.assert_array_equal(obs, np.stack([s[0] for s in steps]))
        np.testing.assert_array_equal(reward, [s[1] for s in steps])
    venv.close()


def test_custom_parts_through_the_sb3_adapter():
    venv = sb3.make_vec_env(num_envs=2, seed=0, scenario="trio", observation=OBS_PATH,
                            reward=REWARD_PATH, max_episode_steps=5, decision_steps=1)  # fmt: skip
    obs = venv.reset()
    assert obs.shape == (2, OBS_SIZE) and (obs[:, 2] == 0).all()
    for _ in range(5):
        obs, _, dones, infos = venv.step(np.zeros((2, 2)))
    # The fifth step ends both episodes: the fresh observation restarts the step count.
    assert dones.all() and (obs[:, 2] == 0).all()
    assert [info["terminal_observation"][2] for info in infos] == [5.0, 5.0]
    assert set(infos[0]["reward_terms"]) == {"arrival", "breach", "outside"}


def test_sb3_adapter_arguments_are_the_env_config_fields():
    with pytest.raises(TypeError, match="unknown environment argument"):
        sb3.make_vec_env(num_envs=1, observaton="vector")
    try:
        sb3.make_vec_env(num_envs=1, observaton="vector")
    except TypeError as error:
        assert all(name in str(error) for name in ENV_ARGUMENTS)
    with pytest.raises(ValueError, match="does not render"):
        sb3.make_vec_env(num_envs=1, render_mode="rgb_array")


def test_default_parts_are_the_shipped_ones():
    # Regression test: the default reward's terms and order, and the default observation.
    config = EnvConfig()
    assert isinstance(config.make_reward(), HerdingReward)
    assert type(config.make_observation()) is VectorObservation
    env = DivertEnv("headon", observation=VectorObservation(), reward=HerdingReward())
    ref = DivertEnv("headon")
    np.testing.assert_array_equal(env.reset(seed=4)[0], ref.reset(seed=4)[0])
    for _ in range(30):
        a, b = env.step(np.array([0.3, 0.9])), ref.step(np.array([0.3, 0.9]))
        np.testing.assert_array_equal(a[0], b[0])
        assert a[1] == b[1] and tuple(a[4]["reward_terms"]) == REWARD_TERMS


@pytest.mark.parametrize(
    ("kwargs", "needle"),
    [
        ({"observation": "vectr"}, "observation = 'vectr': allowed 'vector', 'dict'"),
        ({"observation": "nowhere.mod:Obs"}, "cannot import module 'nowhere.mod'"),
        ({"observation": "custom_env_parts:Missing"}, "has no class 'Missing'"),
        ({"observation": "custom_env_parts:NotAnObservation"}, "method(s) space, build"),
        ({"observation": "custom_env_parts:"}, "expected an import path"),
        ({"observation": CentroidObservation}, "needs an instance"),
        ({"reward": "custom_env_parts:CentroidObservation"}, "method(s) terms"),
        ({"reward": "sparse"}, "reward = 'sparse': allowed 'herding'"),
        ({"rim_birds": 0}, "rim_birds = 0: must be an integer in [1, 64]"),
        ({"rim_birds": 2.5}, "rim_birds = 2.5"),
        ({"max_birds": 0}, "max_birds = 0: must be an integer >= 1"),
        ({"max_birds": 2}, "max_birds = 2: must be at least the scenario's largest flock (50)"),
        ({"max_episode_steps": 0}, "max_episode_steps = 0: must be an integer >= 1"),
        ({"neighbour_search": "kd"}, "neighbour_search = 'kd': allowed auto, all-pairs, grid"),
        ({"render_mode": "ansi"}, "render_mode = 'ansi': allowed None, human, rgb_array"),
        ({"overrides": ["flock.count"]}, "overrides = ['flock.count']: must be a dict"),
    ],
)
def test_bad_env_argument_is_one_clear_line(kwargs, needle):
    with pytest.raises(ValueError) as caught:
        DivertEnv("headon", **kwargs)
    message = str(caught.value)
    assert needle in message and "\n" not in message


def test_unknown_env_argument_lists_the_allowed_ones():
    with pytest.raises(TypeError, match=r"unknown environment argument.*allowed: scenario"):
        gym.make(ENV_ID, rim_bird=3)


def test_env_config_is_one_frozen_record_for_every_face():
    config = EnvConfig(scenario="trio", observation=OBS_PATH, max_episode_steps=9)
    env = DivertEnv(config)
    venv = gym.make_vec(ENV_ID, num_envs=2, vectorization_mode="vector_entry_point", config=config)
    adapter = sb3.FlockwardVecEnv(2, config)
    assert env.config is venv.unwrapped.config is adapter.config is config
    assert env.observation_space == venv.unwrapped.single_observation_space
    assert adapter.observation_space == env.observation_space
    with pytest.raises(ValueError, match="must be set in it"):
        DivertEnv(config, rim_birds=3)
    with pytest.raises(AttributeError):
        config.rim_birds = 3


def test_one_env_id_and_enum_values():
    assert sb3.ENV_ID is ENV_ID
    # StrEnum members equal the strings stored in result files.
    assert [o.value for o in Outcome] == ["running", "success", "breach", "timeout", "error"]
    assert Outcome.SUCCESS == "success" and json.dumps(Outcome.BREACH) == '"breach"'
    assert INFORMATION_LEVELS == ("observation", "state", "sensed") == tuple(InformationLevel)


TINY = """
name = "tiny"
version = 1
[[entry]]
scenario = "trio"
overrides = { "episode.max_steps" = 30 }
seeds = [3, 4]
"""


def test_cli_run_applies_observation_and_reward(tmp_path, capsys):
    suite = tmp_path / "tiny.toml"
    suite.write_text(TINY, encoding="utf-8")
    base = ["run", "--suite", str(suite), "--controller", "custom_env_parts:ChaseCentroid"]
    args = [*base, "--results", str(tmp_path), "--observation", OBS_PATH, "--reward", REWARD_PATH]
    assert main(args) == 0
    data = json.loads((tmp_path / "tiny" / "custom-env-parts-chasecentroid.json").read_text())
    assert data["environment"] == {"observation": OBS_PATH, "reward": REWARD_PATH}
    # ChaseCentroid raises on any observation but CentroidObservation's.
    assert [ep["outcome"] for ep in data["episodes"]] != ["error", "error"]
    assert all(ep["error"] is None for ep in data["episodes"])
    # ArrivalReward's return: -0.001 per bird outside the goal per step, nothing else here.
    for ep in data["episodes"]:
        if ep["outcome"] == "timeout" and ep["breached_birds"] == 0:
            assert ep["episode_return"] == pytest.approx(-0.001 * 3 * 30)
    capsys.readouterr()
    # Resuming with other environment arguments is refused; the default observation fails the
    # controller, which shows the option reaches the episodes.
    assert main([*base, "--results", str(tmp_path), "--reward", REWARD_PATH]) == 2
    assert "different environment arguments" in capsys.readouterr().err
    assert main([*base, "--results", str(tmp_path / "plain")]) == 3  # episodes errored
    assert "expected CentroidObservation" in capsys.readouterr().err
    plain = json.loads(
        (tmp_path / "plain" / "tiny" / "custom-env-parts-chasecentroid.json").read_text()
    )
    assert "environment" not in plain
    assert all("expected CentroidObservation" in ep["error"] for ep in plain["episodes"])


def test_cli_run_rejects_a_bad_observation_in_one_line(tmp_path, capsys):
    args = ["run", "--suite", "smoke", "--controller", "idle", "--results", str(tmp_path)]
    assert main([*args, "--observation", "custom_env_parts:Missing"]) == 2
    err = capsys.readouterr().err.strip()
    assert err == (
        "observation = 'custom_env_parts:Missing': module 'custom_env_parts' has no class 'Missing'"
    )


TRAIN = """
name = "tiny"
algorithm = "ppo"
scenarios = ["trio", "headon"]
num_envs = 4
{extra}
"""


def test_training_config_selects_observation_and_reward(tmp_path):
    path = tmp_path / "tiny.toml"
    path.write_text(TRAIN.format(extra=f'observation = "{OBS_PATH}"\nreward = "{REWARD_PATH}"'))
    config = load_train_config(path)
    assert (config.observation, config.reward) == (OBS_PATH, REWARD_PATH)
    venv = make_training_env(config)
    assert venv.observation_space.shape == (OBS_SIZE,)
    venv.reset()
    *_, infos = venv.step(np.zeros((4, 2)))
    assert venv.observation_space.shape == (OBS_SIZE,) and len(infos) == 4


def test_training_config_rejects_a_bad_reward_in_one_line(tmp_path):
    from flockward.config.scenarios import ConfigError

    path = tmp_path / "tiny.toml"
    path.write_text(TRAIN.format(extra='reward = "custom_env_parts:NotAnObservation"'))
    with pytest.raises(ConfigError, match=r"tiny.toml: key reward = .*method\(s\) terms"):
        load_train_config(path)

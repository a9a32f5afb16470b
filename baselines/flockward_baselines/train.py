"""`flockward train`: Stable-Baselines3 training from a TOML config, on the native batched core.

A training config names the algorithm, its hyperparameters, the scenarios to train on (several
scenarios make a randomised mix: each gets an equal share of the worlds), a seed, and a held-out
validation suite evaluated periodically with the deterministic policy. A run directory receives
TensorBoard and CSV logs, checkpoints, ``eval.csv``, the learning curve ``curve.csv`` (success
and breach-free rates on fixed seeded episodes of each training scenario against environment and
simulator steps, see ``flockward_baselines.curves``), the final ``model.zip``, the best-validated
``best_model.zip`` and ``training_curve.png``. One environment step is one decision: the action is
held for ``decision_steps`` control steps, and the reward's shaping discount per control step is
derived from the algorithm's gamma (``TrainConfig.env_overrides``). An optional ``[pretrain]``
table first clones a scripted expert's actions (behaviour cloning) so that reinforcement learning
starts from a policy that already reaches the flock; the clone's action deviation is set to its
error on the demonstrations so that PPO's first updates keep it, and the critic may first be
fitted alone to the clone's returns (``critic_warmup``). ``--resume`` continues from the newest
checkpoint.
"""

from __future__ import annotations

import csv
import json
import math
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from flockward.config.atomic import atomic_path
from flockward.config.files import ConfigError, list_scenarios, read_toml
from flockward.config.files import label as file_label
from flockward.config.scenarios import load_scenario
from flockward.config.schema import Origin, Spec, convert
from flockward.controller import Controller, StateView
from flockward.sim.types import Scenario
from flockward.task.env_config import EnvConfig
from flockward_baselines.curriculum import MODES, CurriculumSettings, family_configs
from flockward_baselines.curves import CurvePoint, curve_point, read_curve, write_curve

if TYPE_CHECKING:  # Stable-Baselines3 is optional: imported where training needs it
    import torch
    from stable_baselines3 import PPO, SAC
    from stable_baselines3.common.base_class import BaseAlgorithm
    from stable_baselines3.common.callbacks import BaseCallback
    from stable_baselines3.common.policies import ActorCriticPolicy
    from stable_baselines3.common.vec_env import VecEnv

ALGORITHMS = ("ppo", "sac")
CURVE_FILE = "curve.csv"
CURRICULUM_FILE = "curriculum.csv"  # slots per tier at each curve point, with a curriculum
RESUMED_STEPS = "resumed_simulator_steps"  # set on a resumed run's env: control steps before it


def _int(lo: int, hi: int) -> Spec:
    """An integer key allowed in [lo, hi]."""
    return Spec("int", lo, hi)


def _float(lo: float, hi: float) -> Spec:
    """A number key allowed in [lo, hi]."""
    return Spec("float", lo, hi)


# Hyperparameters a config may set, per algorithm. Anything else is an error.
HYPERPARAMETERS: dict[str, dict[str, Spec]] = {
    "ppo": {
        "learning_rate": _float(1e-7, 1.0),
        "n_steps": _int(8, 100_000),
        "batch_size": _int(8, 1_000_000),
        "n_epochs": _int(1, 100),
        "gamma": _float(0.0, 1.0),
        "gae_lambda": _float(0.0, 1.0),
        "clip_range": _float(0.0, 10.0),
        "ent_coef": _float(0.0, 1.0),
        "vf_coef": _float(0.0, 10.0),
        "max_grad_norm": _float(0.0, 100.0),
        "use_sde": Spec("bool"),
        "sde_sample_freq": _int(-1, 100_000),
    },
    "sac": {
        "learning_rate": _float(1e-7, 1.0),
        "buffer_size": _int(1000, 10_000_000),
        "learning_starts": _int(0, 10_000_000),
        "batch_size": _int(8, 100_000),
        "tau": _float(0.0, 1.0),
        "gamma": _float(0.0, 1.0),
        "train_freq": _int(1, 100_000),
        "gradient_steps": _int(-1, 100_000),
    },
}
NET_ARCH_MAX = 1024  # units per hidden layer

# Optional [pretrain] table: clone a scripted expert's actions before reinforcement learning.
PRETRAIN: dict[str, Spec] = {
    "episodes": _int(1, 10_000),  # demonstration episodes per training scenario
    "epochs": _int(1, 10_000),  # passes over the demonstrations
    "learning_rate": _float(1e-7, 1.0),
    "batch_size": _int(8, 1_000_000),
    # the policy's action standard deviation once cloned; left out, the clone's root-mean-square
    # error on the demonstrations per action dimension (the maximum-likelihood value given the
    # fitted mean), at least CLONE_STD_FLOOR
    "clone_std": _float(0.01, 1.0),
    # rollouts of the cloned policy whose returns fit the critic alone before PPO starts (the
    # actor frozen), so that PPO's first advantages are not read off an untrained critic
    "critic_warmup": _int(0, 10_000),
}
# Optional [curriculum] table: worlds promoted up a tiered suite (flockward_baselines.curriculum).
CURRICULUM: dict[str, Spec] = {
    "window": _int(1, 1000),
    "promote_at": _float(0.0, 1.0),
    "review": _float(0.0, 1.0),
}
CLONE_STD_FLOOR = 0.05  # a clone that fits its expert exactly still explores a little
DEMO_SEED = 100_000  # demonstration seeds start here, clear of every shipped suite's seeds


@dataclass(frozen=True)
class TrainConfig:
    """A validated training config (see configs/train/*.toml for commented examples).

    The defaults here are the only ones: a key a config leaves out takes its field's default.
    """

    name: str
    algorithm: str
    scenarios: tuple[str, ...]
    seed: int = 0
    total_timesteps: int = 100_000  # environment steps summed over all worlds
    num_envs: int = 16  # worlds, shared out evenly between the scenarios
    overrides: dict[str, Any] = field(default_factory=dict)  # applied to every scenario
    eval_suite: str = "validation"
    eval_every: int = 200_000  # environment steps between validation runs (0: only at the end)
    checkpoint_every: int = 200_000  # environment steps between checkpoints
    # environment steps between learning-curve points (0: only at the start and the end): the
    # deterministic policy plays curve_episodes fixed seeds per training scenario (curve.csv)
    curve_every: int = 50_000
    curve_episodes: int = 20
    # control steps each action is held (None: each scenario's episode.decision_steps); one
    # environment step of training is one decision
    decision_steps: int | None = None
    torch_threads: int = 1
    net_arch: tuple[int, ...] = (64, 64)
    hyperparameters: dict[str, Any] = field(default_factory=dict)
    pretrain: dict[str, Any] | None = None  # behaviour cloning of a scripted expert, see PRETRAIN
    # worlds promoted up a tiered suite instead of a fixed scenario mix (flockward_baselines.
    # curriculum); its families replace ``scenarios``
    curriculum: CurriculumSettings | None = None
    observation: str = "vector"  # shipped observation name or import path package.module:Name
    reward: str = "herding"  # shipped reward name or import path package.module:Name
    source_file: str = ""

    @property
    def env_options(self) -> dict[str, Any]:
        """Environment arguments shared by training, demonstrations and validation."""
        options: dict[str, Any] = {"observation": self.observation, "reward": self.reward}
        if self.decision_steps is not None:
            options["decision_steps"] = self.decision_steps
        return options

    @property
    def gamma(self) -> float:
        """The algorithm's discount per decision: the config's, else Stable-Baselines3's default."""
        if "gamma" in self.hyperparameters:
            return float(self.hyperparameters["gamma"])
        return sb3_default_gamma(self.algorithm)

    @property
    def env_overrides(self) -> dict[str, Any]:
        """The training worlds' overrides: the config's, with reward.gamma set to the agent's
        gamma so the shaping discount per control step is derived from it."""
        return {**self.overrides, "reward.gamma": self.gamma}

    def worlds(self) -> list[EnvConfig]:
        """The environment config of each training scenario, or of each family of the
        curriculum's suite: what the learning curve plays."""
        if self.curriculum is not None:
            from flockward.bench.suites import load_suite

            suite = load_suite(self.curriculum.suite)
            return family_configs(suite, self.env_options, self.env_overrides)
        return [
            EnvConfig(scenario=s, overrides=self.env_overrides, **self.env_options)
            for s in self.scenarios
        ]


def sb3_default_gamma(algorithm: str) -> float:
    """Stable-Baselines3's default gamma of an algorithm (read from its signature)."""
    import inspect

    cls = _algorithm_class(algorithm)
    return float(inspect.signature(cls).parameters["gamma"].default)


# Numeric top-level keys, each a TrainConfig field.
_TOP_KEYS: dict[str, Spec] = {
    "seed": _int(0, 2**31 - 1),
    "total_timesteps": _int(1, 10**10),
    "num_envs": _int(1, 4096),
    "eval_every": _int(0, 10**10),
    "checkpoint_every": _int(1, 10**10),
    "curve_every": _int(0, 10**10),
    "curve_episodes": _int(1, 1000),
    "decision_steps": _int(1, 1000),
    "torch_threads": _int(1, 64),
}


# Top-level keys a config may hold: names, tables and the numeric _TOP_KEYS.
_ALLOWED_KEYS = frozenset(
    {"name", "algorithm", "scenarios", "overrides", "eval_suite", "net_arch", "pretrain"}
    | {"curriculum"}
    | {"observation", "reward"}
    | set(_TOP_KEYS)
    | set(ALGORITHMS)
)


def load_train_config(path: str | Path) -> TrainConfig:
    """Read and validate a training config; errors are one-line ConfigErrors."""
    path = Path(path)
    raw = read_toml(path)
    label = file_label(path)
    top = Origin(label, "")
    for key in raw:
        if key not in _ALLOWED_KEYS:
            raise ConfigError(
                f"{label}: unknown key '{key}'; allowed: {', '.join(sorted(_ALLOWED_KEYS))}"
            )
    algorithm = raw.get("algorithm")
    if not isinstance(algorithm, str) or algorithm not in ALGORITHMS:
        raise ConfigError(
            f"{label}: key 'algorithm' = {algorithm!r}: must be one of {', '.join(ALGORITHMS)}"
        )
    name = raw.get("name", path.stem)
    if not isinstance(name, str) or not name.replace("-", "").replace("_", "").isalnum():
        raise ConfigError(f"{label}: key 'name' = {name!r}: must be letters, digits, '-' or '_'")
    given = _optional_settings(raw, algorithm, top)
    if "curriculum" in raw:
        given["curriculum"] = _curriculum(raw, top.child("curriculum"))
        scenarios: list[str] = []
        overrides = _overrides(raw, label)
    else:
        scenarios, overrides = _scenarios(raw, label)
    config = TrainConfig(
        name=name,
        algorithm=algorithm,
        scenarios=tuple(scenarios),
        overrides=dict(overrides),
        source_file=label,
        **given,
    )
    if config.num_envs < len(scenarios):
        raise top.child("num_envs").error(
            config.num_envs,
            f"must be at least the number of scenarios ({len(scenarios)}), one world each at least",
        )
    _check_discount(config, label)
    return config


def _curriculum(raw: dict[str, object], origin: Origin) -> CurriculumSettings:
    """The [curriculum] table: a tiered suite, a mode and the CURRICULUM settings."""
    from flockward.bench.suites import load_suite

    table = raw["curriculum"]
    if not isinstance(table, dict):
        raise origin.error(table, "must be a table with suite = a tiered suite's name or path")
    if "scenarios" in raw:
        raise ConfigError(
            f"{origin.file}: key 'curriculum' replaces key 'scenarios' (its suite's families "
            "are the training worlds): give one or the other"
        )
    if "pretrain" in raw:
        raise ConfigError(
            f"{origin.file}: key 'curriculum' cannot be combined with [pretrain]: give one or "
            "the other"
        )
    settings = {k: v for k, v in table.items() if k not in ("suite", "mode")}
    for key in settings:
        if key not in CURRICULUM:
            raise origin.unknown(key, ["suite", "mode", *CURRICULUM])
    mode = table.get("mode", "promote")
    if mode not in MODES:
        raise origin.child("mode").error(mode, "must be one of " + ", ".join(MODES))
    suite = table.get("suite", "ladder")
    if not isinstance(suite, str):
        raise origin.child("suite").error(suite, "must be a suite name or TOML path")
    try:
        tiers = {entry.tier for entry in load_suite(suite).entries}
    except ConfigError as error:
        raise ConfigError(f"{origin.file}: key 'curriculum.suite': {error}") from None
    if mode == "promote" and len(tiers) < 2:
        raise origin.child("suite").error(suite, "must have at least two tiers to promote along")
    return CurriculumSettings(suite=suite, mode=str(mode),
                              **_checked_table(settings, CURRICULUM, origin))  # fmt: skip


def _check_discount(config: TrainConfig, label: str) -> None:
    """The shaping discount follows from the agent's gamma: an override of reward.gamma that
    differs from it, or a reward.discount that differs from the derived value, is an error."""
    given = config.overrides.get("reward.gamma")
    if given is not None and given != config.gamma:
        raise ConfigError(
            f"{label}: key 'overrides' entry 'reward.gamma' = {given!r}: must equal the "
            f"{config.algorithm} gamma ({config.gamma!r}) or be left out (training sets it)"
        )
    k = config.decision_steps
    steps = {} if k is None else {"episode.decision_steps": k}
    key = "curriculum.suite" if config.curriculum is not None else "scenarios"
    for world in config.worlds():
        overrides = {**(world.overrides or {}), **steps}
        try:
            load_scenario(world.scenario, overrides)  # type: ignore[arg-type]
        except ConfigError as error:
            raise ConfigError(
                f"{label}: key '{key}' entry {str(world.scenario)!r} with {config.algorithm} "
                f"gamma {config.gamma!r}: {error}"
            ) from None


def _scenarios(raw: dict[str, object], label: str) -> tuple[list[str], dict[str, Any]]:
    """The training scenarios and the overrides applied to each, every one loaded as a check."""
    scenarios = raw.get("scenarios")
    if (
        not isinstance(scenarios, list)
        or not scenarios
        or not all(isinstance(s, str) for s in scenarios)
    ):
        raise ConfigError(
            f"{label}: key 'scenarios' = {scenarios!r}: must be a non-empty list of scenario "
            f"names ({', '.join(list_scenarios())}) or TOML paths"
        )
    overrides = _overrides(raw, label)
    for scenario in scenarios:
        try:
            load_scenario(scenario, overrides)
        except ConfigError as error:
            raise ConfigError(f"{label}: key 'scenarios' entry {scenario!r}: {error}") from None
    return scenarios, overrides


def _overrides(raw: dict[str, object], label: str) -> dict[str, Any]:
    """The config's overrides table (empty when absent)."""
    overrides = raw.get("overrides", {})
    if not isinstance(overrides, dict):
        raise ConfigError(f"{label}: key 'overrides' = {overrides!r}: must be a table")
    return overrides


def _optional_settings(raw: dict[str, object], algorithm: str, top: Origin) -> dict[str, Any]:
    """The TrainConfig fields a config may set beyond name, algorithm and scenarios, checked."""
    label = top.file
    given: dict[str, Any] = {
        key: convert(raw[key], spec, top.child(key))
        for key, spec in _TOP_KEYS.items()
        if key in raw
    }
    if "net_arch" in raw:
        given["net_arch"] = _net_arch(raw["net_arch"], label)
    given["hyperparameters"] = _hyperparameters(raw, algorithm, top)
    if "pretrain" in raw:
        given["pretrain"] = _pretrain(raw["pretrain"], top.child("pretrain"))
    if "eval_suite" in raw:
        if not isinstance(raw["eval_suite"], str):
            raise ConfigError(
                f"{label}: key 'eval_suite' = {raw['eval_suite']!r}: must be a suite name"
            )
        given["eval_suite"] = raw["eval_suite"]
    given |= _env_parts(raw, top)
    return given


def _net_arch(net_arch: object, label: str) -> tuple[int, ...]:
    """Hidden layer widths, each in [1, NET_ARCH_MAX]."""
    if (
        not isinstance(net_arch, list)
        or not net_arch
        or not all(
            isinstance(u, int) and not isinstance(u, bool) and 1 <= u <= NET_ARCH_MAX
            for u in net_arch
        )
    ):
        raise ConfigError(
            f"{label}: key 'net_arch' = {net_arch!r}: must be a list of layer widths in "
            f"[1, {NET_ARCH_MAX}]"
        )
    return tuple(net_arch)


def _hyperparameters(raw: dict[str, object], algorithm: str, top: Origin) -> dict[str, Any]:
    """The chosen algorithm's table; another algorithm's table is refused, not ignored."""
    label = top.file
    for algo in ALGORITHMS:
        if algo in raw and algo != algorithm:
            raise ConfigError(
                f"{label}: key '{algo}' = table: does not apply to algorithm '{algorithm}'"
            )
    table = raw.get(algorithm, {})
    if not isinstance(table, dict):
        raise ConfigError(f"{label}: key '{algorithm}' = {table!r}: must be a table")
    return _checked_table(table, HYPERPARAMETERS[algorithm], top.child(algorithm))


def _env_parts(raw: dict[str, object], top: Origin) -> dict[str, str]:
    """The observation and reward a config names, checked by building the environment config."""
    parts: dict[str, str] = {}
    for key in ("observation", "reward"):
        if key not in raw:
            continue
        value = raw[key]
        if not isinstance(value, str):
            raise top.child(key).error(
                value, "must be a name or an import path 'package.module:Name'"
            )
        parts[key] = value
    try:
        EnvConfig.from_options(**parts)
    except ValueError as error:
        raise ConfigError(f"{top.file}: key {error}") from None
    return parts


def _checked_table(table: dict[str, Any], specs: dict[str, Spec], origin: Origin) -> dict[str, Any]:
    """A table's keys checked against their specs; an unlisted key is an error."""
    for key in table:
        if key not in specs:
            raise origin.unknown(key, sorted(specs))
    return {key: convert(value, specs[key], origin.child(key)) for key, value in table.items()}


def _pretrain(table: object, origin: Origin) -> dict[str, Any]:
    """The [pretrain] table: a built-in expert plus optional PRETRAIN settings."""
    if not isinstance(table, dict) or not isinstance(table.get("expert"), str):
        raise origin.error(table, "must be a table with expert = a built-in controller name")
    from flockward_baselines.controllers import BUILTIN

    if table["expert"] not in BUILTIN:
        raise origin.child("expert").error(table["expert"], "must be one of " + ", ".join(BUILTIN))
    settings = {key: value for key, value in table.items() if key != "expert"}
    for key in settings:
        if key not in PRETRAIN:
            raise origin.unknown(key, ["expert", *PRETRAIN])
    return {"expert": table["expert"], **_checked_table(settings, PRETRAIN, origin)}


def make_training_env(config: TrainConfig) -> VecEnv:
    """The SB3 VecEnv of the config: one adapter, a mix of one adapter per scenario, or the
    curriculum's worlds."""
    from flockward_baselines.sb3 import (
        CurriculumVecEnv,
        FlockwardVecEnv,
        MixedVecEnv,
        make_vec_env,
    )

    if config.curriculum is not None:
        from flockward.bench.suites import load_suite

        suite = load_suite(config.curriculum.suite)
        return CurriculumVecEnv(suite, config.curriculum, config.num_envs, config.seed,
                                config.env_options, config.env_overrides)  # fmt: skip

    k = len(config.scenarios)
    shares = [config.num_envs // k + (1 if i < config.num_envs % k else 0) for i in range(k)]
    parts: list[FlockwardVecEnv] = []
    first_seed = config.seed
    for scenario, worlds in zip(config.scenarios, shares, strict=True):
        parts.append(
            make_vec_env(
                num_envs=worlds,
                seed=first_seed,
                scenario=scenario,
                overrides=config.env_overrides,
                **config.env_options,
            )
        )
        first_seed += worlds
    return parts[0] if k == 1 else MixedVecEnv(parts)


def _model_controller(model: BaseAlgorithm) -> Controller:
    """A Controller playing an in-memory SB3 model deterministically (for validation)."""

    class _InMemory(Controller):
        name = "training-policy"
        information_level = "observation"

        def act(self, observation: Any, state: StateView | None) -> np.ndarray:
            action, _ = model.predict(observation, deterministic=True)
            return np.asarray(action, dtype=np.float64).reshape(-1)

    return _InMemory()


def demonstrations(config: TrainConfig) -> tuple[np.ndarray, np.ndarray]:
    """Observations and clipped actions of the expert playing every training scenario."""
    from flockward.bench.episode import play_episode
    from flockward_baselines.controllers import make_controller

    observations: list[np.ndarray] = []
    actions: list[np.ndarray] = []

    def record(obs: Any, action: np.ndarray) -> None:
        observations.append(np.asarray(obs, dtype=np.float32))
        actions.append(np.clip(action, -1.0, 1.0).astype(np.float32))

    pretrain = _pretrain_settings(config)
    for k, name in enumerate(config.scenarios):
        scenario = load_scenario(name, config.overrides)
        for episode in range(pretrain["episodes"]):
            seed = DEMO_SEED + 1000 * k + episode
            play_episode(scenario, make_controller(pretrain["expert"]), seed,
                         env_kwargs=config.env_options, on_action=record)  # fmt: skip
    return np.stack(observations), np.stack(actions)


def _pretrain_settings(config: TrainConfig) -> dict[str, Any]:
    """The config's [pretrain] table; ValueError for a config without one."""
    if config.pretrain is None:
        raise ValueError(f"training config {config.name!r} has no [pretrain] table")
    return config.pretrain


def behaviour_clone(
    model: BaseAlgorithm, observations: np.ndarray, actions: np.ndarray, config: TrainConfig
) -> float:
    """Fit the policy to the demonstrations by maximum likelihood; return the final loss.

    The mean is fitted by gradient steps; the action standard deviation is then set in closed
    form (``clone_std``, by default the clone's own error on the demonstrations). It matters
    for what follows: PPO's clipped ratio bounds each update in units of that deviation, so a
    clone left near Stable-Baselines3's initial deviation of 1 (a few gradient steps barely move
    it) lets one PPO update shift its mean actions by 0.06-0.12 on average (actions span
    [-1, 1]; collect-drive on trio, two seeds), while a deviation near the clone's error keeps
    the shift near 0.02 (``tests/test_train.py`` holds the regression test).
    """
    import torch
    from stable_baselines3.common.policies import ActorCriticPolicy

    settings: dict[str, Any] = {
        "epochs": 20,
        "learning_rate": 1e-3,
        "batch_size": 256,
        **_pretrain_settings(config),
    }
    policy = model.policy
    if not isinstance(policy, ActorCriticPolicy):
        raise ValueError(
            "[pretrain] clones into an actor-critic policy (algorithm 'ppo'); "
            f"{type(policy).__name__} has no action distribution to fit"
        )
    optimiser = torch.optim.Adam(policy.parameters(), lr=settings["learning_rate"])
    x = torch.as_tensor(observations)
    y = torch.as_tensor(actions)
    order = np.random.default_rng(config.seed)
    loss = torch.zeros(())
    for _ in range(settings["epochs"]):
        perm = torch.as_tensor(order.permutation(len(x)))
        for start in range(0, len(x), settings["batch_size"]):
            batch = perm[start : start + settings["batch_size"]]
            loss = -policy.get_distribution(x[batch]).log_prob(y[batch]).mean()
            optimiser.zero_grad()
            torch.autograd.backward(loss)  # loss.backward(), in its annotated spelling
            optimiser.step()
    _set_clone_std(policy, x, y, settings.get("clone_std"))
    return float(loss.item())


def _set_clone_std(
    policy: ActorCriticPolicy, x: torch.Tensor, y: torch.Tensor, std: float | None
) -> None:
    """Set a cloned Gaussian policy's log-std: ``std``, or its error on the demonstrations."""
    import torch

    if policy.use_sde or not isinstance(policy.log_std, torch.nn.Parameter):
        return  # a state-dependent exploration matrix, not one deviation per action
    with torch.no_grad():
        if std is None:
            mean = policy.get_distribution(x).mode().clamp(-1.0, 1.0)  # the Gaussian's mean
            error = ((mean - y) ** 2).mean(dim=0).sqrt().clamp(CLONE_STD_FLOOR, 1.0)
        else:
            error = torch.full_like(policy.log_std, std)
        policy.log_std.copy_(error.log())


def warm_up_critic(model: BaseAlgorithm, rollouts: int) -> float:
    """Fit the critic alone to the returns of the policy as it stands; return the last loss.

    PPO weighs each action by an advantage read off its critic, which is untrained straight
    after cloning. (Measured on trio, the warm-up changed neither how far one update moves the
    clone nor the learning curve; the action deviation, see ``behaviour_clone``, is what keeps
    the clone. The option stays for settings where the critic matters more.) Here
    Stable-Baselines3's own rollout machinery plays the policy (stochastic, as PPO will) for
    ``rollouts`` rollouts of ``n_steps`` per world, and after each one only the critic's
    parameters are fitted (``n_epochs`` passes, ``batch_size`` minibatches, mean squared error)
    to its lambda-returns, recomputed with the improving critic on every rollout. The actor and
    its log-std are not touched. The decisions played count in ``model.num_timesteps``, so a
    run's budget includes them.
    """
    import torch
    from stable_baselines3 import PPO

    if not isinstance(model, PPO):
        raise ValueError(
            "[pretrain] critic_warmup fits a PPO critic; "
            f"{type(model).__name__} has no state-value critic"
        )
    if model.env is None:
        raise ValueError("critic warm-up plays the model's environment; the model has none")
    env = model.env
    policy = model.policy
    critic = [*policy.mlp_extractor.value_net.parameters(), *policy.value_net.parameters()]
    optimiser = torch.optim.Adam(critic, lr=float(model.lr_schedule(1.0)))
    _, callback = model._setup_learn(rollouts * model.n_steps * model.n_envs, None,
                                     reset_num_timesteps=False)  # fmt: skip
    loss = torch.zeros(())
    for _ in range(rollouts):
        model.collect_rollouts(env, callback, model.rollout_buffer, model.n_steps)
        policy.set_training_mode(True)
        for _ in range(model.n_epochs):
            for batch in model.rollout_buffer.get(model.batch_size):
                values = policy.predict_values(batch.observations).flatten()
                loss = torch.nn.functional.mse_loss(values, batch.returns)
                optimiser.zero_grad()
                torch.autograd.backward(loss)
                torch.nn.utils.clip_grad_norm_(critic, model.max_grad_norm)
                optimiser.step()
        policy.set_training_mode(False)
    return float(loss.item())


def validate(
    model: BaseAlgorithm, suite_name: str, env_options: dict[str, Any] | None = None
) -> float:
    """Mean headline score of the deterministic policy over the validation suite."""
    from flockward.bench.episode import play_episode
    from flockward.bench.leaderboard import episode_score
    from flockward.bench.suites import load_suite

    suite = load_suite(suite_name)
    controller = _model_controller(model)
    scores: list[float] = []
    scenarios: dict[str, Scenario] = {}
    for spec in suite.episodes():
        if spec.family not in scenarios:
            scenarios[spec.family] = next(
                e.scenario for e in suite.entries if e.family == spec.family
            )
        record, _ = play_episode(
            scenarios[spec.family], controller, spec.seed, env_kwargs=env_options
        )
        scores.append(episode_score(record.as_dict()))
    return float(np.mean(scores))


def _write_eval_log(path: Path, rows: list[tuple[int, float, float]]) -> None:
    """eval.csv: one row per validation run (timesteps, score, wall seconds)."""
    with atomic_path(path) as tmp, tmp.open("w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["timesteps", "validation_score", "wall_seconds"])
        writer.writerows(rows)


def _read_eval_log(path: Path) -> list[tuple[int, float, float]]:
    """The rows of eval.csv, none if there is no file yet."""
    if not path.is_file():
        return []
    with path.open() as handle:
        reader = csv.DictReader(handle)
        return [
            (int(r["timesteps"]), float(r["validation_score"]), float(r["wall_seconds"]))
            for r in reader
        ]


def _save_atomic(model: BaseAlgorithm, path: Path) -> None:
    """Save the model so that ``path`` holds the old zip or the new one, never half of one."""
    with atomic_path(path, suffix=".partial.zip") as tmp:  # SB3 appends .zip to other names
        model.save(str(tmp))


def _latest_checkpoint(run_dir: Path) -> Path | None:
    """The checkpoint of the most timesteps, None if there is none."""
    found = sorted(
        (run_dir / "checkpoints").glob("step_*.zip"), key=lambda p: int(p.stem.split("_")[1])
    )
    return found[-1] if found else None


def plot_curve(run_dir: Path) -> Path:
    """training_curve.png: success and breach-free rates over simulator steps (curve.csv),
    validation score and mean training episode return over timesteps."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(12, 3.5), dpi=100)
    FigureCanvasAgg(fig)
    rates, left, right = fig.subplots(1, 3)
    points = read_curve(run_dir / CURVE_FILE)
    for scenario in dict.fromkeys(p.scenario for p in points):
        mine = [p for p in points if p.scenario == scenario]
        x = [p.simulator_steps for p in mine]
        (line,) = rates.plot(x, [p.success_rate for p in mine], marker="o", label=scenario)
        rates.plot(x, [p.breach_free_rate for p in mine], linestyle="--", color=line.get_color())
    rates.set(title="success (solid), breach-free (dashed)", xlabel="simulator steps", ylim=(0, 1))
    if points:
        rates.legend(fontsize="small")
    evals = _read_eval_log(run_dir / "eval.csv")
    if evals:
        steps, scores, _ = zip(*evals, strict=True)
        left.plot(steps, scores, marker="o", color="#2a7f62")
    left.set(title="validation score (mean)", xlabel="timesteps", ylim=(0, 1))
    progress = run_dir / "progress.csv"
    if progress.is_file():
        with progress.open() as handle:
            rows = [
                r for r in csv.DictReader(handle) if r.get("rollout/ep_rew_mean") not in (None, "")
            ]
        if rows:
            right.plot(
                [float(r["time/total_timesteps"]) for r in rows],
                [float(r["rollout/ep_rew_mean"]) for r in rows],
                color="#b5542c",
            )
    right.set(title="training episode return (mean)", xlabel="timesteps")
    fig.tight_layout()
    out = run_dir / "training_curve.png"
    with atomic_path(out) as tmp:
        fig.savefig(tmp, format="png")
    return out


def train(
    config: TrainConfig, run_dir: str | Path, resume: bool = False, progress: bool = True
) -> Path:
    """Train (or resume) and return the path of the final model zip."""
    import torch
    from stable_baselines3.common.logger import configure
    from stable_baselines3.common.vec_env import VecMonitor

    torch.set_num_threads(config.torch_threads)
    run_dir = Path(run_dir)
    (run_dir / "checkpoints").mkdir(parents=True, exist_ok=True)
    env = VecMonitor(make_training_env(config))
    checkpoint = _latest_checkpoint(run_dir) if resume else None
    if resume and checkpoint is None:
        raise ValueError(f"--resume: no checkpoint under {run_dir / 'checkpoints'}")
    if checkpoint is not None:
        model = _algorithm_class(config.algorithm).load(str(checkpoint), env=env, device="cpu")
        _restore_progress(env, checkpoint, model.num_timesteps)
    else:
        model = _new_model(config, env, run_dir, progress)
    model.set_logger(configure(str(run_dir), ["csv", "tensorboard"]))
    evals = _read_eval_log(run_dir / "eval.csv") if resume else []
    log = _ValidationLog(
        config, run_dir, evals, time.perf_counter() - (evals[-1][2] if evals else 0.0)
    )
    curve = _CurveLog(config, run_dir, read_curve(run_dir / CURVE_FILE) if resume else [], log)
    if not log.rows and checkpoint is None:
        log.evaluate(model, 0)  # the starting point: untrained, or freshly cloned
    if not curve.points and checkpoint is None:
        curve.evaluate(model, 0, 0)
    warmup = (config.pretrain or {}).get("critic_warmup", 0)
    if checkpoint is None and warmup:
        loss = warm_up_critic(model, warmup)
        if progress:
            print(f"critic warm-up: {model.num_timesteps} decisions, final value loss {loss:.3g}")

    remaining = config.total_timesteps - model.num_timesteps
    if remaining > 0:
        model.learn(
            total_timesteps=remaining,
            callback=_periodic_callback(model, config, run_dir, log, curve, progress),
            reset_num_timesteps=checkpoint is None and model.num_timesteps == 0,
        )
    final = run_dir / "model.zip"
    _save_atomic(model, final)
    if not log.rows or log.rows[-1][0] != model.num_timesteps:
        log.evaluate(model, model.num_timesteps)
    if not curve.points or curve.points[-1].timesteps != model.num_timesteps:
        curve.evaluate(model, model.num_timesteps, simulator_steps(env))
        log_tiers(run_dir, env, model.num_timesteps)
    plot_curve(run_dir)
    env.close()
    return final


def _algorithm_class(algorithm: str) -> type[PPO] | type[SAC]:
    """The SB3 class of a config's algorithm name."""
    from stable_baselines3 import PPO, SAC

    classes: dict[str, type[PPO] | type[SAC]] = {"ppo": PPO, "sac": SAC}
    return classes[algorithm]


def _new_model(config: TrainConfig, env: VecEnv, run_dir: Path, progress: bool) -> PPO | SAC:
    """A fresh model for an empty run directory, cloned from the expert if the config says so."""
    if (run_dir / "model.zip").exists() or _latest_checkpoint(run_dir):
        raise ValueError(
            f"{run_dir} already holds a training run; pass --resume to continue it or choose "
            "another --out directory"
        )
    model = _algorithm_class(config.algorithm)(
        "MlpPolicy",
        env,
        seed=config.seed,
        device="cpu",
        policy_kwargs={"net_arch": list(config.net_arch)},
        **config.hyperparameters,
    )
    if config.pretrain is not None:
        obs, acts = demonstrations(config)
        loss = behaviour_clone(model, obs, acts, config)
        if progress:
            print(f"behaviour cloning of {config.pretrain['expert']}: {len(obs)} steps, "
                  f"final negative log-likelihood {loss:.3f}")  # fmt: skip
    return model


@dataclass
class _ValidationLog:
    """A run's validation scores so far (kept in eval.csv) and its best model (best_model.zip)."""

    config: TrainConfig
    run_dir: Path
    rows: list[tuple[int, float, float]]  # (timesteps, validation score, wall seconds)
    start_wall: float  # s, the perf_counter reading the run's wall seconds count from

    def evaluate(self, model: BaseAlgorithm, steps: int) -> None:
        """Validate, log, and keep the best-scoring policy as best_model.zip."""
        score = validate(model, self.config.eval_suite, self.config.env_options)
        if not self.rows or score > max(e[1] for e in self.rows):
            _save_atomic(model, self.run_dir / "best_model.zip")
        self.rows.append((steps, score, time.perf_counter() - self.start_wall))
        _write_eval_log(self.run_dir / "eval.csv", self.rows)


def log_tiers(run_dir: Path, env: VecEnv, steps: int) -> None:
    """Append the curriculum's slots per tier at ``steps`` decisions to curriculum.csv (nothing
    without a curriculum, or in uniform mode, where slots have no tier)."""
    while not hasattr(env, "ladder") and hasattr(env, "venv"):
        env = env.venv  # through SB3's wrappers (VecMonitor)
    ladder = getattr(env, "ladder", None)
    if ladder is None or ladder.settings.mode == "uniform":
        return
    path = run_dir / CURRICULUM_FILE
    new = not path.is_file()
    with path.open("a", newline="") as handle:
        writer = csv.writer(handle)
        if new:
            writer.writerow(["timesteps", *(f"tier_{t}" for t in ladder.tier_numbers)])
        writer.writerow([steps, *ladder.tier_counts()])


def simulator_steps(env: VecEnv) -> int:
    """Control steps played by the training worlds so far (0 for an env that does not count),
    those before the checkpoint a resumed run started from included."""
    before = int(getattr(env, RESUMED_STEPS, 0))
    while not hasattr(env, "simulator_steps") and hasattr(env, "venv"):
        env = env.venv  # through SB3's wrappers (VecMonitor)
    return before + int(getattr(env, "simulator_steps", 0))


def _save_progress(env: VecEnv, path: Path) -> None:
    """Beside a checkpoint: the control steps played so far and the curriculum's tiers, which
    SB3's zip does not hold, so that ``--resume`` continues the curve and the climb."""
    inner = env
    while not hasattr(inner, "ladder") and hasattr(inner, "venv"):
        inner = inner.venv
    ladder = getattr(inner, "ladder", None)
    state = {
        "simulator_steps": simulator_steps(env),
        "ladder": ladder.state() if ladder is not None else None,
    }
    with atomic_path(path) as tmp:
        tmp.write_text(json.dumps(state), encoding="utf-8")


def _restore_progress(env: VecEnv, checkpoint: Path, decisions: int) -> None:
    """Put back what ``_save_progress`` wrote beside ``checkpoint``; a checkpoint without it
    (an older run) resumes with the count from zero and every world on the first tier."""
    path = checkpoint.with_suffix(".json")
    if not path.is_file():
        return
    try:
        state = json.loads(path.read_text(encoding="utf-8"))
        steps = int(state["simulator_steps"])
        ladder = state["ladder"]
    except (ValueError, KeyError, TypeError) as error:
        raise ValueError(
            f"{path}: not a progress file written with the checkpoint ({error})"
        ) from None
    setattr(env, RESUMED_STEPS, steps)
    inner = env
    while not hasattr(inner, "resume") and hasattr(inner, "venv"):
        inner = inner.venv
    if ladder is not None and hasattr(inner, "resume"):
        inner.resume(ladder, decisions)


@dataclass
class _CurveLog:
    """A run's learning curve so far (kept in curve.csv): success and breach-free rates of the
    deterministic policy on each training scenario's fixed seeded episodes."""

    config: TrainConfig
    run_dir: Path
    points: list[CurvePoint]
    validation: _ValidationLog  # its start_wall is the run's clock

    def evaluate(self, model: BaseAlgorithm, steps: int, sim_steps: int) -> None:
        """Play the curve episodes of every training scenario and append their rates."""

        def policy(obs: Any) -> np.ndarray:
            action, _ = model.predict(obs, deterministic=True)
            return np.asarray(action)

        wall = time.perf_counter() - self.validation.start_wall
        for env in self.config.worlds():
            self.points.append(
                curve_point(policy, env, self.config.curve_episodes, steps, sim_steps, wall)
            )
        write_curve(self.run_dir / CURVE_FILE, self.points)


def _periodic_callback(
    model: BaseAlgorithm,
    config: TrainConfig,
    run_dir: Path,
    log: _ValidationLog,
    curve: _CurveLog,
    progress: bool,
) -> BaseCallback:
    """The callback that, during learning, draws progress, checkpoints and validates."""
    from stable_baselines3.common.callbacks import BaseCallback
    from tqdm import tqdm

    class _Periodic(BaseCallback):
        def __init__(self) -> None:
            super().__init__()
            self.next_eval = (
                (model.num_timesteps // config.eval_every + 1) * config.eval_every
                if config.eval_every
                else math.inf
            )
            self.next_ckpt = (model.num_timesteps // config.checkpoint_every + 1) * (
                config.checkpoint_every
            )
            self.bar = tqdm(
                total=config.total_timesteps,
                initial=model.num_timesteps,
                unit="step",
                disable=not progress,
                dynamic_ncols=True,
            )
            self.next_curve = (
                (model.num_timesteps // config.curve_every + 1) * config.curve_every
                if config.curve_every
                else math.inf
            )
            self.last = model.num_timesteps
            self.tick = time.perf_counter()

        def _on_step(self) -> bool:
            now = self.model.num_timesteps
            if now - self.last >= 2048:
                rate = (now - self.last) / max(time.perf_counter() - self.tick, 1e-9)
                self.bar.update(now - self.last)
                self.bar.set_postfix(
                    steps_per_s=f"{rate:,.0f}",
                    validation=f"{log.rows[-1][1]:.3f}" if log.rows else "-",
                )
                self.last, self.tick = now, time.perf_counter()
            if now >= self.next_ckpt:
                _save_progress(self.training_env, run_dir / "checkpoints" / f"step_{now}.json")
                _save_atomic(self.model, run_dir / "checkpoints" / f"step_{now}.zip")
                self.next_ckpt += config.checkpoint_every
            if now >= self.next_eval:
                log.evaluate(self.model, now)
                self.next_eval += config.eval_every
            if now >= self.next_curve:
                curve.evaluate(self.model, now, simulator_steps(self.training_env))
                log_tiers(run_dir, self.training_env, now)
                self.next_curve += config.curve_every
            return True

        def _on_training_end(self) -> None:
            self.bar.close()

    return _Periodic()

"""The environment's arguments as one validated record, shared by every face of the task.

The single env, the native vector env and the Stable-Baselines3 adapter all take these arguments
(as keywords or as an ``EnvConfig``); a new argument is a new field here and nowhere else. Bad
values raise a one-line ValueError naming the argument, the value and what is allowed.
"""

from __future__ import annotations

import copy
import importlib
from collections.abc import Mapping
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any, TypeAlias, TypeVar, cast

from flockward.config.scenarios import load_scenario
from flockward.sim.types import MAX_DRONES, Scenario
from flockward.task.observation import OBSERVATION_MODES, Observation
from flockward.task.reward import HerdingReward, Reward

NEIGHBOUR_SEARCH = ("auto", "all-pairs", "grid")
RENDER_MODES = ("human", "rgb_array")
REWARDS: dict[str, type[Reward]] = {"herding": HerdingReward}  # shipped rewards by name
RIM_BIRDS_RANGE = (1, 64)
PartT = TypeVar("PartT", Observation, Reward)
DECISION_STEPS_RANGE = (1, 1000)  # as the scenario key episode.decision_steps
DRONE_COUNTS = (0, MAX_DRONES)  # 0: the unherded control, no pursuer in the world


def resolve_scenario(
    scenario: str | Path | Scenario, overrides: Mapping[str, Any] | None = None
) -> Scenario:
    """A Scenario from a shipped name, a TOML path or an existing record (with overrides)."""
    if isinstance(scenario, Scenario):
        if overrides:
            raise ValueError("overrides apply to a scenario name or file, not to a Scenario record")
        return scenario
    return load_scenario(scenario, overrides)


def load_object(spec: str, argument: str) -> object:
    """A new instance of the class named by an import path ``package.module:Name``."""
    module_name, _, attr = spec.partition(":")
    if not module_name or not attr:
        raise ValueError(f"{argument} = {spec!r}: expected an import path 'package.module:Name'")
    try:
        module = importlib.import_module(module_name)
    except ImportError as error:
        raise ValueError(
            f"{argument} = {spec!r}: cannot import module {module_name!r} ({error})"
        ) from None
    cls = getattr(module, attr, None)
    if not isinstance(cls, type):
        raise ValueError(f"{argument} = {spec!r}: module {module_name!r} has no class {attr!r}")
    try:
        return cls()
    except Exception as error:  # a user's constructor may raise anything
        raise ValueError(
            f"{argument} = {spec!r}: {attr}() raised {type(error).__name__}: {error}"
        ) from None


def _part(
    value: object,
    argument: str,
    shipped: Mapping[str, type[PartT]],
    required: tuple[str, ...],
) -> PartT:
    """The observation or reward object an argument names (a fresh one for a string)."""
    obj: object
    if isinstance(value, str):
        if value in shipped:
            obj = shipped[value]()
        elif ":" in value:
            obj = load_object(value, argument)
        else:
            raise ValueError(
                f"{argument} = {value!r}: allowed {', '.join(map(repr, shipped))} or an import "
                "path 'package.module:Name'"
            )
    else:
        obj = value
    missing = [name for name in required if not callable(getattr(obj, name, None))]
    if missing or isinstance(obj, type):
        raise ValueError(
            f"{argument} = {value!r}: needs an instance with method(s) {', '.join(required)} "
            f"(see flockward.task.{argument}.{argument.capitalize()})"
        )
    # Duck typing: any object with the required methods serves, subclass of the ABC or not.
    return cast(PartT, obj)


def _positive_int(name: str, value: object, low: int, high: int | None = None) -> None:
    """A ValueError naming the argument unless ``value`` is an integer in [low, high]."""
    ok = (
        isinstance(value, int)
        and not isinstance(value, bool)
        and value >= low
        and (high is None or value <= high)
    )
    if not ok:
        allowed = f"an integer in [{low}, {high}]" if high is not None else f"an integer >= {low}"
        raise ValueError(f"{name} = {value!r}: must be {allowed}")


@dataclass(frozen=True)
class EnvConfig:
    """Arguments of ``flockward/Divert-v2``, validated on construction.

    ``observation`` and ``reward`` are a shipped name, an import path ``package.module:Name`` of a
    class built with no arguments, or an object (see ``flockward.task.observation.Observation``
    and ``flockward.task.reward.Reward``). Every task takes its own copy of the object.
    """

    scenario: str | Path | Scenario = "headon"  # shipped name, TOML path or Scenario record
    overrides: Mapping[str, Any] | None = None  # dotted scenario keys, checked like the file's
    observation: str | Observation = "vector"  # "vector", "dict", import path or object
    reward: str | Reward = "herding"  # "herding", import path or object
    rim_birds: int = 4  # k, rim birds in the vector observation
    max_birds: int | None = None  # bird slots of the dict observation (None: scenario's largest)
    neighbour_search: str = "auto"  # "auto", "all-pairs" or "grid"
    max_episode_steps: int | None = None  # step limit in control steps (None: the scenario's)
    # control steps each action is held, a decision every decision_steps * dt s (None: the
    # scenario's episode.decision_steps)
    decision_steps: int | None = None
    render_mode: str | None = None  # None, "human" or "rgb_array" (single env only)
    # drones per world: None flies the scenario's (1 unless it lists [[drones]]); 0 is the
    # unherded control (actions accepted and ignored; see StepContext.drone_pos for what
    # observations use in place of the drone); P copies of [pursuer] if the scenario lists none
    drones: int | None = None

    def __post_init__(self) -> None:
        if not isinstance(self.scenario, str | Path | Scenario):
            raise ValueError(
                f"scenario = {self.scenario!r}: must be a shipped name, a TOML path or a Scenario"
            )
        if self.overrides is not None and not isinstance(self.overrides, Mapping):
            raise ValueError(f"overrides = {self.overrides!r}: must be a dict of dotted keys")
        _positive_int("rim_birds", self.rim_birds, *RIM_BIRDS_RANGE)
        if self.drones is not None:
            _positive_int("drones", self.drones, *DRONE_COUNTS)
        if self.max_birds is not None:
            _positive_int("max_birds", self.max_birds, 1)
        if self.max_episode_steps is not None:
            _positive_int("max_episode_steps", self.max_episode_steps, 1)
        if self.decision_steps is not None:
            _positive_int("decision_steps", self.decision_steps, *DECISION_STEPS_RANGE)
        if self.neighbour_search not in NEIGHBOUR_SEARCH:
            raise ValueError(
                f"neighbour_search = {self.neighbour_search!r}: allowed "
                + ", ".join(NEIGHBOUR_SEARCH)
            )
        if self.render_mode is not None and self.render_mode not in RENDER_MODES:
            raise ValueError(
                f"render_mode = {self.render_mode!r}: allowed None, {', '.join(RENDER_MODES)}"
            )
        # Build each part once now, so a bad name or import path fails here, not at first reset.
        self.make_observation()
        self.make_reward()

    @classmethod
    def from_options(cls, first: ConfigOrScenario = None, /, **options: Any) -> EnvConfig:
        """A config from keyword arguments; ``first`` is an EnvConfig or else the scenario."""
        if isinstance(first, EnvConfig):
            if options:
                raise ValueError(
                    f"an EnvConfig was given, so {', '.join(sorted(options))} must be set in it"
                )
            return first
        unknown = sorted(set(options) - set(ENV_ARGUMENTS))
        if unknown:
            raise TypeError(
                f"unknown environment argument(s) {', '.join(unknown)}; allowed: "
                + ", ".join(ENV_ARGUMENTS)
            )
        if first is not None:
            if "scenario" in options:
                raise ValueError("scenario given twice: as the first argument and as a keyword")
            options["scenario"] = first
        return cls(**options)

    def load_scenario(self) -> Scenario:
        """The scenario record, with the overrides applied."""
        return resolve_scenario(self.scenario, self.overrides)

    def make_observation(self) -> Observation:
        """A fresh observation object for one task."""
        return copy.deepcopy(
            _part(self.observation, "observation", OBSERVATION_MODES, ("space", "build"))
        )

    def make_reward(self) -> Reward:
        """A fresh reward object for one task."""
        return copy.deepcopy(_part(self.reward, "reward", REWARDS, ("terms",)))

    def check_scenario(self, scenario: Scenario) -> None:
        """The arguments that depend on the scenario: max_birds must hold its largest flock, a
        scenario that lists its drones is flown with all of them or none."""
        drones = self.drones
        if scenario.drones and drones is not None and drones not in (0, scenario.drone_count):
            raise ValueError(
                f"drones = {drones}: scenario {scenario.name!r} lists {scenario.drone_count} "
                "drones; fly all of them (None) or none (0)"
            )
        if self.max_birds is not None and self.max_birds < scenario.max_birds:
            raise ValueError(
                f"max_birds = {self.max_birds}: must be at least the scenario's largest flock "
                f"({scenario.max_birds})"
            )


ENV_ARGUMENTS = tuple(f.name for f in fields(EnvConfig))
# The first argument of every face: a whole config, or just the scenario (None: the default).
ConfigOrScenario: TypeAlias = EnvConfig | str | Path | Scenario | None

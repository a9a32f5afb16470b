"""flockward: a benchmark for drone controllers that herd bird flocks away from airfields.

Simulation only: not a flight-certified controller. Importing the package registers the Gymnasium
environment ids (see ``flockward.task.registration``).

The core is layered, lowest first: ``flockward.sim`` (records, kernel, world, geometry, metrics),
``flockward.config`` (files, schema, scenarios), ``flockward.task`` (observation, reward, the task
and its Gymnasium faces), ``flockward.bench`` (suites, episodes, runner, leaderboard), plus
``flockward.render`` and ``flockward.controller``. The names most scripts need are importable
from ``flockward`` itself; they load on first use, so ``import flockward`` stays light.
"""

from __future__ import annotations

import importlib
from typing import Any

from flockward import _legacy_paths
from flockward.task.registration import register_envs

__version__ = "0.1.0"

# Public name -> module that defines it (imported on first access).
_PUBLIC: dict[str, str] = {
    "DivertEnv": "flockward.task.env",
    "DivertVectorEnv": "flockward.task.vector_env",
    "DivertTask": "flockward.task.batched",
    "Scenario": "flockward.sim.types",
    "FlockParams": "flockward.sim.types",
    "PursuerParams": "flockward.sim.types",
    "SiteParams": "flockward.sim.types",
    "EpisodeParams": "flockward.sim.types",
    "RewardWeights": "flockward.sim.types",
    "Randomisation": "flockward.sim.types",
    "WindParams": "flockward.sim.types",
    "Circle": "flockward.sim.types",
    "Polygon": "flockward.sim.types",
    "WorldState": "flockward.sim.types",
    "World": "flockward.sim.world",
    "ConfigError": "flockward.config.scenarios",
    "load_scenario": "flockward.config.scenarios",
    "load_flock": "flockward.config.scenarios",
    "list_scenarios": "flockward.config.scenarios",
    "Controller": "flockward.controller",
    "StateView": "flockward.controller",
    "play_episode": "flockward.bench.episode",
    "load_suite": "flockward.bench.suites",
    "run_suite": "flockward.bench.evaluation",
    "build_leaderboard": "flockward.bench.leaderboard",
}


def __getattr__(name: str) -> Any:
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'flockward' has no attribute {name!r}")
    return getattr(importlib.import_module(module), name)


def __dir__() -> list[str]:
    return sorted([*globals(), *_PUBLIC])


_legacy_paths.install()
register_envs()

__all__ = ["__version__", "register_envs", *_PUBLIC]

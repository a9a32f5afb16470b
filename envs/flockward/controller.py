"""The controller protocol: what a herding strategy implements to be scored by flockward.

A controller declares what it may see. ``"observation"``: only the Gymnasium observation, like a
learned policy (which sees the birds through the scenario's sensor). ``"state"``: privileged
simulator state as well (every bird's true position and velocity). ``"sensed"``: the same state
view, but with the birds as the scenario's sensor sees them (``flockward.sim.sensing``; the truth
when the sensor is perfect). The leaderboard prints the level beside each entry, so they are
never confused.
"""

from __future__ import annotations

import importlib
import json
import os
import sys
from dataclasses import dataclass
from enum import StrEnum
from typing import Any

import numpy as np

from flockward.sim.types import FlockParams, Scenario


class InformationLevel(StrEnum):
    """What a controller may see; each member equals its string, as result files store it."""

    OBSERVATION = "observation"  # the Gymnasium observation only
    STATE = "state"  # the observation and privileged simulator state
    SENSED = "sensed"  # the observation and the state view with the sensor's birds


INFORMATION_LEVELS = tuple(level.value for level in InformationLevel)


@dataclass(frozen=True)
class StateView:
    """Privileged state of one world, for controllers of information level "state" (every
    bird, true) or "sensed" (the birds the scenario's sensor tracks, as it last sensed them)."""

    bird_pos: np.ndarray  # (n, 2) m, active (or tracked) birds only
    bird_vel: np.ndarray  # (n, 2) m/s
    pursuer_pos: np.ndarray  # (P, 2) m, every drone (scenario.fleet[k] holds drone k's limits)
    pursuer_vel: np.ndarray  # (P, 2) m/s
    flock: FlockParams  # this episode's (possibly randomised) behaviour parameters
    scenario: Scenario  # site geometry, pursuer limits, episode rules, decision_period
    step: int  # control steps since reset (an act() comes every decision_steps of them)


class Controller:
    """Base class: override ``act``; override ``reset`` if the controller keeps memory."""

    name: str = "unnamed"
    information_level: str = InformationLevel.OBSERVATION
    # 1: the controller flies the scenario's drones (one unless the scenario lists [[drones]]);
    # 0: a control run without any pursuer (its actions are then ignored). The episode player
    # builds the env with it.
    drones: int = 1

    def reset(self, scenario: Scenario, seed: int | None = None) -> None:
        """Called before each episode with the scenario and the episode's seed."""

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """The normalised acceleration, each component in [-1, 1]: of drone 0, shape (2,), or
        of every drone, shape (P, 2). A (2,) command on a P-drone scenario flies drone 0 and
        gives the other drones a zero command (they hold still: at rest from the start)."""
        raise NotImplementedError

    def parameters(self) -> dict[str, Any]:
        """The controller's settings, recorded in result files for provenance; a rerun with
        other settings is refused rather than mixed into the same file.

        By default: every public attribute of the instance that is plain JSON data (numbers,
        strings, booleans, lists and dicts of them). Override it to record exactly what
        matters.
        """
        return public_settings(self)


def public_settings(obj: object) -> dict[str, Any]:
    """``obj``'s public instance attributes that are plain JSON data, sorted by name."""
    settings: dict[str, Any] = {}
    for name, value in sorted(getattr(obj, "__dict__", {}).items()):
        if name.startswith("_"):
            continue
        try:
            json.dumps(value, allow_nan=False)
        except (TypeError, ValueError):
            continue
        settings[name] = value
    return settings


# What a class needs to be scored: (attribute, how the error names it).
CONTRACT = (
    ("act", "an act(observation, state) method"),
    ("reset", "a reset(scenario, seed) method"),
)


def _importable_here() -> None:
    """Put the working directory on the import path, as ``python -m`` does, so a controller in
    the user's own folder imports without PYTHONPATH."""
    here = os.getcwd()
    if here not in sys.path and "" not in sys.path:
        sys.path.insert(0, here)


def load_controller_class(spec: str) -> type:
    """The class named by an import path ``package.module:Name``; clear errors otherwise."""
    if ":" not in spec:
        raise ValueError(f"controller {spec!r}: expected an import path 'package.module:Name'")
    module_name, _, attr = spec.partition(":")
    _importable_here()
    try:
        module = importlib.import_module(module_name)
    except ImportError as error:
        raise ValueError(
            f"controller {spec!r}: cannot import module {module_name!r} ({error})"
        ) from None
    try:
        # A class by contract; checked below attribute by attribute.
        cls: type = getattr(module, attr)
    except AttributeError:
        raise ValueError(f"controller {spec!r}: module {module_name!r} has no {attr!r}") from None
    missing = [what for name, what in CONTRACT if not callable(getattr(cls, name, None))]
    level = getattr(cls, "information_level", None)
    if level not in INFORMATION_LEVELS:
        missing.append(f"an information_level in {INFORMATION_LEVELS} (has {level!r})")
    if missing:
        raise ValueError(
            f"controller {spec!r}: needs {'; '.join(missing)} "
            "(subclass flockward.controller.Controller to inherit reset and parameters)"
        )
    return cls

"""Learning curves: success and breach-free rates of a policy on fixed seeded episodes.

During training the deterministic policy plays the same ``episodes`` seeds of every training
scenario at each curve point, all worlds of a scenario batched in one task, and ``curve.csv``
records the rates against environment steps (decisions) and simulator (control) steps. Rates,
unlike the mean training return, do not mix the reward's shaping and living terms into the
measure of whether the task is solved.
"""

from __future__ import annotations

import csv
from collections.abc import Callable, Sequence
from dataclasses import astuple, dataclass, fields
from pathlib import Path
from typing import Any

import numpy as np
from gymnasium.utils import seeding

from flockward.config.atomic import atomic_path
from flockward.task.batched import DivertTask, check_actions
from flockward.task.env_config import EnvConfig
from flockward.task.outcome import Outcome

CURVE_SEED = 200_000  # curve episodes' seeds start here, clear of every shipped suite's seeds

# A policy maps a (B, ...) batch of observations to (B, 2) actions.
Policy = Callable[[Any], np.ndarray]


@dataclass(frozen=True)
class CurvePoint:
    """One scenario's rates at one point of training (a row of curve.csv)."""

    timesteps: int  # environment steps (decisions) summed over the training worlds
    simulator_steps: int  # control steps of dt summed over the training worlds
    wall_seconds: float  # s since training started
    scenario: str
    episodes: int
    success_rate: float  # share of episodes ending in success
    breach_free_rate: float  # share of episodes ending without a breach (success or timeout)
    median_steps: float  # control steps to the end of an episode, median over the episodes


CURVE_COLUMNS = tuple(f.name for f in fields(CurvePoint))


def play_outcomes(
    policy: Policy, config: EnvConfig, episodes: int, first_seed: int = CURVE_SEED
) -> tuple[list[str], list[int]]:
    """Outcomes and control-step lengths of ``episodes`` episodes, world i seeded first_seed + i.

    Every world of the batch plays to its own end; ended worlds are no longer stepped.
    """
    task = DivertTask(config, episodes)
    rngs = [seeding.np_random(first_seed + i)[0] for i in range(episodes)]
    obs = task.reset(np.arange(episodes), rngs)
    live = np.ones(episodes, dtype=np.bool_)
    outcomes = np.full(episodes, Outcome.RUNNING.value, dtype=object)
    lengths = np.zeros(episodes, dtype=np.int64)
    while live.any():
        actions = check_actions(np.asarray(policy(obs), dtype=np.float64), episodes)
        batch = task.step(actions, live.copy())
        ended = live & (batch.terminated | batch.truncated)
        outcomes[ended] = batch.info["outcome"][ended]
        lengths[ended] = batch.info["steps"][ended]
        live &= ~ended
        obs = batch.observation
    return [str(o) for o in outcomes], lengths.tolist()


def curve_point(
    policy: Policy,
    config: EnvConfig,
    episodes: int,
    timesteps: int,
    simulator_steps: int,
    wall_seconds: float,
) -> CurvePoint:
    """The rates of ``policy`` on one scenario's fixed curve episodes."""
    outcomes, lengths = play_outcomes(policy, config, episodes)
    return CurvePoint(
        timesteps=timesteps,
        simulator_steps=simulator_steps,
        wall_seconds=wall_seconds,
        scenario=config.load_scenario().name,
        episodes=episodes,
        success_rate=outcomes.count(Outcome.SUCCESS.value) / episodes,
        breach_free_rate=(episodes - outcomes.count(Outcome.BREACH.value)) / episodes,
        median_steps=float(np.median(lengths)),
    )


def write_curve(path: Path, points: Sequence[CurvePoint]) -> None:
    """curve.csv: one row per scenario and curve point (CURVE_COLUMNS)."""
    with atomic_path(path) as tmp, tmp.open("w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(CURVE_COLUMNS)
        writer.writerows(astuple(p) for p in points)


def read_curve(path: Path) -> list[CurvePoint]:
    """The rows of curve.csv, none if there is no file yet."""
    if not path.is_file():
        return []
    with path.open() as handle:
        return [
            CurvePoint(
                timesteps=int(r["timesteps"]),
                simulator_steps=int(r["simulator_steps"]),
                wall_seconds=float(r["wall_seconds"]),
                scenario=r["scenario"],
                episodes=int(r["episodes"]),
                success_rate=float(r["success_rate"]),
                breach_free_rate=float(r["breach_free_rate"]),
                median_steps=float(r["median_steps"]),
            )
            for r in csv.DictReader(handle)
        ]

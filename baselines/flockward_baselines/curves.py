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


# ---------------------------------------------------------------------------------------------
# Several training seeds: mean and 95 % interval.

SUMMARY_COLUMNS = (
    "timesteps",
    "simulator_steps",
    "seeds",
    "success_mean",
    "success_low",
    "success_high",
    "breach_free_mean",
    "breach_free_low",
    "breach_free_high",
)


def run_rates(points: Sequence[CurvePoint]) -> dict[int, tuple[int, float, float]]:
    """One run's rates averaged over its scenarios, by timesteps: (simulator steps, success,
    breach-free)."""
    grouped: dict[int, list[CurvePoint]] = {}
    for p in points:
        grouped.setdefault(p.timesteps, []).append(p)
    return {
        t: (
            max(p.simulator_steps for p in ps),
            float(np.mean([p.success_rate for p in ps])),
            float(np.mean([p.breach_free_rate for p in ps])),
        )
        for t, ps in sorted(grouped.items())
    }


def _interval(values: Sequence[float]) -> tuple[float, float, float]:
    """Mean and Student-t 95 % interval of the mean (the mean twice for a single value)."""
    from scipy import stats

    x = np.asarray(values, dtype=float)
    mean = float(x.mean())
    if len(x) < 2:
        return mean, mean, mean
    half = float(stats.t.ppf(0.975, len(x) - 1) * x.std(ddof=1) / np.sqrt(len(x)))
    return mean, mean - half, mean + half


def _clipped(interval: tuple[float, float, float]) -> tuple[float, float, float]:
    mean, low, high = interval
    return mean, max(0.0, low), min(1.0, high)


def summarise_seeds(runs: Sequence[Sequence[CurvePoint]]) -> list[dict[str, float]]:
    """Rows of SUMMARY_COLUMNS at every curve point all runs share: the mean over seeds of each
    run's scenario-averaged rates, with a 95 % interval over seeds clipped to [0, 1] (a rate
    cannot leave it; with few seeds the t interval can)."""
    rates = [run_rates(points) for points in runs]
    shared = sorted(set.intersection(*(set(r) for r in rates))) if rates else []
    rows = []
    for t in shared:
        success = _clipped(_interval([r[t][1] for r in rates]))
        kept = _clipped(_interval([r[t][2] for r in rates]))
        rows.append(
            dict(zip(SUMMARY_COLUMNS, (t, max(r[t][0] for r in rates), len(rates), *success,
                                       *kept), strict=True))
        )  # fmt: skip
    return rows


def write_seed_summary(csv_path: Path, png_path: Path, rows: Sequence[dict[str, float]],
                       title: str) -> None:  # fmt: skip
    """The summary as CSV and as a figure of both rates against simulator steps with bands."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    with atomic_path(csv_path) as tmp, tmp.open("w", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=SUMMARY_COLUMNS)
        writer.writeheader()
        writer.writerows(rows)
    fig = Figure(figsize=(7.0, 4.0), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    steps = np.array([r["simulator_steps"] for r in rows]) / 1e6
    for key, label, colour in (("success", "success", "tab:green"),
                               ("breach_free", "breach-free", "tab:blue")):  # fmt: skip
        ax.plot(steps, [r[f"{key}_mean"] for r in rows], color=colour, label=f"{label} (mean)")
        low = [r[f"{key}_low"] for r in rows]
        high = [r[f"{key}_high"] for r in rows]
        ax.fill_between(
            steps, low, high, color=colour, alpha=0.2, linewidth=0, label=f"{label} 95 % interval"
        )
    seeds = int(rows[0]["seeds"]) if rows else 0
    ax.set_title(f"{title}: {seeds} training seeds", fontsize=10)
    ax.set_xlabel("simulator steps (millions, summed over the training worlds)")
    ax.set_ylabel("share of curve episodes (mean over scenarios)")
    ax.set_ylim(-0.02, 1.02)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8, loc="lower right")
    fig.tight_layout()
    with atomic_path(png_path) as tmp:
        fig.savefig(tmp, format="png")


# ---------------------------------------------------------------------------------------------
# Per run: when the success rate first reached a target.

REACH_HEADER = (
    "| run | success target | first reached at decisions | simulator steps | wall s "
    "| final success | final simulator steps | final wall s |"
)


def first_reach(points: Sequence[CurvePoint], target: float) -> CurvePoint | None:
    """The first curve point whose success rate, averaged over the run's scenarios, is at least
    ``target`` (its rate the average, its wall seconds the latest), None if none is."""
    for t, (sim_steps, success, kept) in run_rates(points).items():
        if success >= target:
            here = [p for p in points if p.timesteps == t]
            return CurvePoint(t, sim_steps, max(p.wall_seconds for p in here), "all",
                              sum(p.episodes for p in here), success, kept,
                              float(np.median([p.median_steps for p in here])))  # fmt: skip
    return None


def reach_table(runs: dict[str, Sequence[CurvePoint]], target: float) -> str:
    """A Markdown table: for each run, the first curve point at or above ``target`` success
    (decisions, simulator steps, wall seconds since training started) and its final point."""
    lines = [REACH_HEADER, "| --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: |"]
    for name, points in runs.items():
        reached = first_reach(points, target)
        final_t, (final_sim, final_success, _) = list(run_rates(points).items())[-1]
        final_wall = max(p.wall_seconds for p in points if p.timesteps == final_t)
        first = (
            f"{reached.timesteps:,} | {reached.simulator_steps:,} | {reached.wall_seconds:.0f}"
            if reached is not None
            else "not reached | - | -"
        )
        lines.append(f"| {name} | {target:.0%} | {first} | {final_success:.0%} | {final_sim:,} "
                     f"| {final_wall:.0f} |")  # fmt: skip
    return "\n".join(lines) + "\n"

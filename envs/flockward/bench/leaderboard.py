"""The leaderboard: per-episode scores, their interquartile mean and a stratified bootstrap CI,
pooled and per scenario family.

Episode score
-------------
Every episode gets one score in [0, 1], a weighted sum of five terms, each in [0, 1]::

    score = 0.40 * kept_out                     1 with no breach, else 0.5 * t_breach / T
          + 0.35 * success * (1 - t / (2 T))   the flock reached the goal, sooner is better
          + 0.10 * clearance                    min(1, max(0, d_min / 100 m))
          + 0.10 * contact_free                 no step with the drone within its safety radius
                                                of a bird (in a team: nor two drones closer than
                                                the sum of their safety radii)
          + 0.05 * cohesion                     lowest share of the flock in its largest group

``t`` is the time to success, ``t_breach`` the time the episode ended in a breach and ``T`` the
episode's time limit (all s, in the record: ``time_to_success``, ``duration``, ``time_limit``);
``d_min`` is the record's ``min_zone_clearance``: the smallest signed distance of any bird to the
protected zone over the episode (m). After a breach the success and clearance terms are 0. An
episode that ended in an error scores 0.

Why these terms and weights. A bird in the protected zone is the hazard the whole task exists to
prevent, so ``kept_out`` carries the largest weight and a breach forfeits success and clearance
too: a breached episode can collect at most 0.40 * 0.5 + 0.10 + 0.05 = 0.35, below the 0.40 that
every breach-free episode starts from, so any breach ranks below any breach-free episode. Among
breaches, a later one scores higher: it leaves the airfield more time for its other measures
(runway holds, pyrotechnics), and it keeps the score continuous where every control fails.
Turning the flock is the job, so success carries the next largest weight; a success is worth at
least half of it however late it comes (a turned flock beats one merely held off until the time
limit), and the other half rewards speed, since a flock turned sooner leaves less time for
something to go wrong. How close the flock came measures risk that a yes/no breach hides; 100 m
is about 7 s of a gull's cruise (15 m/s), the time a drone has to correct a turn that goes
wrong, and a flock kept further away earns no more. Drone-bird contact risks both and is partly
self-inflicted by aggressive pursuit, so it weighs as much as clearance; fragmentation harms the
flock and leaves several groups to herd, but its cost already shows in time and clearance, so it
weighs least. Unlike a score of success and breach counts alone, every term but the breach is
continuous, so controllers that both succeed still differ by how fast and how safely.

Aggregate and interval
----------------------
A controller's headline is the interquartile mean (IQM) of all its episode scores pooled: the
mean of the middle 50 %, robust to a few outlying episodes yet using more of the data than the
median. Its 95 % confidence interval is a stratified percentile bootstrap: episodes are resampled
with replacement within each task (scenario family), the task set stays fixed, and the IQM of each
resample gives the bootstrap distribution. Both follow Agarwal et al., "Deep Reinforcement
Learning at the Edge of the Statistical Precipice", NeurIPS 2021. Per family, success rates
carry Wilson 95 % intervals (``flockward.bench.statistics``).

Result files ``<results>/<suite>/<name>.json`` (format "flockward-results/1") are read only
when their suite hash matches the suite as loaded; others are refused with a one-line warning,
as are files whose episodes lack a field the score needs (``min_zone_clearance`` and
``time_limit`` were added after the first result files were written). A run with a ``label``
gets its own row under that label, and each row lists the parameters that differ from the
controller's defaults.
"""

from __future__ import annotations

import csv
import io
import json
import os
import sys
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from flockward.bench.results import UnreadableResults, file_problem, read_json
from flockward.bench.statistics import wilson_interval
from flockward.config.atomic import write_atomic
from flockward.task.outcome import Outcome

OUTPUT_STEM = "leaderboard"  # leaderboard.md / .png (and any leaderboard*) are never inputs
ROW_KEYS = (
    "controller",
    "information_level",
    "changed_parameters",
    "decision_period",
    "episodes",
    "success_rate",
    "breach_free_rate",
    "collision_rate",
    "mean_peak_fragmentation",
    "median_time_to_success",
    "median_zone_clearance",
    "score_iqm",
    "score_ci_low",
    "score_ci_high",
)
FAMILY_KEYS = (
    "controller",
    "family",
    "episodes",
    "successes",
    "success_rate",
    "success_ci_low",
    "success_ci_high",
    "median_time_to_success",
    "median_zone_clearance",
    "collision_rate",
    "score_iqm",
)
FORMATS = ("markdown", "csv", "json")

# Weights of the score's terms (see the module docstring); they sum to 1.
WEIGHTS = {
    "breach_free": 0.40,
    "success_speed": 0.35,
    "clearance": 0.10,
    "contact_free": 0.10,
    "cohesion": 0.05,
}
CLEARANCE_SCALE = 100.0  # m, the zone clearance that earns the full clearance term

Statistic = Callable[..., Any]  # statistic(x, axis=-1) reduces along axis, like np.mean


class LeaderboardError(ValueError):
    """The leaderboard cannot be built; the message is one line saying what to do."""


# --------------------------------------------------------------------------------------------
# Scores and statistics.


def _unit(x: float) -> float:
    return min(1.0, max(0.0, x))


def score_terms(ep: Mapping[str, Any]) -> dict[str, float]:
    """The score's terms of one non-error episode record, each in [0, 1] (keys of ``WEIGHTS``)."""
    kept = ep["breached_birds"] == 0
    speed = 0.0
    if ep["success"] and kept:
        speed = _unit(1.0 - 0.5 * float(ep["time_to_success"]) / float(ep["time_limit"]))
    delay = 0.5 * _unit(float(ep["duration"]) / float(ep["time_limit"]))
    return {
        "breach_free": 1.0 if kept else delay,
        "success_speed": speed,
        "clearance": _unit(float(ep["min_zone_clearance"]) / CLEARANCE_SCALE) if kept else 0.0,
        "contact_free": float(ep["collision_steps"] == 0),
        "cohesion": _unit(float(ep["min_largest_fraction"])),
    }


def episode_score(ep: Mapping[str, Any]) -> float:
    """The headline score in [0, 1] of one episode record (see the module docstring)."""
    if ep["outcome"] == Outcome.ERROR:
        return 0.0
    terms = score_terms(ep)
    return float(sum(WEIGHTS[k] * terms[k] for k in WEIGHTS))


def iqm(scores: Any, axis: int | None = None) -> Any:
    """Interquartile mean: drop the lowest and highest 25 % (rounded down), average the rest.

    ``axis=None`` pools every value; an integer axis reduces along it (for batched resamples).
    """
    x = np.asarray(scores, dtype=float)
    if axis is None:
        x, axis = x.reshape(-1), 0
    n = x.shape[axis]
    if n == 0:
        raise ValueError("iqm of an empty array")
    cut = int(0.25 * n)
    middle = np.sort(x, axis=axis).take(np.arange(cut, n - cut), axis=axis)
    return middle.mean(axis=axis)


def stratified_bootstrap_ci(
    scores_by_task: Sequence[Any],
    statistic: Statistic = iqm,
    reps: int = 2000,
    confidence: float = 0.95,
    seed: int = 0,
) -> tuple[float, float]:
    """Percentile bootstrap interval of ``statistic`` over the pooled scores of all tasks.

    Each replicate resamples every task's scores with replacement to its own size; tasks are
    never resampled or mixed. ``statistic(x, axis=-1)`` must reduce the last axis. The default
    2000 replicates put each endpoint within about 0.06 bootstrap standard deviations (about 1.5 %
    of the interval's width) of its many-replicate limit, finer than the table prints; the result
    is deterministic under ``seed``, and ``reps`` may be raised (e.g. 50000) for tighter endpoints.
    """
    tasks = [np.asarray(t, dtype=float).reshape(-1) for t in scores_by_task]
    if not tasks or any(t.size == 0 for t in tasks):
        raise ValueError("stratified_bootstrap_ci needs at least one task, each with scores")
    if reps < 1:
        raise ValueError(f"reps must be a positive integer, got {reps}")
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must lie strictly between 0 and 1, got {confidence}")
    rng = np.random.default_rng(seed)
    total = sum(t.size for t in tasks)
    chunk = max(1, min(reps, 4_000_000 // total))  # bounds memory at about 32 MB per chunk
    values = []
    for start in range(0, reps, chunk):
        m = min(chunk, reps - start)
        parts = [t[rng.integers(0, t.size, size=(m, t.size))] for t in tasks]
        values.append(np.asarray(statistic(np.concatenate(parts, axis=1), axis=-1), dtype=float))
    dist = np.concatenate(values)
    alpha = (1.0 - confidence) / 2.0
    lo, hi = np.percentile(dist, [100.0 * alpha, 100.0 * (1.0 - alpha)])
    return float(lo), float(hi)


# --------------------------------------------------------------------------------------------
# Reading result files.


def _warn(message: str) -> None:
    print(" ".join(message.split()), file=sys.stderr)


def _is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def row_name(result: Mapping[str, Any]) -> str:
    """The name a result file's row goes by: its run label if it has one, else the controller."""
    label = result.get("label")
    return label if isinstance(label, str) and label else str(result["controller"])


def changed_parameters(result: Mapping[str, Any]) -> dict[str, Any]:
    """The controller parameters of a run that differ from the controller's defaults (both as
    recorded in the file); empty when the file records no defaults."""
    defaults = result.get("default_parameters")
    params = result.get("controller_parameters")
    if not isinstance(defaults, dict) or not isinstance(params, dict):
        return {}
    return {k: v for k, v in params.items() if k not in defaults or defaults[k] != v}


def load_results(
    results_dir: str | os.PathLike[str], suite: str, expected_hash: str
) -> list[dict[str, Any]]:
    """Every acceptable result file under ``<results_dir>/<suite>/``, in file-name order.

    A file that is not valid JSON, has another format, another suite hash, malformed episodes, a
    label that is not a non-empty string, or a row name (label or controller) already seen is
    skipped with a one-line warning on stderr.
    """
    folder = Path(results_dir) / suite
    accepted: list[dict[str, Any]] = []
    seen: dict[str, Path] = {}
    for path in sorted(folder.glob("*.json")):
        if path.stem.startswith(OUTPUT_STEM):
            continue
        try:
            data = read_json(path)
        except UnreadableResults as exc:
            _warn(f"skipping {path}: not a readable JSON file ({exc})")
            continue
        problem = file_problem(data, suite, expected_hash)
        if problem is None and "label" in data:
            if not (isinstance(data["label"], str) and data["label"].strip()):
                problem = f"has label {data['label']!r}; a label must be a non-empty string"
        if problem is None and row_name(data) in seen:
            name = row_name(data)
            problem = f"repeats row name {name!r} of {seen[name]}; give one run a --label"
        if problem:
            _warn(f"skipping {path}: {problem}")
            continue
        seen[row_name(data)] = path
        accepted.append(data)
    return accepted


def scores_by_family(result: Mapping[str, Any]) -> dict[str, list[float]]:
    """Episode scores grouped by family, families in order of first appearance."""
    by_task: dict[str, list[float]] = {}
    for ep in result["episodes"]:
        by_task.setdefault(ep["family"], []).append(episode_score(ep))
    return by_task


# --------------------------------------------------------------------------------------------
# Rows.


def _median(values: Sequence[float]) -> float | None:
    return float(np.median(values)) if values else None


def _clearances(eps: Sequence[Mapping[str, Any]]) -> list[float]:
    """Zone clearances (m) of the episodes that did not end in an error."""
    return [float(ep["min_zone_clearance"]) for ep in eps if ep["outcome"] != Outcome.ERROR]


def _collided(ep: Mapping[str, Any]) -> bool:
    return _is_int(ep.get("collision_steps")) and ep["collision_steps"] > 0


def information_label(level: str, sensors: Sequence[str] = ()) -> str:
    """What an entry saw: its information level, and when any of the suite's scenarios senses
    imperfectly (``sensors``: their sensors' names, ``SensorParams.name``), through what.

    Observation- and sensed-level entries saw the birds through the scenarios' sensors,
    state-level ones the truth: ``observation (ground-radar)``, ``sensed (ground-radar)``,
    ``state (truth)``. With only perfect sensors the level alone, as before sensors existed.
    """
    names = sorted(set(sensors))
    if not names or names == ["perfect"]:
        return level
    if level == "state":
        return "state (truth)"
    return f"{level} ({', '.join(names)})"


def suite_sensors(suite: str | os.PathLike[str]) -> dict[str, str]:
    """Each scenario of ``suite`` (a shipped name or a file) mapped to its sensor's name; empty
    when the suite cannot be loaded (its result files are checked by hash anyway)."""
    from flockward.bench.suites import load_suite
    from flockward.config.scenarios import ConfigError

    try:
        loaded = load_suite(str(suite))
    except (ConfigError, OSError):
        return {}
    return {name: scenario.sensor.name for name, scenario in loaded.scenarios.items()}


def _row(
    result: Mapping[str, Any], reps: int, seed: int, sensors: Mapping[str, str] | None = None
) -> dict[str, Any]:
    eps = result["episodes"]
    ok = [ep for ep in eps if ep["outcome"] != Outcome.ERROR]
    n = len(eps)
    by_task = scores_by_family(result)
    pooled = np.concatenate([np.asarray(v) for v in by_task.values()])
    lo, hi = stratified_bootstrap_ci(list(by_task.values()), iqm, reps=reps, seed=seed)
    times = [float(ep["time_to_success"]) for ep in eps if ep["success"]]
    # An error episode counts as the worst case: not breach-free, fully fragmented.
    fragmentation = sum(1.0 - float(ep["min_largest_fraction"]) for ep in ok) + (n - len(ok))
    # How often the controller decided: one value for the whole file, None if the records do not
    # say (files written before the decision interval) or disagree.
    periods = {ep.get("decision_period") for ep in eps}
    period = periods.pop() if len(periods) == 1 else None
    seen = [sensors[ep["scenario"]] for ep in eps if sensors and ep["scenario"] in sensors]
    return {
        "controller": row_name(result),
        "information_level": information_label(result["information_level"], seen),
        "changed_parameters": changed_parameters(result),
        "decision_period": float(period) if isinstance(period, int | float) else None,
        "episodes": n,
        "success_rate": sum(1 for ep in eps if ep["success"]) / n,
        "breach_free_rate": sum(1 for ep in ok if ep["breached_birds"] == 0) / n,
        "collision_rate": sum(1 for ep in eps if _collided(ep)) / n,
        "mean_peak_fragmentation": fragmentation / n,
        "median_time_to_success": _median(times),
        "median_zone_clearance": _median(_clearances(eps)),
        "score_iqm": float(iqm(pooled)),
        "score_ci_low": lo,
        "score_ci_high": hi,
    }


def build_rows(
    results: Sequence[Mapping[str, Any]],
    reps: int = 2000,
    seed: int = 0,
    sensors: Mapping[str, str] | None = None,
) -> list[dict[str, Any]]:
    """One row per result file (keys ``ROW_KEYS``), best ``score_iqm`` first.

    ``information_level`` is the entry's level, qualified by what it saw when ``sensors`` (each
    scenario's sensor name, ``suite_sensors``) holds an imperfect sensor (``information_label``).

    Rates are shares of all episodes: success, no bird breached, at least one collision step.
    ``decision_period`` (s) is how long each action was held, None when the records do not say.
    ``mean_peak_fragmentation`` is the mean over episodes of 1 - min_largest_fraction (0 = the
    flock never split; an error counts as 1). ``median_time_to_success`` (s) is over successful
    episodes, None when there are none; ``median_zone_clearance`` (m) over episodes that did not
    error (negative: a bird got inside).
    """
    rows = [_row(r, reps, seed, sensors) for r in results]
    rows.sort(key=lambda r: (-r["score_iqm"], r["controller"]))
    return rows


def build_family_rows(
    results: Sequence[Mapping[str, Any]], order: Sequence[str] | None = None
) -> list[dict[str, Any]]:
    """One row per (family, controller) (keys ``FAMILY_KEYS``): families in suite order, then
    controllers in ``order`` (default: as given).

    Success rates carry Wilson 95 % intervals; times are medians over successes (s), clearances
    medians over episodes that did not error (m).
    """
    by_name = {row_name(r): r for r in results}
    names = list(order) if order is not None else list(by_name)
    families: list[str] = []
    for r in results:
        for ep in r["episodes"]:
            if ep["family"] not in families:
                families.append(ep["family"])
    rows = []
    for family in families:
        for name in names:
            eps = [ep for ep in by_name[name]["episodes"] if ep["family"] == family]
            if not eps:
                continue
            k = sum(1 for ep in eps if ep["success"])
            lo, hi = wilson_interval(k, len(eps))
            rows.append(
                {
                    "controller": name,
                    "family": family,
                    "episodes": len(eps),
                    "successes": k,
                    "success_rate": k / len(eps),
                    "success_ci_low": lo,
                    "success_ci_high": hi,
                    "median_time_to_success": _median(
                        [float(ep["time_to_success"]) for ep in eps if ep["success"]]
                    ),
                    "median_zone_clearance": _median(_clearances(eps)),
                    "collision_rate": sum(1 for ep in eps if _collided(ep)) / len(eps),
                    "score_iqm": float(iqm([episode_score(ep) for ep in eps])),
                }
            )
    return rows


# --------------------------------------------------------------------------------------------
# Rendering.


def _pct(v: float) -> str:
    return f"{100.0 * v:.1f} %"


def _seconds(t: float | None) -> str:
    return "-" if t is None else f"{t:.1f} s"


def _metres(d: float | None) -> str:
    return "-" if d is None else f"{d:.1f} m"


def _params(changed: Mapping[str, Any]) -> str:
    return ", ".join(f"{k}={v}" for k, v in changed.items()) if changed else "defaults"


SCORE_NOTE = (
    "Score per episode = 0.40 kept out (1, or 0.5 t_breach/T after a breach) + 0.35 success x "
    f"(1 - t/2T) + 0.10 zone clearance (min(1, d/{CLEARANCE_SCALE:g} m); both 0 after a breach) "
    "+ 0.10 no drone-bird contact + 0.05 lowest largest-group share; an error scores 0. IQM of "
    "all episodes with a 95 % stratified bootstrap CI (episodes resampled within each scenario "
    "family)."
)


def render_markdown(
    rows: Sequence[Mapping[str, Any]],
    suite: str,
    version: int,
    family_rows: Sequence[Mapping[str, Any]] = (),
    preface: str = "",
) -> str:
    """The leaderboard as a Markdown document: heading, method note, pooled table and, when
    given, the per-family table. ``preface`` is a paragraph placed under the heading."""
    lines = [f"# flockward leaderboard: suite `{suite}` (version {version})", ""]
    if preface:
        lines += [preface, ""]
    lines += [
        SCORE_NOTE,
        "",
        "| rank | controller | information | parameters | decides every | episodes | score IQM | "
        "95 % CI | success | breach-free | collision | fragmentation | median time to success | "
        "median zone clearance |",
        "|---:|---|---|---|---:|---:|---:|---|---:|---:|---:|---:|---:|---:|",
    ]
    for rank, r in enumerate(rows, 1):
        d = r["decision_period"]
        lines.append(
            f"| {rank} | {r['controller']} | {r['information_level']} | "
            f"{_params(r['changed_parameters'])} | {'-' if d is None else f'{d:g} s'} | "
            f"{r['episodes']} | "
            f"{r['score_iqm']:.3f} | [{r['score_ci_low']:.3f}, {r['score_ci_high']:.3f}] | "
            f"{_pct(r['success_rate'])} | {_pct(r['breach_free_rate'])} | "
            f"{_pct(r['collision_rate'])} | {r['mean_peak_fragmentation']:.3f} | "
            f"{_seconds(r['median_time_to_success'])} | {_metres(r['median_zone_clearance'])} |"
        )
    if family_rows:
        lines += [
            "",
            "## Per family",
            "",
            "Success with a Wilson 95 % interval; median time over successes; median zone "
            "clearance (smallest bird distance to the protected zone, negative once a bird got "
            "in) over episodes that did not error; collision = share of episodes with any "
            "drone-bird contact; score IQM within the family.",
            "",
            "| family | controller | episodes | success | 95 % CI | median time to success | "
            "median zone clearance | collision | score IQM |",
            "|---|---|---:|---:|---|---:|---:|---:|---:|",
        ]
        for f in family_rows:
            lines.append(
                f"| {f['family']} | {f['controller']} | {f['episodes']} | "
                f"{f['successes']}/{f['episodes']} | "
                f"[{_pct(f['success_ci_low'])}, {_pct(f['success_ci_high'])}] | "
                f"{_seconds(f['median_time_to_success'])} | "
                f"{_metres(f['median_zone_clearance'])} | {_pct(f['collision_rate'])} | "
                f"{f['score_iqm']:.3f} |"
            )
    return "\n".join(lines) + "\n"


def _csv_value(v: Any) -> Any:
    if v is None:
        return ""
    if isinstance(v, dict):
        return _params(v) if v else ""
    return v


def render_csv(rows: Sequence[Mapping[str, Any]], keys: Sequence[str] = ROW_KEYS) -> str:
    """The rows as CSV with a ``keys`` header; a missing value is an empty field, changed
    parameters are ``k=v`` pairs joined by ", "."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=keys, lineterminator="\n")
    writer.writeheader()
    for r in rows:
        writer.writerow({k: _csv_value(r[k]) for k in keys})
    return buf.getvalue()


def render_json(rows: Sequence[Mapping[str, Any]], keys: Sequence[str] = ROW_KEYS) -> str:
    """The rows as a JSON list of objects with the ``keys`` keys."""
    return json.dumps([{k: r[k] for k in keys} for r in rows], indent=2) + "\n"


_LEVEL_STYLE = {  # information level -> (colour, marker)
    "observation": ("#1b7f79", "o"),
    "state": ("#c8553d", "D"),
    "sensed": ("#6a4c93", "^"),
}


def write_chart(
    rows: Sequence[Mapping[str, Any]], path: str | os.PathLike[str], title: str = ""
) -> Path:
    """A PNG of each controller's score IQM with CI whiskers; colour and marker show the input."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    out = Path(path)
    fig = Figure(figsize=(7.0, 1.2 + 0.45 * max(1, len(rows))), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    for y, r in enumerate(reversed(rows)):  # best at the top
        level = str(r["information_level"]).split(" ")[0]  # "observation (ground-radar)"
        colour, marker = _LEVEL_STYLE.get(level, ("#555555", "s"))
        mid = r["score_iqm"]
        # A percentile interval need not contain the IQM itself; a whisker cannot be negative.
        whiskers = [[max(0.0, mid - r["score_ci_low"])], [max(0.0, r["score_ci_high"] - mid)]]
        ax.errorbar([mid], [y], xerr=whiskers, fmt=marker, ms=8, color=colour, mec="#222222",
                    elinewidth=2.5, capsize=5, capthick=2)  # fmt: skip
    ax.set_yticks(range(len(rows)), [r["controller"] for r in reversed(rows)])
    ax.set_xlim(-0.02, 1.02)  # room for markers at the ends of [0, 1]
    ax.set_ylim(-0.7, max(0, len(rows) - 1) + 0.7)
    ax.set_xlabel("episode score: IQM with 95 % stratified bootstrap CI")
    if title:
        fig.suptitle(title, fontsize=9, color="#aa0000")
    ax.grid(axis="x", color="#dddddd", lw=0.8)
    ax.set_axisbelow(True)
    handles = [
        Line2D([], [], color=c, marker=m, mec="#222222", lw=2.5, label=f"{level} input")
        for level, (c, m) in _LEVEL_STYLE.items()
    ]
    ax.legend(handles=handles, loc="lower center", bbox_to_anchor=(0.5, 1.0), ncol=2,
              fontsize=8, frameon=False)  # fmt: skip
    fig.tight_layout()
    return save_figure(fig, out)


FIGURE_FORMATS = ("png", "svg", "pdf")


def save_figure(fig: Any, out: Path) -> Path:
    """Write a matplotlib figure to ``out`` atomically, as PNG, SVG or PDF by its suffix."""
    fmt = out.suffix.lstrip(".").lower()
    if fmt not in FIGURE_FORMATS:
        raise LeaderboardError(f"{out}: a figure ends in one of .{', .'.join(FIGURE_FORMATS)}")
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt)
    write_atomic(out, buf.getvalue())
    return out


# --------------------------------------------------------------------------------------------
# The whole board.


@dataclass(frozen=True)
class Leaderboard:
    """The scored rows of one suite, with the suite version the result files were run on.

    ``results`` are the accepted result files (for charts); ``preface`` is a paragraph printed
    under the heading and ``chart_note`` a line over each chart (e.g. that the smoke suite says
    nothing about quality).
    """

    suite: str
    version: int
    rows: list[dict[str, Any]]
    family_rows: list[dict[str, Any]]
    results: list[dict[str, Any]]
    preface: str = ""
    chart_note: str = ""

    def render(self, fmt: str, families: bool = False) -> str:
        """The board in ``fmt``, one of ``FORMATS``. Markdown holds the pooled table and the
        per-family table; CSV and JSON hold the pooled rows, or the family rows with
        ``families``."""
        if fmt == "markdown":
            return render_markdown(
                self.rows, self.suite, self.version, self.family_rows, self.preface
            )
        keys, rows = (FAMILY_KEYS, self.family_rows) if families else (ROW_KEYS, self.rows)
        if fmt == "csv":
            return render_csv(rows, keys)
        if fmt == "json":
            return render_json(rows, keys)
        raise LeaderboardError(f"unknown format {fmt!r}; use one of: {', '.join(FORMATS)}")

    def write(
        self, results_dir: str | os.PathLike[str], formats: Sequence[str] = ("png",)
    ) -> tuple[Path, ...]:
        """Write ``<results_dir>/<suite>/leaderboard.md`` and, in each figure format,
        ``leaderboard.FMT`` (pooled) and ``leaderboard-families.FMT``, atomically; return the
        paths."""
        from flockward.bench.charts import write_family_chart

        folder = Path(results_dir) / self.suite
        md = folder / f"{OUTPUT_STEM}.md"
        write_atomic(md, self.render("markdown"))
        written = [md]
        for fmt in formats:
            written.append(write_chart(self.rows, folder / f"{OUTPUT_STEM}.{fmt}", self.chart_note))
            written.append(
                write_family_chart(
                    self.family_rows,
                    folder / f"{OUTPUT_STEM}-families.{fmt}",
                    self.suite,
                    self.chart_note,
                )
            )
        return tuple(written)


def resolve_suite(suite: str | os.PathLike[str]) -> tuple[str, int, str]:
    """(name, version, hash) of a shipped suite name or a suite file path; LeaderboardError for
    an unknown or invalid suite."""
    from flockward.bench.suites import list_suites, load_suite, suite_hash
    from flockward.config.files import looks_like_path
    from flockward.config.scenarios import ConfigError

    text = str(suite)
    if not looks_like_path(text) and text not in list_suites():
        names = list_suites()
        valid = ", ".join(names) if names else "none are shipped"
        raise LeaderboardError(
            f"unknown suite {text!r}; valid suites: {valid}, or a suite file path (.toml)"
        )
    try:
        loaded = load_suite(text)
    except ConfigError as exc:
        raise LeaderboardError(" ".join(str(exc).split())) from None
    except OSError as exc:
        raise LeaderboardError(f"suite {text!r}: {exc.strerror or exc}") from None
    return loaded.name, loaded.version, suite_hash(loaded)


def suite_reference(suite: str) -> str:
    """The hash of ``suite`` (a shipped name or a file path); LeaderboardError if it is unknown
    or invalid."""
    return resolve_suite(suite)[2]


def load_suite_results(
    results_dir: str | os.PathLike[str],
    suite: str | os.PathLike[str],
    expected_hash: str | None = None,
) -> tuple[str, list[dict[str, Any]]]:
    """(suite name, accepted result files) of ``suite`` under ``results_dir``; LeaderboardError
    if there are none. ``expected_hash`` defaults to the hash of the suite as loaded."""
    from flockward.config.files import looks_like_path

    name = str(suite)
    if expected_hash is None:
        expected_hash = suite_reference(name)
        if looks_like_path(name):
            name = resolve_suite(name)[0]
    folder = Path(results_dir) / name
    candidates = [p for p in folder.glob("*.json") if not p.stem.startswith(OUTPUT_STEM)]
    if not candidates:
        raise LeaderboardError(
            f"no result files in {folder}; write them with `flockward run` for suite {name!r}"
        )
    results = load_results(results_dir, name, expected_hash)
    if not results:
        raise LeaderboardError(
            f"no valid result files in {folder}: all {len(candidates)} were refused (see above)"
        )
    return name, results


def build_leaderboard(
    results_dir: str | os.PathLike[str],
    suite: str | os.PathLike[str],
    expected_hash: str | None = None,
    reps: int = 2000,
    seed: int = 0,
    preface: str = "",
    chart_note: str = "",
) -> Leaderboard:
    """Load, check and score every result file of ``suite`` (a shipped name or a suite file;
    with ``expected_hash`` given, ``suite`` is taken as the suite's name); LeaderboardError if
    none is usable."""
    name, results = load_suite_results(results_dir, suite, expected_hash)
    rows = build_rows(results, reps, seed, suite_sensors(suite))
    order = [r["controller"] for r in rows]
    return Leaderboard(
        name,
        results[0]["suite_version"],
        rows,
        build_family_rows(results, order),
        results,
        preface,
        chart_note,
    )

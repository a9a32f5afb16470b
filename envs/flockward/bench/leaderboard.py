"""The leaderboard: per-episode scores, their interquartile mean and a stratified bootstrap CI.

Episode score
-------------
Every episode gets one score in [0, 1]::

    score = 0.5 * success
          + 0.3 * breach_free
          + 0.2 * min_largest_fraction

``success`` is 1 when the flock was turned away (outcome "success") and 0 otherwise;
``breach_free`` is 1 when no bird entered the protected zone and 0 otherwise (an all-or-nothing
term: an episode stops at its first breaches beyond the scenario's tolerance, so the share of
birds that got in says little about how bad the failure was);
``min_largest_fraction`` is the smallest share of the flock held by its largest group during the
episode (1 = never split). An episode that ended in an error scores 0. The weights say what
matters: success is the job, breaches are the hazard, and fragmentation harms the flock and leaves
several groups to herd next.

Aggregate and interval
----------------------
A controller's headline is the interquartile mean (IQM) of all its episode scores pooled: the
mean of the middle 50 %, robust to a few outlying episodes yet using more of the data than the
median. Its 95 % confidence interval is a stratified percentile bootstrap: episodes are resampled
with replacement within each task (scenario family), the task set stays fixed, and the IQM of each
resample gives the bootstrap distribution. Both follow Agarwal et al., "Deep Reinforcement
Learning at the Edge of the Statistical Precipice", NeurIPS 2021.

Result files ``<results>/<suite>/<controller>.json`` (format "flockward-results/1") are read only
when their suite hash matches the suite as shipped; others are refused with a warning.
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
from flockward.config.atomic import write_atomic
from flockward.task.outcome import Outcome

OUTPUT_STEM = "leaderboard"  # leaderboard.md / .png (and any leaderboard.*) are never inputs
ROW_KEYS = (
    "controller",
    "information_level",
    "decision_period",
    "episodes",
    "success_rate",
    "breach_free_rate",
    "collision_rate",
    "mean_peak_fragmentation",
    "median_time_to_success",
    "score_iqm",
    "score_ci_low",
    "score_ci_high",
)
FORMATS = ("markdown", "csv", "json")

W_SUCCESS, W_BREACH, W_COHESION = 0.5, 0.3, 0.2

Statistic = Callable[..., Any]  # statistic(x, axis=-1) reduces along axis, like np.mean


class LeaderboardError(ValueError):
    """The leaderboard cannot be built; the message is one line saying what to do."""


# --------------------------------------------------------------------------------------------
# Scores and statistics.


def episode_score(ep: Mapping[str, Any]) -> float:
    """The headline score in [0, 1] of one episode record (see the module docstring)."""
    if ep["outcome"] == Outcome.ERROR:
        return 0.0
    kept = float(ep["breached_birds"] == 0)
    cohesion = min(1.0, max(0.0, float(ep["min_largest_fraction"])))
    return W_SUCCESS * float(bool(ep["success"])) + W_BREACH * kept + W_COHESION * cohesion


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


def load_results(
    results_dir: str | os.PathLike[str], suite: str, expected_hash: str
) -> list[dict[str, Any]]:
    """Every acceptable result file under ``<results_dir>/<suite>/``, in file-name order.

    A file that is not valid JSON, has another format, another suite hash, malformed episodes or a
    controller name already seen is skipped with a one-line warning on stderr.
    """
    folder = Path(results_dir) / suite
    accepted: list[dict[str, Any]] = []
    seen: dict[str, Path] = {}
    for path in sorted(folder.glob("*.json")):
        if path.stem == OUTPUT_STEM:
            continue
        try:
            data = read_json(path)
        except UnreadableResults as exc:
            _warn(f"skipping {path}: not a readable JSON file ({exc})")
            continue
        problem = file_problem(data, suite, expected_hash)
        if problem is None and data["controller"] in seen:
            problem = f"repeats controller {data['controller']!r} of {seen[data['controller']]}"
        if problem:
            _warn(f"skipping {path}: {problem}")
            continue
        seen[data["controller"]] = path
        accepted.append(data)
    return accepted


# --------------------------------------------------------------------------------------------
# Rows.


def _row(result: Mapping[str, Any], reps: int, seed: int) -> dict[str, Any]:
    eps = result["episodes"]
    ok = [ep for ep in eps if ep["outcome"] != Outcome.ERROR]
    n = len(eps)
    by_task: dict[str, list[float]] = {}
    for ep in eps:
        by_task.setdefault(ep["family"], []).append(episode_score(ep))
    pooled = np.concatenate([np.asarray(v) for v in by_task.values()])
    lo, hi = stratified_bootstrap_ci(list(by_task.values()), iqm, reps=reps, seed=seed)
    times = [float(ep["time_to_success"]) for ep in eps if ep["success"]]
    # An error episode counts as the worst case: not breach-free, fully fragmented.
    fragmentation = sum(1.0 - float(ep["min_largest_fraction"]) for ep in ok) + (n - len(ok))
    collided = sum(1 for ep in eps if _is_int(ep.get("collision_steps")) and ep["collision_steps"])
    # How often the controller decided: one value for the whole file, None if the records do not
    # say (files written before the decision interval) or disagree.
    periods = {ep.get("decision_period") for ep in eps}
    period = periods.pop() if len(periods) == 1 else None
    return {
        "controller": result["controller"],
        "information_level": result["information_level"],
        "decision_period": float(period) if isinstance(period, int | float) else None,
        "episodes": n,
        "success_rate": sum(1 for ep in eps if ep["success"]) / n,
        "breach_free_rate": sum(1 for ep in ok if ep["breached_birds"] == 0) / n,
        "collision_rate": collided / n,
        "mean_peak_fragmentation": fragmentation / n,
        "median_time_to_success": float(np.median(times)) if times else None,
        "score_iqm": float(iqm(pooled)),
        "score_ci_low": lo,
        "score_ci_high": hi,
    }


def build_rows(
    results: Sequence[Mapping[str, Any]], reps: int = 2000, seed: int = 0
) -> list[dict[str, Any]]:
    """One row per controller (keys ``ROW_KEYS``), best ``score_iqm`` first.

    Rates are shares of all episodes: success, no bird breached, at least one collision step.
    ``decision_period`` (s) is how long each action was held, None when the records do not say.
    ``mean_peak_fragmentation`` is the mean over episodes of 1 - min_largest_fraction (0 = the
    flock never split; an error counts as 1). ``median_time_to_success`` (s) is over successful
    episodes, None when there are none.
    """
    rows = [_row(r, reps, seed) for r in results]
    rows.sort(key=lambda r: (-r["score_iqm"], r["controller"]))
    return rows


# --------------------------------------------------------------------------------------------
# Rendering.


def _pct(v: float) -> str:
    return f"{100.0 * v:.1f} %"


def render_markdown(rows: Sequence[Mapping[str, Any]], suite: str, version: int) -> str:
    """The leaderboard as a Markdown document: heading, one-line method note and table."""
    lines = [
        f"# flockward leaderboard: suite `{suite}` (version {version})",
        "",
        "Score per episode = 0.5 success + 0.3 breach-free + 0.2 min largest-group "
        "share; an error scores 0. IQM of all episodes with a 95 % stratified bootstrap CI "
        "(episodes resampled within each scenario family).",
        "",
        "| rank | controller | information | decides every | episodes | score IQM | 95 % CI | "
        "success | breach-free | collision | fragmentation | median time to success |",
        "|---:|---|---|---:|---:|---:|---|---:|---:|---:|---:|---:|",
    ]
    for rank, r in enumerate(rows, 1):
        t = r["median_time_to_success"]
        d = r["decision_period"]
        lines.append(
            f"| {rank} | {r['controller']} | {r['information_level']} | "
            f"{'-' if d is None else f'{d:g} s'} | {r['episodes']} | "
            f"{r['score_iqm']:.3f} | [{r['score_ci_low']:.3f}, {r['score_ci_high']:.3f}] | "
            f"{_pct(r['success_rate'])} | {_pct(r['breach_free_rate'])} | "
            f"{_pct(r['collision_rate'])} | {r['mean_peak_fragmentation']:.3f} | "
            f"{'-' if t is None else f'{t:.1f} s'} |"
        )
    return "\n".join(lines) + "\n"


def render_csv(rows: Sequence[Mapping[str, Any]]) -> str:
    """The rows as CSV with a ``ROW_KEYS`` header; a missing time is an empty field."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=ROW_KEYS, lineterminator="\n")
    writer.writeheader()
    for r in rows:
        writer.writerow({k: "" if r[k] is None else r[k] for k in ROW_KEYS})
    return buf.getvalue()


def render_json(rows: Sequence[Mapping[str, Any]]) -> str:
    """The rows as a JSON list of objects with the ``ROW_KEYS`` keys."""
    return json.dumps([{k: r[k] for k in ROW_KEYS} for r in rows], indent=2) + "\n"


_LEVEL_STYLE = {  # information level -> (colour, marker)
    "observation": ("#1b7f79", "o"),
    "state": ("#c8553d", "D"),
}


def write_chart(rows: Sequence[Mapping[str, Any]], path: str | os.PathLike[str]) -> Path:
    """A PNG of each controller's score IQM with CI whiskers; colour and marker show the input."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    out = Path(path)
    fig = Figure(figsize=(7.0, 1.2 + 0.45 * max(1, len(rows))), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    for y, r in enumerate(reversed(rows)):  # best at the top
        colour, marker = _LEVEL_STYLE.get(r["information_level"], ("#555555", "s"))
        mid = r["score_iqm"]
        whiskers = [[mid - r["score_ci_low"]], [r["score_ci_high"] - mid]]
        ax.errorbar([mid], [y], xerr=whiskers, fmt=marker, ms=8, color=colour, mec="#222222",
                    elinewidth=2.5, capsize=5, capthick=2)  # fmt: skip
    ax.set_yticks(range(len(rows)), [r["controller"] for r in reversed(rows)])
    ax.set_xlim(-0.02, 1.02)  # room for markers at the ends of [0, 1]
    ax.set_ylim(-0.7, max(0, len(rows) - 1) + 0.7)
    ax.set_xlabel("episode score: IQM with 95 % stratified bootstrap CI")
    ax.grid(axis="x", color="#dddddd", lw=0.8)
    ax.set_axisbelow(True)
    handles = [
        Line2D([], [], color=c, marker=m, mec="#222222", lw=2.5, label=f"{level} input")
        for level, (c, m) in _LEVEL_STYLE.items()
    ]
    ax.legend(handles=handles, loc="lower center", bbox_to_anchor=(0.5, 1.0), ncol=2,
              fontsize=8, frameon=False)  # fmt: skip
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    write_atomic(out, buf.getvalue())
    return out


# --------------------------------------------------------------------------------------------
# The whole board.


@dataclass(frozen=True)
class Leaderboard:
    """The scored rows of one suite, with the suite version the result files were run on."""

    suite: str
    version: int
    rows: list[dict[str, Any]]

    def render(self, fmt: str) -> str:
        """The table in ``fmt``: one of ``FORMATS``."""
        if fmt == "markdown":
            return render_markdown(self.rows, self.suite, self.version)
        if fmt == "csv":
            return render_csv(self.rows)
        if fmt == "json":
            return render_json(self.rows)
        raise LeaderboardError(f"unknown format {fmt!r}; use one of: {', '.join(FORMATS)}")

    def write(self, results_dir: str | os.PathLike[str]) -> tuple[Path, Path]:
        """Write ``<results_dir>/<suite>/leaderboard.md`` and ``.png`` atomically; return both."""
        folder = Path(results_dir) / self.suite
        md = folder / f"{OUTPUT_STEM}.md"
        write_atomic(md, self.render("markdown"))
        return md, write_chart(self.rows, folder / f"{OUTPUT_STEM}.png")


def suite_reference(suite: str) -> str:
    """The hash of ``suite`` as shipped; LeaderboardError for an unknown or invalid suite."""
    from flockward.bench.suites import list_suites, load_suite, suite_hash
    from flockward.config.scenarios import ConfigError

    names = list_suites()
    if suite not in names:
        valid = ", ".join(names) if names else "none are shipped"
        raise LeaderboardError(f"unknown suite {suite!r}; valid suites: {valid}")
    try:
        return suite_hash(load_suite(suite))
    except ConfigError as exc:
        raise LeaderboardError(" ".join(str(exc).split())) from None


def build_leaderboard(
    results_dir: str | os.PathLike[str],
    suite: str,
    expected_hash: str | None = None,
    reps: int = 2000,
    seed: int = 0,
) -> Leaderboard:
    """Load, check and score every result file of ``suite``; LeaderboardError if none is usable.

    ``expected_hash`` defaults to the hash of the shipped suite.
    """
    if expected_hash is None:
        expected_hash = suite_reference(suite)
    folder = Path(results_dir) / suite
    candidates = [p for p in folder.glob("*.json") if p.stem != OUTPUT_STEM]
    if not candidates:
        raise LeaderboardError(
            f"no result files in {folder}; write them with `flockward run` for suite {suite!r}"
        )
    results = load_results(results_dir, suite, expected_hash)
    if not results:
        raise LeaderboardError(
            f"no valid result files in {folder}: all {len(candidates)} were refused (see above)"
        )
    return Leaderboard(suite, results[0]["suite_version"], build_rows(results, reps, seed))

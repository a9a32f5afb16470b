"""Statistics for reading and comparing benchmark results: small pure functions over arrays.

- ``wilson_interval``: the Wilson score interval of a success rate (Wilson 1927; Newcombe 1998
  recommends it over the Wald interval, which collapses to zero width at 0 % and 100 %).
- ``mcnemar_exact``: McNemar's test on paired successes, exact form: under no difference the
  discordant pairs split as Binomial(b + c, 1/2) (scipy.stats.binomtest).
- ``wilcoxon_signed_rank``: Wilcoxon's signed-rank test on paired differences
  (scipy.stats.wilcoxon; exact null distribution for small samples without ties).
- ``probability_of_improvement``: P(X > Y) + P(X = Y) / 2 for a score X of controller A and Y of
  B drawn on the same task, averaged over tasks (Agarwal et al. 2021, "Deep Reinforcement
  Learning at the Edge of the Statistical Precipice", NeurIPS, section 4.2).
- ``performance_profile``: the share of episodes scoring above each threshold, with a stratified
  bootstrap band (same paper, section 4.1).
- ``holm_adjust``: Holm's step-down adjusted p-values for a family of tests (Holm 1979, "A
  Simple Sequentially Rejective Multiple Test Procedure", Scand. J. Statist. 6:65-70): rejecting
  where the adjusted p is below alpha keeps the chance of any false rejection at most alpha.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

__all__ = [
    "PairedTest",
    "holm_adjust",
    "mcnemar_exact",
    "paired_bootstrap",
    "performance_profile",
    "probability_of_improvement",
    "wilcoxon_signed_rank",
    "wilson_interval",
]


@dataclass(frozen=True)
class PairedTest:
    """A paired test's outcome: the counts or sample it saw and its two-sided p-value."""

    n: int  # pairs that carry information (discordant pairs, or non-zero differences)
    statistic: float  # McNemar: pairs where A alone succeeded; Wilcoxon: the smaller rank sum
    p_value: float  # two-sided; 1.0 when n = 0


def wilson_interval(successes: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """The Wilson score interval of a proportion ``successes / n``, as (low, high) in [0, 1]."""
    if n < 1 or not 0 <= successes <= n:
        raise ValueError(
            f"wilson_interval needs 0 <= successes <= n and n >= 1, got {successes}/{n}"
        )
    z = float(stats.norm.ppf(0.5 + confidence / 2.0))
    p = successes / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z / (1 + z * z / n) * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    # At 0 and n successes the bound is exactly 0 or 1; rounding would leave it a hair inside.
    low = 0.0 if successes == 0 else max(0.0, float(centre - half))
    high = 1.0 if successes == n else min(1.0, float(centre + half))
    return low, high


def mcnemar_exact(success_a: Any, success_b: Any) -> PairedTest:
    """McNemar's exact test on paired booleans; ``statistic`` counts pairs where A alone won."""
    a = np.asarray(success_a, dtype=bool)
    b = np.asarray(success_b, dtype=bool)
    if a.shape != b.shape:
        raise ValueError(f"paired samples differ in shape: {a.shape} and {b.shape}")
    only_a = int(np.sum(a & ~b))
    discordant = only_a + int(np.sum(~a & b))
    if discordant == 0:
        return PairedTest(0, 0.0, 1.0)
    return PairedTest(discordant, float(only_a), float(stats.binomtest(only_a, discordant).pvalue))


def wilcoxon_signed_rank(differences: Any) -> PairedTest:
    """Wilcoxon's two-sided signed-rank test of paired differences (zeros dropped, as Wilcoxon
    proposed); ``statistic`` is the smaller of the positive and negative rank sums."""
    d = np.asarray(differences, dtype=float).reshape(-1)
    informative = int(np.count_nonzero(d))
    if informative == 0:
        return PairedTest(0, 0.0, 1.0)
    result = stats.wilcoxon(d, zero_method="wilcox")
    return PairedTest(informative, float(result.statistic), float(result.pvalue))


def holm_adjust(p_values: Sequence[float]) -> list[float]:
    """Holm's adjusted p-values, in the order given: for the i-th smallest of m p-values,
    max over j <= i of (m - j + 1) p_(j), capped at 1 (monotone in the raw p)."""
    p = np.asarray(p_values, dtype=float).reshape(-1)
    if np.any(~np.isfinite(p)) or np.any((p < 0.0) | (p > 1.0)):
        raise ValueError(f"holm_adjust needs p-values in [0, 1], got {p.tolist()}")
    m = p.size
    order = np.argsort(p, kind="stable")
    stepped = np.maximum.accumulate((m - np.arange(m)) * p[order])
    adjusted = np.empty(m)
    adjusted[order] = np.minimum(stepped, 1.0)
    return [float(x) for x in adjusted]


def _poi_task(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """P(X > Y) + P(X = Y)/2 over the last axis of x (..., n) and y (..., m)."""
    gt = (x[..., :, None] > y[..., None, :]).mean(axis=(-2, -1))
    eq = (x[..., :, None] == y[..., None, :]).mean(axis=(-2, -1))
    result: np.ndarray = gt + 0.5 * eq
    return result


def probability_of_improvement(a_by_task: Sequence[Any], b_by_task: Sequence[Any]) -> float:
    """The chance that A scores above B on a task, ties counting half, averaged over tasks.

    Each task's value is the Mann-Whitney U statistic of A's against B's scores divided by the
    number of pairs; 0.5 means neither is better.
    """
    if len(a_by_task) != len(b_by_task) or not a_by_task:
        raise ValueError(
            "probability_of_improvement needs the same non-empty list of tasks for both"
        )
    values = [
        _poi_task(np.asarray(a, dtype=float), np.asarray(b, dtype=float))
        for a, b in zip(a_by_task, b_by_task, strict=True)
    ]
    return float(np.mean(values))


def paired_bootstrap(
    a_by_task: Sequence[Any],
    b_by_task: Sequence[Any],
    reps: int = 2000,
    confidence: float = 0.95,
    seed: int = 0,
) -> dict[str, tuple[float, float]]:
    """Stratified bootstrap intervals of the mean paired difference A - B and of the probability
    of improvement: pairs are resampled with replacement within each task, never across.

    Returns {"difference": (low, high), "improvement": (low, high)}.
    """
    tasks = [
        (np.asarray(a, dtype=float).reshape(-1), np.asarray(b, dtype=float).reshape(-1))
        for a, b in zip(a_by_task, b_by_task, strict=True)
    ]
    if not tasks or any(a.size == 0 or a.size != b.size for a, b in tasks):
        raise ValueError("paired_bootstrap needs tasks with the same non-zero number of pairs")
    if reps < 1:
        raise ValueError(f"reps = {reps}: must be an integer >= 1")
    rng = np.random.default_rng(seed)
    total = sum(a.size for a, _ in tasks)
    sums = np.zeros(reps)
    poi = np.zeros(reps)
    for a, b in tasks:
        idx = rng.integers(0, a.size, size=(reps, a.size))
        sums += (a[idx] - b[idx]).sum(axis=1)
        poi += _poi_task(a[idx], b[idx])
    alpha = 100.0 * (1.0 - confidence) / 2.0
    diff = np.percentile(sums / total, [alpha, 100.0 - alpha])
    imp = np.percentile(poi / len(tasks), [alpha, 100.0 - alpha])
    return {
        "difference": (float(diff[0]), float(diff[1])),
        "improvement": (float(imp[0]), float(imp[1])),
    }


def performance_profile(
    scores_by_task: Sequence[Any],
    thresholds: Any,
    reps: int = 500,
    confidence: float = 0.95,
    seed: int = 0,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Share of all episodes scoring above each threshold, with a stratified bootstrap band.

    Returns (profile, low, high), each shaped like ``thresholds``; episodes are resampled within
    each task as for the headline interval.
    """
    tau = np.asarray(thresholds, dtype=float)
    tasks = [np.asarray(t, dtype=float).reshape(-1) for t in scores_by_task]
    if not tasks or any(t.size == 0 for t in tasks):
        raise ValueError("performance_profile needs at least one task, each with scores")
    if reps < 1:
        raise ValueError(f"reps = {reps}: must be an integer >= 1")
    pooled = np.concatenate(tasks)
    profile = (pooled[:, None] > tau[None, :]).mean(axis=0)
    rng = np.random.default_rng(seed)
    boot = np.zeros((reps, tau.size))
    for t in tasks:
        sample = t[rng.integers(0, t.size, size=(reps, t.size))]  # (reps, n)
        boot += (sample[:, :, None] > tau[None, None, :]).sum(axis=1)
    boot /= pooled.size
    alpha = 100.0 * (1.0 - confidence) / 2.0
    low, high = np.percentile(boot, [alpha, 100.0 - alpha], axis=0)
    return profile, low, high

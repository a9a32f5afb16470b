"""Two controllers on the same episodes: paired differences, pooled and per scenario family.

Episodes of the two result files are paired by (family, seed), so both controllers met the same
flock, start and noise. For the pooled set and each family this reports:

- the mean paired difference of episode scores (A - B) with a stratified bootstrap 95 % interval
  (pairs resampled within each family);
- the probability of improvement P(A > B) (Agarwal et al. 2021), with the same bootstrap;
- McNemar's exact test on success (only the discordant pairs carry information);
- Wilcoxon's signed-rank test on time to success over the pairs where both succeeded.

The verdict line calls a difference significant when its 95 % interval excludes zero. The
per-family intervals are not corrected for testing several families at once: with eight
families, expect a spurious "significant" family about once in three comparisons of equal
controllers (1 - 0.95^8 = 0.34); read per-family verdicts as where to look, and the pooled one as
the answer.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from flockward.bench.leaderboard import LeaderboardError, episode_score, row_name
from flockward.bench.statistics import (
    PairedTest,
    mcnemar_exact,
    paired_bootstrap,
    probability_of_improvement,
    wilcoxon_signed_rank,
)

POOLED = "all families"


@dataclass(frozen=True)
class PairedSummary:
    """The paired comparison of A and B on one set of episodes (pooled or one family)."""

    label: str  # family name, or POOLED
    pairs: int
    mean_a: float  # mean episode score of A
    mean_b: float
    difference: float  # mean of A - B over the pairs
    difference_ci: tuple[float, float]
    improvement: float  # P(A > B) + P(A = B) / 2
    improvement_ci: tuple[float, float]
    successes_a: int
    successes_b: int
    mcnemar: PairedTest  # statistic = pairs A alone succeeded
    both_succeeded: int
    median_time_difference: float | None  # s, A - B over pairs both succeeded
    wilcoxon: PairedTest

    @property
    def significant(self) -> bool:
        """The score difference's 95 % interval excludes zero."""
        lo, hi = self.difference_ci
        return lo > 0.0 or hi < 0.0


@dataclass(frozen=True)
class Comparison:
    """A against B: the pooled summary first, then one per family in suite order."""

    a: str
    b: str
    suite: str
    pooled: PairedSummary
    families: list[PairedSummary]
    unpaired: int  # episodes present in only one of the two files

    def verdict(self) -> str:
        """One line: which controller scores higher overall and in which families."""
        p = self.pooled
        lo, hi = p.difference_ci
        if p.significant:
            better, worse = (self.a, self.b) if p.difference > 0 else (self.b, self.a)
            head = (
                f"{better} is better than {worse} overall (score difference "
                f"{abs(p.difference):.3f}, 95 % CI [{min(abs(lo), abs(hi)):.3f}, "
                f"{max(abs(lo), abs(hi)):.3f}])"
            )
        else:
            head = (
                f"no significant overall difference between {self.a} and {self.b} "
                f"(A - B = {p.difference:+.3f}, 95 % CI [{lo:+.3f}, {hi:+.3f}])"
            )
        wins_a = [f.label for f in self.families if f.significant and f.difference > 0]
        wins_b = [f.label for f in self.families if f.significant and f.difference < 0]
        parts = []
        if wins_a:
            parts.append(f"{self.a} better on {', '.join(wins_a)}")
        if wins_b:
            parts.append(f"{self.b} better on {', '.join(wins_b)}")
        tied = len(self.families) - len(wins_a) - len(wins_b)
        if tied:
            parts.append(f"no significant difference on {tied} famil{'y' if tied == 1 else 'ies'}")
        return head + "; " + "; ".join(parts) if parts else head


def _summary(
    label: str,
    pairs_by_task: Sequence[Sequence[tuple[Mapping[str, Any], Mapping[str, Any]]]],
    reps: int,
    seed: int,
) -> PairedSummary:
    a_scores = [[episode_score(x) for x, _ in task] for task in pairs_by_task]
    b_scores = [[episode_score(y) for _, y in task] for task in pairs_by_task]
    flat = [pair for task in pairs_by_task for pair in task]
    sa = np.array([bool(x["success"]) for x, _ in flat])
    sb = np.array([bool(y["success"]) for _, y in flat])
    times = np.array(
        [
            float(x["time_to_success"]) - float(y["time_to_success"])
            for x, y in flat
            if x["success"] and y["success"]
        ]
    )
    boot = paired_bootstrap(a_scores, b_scores, reps=reps, seed=seed)
    diffs = np.concatenate([np.subtract(a, b) for a, b in zip(a_scores, b_scores, strict=True)])
    return PairedSummary(
        label=label,
        pairs=len(flat),
        mean_a=float(np.mean(np.concatenate(a_scores))),
        mean_b=float(np.mean(np.concatenate(b_scores))),
        difference=float(diffs.mean()),
        difference_ci=boot["difference"],
        improvement=probability_of_improvement(a_scores, b_scores),
        improvement_ci=boot["improvement"],
        successes_a=int(sa.sum()),
        successes_b=int(sb.sum()),
        mcnemar=mcnemar_exact(sa, sb),
        both_succeeded=int(times.size),
        median_time_difference=float(np.median(times)) if times.size else None,
        wilcoxon=wilcoxon_signed_rank(times),
    )


def pair_episodes(
    a: Mapping[str, Any], b: Mapping[str, Any]
) -> tuple[dict[str, list[tuple[dict[str, Any], dict[str, Any]]]], int]:
    """Episodes of two result files paired by (family, seed), grouped by family in A's order,
    and the number of episodes left unpaired."""
    index_b = {(ep["family"], ep["seed"]): ep for ep in b["episodes"]}
    grouped: dict[str, list[tuple[dict[str, Any], dict[str, Any]]]] = {}
    paired = 0
    for ep in a["episodes"]:
        other = index_b.get((ep["family"], ep["seed"]))
        if other is not None:
            grouped.setdefault(ep["family"], []).append((ep, other))
            paired += 1
    return grouped, len(a["episodes"]) + len(b["episodes"]) - 2 * paired


def compare_results(
    a: Mapping[str, Any], b: Mapping[str, Any], reps: int = 2000, seed: int = 0
) -> Comparison:
    """Compare the result files ``a`` and ``b`` of one suite on their shared episodes."""
    grouped, unpaired = pair_episodes(a, b)
    if not grouped:
        raise LeaderboardError(
            f"{row_name(a)} and {row_name(b)} share no (family, seed) episode; run both on "
            "the same suite"
        )
    tasks = list(grouped.values())
    return Comparison(
        a=row_name(a),
        b=row_name(b),
        suite=str(a["suite"]),
        pooled=_summary(POOLED, tasks, reps, seed),
        families=[_summary(f, [grouped[f]], reps, seed) for f in grouped],
        unpaired=unpaired,
    )


def _p(test: PairedTest) -> str:
    if test.n == 0:
        return "-"
    return f"{test.p_value:.2g}"


def render_comparison(c: Comparison) -> str:
    """The comparison as Markdown: heading, verdict line, one table row per set of episodes."""
    lines = [
        f"# {c.a} (A) against {c.b} (B) on suite `{c.suite}`",
        "",
        c.verdict(),
        "",
        "Episodes paired by (family, seed). Score difference = mean of A - B with a 95 % "
        "stratified bootstrap CI; P(A>B) = probability of improvement (ties count half); "
        "McNemar = exact test on success (A-only / B-only successes); Wilcoxon = signed-rank "
        "test on time to success where both succeeded (median A - B).",
        "",
        "| episodes | pairs | score A | score B | A - B | 95 % CI | P(A>B) | 95 % CI | "
        "success A | success B | A-only / B-only | McNemar p | both succeeded | "
        "median time A - B | Wilcoxon p |",
        "|---|---:|---:|---:|---:|---|---:|---|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for s in (c.pooled, *c.families):
        lo, hi = s.difference_ci
        plo, phi = s.improvement_ci
        only_a = int(s.mcnemar.statistic)
        only_b = s.mcnemar.n - only_a
        t = s.median_time_difference
        label = f"**{s.label}**" if s.label == POOLED else s.label
        lines.append(
            f"| {label} | {s.pairs} | {s.mean_a:.3f} | {s.mean_b:.3f} | {s.difference:+.3f} | "
            f"[{lo:+.3f}, {hi:+.3f}] | {s.improvement:.2f} | [{plo:.2f}, {phi:.2f}] | "
            f"{s.successes_a} | {s.successes_b} | {only_a} / {only_b} | {_p(s.mcnemar)} | "
            f"{s.both_succeeded} | {'-' if t is None else f'{t:+.1f} s'} | {_p(s.wilcoxon)} |"
        )
    if c.unpaired:
        lines += ["", f"{c.unpaired} episode(s) appear in only one file and were left out."]
    return "\n".join(lines) + "\n"

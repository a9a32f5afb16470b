"""Two controllers on the same episodes: paired differences, pooled and per scenario family.

Episodes of the two result files are paired by (family, seed), so both controllers met the same
flock, start and noise. For the pooled set and each family this reports:

- the mean paired difference of episode scores (A - B) with a stratified bootstrap 95 % interval
  (pairs resampled within each family);
- the probability of improvement P(A > B) (Agarwal et al. 2021), with the same bootstrap;
- McNemar's exact test on success (only the discordant pairs carry information);
- Wilcoxon's signed-rank test on time to success over the pairs where both succeeded.

The verdict line calls the pooled difference significant when its 95 % interval excludes zero
(one test, no correction). Per family it reads the two tests, each corrected for the number of
families with Holm's step-down method (statistics.holm_adjust): a family counts for success when
its Holm-adjusted McNemar p is below 0.05 and for speed when its Holm-adjusted Wilcoxon p is; the
table reports each raw p beside the adjusted one. Without the correction, eight families of two
equal controllers would show a spurious difference in about one comparison in three
(1 - 0.95^8 = 0.34); with it, in at most one in twenty for either test.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from flockward.bench.leaderboard import LeaderboardError, episode_score, row_name
from flockward.bench.statistics import (
    PairedTest,
    holm_adjust,
    mcnemar_exact,
    paired_bootstrap,
    probability_of_improvement,
    wilcoxon_signed_rank,
)

POOLED = "all families"
ALPHA = 0.05  # level of the Holm-adjusted family tests (the pooled verdict reads the 95 % interval)


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
    # Holm-adjusted p over the families compared (None for the pooled set: a single test)
    mcnemar_adjusted: float | None = None
    wilcoxon_adjusted: float | None = None

    @property
    def significant(self) -> bool:
        """The score difference's 95 % interval excludes zero."""
        lo, hi = self.difference_ci
        return lo > 0.0 or hi < 0.0

    @property
    def success_winner(self) -> str | None:
        """'a' or 'b' when one succeeds more often here at the Holm-adjusted McNemar p < ALPHA."""
        p = self.mcnemar.p_value if self.mcnemar_adjusted is None else self.mcnemar_adjusted
        if self.mcnemar.n == 0 or p >= ALPHA:
            return None
        only_a = self.mcnemar.statistic
        return "a" if only_a > self.mcnemar.n - only_a else "b"

    @property
    def faster(self) -> str | None:
        """'a' or 'b' when one succeeds sooner here at the Holm-adjusted Wilcoxon p < ALPHA."""
        p = self.wilcoxon.p_value if self.wilcoxon_adjusted is None else self.wilcoxon_adjusted
        t = self.median_time_difference
        if self.wilcoxon.n == 0 or p >= ALPHA or not t:
            return None
        return "a" if t < 0.0 else "b"


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
        """One line: which controller scores higher overall; per family, which succeeds more often
        and which sooner (Holm-corrected tests)."""
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
        return head + "; " + self._family_verdict()

    def _family_verdict(self) -> str:
        """Per family: who succeeds more often and who is faster, Holm-corrected."""
        names = {"a": self.a, "b": self.b}
        parts = []
        for who in ("a", "b"):
            won = [f.label for f in self.families if f.success_winner == who]
            if won:
                parts.append(f"{names[who]} succeeds more often on {', '.join(won)}")
        for who in ("a", "b"):
            quick = [f.label for f in self.families if f.faster == who]
            if quick:
                parts.append(f"{names[who]} succeeds sooner on {', '.join(quick)}")
        tied = sum(1 for f in self.families if f.success_winner is None and f.faster is None)
        if tied:
            parts.append(f"no significant difference on {tied} famil{'y' if tied == 1 else 'ies'}")
        n = len(self.families)
        return f"per family (Holm-corrected over {n}): " + "; ".join(parts)


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
        families=_holm_corrected([_summary(f, [grouped[f]], reps, seed) for f in grouped]),
        unpaired=unpaired,
    )


def _holm_corrected(families: list[PairedSummary]) -> list[PairedSummary]:
    """The family summaries with their McNemar and Wilcoxon p-values Holm-adjusted, each test
    over all families (a family whose test saw no informative pair counts with p = 1)."""
    mcnemar = holm_adjust([f.mcnemar.p_value for f in families])
    wilcoxon = holm_adjust([f.wilcoxon.p_value for f in families])
    return [
        replace(f, mcnemar_adjusted=pm, wilcoxon_adjusted=pw)
        for f, pm, pw in zip(families, mcnemar, wilcoxon, strict=True)
    ]


def _p(test: PairedTest, adjusted: float | None) -> str:
    """The raw p, and the Holm-adjusted one beside it where there is one ('-' without pairs)."""
    if test.n == 0:
        return "-"
    raw = f"{test.p_value:.2g}"
    return raw if adjusted is None else f"{raw} ({adjusted:.2g})"


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
        "test on time to success where both succeeded (median A - B). Per family, each p is "
        "followed by its Holm-adjusted value (in parentheses) over the families; family verdicts "
        "use the adjusted p.",
        "",
        "| episodes | pairs | score A | score B | A - B | 95 % CI | P(A>B) | 95 % CI | "
        "success A | success B | A-only / B-only | McNemar p (Holm) | both succeeded | "
        "median time A - B | Wilcoxon p (Holm) |",
        "|---|---:|---:|---:|---:|---|---:|---|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for s in (c.pooled, *c.families):
        lo, hi = s.difference_ci
        plo, phi = s.improvement_ci
        only_a = int(s.mcnemar.statistic)
        only_b = s.mcnemar.n - only_a
        t = s.median_time_difference
        label = f"**{s.label}**" if s.label == POOLED else s.label
        mcnemar = _p(s.mcnemar, s.mcnemar_adjusted)
        wilcoxon = _p(s.wilcoxon, s.wilcoxon_adjusted)
        lines.append(
            f"| {label} | {s.pairs} | {s.mean_a:.3f} | {s.mean_b:.3f} | {s.difference:+.3f} | "
            f"[{lo:+.3f}, {hi:+.3f}] | {s.improvement:.2f} | [{plo:.2f}, {phi:.2f}] | "
            f"{s.successes_a} | {s.successes_b} | {only_a} / {only_b} | {mcnemar} | "
            f"{s.both_succeeded} | {'-' if t is None else f'{t:+.1f} s'} | {wilcoxon} |"
        )
    if c.unpaired:
        lines += ["", f"{c.unpaired} episode(s) appear in only one file and were left out."]
    return "\n".join(lines) + "\n"

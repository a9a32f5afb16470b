"""The comparison statistics against scipy.stats, hand-worked values and textbook examples.

Sources: Wilson (1927) score interval, Newcombe (1998, Statistics in Medicine 17:857) worked
example 81/263 -> [0.2553, 0.3662] (from memory, matched by scipy); Darwin's Zea mays paired
differences as analysed in scipy.stats.wilcoxon's documentation (W = 24, exact p = 0.04126, from
memory); McNemar's exact test as a binomial test on the discordant pairs (Agresti, Categorical
Data Analysis, section 10.1); probability of improvement and performance profiles as defined by
Agarwal et al. (NeurIPS 2021); Holm's step-down procedure (Holm 1979, Scand. J. Statist.
6:65-70) on the four-hypothesis example of Wikipedia's "Holm-Bonferroni method" article (p = 0.01,
0.04, 0.03, 0.005 at alpha 0.05: H1 and H4 rejected), with adjusted p-values computed by hand.
statsmodels' multipletests is not installed in the project's environment, so it is not the check.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats

from flockward.bench.statistics import (
    holm_adjust,
    mcnemar_exact,
    paired_bootstrap,
    performance_profile,
    probability_of_improvement,
    wilcoxon_signed_rank,
    wilson_interval,
)

RNG = np.random.default_rng(20261202)
A = RNG.uniform(0.3, 1.0, size=40)
B = np.clip(A - RNG.normal(0.05, 0.1, size=40), 0.0, 1.0)


def test_wilson_textbook_example() -> None:
    # Newcombe 1998, example 81/263 (from memory; scipy below agrees).
    assert wilson_interval(81, 263) == pytest.approx((0.2553, 0.3662), abs=5e-5)


def test_wilson_zero_successes_hand_worked() -> None:
    # 0/n: low 0, high z^2 / (n + z^2) (Wilson's formula with p = 0).
    z2 = scipy.stats.norm.ppf(0.975) ** 2
    assert wilson_interval(0, 20) == pytest.approx((0.0, z2 / (20 + z2)))
    assert wilson_interval(20, 20) == pytest.approx((20 / (20 + z2), 1.0))


@pytest.mark.parametrize(("k", "n"), [(0, 1), (3, 7), (15, 148), (29, 30), (240, 240)])
def test_wilson_matches_scipy(k: int, n: int) -> None:
    ci = scipy.stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
    assert wilson_interval(k, n) == pytest.approx((ci.low, ci.high), abs=1e-12)


def test_wilson_rejects_bad_counts() -> None:
    with pytest.raises(ValueError, match="successes"):
        wilson_interval(5, 4)
    with pytest.raises(ValueError, match="successes"):
        wilson_interval(0, 0)


def test_mcnemar_exact_hand_worked() -> None:
    # 1 pair where A alone succeeded, 5 where B alone did, 4 concordant: under H0 the 6
    # discordant pairs split Binomial(6, 1/2); p = 2 * P(X <= 1) = 2 * (1 + 6) / 64.
    a = [True] + [False] * 5 + [True, True, False, False]
    b = [False] + [True] * 5 + [True, True, False, False]
    test = mcnemar_exact(a, b)
    assert (test.n, test.statistic) == (6, 1.0)
    assert test.p_value == pytest.approx(14 / 64)


def test_mcnemar_textbook_table_close_to_chi_square() -> None:
    # Agresti's presidential-approval table (10.1): discordant cells 150 and 86; McNemar's
    # chi-square z^2 = (150 - 86)^2 / 236 = 17.36 (from memory). With this many pairs the exact
    # p-value is close to the chi-square one.
    a = np.array([True] * 150 + [False] * 86 + [True] * 794 + [False] * 570)
    b = np.array([False] * 150 + [True] * 86 + [True] * 794 + [False] * 570)
    test = mcnemar_exact(a, b)
    assert (150 - 86) ** 2 / 236 == pytest.approx(17.36, abs=0.005)
    chi2_p = scipy.stats.chi2.sf(17.36, 1)
    assert test.p_value == pytest.approx(chi2_p, rel=0.25)
    assert test.p_value == pytest.approx(scipy.stats.binomtest(150, 236).pvalue)


def test_mcnemar_without_discordant_pairs() -> None:
    test = mcnemar_exact([True, False], [True, False])
    assert (test.n, test.p_value) == (0, 1.0)


def test_wilcoxon_textbook_example() -> None:
    # Darwin's Zea mays differences (cross- minus self-fertilised heights, eighths of an inch).
    d = [6, 8, 14, 16, 23, 24, 28, 29, 41, -48, 49, 56, 60, -67, 75]
    test = wilcoxon_signed_rank(d)
    assert test.statistic == 24.0  # negative ranks 10 + 14
    assert test.p_value == pytest.approx(0.041259765625)


def test_wilcoxon_matches_scipy_and_drops_zeros() -> None:
    d = np.round(A - B, 2)
    d[:3] = 0.0
    test = wilcoxon_signed_rank(d)
    ref = scipy.stats.wilcoxon(d, zero_method="wilcox")
    assert test.n == int(np.sum(d != 0)) < 40
    assert (test.statistic, test.p_value) == pytest.approx((ref.statistic, ref.pvalue))
    assert wilcoxon_signed_rank([0.0, 0.0]).p_value == 1.0


def test_probability_of_improvement_matches_mann_whitney() -> None:
    tasks_a = [A[:20], A[20:]]
    tasks_b = [np.round(B[:20], 1), np.round(B[20:], 1)]  # ties count half
    expected = np.mean(
        [
            scipy.stats.mannwhitneyu(a, b).statistic / (a.size * b.size)
            for a, b in zip(tasks_a, tasks_b, strict=True)
        ]
    )
    assert probability_of_improvement(tasks_a, tasks_b) == pytest.approx(expected)
    assert probability_of_improvement([A], [A]) == pytest.approx(0.5)


def test_paired_bootstrap_single_task_matches_scipy() -> None:
    # One task: the stratified bootstrap of the mean paired difference is the ordinary
    # percentile bootstrap of the mean of A - B (scipy.stats.bootstrap, method "percentile").
    ours = paired_bootstrap([A], [B], reps=20000, seed=1)["difference"]
    ref = scipy.stats.bootstrap(
        (A - B,), np.mean, n_resamples=20000, method="percentile", random_state=2
    ).confidence_interval
    width = ref.high - ref.low
    assert ours[0] == pytest.approx(ref.low, abs=0.03 * width)
    assert ours[1] == pytest.approx(ref.high, abs=0.03 * width)


def test_paired_bootstrap_keeps_pairs_and_tasks() -> None:
    # Identical controllers differ by exactly zero in every resample; swapping A and B mirrors
    # the interval.
    same = paired_bootstrap([A[:20], A[20:]], [A[:20], A[20:]], reps=300)
    assert same["difference"] == (0.0, 0.0) and same["improvement"] == (0.5, 0.5)
    ab = paired_bootstrap([A], [B], reps=500, seed=3)
    ba = paired_bootstrap([B], [A], reps=500, seed=3)
    assert ab["difference"] == pytest.approx((-ba["difference"][1], -ba["difference"][0]))


def test_performance_profile_hand_worked() -> None:
    profile, low, high = performance_profile([[0.1, 0.5], [0.9, 0.9]], [0.0, 0.3, 0.95], reps=200)
    assert profile == pytest.approx([1.0, 0.75, 0.0])  # scores strictly above each threshold
    assert np.all(low <= profile + 1e-12) and np.all(profile <= high + 1e-12)
    assert (low[0], high[0], low[2], high[2]) == (1.0, 1.0, 0.0, 0.0)
    # Only the first task varies under resampling: 0, 1 or 2 of its scores exceed 0.3.
    assert (low[1], high[1]) == (0.5, 1.0)


def test_holm_worked_example() -> None:
    # Wikipedia, "Holm-Bonferroni method": 0.005 < 0.05/4 and 0.01 < 0.05/3 are rejected, 0.03 is
    # not below 0.05/2 so it and 0.04 are kept. Adjusted by hand, sorted 0.005, 0.01, 0.03, 0.04:
    # 4 * 0.005 = 0.02; max(0.02, 3 * 0.01) = 0.03; max(0.03, 2 * 0.03) = 0.06; max(0.06, 0.04).
    adjusted = holm_adjust([0.01, 0.04, 0.03, 0.005])
    assert adjusted == pytest.approx([0.03, 0.06, 0.06, 0.02])
    assert [p < 0.05 for p in adjusted] == [True, False, False, True]


def test_holm_caps_at_one_and_keeps_single_tests() -> None:
    # Hand-worked: 3 * 0.5 = 1.5 -> 1; max(1, 2 * 0.6) -> 1; a single test is left alone.
    assert holm_adjust([0.6, 0.5, 0.001]) == pytest.approx([1.0, 1.0, 0.003])
    assert holm_adjust([0.2]) == [0.2]
    assert holm_adjust([]) == []
    with pytest.raises(ValueError, match=r"p-values in \[0, 1\]"):
        holm_adjust([0.1, 1.5])


def test_holm_ties_keep_order() -> None:
    # Hand-worked: equal p-values get equal adjusted values (2 * 0.02 = 0.04, max with 1 * 0.02).
    assert holm_adjust([0.02, 0.02]) == pytest.approx([0.04, 0.04])

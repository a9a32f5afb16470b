"""`flockward compare`: pairing by (family, seed), the paired statistics against scipy.stats, the
verdict line, and the command through its real entry point."""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import scipy.stats
from test_leaderboard import HASH, PNG_MAGIC, _ep, _result, _write

import flockward.bench.leaderboard as lb
from flockward.bench.compare import compare_results, pair_episodes, render_comparison
from flockward.bench.leaderboard import episode_score
from flockward_baselines.cli import main


def _pair_results() -> tuple[dict, dict]:
    """A wins 'fast' (quicker successes), B scores higher on 'edge' (A breaches where B holds,
    neither succeeds), 'same' ties, B succeeds where A breaches on 'held', and A alone succeeds
    in 6 of 12 episodes of 'mild' (raw McNemar p = 2 / 2^6 = 0.031, not significant once
    corrected for five families)."""
    a_eps, b_eps = [], []
    for seed in range(12):
        a_eps.append(_ep("fast", "success", t=40.0 + seed, seed=seed))
        b_eps.append(_ep("fast", "success", t=70.0 + seed, seed=seed))
        a_eps.append(_ep("edge", "breach", breached=2, seed=seed))
        b_eps.append(_ep("edge", "timeout", clearance=30.0, seed=seed))
        a_eps.append(_ep("same", "timeout", seed=seed))
        b_eps.append(_ep("same", "timeout", seed=seed))
        a_eps.append(_ep("held", "breach", breached=1, seed=seed))
        b_eps.append(_ep("held", "success", t=60.0, seed=seed))
        a_eps.append(_ep("mild", "success" if seed < 6 else "timeout", t=50.0, seed=seed))
        b_eps.append(_ep("mild", "timeout", seed=seed))
    b_eps.reverse()  # pairing goes by (family, seed), not file order
    return _result("alpha", "state", a_eps), _result("beta", "state", b_eps)


def test_pairs_by_family_and_seed() -> None:
    a, b = _pair_results()
    b["episodes"] = b["episodes"][:-1]  # B lacks one episode
    grouped, unpaired = pair_episodes(a, b)
    assert unpaired == 1
    for family, pairs in grouped.items():
        for x, y in pairs:
            assert (x["family"], x["seed"]) == (y["family"], y["seed"]) and x["family"] == family


def test_comparison_statistics_against_scipy() -> None:
    a, b = _pair_results()
    c = compare_results(a, b, reps=500)
    assert [f.label for f in c.families] == ["fast", "edge", "same", "held", "mild"]
    fast, edge, same, held, mild = c.families
    # Scores recomputed by hand-built pairing; the difference is their mean.
    a_fast = [episode_score(e) for e in a["episodes"] if e["family"] == "fast"]
    b_fast = [episode_score(e) for e in sorted(b["episodes"], key=lambda e: e["seed"])
              if e["family"] == "fast"]  # fmt: skip
    assert fast.difference == pytest.approx(np.mean(np.subtract(a_fast, b_fast)))
    assert fast.difference == pytest.approx(0.35 * 0.5 * 30 / 150)
    # Wilcoxon on times where both succeed: all 12 differences are -30 s (ties), as scipy does.
    ref = scipy.stats.wilcoxon(np.full(12, -30.0))
    assert (fast.wilcoxon.n, fast.wilcoxon.p_value) == (12, pytest.approx(ref.pvalue))
    assert fast.median_time_difference == -30.0
    # McNemar: no success discordance in 'fast'; probability of improvement is 1 (A always above).
    assert fast.mcnemar.n == 0 and fast.improvement == 1.0
    assert edge.improvement == 0.0 and edge.difference < 0 and edge.significant
    assert same.difference == 0.0 and not same.significant
    # Pooled probability of improvement = mean over families of Mann-Whitney U / (n m).
    expected = np.mean([1.0, 0.0, 0.5, 0.0, 0.75])
    assert c.pooled.improvement == pytest.approx(expected)
    # McNemar: 'held' 0 of 12 discordant pairs to A, 'mild' 6 of 6 (binomial test, scipy).
    assert held.mcnemar.p_value == pytest.approx(scipy.stats.binomtest(0, 12).pvalue)
    assert mild.mcnemar.p_value == pytest.approx(scipy.stats.binomtest(6, 6).pvalue)
    assert mild.mcnemar.p_value < 0.05
    line = c.verdict()
    assert "per family (Holm-corrected over 5)" in line
    assert "beta succeeds more often on held" in line and "alpha succeeds sooner on fast" in line
    # 'mild' is significant uncorrected but not after Holm; 'edge' differs in score only (breach
    # against timeout), which neither test sees.
    assert "alpha succeeds more often" not in line
    assert "no significant difference on 3 families" in line


def test_holm_adjusts_each_test_over_the_families() -> None:
    """Holm's adjusted p, worked by hand from the raw p-values: m = 5 families, McNemar raw
    p = 1, 1, 1, 2^-11 ('held'), 2^-5 ('mild'): sorted, 5 * 2^-11, then max(.., 4 * 2^-5) = 0.125,
    then 1 for the rest. Wilcoxon: only 'fast' has pairs; 5 times its raw p."""
    a, b = _pair_results()
    c = compare_results(a, b, reps=100)
    fast, _, same, held, mild = c.families
    assert held.mcnemar_adjusted == pytest.approx(5 * 2.0**-11)
    assert mild.mcnemar_adjusted == pytest.approx(4 * 2.0**-5)
    assert same.mcnemar_adjusted == 1.0
    assert fast.wilcoxon_adjusted == pytest.approx(5 * fast.wilcoxon.p_value)
    assert c.pooled.mcnemar_adjusted is None
    table = render_comparison(c)
    assert f"| {mild.mcnemar.p_value:.2g} (0.12) |" in table


def test_mcnemar_in_comparison_matches_binomtest() -> None:
    a, b = _pair_results()
    for ep in a["episodes"][:15]:  # 3 of alpha's 'fast' successes become timeouts
        if ep["family"] == "fast":
            ep.update(outcome="timeout", success=False, time_to_success=None)
    c = compare_results(a, b, reps=200)
    fast = c.families[0]
    assert (fast.mcnemar.n, fast.mcnemar.statistic) == (3, 0.0)
    assert fast.mcnemar.p_value == pytest.approx(scipy.stats.binomtest(0, 3).pvalue)
    assert fast.both_succeeded == 9


@pytest.fixture
def results(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.setattr(lb, "suite_reference", lambda suite: HASH)
    a, b = _pair_results()
    _write(tmp_path / "standard", "alpha.json", a)
    _write(tmp_path / "standard", "beta.json", b)
    return tmp_path


def test_compare_command(results: Path, tmp_path: Path, capsys: Any) -> None:
    png = tmp_path / "profiles.png"
    args = ["compare", "alpha", "beta", "--suite", "standard", "--results", str(results)]
    assert main([*args, "--reps", "300", "--profiles", str(png)]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    assert lines[0].startswith("# alpha (A) against beta (B)")
    assert "succeeds more often on" in lines[2]
    assert "| **all families** | 60 |" in out and "| edge | 12 |" in out
    assert png.read_bytes().startswith(PNG_MAGIC)


def test_compare_errors_are_one_line(results: Path, capsys: Any) -> None:
    base = ["--suite", "standard", "--results", str(results)]
    assert main(["compare", "alpha", "gamma", *base]) == 2
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and "gamma" in err[0] and "available: alpha, beta" in err[0]
    assert main(["compare", "alpha", "alpha", *base]) == 2
    assert "itself" in capsys.readouterr().err
    assert main(["compare", "alpha", "beta", *base, "--reps", "0"]) == 2
    assert "--reps 0" in capsys.readouterr().err


def test_render_notes_unpaired_episodes() -> None:
    a, b = _pair_results()
    b = copy.deepcopy(b)
    b["episodes"] = b["episodes"][2:]
    assert "2 episode(s) appear in only one file" in render_comparison(compare_results(a, b, 100))


def test_demo_labels_the_smoke_table(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                     capsys: Any) -> None:  # fmt: skip
    """The demo's table and files say the smoke suite is no measure of quality. The episodes are
    stubbed (hand-built records with the real smoke hash): this checks the labelling only."""
    import flockward.bench.evaluation as evaluation
    from flockward.bench.suites import load_suite, suite_hash
    from flockward_baselines import cli

    smoke = load_suite("smoke")

    def fake_run(suite: Any, factory: Any, name: str, results: str, **_: Any) -> Path:
        eps = [_ep(s.family, "timeout", seed=s.seed) | {"index": s.index, "scenario":
               s.scenario_name} for s in suite.episodes()]  # fmt: skip
        data = _result(name, "state", eps, suite_hash(smoke)) | {
            "suite": "smoke",
            "suite_version": smoke.version,
        }
        return _write(Path(results) / "smoke", f"{name}.json", data)

    monkeypatch.setattr(evaluation, "run_suite", fake_run)
    monkeypatch.setattr(cli, "_cmd_show", lambda ns: 0)
    assert main(["demo", "--results", str(tmp_path), "--gif", str(tmp_path / "x.gif")]) == 0
    out = capsys.readouterr().out
    assert out.count("nothing about a controller's quality") >= 2
    md = (tmp_path / "smoke" / "leaderboard.md").read_text(encoding="utf-8")
    assert md.splitlines()[2] == cli.SMOKE_NOTE

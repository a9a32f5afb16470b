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
    """A wins 'fast' (quicker successes), B wins 'edge' (A breaches where B holds), 'same' ties."""
    a_eps, b_eps = [], []
    for seed in range(12):
        a_eps.append(_ep("fast", "success", t=40.0 + seed, seed=seed))
        b_eps.append(_ep("fast", "success", t=70.0 + seed, seed=seed))
        a_eps.append(_ep("edge", "breach", breached=2, seed=seed))
        b_eps.append(_ep("edge", "timeout", clearance=30.0, seed=seed))
        a_eps.append(_ep("same", "timeout", seed=seed))
        b_eps.append(_ep("same", "timeout", seed=seed))
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
    assert [f.label for f in c.families] == ["fast", "edge", "same"]
    fast, edge, same = c.families
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
    expected = np.mean([1.0, 0.0, 0.5])
    assert c.pooled.improvement == pytest.approx(expected)
    line = c.verdict()
    assert "alpha better on fast" in line and "beta better on edge" in line
    assert "no significant difference on 1 family" in line


def test_mcnemar_in_comparison_matches_binomtest() -> None:
    a, b = _pair_results()
    for ep in a["episodes"][:9]:  # 3 of alpha's 'fast' successes become timeouts
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
    assert "better on" in lines[2]
    assert "| **all families** | 36 |" in out and "| edge | 12 |" in out
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

"""Leaderboard scoring, statistics, result-file checks and the ``flockward board`` command.

The IQM and the stratified percentile bootstrap follow Agarwal et al., "Deep Reinforcement
Learning at the Edge of the Statistical Precipice", NeurIPS 2021; scipy.stats.trim_mean and
scipy.stats.bootstrap serve as independent implementations to compare against.
"""

from __future__ import annotations

import copy
import csv
import io
import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

import flockward.bench.leaderboard as lb
from flockward.bench.leaderboard import (
    ROW_KEYS,
    build_leaderboard,
    build_rows,
    episode_score,
    iqm,
    load_results,
    render_csv,
    render_json,
    render_markdown,
    stratified_bootstrap_ci,
)
from flockward_baselines.cli import main

HASH = "0123abcd"
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


# --------------------------------------------------------------------------------------------
# Fixtures.


def _ep(family: str, outcome: str, birds: int = 10, breached: int = 0, mlf: float = 1.0,
        collisions: int = 0, t: float | None = None, seed: int = 0,
        clearance: float | None = None, limit: float = 150.0,
        duration: float | None = None) -> dict[str, Any]:  # fmt: skip
    if clearance is None:
        clearance = -5.0 if breached else 120.0
    if duration is None:
        duration = {"success": t, "timeout": limit, "error": 0.0}.get(outcome, 30.0)
    return {
        "family": family,
        "scenario": family,
        "seed": seed,
        "index": seed,
        "birds": birds,
        "success": outcome == "success",
        "outcome": outcome,
        "steps": 100,
        "time_to_success": t if outcome == "success" else None,
        "time_limit": limit,
        "duration": duration,
        "breached_birds": breached,
        "min_zone_clearance": clearance,
        "peak_components": 1 if mlf == 1.0 else 2,
        "min_largest_fraction": mlf,
        "collision_steps": collisions,
        "closest_approach": 3.0,
        "diameter_growth": 1.0,
        "path_length": 100.0,
        "energy": 1.0,
        "episode_return": 0.0,
        "error": "boom" if outcome == "error" else None,
    }


def _result(controller: str, level: str, episodes: list[dict], suite_hash: str = HASH) -> dict:
    return {
        "format": "flockward-results/1",
        "suite": "standard",
        "suite_version": 3,
        "suite_hash": suite_hash,
        "controller": controller,
        "information_level": level,
        "controller_parameters": {},
        "provenance": {},
        "episodes": episodes,
    }


ALPHA = _result("alpha", "observation", [
    _ep("headon", "success", t=40.0, seed=0),
    _ep("headon", "success", t=60.0, collisions=2, mlf=0.8, seed=1),
    _ep("headon", "breach", breached=4, mlf=0.5, seed=2),
    _ep("oblique", "success", t=30.0, seed=3),
    _ep("oblique", "timeout", breached=0, mlf=0.9, collisions=1, seed=4),
    _ep("oblique", "error", seed=5),
])  # fmt: skip
BETA = _result("beta", "state", [
    _ep("headon", "breach", breached=10, mlf=0.3, seed=0),
    _ep("headon", "timeout", mlf=1.0, seed=1),
    _ep("oblique", "breach", breached=12, birds=12, mlf=0.25, seed=2),
    _ep("oblique", "timeout", mlf=0.6, collisions=5, seed=3),
])  # fmt: skip


def _write(folder: Path, name: str, data: dict) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


# --------------------------------------------------------------------------------------------
# Episode score.


def test_episode_score_known_cases() -> None:
    # Hand-worked from the weights 0.40 / 0.35 / 0.10 / 0.10 / 0.05 (regression of the definition).
    # Success at 30 s of 150 s, 120 m clear (capped), no contact, whole flock:
    # 0.4 + 0.35 * (1 - 0.5 * 0.2) + 0.1 + 0.1 + 0.05.
    assert episode_score(_ep("f", "success", t=30.0)) == pytest.approx(0.965)
    assert episode_score(_ep("f", "error")) == 0.0
    # Breach at 30 s of 150 s, largest group held half the birds: the breach's delay, contact and
    # cohesion remain: 0.4 * 0.5 * 30/150 + 0.1 + 0.05 * 0.5.
    assert episode_score(_ep("f", "breach", breached=5, mlf=0.5)) == pytest.approx(0.165)
    # Timeout, flock 40 m from the zone, 3 contact steps, whole flock: 0.4 + 0.1 * 0.4 + 0.05.
    assert episode_score(_ep("f", "timeout", clearance=40.0, collisions=3)) == pytest.approx(0.49)
    # A single breaching bird (tolerated until the time limit) forfeits half the kept-out term
    # and the clearance: 0.4 * 0.5 + 0.1 + 0.05.
    assert episode_score(_ep("f", "timeout", birds=50, breached=1)) == pytest.approx(0.35)
    terms = lb.score_terms(_ep("f", "success", t=75.0, clearance=50.0, mlf=0.6))
    assert terms == pytest.approx(
        {"breach_free": 1.0, "success_speed": 0.75, "clearance": 0.5, "contact_free": 1.0,
         "cohesion": 0.6}
    )  # fmt: skip


def test_weights_sum_to_one() -> None:
    assert sum(lb.WEIGHTS.values()) == pytest.approx(1.0)


_EPISODES = st.builds(
    lambda outcome, birds, frac, mlf, t, clearance, collisions: _ep(
        "f", outcome, birds=birds, mlf=mlf, collisions=collisions, t=t * 150.0,
        breached=max(1, int(frac * birds)) if outcome == "breach" else int(frac * birds),
        clearance=clearance if not frac * birds >= 1 else -abs(clearance),
    ),
    outcome=st.sampled_from(["success", "breach", "timeout", "error"]),
    birds=st.integers(1, 500),
    frac=st.floats(0.0, 1.0),
    mlf=st.floats(0.0, 1.0),
    t=st.floats(0.0, 1.0),
    clearance=st.floats(-500.0, 2000.0),
    collisions=st.integers(0, 1000),
)  # fmt: skip


@given(ep=_EPISODES)
def test_episode_score_and_terms_lie_in_unit_interval(ep: dict[str, Any]) -> None:
    assert 0.0 <= episode_score(ep) <= 1.0
    if ep["outcome"] != "error":
        assert all(0.0 <= v <= 1.0 for v in lb.score_terms(ep).values())


@given(a=_EPISODES, b=_EPISODES)
def test_any_breach_scores_below_any_breach_free_episode(a: dict, b: dict) -> None:
    errors = {a["outcome"], b["outcome"]} & {"error"}
    breached = [e for e in (a, b) if e["breached_birds"] > 0]
    kept = [e for e in (a, b) if e["breached_birds"] == 0]
    if errors or len(breached) != 1:
        return
    assert episode_score(breached[0]) < episode_score(kept[0])


def test_breach_ordering_extreme_hand_built_records() -> None:
    # The best breached episode imaginable (a tolerated breach at the very end, even a success,
    # no contact, whole flock) against the worst breach-free one (timeout on the zone edge,
    # contact, flock shattered to one bird in 500).
    best_breach = _ep("f", "success", birds=500, breached=1, t=150.0, clearance=-0.01)
    worst_kept = _ep("f", "timeout", birds=500, mlf=1 / 500, collisions=999, clearance=0.0)
    assert episode_score(best_breach) == pytest.approx(0.35)
    assert episode_score(worst_kept) == pytest.approx(0.4 + 0.05 / 500)
    assert episode_score(best_breach) < episode_score(worst_kept)


def test_faster_success_scores_higher_and_saturation_breaks() -> None:
    # Two controllers that both succeed everywhere, one 20 s faster: the old score gave both 1.0;
    # the headline must now tell them apart (a saturation check on hand-built records).
    fast = [_ep("f", "success", t=40.0 + i % 5, seed=i) for i in range(40)]
    slow = [_ep("f", "success", t=60.0 + i % 5, seed=i) for i in range(40)]
    rows = build_rows([_result("fast", "state", fast), _result("slow", "state", slow)], reps=200)
    assert [r["controller"] for r in rows] == ["fast", "slow"]
    assert rows[0]["score_iqm"] - rows[1]["score_iqm"] == pytest.approx(0.35 * 0.5 * 20 / 150)
    assert rows[0]["score_ci_high"] > rows[0]["score_ci_low"]


# --------------------------------------------------------------------------------------------
# IQM.


def test_iqm_reference_values() -> None:
    # Check values from Agarwal et al. 2021 (IQM = 25 % trimmed mean of pooled scores).
    assert iqm(np.arange(1, 9)) == pytest.approx(4.5)
    outlier = np.array([*range(9), 100])
    assert iqm(outlier) == pytest.approx(4.5)
    assert np.mean(outlier) == pytest.approx(13.6)
    # rliable's own test matrix: IQM of [[1,2],[2,2],[1,1],[2,1]] pooled is 1.5.
    assert iqm(np.array([[1, 2], [2, 2], [1, 1], [2, 1]])) == pytest.approx(1.5)


@settings(max_examples=200)
@given(arrays(np.float64, st.integers(1, 60), elements=st.floats(-1e6, 1e6)))
def test_iqm_matches_scipy_trim_mean(x: np.ndarray) -> None:
    # scipy.stats.trim_mean(x, 0.25) is the reference definition of the IQM.
    expected = scipy.stats.trim_mean(x, 0.25, axis=None)
    assert iqm(x) == pytest.approx(expected, rel=1e-9, abs=1e-6)


@given(arrays(np.float64, st.tuples(st.integers(1, 6), st.integers(1, 30)),
              elements=st.floats(0.0, 1.0)))  # fmt: skip
def test_iqm_along_axis_matches_scipy(x: np.ndarray) -> None:
    np.testing.assert_allclose(iqm(x, axis=-1), scipy.stats.trim_mean(x, 0.25, axis=-1),
                               rtol=1e-12, atol=1e-12)  # fmt: skip


def test_iqm_rejects_empty() -> None:
    with pytest.raises(ValueError, match="empty"):
        iqm([])


# --------------------------------------------------------------------------------------------
# Stratified bootstrap.


def test_bootstrap_single_task_matches_scipy_percentile() -> None:
    sample = np.random.default_rng(7).beta(2.0, 5.0, size=80)
    reps = 20000
    lo, hi = stratified_bootstrap_ci([sample], iqm, reps=reps, confidence=0.9, seed=1)
    ref = scipy.stats.bootstrap(
        (sample,), iqm, n_resamples=reps, confidence_level=0.9, method="percentile",
        vectorized=True, axis=-1, rng=np.random.default_rng(2),
    ).confidence_interval  # fmt: skip
    width = ref.high - ref.low
    assert width > 0
    # Two independent Monte-Carlo runs: endpoints agree to well within 5 % of the width.
    assert lo == pytest.approx(ref.low, abs=0.05 * width)
    assert hi == pytest.approx(ref.high, abs=0.05 * width)


def test_bootstrap_constant_scores_have_zero_width() -> None:
    lo, hi = stratified_bootstrap_ci([np.full(12, 0.7), np.full(5, 0.7)], reps=500)
    assert lo == pytest.approx(0.7) and hi == pytest.approx(0.7)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_bootstrap_contains_point_estimate(seed: int) -> None:
    rng = np.random.default_rng(seed)
    tasks = [rng.uniform(0, 1, 30), rng.beta(5, 2, 20), rng.uniform(0.2, 0.4, 25)]
    lo, hi = stratified_bootstrap_ci(tasks, reps=2000, seed=seed)
    assert lo < iqm(np.concatenate(tasks)) < hi


def test_bootstrap_width_shrinks_as_inverse_sqrt_runs() -> None:
    rng = np.random.default_rng(11)

    def width(n: int) -> float:
        tasks = [rng.uniform(0, 1, n), rng.beta(2, 2, n), rng.beta(4, 1, n)]
        lo, hi = stratified_bootstrap_ci(tasks, reps=4000, seed=5)
        return hi - lo

    ratio = width(60) / width(240)  # four times the runs: about half the width
    assert 1.6 < ratio < 2.5


def test_bootstrap_never_moves_episodes_between_tasks() -> None:
    tasks = [np.full(10, 0.0), np.full(10, 0.5), np.full(10, 1.0)]
    lo, hi = stratified_bootstrap_ci(tasks, reps=1000, seed=3)
    assert hi - lo == pytest.approx(0.0, abs=1e-12)
    # The same scores pooled into one task do vary under resampling.
    lo_pooled, hi_pooled = stratified_bootstrap_ci([np.concatenate(tasks)], reps=1000, seed=3)
    assert hi_pooled - lo_pooled > 0.1


def test_bootstrap_is_deterministic_under_seed() -> None:
    tasks = [np.random.default_rng(0).uniform(size=40), np.random.default_rng(1).uniform(size=9)]
    first = stratified_bootstrap_ci(tasks, seed=4)
    assert stratified_bootstrap_ci(tasks, seed=4) == first
    assert stratified_bootstrap_ci(tasks, seed=5) != first
    lo, hi = stratified_bootstrap_ci(tasks, statistic=np.mean, reps=3000, seed=4)
    assert lo < np.mean(np.concatenate(tasks)) < hi


@pytest.mark.parametrize("bad", [[], [np.array([])]])
def test_bootstrap_rejects_empty(bad: list) -> None:
    with pytest.raises(ValueError, match="at least one task"):
        stratified_bootstrap_ci(bad)


# --------------------------------------------------------------------------------------------
# Rows.


def _by_hand(result: dict) -> dict[str, Any]:
    """The row's rates recomputed from the fixture's fields, independently of the module."""
    eps = result["episodes"]
    n = len(eps)
    err = [e["outcome"] == "error" for e in eps]
    succ_times = sorted(e["time_to_success"] for e in eps if e["outcome"] == "success")
    mid = len(succ_times) // 2
    median = None
    if succ_times:
        median = (succ_times[mid] if len(succ_times) % 2 else
                  (succ_times[mid - 1] + succ_times[mid]) / 2)  # fmt: skip
    return {
        "episodes": n,
        "success_rate": sum(e["outcome"] == "success" for e in eps) / n,
        "breach_free_rate": sum(
            e["breached_birds"] == 0 and not x for e, x in zip(eps, err, strict=True)
        )
        / n,
        "collision_rate": sum(e["collision_steps"] > 0 for e in eps) / n,
        "mean_peak_fragmentation": sum(
            1.0 if x else 1.0 - e["min_largest_fraction"] for e, x in zip(eps, err, strict=True)
        )
        / n,
        "median_time_to_success": median,
    }


def test_build_rows_on_fixture() -> None:
    rows = build_rows([BETA, ALPHA], reps=500)
    assert [r["controller"] for r in rows] == ["alpha", "beta"]  # sorted by score, not input
    for row, result in zip(rows, [ALPHA, BETA], strict=True):
        assert tuple(row) == ROW_KEYS
        assert row["information_level"] == result["information_level"]
        for key, value in _by_hand(result).items():
            assert row[key] == pytest.approx(value), key
        for key in ("success_rate", "breach_free_rate", "collision_rate"):
            assert 0.0 <= row[key] <= 1.0
        scores = [episode_score(e) for e in result["episodes"]]
        assert row["score_iqm"] == pytest.approx(scipy.stats.trim_mean(scores, 0.25))
        assert row["score_ci_low"] <= row["score_iqm"] <= row["score_ci_high"]
    # Hand-counted from ALPHA: 3 of 6 succeed, 4 of 6 breach-free (the error is not), 2 collide.
    assert (rows[0]["success_rate"], rows[0]["breach_free_rate"]) == (0.5, pytest.approx(4 / 6))
    assert rows[0]["collision_rate"] == pytest.approx(2 / 6)
    assert rows[0]["median_time_to_success"] == 40.0
    assert rows[1]["median_time_to_success"] is None


def test_renderers_agree_with_rows() -> None:
    rows = build_rows([ALPHA, BETA], reps=200)
    parsed = json.loads(render_json(rows))
    assert [list(r) for r in parsed] == [list(ROW_KEYS)] * 2
    assert parsed[1]["median_time_to_success"] is None
    table = list(csv.DictReader(io.StringIO(render_csv(rows))))
    assert [r["controller"] for r in table] == ["alpha", "beta"]
    assert float(table[0]["score_iqm"]) == pytest.approx(rows[0]["score_iqm"])
    assert table[1]["median_time_to_success"] == ""
    md = render_markdown(rows, "standard", 3).splitlines()
    assert "`standard` (version 3)" in md[0]
    body = [line for line in md if line.startswith("| 1 ") or line.startswith("| 2 ")]
    assert "alpha" in body[0] and "beta" in body[1]
    assert f"{rows[0]['score_iqm']:.3f}" in body[0]


# --------------------------------------------------------------------------------------------
# Loading and refusing result files.


def test_wrong_hash_is_refused_with_one_line(tmp_path: Path, capsys: Any) -> None:
    folder = tmp_path / "standard"
    _write(folder, "alpha.json", ALPHA)
    stale = _write(folder, "beta.json", _result("beta", "state", BETA["episodes"], "feedbeef"))
    _write(folder, "leaderboard.json", {"not": "a result"})  # the board's own name: ignored
    loaded = load_results(tmp_path, "standard", HASH)
    assert [r["controller"] for r in loaded] == ["alpha"]
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1
    assert str(stale) in err[0] and "feedbeef" in err[0] and HASH in err[0]


@pytest.mark.parametrize(
    ("mutate", "needle"),
    [
        (lambda d: d.update(format="other/2"), "format"),
        (lambda d: d["episodes"][0].update(outcome="crashed"), "outcome"),
        (lambda d: d["episodes"][2].update(breached_birds=11), "breached_birds"),
        (lambda d: d["episodes"][0].update(success=False), "success"),
        (lambda d: d["episodes"][1].update(min_largest_fraction=1.5), "min_largest_fraction"),
        (lambda d: d.update(information_level="oracle"), "information_level"),
        (lambda d: d["episodes"][1].pop("min_zone_clearance"), "'min_zone_clearance'"),
        (lambda d: d["episodes"][0].pop("time_limit"), "'time_limit'"),
        (lambda d: d["episodes"][0].update(time_to_success=151.0), "time_to_success"),
        (lambda d: d.update(label=""), "label"),
    ],
)
def test_malformed_file_is_refused(tmp_path: Path, capsys: Any, mutate: Any, needle: str) -> None:
    data = copy.deepcopy(ALPHA)
    mutate(data)
    bad = _write(tmp_path / "standard", "alpha.json", data)
    assert load_results(tmp_path, "standard", HASH) == []
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and str(bad) in err[0] and needle in err[0]


def test_invalid_json_and_duplicate_controller(tmp_path: Path, capsys: Any) -> None:
    folder = tmp_path / "standard"
    folder.mkdir()
    (folder / "a-broken.json").write_text("{", encoding="utf-8")
    _write(folder, "b.json", ALPHA)
    _write(folder, "c.json", ALPHA)
    assert len(load_results(tmp_path, "standard", HASH)) == 1
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 2
    assert "a-broken.json" in err[0] and "c.json" in err[1] and "repeats" in err[1]


def test_build_leaderboard_errors(tmp_path: Path) -> None:
    with pytest.raises(lb.LeaderboardError, match="no result files"):
        build_leaderboard(tmp_path, "standard", expected_hash=HASH)
    _write(tmp_path / "standard", "alpha.json", ALPHA)
    with pytest.raises(lb.LeaderboardError, match="all 1 were refused"):
        build_leaderboard(tmp_path, "standard", expected_hash="different")
    board = build_leaderboard(tmp_path, "standard", expected_hash=HASH, reps=100)
    assert board.version == 3 and [r["controller"] for r in board.rows] == ["alpha"]


# --------------------------------------------------------------------------------------------
# The board command.


@pytest.fixture
def results(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """A results directory with two controllers; the suite hash lookup is stubbed."""
    monkeypatch.setattr(lb, "suite_reference", lambda suite: HASH)
    _write(tmp_path / "standard", "alpha.json", ALPHA)
    _write(tmp_path / "standard", "beta.json", BETA)
    return tmp_path


def test_board_json(results: Path, capsys: Any) -> None:
    assert main(["board", "--suite", "standard", "--results", str(results), "--format",
                 "json"]) == 0  # fmt: skip
    out, err = capsys.readouterr()
    rows = json.loads(out)
    assert [r["controller"] for r in rows] == ["alpha", "beta"]
    assert all(set(r) == set(ROW_KEYS) for r in rows)
    md = results / "standard" / "leaderboard.md"
    png = results / "standard" / "leaderboard.png"
    assert "alpha" in md.read_text(encoding="utf-8")
    assert png.read_bytes().startswith(PNG_MAGIC)
    assert str(md) in err
    assert sorted(p.name for p in (results / "standard").iterdir()) == [
        "alpha.json", "beta.json", "leaderboard-families.png", "leaderboard.md", "leaderboard.png"
    ]  # fmt: skip


def test_board_markdown_and_csv_rerun(results: Path, capsys: Any) -> None:
    args = ["board", "--suite", "standard", "--results", str(results)]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert out == (results / "standard" / "leaderboard.md").read_text(encoding="utf-8")
    assert main([*args, "--format", "csv"]) == 0  # its own outputs are not read back as inputs
    header = capsys.readouterr().out.splitlines()[0]
    assert header.split(",") == list(ROW_KEYS)


def test_board_unknown_suite(tmp_path: Path, capsys: Any) -> None:
    assert main(["board", "--suite", "no-such-suite", "--results", str(tmp_path)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and "unknown suite 'no-such-suite'" in err[0] and "valid" in err[0]


def test_board_no_results(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: Any) -> None:
    monkeypatch.setattr(lb, "suite_reference", lambda suite: HASH)
    assert main(["board", "--suite", "standard", "--results", str(tmp_path)]) == 2
    out, err = capsys.readouterr()
    assert out == "" and len(err.splitlines()) == 1 and "no result files" in err
    assert not (tmp_path / "standard" / "leaderboard.md").exists()


# --------------------------------------------------------------------------------------------
# Per-family rows, labels and suite files.


def test_family_rows_wilson_against_scipy() -> None:
    rows = lb.build_family_rows([ALPHA, BETA])
    assert [(r["family"], r["controller"]) for r in rows] == [
        ("headon", "alpha"), ("headon", "beta"), ("oblique", "alpha"), ("oblique", "beta")
    ]  # fmt: skip
    for r in rows:
        assert tuple(r) == lb.FAMILY_KEYS
        # scipy's Wilson interval (BinomTestResult.proportion_ci, method "wilson").
        ci = scipy.stats.binomtest(r["successes"], r["episodes"]).proportion_ci(method="wilson")
        assert (r["success_ci_low"], r["success_ci_high"]) == pytest.approx((ci.low, ci.high))
    # Hand-counted from ALPHA: headon 2/3 succeed (times 40, 60 s), clearances 120, 120, -5 m.
    headon = rows[0]
    assert (headon["successes"], headon["median_time_to_success"]) == (2, 50.0)
    assert headon["median_zone_clearance"] == 120.0
    assert headon["collision_rate"] == pytest.approx(1 / 3)
    assert rows[1]["median_time_to_success"] is None


def test_markdown_has_pooled_and_family_tables(results: Path, capsys: Any) -> None:
    assert main(["board", "--suite", "standard", "--results", str(results)]) == 0
    out = capsys.readouterr().out
    assert "## Per family" in out
    assert "| headon | alpha | 3 | 2/3 |" in out and "| 120.0 m |" in out
    assert (results / "standard" / "leaderboard-families.png").read_bytes().startswith(PNG_MAGIC)
    assert main(["board", "--suite", "standard", "--results", str(results), "--format", "csv",
                 "--families"]) == 0  # fmt: skip
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].split(",") == list(lb.FAMILY_KEYS) and len(lines) == 5


def test_labelled_run_gets_its_own_row_with_changed_parameters(tmp_path: Path) -> None:
    wide = copy.deepcopy(ALPHA)
    wide.update(
        label="alpha-wide",
        controller_parameters={"span": 90.0, "speed": 6.0},
        default_parameters={"span": 60.0, "speed": 6.0},
    )
    _write(tmp_path / "standard", "alpha.json", ALPHA)
    _write(tmp_path / "standard", "alpha-wide.json", wide)
    board = build_leaderboard(tmp_path, "standard", expected_hash=HASH, reps=100)
    by_name = {r["controller"]: r for r in board.rows}
    assert set(by_name) == {"alpha", "alpha-wide"}
    assert by_name["alpha-wide"]["changed_parameters"] == {"span": 90.0}
    assert by_name["alpha"]["changed_parameters"] == {}
    md = board.render("markdown")
    assert "| alpha-wide | observation | span=90.0 |" in md and "| defaults |" in md


def test_board_takes_a_suite_file(tmp_path: Path, capsys: Any) -> None:
    from flockward.bench.suites import load_suite, suite_hash

    suite_file = tmp_path / "mine.toml"
    suite_file.write_text(
        'name = "mine"\nversion = 1\n[[entry]]\nscenario = "trio"\nseeds = [0, 1]\n',
        encoding="utf-8",
    )
    data = copy.deepcopy(ALPHA)
    data.update(suite="mine", suite_hash=suite_hash(load_suite(suite_file)))
    _write(tmp_path / "res" / "mine", "alpha.json", data)
    assert main(["board", "--suite", str(suite_file), "--results", str(tmp_path / "res")]) == 0
    assert "suite `mine`" in capsys.readouterr().out
    assert (tmp_path / "res" / "mine" / "leaderboard.md").exists()
    assert main(["board", "--suite", str(tmp_path / "none.toml"), "--results", "x"]) == 2
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and "none.toml" in err[0]


def test_board_profiles_chart(results: Path, tmp_path: Path, capsys: Any) -> None:
    out = tmp_path / "profiles.png"
    assert main(["board", "--results", str(results), "--profiles", str(out)]) == 0
    assert out.read_bytes().startswith(PNG_MAGIC)


@pytest.mark.parametrize("outcome", ["success", "timeout"])
def test_family_chart_at_all_or_no_successes(tmp_path: Path, outcome: str) -> None:
    # Regression: at 30/30 the Wilson bound rounded a hair below the rate and the chart crashed.
    eps = [_ep("f", outcome, t=40.0, seed=i) for i in range(30)]
    rows = lb.build_family_rows([_result("a", "state", eps)])
    if outcome == "success":
        assert rows[0]["success_ci_high"] == 1.0
    else:
        assert rows[0]["success_ci_low"] == 0.0
    from flockward.bench.charts import write_family_chart

    out = write_family_chart(rows, tmp_path / "f.png", "standard")
    assert out.read_bytes().startswith(PNG_MAGIC)


def test_rows_state_the_decision_period() -> None:
    # Regression test: one period per file; files without it (or mixed) show none.
    held = _result("held", "state", [{**_ep("headon", "success", t=40.0), "decision_period": 0.8}])
    mixed = _result("mixed", "state", [
        {**_ep("headon", "success", t=40.0, seed=0), "decision_period": 0.8},
        {**_ep("headon", "success", t=40.0, seed=1), "decision_period": 0.1},
    ])  # fmt: skip
    rows = {r["controller"]: r for r in build_rows([held, mixed, ALPHA], reps=50)}
    assert rows["held"]["decision_period"] == 0.8
    assert rows["mixed"]["decision_period"] is None and rows["alpha"]["decision_period"] is None
    md = render_markdown(list(rows.values()), "standard", 3)
    assert "decides every" in md and "| held | state | defaults | 0.8 s |" in md


def test_chart_styles_stay_distinct_past_the_palette() -> None:
    # Regression test: a board of more controllers than colours (the field suite has 11) must not
    # draw two controllers alike.
    from flockward.bench.charts import MARKERS, PALETTE, style

    n = len(PALETTE) * len(MARKERS)
    pairs = {style(i)[:2] for i in range(n)}
    assert len(pairs) == n

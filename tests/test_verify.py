"""flockward verify: each check's judgement on constructed cases, the report, the command line."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from flockward.bench import claim_checks, physics_checks, verify
from flockward.bench.episode import EpisodeRecord
from flockward.bench.verify import (
    FAIL,
    NOT_APPLICABLE,
    PASS,
    Figure,
    Series,
    VerifySettings,
    judged,
    run_checks,
)
from flockward.bench.verify_report import write_report
from flockward.config.scenarios import load_scenario
from flockward_baselines.cli import main

QUICK = VerifySettings(quick=True)


def test_random_heading_polarisation_matches_a_numpy_monte_carlo_and_the_formula():
    # Outside checks: a Monte Carlo of unit vectors written with numpy alone, and the large-N
    # limit sqrt(pi / (4 N)) of the mean resultant length (DOMAIN.md section 3: 0.04431 at N = 400).
    rng = np.random.default_rng(7)
    angle = rng.uniform(0, 2 * np.pi, (20000, 400))
    numpy_mean = np.hypot(np.cos(angle).sum(1), np.sin(angle).sum(1)).mean() / 400
    ours = physics_checks.random_heading_polarisation(400, 20000, np.random.default_rng(8))
    assert ours == pytest.approx(numpy_mean, rel=0.02)
    assert physics_checks.vicsek_errors([400], [ours])[0] < 0.05
    assert math.sqrt(math.pi / 1600) == pytest.approx(0.04431, abs=1e-5)


def test_vicsek_judgement_fails_on_an_aligned_flock():
    # Bad input: a fully aligned flock (v_a = 1) is nowhere near the random-heading value.
    assert physics_checks.vicsek_errors([50], [1.0])[0] > 0.05
    assert physics_checks.vicsek_errors([50, 200], [0.1253, 0.0627]) == pytest.approx(
        [0.0, 0.0], abs=0.002
    )


def test_momentum_drift_and_spread_growth_on_constructed_series():
    means = np.zeros((3, 2, 2))
    variances = np.array([[4.0, 1.0], [3.0, 0.5], [2.0, 0.25]])  # (T, B), shrinking
    assert physics_checks.momentum_drift(means, variances) == 0.0
    means[2, 1] = (0.3, 0.4)  # world 1 drifts by 0.5 against an rms spread of 1
    assert physics_checks.momentum_drift(means, variances) == pytest.approx(0.5)
    assert physics_checks.spread_growth(variances) == pytest.approx(-0.25)
    variances[2, 0] = 5.0  # the spread widens in world 0
    assert physics_checks.spread_growth(variances) == pytest.approx(0.5)


def test_decay_rate_of_an_exponential():
    # rms spread e^{-r t}: variance e^{-2 r t}, so the rate is r.
    times = np.linspace(0.0, 2.0, 21)
    variances = np.exp(-2 * 0.7 * times)[:, None] * np.array([[1.0, 9.0]])
    assert physics_checks.decay_rate(times, variances, 1.0) == pytest.approx(0.7)


@pytest.mark.parametrize("order", [1, 2, 4])
def test_observed_order_of_a_known_error_law(order):
    # x(h) = x* + C h^p: successive differences shrink by 2^p per halving.
    steps = [0.2 / 2**k for k in range(5)]
    endpoints = [np.array([1.0, 2.0]) + 3.0 * h**order * np.array([1.0, -1.0]) for h in steps]
    errors, orders = physics_checks.observed_orders(endpoints)
    assert len(errors) == 4 and orders == pytest.approx([order] * 3)


def test_monotone_fraying_judgement():
    assert physics_checks.frays_monotonically([0, 1, 2], [0.99, 0.7, 0.3]) == (True, 0.3)
    assert physics_checks.frays_monotonically([2, 0, 1], [0.3, 0.99, 0.7]) == (True, 0.3)
    assert physics_checks.frays_monotonically([0, 1, 2], [0.99, 0.5, 0.8])[0] is False


def test_relative_change_and_nearest_neighbours():
    assert physics_checks.relative_change(1.05, 1.0) == pytest.approx(0.05)
    assert physics_checks.relative_change(0.0, 0.0) == 0.0
    assert physics_checks.relative_change(1.0, 0.0) == math.inf
    pos = np.array([[0.0, 0.0], [3.0, 4.0], [3.0, 5.0]])
    assert physics_checks.nearest_neighbour_distances(pos).tolist() == [5.0, 1.0, 1.0]


def test_isolating_overrides_leave_only_the_kept_gain_and_load():
    overrides = physics_checks.isolating_overrides(["alignment_gain"])
    assert overrides is not None
    flock = load_scenario("headon", overrides).flock
    gains = {f: getattr(flock, f) for f in physics_checks.flock_fields() if f.endswith("_gain")}
    assert [name for name, value in gains.items() if value != 0] == ["alignment_gain"]
    assert flock.min_speed == 0 and flock.noise_std == 0
    assert physics_checks.isolating_overrides(["no_such_gain"]) is None


def test_step_refinements_halve_the_physics_step():
    steps = [
        physics_checks.physics_step(load_scenario("headon", r))
        for r in physics_checks.step_refinements(3)
    ]
    assert steps == pytest.approx([steps[0], steps[0] / 2, steps[0] / 4])


def test_cucker_smale_invariants_hold_for_the_installed_alignment():
    # The symmetric Cucker-Smale law conserves the mean velocity and never widens the spread
    # (DOMAIN.md section 2); the checks must find that on the installed kernel.
    assert physics_checks.check_cs_momentum(QUICK).status == PASS
    assert physics_checks.check_cs_spread(QUICK).status == PASS


def _record(success: bool, fraction: float, breached: int) -> EpisodeRecord:
    return EpisodeRecord(
        "s",
        0,
        50,
        success,
        "success" if success else "breach",
        10,
        0.1,
        None,
        breached,
        1,
        fraction,
        0,
        9.0,
        1.0,
        0.0,
        0.0,
        0.0,
        min_zone_clearance=-1.0 if breached else 20.0,
        time_limit=150.0,
        duration=1.0,
    )


def test_counts_and_wilson_interval():
    records = [_record(True, 1.0, 0), _record(True, 0.8, 0), _record(False, 1.0, 3)]
    counts = claim_checks.Counts.of(records)
    assert (counts.seeds, counts.whole, counts.split, counts.breach) == (3, 1, 1, 1)
    # Wilson interval of 17/20 (DOMAIN.md section 9.5; scipy's binomtest): [0.6396, 0.9476].
    assert claim_checks.wilson(17, 20) == "17/20 [0.64, 0.95]"


def test_claims_need_controllers():
    for check in claim_checks.CHECKS.values():
        result = check(VerifySettings(quick=True))
        assert result.status == NOT_APPLICABLE and result.measured is None
        assert result.holds and "no controllers" in result.detail


def test_judged_fails_a_non_finite_measurement():
    assert judged("x", math.nan, "<= 1", True, "s").status == FAIL
    assert judged("x", 0.5, "<= 1", True, "s").status == PASS
    assert judged("x", 2.0, "<= 1", False, "s").status == FAIL


def test_report_has_every_row_and_its_figures(tmp_path: Path):
    figure = Figure("line", "t", "x", "y", (Series("a", (1.0, 2.0), (3.0, 4.0)),))
    results = [
        judged("good", 0.5, "<= 1", True, "source A", "numbers", [figure]),
        judged("bad", 2.0, "<= 1", False, "source B"),
    ]
    path = write_report(results, tmp_path, quick=True)
    text = path.read_text(encoding="utf-8")
    assert "| good | 0.5 | <= 1 | PASS | source A |" in text
    assert "| bad | 2 | <= 1 | FAIL | source B |" in text
    assert "2 checks: 1 pass, 1 fail" in text and "![line](line.png)" in text
    assert (tmp_path / "line.png").read_bytes()[:4] == b"\x89PNG"


def _fixed(name: str, passes: bool):
    return lambda settings: judged(name, 1.0, "<= 1", passes, "test")


@pytest.mark.parametrize("passes, status", [(True, 0), (False, 1)])
def test_exit_status_follows_the_checks(monkeypatch, tmp_path, capsys, passes, status):
    checks = {"always": _fixed("always", True), "injected": _fixed("injected", passes)}
    monkeypatch.setattr(verify, "registry", lambda: checks)
    assert main(["verify", "--quick", "--out", str(tmp_path)]) == status
    out = capsys.readouterr().out
    assert ("FAIL" in out) is (not passes) and (tmp_path / "report.md").exists()


def test_unknown_check_is_a_one_line_error(tmp_path, capsys):
    assert main(["verify", "--check", "nope", "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("--check nope: unknown; allowed: vicsek-random-headings")
    assert "\n" not in err


def test_run_checks_refuses_unknown_names():
    with pytest.raises(ValueError, match="unknown check"):
        run_checks(QUICK, ["nope"], {"a": _fixed("a", True)})


def test_cli_verify_quick_runs_every_check(tmp_path, capsys):
    status = main(["verify", "--quick", "--out", str(tmp_path)])
    out = capsys.readouterr().out.splitlines()
    rows = [line.split() for line in out[1:-1]]
    names = [row[0] for row in rows]
    assert names == list(verify.registry())
    statuses = {row[0]: next(c for c in row if c in ("PASS", "FAIL", "N/A")) for row in rows}
    assert status == (0 if "FAIL" not in statuses.values() else 1)
    assert statuses["vicsek-aligned"] == statuses["vicsek-random-headings"] == "PASS"
    report = (tmp_path / "report.md").read_text(encoding="utf-8")
    assert all(f"| {name} |" in report for name in names)
    assert (tmp_path / "push-band.png").exists() and (tmp_path / "integrator-order.png").exists()

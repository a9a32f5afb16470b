"""Learning curves over several training seeds: the mean and its 95 % interval."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.stats

from flockward_baselines.cli import main
from flockward_baselines.curves import (
    CurvePoint,
    first_reach,
    reach_table,
    summarise_seeds,
    write_curve,
)


def _run(rates: dict[int, tuple[float, float]], scenarios=("a", "b")) -> list[CurvePoint]:
    """A run whose every scenario has the given (success, breach-free) rates at each point."""
    return [
        CurvePoint(t, 4 * t, 1.0, s, 10, success, kept, 100.0)
        for t, (success, kept) in rates.items()
        for s in scenarios
    ]


def test_mean_and_interval_over_seeds_match_scipy() -> None:
    runs = [_run({0: (0.0, 0.1), 10: (0.5, 0.9)}), _run({0: (0.0, 0.3), 10: (0.7, 1.0)}),
            _run({0: (0.1, 0.2), 10: (0.9, 1.0)})]  # fmt: skip
    rows = summarise_seeds(runs)
    assert [r["timesteps"] for r in rows] == [0, 10] and rows[1]["simulator_steps"] == 40
    x = np.array([0.5, 0.7, 0.9])
    # Outside check: scipy's Student-t interval of the mean of three seeds, clipped to [0, 1].
    low, high = scipy.stats.t.interval(0.95, 2, loc=x.mean(), scale=scipy.stats.sem(x))
    assert high > 1.0  # three seeds: the raw interval leaves the range of a rate
    assert rows[1]["success_mean"] == pytest.approx(0.7)
    assert (rows[1]["success_low"], rows[1]["success_high"]) == pytest.approx((low, 1.0))
    assert rows[0]["breach_free_mean"] == pytest.approx(0.2) and rows[1]["seeds"] == 3


def test_points_some_run_lacks_are_left_out() -> None:
    rows = summarise_seeds([_run({0: (0.0, 0.0), 10: (1.0, 1.0)}), _run({0: (0.0, 0.0)})])
    assert [r["timesteps"] for r in rows] == [0]


def test_curves_command(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    folders = []
    for k, rate in enumerate((0.4, 0.6)):
        folder = tmp_path / f"run{k}"
        folder.mkdir()
        write_curve(folder / "curve.csv", _run({0: (0.0, 0.0), 10: (rate, 1.0)}))
        folders.append(str(folder))
    assert main(["curves", *folders, "--out", str(tmp_path / "out" / "mix")]) == 0
    assert "2 runs, 2 shared points" in capsys.readouterr().out
    assert (tmp_path / "out" / "mix.png").stat().st_size > 0
    assert (tmp_path / "out" / "mix.csv").read_text().startswith("timesteps,simulator_steps")
    table = (tmp_path / "out" / "mix.md").read_text().splitlines()
    assert [row.split(" | ")[0] for row in table[2:]] == ["| run0", "| run1"]
    assert main(["curves", str(tmp_path), "--out", str(tmp_path / "x")]) == 2
    assert "no curve.csv" in capsys.readouterr().err
    assert main(["curves", *folders, "--out", str(tmp_path / "y"), "--target", "1.5"]) == 2


def test_first_reach_is_the_first_point_at_the_target() -> None:
    # Worked example: scenario-averaged success 0.0, 0.45, 0.95, 0.85 at decisions 0..30; the
    # target 0.9 is first met at 20 (simulator steps 80); the later drop to 0.85 does not move it.
    run = _run({0: (0.0, 0.0), 10: (0.45, 1.0), 20: (0.95, 1.0), 30: (0.85, 1.0)})
    reached = first_reach(run, 0.9)
    assert reached is not None and (reached.timesteps, reached.simulator_steps) == (20, 80)
    assert first_reach(run, 0.96) is None
    rows = reach_table({"r": run}, 0.96).splitlines()
    assert rows[2] == "| r | 96% | not reached | - | - | 85% | 120 | 1 |"

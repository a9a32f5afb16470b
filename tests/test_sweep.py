"""Parameter sweeps (`flockward sweep`): axes, the grid, resuming, and agreement with `run`."""

from __future__ import annotations

import json
from functools import partial
from pathlib import Path
from typing import Any

import pytest

from flockward.bench.evaluation import read_results, run_suite
from flockward.bench.results import read_json
from flockward.bench.suites import load_suite
from flockward.bench.sweep import Axis, SweepConflict, SweepPlan, parse_axis, run_sweep, summarise
from flockward_baselines.cli import main
from flockward_baselines.controllers import make_controller

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture
def behind(tmp_path: Path) -> Path:
    """Three gulls with the drone starting 300 m behind them, so it must catch up."""
    text = (ROOT / "configs" / "scenarios" / "trio.toml").read_text()
    text = text.replace("start = [-150.0, -100.0]", "start = [-900.0, -60.0]")
    text = text.replace('name = "trio"', 'name = "trio-behind"')
    assert "[-900.0, -60.0]" in text
    path = tmp_path / "trio-behind.toml"
    path.write_text(text.replace("max_steps = 1200", "max_steps = 900"))
    return path


def _factory(name: str) -> Any:
    return lambda params: partial(make_controller, name, **params)


def test_axes_parse_lists_and_ranges() -> None:
    assert parse_axis("push_distance=10,20.5,30") == Axis("push_distance", (10, 20.5, 30))
    assert parse_axis("flock.count = 5:25:3") == Axis("flock.count", (5.0, 15.0, 25.0))
    assert parse_axis("flock.count=5").is_scenario_key
    assert not parse_axis("push_distance=5").is_scenario_key
    for bad in ("push_distance", "=1,2", "x=1:2:1", "x=a:b:3", "x="):
        with pytest.raises(ValueError, match="axis"):
            parse_axis(bad)


def test_plan_rejects_bad_grids(behind: Path) -> None:
    axis = parse_axis("flock.count=3,4")
    common: dict[str, Any] = dict(name="s", scenario=str(behind), controller="idle", parameters={})
    with pytest.raises(ValueError, match="one or two axes"):
        SweepPlan(axes=(axis, parse_axis("a=1"), parse_axis("b=1")), seeds=(0, 1), **common)
    with pytest.raises(ValueError, match="given twice"):
        SweepPlan(axes=(axis, axis), seeds=(0, 1), **common)
    with pytest.raises(ValueError, match="at most 400"):
        SweepPlan(axes=(parse_axis("a=0:1:30"), parse_axis("b=0:1:30")), seeds=(0, 1), **common)
    plan = SweepPlan(axes=(parse_axis("flock.count=0,4"),), seeds=(0, 1), **common)
    with pytest.raises(ValueError, match=r"cell \[0\]: .*override 'flock.count' = 0"):
        plan.scenario_of((0,))


def test_a_drone_slower_than_the_birds_never_catches_them(behind: Path, tmp_path: Path) -> None:
    # Common practice: a pursuer slower than its quarry cannot close on it from behind, so the
    # flock is never frightened and crosses the zone; a drone faster than the birds' escape
    # speed (18 m/s for gulls) can herd them.
    plan = SweepPlan("speed", str(behind), "boundary-arc", {},
                     (parse_axis("pursuer.max_speed=6,28"),), (5000, 5002))  # fmt: skip
    path = run_sweep(plan, _factory("boundary-arc"), tmp_path / "speed.json", progress=False)
    slow, fast = summarise(read_json(path))
    assert slow.success.k == 0 and slow.spill.k == 3
    assert fast.success.k > slow.success.k and fast.success.k >= 2


def test_a_cell_equals_a_plain_run_and_an_interrupted_sweep_resumes(
    behind: Path, tmp_path: Path
) -> None:
    plan = SweepPlan("grid", str(behind), "direct-pursuit", {"target": "nearest"},
                     (parse_axis("pursuer.max_speed=12,22"),), (7, 9))  # fmt: skip
    whole = run_sweep(plan, _factory("direct-pursuit"), tmp_path / "whole.json", progress=False)
    rows = read_json(whole)["episodes"]
    assert [r["cell"] for r in rows] == [[0]] * 3 + [[1]] * 3
    # The same episodes through `flockward run`: a suite entry with the cell's keys.
    suite = tmp_path / "cell.toml"
    suite.write_text(
        'name = "cell"\nversion = 1\n[[entry]]\n'
        f'scenario = "{behind.name}"\n'
        'overrides = { "pursuer.max_speed" = 22, name = "trio-behind-c1" }\nseeds = [7, 9]\n'
    )
    factory = partial(make_controller, "direct-pursuit", target="nearest")
    ran = read_results(run_suite(load_suite(suite), factory, "dp", tmp_path, progress=False))
    drop = ("cell", "index", "family")
    cell = [{k: v for k, v in r.items() if k not in drop} for r in rows if r["cell"] == [1]]
    plain = [{k: v for k, v in r.items() if k not in drop} for r in ran["episodes"]]
    assert cell == plain
    # Interrupted after some episodes (the file keeps what was saved): a rerun completes it.
    part = tmp_path / "part.json"
    data = read_json(whole)
    data["episodes"] = data["episodes"][:2]
    part.write_text(json.dumps(data))
    run_sweep(plan, _factory("direct-pursuit"), part, progress=False)
    assert read_json(part)["episodes"] == rows
    # Another sweep never resumes this file.
    other = SweepPlan("grid", str(behind), "direct-pursuit", {},
                      (parse_axis("pursuer.max_speed=12,22"),), (7, 9))  # fmt: skip
    with pytest.raises(SweepConflict, match="holds another sweep"):
        run_sweep(other, _factory("direct-pursuit"), part, progress=False)


def test_sweep_command_writes_table_and_figures(
    behind: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["sweep", "--scenario", str(behind), "--controller", "idle", "--seeds", "1",
            "--axis", "flock.count=2,3", "--axis", "pursuer.max_speed=10,20",
            "--results", str(tmp_path), "--name", "idle-grid", "--figure", "png",
            "--figure", "svg"]  # fmt: skip
    assert main(args) == 0
    out = capsys.readouterr().out
    assert out.startswith("# Sweep `idle-grid`: idle on")
    assert out.count("\n| ") == 1 + 4  # header row and four cells
    for suffix in ("json", "md", "png", "svg"):
        assert (tmp_path / f"idle-grid.{suffix}").stat().st_size > 0
    assert main([*args[:-4], "--axis", "flock.count=0"]) == 2  # three axes: refused
    assert "one or two axes" in capsys.readouterr().err


def test_radii_fall_between_the_cells_they_lie_between() -> None:
    from flockward.bench.sweep_report import _position, axis_label

    values = [10.0, 30.0, 50.0, 100.0]
    assert _position(values, 40.0) == pytest.approx(1.5)
    assert _position(values, 100.0) == pytest.approx(3.0)
    assert _position(values, 150.0) == pytest.approx(4.0)  # beyond the end, by the last spacing
    assert _position(values, 0.0) == pytest.approx(-0.5)
    assert axis_label("push_distance") == "push_distance (m)"
    assert axis_label("flock.count") == "flock.count (birds)"

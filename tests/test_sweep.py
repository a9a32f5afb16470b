"""Parameter sweeps (`flockward sweep`): axes, the grid, resuming, and agreement with `run`."""

from __future__ import annotations

import dataclasses
import itertools
import json
import math
from functools import partial
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np
import pytest

from flockward.bench.episode import play_episode
from flockward.bench.evaluation import read_results, run_suite
from flockward.bench.results import read_json
from flockward.bench.suites import load_suite
from flockward.bench.sweep import (
    Axis,
    SweepConflict,
    SweepPlan,
    parse_axis,
    refinement,
    run_sweep,
    summarise,
)
from flockward.config.files import ConfigError
from flockward.config.hashing import scenario_hash
from flockward.config.scenarios import load_scenario
from flockward.sim.types import Circle
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


# ---------------------------------------------------------------------------------------------
# site.goal_bearing_deg: the approach direction of boundary-arc.

GOAL_REACH = math.hypot(600.0, 500.0)  # m, headon's goal (0, 500) seen from its flock start


@pytest.mark.parametrize(
    ("bearing", "heading_deg", "centre"),
    [
        # Hand-computed: flock start (-600, 0), heading east (toward the destination (800, 0)),
        # goal reach sqrt(600^2 + 500^2) = 781.0250 m.
        (90.0, None, (-600.0, 781.024968)),
        (180.0, None, (-1381.024968, 0.0)),
        (135.0, None, (-600.0 - 552.268051, 552.268051)),  # 781.0250 / sqrt(2) = 552.2681
        # The bearing counts from flock.heading_deg when that is set: heading north, 90 -> west.
        (90.0, 90.0, (-1381.024968, 0.0)),
    ],
)
def test_goal_bearing_places_the_goal_as_hand_computed(
    bearing: float, heading_deg: float | None, centre: tuple[float, float]
) -> None:
    overrides: dict[str, Any] = {"site.goal_bearing_deg": bearing}
    if heading_deg is not None:
        overrides["flock.heading_deg"] = heading_deg
    goal = load_scenario("headon", overrides).site.goal
    assert isinstance(goal, Circle) and goal.radius == 150.0
    assert goal.center == pytest.approx(centre, abs=1e-6)
    assert math.dist(goal.center, (-600.0, 0.0)) == pytest.approx(GOAL_REACH, abs=1e-6)


@pytest.mark.parametrize("bearing", [45.0, 90.0, 135.0, 180.0])
def test_goal_bearing_sets_boundary_arcs_push_as_hand_computed(bearing: float) -> None:
    # Boundary-arc stands behind the rim opposite its push, so its push direction is the
    # drone's line of approach. At the flock start (450 m from the zone's edge, beyond the
    # 150 m zone margin) the push points at the goal, bent away from the flock's heading by
    # atan(min(sin(bearing), tan 30 deg)) (the drift correction, capped at 30 deg): hand-computed
    # from BoundaryArc.push_direction's formula, e.g. 90 -> 90 + 30 = 120 deg, 180 -> 180 deg.
    scenario = load_scenario("headon", {"site.goal_bearing_deg": bearing})
    arc = make_controller("boundary-arc")
    arc.reset(scenario)
    start = np.array(scenario.site.flock_start)
    push = arc.push_direction(start, np.array([12.5, 0.0]))  # flying east at cruise speed
    bend = math.degrees(math.atan(min(math.sin(math.radians(bearing)), math.tan(math.pi / 6))))
    angle = math.degrees(math.atan2(push[1], push[0])) % 360.0
    assert angle == pytest.approx(bearing + bend, abs=1e-6)


def test_goal_bearing_refuses_goals_over_the_zone_or_the_flock_in_one_line() -> None:
    with pytest.raises(ConfigError, match=r"site.goal_bearing_deg' = 0: puts the goal .* over "
                       r"the protected zone") as over_zone:  # fmt: skip
        load_scenario("headon", {"site.goal_bearing_deg": 0})
    assert "\n" not in str(over_zone.value)
    with pytest.raises(ConfigError, match=r"= 181: must be a finite number in \[-180, 180\] deg"):
        load_scenario("headon", {"site.goal_bearing_deg": 181})
    near = {"site.goal_bearing_deg": 180, "site.goal": {"circle": {"center": [-600, 100],
            "radius": 150}}}  # fmt: skip
    with pytest.raises(ConfigError, match=r"over site\.flock_start"):
        load_scenario("headon", near)


def test_goal_bearing_absent_leaves_hashes_and_episodes_unchanged() -> None:
    # Regression test: headon's and trio's hashes as recorded before the key existed.
    assert scenario_hash(load_scenario("headon")) == (
        "afb955b83e8f6b8a07096bfabbb82b8da2a65a45571e273cadea76f5d948af3f"
    )
    assert scenario_hash(load_scenario("trio")) == (
        "d410042c41a2ee3f721821d19d28a7bac2bb13c6edf48dd7d7e63a312e355d93"
    )
    # The bearing at which trio's goal already lies moves nothing: the same episode is played.
    configured = math.degrees(math.atan2(500.0, 600.0))
    placed = load_scenario("trio", {"site.goal_bearing_deg": configured})
    plain = load_scenario("trio")
    assert placed.site.goal == plain.site.goal
    a, _ = play_episode(plain, make_controller("boundary-arc"), seed=3)
    b, _ = play_episode(placed, make_controller("boundary-arc"), seed=3)
    assert a == b
    # Rebuilding a placed scenario does not move its goal again.
    again = dataclasses.replace(load_scenario("trio", {"site.goal_bearing_deg": 135.0}))
    assert again.site.goal == load_scenario("trio", {"site.goal_bearing_deg": 135.0}).site.goal


# ---------------------------------------------------------------------------------------------
# Refinement.


def _speed_plan(name: str, behind: Path) -> SweepPlan:
    """The drone's top speed from 4 to 44 m/s in steps of 8, across the birds' escape speed."""
    axis = parse_axis("pursuer.max_speed=4:44:6")
    return SweepPlan(name, str(behind), "boundary-arc", {}, (axis,), (5000, 5003))


def test_refinement_adds_cells_only_at_the_edge_and_costs_less(
    behind: Path, tmp_path: Path
) -> None:
    # Common practice: a drone slower than the birds' escape speed (18 m/s for gulls) starting
    # behind them cannot catch them, a faster one can: the map has one edge, above 18 m/s.
    plan = _speed_plan("refine", behind)
    path = run_sweep(plan, _factory("boundary-arc"), tmp_path / "r.json", progress=False,
                     refine=3)  # fmt: skip
    data = read_json(path)
    cells = {s.values["pursuer.max_speed"]: s for s in summarise(data)}
    coarse = [cells[v] for v in plan.axes[0].values]
    assert [c.region for c in coarse[:2]] == ["spilled"] * 2  # 4 and 12 m/s
    assert [c.region for c in coarse[-2:]] == ["diverted"] * 2  # 36 and 44 m/s
    edges = [(a, b) for a, b in itertools.pairwise(coarse) if a.region != b.region]
    assert len(edges) == 1
    low = float(edges[0][0].values["pursuer.max_speed"])
    high = float(edges[0][1].values["pursuer.max_speed"])
    assert high > 18.0  # the edge lies above the birds' escape speed
    added = sorted(v for v, s in cells.items() if s.refined == "cell")
    assert added and all(low < v < high for v in added)  # only between the cells that disagree
    assert (low + high) / 2 in added  # round 1: their midpoint
    touched = [v for v, s in cells.items() if s.refined]
    assert all(low <= v <= high for v in touched)  # far from the edge: nothing added
    # The same resolution everywhere: the finest spacing refinement reached, over 4-44 m/s.
    values = sorted(cells)
    finest = min(b - a for a, b in itertools.pairwise(values))
    uniform = (round((44 - 4) / finest) + 1) * 4
    assert len(data["episodes"]) < uniform
    assert data["refine"] == 3
    # The figure and tables name the refined cells.
    from flockward.bench.sweep_report import render_markdown, write_figure

    table = render_markdown(data, summarise(data))
    assert "| refined |" in table and "| cell |" in table
    write_figure(data, summarise(data), load_scenario(str(behind)), tmp_path / "r.png")


def test_refinement_decides_from_neighbours() -> None:
    # Regression test of the rule on a hand-made file: 4/4 successes beside 0/4 (decided,
    # different regions) gets a midpoint; 2/4 (undecided) gets the next block of seeds.
    def rows(value: int, cell: int, wins: int) -> list[dict[str, Any]]:
        return [{"cell": [cell], "seed": s, "index": cell * 4 + s, "outcome": "success" if
                 s < wins else "breach", "success": s < wins, "breached_birds": int(s >= wins),
                 "min_largest_fraction": 1.0, "collision_steps": 0, "time_to_success": 1.0}
                for s in range(4)]  # fmt: skip

    episodes = [*rows(10, 0, 4), *rows(20, 1, 4), *rows(30, 2, 0), *rows(40, 3, 2)]
    data = {"axes": [{"key": "x", "values": [10, 20, 30, 40]}], "seeds": [0, 3],
            "episodes": episodes}  # fmt: skip
    assert refinement(data) == [((25,), [0, 1, 2, 3]), ((40,), [4, 5, 6, 7])]


def test_an_interrupted_refinement_resumes_to_the_same_file(behind: Path, tmp_path: Path) -> None:
    plan = _speed_plan("resume", behind)
    whole = run_sweep(plan, _factory("boundary-arc"), tmp_path / "w.json", progress=False,
                      refine=1)  # fmt: skip
    rows = read_json(whole)["episodes"]
    refined = [r for r in rows if r.get("round") == 1]
    assert refined  # the round played something
    # Interrupted in the middle of round 1 (the file keeps what was saved).
    part = tmp_path / "p.json"
    data = read_json(whole)
    data["episodes"] = rows[: len(rows) - len(refined) + 1]
    part.write_text(json.dumps(data))
    run_sweep(plan, _factory("boundary-arc"), part, progress=False, refine=1)
    assert read_json(part)["episodes"] == rows
    # A coarse file refined later by a rerun with --refine gives the same file too.
    coarse = tmp_path / "c.json"
    data["episodes"] = rows[: len(rows) - len(refined)]
    data.pop("refine", None)
    coarse.write_text(json.dumps(data))
    run_sweep(plan, _factory("boundary-arc"), coarse, progress=False)
    assert not [r for r in read_json(coarse)["episodes"] if "round" in r]
    run_sweep(plan, _factory("boundary-arc"), coarse, progress=False, refine=1)
    assert read_json(coarse)["episodes"] == rows


def _script(name: str) -> Any:
    """A module of scripts/ loaded by path (scripts/ is no package)."""
    import importlib.util

    spec = importlib.util.spec_from_file_location(name, ROOT / "scripts" / f"{name}.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_committed_push_bands_are_the_committed_sweeps() -> None:
    # Regression test: results/sweeps/envelope-bands.md (copied into the README) is what
    # scripts/envelope_bands.py makes of the committed sweep files, so no band is typed by hand.
    made = _script("envelope_bands").render()
    assert (ROOT / "results" / "sweeps" / "envelope-bands.md").read_text() == made


@pytest.mark.expensive
@pytest.mark.filterwarnings("ignore::UserWarning")
def test_committed_approach_angles_replay() -> None:
    # Regression test: results/sweeps/approach-angles.md (copied into the README) is what its
    # script measures when it plays the episodes again (about 60 headon episodes).
    made = _script("approach_angles").render()
    assert (ROOT / "results" / "sweeps" / "approach-angles.md").read_text() == made


def test_push_band_rows_name_the_band_and_its_neighbours() -> None:
    from flockward.bench.sweep_report import band_rows

    # Hand-made: diverted at 40 and 50 m, split closer, spilled farther; dodge 40 m, alarm 80 m.
    def cell(push: float, region: str) -> Any:
        return SimpleNamespace(values={"push_distance": push, "flock.count": 5}, region=region)

    data = {"name": "s", "axes": [{"key": "push_distance"}, {"key": "flock.count"}]}
    cells = [cell(30.0, "split"), cell(40.0, "diverted"), cell(50.0, "diverted"),
             cell(60.0, "spilled")]  # fmt: skip
    assert band_rows(data, cells, 40.0, 80.0) == [
        ["s", "flock.count = 5", "40-50", "1.00-1.25", "0.50-0.62", "split", "spilled"]
    ]


def test_sweep_command_refines_and_refuses_negative_rounds(
    behind: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["sweep", "--scenario", str(behind), "--controller", "boundary-arc", "--seeds", "4",
            "--axis", "pursuer.max_speed=12,28", "--results", str(tmp_path),
            "--name", "edge"]  # fmt: skip
    assert main([*args, "--refine", "-1"]) == 2
    assert "refine = -1: a number of rounds >= 0" in capsys.readouterr().err
    assert main([*args, "--refine", "1"]) == 0
    out = capsys.readouterr().out
    assert "| refined |" in out and "| 20 | 4 |" in out  # the midpoint of 12 and 28 m/s
    assert read_json(tmp_path / "edge.json")["refine"] == 1

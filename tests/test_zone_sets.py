"""Several protected zones: distances, containment and nearest boundary points against shapely;
breach counting, episode clearance and the observation's nearest-zone features; the config forms;
and one zone computed exactly as before (regression)."""

from __future__ import annotations

import tomllib
from pathlib import Path

import matplotlib
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import Point
from shapely.geometry import Polygon as ShapelyPolygon
from shapely.ops import nearest_points, unary_union

from flockward.bench.episode import _zone_clearance, play_episode
from flockward.config.hashing import scenario_hash
from flockward.config.scenarios import load_scenario, scenario_from
from flockward.sim.geometry import (
    contains,
    nearest_boundary_point,
    signed_distance,
    site_zone_arrays,
    zone_arrays,
)
from flockward.sim.metrics import step_metrics
from flockward.sim.types import Circle, Polygon
from flockward.task.env import DivertEnv
from flockward.task.observation import OFFSET
from flockward_baselines.controllers import BoundaryArc, make_controller

matplotlib.use("Agg")

# A C-shaped polygon, a runway strip crossing it (overlap) and a pentagon apart from both.
C_SHAPE = ((0.0, 0.0), (0.0, 30.0), (40.0, 30.0), (40.0, 20.0), (10.0, 20.0), (10.0, 10.0),
           (40.0, 10.0), (40.0, 0.0))  # fmt: skip
STRIP = ((-10.0, 12.0), (70.0, 12.0), (70.0, 17.0), (-10.0, 17.0))
PENTAGON = ((60.0, 40.0), (80.0, 35.0), (90.0, 50.0), (75.0, 65.0), (58.0, 55.0))
POLYGONS = (Polygon(C_SHAPE), Polygon(STRIP), Polygon(PENTAGON))
seeds = st.integers(0, 2**32 - 1)


def _shapely_signed(shape: ShapelyPolygon, p: np.ndarray) -> float:
    """Reference: shapely ring distance, negated inside (strict containment)."""
    point = Point(p)
    d = shape.exterior.distance(point)
    return -d if shape.contains(point) else d


@settings(deadline=None, max_examples=30)
@given(seed=seeds)
def test_zone_set_matches_shapely_union(seed: int) -> None:
    points = np.random.default_rng(seed).uniform(-20.0, 100.0, size=(300, 2))
    zones = site_zone_arrays(POLYGONS)
    shapes = [ShapelyPolygon(z.vertices) for z in POLYGONS]
    union = unary_union(shapes)
    got = signed_distance(zones, points)
    # Reference: shapely. Outside every zone the distance is the distance to their union; inside,
    # the least of the zones' signed distances; containment is the union's.
    want = np.array([min(_shapely_signed(s, p) for s in shapes) for p in points])
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12)
    inside = np.array([union.contains(Point(p)) for p in points])
    outside = ~inside & (np.abs(got) > 1e-9)
    np.testing.assert_allclose(
        got[outside], [union.distance(Point(p)) for p in points[outside]], rtol=1e-12, atol=1e-12
    )
    clear = np.abs(got) > 1e-9  # off every boundary, where open and closed sets differ
    np.testing.assert_array_equal(contains(zones, points)[clear], inside[clear])


def test_zone_set_with_a_circle_and_nearest_boundary_point() -> None:
    circle = Circle((-40.0, -40.0), 25.0)
    zones = site_zone_arrays((circle, Polygon(PENTAGON)))
    points = np.random.default_rng(5).uniform(-80.0, 100.0, size=(200, 2))
    pentagon = ShapelyPolygon(PENTAGON)
    for p in points:
        # Reference: shapely centre distance minus the radius for the disc, ring distance for
        # the pentagon; the nearest boundary point is shapely's on the nearer zone's boundary.
        d_circle = Point(circle.center).distance(Point(p)) - circle.radius
        d_pentagon = _shapely_signed(pentagon, p)
        got = float(signed_distance(zones, p))
        assert got == pytest.approx(min(d_circle, d_pentagon), abs=1e-12)
        bx, by = nearest_boundary_point(zones, float(p[0]), float(p[1]))
        if d_circle < d_pentagon:
            direction = (p - circle.center) / np.hypot(*(p - circle.center))
            want = np.asarray(circle.center) + circle.radius * direction
        else:
            want = np.array(nearest_points(pentagon.exterior, Point(p))[0].coords[0])
        np.testing.assert_allclose((bx, by), want, atol=1e-9)


@settings(deadline=None, max_examples=20)
@given(seed=seeds)
def test_breaches_count_every_zone(seed: int) -> None:
    rng = np.random.default_rng(seed)
    pos = rng.uniform(-20.0, 100.0, size=(2, 40, 2))
    count = np.array([40, 25])
    m = step_metrics(
        pos, np.zeros_like(pos), count, np.zeros((2, 1, 2)), 5.0, site_zone_arrays(POLYGONS),
        zone_arrays(Circle((500.0, 500.0), 10.0)),
    )  # fmt: skip
    union = unary_union([ShapelyPolygon(z.vertices) for z in POLYGONS])
    for b, n in enumerate(count):
        # Reference: shapely union containment (a bird on a boundary is not inside either way,
        # and random points land on one with probability 0).
        want = [union.contains(Point(p)) for p in pos[b, :n]]
        np.testing.assert_array_equal(m.in_protected[b, :n], want)
        assert not m.in_protected[b, n:].any()


TWO_ZONES = {
    "site.protected": [
        {"circle": {"center": [0.0, 0.0], "radius": 150.0}},
        {"polygon": [[-700.0, -100.0], [-500.0, -100.0], [-500.0, -60.0], [-700.0, -60.0]]},
    ]
}


def test_episode_clearance_and_observation_read_the_nearest_zone() -> None:
    scenario = load_scenario("headon", TWO_ZONES)
    env = DivertEnv(scenario)
    obs, _ = env.reset(seed=4)
    task = env.task
    circle = Point(0.0, 0.0)
    strip = ShapelyPolygon(TWO_ZONES["site.protected"][1]["polygon"])
    for _ in range(3):
        birds = task.state.bird_pos[0, : int(task.state.count[0])]
        # Reference: shapely distances to each zone; clearance is the least over birds and zones.
        per_bird = [
            min(circle.distance(Point(p)) - 150.0, _shapely_signed(strip, p)) for p in birds
        ]
        assert _zone_clearance(task) == pytest.approx(min(per_bird), abs=1e-9)
        centroid = birds.mean(axis=0)
        nearest = min(circle.distance(Point(centroid)) - 150.0, _shapely_signed(strip, centroid))
        site = task.setting.scales.site
        assert obs[OFFSET["protected_distance"]] == pytest.approx(nearest / site, abs=1e-6)
        obs, *_ = env.step(np.zeros(2))
    # The flock starts about 60 m above the strip, nearer it than the circle: the strip is seen.
    assert _shapely_signed(strip, centroid) < circle.distance(Point(centroid)) - 150.0


FAR = {"circle": {"center": [50_000.0, 50_000.0], "radius": 10.0}}


@pytest.mark.parametrize("controller", ["boundary-arc", "idle"])
def test_a_far_second_zone_changes_nothing_regression(controller: str) -> None:
    """Regression: a zone no bird comes near leaves the episode and every observation bit for bit
    as with the one zone, so one zone computes exactly as before the zone sets."""
    one = load_scenario("headon")
    two = load_scenario("headon", {"site.protected": [{"circle": {"center": [0.0, 0.0],
                                                       "radius": 150.0}}, FAR]})  # fmt: skip
    assert isinstance(two.site.protected, tuple)
    seen: list[list[np.ndarray]] = [[], []]
    records = []
    for k, scenario in enumerate((one, two)):

        def keep(obs: object, _action: np.ndarray, k: int = k) -> None:
            seen[k].append(np.array(obs))

        rec, _ = play_episode(scenario, make_controller(controller), 1001, on_action=keep)
        records.append(rec)
    assert records[0] == records[1]
    assert len(seen[0]) == len(seen[1]) > 10
    for a, b in zip(*seen, strict=True):
        assert np.array_equal(a, b)


def test_boundary_arc_bends_away_from_the_nearest_zone() -> None:
    """With two zones, the push is the one it would be with only the zone nearest the flock."""
    both = load_scenario("headon", TWO_ZONES)
    strip = load_scenario("headon", {"site.protected": TWO_ZONES["site.protected"][1]})
    circle = load_scenario("headon")
    # 40 m above the strip, 450 m from the circle's edge: the strip is nearest, inside the margin.
    centroid, vel = np.array([-600.0, -20.0]), np.array([12.0, -1.0])
    pushes = []
    for scenario in (both, strip, circle):
        arc = BoundaryArc()
        arc.reset(scenario, 0)
        pushes.append(arc.push_direction(centroid, vel))
    np.testing.assert_array_equal(pushes[0], pushes[1])
    assert not np.allclose(pushes[0], pushes[2], atol=1e-3)


def test_config_forms_of_zones(tmp_path: Path) -> None:
    text = """
name = "zones"
[site]
goal = { circle = { center = [0.0, 500.0], radius = 150.0 } }
[[site.protected]]
circle = { center = [0.0, 0.0], radius = 150.0 }
[[site.protected]]
polygon = [[-700.0, -100.0], [-500.0, -100.0], [-500.0, -60.0], [-700.0, -60.0]]
"""
    path = tmp_path / "zones.toml"
    path.write_text(text)
    tables = scenario_from(tomllib.loads(text), path)
    inline = load_scenario("headon", TWO_ZONES)
    assert tables.site.protected == inline.site.protected
    assert tables.site.protected_zones[1] == Polygon(
        ((-700.0, -100.0), (-500.0, -100.0), (-500.0, -60.0), (-700.0, -60.0))
    )
    # A list of one zone is that zone: same site, same hash as the plain form.
    listed = load_scenario("headon", {"site.protected": [TWO_ZONES["site.protected"][0]]})
    assert listed == load_scenario("headon")
    assert scenario_hash(listed) == scenario_hash(load_scenario("headon"))


def test_render_draws_every_zone() -> None:
    import matplotlib.pyplot as plt

    from flockward.render import AMBER, draw_site

    scenario = load_scenario("headon", TWO_ZONES)
    fig, ax = plt.subplots()
    draw_site(ax, scenario)
    amber = matplotlib.colors.to_rgba(AMBER, 1.0)
    outlined = [p for p in ax.patches if p.get_edgecolor() == amber]
    plt.close(fig)
    assert len(outlined) == 2

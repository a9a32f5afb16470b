"""Zone and point-set geometry checked against shapely, scipy and textbook cases."""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial import ConvexHull
from scipy.spatial.distance import pdist
from shapely.geometry import LinearRing, MultiPoint, Point
from shapely.geometry import Polygon as ShapelyPolygon
from shapely.ops import nearest_points

from flockward.sim.geometry import (
    CIRCLE,
    POLYGON,
    _signed_distance_xy,
    contains,
    convex_hull,
    enclosing_circle,
    nearest_boundary_point,
    polygon_area,
    polygon_is_simple,
    signed_distance,
    vertices_collinear,
    zone_arrays,
    zone_center,
    zone_contains,
    zones_overlap,
)
from flockward.sim.types import Circle, Polygon

SLOW = settings(deadline=None, max_examples=150)  # first calls may load compiled kernels

# A non-convex "C" shape (clockwise) and a convex pentagon (counter-clockwise).
C_SHAPE = ((0.0, 0.0), (0.0, 30.0), (40.0, 30.0), (40.0, 20.0), (10.0, 20.0), (10.0, 10.0),
           (40.0, 10.0), (40.0, 0.0))  # fmt: skip
PENTAGON = ((0.0, 0.0), (50.0, -5.0), (70.0, 30.0), (30.0, 60.0), (-10.0, 35.0))
CIRCLE_ZONE = Circle((5.0, -3.0), 12.0)

# Points on an integer grid: many duplicates, collinear and co-circular sets (degenerate cases).
grid_points = st.lists(
    st.tuples(st.integers(-20, 20), st.integers(-20, 20)), min_size=1, max_size=40
).map(lambda pts: np.array(pts, dtype=np.float64))
seeds = st.integers(0, 2**32 - 1)


def random_points(seed: int, n_max: int = 80) -> np.ndarray:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, n_max))
    return rng.normal(size=(n, 2)) * rng.uniform(0.1, 100.0) + rng.uniform(-1e3, 1e3, size=2)


# ---------------------------------------------------------------- zone encoding


def test_zone_arrays_layout() -> None:
    circle = zone_arrays(CIRCLE_ZONE)
    np.testing.assert_array_equal(circle, [[CIRCLE, 12.0], [5.0, -3.0]])
    poly = zone_arrays(Polygon(PENTAGON))
    assert poly.shape == (6, 2) and poly[0, 0] == POLYGON and poly[0, 1] == 5
    np.testing.assert_array_equal(poly[1:], PENTAGON)


@pytest.mark.parametrize(
    "zone", [Circle((0.0, 0.0), 0.0), Circle((0.0, 0.0), -1.0), Polygon(((0.0, 0.0), (1.0, 0.0)))]
)
def test_zone_arrays_rejects_degenerate_zones(zone: Circle | Polygon) -> None:
    with pytest.raises(ValueError):
        zone_arrays(zone)


# ---------------------------------------------------------------- signed distance, contains


@pytest.mark.parametrize("vertices", [C_SHAPE, PENTAGON, PENTAGON[::-1]])
@settings(deadline=None, max_examples=40)
@given(seed=seeds)
def test_polygon_distance_and_contains_match_shapely(vertices: tuple, seed: int) -> None:
    rng = np.random.default_rng(seed)
    points = rng.uniform(-30.0, 90.0, size=(200, 2))
    zone = zone_arrays(Polygon(vertices))
    shape = ShapelyPolygon(vertices)
    # Reference: shapely (GEOS) point-to-ring distance and strict containment.
    want_dist = np.array([shape.exterior.distance(Point(p)) for p in points])
    want_in = np.array([shape.contains(Point(p)) for p in points])
    got = signed_distance(zone, points)
    np.testing.assert_allclose(np.abs(got), want_dist, rtol=1e-12, atol=1e-12)
    np.testing.assert_array_equal(contains(zone, points), want_in)
    np.testing.assert_array_equal(got < 0.0, want_in)


@settings(deadline=None, max_examples=40)
@given(seed=seeds)
def test_circle_distance_and_contains_match_shapely(seed: int) -> None:
    rng = np.random.default_rng(seed)
    points = rng.uniform(-30.0, 30.0, size=(200, 2))
    zone = zone_arrays(CIRCLE_ZONE)
    centre = Point(CIRCLE_ZONE.center)
    # Reference: shapely point distance minus the radius (definition of the disc's boundary).
    want = np.array([centre.distance(Point(p)) for p in points]) - CIRCLE_ZONE.radius
    np.testing.assert_allclose(signed_distance(zone, points), want, rtol=1e-12, atol=1e-12)
    # Reference: shapely containment in a 256-segment buffer polygon, away from the boundary where
    # the polygon and the true disc differ (sagitta < r (1 - cos(pi/1024)) < 6e-5 m).
    disc = centre.buffer(CIRCLE_ZONE.radius, quad_segs=256)
    clear = np.abs(want) > 1e-3
    want_in = np.array([disc.contains(Point(p)) for p in points[clear]])
    np.testing.assert_array_equal(contains(zone, points[clear]), want_in)


def test_signed_distance_keeps_lead_shape_and_scalar_core_agrees() -> None:
    zone = zone_arrays(Polygon(C_SHAPE))
    points = np.random.default_rng(1).uniform(-5.0, 45.0, size=(3, 4, 2))
    got = signed_distance(zone, points)
    assert got.shape == (3, 4)
    for idx in np.ndindex(3, 4):
        assert got[idx] == _signed_distance_xy(zone, points[idx][0], points[idx][1])


def test_boundary_points_are_not_inside() -> None:
    # Zones are open sets, like shapely's contains: a vertex and an edge midpoint are outside.
    zone = zone_arrays(Polygon(PENTAGON))
    on_edge = np.array([PENTAGON[0], (25.0, -2.5)])
    np.testing.assert_allclose(signed_distance(zone, on_edge), 0.0, atol=1e-12)
    assert not contains(zone, on_edge).any()
    assert not ShapelyPolygon(PENTAGON).contains(Point(25.0, -2.5))  # shapely agrees


@pytest.mark.parametrize("vertices", [C_SHAPE, PENTAGON])
@settings(deadline=None, max_examples=40)
@given(seed=seeds)
def test_nearest_boundary_point_matches_shapely(vertices: tuple, seed: int) -> None:
    x, y = np.random.default_rng(seed).uniform(-30.0, 90.0, size=2)
    zone = zone_arrays(Polygon(vertices))
    px, py = nearest_boundary_point(zone, x, y)
    # Reference: shapely.ops.nearest_points on the polygon's ring.
    ref = nearest_points(ShapelyPolygon(vertices).exterior, Point(x, y))[0]
    assert math.hypot(px - ref.x, py - ref.y) < 1e-9
    assert math.isclose(math.hypot(px - x, py - y), abs(_signed_distance_xy(zone, x, y)))


def test_nearest_boundary_point_of_circle() -> None:
    zone = zone_arrays(CIRCLE_ZONE)
    px, py = nearest_boundary_point(zone, 5.0 + 3.0, -3.0 + 4.0)  # 5 m from the centre
    assert math.isclose(px, 5.0 + 12.0 * 0.6) and math.isclose(py, -3.0 + 12.0 * 0.8)
    cx, cy = nearest_boundary_point(zone, 5.0, -3.0)  # the centre: any boundary point will do
    assert math.isclose(math.hypot(cx - 5.0, cy + 3.0), 12.0)


# ---------------------------------------------------------------- area, centroid, simplicity


@pytest.mark.parametrize("vertices", [C_SHAPE, PENTAGON, PENTAGON[::-1]])
def test_area_and_centre_match_shapely(vertices: tuple) -> None:
    shape = ShapelyPolygon(vertices)
    area = polygon_area(np.array(vertices))
    # Reference: shapely area (unsigned) and LinearRing.is_ccw for the sign.
    assert math.isclose(abs(area), shape.area, rel_tol=1e-12)
    assert (area > 0) == LinearRing(vertices).is_ccw
    cx, cy = zone_center(Polygon(vertices))
    assert math.isclose(cx, shape.centroid.x, rel_tol=1e-12)
    assert math.isclose(cy, shape.centroid.y, rel_tol=1e-12)
    assert zone_center(CIRCLE_ZONE) == (5.0, -3.0)


@pytest.mark.parametrize(
    ("vertices", "simple"),
    [
        (C_SHAPE, True),
        (PENTAGON, True),
        (((0, 0), (1, 0), (1, 1), (0, 1)), True),
        (((0, 0), (1, 1), (1, 0), (0, 1)), False),  # bow-tie
        (((0, 0), (1, 0)), False),  # too few vertices
        (((0, 0), (1, 0), (2, 0)), False),  # zero area
        (((0, 0), (1, 0), (1, 1), (1, 1), (0, 1)), False),  # repeated vertex
        (((0, 0), (2, 0), (2, 2), (1, 0), (0, 2)), False),  # vertex touches another edge
        (((0, 0), (2, 0), (1, 0), (1, 2)), False),  # edge folds back along its neighbour
        (((0, 0), (1, 0), (2, 0), (2, 2)), True),  # straight-through vertex is fine
    ],
)
def test_polygon_is_simple_cases(vertices: tuple, simple: bool) -> None:
    assert polygon_is_simple(np.array(vertices, dtype=np.float64)) is simple
    if len(set(vertices)) == len(vertices) >= 3:  # shapely allows repeats; the zone rule does not
        # Reference: shapely LinearRing.is_simple plus non-zero area (GEOS simplicity test).
        ring = LinearRing(vertices)
        assert (ring.is_simple and ShapelyPolygon(vertices).area > 0) is simple


@settings(deadline=None, max_examples=300)
@given(
    st.lists(st.tuples(st.integers(0, 6), st.integers(0, 6)), min_size=3, max_size=7, unique=True)
)
def test_polygon_is_simple_matches_shapely(vertices: list[tuple[int, int]]) -> None:
    # Reference: shapely LinearRing.is_simple (GEOS), on small integer polygons full of touching
    # and collinear edges.
    want = LinearRing(vertices).is_simple and ShapelyPolygon(vertices).area > 0
    assert polygon_is_simple(np.array(vertices, dtype=np.float64)) == want


@settings(deadline=None, max_examples=200)
@given(
    st.lists(st.tuples(st.integers(-5, 5), st.integers(-5, 5)), min_size=3, max_size=6, unique=True)
)
def test_vertices_collinear_matches_shapely_area(vertices: list[tuple[int, int]]) -> None:
    # Reference: the convex hull of collinear points has zero area in shapely (GEOS); integer
    # vertices make any non-collinear set's hull area at least 0.5.
    want = MultiPoint(vertices).convex_hull.area == 0.0
    assert vertices_collinear(np.array(vertices, dtype=np.float64)) is want


def test_vertices_collinear_allows_rounding_only() -> None:
    line = np.array([(0.0, 0.0), (1e4, 1e4), (5e3, 5e3 + 1e-6)])
    assert vertices_collinear(line)  # 1e-6 m off a 14 km line: rounding, no interior
    assert not vertices_collinear(line + np.array([(0.0, 0.0), (0.0, 0.0), (0.0, 1.0)]))


def _shapely_zone(zone: Circle | Polygon):
    if isinstance(zone, Circle):
        return Point(zone.center).buffer(zone.radius, quad_segs=256)
    return ShapelyPolygon(zone.vertices)


def _random_zone(rng: np.random.Generator) -> Circle | Polygon:
    centre = rng.uniform(-50.0, 50.0, size=2)
    if rng.random() < 0.5:
        return Circle((float(centre[0]), float(centre[1])), float(rng.uniform(5.0, 40.0)))
    # A polygon star-shaped about the centre with every angular gap below pi: always simple.
    n = int(rng.integers(3, 9))
    angles = (np.arange(n) + rng.uniform(-0.4, 0.4, size=n)) * (2.0 * np.pi / n)
    radii = rng.uniform(5.0, 40.0, size=n)
    pts = centre + np.stack((np.cos(angles), np.sin(angles)), axis=1) * radii[:, None]
    return Polygon(tuple((float(x), float(y)) for x, y in pts))


@settings(deadline=None, max_examples=200)
@given(seed=seeds)
def test_zones_overlap_matches_shapely(seed: int) -> None:
    rng = np.random.default_rng(seed)
    a, b = _random_zone(rng), _random_zone(rng)
    sa, sb = _shapely_zone(a), _shapely_zone(b)
    # Reference: shapely (GEOS) intersection area, positive exactly when the interiors meet. The
    # 256-segment circles differ from true discs by < 1e-3 m, so near-tangent pairs are skipped.
    if sa.distance(sb) < 1e-2 and sa.intersection(sb).area < 1e-2:
        return
    assert zones_overlap(a, b) is (sa.intersection(sb).area > 0.0)
    assert zones_overlap(b, a) is zones_overlap(a, b)


def test_zones_overlap_worked_cases() -> None:
    square = Polygon(((0.0, 0.0), (10.0, 0.0), (10.0, 10.0), (0.0, 10.0)))
    inner = Polygon(((4.0, 4.0), (6.0, 4.0), (6.0, 6.0), (4.0, 6.0)))
    beside = Polygon(((10.0, 0.0), (20.0, 0.0), (20.0, 10.0), (10.0, 10.0)))
    assert zones_overlap(square, inner) and zones_overlap(inner, square)  # one inside the other
    assert zones_overlap(square, beside)  # touching polygons count as overlapping
    assert not zones_overlap(Circle((0.0, 0.0), 1.0), Circle((2.0, 0.0), 1.0))  # tangent discs
    assert zones_overlap(Circle((5.0, 5.0), 100.0), square)  # disc covering the square
    assert not zones_overlap(Circle((15.0, 5.0), 5.0), square)  # disc touching an edge


@settings(deadline=None, max_examples=40)
@given(seed=seeds)
def test_zone_contains_matches_shapely(seed: int) -> None:
    rng = np.random.default_rng(seed)
    zone = Polygon(C_SHAPE)
    # Reference: shapely (GEOS) strict containment.
    for p in rng.uniform(-10.0, 50.0, size=(50, 2)):
        point = (float(p[0]), float(p[1]))
        assert zone_contains(zone, point) is ShapelyPolygon(C_SHAPE).contains(Point(point))


# ---------------------------------------------------------------- convex hull


def _check_hull(points: np.ndarray) -> None:
    hull = convex_hull(points)
    assert hull.dtype == np.int64
    # Reference: scipy.spatial.ConvexHull (Qhull) vertex set; both drop points on hull edges.
    ref = ConvexHull(points)
    np.testing.assert_array_equal(np.sort(hull), np.sort(ref.vertices))
    assert polygon_area(points[hull]) > 0.0  # counter-clockwise


@settings(deadline=None, max_examples=100)
@given(seed=seeds)
def test_convex_hull_matches_scipy(seed: int) -> None:
    points = random_points(seed)
    if len(points) >= 3:
        _check_hull(points)


@settings(deadline=None, max_examples=100)
@given(grid_points)
def test_convex_hull_on_grid_points_matches_scipy(points: np.ndarray) -> None:
    unique = np.unique(points, axis=0)
    # Qhull needs a full-dimensional input; degenerate sets are covered by the cases below.
    if len(unique) >= 3 and np.linalg.matrix_rank(unique - unique[0]) == 2:
        hull = convex_hull(points)
        # Reference: Qhull's vertex coordinates (indices may differ among duplicated points).
        ref = ConvexHull(points)
        got = {tuple(p) for p in points[hull]}
        assert got == {tuple(p) for p in points[ref.vertices]}
        assert len(hull) == len(got)
        assert polygon_area(points[hull]) > 0.0


def test_convex_hull_small_and_degenerate_sets() -> None:
    assert convex_hull(np.zeros((0, 2))).size == 0
    np.testing.assert_array_equal(convex_hull(np.array([[3.0, 4.0]])), [0])
    np.testing.assert_array_equal(convex_hull(np.array([[3.0, 4.0], [1.0, 0.0]])), [1, 0])
    np.testing.assert_array_equal(convex_hull(np.array([[1.0, 1.0]] * 4)), [0])
    collinear = np.array([[2.0, 2.0], [0.0, 0.0], [1.0, 1.0], [3.0, 3.0]])
    np.testing.assert_array_equal(convex_hull(collinear), [1, 3])
    square_with_edge_points = np.array(
        [[0, 0], [1, 0], [2, 0], [2, 1], [2, 2], [1, 2], [0, 2], [0, 1], [1, 1]], dtype=np.float64
    )
    np.testing.assert_array_equal(convex_hull(square_with_edge_points), [0, 2, 4, 6])


# ---------------------------------------------------------------- smallest enclosing circle


@pytest.mark.parametrize(
    ("points", "radius", "centre"),
    [
        # Worked cases, DOMAIN.md section 6 (Welzl 1991, smallest enclosing disks).
        ([(0, 0), (2, 0), (1, 1)], 1.0, (1.0, 0.0)),
        ([(0, 0), (1, 0), (0.5, math.sqrt(3) / 2)], 1 / math.sqrt(3), (0.5, math.sqrt(3) / 6)),
        # Obtuse triangle: the circle on the long side (R = 2), not the circumcircle (R = 2.5).
        ([(0, 0), (4, 0), (2, 1)], 2.0, (2.0, 0.0)),
    ],
)
def test_enclosing_circle_worked_cases(points: list, radius: float, centre: tuple) -> None:
    cx, cy, r = enclosing_circle(np.array(points, dtype=np.float64))
    assert math.isclose(r, radius, rel_tol=1e-12)
    assert math.isclose(cx, centre[0], abs_tol=1e-12) and math.isclose(cy, centre[1], abs_tol=1e-12)


def test_enclosing_circle_small_sets() -> None:
    assert enclosing_circle(np.zeros((0, 2))) == (0.0, 0.0, 0.0)
    assert enclosing_circle(np.array([[3.0, -4.0]])) == (3.0, -4.0, 0.0)
    assert enclosing_circle(np.array([[3.0, -4.0]] * 5)) == (3.0, -4.0, 0.0)
    cx, cy, r = enclosing_circle(np.array([[0.0, 0.0], [6.0, 8.0], [3.0, 4.0]]))  # collinear
    assert (cx, cy, r) == (3.0, 4.0, 5.0)


def _check_circle(points: np.ndarray) -> None:
    cx, cy, r = enclosing_circle(points)
    # Reference: shapely.minimum_bounding_radius (GEOS MinimumBoundingCircle).
    want = shapely.minimum_bounding_radius(MultiPoint(points))
    assert math.isclose(r, want, rel_tol=1e-9, abs_tol=1e-9)
    assert np.all(np.hypot(points[:, 0] - cx, points[:, 1] - cy) <= r * (1 + 1e-9) + 1e-9)
    # Jung's theorem in the plane (DOMAIN.md section 6): D/2 <= R <= D/sqrt(3), D the diameter.
    d = pdist(points).max() if len(points) > 1 else 0.0
    assert d / 2 * (1 - 1e-12) <= r <= d / math.sqrt(3) * (1 + 1e-12) + 1e-12


@SLOW
@given(seed=seeds)
def test_enclosing_circle_matches_shapely_on_random_sets(seed: int) -> None:
    _check_circle(random_points(seed))


@SLOW
@given(grid_points)
def test_enclosing_circle_matches_shapely_on_grid_points(points: np.ndarray) -> None:
    _check_circle(points)


def test_enclosing_circle_is_deterministic_and_order_free() -> None:
    points = random_points(7, n_max=500)
    first = enclosing_circle(points)
    assert enclosing_circle(points) == first
    cx, cy, r = enclosing_circle(points[::-1].copy())
    assert math.isclose(r, first[2], rel_tol=1e-12)
    assert math.hypot(cx - first[0], cy - first[1]) < 1e-9 * (1 + r)


@pytest.mark.parametrize("zone", [CIRCLE_ZONE, Polygon(C_SHAPE)])
def test_nan_points_have_nan_distance_and_are_not_inside(zone: Circle | Polygon) -> None:
    arr = zone_arrays(zone)
    points = np.array([[np.nan, 1.0], [1.0, np.nan]])
    assert np.isnan(signed_distance(arr, points)).all()
    assert not contains(arr, points).any()

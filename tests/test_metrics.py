"""Batched flock metrics checked against scipy, shapely, numpy and published values."""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import ConvexHull, cKDTree
from scipy.spatial.distance import cdist
from shapely.geometry import MultiPoint, Point
from shapely.geometry import Polygon as ShapelyPolygon

from flockward.sim.geometry import zone_arrays
from flockward.sim.metrics import (
    GRID_MIN_BIRDS,
    StepMetrics,
    centroid,
    components,
    count_inside,
    diameter,
    hull_mask,
    inside_zone,
    mean_velocity,
    nearest_distance,
    polarisation,
    radius_of_gyration,
    step_metrics,
    zone_distance,
)
from flockward.sim.types import Circle, Polygon

seeds = st.integers(0, 2**32 - 1)
L_SHAPE = ((0.0, 0.0), (60.0, 0.0), (60.0, 20.0), (20.0, 20.0), (20.0, 60.0), (0.0, 60.0))
PROTECTED = zone_arrays(Circle((10.0, 10.0), 25.0))
GOAL = zone_arrays(Polygon(L_SHAPE))


def random_batch(
    seed: int, worlds: int = 6, slots: int = 40
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Positions, velocities and counts with NaN garbage in every padded slot."""
    rng = np.random.default_rng(seed)
    pos = rng.normal(size=(worlds, slots, 2)) * rng.uniform(1.0, 30.0) + rng.uniform(0, 40, 2)
    vel = rng.normal(size=(worlds, slots, 2)) * 10.0
    count = rng.integers(0, slots + 1, size=worlds)
    count[0] = slots  # always one full world
    for b, n in enumerate(count):
        pos[b, n:] = np.nan
        vel[b, n:] = np.nan
    return pos, vel, count


def scipy_components(points: np.ndarray, radius: float) -> tuple[int, np.ndarray]:
    """Reference partition: cKDTree pairs closer than radius, then csgraph components."""
    n = len(points)
    if n == 0:
        return 0, np.zeros(0, dtype=np.int64)
    # query_pairs keeps pairs with distance <= r; drop the ties to match the strict "<" rule.
    pairs = np.array(sorted(cKDTree(points).query_pairs(radius)), dtype=np.int64).reshape(-1, 2)
    if len(pairs):
        d = np.hypot(*(points[pairs[:, 0]] - points[pairs[:, 1]]).T)
        pairs = pairs[d < radius]
    graph = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    return connected_components(graph, directed=False)


def same_partition(a: np.ndarray, b: np.ndarray) -> bool:
    """Whether two label arrays group the items identically (labels may be renamed)."""
    pairs = set(zip(a.tolist(), b.tolist(), strict=True))
    return len(pairs) == len(set(a.tolist())) == len(set(b.tolist()))


# ---------------------------------------------------------------- centroid, velocity, sizes


@settings(deadline=None, max_examples=50)
@given(seed=seeds)
def test_means_match_numpy(seed: int) -> None:
    pos, vel, count = random_batch(seed)
    got_c, got_v = centroid(pos, count), mean_velocity(vel, count)
    for b, n in enumerate(count):
        if n == 0:
            assert np.isnan(got_c[b]).all() and np.isnan(got_v[b]).all()
            continue
        # Reference: numpy mean over the active birds.
        np.testing.assert_allclose(got_c[b], pos[b, :n].mean(axis=0), rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(got_v[b], vel[b, :n].mean(axis=0), rtol=1e-12, atol=1e-12)


def test_radius_of_gyration_of_square() -> None:
    # DOMAIN.md section 6: the square (+-1, +-1) has R_g = sqrt(2).
    pos = np.array([[[1.0, 1.0], [-1.0, 1.0], [-1.0, -1.0], [1.0, -1.0], [9.0, 9.0]]])
    assert math.isclose(radius_of_gyration(pos, np.array([4]))[0], math.sqrt(2), rel_tol=1e-12)


@settings(deadline=None, max_examples=50)
@given(seed=seeds)
def test_radius_of_gyration_matches_numpy(seed: int) -> None:
    pos, _, count = random_batch(seed)
    got = radius_of_gyration(pos, count)
    for b, n in enumerate(count):
        p = pos[b, :n]
        # Reference: R_g = sqrt(mean |x - mean x|^2) (DOMAIN.md section 6), evaluated with numpy.
        want = math.sqrt(((p - p.mean(axis=0)) ** 2).sum(axis=1).mean()) if n else 0.0
        assert math.isclose(got[b], want, rel_tol=1e-10, abs_tol=1e-12)


@settings(deadline=None, max_examples=50)
@given(seed=seeds)
def test_diameter_matches_shapely(seed: int) -> None:
    pos, _, count = random_batch(seed)
    got = diameter(pos, count)
    for b, n in enumerate(count):
        # Reference: twice shapely.minimum_bounding_radius (GEOS MinimumBoundingCircle).
        want = 2 * shapely.minimum_bounding_radius(MultiPoint(pos[b, :n])) if n else 0.0
        assert math.isclose(got[b], want, rel_tol=1e-9, abs_tol=1e-9)


@settings(deadline=None, max_examples=50)
@given(seed=seeds)
def test_hull_mask_matches_scipy(seed: int) -> None:
    pos, _, count = random_batch(seed)
    mask = hull_mask(pos, count)
    for b, n in enumerate(count):
        assert not mask[b, n:].any()
        if n >= 3:
            # Reference: scipy.spatial.ConvexHull (Qhull) vertex indices.
            assert set(np.flatnonzero(mask[b])) == set(ConvexHull(pos[b, :n]).vertices)


# ---------------------------------------------------------------- components


def test_components_worked_case() -> None:
    # DOMAIN.md section 6: x = 0, 1, 2, 10, 11 with r = 1.5 gives 2 components.
    pos = np.zeros((1, 7, 2))
    pos[0, :5, 0] = [0.0, 1.0, 2.0, 10.0, 11.0]
    pos[0, 5:] = 1e9  # padding
    labels, n_comp, largest = components(pos, np.array([5]), 1.5)
    assert n_comp[0] == 2
    assert math.isclose(largest[0], 3 / 5)
    np.testing.assert_array_equal(labels[0], [0, 0, 0, 1, 1, -1, -1])


def test_components_link_is_strict() -> None:
    pos = np.array([[[0.0, 0.0], [3.0, 4.0]]])  # exactly 5 m apart
    for method in ("pairs", "grid"):
        assert components(pos, np.array([2]), 5.0, method)[1][0] == 2
        assert components(pos, np.array([2]), 5.0 + 1e-9, method)[1][0] == 1


@pytest.mark.parametrize("method", ["auto", "pairs", "grid"])
@settings(deadline=None, max_examples=60)
@given(seed=seeds, radius=st.floats(0.5, 20.0))
def test_components_match_scipy(method: str, seed: int, radius: float) -> None:
    pos, _, count = random_batch(seed)
    labels, n_comp, largest = components(pos, count, radius, method)
    for b, n in enumerate(count):
        assert (labels[b, n:] == -1).all()
        # Reference: scipy.sparse.csgraph.connected_components on cKDTree neighbour pairs.
        k, ref = scipy_components(pos[b, :n], radius)
        assert n_comp[b] == k
        assert same_partition(labels[b, :n], ref)
        want_largest = np.bincount(ref).max() / n if n else 1.0
        assert math.isclose(largest[b], want_largest)


@pytest.mark.parametrize("birds", [600, 1200, 2000, GRID_MIN_BIRDS])
def test_components_grid_equals_all_pairs(birds: int) -> None:
    rng = np.random.default_rng(birds)
    # Clumps of birds so the graph has both large components and loners.
    centres = rng.uniform(0.0, 400.0, size=(12, 2))
    pos = (centres[rng.integers(0, 12, birds)] + rng.normal(size=(birds, 2)) * 15.0)[None]
    count = np.array([birds])
    pairs = components(pos, count, 4.0, "pairs")
    for method in ("grid", "auto"):
        got = components(pos, count, 4.0, method)
        np.testing.assert_array_equal(got[0], pairs[0])
        np.testing.assert_array_equal(got[1], pairs[1])
    # Reference: scipy csgraph on the same set, to be sure the shared answer is right.
    k, ref = scipy_components(pos[0], 4.0)
    assert pairs[1][0] == k and same_partition(pairs[0][0], ref)
    assert 1 < k < birds


@pytest.mark.parametrize("spacing", [1.0, 1.0 - 1e-9, 1.0 / math.sqrt(2.0), 0.1])
def test_components_grid_on_lattices_at_the_link_radius(spacing: float) -> None:
    # Square lattices of radius 1 at spacings on either side of the strict link (no links at
    # exactly 1, all linked just below) and at the grid's own cell size and a tenth of it, where
    # many birds share a cell: the union-find grid must find scipy's partition each time.
    side = 25
    ij = np.stack(np.meshgrid(np.arange(side), np.arange(side)), axis=-1).reshape(-1, 2)
    pos = (ij * spacing + 1000.0)[None].astype(np.float64)
    count = np.array([side * side])
    labels, n_comp, _ = components(pos, count, 1.0, "grid")
    # Reference: scipy.sparse.csgraph.connected_components on cKDTree neighbour pairs.
    k, ref = scipy_components(pos[0], 1.0)
    assert n_comp[0] == k == (side * side if spacing == 1.0 else 1)
    assert same_partition(labels[0], ref)


def test_components_degenerate_radii() -> None:
    pos, _, count = random_batch(3)
    assert (components(pos, count, 0.0)[1] == count).all()  # no links: every bird alone
    assert (components(pos, count, math.inf)[1] == np.minimum(count, 1)).all()


# ---------------------------------------------------------------- polarisation


def test_polarisation_of_aligned_flock_is_one() -> None:
    # Vicsek et al. 1995 (PRL 75:1226), DOMAIN.md section 3: v_a = 1 when all headings agree.
    speeds = np.linspace(5.0, 20.0, 30)
    vel = (speeds[:, None] * np.array([0.6, -0.8]))[None]
    assert math.isclose(polarisation(vel, np.array([30]))[0], 1.0, rel_tol=1e-12)


def test_polarisation_ignores_zero_speed_birds() -> None:
    vel = np.array([[[3.0, 0.0], [7.0, 0.0], [0.0, 0.0], [0.0, 0.0]]])
    assert math.isclose(polarisation(vel, np.array([4]))[0], 0.5)  # |2 unit headings| / 4 birds
    assert polarisation(vel, np.array([0]))[0] == 0.0


def test_polarisation_of_random_headings() -> None:
    # Vicsek et al. 1995 (PRL 75:1226), DOMAIN.md section 3: with uniformly random headings
    # E[v_a] -> sqrt(pi / (4 N)); N = 400 gives 0.04431. Fixed seed, 4000 independent worlds.
    birds, worlds = 400, 4000
    theta = np.random.default_rng(1995).uniform(0.0, 2 * np.pi, size=(worlds, birds))
    vel = np.stack([np.cos(theta), np.sin(theta)], axis=-1) * 12.5
    got = polarisation(vel, np.full(worlds, birds)).mean()
    want = math.sqrt(math.pi / (4 * birds))
    assert abs(got - want) < 0.05 * want


# ---------------------------------------------------------------- distances and zones


@settings(deadline=None, max_examples=50)
@given(seed=seeds, drones=st.integers(1, 4))
def test_nearest_distance_matches_cdist(seed: int, drones: int) -> None:
    pos, _, count = random_batch(seed)
    points = np.random.default_rng(seed).uniform(-20.0, 60.0, size=(len(count), drones, 2))
    got = nearest_distance(pos, count, points)
    for b, n in enumerate(count):
        # Reference: scipy.spatial.distance.cdist minimum over every drone and active bird.
        want = cdist(points[b], pos[b, :n]).min() if n else math.inf
        assert math.isclose(got[b], want, rel_tol=1e-12)
    # One (x, y) point per world, (B, 2), is the same as one drone, (B, 1, 2).
    np.testing.assert_array_equal(
        nearest_distance(pos, count, points[:, 0]), nearest_distance(pos, count, points[:, :1])
    )


@pytest.mark.parametrize("zone", [PROTECTED, GOAL])
@settings(deadline=None, max_examples=30)
@given(seed=seeds)
def test_inside_zone_matches_shapely(zone: np.ndarray, seed: int) -> None:
    pos, _, count = random_batch(seed)
    inside = inside_zone(zone, pos, count)
    np.testing.assert_array_equal(count_inside(zone, pos, count), inside.sum(axis=1))
    shape = ShapelyPolygon(L_SHAPE)
    for b, n in enumerate(count):
        assert not inside[b, n:].any()
        points = [Point(p) for p in pos[b, :n]]
        if zone[0, 0] == 0:
            # Reference: shapely distance to the centre below the radius (the open disc).
            want = [Point(zone[1]).distance(p) < zone[0, 1] for p in points]
        else:
            # Reference: shapely Polygon.contains (strict interior).
            want = [shape.contains(p) for p in points]
        np.testing.assert_array_equal(inside[b, :n], np.array(want, dtype=bool))


@settings(deadline=None, max_examples=30)
@given(seed=seeds)
def test_zone_distance_matches_shapely(seed: int) -> None:
    points = np.random.default_rng(seed).uniform(-20.0, 80.0, size=(16, 2))
    ring = ShapelyPolygon(L_SHAPE)
    got = zone_distance(GOAL, points)
    # Reference: shapely ring distance, negated for points the polygon contains.
    want = [
        ring.exterior.distance(Point(p)) * (-1 if ring.contains(Point(p)) else 1) for p in points
    ]
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12)


# ---------------------------------------------------------------- padding and the fused call


@settings(deadline=None, max_examples=30)
@given(seed=seeds)
def test_padding_is_ignored(seed: int) -> None:
    pos, vel, count = random_batch(seed)
    pursuer = np.zeros((len(count), 1, 2))  # one drone per world
    clean = step_metrics(
        np.nan_to_num(pos), np.nan_to_num(vel), count, pursuer, 5.0, PROTECTED, GOAL
    )
    garbage_pos, garbage_vel = pos.copy(), vel.copy()
    for b, n in enumerate(count):
        garbage_pos[b, n:] = 1e12 * (np.arange(len(pos[0]) - n)[:, None] % 3 - 1)
        garbage_vel[b, n:] = -7.0
    for p, v in ((pos, vel), (garbage_pos, garbage_vel)):
        dirty = step_metrics(p, v, count, pursuer, 5.0, PROTECTED, GOAL)
        for name in StepMetrics._fields:
            np.testing.assert_array_equal(getattr(dirty, name), getattr(clean, name), err_msg=name)
        np.testing.assert_array_equal(components(p, count, 5.0)[0], components(pos, count, 5.0)[0])


@settings(deadline=None, max_examples=40)
@given(seed=seeds, worlds=st.integers(1, 8), slots=st.integers(1, 60), drones=st.integers(1, 3))
def test_step_metrics_agrees_with_individual_functions(
    seed: int, worlds: int, slots: int, drones: int
) -> None:
    pos, vel, count = random_batch(seed, worlds, slots)
    pursuer = np.random.default_rng(seed).uniform(0.0, 40.0, size=(worlds, drones, 2))
    m = step_metrics(pos, vel, count, pursuer, 6.0, PROTECTED, GOAL)
    _, n_comp, largest = components(pos, count, 6.0)
    c = centroid(pos, count)
    expected = {
        "centroid": c,
        "mean_velocity": mean_velocity(vel, count),
        "polarisation": polarisation(vel, count),
        "diameter": diameter(pos, count),
        "n_components": n_comp,
        "largest_fraction": largest,
        "nearest_distance": nearest_distance(pos, count, pursuer),
        "goal_distance": zone_distance(GOAL, c),
        "in_protected": inside_zone(PROTECTED, pos, count),
        "in_goal": inside_zone(GOAL, pos, count),
        "on_hull": hull_mask(pos, count),
    }
    assert set(expected) == set(StepMetrics._fields)
    for name, want in expected.items():
        got = getattr(m, name)
        assert got.shape == want.shape and got.dtype == want.dtype, name
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12, err_msg=name)


def test_inputs_are_validated() -> None:
    pos = np.zeros((2, 3, 2))
    with pytest.raises(ValueError, match="count"):
        centroid(pos, np.array([4, 1]))
    with pytest.raises(ValueError, match="shape"):
        centroid(pos[0], np.array([1]))
    with pytest.raises(ValueError, match="method"):
        components(pos, np.array([1, 1]), 1.0, "kdtree")  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="P >= 0"):
        nearest_distance(pos, np.array([1, 1]), np.zeros((2, 1, 3)))  # not (x, y) points
    with pytest.raises(ValueError, match="P >= 0"):
        nearest_distance(pos, np.array([1, 1]), np.zeros((3, 1, 2)))  # a world too many

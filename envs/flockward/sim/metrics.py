"""Flock metrics over batches of worlds: pure functions backed by compiled per-world kernels.

Inputs are batch-first: ``pos`` and ``vel`` (B, N, 2) float64 in m and m/s, ``count`` (B,) int64
active birds per world. Birds at index >= count[b] are padding; nothing here reads them.

Empty worlds (count 0): centroid and mean velocity are NaN (there is no flock to locate), sizes
(diameter, radius of gyration) and polarisation are 0, there are 0 components with
largest_fraction 1 (nothing is split off), and the nearest bird is at infinity. So is the nearest
bird of a world without drones (P = 0).

``step_metrics`` computes what the environment needs each step in one compiled call.
"""

from __future__ import annotations

import math
from typing import Literal, NamedTuple

import numpy as np

from flockward.sim.geometry import (
    _enclosing_circle_of,
    _signed_distance_xy,
    convex_hull,
    signed_distance,
)
from flockward.sim.jit import compiled

# The search over unreached birds beats the union-find grid below this: measured crossovers near
# N = 410 (murmuration) and 335 (headon disc); `flockward bench` re-checks it.
GRID_MIN_BIRDS = 400
_AUTO, _PAIRS, _GRID = 0, 1, 2  # neighbour-search method codes for the kernels
_METHODS = {"auto": _AUTO, "pairs": _PAIRS, "grid": _GRID}
# Beyond this many cells from the origin a bird's cell could be off by rounding by more than the
# grid's safety margin (1e-9 of a cell); the search over unreached birds is used instead.
_MAX_CELLS_EXACT = 1e6


class StepMetrics(NamedTuple):
    """Everything the environment reads from the flock in one step (B worlds, N bird slots)."""

    centroid: np.ndarray  # (B, 2) m
    mean_velocity: np.ndarray  # (B, 2) m/s
    polarisation: np.ndarray  # (B,) in [0, 1]
    diameter: np.ndarray  # (B,) m, twice the smallest enclosing circle radius
    n_components: np.ndarray  # (B,) int64, fragments of the link-radius proximity graph
    largest_fraction: np.ndarray  # (B,) share of active birds in the largest fragment
    nearest_distance: np.ndarray  # (B,) m, closest drone to the closest active bird
    goal_distance: np.ndarray  # (B,) m, signed distance from the centroid to the goal zone
    in_protected: np.ndarray  # (B, N) bool, bird strictly inside the protected zone
    in_goal: np.ndarray  # (B, N) bool, bird strictly inside the goal zone
    on_hull: np.ndarray  # (B, N) bool, bird is a convex-hull vertex (the flock's rim)


def _check_batch(pos: np.ndarray, count: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Contiguous float64 (B, N, 2) positions and int64 (B,) counts, or a ValueError saying why."""
    pos = np.ascontiguousarray(pos, dtype=np.float64)
    count = np.ascontiguousarray(count, dtype=np.int64)
    if pos.ndim != 3 or pos.shape[2] != 2:
        raise ValueError(f"expected a (worlds, birds, 2) array, got shape {pos.shape}")
    if count.shape != (pos.shape[0],):
        raise ValueError(f"count must have shape ({pos.shape[0]},), got {count.shape}")
    if count.size and (count.min() < 0 or count.max() > pos.shape[1]):
        raise ValueError(f"count must lie in [0, {pos.shape[1]}] (the number of bird slots)")
    return pos, count


def _check_points(points: np.ndarray, worlds: int) -> np.ndarray:
    """Contiguous float64 (B, 2) points, one per world."""
    points = np.ascontiguousarray(points, dtype=np.float64)
    if points.shape != (worlds, 2):
        raise ValueError(f"expected one (x, y) point per world ({worlds}, 2), got {points.shape}")
    return points


def _check_point_sets(points: np.ndarray, worlds: int) -> np.ndarray:
    """Contiguous float64 (B, P, 2) points, P >= 0 per world; (B, 2) counts as P = 1."""
    points = np.ascontiguousarray(points, dtype=np.float64)
    if points.ndim == 2:
        points = points[:, None, :]
    if points.ndim != 3 or points.shape[0] != worlds or points.shape[2] != 2:
        raise ValueError(
            f"expected (x, y) points per world, shape ({worlds}, 2) or ({worlds}, P, 2), P >= 0;"
            f" got {points.shape}"
        )
    return points


# ---------------------------------------------------------------- per-world compiled helpers


@compiled
def _root(parent: np.ndarray, k: int) -> int:
    """Union-find: the root of k's set, halving the path on the way."""
    while parent[k] != k:
        parent[k] = parent[parent[k]]
        k = parent[k]
    return k


@compiled
def _cells_touch(p: np.ndarray, order: np.ndarray, a0: int, a1: int, b0: int, b1: int,
                 r2: float) -> bool:  # fmt: skip
    """Whether any bird of slots [a0, a1) lies closer than sqrt(r2) to any of slots [b0, b1)."""
    for s in range(a0, a1):
        i = order[s]
        for t in range(b0, b1):
            j = order[t]
            dx = p[i, 0] - p[j, 0]
            dy = p[i, 1] - p[j, 1]
            if dx * dx + dy * dy < r2:
                return True
    return False


@compiled
def _search_components_grid(p: np.ndarray, n: int, radius: float, labels: np.ndarray) -> int:
    """Label components by union-find over square cells of side radius / sqrt(2) (a hair less):
    two birds in one cell are closer than radius, so each cell is linked inside without a test,
    and two cells are linked by the first close pair found between them, among the 5 x 5 cells
    around each (the cells farther apart are more than radius apart). O(N log N) whatever the
    density. labels[:n] gets each bird's root cell; returns the number of components, or -1
    (doing nothing) if the cells would be too many to index exactly."""
    x0, y0 = np.inf, np.inf
    x1, y1 = -np.inf, -np.inf
    for i in range(n):
        x0, x1 = min(x0, p[i, 0]), max(x1, p[i, 0])
        y0, y1 = min(y0, p[i, 1]), max(y1, p[i, 1])
    side = radius / math.sqrt(2.0) * (1.0 - 1e-9)
    inv_cell = 1.0 / side
    extent = max(abs(x0), abs(x1), abs(y0), abs(y1), x1 - x0, y1 - y0) * inv_cell
    if not extent < _MAX_CELLS_EXACT:
        return -1
    rows = int((y1 - y0) * inv_cell) + 5  # row index is stored +2 so row +-2 never wraps a column
    key = np.empty(n, dtype=np.int64)
    for i in range(n):
        key[i] = int((p[i, 0] - x0) * inv_cell) * rows + int((p[i, 1] - y0) * inv_cell) + 2
    order = np.argsort(key, kind="mergesort")
    # The occupied cells: cell_key sorted, slots [cell_start[c], cell_start[c + 1]) of order.
    cell_key = np.empty(n, dtype=np.int64)
    cell_start = np.empty(n + 1, dtype=np.int64)
    cells = 0
    for s in range(n):
        k = key[order[s]]
        if cells == 0 or cell_key[cells - 1] != k:
            cell_key[cells] = k
            cell_start[cells] = s
            cells += 1
    cell_start[cells] = n
    occupied = cell_key[:cells]
    parent = np.arange(cells)
    r2 = radius * radius
    components = cells
    for c in range(cells):
        # The forward half of the 5 x 5 neighbourhood, so each pair of cells is looked at once:
        # column +0 rows +1..+2, columns +1 and +2 rows -2..+2.
        for dcol in range(3):
            lo = cell_key[c] + dcol * rows + (1 if dcol == 0 else -2)
            hi = cell_key[c] + dcol * rows + 2
            m = np.searchsorted(occupied, lo)
            while m < cells and cell_key[m] <= hi:
                a = _root(parent, c)
                b = _root(parent, m)
                if a != b and _cells_touch(p, order, cell_start[c], cell_start[c + 1],
                                           cell_start[m], cell_start[m + 1], r2):  # fmt: skip
                    parent[max(a, b)] = min(a, b)
                    components -= 1
                m += 1
    for c in range(cells):
        root = _root(parent, c)
        for s in range(cell_start[c], cell_start[c + 1]):
            labels[order[s]] = root
    return components


@compiled
def _search_components(p: np.ndarray, n: int, radius: float, labels: np.ndarray) -> int:
    """Label components by breadth-first search over the birds not yet reached.

    Each bird is tested only against birds still unlabelled, so a single compact flock costs
    O(N) distance tests instead of the O(N^2) of linking every pair; the worst case (all
    isolated) is the same N^2 / 2.
    """
    r2 = radius * radius
    remaining = np.arange(n)
    queue = np.empty(n, dtype=np.int64)
    m = n
    k = 0
    while m > 0:
        m -= 1
        start = remaining[m]
        labels[start] = k
        queue[0] = start
        head, tail = 0, 1
        while head < tail:
            i = queue[head]
            head += 1
            xi, yi = p[i, 0], p[i, 1]
            s = 0
            while s < m:
                j = remaining[s]
                dx = xi - p[j, 0]
                dy = yi - p[j, 1]
                if dx * dx + dy * dy < r2:
                    labels[j] = k
                    queue[tail] = j
                    tail += 1
                    m -= 1
                    remaining[s] = remaining[m]
                else:
                    s += 1
        k += 1
    return k


@compiled
def _world_components(
    p: np.ndarray, n: int, radius: float, method: int, labels: np.ndarray
) -> tuple[int, float]:
    """Label the first n birds by proximity-graph component (0, 1, ... in order of each
    component's first bird) into labels[:n]; return the component count and largest share."""
    if n == 0:
        return 0, 1.0
    use_grid = method == _GRID or (method == _AUTO and n >= GRID_MIN_BIRDS)
    raw = np.arange(n)  # radius 0: every bird alone
    if radius > 0.0:
        gridded = use_grid and math.isfinite(radius)
        if not gridded or _search_components_grid(p, n, radius, raw) < 0:
            _search_components(p, n, radius, raw)
    # Renumber in order of each component's first bird, whichever search found them.
    first_label = np.full(n, -1, dtype=np.int64)
    size = np.zeros(n, dtype=np.int64)
    k = 0
    for i in range(n):
        r = raw[i]
        if first_label[r] < 0:
            first_label[r] = k
            k += 1
        labels[i] = first_label[r]
        size[labels[i]] += 1
    return k, size[:k].max() / n


@compiled
def _world_hull(p: np.ndarray, n: int, mask: np.ndarray) -> float:
    """Mark the hull vertices among the first n birds in mask[:n]; return the flock diameter."""
    hull = convex_hull(p[:n])
    for h in hull:
        mask[h] = True
    return 2.0 * _enclosing_circle_of(p, hull)[2]


# ---------------------------------------------------------------- batched compiled kernels


@compiled
def _mean_kernel(x: np.ndarray, count: np.ndarray) -> np.ndarray:
    out = np.full((x.shape[0], 2), np.nan)
    for b in range(x.shape[0]):
        n = count[b]
        if n == 0:
            continue
        sx, sy = 0.0, 0.0
        for i in range(n):
            sx += x[b, i, 0]
            sy += x[b, i, 1]
        out[b, 0] = sx / n
        out[b, 1] = sy / n
    return out


@compiled
def _gyration_kernel(pos: np.ndarray, count: np.ndarray) -> np.ndarray:
    out = np.zeros(pos.shape[0])
    centre = _mean_kernel(pos, count)
    for b in range(pos.shape[0]):
        s = 0.0
        for i in range(count[b]):
            s += (pos[b, i, 0] - centre[b, 0]) ** 2 + (pos[b, i, 1] - centre[b, 1]) ** 2
        if count[b] > 0:
            out[b] = math.sqrt(s / count[b])
    return out


@compiled
def _polarisation_world(v: np.ndarray, n: int) -> float:
    sx, sy = 0.0, 0.0
    for i in range(n):
        speed = math.hypot(v[i, 0], v[i, 1])
        if speed > 0.0:
            sx += v[i, 0] / speed
            sy += v[i, 1] / speed
    return math.hypot(sx, sy) / n if n > 0 else 0.0


@compiled
def _polarisation_kernel(vel: np.ndarray, count: np.ndarray) -> np.ndarray:
    out = np.zeros(vel.shape[0])
    for b in range(vel.shape[0]):
        out[b] = _polarisation_world(vel[b], count[b])
    return out


@compiled
def _nearest_world(p: np.ndarray, n: int, x: float, y: float) -> float:
    best2 = np.inf
    for i in range(n):
        best2 = min(best2, (p[i, 0] - x) ** 2 + (p[i, 1] - y) ** 2)
    return math.sqrt(best2)


@compiled
def _nearest_to_points(p: np.ndarray, n: int, points: np.ndarray) -> float:
    """Shortest distance between any of ``points`` (P, 2) and the first n birds of ``p``; inf
    when there are no points (a world without drones) or no birds."""
    best = np.inf
    for q in range(points.shape[0]):
        best = min(best, _nearest_world(p, n, points[q, 0], points[q, 1]))
    return best


@compiled
def _nearest_kernel(pos: np.ndarray, count: np.ndarray, points: np.ndarray) -> np.ndarray:
    out = np.empty(pos.shape[0])
    for b in range(pos.shape[0]):
        out[b] = _nearest_to_points(pos[b], count[b], points[b])
    return out


@compiled
def _inside_kernel(zone_arr: np.ndarray, pos: np.ndarray, count: np.ndarray) -> np.ndarray:
    out = np.zeros(pos.shape[:2], dtype=np.bool_)
    for b in range(pos.shape[0]):
        for i in range(count[b]):
            out[b, i] = _signed_distance_xy(zone_arr, pos[b, i, 0], pos[b, i, 1]) < 0.0
    return out


@compiled
def _hull_kernel(pos: np.ndarray, count: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    mask = np.zeros(pos.shape[:2], dtype=np.bool_)
    diam = np.zeros(pos.shape[0])
    for b in range(pos.shape[0]):
        diam[b] = _world_hull(pos[b], count[b], mask[b])
    return mask, diam


@compiled
def _components_kernel(
    pos: np.ndarray, count: np.ndarray, radius: float, method: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    labels = np.full(pos.shape[:2], -1, dtype=np.int64)
    n_comp = np.zeros(pos.shape[0], dtype=np.int64)
    largest = np.ones(pos.shape[0])
    for b in range(pos.shape[0]):
        n_comp[b], largest[b] = _world_components(pos[b], count[b], radius, method, labels[b])
    return labels, n_comp, largest


@compiled
def _step_kernel(
    pos: np.ndarray,
    vel: np.ndarray,
    count: np.ndarray,
    drones: np.ndarray,
    link_radius: float,
    protected_arr: np.ndarray,
    goal_arr: np.ndarray,
) -> tuple[np.ndarray, ...]:
    """Every StepMetrics field, in field order, for every world in one pass."""
    worlds, slots = pos.shape[0], pos.shape[1]
    centroid = np.full((worlds, 2), np.nan)
    mean_vel = np.full((worlds, 2), np.nan)
    polar = np.zeros(worlds)
    diam = np.zeros(worlds)
    n_comp = np.zeros(worlds, dtype=np.int64)
    largest = np.ones(worlds)
    nearest = np.empty(worlds)
    goal_dist = np.full(worlds, np.nan)
    in_protected = np.zeros((worlds, slots), dtype=np.bool_)
    in_goal = np.zeros((worlds, slots), dtype=np.bool_)
    on_hull = np.zeros((worlds, slots), dtype=np.bool_)
    labels = np.empty(slots, dtype=np.int64)  # scratch, reused by every world
    for b in range(worlds):
        n = count[b]
        p = pos[b]
        sx, sy, svx, svy = 0.0, 0.0, 0.0, 0.0
        for i in range(n):
            sx += p[i, 0]
            sy += p[i, 1]
            svx += vel[b, i, 0]
            svy += vel[b, i, 1]
            in_protected[b, i] = _signed_distance_xy(protected_arr, p[i, 0], p[i, 1]) < 0.0
            in_goal[b, i] = _signed_distance_xy(goal_arr, p[i, 0], p[i, 1]) < 0.0
        if n > 0:
            centroid[b, 0], centroid[b, 1] = sx / n, sy / n
            mean_vel[b, 0], mean_vel[b, 1] = svx / n, svy / n
            goal_dist[b] = _signed_distance_xy(goal_arr, sx / n, sy / n)
        polar[b] = _polarisation_world(vel[b], n)
        nearest[b] = _nearest_to_points(p, n, drones[b])
        n_comp[b], largest[b] = _world_components(p, n, link_radius, _AUTO, labels)
        diam[b] = _world_hull(p, n, on_hull[b])
    return (
        centroid,
        mean_vel,
        polar,
        diam,
        n_comp,
        largest,
        nearest,
        goal_dist,
        in_protected,
        in_goal,
        on_hull,
    )


# ---------------------------------------------------------------- public batched functions


def centroid(pos: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Mean position of the active birds, (B, 2) m."""
    return _mean_kernel(*_check_batch(pos, count))


def mean_velocity(vel: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Mean velocity of the active birds, (B, 2) m/s."""
    return _mean_kernel(*_check_batch(vel, count))


def diameter(pos: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Flock diameter, (B,) m: twice the radius of the smallest circle enclosing the flock."""
    return _hull_kernel(*_check_batch(pos, count))[1]


def hull_mask(pos: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Which birds are convex-hull vertices (the flock's rim), (B, N) bool; birds lying on a hull
    edge between two vertices, and padding, are False."""
    return _hull_kernel(*_check_batch(pos, count))[0]


def radius_of_gyration(pos: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Root-mean-square distance of the active birds from their centroid, (B,) m."""
    return _gyration_kernel(*_check_batch(pos, count))


def components(
    pos: np.ndarray,
    count: np.ndarray,
    radius: float,
    method: Literal["auto", "pairs", "grid"] = "auto",
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Connected components of the graph linking birds closer than radius (strictly), per world.

    Returns labels (B, N) int64 (-1 for padding), n_components (B,) int64 and largest_fraction
    (B,). "auto" searches over unreached birds below GRID_MIN_BIRDS active birds (O(N) for one
    compact flock, O(N^2) for a scattered one) and joins cells of a grid by union-find from
    there on (O(N log N) whatever the layout); both give the same partition.
    """
    if method not in _METHODS:
        raise ValueError(f"method must be one of {sorted(_METHODS)}, got {method!r}")
    pos, count = _check_batch(pos, count)
    return _components_kernel(pos, count, float(radius), _METHODS[method])


def polarisation(vel: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Vicsek order parameter |sum of unit headings| / count, (B,) in [0, 1]; a bird with zero
    speed has no heading and adds nothing to the sum."""
    return _polarisation_kernel(*_check_batch(vel, count))


def nearest_distance(pos: np.ndarray, count: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Shortest distance between each world's points and its active birds, (B,) m (inf if there
    are no birds or no points).

    ``points`` is (B, P, 2), e.g. the drones, or (B, 2) for one point per world.
    """
    pos, count = _check_batch(pos, count)
    return _nearest_kernel(pos, count, _check_point_sets(points, pos.shape[0]))


@compiled
def _per_drone_kernel(pos: np.ndarray, count: np.ndarray, points: np.ndarray) -> np.ndarray:
    out = np.empty((pos.shape[0], points.shape[1]))
    for b in range(pos.shape[0]):
        for q in range(points.shape[1]):
            out[b, q] = _nearest_world(pos[b], count[b], points[b, q, 0], points[b, q, 1])
    return out


def nearest_per_drone(pos: np.ndarray, count: np.ndarray, drones: np.ndarray) -> np.ndarray:
    """Each drone's distance to its nearest active bird, (B, P) m (inf if a world has no birds).

    ``drones`` is (B, P, 2); the minimum over P is ``nearest_distance``.
    """
    pos, count = _check_batch(pos, count)
    points = np.ascontiguousarray(drones, dtype=np.float64)
    if points.ndim != 3 or points.shape[0] != pos.shape[0] or points.shape[2] != 2:
        raise ValueError(f"expected (worlds, drones, 2) drone positions, got {points.shape}")
    out: np.ndarray = _per_drone_kernel(pos, count, points)
    return out


def drone_gaps(drones: np.ndarray) -> np.ndarray:
    """Distances between every two drones of each world, (B, P, P) m, inf on the diagonal."""
    drones = np.asarray(drones, dtype=np.float64)
    delta = drones[:, :, None, :] - drones[:, None, :, :]
    gaps: np.ndarray = np.hypot(delta[..., 0], delta[..., 1])
    p = drones.shape[1]
    gaps[:, np.arange(p), np.arange(p)] = np.inf
    return gaps


def drone_conflicts(drones: np.ndarray, radii: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Drone-drone conflicts: ``(conflicted (B, P) bool, separation (B,) m)``.

    Two drones conflict when they are closer than the sum of their safety radii ``radii`` (P,)
    m (the same margin a drone keeps from a bird, on both sides); ``separation`` is each world's
    least distance between two drones (inf with fewer than two).
    """
    gaps = drone_gaps(drones)
    radii = np.asarray(radii, dtype=np.float64)
    limit = radii[:, None] + radii[None, :]
    conflicted: np.ndarray = (gaps < limit).any(axis=2)
    separation = gaps.min(axis=(1, 2)) if gaps.shape[1] else np.full(gaps.shape[0], np.inf)
    return conflicted, separation


def inside_zone(zone_arr: np.ndarray, pos: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Which active birds are strictly inside the zone, (B, N) bool (padding False)."""
    pos, count = _check_batch(pos, count)
    return _inside_kernel(np.ascontiguousarray(zone_arr, np.float64), pos, count)


def count_inside(zone_arr: np.ndarray, pos: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Number of active birds strictly inside the zone, (B,) int64."""
    counts: np.ndarray = inside_zone(zone_arr, pos, count).sum(axis=1)
    return counts


def zone_distance(zone_arr: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Signed distance of one point per world (B, 2) to the zone boundary, (B,) m; pass the
    centroid for the flock-to-goal distance."""
    points = np.asarray(points, dtype=np.float64)
    return signed_distance(zone_arr, _check_points(points, points.shape[0]))


def step_metrics(
    pos: np.ndarray,
    vel: np.ndarray,
    count: np.ndarray,
    pursuer_pos: np.ndarray,
    link_radius: float,
    protected_arr: np.ndarray,
    goal_arr: np.ndarray,
) -> StepMetrics:
    """All per-step flock metrics in one compiled pass per world (see StepMetrics).

    ``pursuer_pos`` holds the drone positions, (B, P, 2) m ((B, 2) counts as one drone; P = 0,
    no drone, gives a nearest distance of inf).
    """
    pos, count = _check_batch(pos, count)
    vel = np.ascontiguousarray(vel, dtype=np.float64)
    if vel.shape != pos.shape:
        raise ValueError(f"vel must have the shape of pos {pos.shape}, got {vel.shape}")
    return StepMetrics(
        *_step_kernel(
            pos,
            vel,
            count,
            _check_point_sets(pursuer_pos, pos.shape[0]),
            float(link_radius),
            np.ascontiguousarray(protected_arr, np.float64),
            np.ascontiguousarray(goal_arr, np.float64),
        )
    )

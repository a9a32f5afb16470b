"""Zones and point-set geometry, in a form the compiled step kernels can call.

Zones are frozen records (``types.Circle``, ``types.Polygon``) in configs and a small float64 array
inside numba. ``zone_arrays`` builds that array, shape (M, 2), all lengths in metres:

- row 0 = (kind, size): kind ``CIRCLE`` (0.0) with size = radius, or ``POLYGON`` (1.0) with
  size = the vertex count n;
- circle: row 1 = centre (x, y), so M = 2;
- polygon: rows 1..n = the vertices in order (either orientation, not closed), so M = n + 1.

Several zones (a site's protected zones) are one array too, ``zone_set_arrays``: row 0 =
(``ZONE_SET``, k), then the k zones' arrays one after another. ``site_zone_arrays`` gives a
single zone's plain array and several zones' set, so one zone is computed exactly as before.
Every function below takes either form: for a set, the signed distance is the least over its
zones (the distance to their union outside them; inside, negative, the depth in the zone the
point is deepest in) and the nearest boundary point is that zone's.

Signed distances are negative inside a zone and positive outside; a point on the boundary is at
distance 0 and is not inside (zones are open sets, like shapely's ``contains``).
"""

from __future__ import annotations

import math

import numpy as np

from flockward.sim.jit import compiled
from flockward.sim.types import Circle, Polygon, Zone

CIRCLE = 0  # zone kind code in row 0 of a zone array
POLYGON = 1
ZONE_SET = 2  # several zones, listed after row 0

_LCG_SEED = 20240531  # fixed seed of the enclosing-circle shuffle: results are deterministic


def zone_arrays(zone: Zone) -> np.ndarray:
    """Encode a zone as the (M, 2) float64 array the compiled functions take (module docstring)."""
    if isinstance(zone, Circle):
        if not (math.isfinite(zone.radius) and zone.radius > 0.0):
            raise ValueError(f"circle radius must be positive (metres), got {zone.radius}")
        out = np.empty((2, 2), dtype=np.float64)
        out[0] = (CIRCLE, zone.radius)
        out[1] = zone.center
    elif isinstance(zone, Polygon):
        vertices = np.asarray(zone.vertices, dtype=np.float64)
        if vertices.ndim != 2 or vertices.shape[1] != 2 or len(vertices) < 3:
            raise ValueError("a polygon zone needs at least 3 (x, y) vertices")
        out = np.empty((len(vertices) + 1, 2), dtype=np.float64)
        out[0] = (POLYGON, len(vertices))
        out[1:] = vertices
    else:
        raise TypeError(f"expected a Circle or Polygon zone, got {type(zone).__name__}")
    if not np.all(np.isfinite(out)):
        raise ValueError("zone coordinates must be finite numbers of metres")
    return out


def zone_set_arrays(zones: tuple[Zone, ...] | list[Zone]) -> np.ndarray:
    """Encode one or more zones as a zone-set array (module docstring)."""
    if not zones:
        raise ValueError("a zone set needs at least one zone")
    parts = [zone_arrays(z) for z in zones]
    head = np.array([[ZONE_SET, len(parts)]], dtype=np.float64)
    return np.ascontiguousarray(np.concatenate([head, *parts]))


def site_zone_arrays(zones: Zone | tuple[Zone, ...]) -> np.ndarray:
    """A site's protected zones compiled: one zone's plain array, several zones' set array."""
    if isinstance(zones, tuple):
        return zone_arrays(zones[0]) if len(zones) == 1 else zone_set_arrays(zones)
    return zone_arrays(zones)


@compiled
def _zone_rows(zone_arr: np.ndarray, row: int) -> int:
    """Rows taken by the single zone whose header is at ``row`` of a zone or zone-set array."""
    return 2 if zone_arr[row, 0] == CIRCLE else int(zone_arr[row, 1]) + 1


@compiled
def _nearest_member(zone_arr: np.ndarray, x: float, y: float) -> tuple[int, int, float]:
    """First row, row count and signed distance of the set's zone nearest (x, y) (the least
    signed distance; the first on a tie; NaN if any distance is NaN)."""
    best_row, best_rows, best = 1, _zone_rows(zone_arr, 1), np.inf
    row = 1
    for _ in range(int(zone_arr[0, 1])):
        rows = _zone_rows(zone_arr, row)
        d = _zone_signed_distance_xy(zone_arr[row : row + rows], x, y)
        if math.isnan(d):
            return row, rows, d
        if d < best:
            best_row, best_rows, best = row, rows, d
        row += rows
    return best_row, best_rows, best


@compiled
def _closest_on_segment(
    ax: float, ay: float, bx: float, by: float, x: float, y: float
) -> tuple[float, float, float]:
    """Closest point of segment ab to (x, y), and its squared distance."""
    dx = bx - ax
    dy = by - ay
    length2 = dx * dx + dy * dy
    t = 0.0
    if length2 > 0.0:
        t = ((x - ax) * dx + (y - ay) * dy) / length2
        t = min(1.0, max(0.0, t))
    px = ax + t * dx
    py = ay + t * dy
    return px, py, (x - px) ** 2 + (y - py) ** 2


@compiled
def _signed_distance_xy(zone_arr: np.ndarray, x: float, y: float) -> float:
    """Signed distance (m) from (x, y) to a zone or zone set: negative inside, positive outside."""
    if zone_arr[0, 0] == ZONE_SET:
        return _nearest_member(zone_arr, x, y)[2]
    return _zone_signed_distance_xy(zone_arr, x, y)


@compiled
def _zone_signed_distance_xy(zone_arr: np.ndarray, x: float, y: float) -> float:
    """Signed distance (m) from (x, y) to one zone's boundary: negative inside, positive outside."""
    if zone_arr[0, 0] == CIRCLE:
        return math.hypot(x - zone_arr[1, 0], y - zone_arr[1, 1]) - float(zone_arr[0, 1])
    if math.isnan(x) or math.isnan(y):
        return math.nan  # as for a circle; min() below would otherwise hide it
    n = int(zone_arr[0, 1])
    best2 = np.inf
    inside = False
    j = n
    for i in range(1, n + 1):
        xi, yi = zone_arr[i, 0], zone_arr[i, 1]
        xj, yj = zone_arr[j, 0], zone_arr[j, 1]
        # Even-odd rule: count edge crossings of the ray from (x, y) toward +x.
        if (yi > y) != (yj > y):
            x_cross = xi + (y - yi) * (xj - xi) / (yj - yi)
            if x < x_cross:
                inside = not inside
        best2 = min(best2, _closest_on_segment(xj, yj, xi, yi, x, y)[2])
        j = i
    distance = math.sqrt(best2)
    return -distance if inside and distance > 0.0 else distance


@compiled
def nearest_boundary_point(zone_arr: np.ndarray, x: float, y: float) -> tuple[float, float]:
    """The point of the zone boundary closest to (x, y); for a circle's centre, the +x point. For
    a zone set, the boundary point of its zone nearest (x, y)."""
    if zone_arr[0, 0] == ZONE_SET:
        row, rows, _ = _nearest_member(zone_arr, x, y)
        return _zone_boundary_point(zone_arr[row : row + rows], x, y)
    return _zone_boundary_point(zone_arr, x, y)


@compiled
def _zone_boundary_point(zone_arr: np.ndarray, x: float, y: float) -> tuple[float, float]:
    """The point of one zone's boundary closest to (x, y)."""
    if zone_arr[0, 0] == CIRCLE:
        cx, cy, r = zone_arr[1, 0], zone_arr[1, 1], zone_arr[0, 1]
        d = math.hypot(x - cx, y - cy)
        if d == 0.0:
            return cx + r, cy
        return cx + r * (x - cx) / d, cy + r * (y - cy) / d
    n = int(zone_arr[0, 1])
    best2 = np.inf
    best_x = zone_arr[1, 0]
    best_y = zone_arr[1, 1]
    j = n
    for i in range(1, n + 1):
        px, py, d2 = _closest_on_segment(
            zone_arr[j, 0], zone_arr[j, 1], zone_arr[i, 0], zone_arr[i, 1], x, y
        )
        if d2 < best2:
            best2, best_x, best_y = d2, px, py
        j = i
    return best_x, best_y


@compiled
def _signed_distance_many(zone_arr: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Signed distances of K points, shape (K, 2) -> (K,)."""
    out = np.empty(points.shape[0], dtype=np.float64)
    for k in range(points.shape[0]):
        out[k] = _signed_distance_xy(zone_arr, points[k, 0], points[k, 1])
    return out


def _as_points(points: np.ndarray) -> tuple[np.ndarray, tuple[int, ...]]:
    """Flatten points of shape (..., 2) to a contiguous (K, 2) float64 array, and the lead shape."""
    points = np.asarray(points, dtype=np.float64)
    if points.shape[-1:] != (2,):
        raise ValueError(f"points must have shape (..., 2), got {points.shape}")
    return np.ascontiguousarray(points.reshape(-1, 2)), points.shape[:-1]


def signed_distance(zone_arr: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Signed distance (m) of points (..., 2) to the zone boundary, shape (...)."""
    flat, lead = _as_points(points)
    return _signed_distance_many(np.ascontiguousarray(zone_arr, np.float64), flat).reshape(lead)


def contains(zone_arr: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Whether each point (..., 2) lies strictly inside the zone, shape (...) bool."""
    return signed_distance(zone_arr, points) < 0.0


def polygon_area(vertices: np.ndarray) -> float:
    """Signed shoelace area (m^2): positive for counter-clockwise vertex order."""
    v = np.asarray(vertices, dtype=np.float64)
    x, y = v[:, 0], v[:, 1]
    return 0.5 * float(np.sum(x * np.roll(y, -1)) - np.sum(np.roll(x, -1) * y))


def zone_center(zone: Zone) -> tuple[float, float]:
    """A circle's centre or a polygon's area centroid (m): where 'the zone' is for a controller."""
    if isinstance(zone, Circle):
        return float(zone.center[0]), float(zone.center[1])
    v = np.asarray(zone.vertices, dtype=np.float64)
    x, y = v[:, 0], v[:, 1]
    xn, yn = np.roll(x, -1), np.roll(y, -1)
    cross = x * yn - xn * y
    area = 0.5 * float(cross.sum())
    if area == 0.0:
        raise ValueError("a polygon with zero area has no centroid; check the zone's vertices")
    return float(((x + xn) * cross).sum() / (6.0 * area)), float(
        ((y + yn) * cross).sum() / (6.0 * area)
    )


def _orient(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> float:
    """Twice the signed area of triangle abc (> 0 when counter-clockwise)."""
    return float((b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]))


def _on_segment(a: np.ndarray, b: np.ndarray, p: np.ndarray) -> bool:
    """Whether p, known to be collinear with ab, lies on the closed segment ab."""
    return bool(
        min(a[0], b[0]) <= p[0] <= max(a[0], b[0]) and min(a[1], b[1]) <= p[1] <= max(a[1], b[1])
    )


def _segments_touch(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray) -> bool:
    """Whether closed segments ab and cd share at least one point."""
    o1, o2, o3, o4 = _orient(a, b, c), _orient(a, b, d), _orient(c, d, a), _orient(c, d, b)
    if o1 * o2 < 0.0 and o3 * o4 < 0.0:
        return True  # a proper crossing
    return (
        (o1 == 0 and _on_segment(a, b, c))
        or (o2 == 0 and _on_segment(a, b, d))
        or (o3 == 0 and _on_segment(c, d, a))
        or (o4 == 0 and _on_segment(c, d, b))
    )


def polygon_is_simple(vertices: np.ndarray) -> bool:
    """Whether vertices form a valid zone: >= 3 distinct finite vertices, non-zero area and no edge
    touching or crossing another except where neighbours share a vertex (config validation)."""
    v = np.asarray(vertices, dtype=np.float64)
    if v.ndim != 2 or v.shape[1] != 2 or len(v) < 3 or not np.all(np.isfinite(v)):
        return False
    n = len(v)
    if len(np.unique(v, axis=0)) != n or polygon_area(v) == 0.0:
        return False
    for i in range(n):
        a, b = v[i], v[(i + 1) % n]
        # Neighbouring edges meet at b; they overlap only if the path turns straight back.
        c = v[(i + 2) % n]
        if _orient(a, b, c) == 0.0 and float(np.sum((a - b) * (c - b))) > 0.0:
            return False
        for j in range(i + 2, n):
            if i == 0 and j == n - 1:
                continue  # edges n-1 and 0 are neighbours, checked above
            if _segments_touch(a, b, v[j], v[(j + 1) % n]):
                return False
    return True


def vertices_collinear(vertices: np.ndarray, rel_tol: float = 1e-9) -> bool:
    """Whether all vertices lie on one line, to within ``rel_tol`` of the squared coordinate scale:
    such a polygon has no interior worth the name, however its edges run."""
    v = np.asarray(vertices, dtype=np.float64)
    scale = max(float(np.max(np.abs(v))), 1.0)
    a = v[0]
    b = v[int(np.argmax(np.hypot(v[:, 0] - a[0], v[:, 1] - a[1])))]
    return all(abs(_orient(a, b, c)) <= rel_tol * scale * scale for c in v)


def zones_overlap(a: Zone, b: Zone) -> bool:
    """Whether two zones share interior points. A circle touching another zone from outside does
    not overlap it; two polygons whose boundaries touch count as overlapping (the safe answer for
    a goal beside a protected zone)."""
    if isinstance(a, Circle) and isinstance(b, Circle):
        return math.dist(a.center, b.center) < a.radius + b.radius
    if isinstance(a, Circle):
        return _circle_overlaps(a, b)
    if isinstance(b, Circle):
        return _circle_overlaps(b, a)
    va = np.asarray(a.vertices, dtype=np.float64)
    vb = np.asarray(b.vertices, dtype=np.float64)
    for i in range(len(va)):
        for j in range(len(vb)):
            if _segments_touch(va[i], va[(i + 1) % len(va)], vb[j], vb[(j + 1) % len(vb)]):
                return True
    # No edges meet: either the polygons are apart or one lies wholly inside the other.
    return bool(contains(zone_arrays(b), va[0]) or contains(zone_arrays(a), vb[0]))


def _circle_overlaps(circle: Circle, zone: Zone) -> bool:
    """Whether a circle shares interior points with a zone: its centre is nearer the zone than
    its radius."""
    return float(signed_distance(zone_arrays(zone), np.asarray(circle.center))) < circle.radius


def zone_at_bearing(zone: Zone, origin: tuple[float, float], bearing: float) -> Zone:
    """``zone`` moved (not turned) so that its centre lies at ``bearing`` (rad, counter-clockwise
    from +x) from ``origin``, as far from it as before; centres rounded to the micrometre. A zone
    already within a micrometre of that place is returned as it is."""
    cx, cy = zone_center(zone)
    reach = math.hypot(cx - origin[0], cy - origin[1])
    tx = round(origin[0] + reach * math.cos(bearing), 6)
    ty = round(origin[1] + reach * math.sin(bearing), 6)
    dx, dy = tx - cx, ty - cy
    if math.hypot(dx, dy) < 1e-6:
        return zone
    if isinstance(zone, Circle):
        return Circle((tx, ty), zone.radius)
    return Polygon(tuple((x + dx, y + dy) for x, y in zone.vertices))


def zone_contains(zone: Zone, point: tuple[float, float]) -> bool:
    """Whether one point lies strictly inside a zone record."""
    return bool(contains(zone_arrays(zone), np.asarray(point, dtype=np.float64)))


@compiled
def _outside_extreme_quad(points: np.ndarray) -> np.ndarray:
    """Indices of the points not strictly inside the quadrilateral of the four extreme points.

    The Akl-Toussaint filter: points inside that quadrilateral cannot be hull vertices, so only the
    others need sorting (most of a compact flock is inside).
    """
    n = points.shape[0]
    ext = np.empty(4, dtype=np.int64)  # leftmost, lowest, rightmost, highest: counter-clockwise
    ext[:] = 0
    for i in range(1, n):
        if points[i, 0] < points[ext[0], 0]:
            ext[0] = i
        if points[i, 1] < points[ext[1], 1]:
            ext[1] = i
        if points[i, 0] > points[ext[2], 0]:
            ext[2] = i
        if points[i, 1] > points[ext[3], 1]:
            ext[3] = i
    keep = np.empty(n, dtype=np.int64)
    m = 0
    for i in range(n):
        inside = True
        for e in range(4):
            a, b = ext[e], ext[(e + 1) % 4]
            if (points[b, 0] - points[a, 0]) * (points[i, 1] - points[a, 1]) - (
                points[b, 1] - points[a, 1]
            ) * (points[i, 0] - points[a, 0]) <= 0.0:
                inside = False
                break
        if not inside:
            keep[m] = i
            m += 1
    return keep[:m]


@compiled
def _lexicographic_order(points: np.ndarray, candidates: np.ndarray) -> np.ndarray:
    """The candidate indices sorted by x, ties in x by y."""
    order = candidates[np.argsort(points[candidates, 0])]
    n = order.shape[0]
    for s in range(1, n):  # insertion pass: order ties in x by y, giving lexicographic (x, y)
        i = order[s]
        t = s
        while (
            t > 0
            and points[order[t - 1], 0] == points[i, 0]
            and points[order[t - 1], 1] > points[i, 1]
        ):
            order[t] = order[t - 1]
            t -= 1
        order[t] = i
    return order


@compiled
def _monotone_chains(points: np.ndarray, order: np.ndarray) -> np.ndarray:
    """Hull vertex indices from lexicographically ordered candidates (Andrew's monotone chain)."""
    n = order.shape[0]
    hull = np.empty(2 * n, dtype=np.int64)
    k = 0
    for sweep in range(2):  # lower chain left to right, then upper chain right to left
        start = k
        for s in range(n):
            i = order[s] if sweep == 0 else order[n - 1 - s]
            while k >= start + 2:
                o, a = hull[k - 2], hull[k - 1]
                cross = (points[a, 0] - points[o, 0]) * (points[i, 1] - points[o, 1]) - (
                    points[a, 1] - points[o, 1]
                ) * (points[i, 0] - points[o, 0])
                if cross > 0.0:
                    break
                k -= 1
            hull[k] = i
            k += 1
        k -= 1  # each chain's last point is the next chain's first
    first, last = hull[0], hull[1]
    if k == 2 and points[first, 0] == points[last, 0] and points[first, 1] == points[last, 1]:
        k = 1  # every point coincides
    return hull[:k].copy()


@compiled
def convex_hull(points: np.ndarray) -> np.ndarray:
    """Indices of the convex-hull vertices of points (n, 2), counter-clockwise from the lowest-x
    (then lowest-y) point; points on hull edges and duplicates are left out (Andrew 1979)."""
    n = points.shape[0]
    if n <= 1:
        return np.arange(n)
    order = _lexicographic_order(points, _outside_extreme_quad(points))
    return _monotone_chains(points, order)


@compiled
def _circle_through_three(
    ax: float, ay: float, bx: float, by: float, cx: float, cy: float
) -> tuple[float, float, float]:
    """Circumcircle of three points; for a collinear triple, the circle on the farthest pair."""
    ux, uy, vx, vy = bx - ax, by - ay, cx - ax, cy - ay
    det = 2.0 * (ux * vy - uy * vx)
    u2 = ux * ux + uy * uy
    v2 = vx * vx + vy * vy
    w2 = (cx - bx) ** 2 + (cy - by) ** 2
    if det == 0.0:
        if u2 >= v2 and u2 >= w2:
            return 0.5 * (ax + bx), 0.5 * (ay + by), 0.5 * math.sqrt(u2)
        if v2 >= w2:
            return 0.5 * (ax + cx), 0.5 * (ay + cy), 0.5 * math.sqrt(v2)
        return 0.5 * (bx + cx), 0.5 * (by + cy), 0.5 * math.sqrt(w2)
    ox = (vy * u2 - uy * v2) / det
    oy = (ux * v2 - vx * u2) / det
    return ax + ox, ay + oy, math.hypot(ox, oy)


@compiled
def _enclosing_circle_of(points: np.ndarray, idx: np.ndarray) -> tuple[float, float, float]:
    """Smallest circle enclosing points[idx]: the incremental form of Welzl (1991), expected
    linear time after a fixed pseudo-random shuffle, so repeated calls give identical results."""
    h = idx.shape[0]
    if h == 0:
        return 0.0, 0.0, 0.0
    ox, oy = points[idx[0], 0], points[idx[0], 1]  # work relative to one point, for precision
    p = np.empty((h, 2), dtype=np.float64)
    for s in range(h):
        p[s, 0] = points[idx[s], 0] - ox
        p[s, 1] = points[idx[s], 1] - oy
    state = _LCG_SEED
    for s in range(h - 1, 0, -1):  # Fisher-Yates with a 31-bit linear congruential generator
        state = (state * 1103515245 + 12345) & 0x7FFFFFFF
        t = state % (s + 1)
        for c in range(2):
            p[s, c], p[t, c] = p[t, c], p[s, c]
    scale = 0.0
    for s in range(h):
        scale = max(scale, abs(p[s, 0]), abs(p[s, 1]))
    slack = 1e-12 * scale  # rounding allowance of the "already inside" test

    cx, cy, r = p[0, 0], p[0, 1], 0.0
    for i in range(1, h):
        if math.hypot(p[i, 0] - cx, p[i, 1] - cy) <= r + slack:
            continue
        cx, cy, r = p[i, 0], p[i, 1], 0.0  # p[i] is on the boundary of the circle of p[:i+1]
        for j in range(i):
            if math.hypot(p[j, 0] - cx, p[j, 1] - cy) <= r + slack:
                continue
            cx, cy = 0.5 * (p[i, 0] + p[j, 0]), 0.5 * (p[i, 1] + p[j, 1])
            r = 0.5 * math.hypot(p[i, 0] - p[j, 0], p[i, 1] - p[j, 1])
            for k in range(j):
                if math.hypot(p[k, 0] - cx, p[k, 1] - cy) <= r + slack:
                    continue
                cx, cy, r = _circle_through_three(
                    p[i, 0], p[i, 1], p[j, 0], p[j, 1], p[k, 0], p[k, 1]
                )
    return cx + ox, cy + oy, r


@compiled
def enclosing_circle(points: np.ndarray) -> tuple[float, float, float]:
    """Exact smallest enclosing circle (cx, cy, r) of points (n, 2), computed on the hull vertices.

    No points give (0, 0, 0); one point gives that point with r = 0.
    """
    return _enclosing_circle_of(points, convex_hull(points))

"""Initial flock formations: bird offsets around the flock centre, before rotation to the heading.

Every formation is returned centred at the origin (its centroid is (0, 0)) and facing +x; the
caller rotates the offsets to the flock's heading and adds the start position.
"""

from __future__ import annotations

import math

import numpy as np

from flockward.sim.portable import bearings, polar_points
from flockward.sim.types import FORMATIONS

# Golden angle in radians, the divergence angle of the sunflower (Vogel 1979) spiral.
_GOLDEN_ANGLE = math.pi * (3.0 - math.sqrt(5.0))
_DISC_SCALE = 0.595  # spiral constant c per metre of spacing (see _disc)
_BLOCK = 64  # cluster candidates drawn per call of the generator


def formation_offsets(
    kind: str, count: int, spacing: float, rng: np.random.Generator
) -> np.ndarray:
    """Offsets (count, 2) in metres of ``count`` birds in formation ``kind``.

    ``spacing`` is the intended nearest-neighbour distance in metres. Only ``cluster`` draws from
    ``rng``; the other formations are deterministic.
    """
    if kind not in FORMATIONS:
        raise ValueError(f"unknown formation {kind!r}; use one of: {', '.join(FORMATIONS)}")
    if count < 0:
        raise ValueError(f"count must be >= 0, got {count}")
    if not (math.isfinite(spacing) and spacing > 0.0):
        raise ValueError(f"spacing must be a positive finite number of metres, got {spacing}")
    if count == 0:
        return np.zeros((0, 2))
    builders = {"disc": _disc, "hex": _hex, "line": _line, "cluster": _cluster}
    points = builders[kind](count, spacing, rng)
    centred: np.ndarray = points - points.mean(axis=0)
    return centred


def _disc(count: int, spacing: float, rng: np.random.Generator) -> np.ndarray:
    """Sunflower spiral (Vogel 1979, from memory): r_k = c sqrt(k + 1/2), theta_k = k * golden.

    c = 0.595 spacing was measured to put the median nearest-neighbour distance at about
    ``spacing`` (the minimum is about 0.92 spacing) for 10 to 2000 points.
    """
    del rng
    c = _DISC_SCALE * spacing
    k = np.arange(count, dtype=np.float64)
    r = c * np.sqrt(k + 0.5)
    theta = k * _GOLDEN_ANGLE
    return polar_points(r, theta)


def _hex(count: int, spacing: float, rng: np.random.Generator) -> np.ndarray:
    """The ``count`` points of a triangular (hexagonal-packing) lattice nearest the origin.

    Every lattice point but the origin has a neighbour strictly closer to the origin, so any such
    nearest-first subset keeps each bird exactly ``spacing`` from its nearest neighbour.
    """
    del rng
    m = math.ceil(math.sqrt(count)) + 2  # enough shells: 2.7 m^2 points lie within m rows
    rows, cols = np.meshgrid(np.arange(-m, m + 1), np.arange(-m, m + 1), indexing="ij")
    i, j = rows.ravel().astype(np.float64), cols.ravel().astype(np.float64)
    points = np.column_stack((spacing * (i + 0.5 * j), spacing * (math.sqrt(3.0) / 2.0) * j))
    dist = np.hypot(points[:, 0], points[:, 1])
    # Ties on a shell are broken by angle so the subset does not depend on sort stability.
    shell = np.round(dist / spacing, 9)
    angle = np.round(bearings(points), 9)
    order = np.lexsort((angle, shell))
    return points[order[:count]]


def _line(count: int, spacing: float, rng: np.random.Generator) -> np.ndarray:
    """Line abreast: birds side by side along y, perpendicular to the +x heading."""
    del rng
    y = spacing * np.arange(count, dtype=np.float64)
    return np.column_stack((np.zeros(count), y))


def _cluster(count: int, spacing: float, rng: np.random.Generator) -> np.ndarray:
    """Loose random cluster: uniform in a disc of area count * spacing^2, no pair nearer spacing/2.

    Candidates are tried in order (sequential rejection, with a grid of cell size spacing/2 for the
    neighbour test); after 200 rejections in a row the disc grows by 10 %, so the loop always ends.
    The result depends only on the generator state.
    """
    radius = spacing * math.sqrt(count / math.pi)
    min_dist = 0.5 * spacing
    cells: dict[tuple[int, int], list[tuple[float, float]]] = {}
    accepted: list[tuple[float, float]] = []
    misses = 0
    while len(accepted) < count:
        for u, v in rng.random((_BLOCK, 2)):
            r = radius * math.sqrt(u)
            theta = 2.0 * math.pi * v
            x, y = r * math.cos(theta), r * math.sin(theta)
            cx, cy = math.floor(x / min_dist), math.floor(y / min_dist)
            near = (
                math.hypot(x - px, y - py) < min_dist
                for dx in (-1, 0, 1)
                for dy in (-1, 0, 1)
                for px, py in cells.get((cx + dx, cy + dy), ())
            )
            if any(near):
                misses += 1
                if misses >= 200:
                    radius *= 1.1
                    misses = 0
                continue
            accepted.append((x, y))
            cells.setdefault((cx, cy), []).append((x, y))
            misses = 0
            if len(accepted) == count:
                break
    return np.array(accepted, dtype=np.float64)

"""Reset randomisation: one reset's flock, formation and start from a scenario and a generator.

Everything ``World.reset`` needs and nothing more, so the simulator never reads config files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from flockward.sim.formations import formation_offsets
from flockward.sim.limits import derived
from flockward.sim.portable import matmul
from flockward.sim.types import SCALABLE_GAINS, FlockParams, Scenario

__all__ = ["RESET_DRAWS", "ResetSample", "sample_reset"]


@dataclass(frozen=True, eq=False)
class ResetSample:
    """One reset's draws: the flock as sampled and the initial state of birds and pursuer."""

    flock: FlockParams  # sampled count, gains, cruise speed and noise; heading_deg as used
    start: np.ndarray  # (2,) m, flock centre (first group's) after the position offset
    heading: float  # rad, counter-clockwise from +x (first group's)
    bird_pos: np.ndarray  # (n, 2) m
    bird_vel: np.ndarray  # (n, 2) m/s
    pursuer_pos: np.ndarray  # (2,) m, [pursuer] start (World starts each drone at its own)
    pursuer_vel: np.ndarray  # (2,) m/s, zeros (every drone starts at rest)


# Order of the uniform draws of every reset: fixed, so adding a range to a scenario changes only
# the value it governs, never the other draws.
RESET_DRAWS = ("count", "heading_deg", "offset_x", "offset_y", "gain_scale", "cruise_speed",
               "noise_std")  # fmt: skip


def _group(
    flock: FlockParams, count: int, centre: np.ndarray, heading: float, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray]:
    """Positions and velocities (count, 2) of one group in the flock's formation around
    ``centre``, facing ``heading`` (rad) at the flock's initial speed."""
    offsets = formation_offsets(flock.formation, count, flock.spacing, rng)
    c, s = math.cos(heading), math.sin(heading)
    rotation = np.array(((c, -s), (s, c)))
    bird_pos = centre + matmul(offsets, rotation.T)
    bird_vel = np.tile(np.array((c, s)) * flock.speed, (count, 1))
    return bird_pos, bird_vel


def sample_reset(scenario: Scenario, rng: np.random.Generator) -> ResetSample:
    """Draw one reset from ``scenario`` using only ``rng``.

    Always draws len(RESET_DRAWS) uniforms in RESET_DRAWS order (a range that is None ignores its
    draw), then the formation's own draws (only 'cluster' makes any), first group first. The
    heading is the configured heading_deg, or the bearing from the (offset) start to the
    destination when it is None, plus the heading offset. A flock that starts as two groups
    (site.second_start) places its second group, of site.second_share of the birds, in the same
    formation around the second start moved by the same offset, listed after the first group's
    birds. Same generator state gives bit-identical arrays.
    """
    flock, ranges = scenario.flock, scenario.randomise
    u = dict(zip(RESET_DRAWS, rng.random(len(RESET_DRAWS)), strict=True))

    def uniform(key: str, default: float) -> float:
        span = getattr(ranges, key)
        return default if span is None else span[0] + u[key] * (span[1] - span[0])

    count = flock.count
    if ranges.count is not None:
        lo, hi = ranges.count
        count = min(hi, lo + int(u["count"] * (hi - lo + 1)))
    start_base = np.asarray(scenario.site.flock_start, dtype=np.float64)
    start = start_base + np.array((uniform("offset_x", 0.0), uniform("offset_y", 0.0)))
    if flock.heading_deg is None:
        delta = np.asarray(scenario.site.destination) - start
        base = math.atan2(delta[1], delta[0])
    else:
        base = math.radians(flock.heading_deg)
    heading = base + math.radians(uniform("heading_deg", 0.0))
    scale = uniform("gain_scale", 1.0)
    changes: dict[str, object] = {name: getattr(flock, name) * scale for name in SCALABLE_GAINS}
    # A draw may scale gains or turn the heading past what a config may write: not re-checked.
    sampled = derived(
        flock,
        count=count,
        heading_deg=math.degrees(heading),
        cruise_speed=uniform("cruise_speed", flock.cruise_speed),
        noise_std=uniform("noise_std", flock.noise_std),
        **changes,
    )

    first, second = scenario.site.group_counts(count)
    bird_pos, bird_vel = _group(flock, first, start, heading, rng)
    if second:
        # The second group flies the same jitter and offset; it heads for the destination from
        # its own start unless the flock has a fixed heading.
        assert scenario.site.second_start is not None  # group_counts gave it birds
        start2 = np.asarray(scenario.site.second_start, dtype=np.float64) + (start - start_base)
        heading2 = heading
        if flock.heading_deg is None:
            delta2 = np.asarray(scenario.site.destination) - start2
            heading2 = math.atan2(delta2[1], delta2[0]) + math.radians(uniform("heading_deg", 0.0))
        pos2, vel2 = _group(flock, second, start2, heading2, rng)
        bird_pos, bird_vel = np.concatenate((bird_pos, pos2)), np.concatenate((bird_vel, vel2))
    return ResetSample(
        flock=sampled,
        start=start,
        heading=heading,
        bird_pos=bird_pos,
        bird_vel=bird_vel,
        pursuer_pos=np.asarray(scenario.pursuer.start, dtype=np.float64),
        pursuer_vel=np.zeros(2),
    )

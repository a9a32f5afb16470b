"""What a sensor makes of the birds: noisy range and bearing, lost tracks, a held picture.

The sensor (``SensorParams``) stands on drone 0 or at a fixed ground position. At each update it
takes every bird within ``detection_range`` (true distance), decides per bird whether its track
survives (a tracked bird is lost with ``loss_probability``, an untracked one in range is acquired
with ``reacquire_probability``; out of range a track always ends) and measures each tracked bird
in polar coordinates around the sensor::

    r' = r + range_noise * n1,   theta' = theta + bearing_noise * n2,   n1, n2 ~ N(0, 1)
    sensed position = sensor + r' (cos theta', sin theta')

so the error ellipse of a far bird is long across the line of sight, as a radar's or a camera's
is. A bird's velocity is reported as it is (the tracker's estimate is taken as exact: velocity
error is not modelled). Between updates, every ``update_steps`` control steps counted from the
world's reset, the last picture is held unchanged and ``age`` says how old it is. At a reset
every bird in range is tracked.

Each world's sensor draws from its own generator, made at the world's reset from the world's
generator without advancing it (``PCG64.jumped``: the same state always gives the same child),
so the flock's own random stream, and with it a seed's flock, is the same with or without a
sensor, and the sensed picture depends on the world's seed only (single env, vector env and
worker processes alike). Draws per update are a fixed block per bird, whatever the track states.
A sensor that draws nothing (no noise, no loss, certain re-acquisition) makes no generator.
"""

from __future__ import annotations

import math

import numpy as np

from flockward.sim.portable import bearings, polar_points
from flockward.sim.types import SensorParams, WorldState


def child_generator(rng: np.random.Generator) -> np.random.Generator:
    """A generator seeded from ``rng``'s current state without advancing ``rng``.

    Bit generators that can jump (PCG64, the default, and Philox, MT19937) give their jumped
    copy; any other is asked for one 63-bit seed (which advances it).
    """
    jumped = getattr(rng.bit_generator, "jumped", None)
    if callable(jumped):
        return np.random.Generator(jumped())
    return np.random.default_rng(int(rng.integers(2**63)))


def polar_measure(
    origin: np.ndarray,  # (2,) m, the sensor
    true_pos: np.ndarray,  # (n, 2) m
    range_noise: float,  # m, 1-sigma
    bearing_noise: float,  # rad, 1-sigma
    normals: np.ndarray,  # (n, 2) standard normal draws: range, bearing
) -> np.ndarray:
    """(n, 2) sensed positions: range and bearing from ``origin`` with Gaussian errors."""
    d = true_pos - origin
    r = np.hypot(d[:, 0], d[:, 1]) + range_noise * normals[:, 0]
    theta = bearings(d) + bearing_noise * normals[:, 1]
    sensed: np.ndarray = origin + polar_points(r, theta)
    return sensed


class Sensor:
    """The sensed birds of B worlds, in the worlds' own bird slots.

    ``pos`` (B, N, 2) m and ``vel`` (B, N, 2) m/s hold the last sensed picture, ``tracked``
    (B, N) which slots hold a tracked bird (False for padding, lost and out-of-range birds, whose
    entries are zero), ``updated`` (B,) the world step of the last update.
    """

    def __init__(self, params: SensorParams, worlds: int, max_birds: int, dt: float):
        self.params = params
        self.dt = dt
        self.update_steps = params.update_steps(dt)
        self.bearing_noise = math.radians(params.bearing_noise_deg)
        self.pos = np.zeros((worlds, max_birds, 2))
        self.vel = np.zeros((worlds, max_birds, 2))
        self.tracked = np.zeros((worlds, max_birds), dtype=np.bool_)
        self.updated = np.zeros(worlds, dtype=np.int64)
        self.rngs: list[np.random.Generator | None] = [None] * worlds

    def origin(self, state: WorldState, index: int) -> np.ndarray:
        """(2,) m, where world ``index``'s sensor stands now: drone 0 onboard (the ground
        position in a world without drones), else the ground position."""
        if self.params.position == "onboard" and state.drones > 0:
            return np.asarray(state.pursuer_pos[index, 0], dtype=np.float64)
        return np.asarray(self.params.ground_position, dtype=np.float64)

    def reset(self, index: int, world_rng: np.random.Generator, state: WorldState) -> None:
        """Start world ``index`` afresh after its world was reset: a generator from the world's,
        and a first picture with every bird in range tracked."""
        self.rngs[index] = child_generator(world_rng) if self.params.stochastic else None
        self.tracked[index] = False
        self._update(index, state, step=0, fresh=True)

    def step(self, state: WorldState, steps: np.ndarray, live: np.ndarray) -> np.ndarray:
        """Update the live worlds whose update is due after a control step (``steps`` (B,) since
        each reset); return which worlds were updated, (B,) bool."""
        due: np.ndarray = live & (steps % self.update_steps == 0)
        for b in np.flatnonzero(due):
            self._update(int(b), state, step=int(steps[b]), fresh=False)
        return due

    def age(self, steps: np.ndarray) -> np.ndarray:
        """(B,) s, how old each world's picture is, given ``steps`` (B,) since each reset."""
        age: np.ndarray = (steps - self.updated) * self.dt
        return age

    def _update(self, b: int, state: WorldState, step: int, fresh: bool) -> None:
        """Sense world ``b`` now: track changes, then measurements of the tracked birds."""
        p = self.params
        n = int(state.count[b])
        true_pos = state.bird_pos[b, :n]
        origin = self.origin(state, b)
        rng = self.rngs[b]
        if rng is not None:
            uniform = rng.random((n, 2))  # loss, acquisition
            normals = rng.standard_normal((n, 2))  # range, bearing
        if p.detection_range is None:
            in_range = np.ones(n, dtype=np.bool_)
        else:
            d = true_pos - origin
            in_range = np.hypot(d[:, 0], d[:, 1]) <= p.detection_range
        if fresh or rng is None:
            tracked = in_range
        else:
            was = self.tracked[b, :n]
            kept = was & (uniform[:, 0] >= p.loss_probability)
            acquired = ~was & (uniform[:, 1] < p.reacquire_probability)
            tracked = in_range & (kept | acquired)
        if p.noisy and rng is not None:
            sensed = polar_measure(origin, true_pos, p.range_noise, self.bearing_noise, normals)
        else:
            sensed = true_pos  # exact: no round trip through polar coordinates
        self.tracked[b] = False
        self.tracked[b, :n] = tracked
        self.pos[b] = 0.0
        self.vel[b] = 0.0
        self.pos[b, :n][tracked] = sensed[tracked]
        self.vel[b, :n][tracked] = state.bird_vel[b, :n][tracked]
        self.updated[b] = step

    def picture(self, state: WorldState) -> tuple[WorldState, np.ndarray]:
        """The sensed birds as a world state (tracked birds first, in slot order; ``count`` =
        tracked birds; the drones as they are) and (B, N) the true slot of each sensed bird, -1
        beyond ``count``."""
        order = np.argsort(~self.tracked, axis=1, kind="stable")
        count = self.tracked.sum(axis=1).astype(np.int64)
        valid = np.arange(self.tracked.shape[1])[None, :] < count[:, None]
        keep = valid[..., None]
        pos = np.where(keep, np.take_along_axis(self.pos, order[..., None], axis=1), 0.0)
        vel = np.where(keep, np.take_along_axis(self.vel, order[..., None], axis=1), 0.0)
        sensed = WorldState(pos, vel, state.pursuer_pos, state.pursuer_vel, count)
        return sensed, np.where(valid, order, -1)

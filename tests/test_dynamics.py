"""The compiled step kernel checked against closed forms and published flocking results.

Every test calls ``step_worlds`` directly on hand-built arrays (see ``Batch``) with the terms it
does not test switched off, and compares with a formula from outside the project: textbook
kinematics, the Cucker-Smale model and its theorem (Cucker & Smale 2007; Ha & Liu 2009), Reynolds'
steering rules (1987) and the model's own documented formulas where no publication applies.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from flockward.sim.dynamics import (
    ALIGN_TABLE_SIZE,
    GRID_MIN_BIRDS,
    alignment_table,
    choose_grid,
    step_worlds,
)
from flockward.sim.limits import derived
from flockward.sim.types import FlockParams

FAR = (1.0e7, 1.0e7)  # m: a pursuer or destination so far away that it has no effect

# Every bird term off, no acceleration cap, no airspeed clamp: the bare double integrator. These
# values lie beyond what a config may write, so the records are built unchecked (derived).
OFF = derived(
    FlockParams(),
    separation_gain=0.0,
    alignment_gain=0.0,
    cohesion_gain=0.0,
    destination_gain=0.0,
    flee_gain=0.0,
    dodge_gain=0.0,
    noise_std=0.0,
    min_speed=0.0,
    max_speed=1e9,
    max_accel=1e9,
)


def per_drone(value, drones: int, worlds: int) -> np.ndarray:
    """A (2,) value shared by every drone, or one (2,) row per drone, as (worlds, drones, 2)."""
    rows = np.broadcast_to(np.asarray(value, np.float64).reshape(-1, 2), (drones, 2))
    return np.tile(rows, (worlds, 1, 1))


class Batch:
    """All arguments of ``step_worlds`` for B worlds of up to N birds, built from plain arrays.

    ``pursuer_pos`` is (2,) for one drone or (P, 2) for P drones; the drones' velocities, limits
    and actions are (2,) shared by every drone or (P, 2) one row per drone.
    """

    def __init__(
        self,
        pos,
        vel,
        flock: FlockParams = OFF,
        *,
        count=None,
        pursuer_pos=FAR,
        pursuer_vel=(0.0, 0.0),
        destination=FAR,
        pursuer_limits=(20.0, 8.0),
        action=(0.0, 0.0),
        dt: float = 0.1,
        use_grid: bool = False,
        noise=None,
    ):
        self.pos = np.array(pos, dtype=np.float64)
        if self.pos.ndim == 2:  # one world
            self.pos = self.pos[None]
        self.vel = np.array(vel, dtype=np.float64).reshape(self.pos.shape)
        b, n = self.pos.shape[:2]
        self.count = np.full(b, n, dtype=np.int64) if count is None else np.array(count, np.int64)
        drones = np.asarray(pursuer_pos, np.float64).reshape(-1, 2).shape[0]
        self.pursuer_pos = per_drone(pursuer_pos, drones, b)  # (B, P, 2)
        self.pursuer_vel = per_drone(pursuer_vel, drones, b)
        self.destination = np.tile(np.asarray(destination, np.float64), (b, 1))
        self.params = np.tile(flock.kernel_vector(), (b, 1))
        self.tables = np.tile(alignment_table(flock.alignment_beta), (b, 1))
        self.pursuer_limits = per_drone(pursuer_limits, drones, b)
        self.action = per_drone(action, drones, b)
        self.noise = np.zeros((b, 0, 0, 2)) if noise is None else np.asarray(noise, np.float64)
        self.noise_row = np.zeros(b, dtype=np.int64)
        self.dt = dt
        self.use_grid = use_grid
        self.live = np.ones(b, dtype=np.bool_)
        m = max(n, 1)
        self.work = np.zeros((4, m))
        self.acc = np.zeros((7, m))
        self.index_work = np.zeros((2, m), dtype=np.int64)

    def step(self, steps: int = 1) -> None:
        for _ in range(steps):
            step_worlds(
                self.pos,
                self.vel,
                self.pursuer_pos,
                self.pursuer_vel,
                self.count,
                self.destination,
                self.params,
                self.tables,
                self.pursuer_limits,
                self.action,
                self.noise,
                self.noise_row,
                self.dt,
                self.use_grid,
                self.live,
                self.work,
                self.acc,
                self.index_work,
            )


def accel_of(batch: Batch) -> np.ndarray:
    """One step's bird accelerations (B, N, 2), from the velocity change: v' = v + a dt."""
    v0 = batch.vel.copy()
    batch.step()
    return (batch.vel - v0) / batch.dt


def only(**terms) -> FlockParams:
    """OFF with the given fields switched back on."""
    return derived(OFF, **terms)


# ---------------------------------------------------------------------------------------------
# 1-2. The integrator and the pursuer's limits.


@pytest.mark.parametrize("dt", [0.1, 0.05, 0.01])
def test_pursuer_constant_command_matches_closed_form(dt):
    # Constant acceleration (any kinematics textbook): x(t) = x0 + v0 t + a t^2 / 2,
    # v(t) = v0 + a t, with a = u * max_accel while the speed stays below max_speed.
    x0, v0, u, a_max = np.array([3.0, -7.0]), np.array([1.0, -2.0]), np.array([0.6, 0.3]), 8.0
    batch = Batch(np.zeros((0, 2)), np.zeros((0, 2)), pursuer_limits=(30.0, a_max), dt=dt)
    batch.pursuer_pos[0, 0] = x0
    batch.pursuer_vel[0, 0] = v0
    batch.action[0, 0] = u
    a = u * a_max
    steps = round(3.0 / dt)
    for k in range(1, steps + 1):
        batch.step()
        t = k * dt
        np.testing.assert_allclose(batch.pursuer_vel[0, 0], v0 + a * t, rtol=0, atol=1e-9)
        np.testing.assert_allclose(batch.pursuer_pos[0, 0], x0 + v0 * t + 0.5 * a * t**2, atol=1e-9)
    assert np.linalg.norm(batch.pursuer_vel[0, 0]) < 30.0  # the clamp never acted


@pytest.mark.parametrize("dt", [0.1, 0.05, 0.01])
def test_bird_without_forces_flies_straight(dt):
    # Newton's first law: with every steering term off, x(T) = x0 + v T. The default airspeed clamp
    # [7, 20] m/s stays on: these speeds lie inside it, so it must not act.
    rng = np.random.default_rng(1)
    n = 12
    angle = rng.uniform(-np.pi, np.pi, n)
    speed = rng.uniform(7.5, 19.5, n)
    v = np.stack([speed * np.cos(angle), speed * np.sin(angle)], axis=1)
    x0 = rng.uniform(-5.0, 5.0, (n, 2))  # close together: neighbours, but every gain is 0
    flock = derived(OFF, min_speed=7.0, max_speed=20.0, max_accel=10.0)
    batch = Batch(x0, v, flock, dt=dt)
    steps = round(2.0 / dt)
    batch.step(steps)
    assert np.array_equal(batch.vel[0], v)
    np.testing.assert_allclose(batch.pos[0], x0 + v * steps * dt, rtol=0, atol=1e-9)


def test_pursuer_speed_never_exceeds_max_speed():
    # Saturated double integrator from rest: speed(t) = min(a t, v_max), along the command. With
    # a = 8 and v_max = 20 the cap is reached at t* = 2.5 s, a whole number of steps, so the
    # position is exactly x(T) = a t*^2 / 2 + v_max (T - t*) (textbook kinematics).
    a_max, v_max, dt = 8.0, 20.0, 0.1
    u = np.array([0.8, -0.6])  # unit norm
    batch = Batch(np.zeros((0, 2)), np.zeros((0, 2)), pursuer_limits=(v_max, a_max), dt=dt)
    batch.pursuer_pos[0, 0] = 0.0
    batch.action[0, 0] = u
    for k in range(1, 201):
        batch.step()
        speed = np.linalg.norm(batch.pursuer_vel[0, 0])
        assert speed <= v_max * (1 + 1e-12)
        assert speed == pytest.approx(min(a_max * k * dt, v_max), rel=0, abs=1e-9)
    t_cap, t_end = v_max / a_max, 20.0
    distance = 0.5 * a_max * t_cap**2 + v_max * (t_end - t_cap)
    np.testing.assert_allclose(batch.pursuer_pos[0, 0], distance * u, rtol=0, atol=1e-9)
    np.testing.assert_allclose(batch.pursuer_vel[0, 0], v_max * u, rtol=0, atol=1e-12)


@pytest.mark.parametrize(
    ("command", "norm"),
    [((1.0, 1.0), 1.0), ((5.0, -3.0), 1.0), ((-0.3, 0.4), 0.5), ((0.0, -1.0), 1.0)],
)
def test_pursuer_command_norm_is_capped_at_one(command, norm):
    # A normalised acceleration command: |a| = min(|u|, 1) * max_accel (norm cap), so the first
    # step from rest changes the velocity by |a| dt (v' = v + a dt).
    a_max, dt = 8.0, 0.1
    batch = Batch(
        np.zeros((0, 2)), np.zeros((0, 2)), pursuer_limits=(20.0, a_max), action=command, dt=dt
    )
    batch.pursuer_pos[0, 0] = 0.0
    batch.step()
    dv = batch.pursuer_vel[0, 0]
    assert np.linalg.norm(dv) == pytest.approx(norm * a_max * dt, rel=1e-12)
    assert np.all(np.sign(dv) == np.sign(command))  # same quadrant as the command
    if norm < 1.0 or abs(command[0]) == abs(command[1]):  # inside the unit box: same direction
        np.testing.assert_allclose(dv / np.linalg.norm(dv), command / np.linalg.norm(command))


# ---------------------------------------------------------------------------------------------
# 3. Cucker-Smale alignment.


def cucker_smale_run(beta, pos, vel, *, steps, dt=0.01, use_grid=False):
    """Alignment only, K = sigma = 1 and a global neighbourhood: the Cucker-Smale model.

    Returns the per-step mean velocities (steps + 1, 2), spreads sum |v_i - vbar|^2 and smallest
    pairwise distances, all recorded before each step and after the last.
    """
    flock = only(
        alignment_gain=1.0,
        alignment_sigma=1.0,
        alignment_beta=beta,
        alignment_radius=1e9,
        separation_radius=1e-6,
        cohesion_radius=1e-6,
    )
    batch = Batch(pos, vel, flock, dt=dt, use_grid=use_grid)
    means, spreads, d_min = [], [], []
    for k in range(steps + 1):
        v = batch.vel[0]
        vbar = v.mean(axis=0)
        means.append(vbar)
        spreads.append(float(np.sum((v - vbar) ** 2)))
        x = batch.pos[0]
        d = np.linalg.norm(x[:, None] - x[None], axis=-1)
        d_min.append(d[np.triu_indices(len(x), 1)].min())
        if k < steps:
            batch.step()
    return np.array(means), np.array(spreads), np.array(d_min)


@pytest.mark.parametrize("use_grid", [False, True], ids=["all-pairs", "grid"])
def test_cucker_smale_unconditional_flocking(use_grid):
    # Cucker & Smale 2007 (IEEE TAC 52:852), Ha & Liu 2009 (Commun. Math. Sci. 7:297):
    # dv_i/dt = (K/N) sum_j psi(|x_j - x_i|)(v_j - v_i), psi = (1 + r^2/sigma^2)^-beta.
    # (a) symmetric weights conserve the mean velocity;
    # (b) S = sum |v_i - vbar|^2 obeys dS/dt = -(K/N) sum_ij psi_ij |v_i - v_j|^2 <= 0. The
    #     kernel's step v' = v + a dt adds dt^2 sum |a_i|^2, which is smaller than the decrease
    #     while dt K psi < 2, so S is non-increasing per step here too (K = 1, psi <= 1, dt 0.01);
    # (c) beta = 1/4 < 1/2: velocities converge for every initial condition, exponentially
    #     (DOMAIN.md section 2: N = 20, x ~ U[-1,1]^2, v ~ N(0,1), T = 100 s).
    rng = np.random.default_rng(0)
    n = 20
    pos, vel = rng.uniform(-1.0, 1.0, (n, 2)), rng.standard_normal((n, 2))
    means, spreads, _ = cucker_smale_run(0.25, pos, vel, steps=10_000, use_grid=use_grid)
    assert np.max(np.abs(np.diff(means, axis=0))) < 1e-12
    assert np.max(np.abs(means - means[0])) < 1e-11
    # Tolerance: 1e-12 relative, plus a floor for the rounding of S itself once the velocities
    # agree to ~1e-8 (each |v_i - vbar| then carries a relative rounding error of ~1e-8).
    growth = np.diff(spreads) - 1e-12 * spreads[:-1] - 1e-20
    assert np.all(growth <= 0.0), f"S grew at step {int(np.argmax(growth))}"
    assert spreads[0] > 1.0  # the flock starts disordered ...
    assert spreads[-1] < 1e-6  # ... and its velocities have converged by T = 100 s


def test_cucker_smale_strong_decay_does_not_force_flocking():
    # beta = 3/2 >= 1/2: Cucker & Smale 2007 guarantee nothing unconditionally. What always holds
    # (from the model, by the bound psi_ij <= psi(d_min)): dS/dt >= -2 K psi(d_min) S, and for the
    # kernel's step S' >= S (1 - 2 dt K psi(d_min)), since the dt^2 term is non-negative. Birds
    # scattered over 100 m x 100 m with scattered velocities fly apart, the coupling fades as
    # t^-3, and the velocity spread stays above that Gronwall bound: no flocking.
    rng = np.random.default_rng(0)
    n, dt, beta = 20, 0.01, 1.5
    pos, vel = rng.uniform(-50.0, 50.0, (n, 2)), 3.0 * rng.standard_normal((n, 2))
    means, spreads, d_min = cucker_smale_run(beta, pos, vel, steps=5_000, dt=dt)
    # psi(d_min) as the kernel tabulates it: never above the table node at or left of z.
    u = d_min[:-1] ** 2
    psi_max = (1.0 - np.floor(ALIGN_TABLE_SIZE * u / (1.0 + u)) / ALIGN_TABLE_SIZE) ** beta
    bound = spreads[0] * np.cumprod(1.0 - 2.0 * dt * psi_max)
    assert np.all(spreads[1:] >= bound * (1 - 1e-9))
    assert np.all(np.diff(spreads) <= 1e-12 * spreads[:-1])  # still non-increasing
    assert np.max(np.abs(means - means[0])) < 1e-11  # still conserved
    assert spreads[-1] > 0.5 * spreads[0]


@pytest.mark.parametrize("beta", [0.0, 0.25, 0.5, 1.5])
@pytest.mark.parametrize("r", [0.0, 0.3, 1.0, 2.0, 3.0, 3.2])
def test_alignment_weight_matches_formula(beta, r):
    # Cucker-Smale weight psi(r) = (1 + r^2/sigma^2)^-beta (Cucker & Smale 2007), read from the
    # kernel itself: two birds at distance r with relative velocity dv, alignment only, gain K,
    # N = 2, give bird 0 the acceleration (K/2) psi(r) dv. Checked to 1e-5 relative (linear
    # interpolation in a table of (1 - z)^beta over z = u / (1 + u), u = r^2/sigma^2) for
    # r/sigma <= 3.2, the range of the shipped flocks (alignment_radius / sigma <= 3.125).
    sigma, gain = 2.0, 3.0
    flock = only(
        alignment_gain=gain, alignment_sigma=sigma, alignment_beta=beta, alignment_radius=100.0
    )
    dv = np.array([1.5, -0.5])
    batch = Batch([[0.0, 0.0], [r * sigma, 0.0]], [[0.0, 0.0], dv], flock)
    a = accel_of(batch)[0]
    psi = (1.0 + r**2) ** -beta
    np.testing.assert_allclose(a[0], 0.5 * gain * psi * dv, rtol=1e-5)
    np.testing.assert_allclose(a[1], -a[0], rtol=1e-12)  # equal and opposite


def test_alignment_table_matches_formula():
    # The table holds (1 - z)^beta = (1 + u)^-beta at z = u / (1 + u), the Cucker-Smale weight.
    for beta in (0.25, 1.5):
        table = alignment_table(beta)
        assert table.shape == (ALIGN_TABLE_SIZE + 2,)
        for r in (0.0, 0.5, 1.0, 3.0):
            u = r * r
            t = ALIGN_TABLE_SIZE * u / (1.0 + u)
            k = int(t)
            w = table[k] + (t - k) * (table[k + 1] - table[k])
            assert w == pytest.approx((1.0 + r * r) ** -beta, rel=1e-5)


def test_alignment_outside_radius_has_no_effect():
    # Cucker-Smale with a finite neighbourhood: only flockmates within alignment_radius count.
    flock = only(alignment_gain=2.0, alignment_radius=10.0, alignment_sigma=5.0)
    batch = Batch([[0.0, 0.0], [10.5, 0.0]], [[0.0, 0.0], [3.0, 1.0]], flock)
    assert np.array_equal(accel_of(batch), np.zeros((1, 2, 2)))


# ---------------------------------------------------------------------------------------------
# 4-7. Reynolds' rules, the destination and fear of the pursuer.


def test_separation_pushes_close_birds_apart():
    # Reynolds 1987 separation in the inverse-distance form sum_j (x_i - x_j) / |x_i - x_j|^2
    # (DOMAIN.md section 4, from memory), times separation_gain, only within separation_radius.
    k, radius = 12.0, 2.0
    flock = only(separation_gain=k, separation_radius=radius)
    x = np.array([[1.0, 2.0], [2.2, 2.9]])  # 1.5 m apart
    a = accel_of(Batch(x, np.zeros((2, 2)), flock))[0]
    d = x[0] - x[1]
    np.testing.assert_allclose(a[0], k * d / (d @ d), rtol=1e-12)
    np.testing.assert_allclose(a[1], -a[0], rtol=1e-12)  # equal and opposite
    assert a[0] @ d > 0.0 and a[1] @ -d > 0.0  # each away from the other
    far = np.array([[1.0, 2.0], [1.0 + 2.01, 2.0]])  # just beyond the radius
    assert np.array_equal(accel_of(Batch(far, np.zeros((2, 2)), flock)), np.zeros((1, 2, 2)))


def test_separation_sums_over_neighbours():
    # Reynolds 1987 (from memory): the repulsions of several close flockmates add up.
    k = 5.0
    flock = only(separation_gain=k, separation_radius=2.0)
    x = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, -1.5], [3.0, 3.0]])  # the last is out of range
    a = accel_of(Batch(x, np.zeros_like(x), flock))[0]
    expected = sum(k * (x[0] - x[j]) / np.sum((x[0] - x[j]) ** 2) for j in (1, 2))
    np.testing.assert_allclose(a[0], expected, rtol=1e-12)
    np.testing.assert_allclose(a[3], 0.0, atol=0.0)


def test_cohesion_steers_toward_centroid_of_neighbours_in_range():
    # Reynolds 1987 cohesion (from memory): steer toward the centroid of the flockmates within
    # cohesion_radius; here a = k (centroid - x_i). The bird at (30, -40) is out of range of bird 0
    # and would pull the centroid far off if it counted.
    k, radius = 0.4, 10.0
    flock = only(cohesion_gain=k, cohesion_radius=radius)
    x = np.array([[0.0, 0.0], [3.0, 0.0], [0.0, 4.0], [30.0, -40.0]])
    a = accel_of(Batch(x, np.zeros_like(x), flock))[0]
    np.testing.assert_allclose(a[0], k * (x[1:3].mean(axis=0) - x[0]), rtol=1e-12)
    np.testing.assert_allclose(a[3], 0.0, atol=0.0)  # no flockmate in range: no cohesion
    # Bird 1 sees birds 0 and 2 (distance 5): centroid (0, 2).
    np.testing.assert_allclose(a[1], k * (np.array([0.0, 2.0]) - x[1]), rtol=1e-12)


def test_destination_steers_toward_cruise_velocity():
    # Navigational feedback (Olfati-Saber 2006, IEEE TAC, gamma-agent term -c2 (p - p_r)) with the
    # reference velocity p_r = cruise_speed * unit vector to the destination:
    # a = k (cruise * g / |g| - v). The velocity rotates toward the destination and relaxes to it.
    k, cruise, dt = 0.25, 12.5, 0.1
    flock = only(destination_gain=k, cruise_speed=cruise)
    dest = np.array([300.0, 400.0])
    v0 = np.array([2.0, 0.0])
    batch = Batch([[0.0, 0.0]], [v0], flock, destination=dest, dt=dt)
    angles = []
    for step in range(300):
        v, to_dest = batch.vel[0, 0], dest - batch.pos[0, 0]
        cos = v @ to_dest / np.linalg.norm(v) / np.linalg.norm(to_dest)
        angles.append(math.acos(min(1.0, cos)))
        a = accel_of(batch)[0, 0]
        if step == 0:
            g = dest / np.linalg.norm(dest)
            np.testing.assert_allclose(a, k * (cruise * g - v0), rtol=1e-12)
    assert angles[0] > 0.9  # starts heading 53 deg off the destination
    assert np.all(np.diff(angles) <= 1e-12)  # the heading error never grows
    assert angles[-1] < 1e-3
    # After 30 s (7.5 relaxation times) the speed is the cruise speed to within e^-7.5 * 12.
    assert np.linalg.norm(batch.vel[0, 0]) == pytest.approx(cruise, abs=0.02)


FEAR = only(flee_gain=20.0, alarm_radius=80.0, dodge_gain=10.0, dodge_radius=15.0)


def fear_accel(bird, pursuer_vel=(10.0, 0.0)):
    """Acceleration of a bird at rest at ``bird`` from a pursuer at the origin."""
    batch = Batch([bird], [[0.0, 0.0]], FEAR, pursuer_pos=(0.0, 0.0), pursuer_vel=pursuer_vel)
    return accel_of(batch)[0, 0]


def test_fear_inside_alarm_radius_is_radial_flight():
    # Flight directly away from the predator (escape response, from memory; the kernel's
    # documented law: flee_gain (1 - d / alarm_radius) along bird - pursuer). The bird is ahead of
    # the approaching pursuer, inside alarm_radius and outside dodge_radius: no sideways dodge.
    bird = np.array([40.0, 3.0])
    a = fear_accel(bird)
    d = np.linalg.norm(bird)
    assert a @ bird > 0.0  # away from the pursuer
    np.testing.assert_allclose(a, 20.0 * (1.0 - d / 80.0) * bird / d, rtol=1e-12)


@pytest.mark.parametrize("side", [1.0, -1.0], ids=["left", "right"])
def test_fear_inside_dodge_radius_adds_sideways_dodge(side):
    # Inside dodge_radius the bird also dodges perpendicular to the pursuer's line of approach, on
    # the side it already is (documented law: dodge_gain (1 - d / dodge_radius) along the normal).
    # Pursuer at the origin flying +x; a bird at y > 0 is left of the approach line.
    bird = np.array([8.0, side * 1.0])
    a = fear_accel(bird)
    d = np.linalg.norm(bird)
    flee = 20.0 * (1.0 - d / 80.0) * bird / d
    assert a @ bird > 0.0  # still away from the pursuer
    sideways = (a - flee) @ np.array([0.0, side])  # beyond the radial flight, toward its side
    assert sideways == pytest.approx(10.0 * (1.0 - d / 15.0), rel=1e-12)
    assert (a - flee)[0] == pytest.approx(0.0, abs=1e-12)  # perpendicular to the approach


def test_fear_beyond_alarm_radius_is_nothing():
    assert np.array_equal(fear_accel((80.5, 0.0)), np.zeros(2))
    assert np.array_equal(fear_accel((0.0, -200.0), pursuer_vel=(0.0, -10.0)), np.zeros(2))


# Several drones: a bird fears the nearest one only, so the one-drone closed forms above hold
# with the nearest drone in the place of the pursuer; a sum over the drones would break them.


def test_bird_between_two_drones_flees_the_nearer_one():
    # Unit check against the fear law. The bird is 30 m from the near drone and 65 m from the far
    # one, inside the alarm radius (80 m) of both and outside the dodge radius (15 m). It flees the
    # near drone alone: flee_gain (1 - d / alarm_radius) along bird - near drone, whichever index
    # the near drone has, so it flies toward the far drone, which on its own would push it back.
    bird = np.array([30.0, 4.0])
    near, far = np.array([0.0, 0.0]), np.array([95.0, 0.0])
    d = np.linalg.norm(bird - near)
    law = 20.0 * (1.0 - d / 80.0) * (bird - near) / d
    for drones in ((near, far), (far, near)):
        batch = Batch([bird], [[0.0, 0.0]], FEAR, pursuer_pos=drones, pursuer_vel=(10.0, 0.0))
        a = accel_of(batch)[0, 0]
        np.testing.assert_allclose(a, law, rtol=1e-12)
        assert a @ (bird - near) > 0.0  # away from the near drone
        assert a @ (far - bird) > 0.0  # and so toward the far one
    alone = Batch([bird], [[0.0, 0.0]], FEAR, pursuer_pos=far, pursuer_vel=(10.0, 0.0))
    assert accel_of(alone)[0, 0] @ (bird - far) > 0.0  # the far drone is a threat by itself


def test_two_drones_at_one_spot_frighten_like_one():
    # Nearest, not summed: two drones at the same spot are one threat. The bird is inside the
    # dodge radius, so radial flight and the sideways dodge both act; summing would double both.
    bird = [[8.0, 1.0]]
    one = Batch(bird, [[0.0, 0.0]], FEAR, pursuer_pos=(0.0, 0.0), pursuer_vel=(10.0, 0.0))
    two = Batch(
        bird, [[0.0, 0.0]], FEAR, pursuer_pos=((0.0, 0.0), (0.0, 0.0)), pursuer_vel=(10.0, 0.0)
    )
    np.testing.assert_array_equal(accel_of(two), accel_of(one))


def test_dodge_follows_the_nearest_drones_line_of_approach():
    # The dodge is perpendicular to the line of approach of the drone the bird fears. Near drone
    # at the origin flying +x, far drone (59 m, inside the alarm radius) flying -y: the bird at
    # (8, 1) is left of the near drone's approach, so it dodges +y (documented law, as in
    # test_fear_inside_dodge_radius_adds_sideways_dodge); the far drone's line would send it +x.
    bird = np.array([8.0, 1.0])
    batch = Batch(
        [bird],
        [[0.0, 0.0]],
        FEAR,
        pursuer_pos=((8.0, 60.0), (0.0, 0.0)),
        pursuer_vel=((0.0, -10.0), (10.0, 0.0)),
    )
    a = accel_of(batch)[0, 0]
    d = np.linalg.norm(bird)
    flee = 20.0 * (1.0 - d / 80.0) * bird / d
    dodge = 10.0 * (1.0 - d / 15.0) * np.array([0.0, 1.0])
    np.testing.assert_allclose(a, flee + dodge, rtol=1e-12)


def test_each_drone_moves_under_its_own_command_and_limits():
    # Two drones from rest (textbook kinematics): drone 0 under u = (0.6, 0.3) and 8 m/s^2 stays
    # below its 30 m/s cap, x = a t^2 / 2; drone 1 under u = (0, -1), 5 m/s^2 and a 5 m/s cap
    # reaches the cap at t* = 1 s, then x(T) = a t*^2 / 2 + v_max (T - t*).
    u0 = np.array([0.6, 0.3])
    batch = Batch(
        np.zeros((0, 2)),
        np.zeros((0, 2)),
        pursuer_pos=((0.0, 0.0), (10.0, 10.0)),
        pursuer_limits=((30.0, 8.0), (5.0, 5.0)),
        action=(u0, (0.0, -1.0)),
    )
    batch.step(20)
    t = 2.0
    np.testing.assert_allclose(batch.pursuer_pos[0, 0], 0.5 * 8.0 * u0 * t**2, atol=1e-9)
    np.testing.assert_allclose(batch.pursuer_vel[0, 0], 8.0 * u0 * t, atol=1e-9)
    np.testing.assert_allclose(batch.pursuer_pos[0, 1], (10.0, 10.0 - 7.5), atol=1e-9)
    np.testing.assert_allclose(batch.pursuer_vel[0, 1], (0.0, -5.0), atol=1e-12)


def test_acceleration_cap_limits_summed_steering():
    # The summed steering is capped at max_accel: |a| = min(|a_sum|, max_accel) along a_sum.
    flock = derived(FEAR, max_accel=4.0)
    batch = Batch(
        [[8.0, 1.0]], [[0.0, 0.0]], flock, pursuer_pos=(0.0, 0.0), pursuer_vel=(10.0, 0.0)
    )
    a = accel_of(batch)[0, 0]
    uncapped = fear_accel((8.0, 1.0))
    assert np.linalg.norm(a) == pytest.approx(4.0, rel=1e-12)
    np.testing.assert_allclose(a / 4.0, uncapped / np.linalg.norm(uncapped), rtol=1e-12)


def test_airspeed_clamp_keeps_heading():
    # Birds in flapping flight cannot hover: a slowing bird keeps its heading at min_speed, a
    # fleeing bird is held at max_speed.
    flock = only(destination_gain=5.0, cruise_speed=1.0, min_speed=7.0, max_speed=20.0)
    slow = Batch([[0.0, 0.0]], [[8.0, 0.0]], flock, destination=(1e6, 0.0))
    slow.step(50)
    np.testing.assert_allclose(slow.vel[0, 0], [7.0, 0.0], rtol=1e-12)
    fast = Batch(
        [[0.0, 0.0]],
        [[0.0, 19.0]],
        derived(flock, cruise_speed=60.0),
        destination=(0.0, 1e6),
    )
    fast.step(50)
    np.testing.assert_allclose(fast.vel[0, 0], [0.0, 20.0], rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# 10-11. Neighbour search choice and degenerate flock sizes.


def test_choose_grid():
    assert choose_grid(GRID_MIN_BIRDS + 1, 25.0)
    assert not choose_grid(GRID_MIN_BIRDS - 1, 25.0)
    assert not choose_grid(100_000, math.inf)  # a grid needs a finite cell size
    assert choose_grid(10, 25.0, "grid")
    assert not choose_grid(100_000, 25.0, "all-pairs")
    with pytest.raises(ValueError, match="finite"):
        choose_grid(10, math.inf, "grid")
    with pytest.raises(ValueError, match="neighbour_search"):
        choose_grid(10, 25.0, "octree")


@pytest.mark.parametrize("use_grid", [False, True], ids=["all-pairs", "grid"])
def test_single_bird_feels_only_destination(use_grid):
    # One bird, every default term on but no flockmates and a distant pursuer: only the
    # destination term acts, a = k (cruise g/|g| - v) (Olfati-Saber 2006 navigational feedback).
    flock = FlockParams()
    v0 = np.array([0.0, 10.0])
    batch = Batch([[0.0, 0.0]], [v0], flock, destination=(100.0, 0.0), use_grid=use_grid)
    a = accel_of(batch)[0, 0]
    expected = flock.destination_gain * (flock.cruise_speed * np.array([1.0, 0.0]) - v0)
    np.testing.assert_allclose(a, expected, rtol=1e-12)
    batch.step(100)
    assert np.all(np.isfinite(batch.pos)) and np.all(np.isfinite(batch.vel))


@pytest.mark.parametrize("use_grid", [False, True], ids=["all-pairs", "grid"])
def test_empty_and_padded_worlds(use_grid):
    # World 0 has no birds, world 1 has 3 of 5 slots filled; the padding holds NaN, which would
    # poison any arithmetic it entered. The pursuers still follow x = x0 + v0 t + a t^2 / 2.
    rng = np.random.default_rng(3)
    pos = np.full((2, 5, 2), np.nan)
    vel = np.full((2, 5, 2), np.nan)
    pos[1, :3] = rng.uniform(-3.0, 3.0, (3, 2))
    vel[1, :3] = [[12.0, 0.0], [11.0, 2.0], [12.5, -1.0]]
    batch = Batch(
        pos,
        vel,
        FlockParams(),
        count=[0, 3],
        action=(0.5, 0.0),
        use_grid=use_grid,
        destination=(500.0, 0.0),
    )
    alone = Batch(
        pos[1:, :3],
        vel[1:, :3],
        FlockParams(),
        action=(0.5, 0.0),
        use_grid=use_grid,
        destination=(500.0, 0.0),
    )
    batch.pursuer_pos[0, 0] = 0.0
    batch.step(30)
    alone.step(30)
    assert np.all(np.isnan(batch.pos[0])) and np.all(np.isnan(batch.pos[1, 3:]))  # untouched
    assert np.array_equal(batch.pos[1, :3], alone.pos[0])
    assert np.array_equal(batch.vel[1, :3], alone.vel[0])
    t = 30 * 0.1
    np.testing.assert_allclose(batch.pursuer_pos[0, 0], [0.5 * 4.0 * t**2, 0.0], atol=1e-9)
    # A kernel call with no bird slots at all.
    empty = Batch(np.zeros((0, 2)), np.zeros((0, 2)), FlockParams(), count=[0], use_grid=use_grid)
    empty.step(3)
    assert empty.pos.shape == (1, 0, 2)


# ---------------------------------------------------------------------------------------------
# Every term at once, against an independent NumPy rewrite of the documented model.


def tabulated_weight(r2, sigma, beta):
    """The Cucker-Smale weight as the kernel reads it: linear interpolation in alignment_table."""
    table = alignment_table(beta)
    t = ALIGN_TABLE_SIZE * (r2 / sigma**2) / (1.0 + r2 / sigma**2)
    k = t.astype(np.int64)
    return table[k] + (t - k) * (table[k + 1] - table[k])


def exact_weight(r2, sigma, beta):
    return (1.0 + r2 / sigma**2) ** -beta


def reference_step(x, v, flock, pursuer, pursuer_vel, destination, dt, weight=exact_weight):
    """One step of the model as dynamics.py documents it, written out pair by pair in NumPy.

    Separation sum_j (x_i - x_j)/|x_i - x_j|^2 (Reynolds 1987), alignment (K/N) sum_j
    (1 + r^2/sigma^2)^-beta (v_j - v_i) with the exact power (Cucker & Smale 2007), cohesion toward
    the centroid of neighbours (Reynolds 1987), navigational feedback k (cruise g/|g| - v)
    (Olfati-Saber 2006), radial flight and sideways dodge, cap |a| <= max_accel, then
    v' = v + a dt clamped to [min_speed, max_speed] and x' = x + (v + v') dt / 2.
    """
    f = flock
    n = len(x)
    d = x[None, :, :] - x[:, None, :]  # d[i, j] = x_j - x_i
    r2 = np.sum(d**2, axis=-1)
    other = ~np.eye(n, dtype=bool)
    sep_m = other & (r2 < f.separation_radius**2)
    ali_m = other & (r2 < f.alignment_radius**2)
    coh_m = other & (r2 < f.cohesion_radius**2)
    safe = np.where(other, r2, 1.0)
    a = f.separation_gain * np.sum(np.where(sep_m[..., None], -d / safe[..., None], 0.0), axis=1)
    psi = weight(r2, f.alignment_sigma, f.alignment_beta)
    dv = v[None, :, :] - v[:, None, :]
    a += f.alignment_gain / n * np.sum(np.where(ali_m[..., None], psi[..., None] * dv, 0.0), 1)
    m = coh_m.sum(axis=1)
    centroid_offset = np.sum(np.where(coh_m[..., None], d, 0.0), axis=1) / np.maximum(m, 1)[:, None]
    a += f.cohesion_gain * np.where(m[:, None] > 0, centroid_offset, 0.0)
    g = destination - x
    a += f.destination_gain * (f.cruise_speed * g / np.linalg.norm(g, axis=1)[:, None] - v)
    rel = x - pursuer
    dist = np.linalg.norm(rel, axis=1)
    alarmed = dist < f.alarm_radius
    a += np.where(
        alarmed[:, None],
        f.flee_gain * (1 - dist / f.alarm_radius)[:, None] * rel / dist[:, None],
        0.0,
    )
    u = pursuer_vel / np.linalg.norm(pursuer_vel)
    normal = np.array([-u[1], u[0]])
    side = np.where(rel @ normal >= 0.0, 1.0, -1.0)
    dodging = dist < f.dodge_radius
    a += np.where(
        dodging[:, None], (f.dodge_gain * (1 - dist / f.dodge_radius) * side)[:, None] * normal, 0.0
    )
    norm = np.linalg.norm(a, axis=1)
    a *= np.minimum(1.0, f.max_accel / norm)[:, None]
    v_new = v + a * dt
    speed = np.linalg.norm(v_new, axis=1)
    v_new *= (np.clip(speed, f.min_speed, f.max_speed) / speed)[:, None]
    return x + 0.5 * (v + v_new) * dt, v_new


@pytest.mark.parametrize("use_grid", [False, True], ids=["all-pairs", "grid"])
def test_full_step_matches_reference_rewrite(use_grid):
    flock = FlockParams()  # gull defaults, every term on, noise off
    rng = np.random.default_rng(8)
    # A jittered lattice 1.5 m apart (no pair closer than 0.3 m, the separation floor does not
    # act), placed across cell boundaries and negative coordinates, with the pursuer among it.
    side = 12
    lattice = np.stack(np.meshgrid(np.arange(side), np.arange(side)), -1).reshape(-1, 2) * 1.5
    x = lattice + rng.uniform(-0.6, 0.6, lattice.shape) - 9.0
    heading = rng.uniform(-0.5, 0.5, len(x))
    v = 12.5 * np.stack([np.cos(heading), np.sin(heading)], axis=1)
    pursuer, pursuer_vel, dest = np.array([2.0, 3.0]), np.array([6.0, 8.0]), np.array([800.0, 5.0])
    batch = Batch(
        x,
        v,
        flock,
        pursuer_pos=pursuer,
        pursuer_vel=pursuer_vel,
        destination=dest,
        use_grid=use_grid,
    )
    batch.step()
    # With the exact power: the tabulated weight's relative error (<= 4e-7 at r/sigma <= 3) times
    # dt K/N sum_j |v_j - v_i| (143 neighbours, |dv| up to 12 m/s) bounds the difference by ~1e-6.
    x_ref, v_ref = reference_step(x, v, flock, pursuer, pursuer_vel, dest, batch.dt)
    np.testing.assert_allclose(batch.vel[0], v_ref, rtol=0, atol=1e-6)
    np.testing.assert_allclose(batch.pos[0], x_ref, rtol=0, atol=1e-6)
    # With the weight read from the table as the kernel reads it, only rounding is left.
    x_tab, v_tab = reference_step(
        x, v, flock, pursuer, pursuer_vel, dest, batch.dt, weight=tabulated_weight
    )
    np.testing.assert_allclose(batch.vel[0], v_tab, rtol=0, atol=1e-11)
    np.testing.assert_allclose(batch.pos[0], x_tab, rtol=0, atol=1e-11)
    speed_change = np.abs(np.linalg.norm(v_ref, axis=1) - 12.5)
    assert speed_change.max() > 0.5  # fear and the clamp acted on some birds

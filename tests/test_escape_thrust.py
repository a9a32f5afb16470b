"""The ``escape_thrust`` flock option: fright that cannot drive a bird past its top speed.

Outside check: a bird's level flight speed is bounded by the speed at which the power its flight
needs equals the power its muscles deliver, so the power margin for speeding up falls to nothing
at the top speed (Pennycuick's power curve, e.g. Pennycuick 1968, J. Exp. Biol. 49:527; from
memory). With "power-limited" the model's top speed is ``burst_speed``.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_dynamics import accel, run

from flockward.sim.limits import derived
from flockward.sim.types import FlockParams


def _flock(mode: str, **more) -> FlockParams:
    return derived(FlockParams(), informed_fraction=0.0, noise_std=0.0, escape_thrust=mode, **more)


def _peak_speed_chased_from_behind(mode: str, gap: float, steps: int = 100) -> float:
    """Top speed of one bird while a drone holds ``gap`` metres behind it, moving with it."""
    f = _flock(mode)
    x, v = np.array([[0.0, 0.0]]), np.array([[f.cruise_speed, 0.0]])
    peak = 0.0
    for _ in range(steps):
        heading = v / np.hypot(*v[0])
        drone, drone_vel = x - gap * heading, v.copy()
        x, v, _, _ = run(f, x, v, 1, drones=drone, drone_vel=drone_vel, limits=(40.0, 10.0))
        peak = max(peak, float(np.hypot(*v[0])))
    return peak


@pytest.mark.parametrize("gap", [20.0, 50.0])
def test_power_limited_fright_never_drives_a_bird_past_burst_speed(gap):
    f = _flock("power-limited")
    assert _peak_speed_chased_from_behind("power-limited", gap) <= f.burst_speed + 1e-6


def test_free_fright_pushes_a_closely_chased_bird_onto_the_safety_net():
    # Regression test (measured): with "free" thrust a drone 20 m behind drives the bird to the
    # max_speed clamp (23.4 m/s for gulls), which the option exists to avoid.
    f = _flock("free")
    assert _peak_speed_chased_from_behind("free", 20.0) == pytest.approx(f.max_speed)


@pytest.mark.parametrize(
    ("drone", "label"),
    [((0.0, -20.0), "beside"), ((20.0, 0.0), "ahead")],
)
def test_sideways_and_braking_fright_pass_unchanged_at_burst_speed(drone, label):
    # A bird at top speed can still turn and brake (only speeding up needs a power margin):
    # with a hovering drone beside it or ahead of it, the two modes give the same acceleration.
    x, v = [[0.0, 0.0]], [[18.0, 0.0]]
    free, limited = (
        accel(_flock(mode, speed_gain=0.0), x, v, drones=np.array([drone]))[0]
        for mode in ("free", "power-limited")
    )
    assert np.hypot(*free) > 1.0, label
    np.testing.assert_allclose(limited, free, atol=1e-12)


def test_forward_fright_fades_from_full_at_cruise_to_none_at_burst():
    # Drone 20 m straight behind, moving with the bird: all fright points ahead. An unbounded
    # budget keeps the grant linear, so the fade shows unchanged in the acceleration.
    def forward(mode: str, speed: float) -> float:
        f = _flock(mode, speed_gain=0.0, max_accel=1e9)
        a = accel(f, [[0.0, 0.0]], [[speed, 0.0]], drones=np.array([[-20.0, 0.0]]),
                  drone_vel=np.array([[speed, 0.0]]))[0]  # fmt: skip
        return float(a[0])

    f = FlockParams()
    cruise, mid = f.cruise_speed, 0.5 * (f.cruise_speed + f.burst_speed)
    assert forward("power-limited", cruise) == pytest.approx(forward("free", cruise))
    assert forward("power-limited", mid) == pytest.approx(0.5 * forward("free", mid))
    assert forward("free", f.burst_speed) > 1.0
    assert abs(forward("power-limited", f.burst_speed)) < 1e-12
    # No jump at either end of the fade: the change shrinks with the step across it.
    for s in (f.cruise_speed, f.burst_speed):
        jumps = [abs(forward("power-limited", s + e) - forward("power-limited", s - e))
                 for e in (1e-3, 1e-5)]  # fmt: skip
        assert jumps[1] < 2e-2 * jumps[0] + 1e-12, jumps

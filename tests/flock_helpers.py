"""Parameter sets shared by the simulator tests."""

from __future__ import annotations

from flockward.sim.limits import derived
from flockward.sim.types import FlockParams

FAR = (1.0e7, 1.0e7)  # m: a destination so far away that it has no effect

# Every bird term off, no budget, no safety net: the bare double integrator, so a single term can
# be switched on and checked alone. These values lie beyond what a config may write, so the
# record is built unchecked (derived).
OFF = derived(
    FlockParams(),
    separation_gain=0.0,
    alignment_gain=0.0,
    cohesion_gain=0.0,
    destination_gain=0.0,
    flee_accel=0.0,
    dodge_accel=0.0,
    speed_gain=0.0,
    noise_std=0.0,
    min_speed=0.0,
    max_speed=1e9,
    max_accel=1e9,
)

"""Shared steering for the reference controllers: turn "be there, moving like this" into a command.

The pursuer is a double integrator whose command is a normalised acceleration (env docstring). A
proportional-derivative law on position with a speed cap is the usual way to fly a point-mass to a
waypoint (common practice); every baseline uses this one so they differ only in where they aim.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from flockward.sim.portable import dot2
from flockward.sim.types import PursuerParams, Scenario


def _unit_command(accel: np.ndarray, max_accel: float) -> np.ndarray:
    """A desired acceleration (m/s^2) as a command in the unit disc (so also in [-1, 1]^2)."""
    u = np.asarray(accel, dtype=np.float64) / max_accel
    norm = float(np.hypot(u[0], u[1]))
    if not math.isfinite(norm):
        return np.zeros(2)
    return u / norm if norm > 1.0 else u


def fly_to(
    pos: np.ndarray,
    vel: np.ndarray,
    target: np.ndarray,
    pursuer: PursuerParams,
    speed: float | None = None,
    target_vel: np.ndarray | None = None,
) -> np.ndarray:
    """Command that flies from ``pos`` to ``target`` (m) at up to ``speed`` (m/s) and arrives there
    moving with ``target_vel`` (m/s, default at rest).

    The desired velocity is ``target_vel`` plus a closing velocity along the line of sight that is
    capped by ``speed`` and by the braking limit sqrt(2 a d), so the drone slows in time instead of
    overshooting; the command is the acceleration that reaches that velocity within one time
    constant.
    """
    vmax = pursuer.max_speed if speed is None else min(speed, pursuer.max_speed)
    amax = pursuer.max_accel
    offset = np.asarray(target, dtype=np.float64) - pos
    distance = float(np.hypot(offset[0], offset[1]))
    base = np.zeros(2) if target_vel is None else np.asarray(target_vel, dtype=np.float64)
    if distance > 1e-9:
        # 0.8 of the full braking deceleration leaves a margin for the one-step lag.
        closing = min(vmax, math.sqrt(2.0 * 0.8 * amax * distance), 1.5 * distance)
        desired = base + closing * offset / distance
    else:
        desired = base
    speed_now = float(np.hypot(desired[0], desired[1]))
    if speed_now > pursuer.max_speed:
        desired *= pursuer.max_speed / speed_now
    return _unit_command((desired - vel) / 0.5, amax)


def brake(vel: np.ndarray, pursuer: PursuerParams) -> np.ndarray:
    """Command that brings the drone to rest as fast as its acceleration allows."""
    return _unit_command(-np.asarray(vel, dtype=np.float64) / 0.1, pursuer.max_accel)


def head_for(
    pos: np.ndarray, vel: np.ndarray, target: np.ndarray, pursuer: PursuerParams
) -> np.ndarray:
    """Command that flies straight at ``target`` at top speed with no braking (a pure chase)."""
    offset = np.asarray(target, dtype=np.float64) - pos
    distance = float(np.hypot(offset[0], offset[1]))
    if distance < 1e-9:
        return brake(vel, pursuer)
    desired = pursuer.max_speed * offset / distance
    return _unit_command((desired - vel) / 0.5, pursuer.max_accel)


def around(pos: np.ndarray, target: np.ndarray, centre: np.ndarray, keep_out: float) -> np.ndarray:
    """Waypoint toward ``target`` that skirts the disc of radius ``keep_out`` (m) about ``centre``.

    If the straight segment pos-target stays outside the disc the target itself is returned;
    otherwise a point on a slightly larger circle, up to 30 deg further round from the drone on
    the shorter way to the target's bearing, so the drone circles the flock instead of crossing it.
    """
    pos = np.asarray(pos, dtype=np.float64)
    target = np.asarray(target, dtype=np.float64)
    centre = np.asarray(centre, dtype=np.float64)
    seg = target - pos
    length2 = float(dot2(seg, seg))
    t = 0.0 if length2 == 0.0 else min(1.0, max(0.0, float(dot2(centre - pos, seg)) / length2))
    closest = pos + t * seg
    if float(np.hypot(*(closest - centre))) >= keep_out:
        return target
    rel = pos - centre
    here = math.atan2(rel[1], rel[0])
    there = math.atan2(target[1] - centre[1], target[0] - centre[0])
    turn = (there - here + math.pi) % (2.0 * math.pi) - math.pi
    step = math.copysign(min(abs(turn), math.radians(30.0)), turn)
    radius = max(1.1 * keep_out, min(float(np.hypot(*rel)), 1.5 * keep_out))
    return centre + radius * np.array([math.cos(here + step), math.sin(here + step)])


def keep_apart(
    commands: np.ndarray,
    positions: np.ndarray,
    velocities: np.ndarray,
    fleet: Sequence[PursuerParams],
    factor: float = 3.0,
) -> np.ndarray:
    """Team commands (P, 2) with a push away from each teammate nearer than ``factor`` times the
    sum of the two drones' safety radii (m) plus the distance the pair needs to brake its closing
    speed (v^2 / 2a, a the weaker drone's acceleration). The push grows linearly to four full
    commands at contact (so it outweighs any command a quarter of the way in), then each
    command's norm is capped at 1 again. A conflict (closer than the sum of the radii) is what
    the benchmark counts as a contact, so the push starts well before it (common practice: a
    separation rule, as in Reynolds' boids, widened by the braking distance)."""
    out = np.array(commands, dtype=np.float64)
    for k in range(len(out)):
        push = np.zeros(2)
        for j in range(len(out)):
            if j == k:
                continue
            offset = positions[k] - positions[j]
            gap = float(np.hypot(offset[0], offset[1]))
            away = offset / gap if gap > 1e-9 else np.array([1.0, 0.0]) * (1 if k > j else -1)
            closing = max(0.0, -float(dot2(velocities[k] - velocities[j], away)))  # m/s
            brake = closing**2 / (2.0 * min(fleet[k].max_accel, fleet[j].max_accel))
            reach = factor * (fleet[k].safety_radius + fleet[j].safety_radius) + brake
            if gap < reach:
                push += 4.0 * (1.0 - gap / reach) * away
        if push.any():
            out[k] = _unit_command(out[k] + push, 1.0)
    return out


def team(scenario: Scenario, drones: int) -> tuple[PursuerParams, ...]:
    """Each of ``drones`` drones' parameters: the scenario's own list, or copies of its
    [pursuer] when it lists none (a world flown with more drones than the file names)."""
    fleet = scenario.fleet
    return fleet if len(fleet) == drones else (scenario.pursuer,) * drones

"""Boundary arc: stand off behind the most threatening rim birds and sweep an arc along the rim.

The standard geometric strategy for herding a flock with one pursuer (common practice): never fly
into the flock; pick the rim birds that threaten most, here the convex-hull birds that are nearest
the protected zone and farthest from the goal; fly at full speed to a standoff point behind them,
on the side opposite the push direction; then sweep an arc about the flock centroid along the
rim, turning at the ends of the arc span, so every rim bird on that side keeps being pushed.

The push distance comes from the flock's own radii. Inside ``alarm_radius`` a bird flees radially;
inside the smaller ``dodge_radius`` it also darts sideways, which splits flocks. Standing in the
band between them pushes the rim without scattering it:
``push = dodge + push_fraction * (alarm - dodge)``, measured from the nearest rim bird. Every
point of the arc is placed by the flock's support function, so no bird is closer than ``push``;
a drone that still finds a bird nearer than the guard distance backs off before anything else.

The push direction points at the goal, bent (by at most ``max_correction_deg``) against the
flock's sideways drift toward its destination, and away from the protected zone when the flock
is within ``zone_margin`` of it.

Several protected zones. The controller protects the most threatened one at each decision: every
distance to "the zone" is the least over the zones (``flockward.sim.geometry``'s zone sets), so a
rim bird's threat counts its nearest zone, and the push bends away from the zone nearest the
flock centroid. With one zone this is exactly the single-zone controller.

Assumes the state view (every bird's position and velocity, the episode's flock radii). With
``information = "sensed"`` it reads the birds as the scenario's sensor sees them instead (noisy,
held between updates, lost tracks missing); with nothing sensed it commands nothing.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from flockward.controller import Controller, StateView
from flockward.sim.geometry import convex_hull, signed_distance, site_zone_arrays, zone_center
from flockward.sim.portable import dot2
from flockward.sim.types import FlockParams, Scenario
from flockward_baselines.controllers.steering import around, fly_to


def _unit(v: np.ndarray) -> np.ndarray:
    norm = float(np.hypot(v[0], v[1]))
    return v / norm if norm > 1e-12 else np.array([1.0, 0.0])


def _bearing(angle: float) -> np.ndarray:
    return np.array([math.cos(angle), math.sin(angle)])


@dataclass
class Sweep:
    """One drone's progress: approaching its station or sweeping, where and which way."""

    mode: str = "approach"
    phase: float = 0.0  # rad, sweep offset from the arc centre
    direction: float = 1.0  # sweep sense, +1 counter-clockwise


@dataclass(frozen=True)
class _Frame:
    """One decision's shared view of the flock (positions m, velocities m/s)."""

    birds: np.ndarray  # (n, 2)
    dt: float  # s until the next decision
    centroid: np.ndarray  # (2,)
    flock_vel: np.ndarray  # (2,)
    push: float  # m, standoff from the nearest rim bird
    rel: np.ndarray  # (n, 2) birds from the centroid
    radius: float  # m, farthest bird from the centroid
    centre_angle: float  # rad, the arc centre's bearing from the centroid


class BoundaryArc(Controller):
    """Push the flock toward the goal and away from the zone from a standoff arc behind its rim."""

    name = "boundary-arc"
    information_level = "state"

    def __init__(
        self,
        push_fraction: float = 0.3,
        push_distance: float | None = None,
        arc_span_deg: float = 60.0,
        sweep_speed: float = 6.0,
        approach_speed: float = 1.0,
        zone_weight: float = 2.0,
        zone_margin: float = 150.0,
        arrive_tolerance: float = 15.0,
        smoothing_time: float = 2.0,
        drift_correction: float = 1.0,
        guard_fraction: float = 0.5,
        max_correction_deg: float = 30.0,
        information: str = "state",
    ) -> None:
        if not 0.0 < push_fraction < 1.0:
            raise ValueError(f"push_fraction = {push_fraction}: must lie in (0, 1)")
        if push_distance is not None and not push_distance > 0.0:
            raise ValueError(f"push_distance = {push_distance}: must be positive metres or None")
        if not 0.0 <= arc_span_deg <= 180.0:
            raise ValueError(f"arc_span_deg = {arc_span_deg}: must lie in [0, 180]")
        if not 0.0 < approach_speed <= 1.0:
            raise ValueError(f"approach_speed = {approach_speed}: a fraction in (0, 1]")
        if information not in ("state", "sensed"):
            raise ValueError(f"information = {information!r}: must be 'state' or 'sensed'")
        # "state": every bird, true; "sensed": the birds the scenario's sensor tracks
        self.information_level = information
        # Low in the band: close enough that the flee push is strong, far from the dodge radius.
        self.push_fraction = push_fraction
        # An absolute push distance (m) replaces the fraction; warned about outside the band.
        self.push_distance = push_distance
        # Wide enough to cover a compact flock's back side from a few bird spacings out.
        self.arc_span_deg = arc_span_deg
        # m/s along the arc: slow enough that the drone keeps up with a fleeing flock.
        self.sweep_speed = sweep_speed
        # Fraction of the drone's top speed on the way to the standoff point: full speed.
        self.approach_speed = approach_speed
        # How many metres of goal distance one metre nearer the zone is worth, in the threat score.
        self.zone_weight = zone_weight
        # m: closer than this to the zone, the push turns away from the zone as well as goalward.
        self.zone_margin = zone_margin
        # m: within this of the standoff point the approach ends and the sweep starts.
        self.arrive_tolerance = arrive_tolerance
        # s: time constant smoothing the arc's centre bearing, so rim-bird ties do not chatter.
        self.smoothing_time = smoothing_time
        # Gain bending the push against the flock's sideways drift (its pull to its destination),
        # so the flock's track, not just the push, points at the goal.
        self.drift_correction = drift_correction
        # Nearer a bird than dodge + guard_fraction * (push - dodge), the drone backs off first.
        self.guard_fraction = guard_fraction
        # deg: the most the drift correction may turn the push away from the goal bearing.
        self.max_correction_deg = max_correction_deg
        self._warned = False
        self._prepared: Scenario | None = None

    def parameters(self) -> dict[str, Any]:
        """Every setting of the arc, the push and the drift correction (and the information
        level when it is not the default, so result files of the default keep their
        parameters)."""
        level = {} if self.information_level == "state" else {"information": "sensed"}
        return level | {
            "push_fraction": self.push_fraction,
            "push_distance": self.push_distance,
            "arc_span_deg": self.arc_span_deg,
            "sweep_speed": self.sweep_speed,
            "approach_speed": self.approach_speed,
            "zone_weight": self.zone_weight,
            "zone_margin": self.zone_margin,
            "arrive_tolerance": self.arrive_tolerance,
            "smoothing_time": self.smoothing_time,
            "drift_correction": self.drift_correction,
            "guard_fraction": self.guard_fraction,
            "max_correction_deg": self.max_correction_deg,
        }

    def push_for(self, flock: FlockParams) -> float:
        """Standoff distance (m) from the nearest rim bird for a flock with these radii."""
        dodge, alarm = flock.dodge_radius, flock.alarm_radius
        if self.push_distance is None:
            return dodge + self.push_fraction * (alarm - dodge)
        if not dodge < self.push_distance < alarm and not self._warned:
            self._warned = True
            warnings.warn(
                f"boundary-arc: push_distance = {self.push_distance:g} m lies outside the band "
                f"({dodge:g}, {alarm:g}) m between the flock's dodge and alarm radii; birds will "
                "scatter (too close) or ignore the drone (too far). Use push_fraction instead.",
                stacklevel=2,
            )
        return self.push_distance

    def reset(self, scenario: Scenario, seed: int | None = None) -> None:
        """Prepare for the scenario and start with the approach to the standoff point."""
        self._prepare(scenario)
        self._sweep = Sweep()  # the drone's approach or sweep, from the arc centre
        self._centre: np.ndarray | None = None  # smoothed unit bearing of the arc centre

    def _prepare(self, scenario: Scenario) -> None:
        self._prepared = scenario
        self._zone = site_zone_arrays(scenario.site.protected)
        self._goal = np.array(zone_center(scenario.site.goal))

    def push_direction(self, centroid: np.ndarray, flock_vel: np.ndarray) -> np.ndarray:
        """Unit vector to push the flock along: toward the goal, corrected for the flock's
        sideways drift, and bent away from the zone when the flock is near it."""
        toward_goal = _unit(self._goal - centroid)
        speed = float(np.hypot(*flock_vel))
        if speed > 1e-9:
            sideways = flock_vel - float(dot2(flock_vel, toward_goal)) * toward_goal
            bend = self.drift_correction * sideways / speed
            # Capped: turning the push too far across the flock's flight stretches it apart.
            cap = math.tan(math.radians(self.max_correction_deg))
            size = float(np.hypot(*bend))
            if size > cap:
                bend *= cap / size
            toward_goal = _unit(toward_goal - bend)
        gap = float(signed_distance(self._zone, centroid))
        if gap >= self.zone_margin:
            return toward_goal
        h = 1.0
        grad = np.array(
            [
                float(signed_distance(self._zone, centroid + [h, 0.0])) - gap,
                float(signed_distance(self._zone, centroid + [0.0, h])) - gap,
            ]
        )
        closeness = 1.0 - max(gap, 0.0) / self.zone_margin
        away = _unit(grad)
        # Never push toward the zone: drop the part of the goal direction that points into it.
        into = min(0.0, float(dot2(toward_goal, away)))
        return _unit(toward_goal - into * away + closeness * away)

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """Back off from a bird too close, else approach the arc behind the rim and sweep it."""
        if state is None or len(state.bird_pos) == 0:
            return np.zeros(2)
        if self._prepared is not state.scenario:
            self.reset(state.scenario)
        frame = self._frame(state)
        return self._command(state, frame, 0, self._sweep, None)  # the drone this controller flies

    def _frame(self, state: StateView) -> _Frame:
        """What every drone's command shares: the flock, the push and the arc's centre bearing
        (smoothed once per decision)."""
        birds = state.bird_pos
        dt = state.scenario.episode.decision_period  # s until the next call
        centroid = birds.mean(axis=0)
        flock_vel = state.bird_vel.mean(axis=0)
        push = self.push_for(state.flock)
        push_dir = self.push_direction(centroid, flock_vel)

        hull = convex_hull(np.ascontiguousarray(birds))
        rim = birds[hull]
        threat = np.hypot(*(rim - self._goal).T) - self.zone_weight * signed_distance(
            self._zone, rim
        )
        focus = rim[int(np.argmax(threat))]
        behind = _unit(focus - push * push_dir - centroid)
        if self._centre is None:
            self._centre = behind
        else:
            blend = min(1.0, dt / self.smoothing_time)
            self._centre = _unit((1.0 - blend) * self._centre + blend * behind)

        rel = birds - centroid
        radius = float(np.max(np.hypot(*rel.T)))
        centre_angle = math.atan2(self._centre[1], self._centre[0])
        return _Frame(birds, dt, centroid, flock_vel, push, rel, radius, centre_angle)

    def _command(
        self,
        state: StateView,
        frame: _Frame,
        k: int,
        sweep: Sweep,
        sector: tuple[float, float] | None,
    ) -> np.ndarray:
        """Drone k's command: back off, approach its station or sweep its arc.

        ``sector`` (rad, offsets from the arc centre) bounds the sweep; None sweeps the whole
        ``arc_span_deg`` symmetrically, the one-drone rule.
        """
        birds, dt, centroid, flock_vel, push = (
            frame.birds,
            frame.dt,
            frame.centroid,
            frame.flock_vel,
            frame.push,
        )
        rel, radius, centre_angle = frame.rel, frame.radius, frame.centre_angle
        pos, vel = state.pursuer_pos[k], state.pursuer_vel[k]
        pursuer = (
            state.scenario.fleet[k] if k < state.scenario.drone_count else state.scenario.pursuer
        )

        def station(offset: float) -> tuple[np.ndarray, float]:
            u = _bearing(centre_angle + offset)
            reach = float(np.max(dot2(rel, u))) + push  # support function: every bird >= push away
            return centroid + reach * u, reach

        gaps = np.hypot(*(birds - pos).T)
        nearest = int(np.argmin(gaps))
        guard = state.flock.dodge_radius + self.guard_fraction * (push - state.flock.dodge_radius)
        if gaps[nearest] < guard:
            # Too close to a bird: back straight off to the push distance before anything else,
            # because inside the dodge radius the flock splits.
            away = _unit(pos - birds[nearest])
            retreat = birds[nearest] + push * away
            return fly_to(pos, vel, retreat, pursuer, None, flock_vel)

        target, reach = station(sweep.phase)
        if sweep.mode == "approach":
            if float(np.hypot(*(target - pos))) < self.arrive_tolerance:
                sweep.mode = "sweep"
        elif float(np.hypot(*(target - pos))) > 3.0 * self.arrive_tolerance:
            sweep.mode = "approach"
        if sweep.mode == "approach":
            waypoint = around(pos, target, centroid, radius + 0.9 * push)
            speed = self.approach_speed * pursuer.max_speed
            return fly_to(pos, vel, waypoint, pursuer, speed, flock_vel)

        sweep.phase += sweep.direction * self.sweep_speed / max(reach, 1.0) * dt
        if sector is None:
            half = math.radians(self.arc_span_deg) / 2.0
            if abs(sweep.phase) >= half:
                sweep.phase = math.copysign(half, sweep.phase)
                sweep.direction = -math.copysign(1.0, sweep.phase)
        elif sweep.phase >= sector[1]:
            sweep.phase, sweep.direction = sector[1], -1.0
        elif sweep.phase <= sector[0]:
            sweep.phase, sweep.direction = sector[0], 1.0
        target, reach = station(sweep.phase)
        tangent = sweep.direction * _bearing(centre_angle + sweep.phase + math.pi / 2.0)
        return fly_to(pos, vel, target, pursuer, None, flock_vel + self.sweep_speed * tangent)

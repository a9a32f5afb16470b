"""Play one episode of a controller on a scenario and summarise it as a flat record."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from flockward.controller import Controller, InformationLevel, StateView
from flockward.sim.geometry import signed_distance
from flockward.sim.types import Scenario, WorldState
from flockward.task.batched import DivertTask
from flockward.task.env import DivertEnv
from flockward.task.outcome import Outcome


@dataclass(frozen=True)
class EpisodeRecord:
    """Per-episode metrics written to result files (units in comments)."""

    scenario: str
    seed: int
    birds: int
    success: bool
    outcome: str  # success | breach | timeout | error
    steps: int  # control steps of dt played
    decision_period: float  # s, how long each controller action was held (decision_steps * dt)
    time_to_success: float | None  # s, None unless success
    breached_birds: int  # distinct birds that entered the protected zone
    peak_components: int  # most flock fragments at any step
    min_largest_fraction: float  # lowest share of birds in the largest fragment
    collision_steps: int  # control steps with a drone inside its safety radius of a bird
    closest_approach: float  # m, closest drone to nearest bird over the episode
    diameter_growth: float  # largest diameter / initial diameter
    path_length: float  # m, drone track lengths summed over the drones
    energy: float  # (m/s^2)^2 s, integral of the commanded acceleration squared, over the drones
    episode_return: float
    min_zone_clearance: float  # m, least signed distance of a bird to the protected zones (< 0: in)
    time_limit: float  # s, the longest the episode could last: step budget * dt
    duration: float  # s, how long the episode lasted: control steps * dt
    error: str | None = None  # why the controller failed the episode, if it did
    # Teams of P > 1 drones only (None, and left out of as_dict, with one drone or none):
    drone_path_length: list[float] | None = None  # m, each drone's track length
    # (m/s^2)^2 s, each drone's integral of its commanded acceleration squared
    drone_energy: list[float] | None = None
    drone_closest_approach: list[float] | None = None  # m, each drone's closest bird
    min_drone_separation: float | None = None  # m, least distance between two drones
    # control steps with two drones closer than the sum of their safety radii (also counted in
    # collision_steps, so the score's no-contact term counts them like a collision)
    conflict_steps: int | None = None

    def as_dict(self) -> dict[str, Any]:
        """The record as a flat dict, the form a result file stores; the team fields only for
        teams, so one-drone records keep exactly the fields they always had."""
        record = asdict(self)
        for key in TEAM_FIELDS:
            if record[key] is None:
                del record[key]
        return record


TEAM_FIELDS = (
    "drone_path_length",
    "drone_energy",
    "drone_closest_approach",
    "min_drone_separation",
    "conflict_steps",
)


class ControllerFault(Exception):
    """The controller raised or returned an unusable action; the episode is failed, not the run."""


def _command_energy(action: np.ndarray, max_accel: np.ndarray, dt: float) -> float:
    """One step's commanded acceleration squared times dt, summed over drones, (m/s^2)^2 s.

    ``action`` holds one (2,) command per drone, ``max_accel`` (P,) m/s^2; each command counts as
    the kernel applies it: clipped to the unit box, then its norm capped at 1.
    """
    total = 0.0
    # Only flown drones spend energy: without drones the (2,) action is ignored.
    commands = np.reshape(action, (-1, 2))[: len(max_accel)]
    for command, amax in zip(commands, max_accel, strict=True):
        u = np.clip(command, -1.0, 1.0)
        u = u / max(1.0, float(np.hypot(*u)))
        accel = u * amax
        total += float(accel[0] * accel[0] + accel[1] * accel[1]) * dt
    return total


def _drone_energies(action: np.ndarray, max_accel: np.ndarray, dt: float) -> np.ndarray:
    """Each drone's share of ``_command_energy``, (P,) (m/s^2)^2 s."""
    u = np.clip(np.reshape(action, (-1, 2))[: len(max_accel)], -1.0, 1.0)
    u = u / np.maximum(1.0, np.hypot(u[:, 0], u[:, 1]))[:, None]
    accel = u * np.asarray(max_accel)[:, None]
    energies: np.ndarray = (accel**2).sum(axis=1) * dt
    return energies


def _track_length(before: np.ndarray, after: np.ndarray) -> float:
    """Distance flown in one step, summed over the drones of (P, 2) positions, m."""
    return sum(float(np.hypot(*(a - b))) for a, b in zip(after, before, strict=True))


def _zone_clearance(task: DivertTask) -> float:
    """Signed distance (m) of world 0's bird nearest a protected zone (the least over the zones
    and birds): negative once inside."""
    n = int(task.state.count[0])
    if n == 0:
        return math.inf
    return float(signed_distance(task.setting.protected_arr, task.state.bird_pos[0, :n]).min())


def _checked_action(raw: object, drones: int = 1) -> np.ndarray:
    """A controller's return value as the env's action: (2,) with one drone (or none), (P, 2)
    with P > 1; ControllerFault if it is not one.

    A controller may return (2,) for drone 0 only: with P > 1 drones the others then get a zero
    command (they hold their velocity: at rest from the start, drifting with any wind). It may
    return (P, 2), one row per drone, instead ((1, 2) with one drone), or the same flat as
    (2P,), the SB3 adapter's team action (so a model trained on it plays as it acts).
    """
    action = np.asarray(raw, dtype=np.float64)
    p = max(drones, 1)
    if action.shape == (1, 2) and p == 1:
        action = action[0]
    if p > 1 and action.shape == (2 * p,):
        action = action.reshape(p, 2)
    if action.shape not in ((2,), (p, 2)):
        expected = "(2,)" if p == 1 else f"(2,) for drone 0 or ({p}, 2)"
        raise ControllerFault(f"action has shape {action.shape}, expected {expected}")
    if not np.all(np.isfinite(action)):
        raise ControllerFault(f"action is not finite: {action.tolist()}")
    if p > 1 and action.shape == (2,):
        action = np.vstack([action, np.zeros((p - 1, 2))])
    return action


def controller_env_kwargs(
    controller: Controller, env_kwargs: dict[str, Any] | None = None
) -> dict[str, Any]:
    """Environment arguments with the number of drones the controller declares added.

    A ``drones`` argument that contradicts the controller's declaration is a ValueError.
    """
    kwargs = dict(env_kwargs or {})
    drones = getattr(controller, "drones", 1)
    if kwargs.get("drones", drones) != drones:
        raise ValueError(
            f"drones = {kwargs['drones']}: controller {getattr(controller, 'name', '?')!r} "
            f"declares drones = {drones}"
        )
    if drones != 1:
        kwargs["drones"] = drones
    return kwargs


def play_episode(
    scenario: Scenario,
    controller: Controller,
    seed: int,
    record_frames: bool = False,
    env_kwargs: dict[str, Any] | None = None,
    on_action: Callable[[Any, np.ndarray], None] | None = None,
) -> tuple[EpisodeRecord, list[dict[str, Any]]]:
    """Run ``controller`` for one episode from ``seed``; return its record and optional frames.

    ``on_action(observation, action)`` is called before each step (e.g. to record demonstrations).
    The env flies the controller's ``drones`` (default 1; 0 for the unherded control). Each
    action is held for the scenario's ``decision_steps`` control steps (or the ``decision_steps``
    env argument's), as for a learned policy, so every controller decides equally often.
    """
    env = DivertEnv(scenario, **controller_env_kwargs(controller, env_kwargs))
    obs, info = env.reset(seed=seed)
    scenario = env.task.scenario  # with the env argument's decision_steps, if one was given
    try:
        controller.reset(scenario, seed)
    except Exception as fault:  # a user's controller may raise anything
        return _failed(scenario, seed, env, f"reset raised {type(fault).__name__}: {fault}"), []
    task = env.task
    state = task.state
    level = controller.information_level
    wants_state = level in (InformationLevel.STATE, InformationLevel.SENSED)
    # "sensed": the birds as the scenario's sensor sees them (the truth with a perfect sensor)
    sensor = task.sensor if level == InformationLevel.SENSED else None
    dt = scenario.episode.dt
    max_accel = task.world.pursuer_limits[0, :, 1]  # (P,) m/s^2
    drones = task.n_drones
    team = drones > 1
    drone_path = np.zeros(drones)  # m, per drone (teams only)
    drone_energy = np.zeros(drones)
    drone_closest = np.full(drones, math.inf)
    separation = math.inf
    conflicts = 0
    d0 = max(info["diameter"], 1e-9)
    frames: list[dict[str, Any]] = []
    peak_components = info["n_components"]
    min_largest = info["largest_fraction"]
    max_diameter = info["diameter"]
    closest = math.inf
    collisions = 0
    path = 0.0
    energy = 0.0
    total = 0.0
    step = 0
    outcome = Outcome.TIMEOUT
    error: str | None = None
    success_time: float | None = None
    breached = int(task.ever_inside[0].sum())
    clearance = _zone_clearance(task)
    if record_frames:
        frames.append(_frame(state, 0, info))
    while True:
        view = None
        if wants_state:
            birds = state if sensor is None else sensor.picture(state)[0]
            n = int(birds.count[0])
            view = StateView(
                birds.bird_pos[0, :n].copy(),
                birds.bird_vel[0, :n].copy(),
                state.pursuer_pos[0].copy(),
                state.pursuer_vel[0].copy(),
                task.world.flocks[0],
                scenario,
                step,  # control steps since reset
            )
        try:
            action = _checked_action(controller.act(obs, view), drones)
        except ControllerFault as fault:
            outcome, error = Outcome.ERROR, str(fault)
            break
        except Exception as fault:
            outcome, error = Outcome.ERROR, f"act raised {type(fault).__name__}: {fault}"
            break
        if on_action is not None:
            on_action(obs, action)
        before = state.pursuer_pos[0].copy()  # (P, 2) m
        obs, reward, terminated, truncated, info = env.step(action)
        step = info["steps"]
        energy += _command_energy(action, max_accel, dt * info["held_steps"])
        path += _track_length(before, state.pursuer_pos[0])
        total += reward
        # Flock metrics are sampled once per decision, after its last control step.
        peak_components = max(peak_components, info["n_components"])
        min_largest = min(min_largest, info["largest_fraction"])
        max_diameter = max(max_diameter, info["diameter"])
        closest = min(closest, info["nearest_distance"])
        collisions += int(info["collision_steps"])
        if team:
            drone_energy += _drone_energies(action, max_accel, dt * info["held_steps"])
            drone_path += np.hypot(*(state.pursuer_pos[0] - before).T)
            drone_closest = np.minimum(drone_closest, info["drone_nearest"])
            separation = min(separation, info["drone_separation"])
            conflicts += int(info["conflict_steps"])
        breached = info["breached_birds"]
        clearance = min(clearance, _zone_clearance(task))
        if record_frames:
            frames.append(_frame(state, step, info))
        if terminated or truncated:
            outcome = info["outcome"]
            if outcome == Outcome.SUCCESS:
                success_time = step * dt
            break
    record = EpisodeRecord(
        scenario=scenario.name,
        seed=int(seed),
        birds=int(state.count[0]),
        success=outcome == Outcome.SUCCESS,
        outcome=outcome,
        steps=step,
        decision_period=scenario.episode.decision_period,
        time_to_success=success_time,
        time_limit=task.max_steps * dt,
        duration=step * dt,
        breached_birds=int(breached),
        min_zone_clearance=clearance,
        peak_components=int(peak_components),
        min_largest_fraction=float(min_largest),
        collision_steps=collisions,
        closest_approach=float(closest),
        diameter_growth=float(max_diameter / d0),
        path_length=path,
        energy=energy,
        episode_return=float(total),
        error=error,
        **(
            _team_fields(drone_path, drone_energy, drone_closest, separation, conflicts)
            if team
            else {}
        ),
    )
    return record, frames


def _team_fields(
    path: np.ndarray, energy: np.ndarray, closest: np.ndarray, separation: float, conflicts: int
) -> dict[str, Any]:
    """The team fields of an EpisodeRecord (see TEAM_FIELDS)."""
    return {
        "drone_path_length": [float(v) for v in path],
        "drone_energy": [float(v) for v in energy],
        "drone_closest_approach": [float(v) for v in closest],
        "min_drone_separation": float(separation),
        "conflict_steps": conflicts,
    }


def _frame(state: WorldState, step: int, info: dict[str, Any]) -> dict[str, Any]:
    """One recorded step of world 0: active birds (n, 2), drones ``pursuer_pos`` (P, 2), metrics."""
    n = int(state.count[0])
    return {
        "bird_pos": state.bird_pos[0, :n].copy(),
        "bird_vel": state.bird_vel[0, :n].copy(),
        "pursuer_pos": state.pursuer_pos[0].copy(),
        "step": step,
        "goal_distance": info.get("goal_distance", math.nan),
        "diameter": info.get("diameter", math.nan),
        "n_components": info.get("n_components", 1),
        "breached_birds": info.get("breached_birds", 0),
        "outcome": info.get("outcome", Outcome.RUNNING),
    }


def _failed(scenario: Scenario, seed: int, env: DivertEnv, error: str) -> EpisodeRecord:
    """The record of an episode the controller failed before its first step."""
    return EpisodeRecord(
        scenario=scenario.name,
        seed=int(seed),
        birds=int(env.task.state.count[0]),
        success=False,
        outcome=Outcome.ERROR,
        steps=0,
        decision_period=env.task.scenario.episode.decision_period,
        time_to_success=None,
        time_limit=env.task.max_steps * scenario.episode.dt,
        duration=0.0,
        breached_birds=0,
        min_zone_clearance=_zone_clearance(env.task),
        peak_components=1,
        min_largest_fraction=1.0,
        collision_steps=0,
        closest_approach=math.inf,
        diameter_growth=1.0,
        path_length=0.0,
        energy=0.0,
        episode_return=0.0,
        error=error,
    )

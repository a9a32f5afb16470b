"""B independent worlds of one scenario, stepped together by the compiled kernel.

Each world owns its random generator. Resets draw the world's randomised scenario values from it and
the flight noise is drawn from it too, in blocks of ``NOISE_BLOCK`` control steps (each with one row
per physics substep) counted from the world's own reset, so a world's trajectory depends on its own
seed only: B worlds stepped together equal B worlds stepped alone, bit for bit.

The wind (``flockward.sim.wind``) is the scenario's steady wind plus, with turbulence, each
world's own Dryden gusts; a reset seeds the world's gust generator from the world's generator,
so gusts follow the world's seed too. Still air draws nothing and steps with zero wind.
"""

from __future__ import annotations

import os

import numpy as np

from flockward.sim.dynamics import StepWork, choose_grid, step_worlds
from flockward.sim.portable import matmul
from flockward.sim.resets import sample_reset
from flockward.sim.types import FlockParams, Scenario, WorldState
from flockward.sim.wind import DrydenGusts, gust_generator, wind_axes

NOISE_BLOCK = 64  # steps of noise drawn per generator call: amortises the per-world draw
THREADS_VARIABLE = "FLOCKWARD_THREADS"  # environment variable: default worker threads


def default_threads() -> int:
    """Worker threads when none are asked for: FLOCKWARD_THREADS if set, else 1 (serial)."""
    text = os.environ.get(THREADS_VARIABLE, "").strip()
    if not text:
        return 1
    try:
        threads = int(text)
    except ValueError:
        threads = 0
    if threads < 1:
        raise ValueError(f"{THREADS_VARIABLE} = {text!r}: must be a whole number >= 1")
    return threads


class World:
    """The batched simulation: reset any subset of worlds, step all of them in one call.

    Every world flies ``drones`` drones (P), each with its own start and limits from the
    scenario's ``fleet`` (its ``[[drones]]`` list, or one drone, ``[pursuer]``). None (the
    default) flies the scenario's ``drone_count``. A scenario without a drone list may be flown
    with any P, every drone a copy of ``[pursuer]``; one with a list only with its own P.
    With ``drones = 0`` the world has no drone and the birds know no fear (the unherded control).
    ``clamps`` counts, per world since its reset, how often the airspeed safety net acted.
    ``threads`` > 1 steps the worlds (or one large world's birds) on that many numba threads, at
    most NUMBA_NUM_THREADS; None reads FLOCKWARD_THREADS, default 1. The results do not depend on
    it, bit for bit.
    """

    def __init__(
        self,
        scenario: Scenario,
        worlds: int = 1,
        neighbour_search: str = "auto",
        drones: int | None = None,
        threads: int | None = None,
    ):
        drones = scenario.drone_count if drones is None else drones
        if worlds < 1:
            raise ValueError(f"worlds = {worlds}: must be at least 1")
        if drones < 0:
            raise ValueError(f"drones = {drones}: must be at least 0")
        if scenario.drones and drones not in (0, scenario.drone_count):
            raise ValueError(
                f"drones = {drones}: scenario {scenario.name!r} lists {scenario.drone_count} "
                "drones; fly all of them (or 0 for the unherded control)"
            )
        self.threads = default_threads() if threads is None else threads
        if self.threads < 1:
            raise ValueError(f"threads = {self.threads}: must be at least 1")
        self.scenario = scenario
        self.n_worlds = worlds
        self.n_drones = drones
        self.max_birds = scenario.max_birds
        self.dt = scenario.episode.dt
        self.substeps = scenario.episode.substeps
        self.state = WorldState.zeros(worlds, self.max_birds, drones)
        self.params = np.tile(scenario.flock.kernel_vector(), (worlds, 1))
        self.flocks: list[FlockParams] = [scenario.flock] * worlds
        self.destination = np.tile(np.asarray(scenario.site.destination, float), (worlds, 1))
        fleet = scenario.fleet if scenario.drones else (scenario.pursuer,) * drones
        fleet = fleet[:drones]
        # (P, 2) m, where each drone starts (at rest)
        self.drone_starts = np.array([d.start for d in fleet], float).reshape(drones, 2)
        limits = np.array([[d.max_speed, d.max_accel] for d in fleet], float).reshape(drones, 2)
        # (B, P, 2) per drone: max speed m/s, max acceleration m/s^2
        self.pursuer_limits = np.tile(limits, (worlds, 1, 1))
        # (P,) m, each drone's safety radius (contact with a bird inside it)
        self.safety_radii = np.array([d.safety_radius for d in fleet], float)
        self.rngs = [np.random.default_rng() for _ in range(worlds)]
        self.steps = np.zeros(worlds, dtype=np.int64)  # steps since each world's reset
        self.clamps = np.zeros(worlds, dtype=np.int64)  # airspeed safety-net activations
        self._all_live = np.ones(worlds, dtype=np.bool_)
        self.use_grid = choose_grid(
            self.max_birds, scenario.flock.interaction_radius, neighbour_search
        )
        noise_hi = scenario.randomise.noise_std[1] if scenario.randomise.noise_std else 0.0
        self.has_noise = max(scenario.flock.noise_std, noise_hi) > 0.0
        self._block_rows = NOISE_BLOCK * self.substeps
        shape = (
            (worlds, self._block_rows, self.max_birds, 2) if self.has_noise else (worlds, 0, 0, 2)
        )
        self._noise = np.zeros(shape)
        self._noise_row = np.zeros(worlds, dtype=np.int64)
        self._work = StepWork(worlds, self.max_birds)
        # (B, substeps, 2) m/s: each world's wind over the current step's substeps
        self.steady_wind = np.asarray(scenario.wind.velocity, dtype=np.float64)
        self.wind = np.tile(self.steady_wind, (worlds, self.substeps, 1))
        self._wind_axes = wind_axes(scenario.wind)
        self.gusts: list[DrydenGusts | None] = [None] * worlds

    @property
    def wind_now(self) -> np.ndarray:
        """(B, 2) m/s: each world's wind at the end of its last step (the steady wind before the
        first); a bird's or drone's ground velocity is its state velocity plus this."""
        return self.wind[:, -1]

    def reset(self, index: int, rng: np.random.Generator | None = None) -> None:
        """Start world ``index`` afresh, from ``rng`` if given, else from its own generator.

        Every drone starts at rest at its own start (``drone_starts``).
        """
        if rng is not None:
            self.rngs[index] = rng
        sample = sample_reset(self.scenario, self.rngs[index])
        n = sample.bird_pos.shape[0]
        s = self.state
        s.bird_pos[index] = 0.0
        s.bird_vel[index] = 0.0
        s.bird_pos[index, :n] = sample.bird_pos
        s.bird_vel[index, :n] = sample.bird_vel
        s.pursuer_pos[index] = self.drone_starts
        s.pursuer_vel[index] = 0.0
        s.count[index] = n
        self.flocks[index] = sample.flock
        self.params[index] = sample.flock.kernel_vector()
        self.steps[index] = 0
        self.clamps[index] = 0
        if self.has_noise:
            self._noise[index] = 0.0
            self._noise_row[index] = self._block_rows  # the first step draws a fresh block
        self.wind[index] = self.steady_wind
        if self.scenario.wind.turbulence != "none":
            gust_rng = np.random.default_rng(int(self.rngs[index].integers(2**63)))
            h = self.dt / self.substeps
            cruise = self.scenario.flock.cruise_speed
            self.gusts[index] = gust_generator(self.scenario.wind, cruise, h, gust_rng)

    def step(self, action: np.ndarray, live: np.ndarray | None = None) -> None:
        """Advance the ``live`` worlds (default all) by one step under ``action`` (B, P, 2): each
        drone's normalised acceleration command, finite."""
        action = np.ascontiguousarray(action, dtype=np.float64)
        expected = (self.n_worlds, self.n_drones, 2)
        if action.shape != expected:
            raise ValueError(
                f"action has shape {action.shape}; expected (worlds, drones, 2) {expected}"
            )
        live = self._all_live if live is None else live
        if self.has_noise:
            for b in np.flatnonzero((self._noise_row >= self._block_rows) & live):
                n = int(self.state.count[b])
                self._noise[b, :, :n] = self.rngs[b].standard_normal((self._block_rows, n, 2))
                self._noise_row[b] = 0
        if self.scenario.wind.turbulence != "none":  # still air and steady wind: nothing to draw
            for b in np.flatnonzero(live):
                gusts = self.gusts[b]
                if gusts is not None:
                    self.wind[b] = self.steady_wind + matmul(
                        gusts.next(self.substeps), self._wind_axes.T
                    )
        s = self.state
        step_worlds(
            s.bird_pos,
            s.bird_vel,
            s.pursuer_pos,
            s.pursuer_vel,
            s.count,
            self.destination,
            self.params,
            self.pursuer_limits,
            action,
            self._noise,
            self._noise_row,
            self.dt,
            self.substeps,
            self.use_grid,
            live,
            self._work,
            self.clamps,
            self.threads,
            self.wind,
        )
        if self.has_noise:
            self._noise_row += live * self.substeps
        self.steps += live

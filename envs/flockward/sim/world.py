"""B independent worlds of one scenario, stepped together by the compiled kernel.

Each world owns its random generator. Resets draw the world's randomised scenario values from it and
the acceleration noise is drawn from it too, in blocks of ``NOISE_BLOCK`` steps counted from the
world's own reset, so a world's trajectory depends on its own seed only: B worlds stepped together
equal B worlds stepped alone, bit for bit.
"""

from __future__ import annotations

import numpy as np

from flockward.sim.dynamics import alignment_table, choose_grid, step_worlds
from flockward.sim.resets import sample_reset
from flockward.sim.types import FlockParams, Scenario, WorldState

NOISE_BLOCK = 64  # steps of noise drawn per generator call: amortises the per-world draw


class World:
    """The batched simulation: reset any subset of worlds, step all of them in one call.

    Every world flies ``drones`` drones (P), all with the scenario's pursuer limits and start.
    Scenarios describe one drone, which is the default. With no drone (P = 0) nothing frightens
    the birds: the unherded control, whose actions are (B, 0, 2).
    """

    def __init__(
        self,
        scenario: Scenario,
        worlds: int = 1,
        neighbour_search: str = "auto",
        drones: int = 1,
    ):
        if worlds < 1:
            raise ValueError(f"worlds = {worlds}: must be at least 1")
        if drones < 0:
            raise ValueError(f"drones = {drones}: must be at least 0")
        self.scenario = scenario
        self.n_worlds = worlds
        self.n_drones = drones
        self.max_birds = scenario.max_birds
        self.dt = scenario.episode.dt
        self.state = WorldState.zeros(worlds, self.max_birds, drones)
        self.params = np.tile(scenario.flock.kernel_vector(), (worlds, 1))
        self.align_tables = np.tile(alignment_table(scenario.flock.alignment_beta), (worlds, 1))
        self.flocks: list[FlockParams] = [scenario.flock] * worlds
        self.destination = np.tile(np.asarray(scenario.site.destination, float), (worlds, 1))
        limits = [scenario.pursuer.max_speed, scenario.pursuer.max_accel]
        # (B, P, 2) per drone: max speed m/s, max acceleration m/s^2
        self.pursuer_limits = np.tile(np.asarray(limits, float), (worlds, drones, 1))
        self.rngs = [np.random.default_rng() for _ in range(worlds)]
        self.steps = np.zeros(worlds, dtype=np.int64)  # steps since each world's reset
        self._all_live = np.ones(worlds, dtype=np.bool_)
        self.use_grid = choose_grid(
            self.max_birds, scenario.flock.interaction_radius, neighbour_search
        )
        noise_hi = scenario.randomise.noise_std[1] if scenario.randomise.noise_std else 0.0
        self.has_noise = max(scenario.flock.noise_std, noise_hi) > 0.0
        shape = (worlds, NOISE_BLOCK, self.max_birds, 2) if self.has_noise else (worlds, 0, 0, 2)
        self._noise = np.zeros(shape)
        self._noise_row = np.zeros(worlds, dtype=np.int64)
        self._work = np.zeros((4, max(self.max_birds, 1)))  # coordinates, struct of arrays
        self._acc = np.zeros((7, max(self.max_birds, 1)))  # pair sums
        self._index_work = np.zeros((2, max(self.max_birds, 1)), dtype=np.int64)

    def reset(self, index: int, rng: np.random.Generator | None = None) -> None:
        """Start world ``index`` afresh, from ``rng`` if given, else from its own generator.

        Every drone starts at rest at the scenario's pursuer start.
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
        s.pursuer_pos[index, :] = sample.pursuer_pos
        s.pursuer_vel[index, :] = sample.pursuer_vel
        s.count[index] = n
        self.flocks[index] = sample.flock
        self.params[index] = sample.flock.kernel_vector()
        self.align_tables[index] = alignment_table(sample.flock.alignment_beta)
        self.steps[index] = 0
        if self.has_noise:
            self._noise[index] = 0.0
            self._noise_row[index] = NOISE_BLOCK  # the first step draws a fresh block

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
            for b in np.flatnonzero((self._noise_row >= NOISE_BLOCK) & live):
                n = int(self.state.count[b])
                self._noise[b, :, :n] = self.rngs[b].standard_normal((NOISE_BLOCK, n, 2))
                self._noise_row[b] = 0
        s = self.state
        step_worlds(
            s.bird_pos,
            s.bird_vel,
            s.pursuer_pos,
            s.pursuer_vel,
            s.count,
            self.destination,
            self.params,
            self.align_tables,
            self.pursuer_limits,
            action,
            self._noise,
            self._noise_row,
            self.dt,
            self.use_grid,
            live,
            self._work,
            self._acc,
            self._index_work,
        )
        if self.has_noise:
            self._noise_row += live
        self.steps += live

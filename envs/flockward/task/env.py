"""The single Gymnasium environment: one world of the batched task."""

from __future__ import annotations

from collections import deque
from typing import TYPE_CHECKING, Any

import gymnasium as gym
import numpy as np
import numpy.typing as npt

from flockward.task.batched import DivertTask, action_space, check_actions, scalar_info
from flockward.task.env_config import RENDER_MODES, ConfigOrScenario, EnvConfig
from flockward.task.state import WorldView

if TYPE_CHECKING:
    from flockward.render import FrameRenderer

TRACK_LENGTH = 200  # steps of pursuer track kept for rendering


class DivertEnv(gym.Env):
    """Divert a bird flock away from protected airspace with a drone (or a team of drones).

    ## Description
    A flock of double-integrator birds (separation, Cucker-Smale alignment, cohesion, attraction to
    its own destination, fear of the pursuer) flies toward its roost, often across an airfield's
    protected zone. The agent commands the drone's acceleration and must herd the flock into the
    goal region without splitting it, colliding with a bird or letting birds into the zone.

    ## Action space
    ``Box(-1, 1, (2,), float32)``: the drone's acceleration as a fraction of its limit (x, y).
    Finite values outside [-1, 1] are clipped per component, then the norm is capped at 1; NaN or
    inf raises ValueError. Each action is held for ``decision_steps`` control steps of ``dt``
    (default 4 x 0.1 s: a decision every 0.4 s, ``scenario.episode.decision_period``); one
    ``step`` is one decision.

    A scenario that lists P > 1 drones (``[[drones]]``) is flown by one policy for the team:
    the action is ``Box(-1, 1, (P, 2))``, row k drone k's command; the observation stacks every
    drone's own observation (built with that drone as drone 0) as ``(P, ...)``; the reward is the
    team's, each term's mean over the drones (``info["agent_reward"]``: each drone's own);
    ``info`` adds ``conflict``, ``conflict_steps``, ``drone_separation`` and per-drone
    ``drone_nearest`` and ``drone_contact``. A contact (``collision``) is then also two drones
    closer than the sum of their safety radii. One agent per drone: ``flockward.task.multi_env``.

    ## Observation space
    ``observation="vector"`` (default): a float32 vector of 14 + 3k entries, k = ``rim_birds``,
    world frame (x east, y north). Site scale = distance from the flock's start to the goal
    centre; near scale = the flock's alarm radius. Layout and bounds come from
    ``flockward.task.observation.GLOBAL_FIELDS``:

    | index | field | scaling | bounds |
    | --- | --- | --- | --- |
    | 0-1 | pursuer_velocity: drone velocity | / drone top speed | unbounded |
    | 2-3 | centroid_offset: flock centroid minus drone position | / site scale | unbounded |
    | 4-5 | flock_velocity: flock mean velocity | / cruise speed | unbounded |
    | 6 | flock_diameter: smallest enclosing circle | / near scale | unbounded |
    | 7 | largest_cluster: largest-cluster fraction | fraction | [0, 1] |
    | 8-9 | protected_direction: centroid to nearest protected-zone edge | unit vector | [-1, 1] |
    | 10 | protected_distance: signed, negative inside | / site scale | unbounded |
    | 11-12 | goal_direction: centroid to goal-region centre | unit vector | [-1, 1] |
    | 13 | goal_distance: signed centroid distance to the goal edge | / site scale | unbounded |
    | 14+3r, 15+3r | rim_offset: r-th most threatening rim bird - drone | / near scale | unbounded |
    | 16+3r | rim_present: 1 if that rim bird exists, 0 if padded | mask | [0, 1] |

    ``observation="dict"``: ``{"context": that vector, "birds": (max_birds, 4) relative position
    and velocity of every bird, "mask": (max_birds,) 1 for a real bird}``. Any other observation
    is an object (or an import path ``package.module:Name`` of its class) following
    ``flockward.task.observation.Observation``.
    Birds are observed through the scenario's ``[sensor]`` (``flockward.sim.sensing``): with the
    default perfect sensor every bird exactly; otherwise only tracked birds, with their errors (an
    untracked rim slot has ``rim_present`` 0 and offset (0, 0); with no bird tracked every flock
    field is 0, ``largest_cluster`` 0 marking it; the dict ``mask`` marks the tracked birds).

    ## Rewards
    The sum of named terms, each in ``info["reward_terms"]`` summed over the held control steps,
    weights from the scenario's ``[reward]`` table: ``progress`` (potential-based shaping toward
    the goal, discounted per control step by ``reward.gamma ** (1 / decision_steps)`` so that it
    is exact shaping in the agent's gamma per decision), ``approach`` (the same shaping on the
    drone's distance to the flock, off by default), ``proximity`` (a plain cost of the drone's
    distance to the flock beyond the alarm radius), ``fragmentation``, ``collision``, ``breach``
    (once, when the episode fails by breach), ``time``, ``success`` (see
    ``flockward.task.reward``). ``reward=`` takes another object (or import path) following
    ``flockward.task.reward.Reward``.

    ## Starting state
    Drawn from the scenario at every reset: formation, heading, position, count and gains within
    the scenario's ``[randomise]`` ranges.

    ## Episode end
    Terminated on success (``success_fraction`` of the birds inside the goal region) or breach
    (more than ``max_breaching_birds`` distinct birds have entered the protected zone); truncated
    at the scenario's step limit or ``max_episode_steps`` (both in control steps). An episode
    that ends within a held decision ends on that control step: ``info`` is that step's, with
    ``held_steps`` the control steps played and ``steps`` the control steps since reset.

    ## State
    ``env.unwrapped.state``: a read-only ``WorldView`` of the world after the latest reset or step
    (``bird_pos`` and ``bird_vel`` (count, 2) of the active birds, ``drone_pos``, ``drone_vel``
    (P, 2) of every drone, ``count``); its arrays are copies that raise ValueError when
    written to.

    ## Arguments
    The fields of ``flockward.task.env_config.EnvConfig``, as keywords or as one EnvConfig:
    ``scenario`` (shipped name, TOML path or Scenario), ``overrides`` (dotted config keys, checked
    like the file's), ``observation``, ``reward``, ``rim_birds``, ``max_birds``,
    ``neighbour_search`` ("auto", "all-pairs", "grid"), ``max_episode_steps``, ``decision_steps``
    (control steps each action is held; None: the scenario's ``episode.decision_steps``),
    ``render_mode``,
    ``drones`` (None: the scenario's, one unless it lists ``[[drones]]``; 0 for the unherded
    control: no pursuer in the world, actions ignored, observations taken from a still point at
    the flock centroid).

    ## Version history
    v0: first release. Later changes that leave every observation value, reward and episode as
    they were: observation and reward as objects passed in; finite bounds on the bounded
    observation entries (unit vectors, fractions, masks).
    v1: flock model v1 (``flockward.sim.dynamics``): physics substeps of a second-order
    integrator apart from the 0.1 s control step, forces continuous in distance, a hard-core
    separation, Motsch-Tadmor alignment, a prioritised acceleration budget in which dodge and
    flight act as distinct regimes, white heading noise, sourced species speeds, drones faster
    than a fleeing bird. Observation layout and reward terms are unchanged; every number differs.
    v2 (model version 2): a decision interval (each action held for ``decision_steps`` control
    steps, default 4, a decision every 0.4 s: at 0.1 s a breach lay hundreds of decisions ahead
    and PPO from scratch hardly learned), rewards summed over the hold; a plain ``proximity``
    cost in place of the ``approach`` shaping (now weight 0), ``progress`` weight 5, ``breach``
    charged once per failed episode (10) instead of 5 per bird, the shaping discount derived
    from the agent's ``reward.gamma`` and the interval. Fright's forward thrust is
    power-limited (no bird is driven past its burst speed), the starlings' separation radius
    gives wild flocks' spacing, and the pair loop sums in a vectorised order. Observation
    layout unchanged; every number differs from v1. Later, leaving every one-drone episode as it
    was: teams of drones (scenarios listing ``[[drones]]``).

    >>> import gymnasium as gym, flockward
    >>> env = gym.make("flockward/Divert-v2", scenario="headon")
    >>> obs, info = env.reset(seed=0)
    >>> obs.shape
    (26,)
    """

    metadata = {"render_modes": list(RENDER_MODES), "render_fps": 20}

    def __init__(self, config: ConfigOrScenario = None, **options: Any):
        self.config = EnvConfig.from_options(config, **options)
        self.task = DivertTask(self.config, 1)
        self.scenario = self.task.scenario
        self.render_mode = self.config.render_mode
        self.action_space = action_space(self.task.n_drones)
        self.observation_space = self.task.observation_space()
        self._track: deque[np.ndarray] = deque(maxlen=TRACK_LENGTH)
        self._last_info: dict[str, Any] = {}
        self._renderer: FrameRenderer | None = None

    @property
    def state(self) -> WorldView:
        """A read-only snapshot of the world (see the class docstring's State section)."""
        return self.task.view(0)

    def reset(
        self, *, seed: int | None = None, options: dict[str, Any] | None = None
    ) -> tuple[Any, dict[str, Any]]:
        """Start an episode: the first observation and the flock metrics as info."""
        super().reset(seed=seed)
        obs = self.task.reset([0], [self.np_random])
        self._track.clear()
        self._track.append(self.task.state.pursuer_pos[0].copy())
        self._last_info = scalar_info(self.task.metrics_info(), 0)
        return self._one(obs), dict(self._last_info)

    def step(self, action: npt.ArrayLike) -> tuple[Any, float, bool, bool, dict[str, Any]]:
        """Advance one step under ``action`` ((2,), or (P, 2) with P > 1 drones): observation,
        reward, ended, cut off, info."""
        batch = self.task.step(check_actions(action, 1, self.task.n_drones))
        self._track.append(self.task.state.pursuer_pos[0].copy())
        info = scalar_info(batch.info, 0)
        self._last_info = info
        if self.render_mode == "human":
            self.render()
        return (
            self._one(batch.observation),
            float(batch.reward[0]),
            bool(batch.terminated[0]),
            bool(batch.truncated[0]),
            info,
        )

    def render(self) -> np.ndarray | None:
        """The current frame as an (H, W, 3) uint8 array ("rgb_array"), else None."""
        if self.render_mode is None:
            gym.logger.warn("render() called without a render_mode; pass render_mode='rgb_array'")
            return None
        from flockward.render import FrameRenderer

        if self._renderer is None:
            self._renderer = FrameRenderer(self.scenario, interactive=self.render_mode == "human")
        frame = self._renderer.draw(self.task.state, 0, np.asarray(self._track), self._last_info)
        return frame if self.render_mode == "rgb_array" else None

    def close(self) -> None:
        """Release the renderer's figure, if one was drawn."""
        if self._renderer is not None:
            self._renderer.close()
            self._renderer = None

    @staticmethod
    def _one(obs: Any) -> Any:
        """World 0's entry of a batched observation (an array or a dict of arrays)."""
        if isinstance(obs, dict):
            return {key: value[0] for key, value in obs.items()}
        return obs[0]

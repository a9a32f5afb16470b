"""Frozen parameter records and the batched world state.

Every length is in metres, every speed in m/s, every acceleration in m/s^2, every time in seconds,
every angle in degrees in configs (radians inside the code). Each field declares its range and
unit beside its default (``param``, ``flockward.sim.spec``), so a new parameter is one line here.
Each record checks its fields and their relations when it is built (``flockward.sim.limits``),
raising a one-line ``ValueError``; derived values are properties computed in one place.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields
from typing import TYPE_CHECKING

import numpy as np

from flockward.sim.spec import (
    POINT,
    Spec,
    number,
    param,
    param_factory,
    positive,
    span,
)

if TYPE_CHECKING:
    from _typeshed import DataclassInstance

FORMATIONS = ("disc", "hex", "line", "cluster")


def _check(record: DataclassInstance) -> None:
    """Validate a parameter record on construction (rules and messages in flockward.sim.limits)."""
    # Imported here: limits reads geometry, which reads the zone records of this module.
    from flockward.sim.limits import check_record

    check_record(record)


@dataclass(frozen=True)
class FlockParams:
    """One species' behaviour plus the flock's size and initial formation.

    The defaults describe a flock of medium gulls: cruise airspeed 12.5 m/s, inside the 11-14 m/s
    range of gull airspeeds measured by tracking radar (Alerstam et al. 2007, PLoS Biology 5:e197).
    """

    name: str = param("gulls", Spec("name"))
    source: str = param(
        "Alerstam et al. 2007, PLoS Biol 5:e197 (gull airspeeds 11-14 m/s)",
        Spec("str", max_len=400),
    )
    count: int = param(50, Spec("int", 1, 5000, "birds"))
    formation: str = param("disc", Spec("choice", choices=FORMATIONS))
    # nearest-neighbour distance in the initial formation
    spacing: float = param(3.0, positive(100.0, "m"))
    # counter-clockwise from +x; None = toward destination
    heading_deg: float | None = param(None, number(-360.0, 360.0, "deg", opt=True))
    speed: float = param(12.5, number(0.0, 60.0, "m/s"))  # initial airspeed
    # airspeed the bird steers toward its destination at
    cruise_speed: float = param(12.5, positive(60.0, "m/s"))
    # birds in flapping flight cannot hover
    min_speed: float = param(7.0, number(0.0, 60.0, "m/s"))
    max_speed: float = param(20.0, positive(80.0, "m/s"))  # burst airspeed when fleeing
    max_accel: float = param(10.0, positive(100.0, "m/s^2"))  # steering acceleration cap
    separation_radius: float = param(2.0, positive(100.0, "m"))
    # inverse-distance repulsion (Reynolds 1987)
    separation_gain: float = param(12.0, number(0.0, 1000.0, "m^2/s^2"))
    alignment_radius: float = param(15.0, positive(500.0, "m"))
    alignment_gain: float = param(2.0, number(0.0, 100.0, "1/s"))  # Cucker-Smale coupling K
    alignment_sigma: float = param(5.0, positive(500.0, "m"))  # Cucker-Smale length scale
    # Cucker-Smale exponent (beta < 1/2: unconditional flocking)
    alignment_beta: float = param(0.25, number(0.0, 5.0))
    cohesion_radius: float = param(25.0, positive(500.0, "m"))
    cohesion_gain: float = param(0.4, number(0.0, 100.0, "1/s^2"))
    # pull toward cruise velocity aimed at the destination
    destination_gain: float = param(0.25, number(0.0, 100.0, "1/s"))
    # inside it a bird flees the pursuer radially
    alarm_radius: float = param(80.0, positive(1000.0, "m"))
    # at zero distance, falling linearly to 0 at alarm_radius
    flee_gain: float = param(20.0, number(0.0, 1000.0, "m/s^2"))
    # inside it a bird also dodges sideways
    dodge_radius: float = param(15.0, positive(1000.0, "m"))
    # at zero distance, falling linearly to 0 at dodge_radius
    dodge_gain: float = param(10.0, number(0.0, 1000.0, "m/s^2"))
    # standard deviation of Gaussian acceleration noise
    noise_std: float = param(0.0, number(0.0, 100.0, "m/s^2"))
    # proximity-graph radius for fragmentation; None = cohesion
    link_radius: float | None = param(None, positive(1000.0, "m", opt=True))

    def __post_init__(self) -> None:
        _check(self)

    @property
    def interaction_radius(self) -> float:
        """Largest bird-bird perception radius: the cut-off for neighbour search."""
        return max(self.separation_radius, self.alignment_radius, self.cohesion_radius)

    @property
    def linking_radius(self) -> float:
        """Radius of the proximity graph whose components count as one flock fragment."""
        return self.cohesion_radius if self.link_radius is None else self.link_radius

    def kernel_vector(self) -> np.ndarray:
        """The numbers the step kernel reads, in KERNEL_FIELDS order (float64)."""
        return np.array([float(getattr(self, name)) for name in KERNEL_FIELDS], dtype=np.float64)


# Order of the per-world parameter rows handed to the compiled step kernel.
KERNEL_FIELDS = (
    "cruise_speed",
    "min_speed",
    "max_speed",
    "max_accel",
    "separation_radius",
    "separation_gain",
    "alignment_radius",
    "alignment_gain",
    "alignment_sigma",
    "alignment_beta",
    "cohesion_radius",
    "cohesion_gain",
    "destination_gain",
    "alarm_radius",
    "flee_gain",
    "dodge_radius",
    "dodge_gain",
    "noise_std",
)
K = {name: index for index, name in enumerate(KERNEL_FIELDS)}  # column index by field name

# Gains a randomisation range may scale (multiplicatively, per reset).
SCALABLE_GAINS = (
    "separation_gain",
    "alignment_gain",
    "cohesion_gain",
    "destination_gain",
    "flee_gain",
    "dodge_gain",
)


@dataclass(frozen=True)
class PursuerParams:
    """The drone: a double integrator commanded by a normalised acceleration."""

    start: tuple[float, float] = param((0.0, 0.0), POINT)
    # (small multirotor cruise 10-20 m/s, common practice)
    # The bound 44.7 m/s = 87 kn is the groundspeed limit for small drones in US 14 CFR 107.51.
    max_speed: float = param(20.0, positive(44.7, "m/s"))
    max_accel: float = param(8.0, positive(50.0, "m/s^2"))
    # closer than this to any bird counts as a collision
    safety_radius: float = param(5.0, number(0.0, 100.0, "m"))

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class Circle:
    """A disc zone."""

    center: tuple[float, float]  # m
    radius: float  # m


@dataclass(frozen=True)
class Polygon:
    """A simple polygon zone; vertices in order (either orientation), not closed."""

    vertices: tuple[tuple[float, float], ...]  # m


Zone = Circle | Polygon


@dataclass(frozen=True)
class SiteParams:
    """Where things are: the airspace to protect, where to herd to, where the flock wants to go."""

    protected: Zone = param_factory(lambda: Circle((0.0, 0.0), 150.0), Spec("zone"))
    goal: Zone = param_factory(lambda: Circle((0.0, 500.0), 150.0), Spec("zone"))
    # the flock's roost or feeding ground
    destination: tuple[float, float] = param((800.0, 0.0), POINT)
    # centre of the initial formation
    flock_start: tuple[float, float] = param((-600.0, 0.0), POINT)

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class EpisodeParams:
    """Time step and the rules that end an episode."""

    dt: float = param(0.1, positive(1.0, "s"))
    # (150 s at the default dt)
    max_steps: int = param(1500, Spec("int", 1, 1_000_000, "steps"))
    # share of birds inside the goal region that counts as success
    success_fraction: float = param(0.9, positive(1.0))
    # distinct birds allowed inside the protected zone before failure
    max_breaching_birds: int = param(0, Spec("int", 0, 5000, "birds"))

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class RewardWeights:
    """Weights of the named reward terms (see flockward.task.reward)."""

    # per unit of potential (potential = -distance to goal / length scale)
    progress: float = param(1.0, number(0.0, 1000.0))
    # per unit of potential (-drone distance beyond alarm radius / scale)
    approach: float = param(1.0, number(0.0, 1000.0))
    # per step, times (1 - largest-cluster fraction)
    fragmentation: float = param(0.05, number(0.0, 1000.0))
    # per step with the pursuer inside the safety radius of a bird
    collision: float = param(0.5, number(0.0, 1000.0))
    # per bird entering the protected zone for the first time
    breach: float = param(5.0, number(0.0, 1000.0))
    time: float = param(0.002, number(0.0, 1000.0))  # per step
    success: float = param(10.0, number(0.0, 1000.0))  # once, on success
    discount: float = param(0.99, number(0.0, 1.0))  # gamma of the potential-based shaping term

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class Randomisation:
    """Ranges sampled afresh at every reset; None leaves the value fixed."""

    # inclusive
    count: tuple[int, int] | None = param(None, span(1, 5000, "birds", item="int"))
    # added to the configured heading
    heading_deg: tuple[float, float] | None = param(None, span(-180.0, 180.0, "deg"))
    # added to the flock start
    offset_x: tuple[float, float] | None = param(None, span(-5000.0, 5000.0, "m"))
    offset_y: tuple[float, float] | None = param(None, span(-5000.0, 5000.0, "m"))
    # factor on every SCALABLE_GAINS entry
    gain_scale: tuple[float, float] | None = param(None, span(0.0, 10.0, open_lo=True))
    # m/s
    cruise_speed: tuple[float, float] | None = param(None, span(0.0, 60.0, "m/s", open_lo=True))
    noise_std: tuple[float, float] | None = param(None, span(0.0, 100.0, "m/s^2"))

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class Scenario:
    """A complete, validated episode description."""

    name: str = field(metadata={"spec": Spec("name")})
    description: str = param("", Spec("str", max_len=2000))
    flock: FlockParams = field(default_factory=FlockParams)
    pursuer: PursuerParams = field(default_factory=PursuerParams)
    site: SiteParams = field(default_factory=SiteParams)
    episode: EpisodeParams = field(default_factory=EpisodeParams)
    reward: RewardWeights = field(default_factory=RewardWeights)
    randomise: Randomisation = field(default_factory=Randomisation)
    source_file: str | None = None  # where it was read from, for messages and provenance

    def __post_init__(self) -> None:
        _check(self)

    @property
    def max_birds(self) -> int:
        """Largest flock a reset can produce: the size of the padded bird arrays."""
        return self.flock.count if self.randomise.count is None else self.randomise.count[1]


@dataclass
class WorldState:
    """The batched state of B independent worlds with room for N birds and P drones each.

    Birds beyond ``count[b]`` in world b are padding and are ignored everywhere. Every world flies
    the same number of drones, so the drone axis has no padding.
    """

    bird_pos: np.ndarray  # (B, N, 2) m
    bird_vel: np.ndarray  # (B, N, 2) m/s
    pursuer_pos: np.ndarray  # (B, P, 2) m, drone positions
    pursuer_vel: np.ndarray  # (B, P, 2) m/s, drone velocities
    count: np.ndarray  # (B,) int64, active birds per world

    @classmethod
    def zeros(cls, worlds: int, birds: int, drones: int = 1) -> WorldState:
        """An all-zero state with room for ``birds`` birds and ``drones`` drones per world."""
        return cls(
            bird_pos=np.zeros((worlds, birds, 2)),
            bird_vel=np.zeros((worlds, birds, 2)),
            pursuer_pos=np.zeros((worlds, drones, 2)),
            pursuer_vel=np.zeros((worlds, drones, 2)),
            count=np.zeros(worlds, dtype=np.int64),
        )

    @property
    def drones(self) -> int:
        """P, the number of drones in every world."""
        return int(self.pursuer_pos.shape[1])

    def copy(self) -> WorldState:
        """A deep copy: every array copied."""
        return WorldState(**{f.name: getattr(self, f.name).copy() for f in fields(self)})

"""Frozen parameter records and the batched world state.

Every length is in metres, every speed in m/s, every acceleration in m/s^2, every time in seconds,
every angle in degrees in configs (radians inside the code). Each parameter record checks its
fields and their relations when it is built (the rules are in ``flockward.sim.limits``), raising a
one-line ``ValueError``; derived values are properties computed in one place.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields

import numpy as np

FORMATIONS = ("disc", "hex", "line", "cluster")


def _check(record: object) -> None:
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

    name: str = "gulls"
    source: str = "Alerstam et al. 2007, PLoS Biol 5:e197 (gull airspeeds 11-14 m/s)"
    count: int = 50  # birds
    formation: str = "disc"  # one of FORMATIONS
    spacing: float = 3.0  # m, nearest-neighbour distance in the initial formation
    heading_deg: float | None = None  # deg, counter-clockwise from +x; None = toward destination
    speed: float = 12.5  # m/s, initial airspeed
    cruise_speed: float = 12.5  # m/s, airspeed the bird steers toward its destination at
    min_speed: float = 7.0  # m/s, birds in flapping flight cannot hover
    max_speed: float = 20.0  # m/s, burst airspeed when fleeing
    max_accel: float = 10.0  # m/s^2, steering acceleration cap
    separation_radius: float = 2.0  # m
    separation_gain: float = 12.0  # m^2/s^2 (inverse-distance repulsion, Reynolds 1987)
    alignment_radius: float = 15.0  # m
    alignment_gain: float = 2.0  # 1/s (Cucker-Smale coupling K)
    alignment_sigma: float = 5.0  # m, Cucker-Smale length scale
    alignment_beta: float = 0.25  # Cucker-Smale exponent (beta < 1/2: unconditional flocking)
    cohesion_radius: float = 25.0  # m
    cohesion_gain: float = 0.4  # 1/s^2
    destination_gain: float = 0.25  # 1/s, pull toward cruise velocity aimed at the destination
    alarm_radius: float = 80.0  # m, inside it a bird flees the pursuer radially
    flee_gain: float = 20.0  # m/s^2 at zero distance, falling linearly to 0 at alarm_radius
    dodge_radius: float = 15.0  # m, inside it a bird also dodges sideways
    dodge_gain: float = 10.0  # m/s^2 at zero distance, falling linearly to 0 at dodge_radius
    noise_std: float = 0.0  # m/s^2, standard deviation of Gaussian acceleration noise
    link_radius: float | None = None  # m, proximity-graph radius for fragmentation; None = cohesion

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

    start: tuple[float, float] = (0.0, 0.0)  # m
    max_speed: float = 20.0  # m/s (small multirotor cruise 10-20 m/s, common practice)
    max_accel: float = 8.0  # m/s^2
    safety_radius: float = 5.0  # m, closer than this to any bird counts as a collision

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

    protected: Zone = field(default_factory=lambda: Circle((0.0, 0.0), 150.0))
    goal: Zone = field(default_factory=lambda: Circle((0.0, 500.0), 150.0))
    destination: tuple[float, float] = (800.0, 0.0)  # m, the flock's roost or feeding ground
    flock_start: tuple[float, float] = (-600.0, 0.0)  # m, centre of the initial formation

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class EpisodeParams:
    """Time step and the rules that end an episode."""

    dt: float = 0.1  # s
    max_steps: int = 1500  # steps (150 s at the default dt)
    success_fraction: float = 0.9  # share of birds inside the goal region that counts as success
    max_breaching_birds: int = 0  # distinct birds allowed inside the protected zone before failure

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class RewardWeights:
    """Weights of the named reward terms (see flockward.task.reward)."""

    progress: float = 1.0  # per unit of potential (potential = -distance to goal / length scale)
    approach: float = 1.0  # per unit of potential (-drone distance beyond alarm radius / scale)
    fragmentation: float = 0.05  # per step, times (1 - largest-cluster fraction)
    collision: float = 0.5  # per step with the pursuer inside the safety radius of a bird
    breach: float = 5.0  # per bird entering the protected zone for the first time
    time: float = 0.002  # per step
    success: float = 10.0  # once, on success
    discount: float = 0.99  # gamma of the potential-based shaping term

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class Randomisation:
    """Ranges sampled afresh at every reset; None leaves the value fixed."""

    count: tuple[int, int] | None = None  # birds, inclusive
    heading_deg: tuple[float, float] | None = None  # deg, added to the configured heading
    offset_x: tuple[float, float] | None = None  # m, added to the flock start
    offset_y: tuple[float, float] | None = None  # m
    gain_scale: tuple[float, float] | None = None  # factor on every SCALABLE_GAINS entry
    cruise_speed: tuple[float, float] | None = None  # m/s
    noise_std: tuple[float, float] | None = None  # m/s^2

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class Scenario:
    """A complete, validated episode description."""

    name: str
    description: str = ""
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
        return self.pursuer_pos.shape[1]

    def copy(self) -> WorldState:
        return WorldState(**{f.name: getattr(self, f.name).copy() for f in fields(self)})

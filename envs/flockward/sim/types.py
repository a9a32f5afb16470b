"""Frozen parameter records and the batched world state.

Every length is in metres, every speed in m/s, every acceleration in m/s^2, every time in seconds,
every angle in degrees in configs (radians inside the code). Each field declares its range and
unit beside its default (``param``, ``flockward.sim.spec``), so a new parameter is one line here.
Each record checks its fields and their relations when it is built (``flockward.sim.limits``),
raising a one-line ``ValueError``; derived values are properties computed in one place.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields
from typing import TYPE_CHECKING

import numpy as np

from flockward.sim.spec import (
    COORD,
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
ALIGNMENT_MODELS = ("motsch-tadmor", "cucker-smale")
DODGE_FRAMES = ("relative", "ground")
ESCAPE_THRUSTS = ("free", "power-limited")
NOISE_MODELS = ("heading", "vector")
SENSOR_POSITIONS = ("onboard", "ground")
# Dryden turbulence presets: the wind speed at 20 ft, W20, of MIL-F-8785C's low-altitude model
# (light 15 kt, moderate 30 kt, severe 45 kt; MathWorks Aerospace Blockset Dryden help).
TURBULENCE_W20_KT = {"none": 0.0, "light": 15.0, "moderate": 30.0, "severe": 45.0}
TURBULENCE_LEVELS = tuple(TURBULENCE_W20_KT)
# Most topological neighbours a bird can follow (the kernel keeps their distances sorted per bird).
MAX_NEIGHBOURS = 16
# Most drones a scenario may list in [[drones]] (each one adds a pass over the birds per substep).
MAX_DRONES = 8
# Largest heading noise: beyond about 3 rad/s^0.5 a flock's polarisation sits at its noise floor.
MAX_HEADING_NOISE = 3.0


def _check(record: DataclassInstance) -> None:
    """Validate a parameter record on construction (rules and messages in flockward.sim.limits)."""
    # Imported here: limits reads geometry, which reads the zone records of this module.
    from flockward.sim.limits import check_record

    check_record(record)


def _check_discount(scenario: Scenario) -> None:
    """An explicit reward.discount must equal the one derived from gamma and the interval."""
    given = scenario.reward.discount
    derived = scenario.shaping_discount
    if given is not None and not math.isclose(given, derived, rel_tol=1e-9, abs_tol=1e-12):
        from flockward.sim.limits import ParameterError

        keys = ("reward.discount", "reward.gamma", "episode.decision_steps")
        values = (given, scenario.reward.gamma, scenario.episode.decision_steps)
        rule = (
            f"must equal reward.gamma ** (1 / episode.decision_steps) = {derived!r} "
            "(or be left out to derive it)"
        )
        raise ParameterError("Scenario", keys, values, lambda _key: rule)


def _check_drones(scenario: Scenario) -> None:
    """A drone list holds 1 to MAX_DRONES drone records."""
    drones = scenario.drones
    if len(drones) > MAX_DRONES or not all(isinstance(d, PursuerParams) for d in drones):
        from flockward.sim.limits import ParameterError

        rule = f"must list 1 to {MAX_DRONES} drone records (or none: one drone, the pursuer)"
        raise ParameterError("Scenario", ("drones",), (len(drones),), lambda _key: rule)


@dataclass(frozen=True)
class FlockParams:
    """One species' behaviour plus the flock's size and initial formation.

    The defaults describe a flock of medium gulls: cruise airspeed 12.5 m/s, inside the 11-14 m/s
    range of gull airspeeds measured by tracking radar (Alerstam et al. 2007, PLoS Biology 5:e197).
    Burst speed, acceleration budget, radii and gains are modelling choices (configs/flocks/).
    What each term does: flockward.sim.dynamics.
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
    # airspeed the bird regulates toward when unafraid
    cruise_speed: float = param(12.5, positive(60.0, "m/s"))
    # airspeed a fully frightened bird regulates toward (escape flight)
    burst_speed: float = param(18.0, positive(60.0, "m/s"))
    # safety net only: airspeeds are clamped to [min_speed, max_speed], counted (World.clamps)
    min_speed: float = param(3.75, number(0.0, 60.0, "m/s"))
    max_speed: float = param(23.4, positive(80.0, "m/s"))
    # steering budget shared by every steering request; the range reaches far beyond any bird so
    # that checks can take the budget out of play and compare with the published laws
    max_accel: float = param(12.0, positive(10_000.0, "m/s^2"))
    # speed regulation k_v (v_pref - s), outside the steering budget
    speed_gain: float = param(0.8, number(0.0, 100.0, "1/s"))
    separation_radius: float = param(2.0, positive(100.0, "m"))
    # k_sep ((r_sep/d) - 1)^2 per neighbour, smooth to zero at the radius
    separation_gain: float = param(8.0, number(0.0, 1000.0, "m/s^2"))
    alignment_model: str = param("motsch-tadmor", Spec("choice", choices=ALIGNMENT_MODELS))
    # up to 100 km, so a Cucker-Smale flock may align globally
    alignment_radius: float = param(15.0, positive(100_000.0, "m"))
    # Motsch-Tadmor rate, or Cucker-Smale coupling K
    alignment_gain: float = param(2.0, number(0.0, 100.0, "1/s"))
    alignment_sigma: float = param(5.0, positive(500.0, "m"))  # Cucker-Smale length scale
    # Cucker-Smale exponent (beta < 1/2: unconditional flocking)
    alignment_beta: float = param(0.25, number(0.0, 5.0))
    cohesion_radius: float = param(25.0, positive(500.0, "m"))
    # pull toward the locally weighted centroid of neighbours
    cohesion_gain: float = param(0.3, number(0.0, 100.0, "1/s^2"))
    # 0: metric neighbours (the radii above); k >= 1: topological, each bird's alignment and
    # cohesion reach its k nearest flockmates (Ballerini et al. 2008 measured about 6-7)
    neighbours: int = param(0, Spec("int", 0, MAX_NEIGHBOURS, "birds"))
    # topological reach c: a bird's radius is c times its k-th neighbour distance, capped at
    # cohesion_radius; the k nearest weigh 1, those out to the radius fade to 0
    topological_reach: float = param(1.5, number(1.0, 10.0, open_lo=True))
    # turning rate toward the roost per unit of cruise speed (informed birds only)
    destination_gain: float = param(0.3, number(0.0, 100.0, "1/s"))
    # share of the flock that knows the roost (spread evenly over the birds)
    informed_fraction: float = param(0.3, number(0.0, 1.0))
    # inside it a bird flees the nearest drone
    alarm_radius: float = param(80.0, positive(1000.0, "m"))
    # flight acceleration inside dodge_radius, falling smoothly to 0 at alarm_radius
    flee_accel: float = param(4.0, number(0.0, 1000.0, "m/s^2"))
    # inside it a bird also dodges sideways off the drone's line of approach
    dodge_radius: float = param(40.0, positive(1000.0, "m"))
    # dodge acceleration close to the drone, falling smoothly to 0 at dodge_radius
    dodge_accel: float = param(12.0, number(0.0, 1000.0, "m/s^2"))
    # line of approach: the drone's velocity relative to the bird, or over the ground
    dodge_frame: str = param("relative", Spec("choice", choices=DODGE_FRAMES))
    # power-limited: the forward push of flight and dodge fades from full at cruise to none at
    # burst speed (no power margin at top speed); free: fright may speed a bird up at any
    # airspeed, until the max_speed safety net stops it (the behaviour before this option)
    escape_thrust: str = param("power-limited", Spec("choice", choices=ESCAPE_THRUSTS))
    # heading: rotational diffusion (rad/s^0.5); vector: white-noise acceleration (m/s^1.5)
    noise_model: str = param("heading", Spec("choice", choices=NOISE_MODELS))
    noise_std: float = param(0.05, number(0.0, 40.0, "rad/s^0.5 or m/s^1.5"))
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
        return np.array([_kernel_number(self, name) for name in KERNEL_FIELDS], dtype=np.float64)


# Order of the per-world parameter rows handed to the compiled step kernel.
KERNEL_FIELDS = (
    "cruise_speed",
    "burst_speed",
    "min_speed",
    "max_speed",
    "max_accel",
    "speed_gain",
    "separation_radius",
    "separation_gain",
    "alignment_model",
    "alignment_radius",
    "alignment_gain",
    "alignment_sigma",
    "alignment_beta",
    "cohesion_radius",
    "cohesion_gain",
    "destination_gain",
    "informed_fraction",
    "alarm_radius",
    "flee_accel",
    "dodge_radius",
    "dodge_accel",
    "dodge_frame",
    "escape_thrust",
    "noise_model",
    "noise_std",
    "neighbours",
    "topological_reach",
)
# Choice fields reach the kernel as their index in the list of choices.
_KERNEL_CHOICES = {
    "alignment_model": ALIGNMENT_MODELS,
    "dodge_frame": DODGE_FRAMES,
    "escape_thrust": ESCAPE_THRUSTS,
    "noise_model": NOISE_MODELS,
}


def _kernel_number(flock: FlockParams, name: str) -> float:
    value = getattr(flock, name)
    choices = _KERNEL_CHOICES.get(name)
    return float(choices.index(value)) if choices else float(value)


K = {name: index for index, name in enumerate(KERNEL_FIELDS)}  # column index by field name

# Gains a randomisation range may scale (multiplicatively, per reset).
SCALABLE_GAINS = (
    "separation_gain",
    "alignment_gain",
    "cohesion_gain",
    "destination_gain",
    "flee_accel",
    "dodge_accel",
)


@dataclass(frozen=True)
class PursuerParams:
    """The drone: a double integrator commanded by a normalised acceleration."""

    start: tuple[float, float] = param((0.0, 0.0), POINT)
    # A small multirotor (configs/pursuers/multirotor.toml; max 20-25 m/s, common practice).
    # The bound 44.7 m/s = 87 kn is the groundspeed limit for small drones in US 14 CFR 107.51.
    # The kernel limits airspeed: in wind the ground speed is airspeed plus wind.
    max_speed: float = param(22.0, positive(44.7, "m/s"))
    max_accel: float = param(10.0, positive(50.0, "m/s^2"))
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
# Most protected zones a site may have.
MAX_ZONES = 8


@dataclass(frozen=True)
class SiteParams:
    """Where things are: the airspace to protect, where to herd to, where the flock wants to go."""

    # airspace birds must stay out of: one zone or a list of zones (a bird in any is a breach)
    protected: Zone | tuple[Zone, ...] = param_factory(
        lambda: Circle((0.0, 0.0), 150.0), Spec("zones", 1, MAX_ZONES, "zones")
    )
    goal: Zone = param_factory(lambda: Circle((0.0, 500.0), 150.0), Spec("zone"))
    # the flock's roost or feeding ground
    destination: tuple[float, float] = param((800.0, 0.0), POINT)
    # centre of the initial formation (of the first group when the flock starts as two)
    flock_start: tuple[float, float] = param((-600.0, 0.0), POINT)
    # moves the goal to this bearing seen from flock_start, counter-clockwise from the flock's
    # heading before reset jitter (flock.heading_deg, or toward destination), at the configured
    # goal's distance from flock_start; boundary-arc pushes from the side opposite the goal, so
    # this sets the side it pushes from: 0 behind, 90 abeam, 180 ahead. None: goal as configured
    goal_bearing_deg: float | None = param(None, number(-180.0, 180.0, "deg", opt=True))
    # centre of a second group's initial formation; None: the flock starts as one group
    second_start: tuple[float, float] | None = param(
        None, Spec("point", -COORD, COORD, "m", optional=True)
    )
    # share of the birds that start in the second group: 0 without second_start, else in (0, 1)
    second_share: float = param(0.0, number(0.0, 1.0))

    def __post_init__(self) -> None:
        # A list of zones is held as a tuple, and a list of one zone as that zone, so one zone
        # written either way is the same site (and the same scenario hash).
        zones = self.protected
        if isinstance(zones, list | tuple):
            object.__setattr__(self, "protected", zones[0] if len(zones) == 1 else tuple(zones))
        _check(self)

    @property
    def protected_zones(self) -> tuple[Zone, ...]:
        """Every protected zone, in the order given (one zone: a tuple of one)."""
        zones = self.protected
        return zones if isinstance(zones, tuple) else (zones,)

    def group_counts(self, count: int) -> tuple[int, int]:
        """Birds in the first and second group for a flock of ``count``: the second gets
        round(second_share * count), at least one and never all (none without a second start)."""
        if self.second_start is None or count < 2:
            return count, 0
        second = min(max(round(self.second_share * count), 1), count - 1)
        return count - second, second


@dataclass(frozen=True)
class EpisodeParams:
    """Time step and the rules that end an episode."""

    dt: float = param(0.1, positive(1.0, "s"))  # control step
    # physics substeps per control step (4 at dt 0.1 s: a 0.025 s step, chosen by a convergence
    # study: flock statistics agree within 5 % with half of it)
    substeps: int = param(4, Spec("int", 1, 100, "steps"))
    # (150 s at the default dt)
    max_steps: int = param(1500, Spec("int", 1, 1_000_000, "steps"))
    # share of birds inside the goal region that counts as success
    success_fraction: float = param(0.9, positive(1.0))
    # distinct birds allowed inside the protected zone before failure
    max_breaching_birds: int = param(0, Spec("int", 0, 5000, "birds"))
    # control steps one action is held (a decision every decision_steps * dt s); 4 (0.4 s) chosen
    # by measurement for learned policies, see README "Decision interval"
    decision_steps: int = param(4, Spec("int", 1, 1000, "steps"))

    def __post_init__(self) -> None:
        _check(self)

    @property
    def decision_period(self) -> float:
        """s, the time one action is held: decision_steps control steps of dt."""
        return self.decision_steps * self.dt


@dataclass(frozen=True)
class RewardWeights:
    """Weights of the named reward terms (see flockward.task.reward), and the discounts."""

    # per unit of potential (potential = -centroid distance to goal / site scale)
    progress: float = param(5.0, number(0.0, 1000.0))
    # per unit of potential (-drone distance beyond alarm radius / site scale); off by default:
    # potential-based, so it adds the same to every policy's return and cannot guide
    approach: float = param(0.0, number(0.0, 1000.0))
    # per control step, times (drone distance beyond the alarm radius / site scale): plain cost
    proximity: float = param(0.02, number(0.0, 1000.0))
    # per control step, times (1 - largest-cluster fraction)
    fragmentation: float = param(0.05, number(0.0, 1000.0))
    # per control step with the pursuer inside the safety radius of a bird
    collision: float = param(0.5, number(0.0, 1000.0))
    # once per episode, on the step it fails by breach (however many birds cross on that step)
    breach: float = param(10.0, number(0.0, 1000.0))
    time: float = param(0.002, number(0.0, 1000.0))  # per control step
    success: float = param(10.0, number(0.0, 1000.0))  # once, on success
    # the agent's discount per decision; shaping discounts gamma^(1/decision_steps) per control step
    gamma: float = param(0.99, number(0.0, 1.0))
    # shaping discount per control step; None: derived from gamma (must match it if given)
    discount: float | None = param(None, number(0.0, 1.0, opt=True))

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
    noise_std: tuple[float, float] | None = param(None, span(0.0, 40.0, "rad/s^0.5 or m/s^1.5"))

    def __post_init__(self) -> None:
        _check(self)


@dataclass(frozen=True)
class WindParams:
    """The air mass the site sits in: a steady wind plus Dryden turbulence (flockward.sim.wind).

    The wind is one vector per world per physics substep, the same over the whole site. The
    direction is the one the wind blows FROM (aviation practice), as an angle in the site frame
    counter-clockwise from +x, like the flock's ``heading_deg``: ``from_deg`` = 180 blows toward
    +x. The default is still air.
    """

    speed: float = param(0.0, number(0.0, 40.0, "m/s"))  # steady (mean) wind speed
    from_deg: float = param(0.0, number(-360.0, 360.0, "deg"))  # where the wind blows from
    # Dryden gusts: the presets set W20 to 0, 15, 30, 45 kt (MIL-F-8785C low altitude)
    turbulence: str = param("none", Spec("choice", choices=TURBULENCE_LEVELS))
    # flight height above ground: sets the gusts' length scale and intensity
    altitude: float = param(50.0, number(3.0, 300.0, "m"))

    def __post_init__(self) -> None:
        _check(self)

    @property
    def velocity(self) -> tuple[float, float]:
        """The steady wind vector (m/s) in the site frame: toward from_deg + 180."""
        a = math.radians(self.from_deg)
        return (-self.speed * math.cos(a), -self.speed * math.sin(a))

    @property
    def calm(self) -> bool:
        """Still air: no steady wind and no turbulence."""
        return self.speed == 0.0 and self.turbulence == "none"


def _place_goal(scenario: Scenario) -> None:
    """Move the goal to site.goal_bearing_deg, when that is set (see the field's comment).

    Idempotent: a goal already within a micrometre of its place stays as it is, so a scenario
    rebuilt from a placed one keeps bit-identical zones.
    """
    site = scenario.site
    if site.goal_bearing_deg is None or not isinstance(site.goal_bearing_deg, int | float):
        return  # a value of the wrong type is refused by the checks that follow
    # Imported here: geometry reads the zone records of this module.
    from flockward.sim.geometry import zone_at_bearing
    from flockward.sim.limits import derived

    bearing = scenario.nominal_heading + math.radians(site.goal_bearing_deg)
    goal = zone_at_bearing(site.goal, site.flock_start, bearing)
    if goal != site.goal:
        object.__setattr__(scenario, "site", derived(site, goal=goal))


@dataclass(frozen=True)
class SensorParams:
    """What the drone's side can sense of the birds (flockward.sim.sensing).

    Observations (and so learned policies) read the sensed birds; controllers of information
    level "state" keep the truth. A sensor measures each tracked bird's range and bearing from
    its own position with Gaussian errors, loses and re-acquires tracks at random, and refreshes
    its picture every ``update_period``; between refreshes the last picture is held. The default
    is the perfect sensor: every bird, exactly, every control step (the behaviour before sensors
    existed). Shipped presets: configs/sensors/ (``[sensor] file = "ground-radar"``).
    """

    # the label leaderboards show beside an observation- or sensed-level entry
    name: str = param("perfect", Spec("name"))
    # onboard: on drone 0 (at ground_position in a world without drones); ground: fixed
    position: str = param("onboard", Spec("choice", choices=SENSOR_POSITIONS))
    # where a ground sensor stands (unused onboard)
    ground_position: tuple[float, float] = param((0.0, 0.0), POINT)
    # birds farther than this (true distance) are never sensed; left out: unlimited
    detection_range: float | None = param(None, positive(100_000.0, "m", opt=True))
    # 1-sigma error of each measured range, Gaussian
    range_noise: float = param(0.0, number(0.0, 1000.0, "m"))
    # 1-sigma error of each measured bearing, Gaussian
    bearing_noise_deg: float = param(0.0, number(0.0, 45.0, "deg"))
    # chance that a tracked bird's track is lost at one sensor update
    loss_probability: float = param(0.0, number(0.0, 1.0))
    # chance that an untracked bird within detection_range is (re)acquired at one update
    reacquire_probability: float = param(1.0, number(0.0, 1.0))
    # time between sensor updates, rounded to whole control steps (at least one); 0 = every step
    update_period: float = param(0.0, number(0.0, 600.0, "s"))

    def __post_init__(self) -> None:
        _check(self)

    @property
    def noisy(self) -> bool:
        """Whether sensed positions carry measurement noise."""
        return self.range_noise > 0.0 or self.bearing_noise_deg > 0.0

    @property
    def stochastic(self) -> bool:
        """Whether the sensor draws random numbers: noise, track loss, uncertain acquisition."""
        return self.noisy or self.loss_probability > 0.0 or self.reacquire_probability < 1.0

    @property
    def perfect(self) -> bool:
        """Every bird, exactly, every control step: the truth itself."""
        return not self.stochastic and self.detection_range is None and self.update_period == 0.0

    def update_steps(self, dt: float) -> int:
        """Control steps of ``dt`` seconds between updates: update_period rounded, at least 1."""
        return max(1, round(self.update_period / dt))


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
    wind: WindParams = field(default_factory=WindParams)
    sensor: SensorParams = field(default_factory=SensorParams)
    # Each drone's start and limits ([[drones]] in a file); empty: one drone, ``pursuer`` itself.
    drones: tuple[PursuerParams, ...] = ()
    source_file: str | None = None  # where it was read from, for messages and provenance

    def __post_init__(self) -> None:
        _place_goal(self)
        _check(self)
        _check_discount(self)
        _check_drones(self)

    @property
    def fleet(self) -> tuple[PursuerParams, ...]:
        """Every drone's parameters, in index order: ``drones``, or ``(pursuer,)`` if empty."""
        return self.drones if self.drones else (self.pursuer,)

    @property
    def drone_count(self) -> int:
        """P, the drones the scenario flies (1 unless it lists [[drones]])."""
        return len(self.fleet)

    @property
    def nominal_heading(self) -> float:
        """rad, counter-clockwise from +x: the flock's heading before any reset jitter, its
        heading_deg or else the bearing from site.flock_start to site.destination."""
        if self.flock.heading_deg is not None:
            return math.radians(self.flock.heading_deg)
        (x0, y0), (x1, y1) = self.site.flock_start, self.site.destination
        return math.atan2(y1 - y0, x1 - x0)

    @property
    def shaping_discount(self) -> float:
        """The shaping discount per control step: reward.gamma ** (1 / episode.decision_steps),
        so that over one held decision the shaping discounts by the agent's gamma."""
        return float(self.reward.gamma ** (1.0 / self.episode.decision_steps))

    @property
    def max_birds(self) -> int:
        """Largest flock a reset can produce: the size of the padded bird arrays."""
        return self.flock.count if self.randomise.count is None else self.randomise.count[1]


@dataclass
class WorldState:
    """The batched state of B independent worlds with room for N birds and P drones each.

    Birds beyond ``count[b]`` in world b are padding and are ignored everywhere. Every world flies
    the same number of drones, so the drone axis has no padding. Positions are over the ground,
    velocities through the air; in still air (the default) the two frames coincide. A world's
    ground velocity is the velocity plus its wind (``flockward.sim.world.World.wind_now``).
    """

    bird_pos: np.ndarray  # (B, N, 2) m, over the ground
    bird_vel: np.ndarray  # (B, N, 2) m/s, through the air (airspeed vector)
    pursuer_pos: np.ndarray  # (B, P, 2) m, drone positions over the ground
    pursuer_vel: np.ndarray  # (B, P, 2) m/s, drone velocities through the air
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

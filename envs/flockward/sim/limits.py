"""What the parameter records allow: every field's type, range and unit, and the relations
between fields that a per-field range cannot express.

The records (``flockward.sim.types``) run :func:`check_record` when they are built, and the config
loader (``flockward.config``) reads the same table to check files, so a record built in Python
and one read from TOML obey one set of rules. A broken rule raises :class:`ParameterError`, a
one-line ``ValueError`` naming the record, the field, the value and what is allowed.
"""

from __future__ import annotations

import copy
import json
import math
from collections.abc import Callable, Mapping
from dataclasses import fields
from typing import TYPE_CHECKING, TypeVar

import numpy as np

from flockward.sim import geometry
from flockward.sim.spec import (
    MAX_VERTICES,
    NAME_RE,
    POINT,
    RADIUS,
    Spec,
    number_text,
    spec_of,
)
from flockward.sim.types import (
    MAX_HEADING_NOISE,
    Circle,
    EpisodeParams,
    FlockParams,
    Polygon,
    PursuerParams,
    Randomisation,
    RewardWeights,
    Scenario,
    SensorParams,
    SiteParams,
    WindParams,
    Zone,
)

if TYPE_CHECKING:
    from _typeshed import DataclassInstance

__all__ = [
    "LIMITS",
    "MAX_VERTICES",
    "NAME_RE",
    "RECORD_SECTIONS",
    "ParameterError",
    "Spec",
    "check_record",
    "derived",
    "number_text",
    "polygon_problem",
    "value_text",
    "zone_ok",
    "zone_table",
    "zone_text",
    "zones_text",
]

# --------------------------------------------------------------------------------------------
# Text of numbers and values, shared by record errors and config errors.


def zone_table(zone: Zone) -> dict[str, object]:
    """A zone in the shape a config writes it."""
    if isinstance(zone, Circle):
        return {"circle": {"center": list(zone.center), "radius": zone.radius}}
    return {"polygon": [list(v) for v in zone.vertices]}


def value_text(value: object) -> str:
    """A value as TOML-like text on one line (zones as the table a config would write)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, float | int | np.integer | np.floating):
        return number_text(float(value) if isinstance(value, np.floating) else value)
    if isinstance(value, Circle | Polygon):
        return value_text(zone_table(value))
    if isinstance(value, Mapping):
        inner = ", ".join(f"{k} = {value_text(v)}" for k, v in value.items())
        return "{ " + inner + " }"
    if isinstance(value, list | tuple):
        return "[" + ", ".join(value_text(v) for v in value) + "]"
    if value is None:
        return "(none)"
    return repr(value).replace("\n", " ")


def point_text(p: tuple[float, float]) -> str:
    return f"({number_text(p[0])}, {number_text(p[1])})"


def zones_text(zones: Zone | tuple[Zone, ...]) -> str:
    """One zone in words, or several numbered: '1: circle ...; 2: polygon ...'."""
    if isinstance(zones, tuple):
        return "; ".join(f"{i}: {zone_text(z)}" for i, z in enumerate(zones, start=1))
    return zone_text(zones)


def zone_text(zone: Zone) -> str:
    """A zone in words, for people: centre and radius, or vertex count, area and extent."""
    if isinstance(zone, Circle):
        return f"circle centre {point_text(zone.center)} radius {number_text(zone.radius)} m"
    v = np.asarray(zone.vertices, dtype=np.float64)
    area = abs(geometry.polygon_area(v))
    return (
        f"polygon of {len(v)} vertices, {area:.0f} m^2, spanning "
        f"x {v[:, 0].min():.0f}..{v[:, 0].max():.0f} m, "
        f"y {v[:, 1].min():.0f}..{v[:, 1].max():.0f} m"
    )


# --------------------------------------------------------------------------------------------
# Per-field specs, read off the records' field declarations.


# The record each section builds.
RECORD_SECTIONS: dict[type, str] = {
    Scenario: "",
    FlockParams: "flock",
    PursuerParams: "pursuer",
    SiteParams: "site",
    EpisodeParams: "episode",
    RewardWeights: "reward",
    Randomisation: "randomise",
    WindParams: "wind",
    SensorParams: "sensor",
}


# One table per record, keyed by the section name a scenario file uses ("" = top-level keys).
LIMITS: dict[str, dict[str, Spec]] = {
    section: {f.name: spec for f in fields(record) if (spec := spec_of(f)) is not None}
    for record, section in RECORD_SECTIONS.items()
}


def polygon_problem(vertices: tuple[tuple[float, float], ...]) -> str | None:
    """What is wrong with a polygon zone's vertex list, or None; coordinates checked apart."""
    if not 3 <= len(vertices) <= MAX_VERTICES:
        return f"must list 3 to {MAX_VERTICES} vertices [x, y]"
    v = np.asarray(vertices, dtype=np.float64)
    if geometry.vertices_collinear(v):
        return "must enclose a non-zero area (the vertices are collinear)"
    if not geometry.polygon_is_simple(v):
        return "must be a simple polygon: no repeated vertices, no crossing edges"
    return None


def zone_ok(zone: object) -> bool:
    """Whether a zone record has valid coordinates and, for a polygon, a valid outline."""
    if isinstance(zone, Circle):
        return POINT.accepts(zone.center) and RADIUS.number_ok(zone.radius, integer=False)
    if isinstance(zone, Polygon):
        vertices = zone.vertices
        return (
            isinstance(vertices, tuple | list)
            and all(POINT.accepts(v) for v in vertices)
            and polygon_problem(tuple(vertices)) is None
        )
    return False


# --------------------------------------------------------------------------------------------
# Errors and relations.


class ParameterError(ValueError):
    """A record field outside its range, or fields breaking a relation; the message is one line:
    ``Record.field = value: what is allowed``.

    For a broken relation, ``keys`` lists every field involved (the first is the one named) and
    :meth:`blaming` restates the rule for any of them, so a config loader can name the key the
    user set last.
    """

    def __init__(
        self,
        record: str,
        keys: tuple[str, ...],
        values: tuple[object, ...],
        rule: Callable[[str], str],
    ) -> None:
        self.record = record
        self.keys = keys
        self.values = dict(zip(keys, values, strict=True))
        self.rule = rule
        self.key = keys[0]
        self.value = values[0]
        self.allowed = rule(keys[0])
        super().__init__(f"{record}.{self.key} = {value_text(self.value)}: {self.allowed}")

    def blaming(self, key: str) -> tuple[object, str]:
        """(value, rule) when the relation is reported against ``key``, one of ``keys``."""
        return self.values[key], self.rule(key)


def _broken(record: object, keys: tuple[str, ...], rule: str | Callable[[str], str]) -> None:
    values = tuple(_get(record, key) for key in keys)
    say = rule if callable(rule) else (lambda _key: rule)
    raise ParameterError(type(record).__name__, keys, values, say)


def _get(record: object, dotted: str) -> object:
    for part in dotted.split("."):
        record = getattr(record, part)
    return record


def _check_flock(flock: FlockParams) -> None:
    """Relations between flock fields."""
    lo, hi = flock.min_speed, flock.max_speed
    n = number_text
    if hi < lo:
        _broken(
            flock,
            ("max_speed", "min_speed"),
            f"must keep min_speed <= max_speed (now {n(lo)} > {n(hi)} m/s)",
        )
    for key in ("cruise_speed", "speed"):
        value = getattr(flock, key)
        if not lo <= value <= hi:
            _broken(
                flock,
                (key, "max_speed", "min_speed"),
                f"must keep min_speed <= {key} <= max_speed (now {n(lo)}, {n(value)}, {n(hi)} m/s)",
            )
    if flock.dodge_radius >= flock.alarm_radius:
        _broken(
            flock,
            ("dodge_radius", "alarm_radius"),
            "must keep dodge_radius < alarm_radius, birds dodge only once alarmed "
            f"(now {n(flock.dodge_radius)} and {n(flock.alarm_radius)} m)",
        )
    if not flock.cruise_speed <= flock.burst_speed <= hi:
        _broken(
            flock,
            ("burst_speed", "cruise_speed", "max_speed"),
            "must keep cruise_speed <= burst_speed <= max_speed (now "
            f"{n(flock.cruise_speed)}, {n(flock.burst_speed)}, {n(hi)} m/s)",
        )
    if flock.flee_accel >= flock.max_accel:
        _broken(
            flock,
            ("flee_accel", "max_accel"),
            "must keep flee_accel < max_accel, so flight saturates below the steering budget "
            f"and leaves room for the dodge and the flock (now {n(flock.flee_accel)} and "
            f"{n(flock.max_accel)} m/s^2)",
        )
    if flock.noise_model == "heading" and flock.noise_std > MAX_HEADING_NOISE:
        _broken(
            flock,
            ("noise_std", "noise_model"),
            f"must keep noise_std <= {MAX_HEADING_NOISE:g} rad/s^0.5 for heading noise "
            f"(now {n(flock.noise_std)})",
        )


def _site_text(site: SiteParams, key: str) -> str:
    value = getattr(site, key)
    if value is None:
        return "not given"
    if isinstance(value, float | int):
        return number_text(value)
    if isinstance(value, Circle | Polygon | tuple) and key in ("protected", "goal"):
        return zones_text(value)
    return point_text(value)


def _in_protected(site: SiteParams, point: tuple[float, float]) -> bool:
    """Whether a point lies strictly inside any protected zone."""
    return any(geometry.zone_contains(z, point) for z in site.protected_zones)


def _second_group_broken(site: SiteParams) -> bool:
    """A second start without a share strictly between 0 and 1, or a share without a start."""
    if site.second_start is None:
        return site.second_share != 0.0
    return not 0.0 < site.second_share < 1.0


def _second_start_in(site: SiteParams, test: Callable[[tuple[float, float]], bool]) -> bool:
    return site.second_start is not None and test(site.second_start)


def _check_site(site: SiteParams) -> None:
    """Relations between the zones and points of a site."""
    # (key, other key, relation broken, rule when key is named, rule when other is named)
    relations: tuple[tuple[str, str, Callable[[], bool], str, str], ...] = (
        (
            "goal",
            "protected",
            lambda: any(geometry.zones_overlap(site.goal, z) for z in site.protected_zones),
            "must lie clear of",
            "must lie clear of",
        ),
        (
            "destination",
            "flock_start",
            lambda: math.dist(site.destination, site.flock_start) < 1e-6,
            "must differ (it sets the heading) from",
            "must differ (it sets the heading) from",
        ),
        (
            "flock_start",
            "protected",
            lambda: _in_protected(site, site.flock_start),
            "must lie outside",
            "must not contain",
        ),
        (
            "second_share",
            "second_start",
            lambda: _second_group_broken(site),
            "must lie in (0, 1) with, and be 0 without,",
            "needs site.second_share in (0, 1), and 0 without it; now",
        ),
        (
            "second_start",
            "protected",
            lambda: _second_start_in(site, lambda p: _in_protected(site, p)),
            "must lie outside",
            "must not contain",
        ),
        (
            "second_start",
            "destination",
            lambda: _second_start_in(site, lambda p: math.dist(p, site.destination) < 1e-6),
            "must differ (it sets the second group's heading) from",
            "must differ (it sets the second group's heading) from",
        ),
    )
    for first, second, broken, rule_first, rule_second in relations:
        if broken():

            def rule(
                key: str,
                a: str = first,
                b: str = second,
                ra: str = rule_first,
                rb: str = rule_second,
            ) -> str:
                other, text = (b, ra) if key == a else (a, rb)
                return f"{text} site.{other} ({_site_text(site, other)})"

            _broken(site, (first, second), rule)


def _check_scenario(scenario: Scenario) -> None:
    """Relations across the records of a scenario."""
    if not isinstance(scenario.name, str):
        _broken(scenario, ("name",), "must be a string")
    site = scenario.site
    if site.goal_bearing_deg is not None:
        for clash, other in (
            (
                any(geometry.zones_overlap(site.goal, z) for z in site.protected_zones),
                "the protected zone",
            ),
            (geometry.zone_contains(site.goal, site.flock_start), "site.flock_start"),
        ):
            if clash:
                _broken(
                    scenario,
                    ("site.goal_bearing_deg",),
                    f"puts the goal ({zone_text(site.goal)}) over {other}; choose a bearing "
                    "whose goal lies clear of both",
                )
    flock, span = scenario.flock, scenario.randomise.cruise_speed
    if span is not None and (span[0] < flock.min_speed or span[1] > flock.max_speed):
        _broken(
            scenario,
            ("randomise.cruise_speed",),
            "must lie within [flock.min_speed, flock.max_speed] = "
            f"[{number_text(flock.min_speed)}, {number_text(flock.max_speed)}] m/s",
        )


def _check_relations(record: DataclassInstance) -> None:
    """The relations between fields of the records that have any."""
    if isinstance(record, FlockParams):
        _check_flock(record)
    elif isinstance(record, SiteParams):
        _check_site(record)
    elif isinstance(record, Scenario):
        _check_scenario(record)


def check_record(record: DataclassInstance) -> None:
    """Check every field of a parameter record against LIMITS, then its relations."""
    cls = type(record)
    base = next(c for c in cls.__mro__ if c in RECORD_SECTIONS)
    specs = LIMITS[RECORD_SECTIONS[base]]
    for f in fields(record):
        spec = specs.get(f.name)
        # A scenario's name may come from its file's stem, so only a config's own key is checked
        # as a lower-case name (by the loader).
        if spec is None or (base is Scenario and f.name == "name"):
            continue
        value = getattr(record, f.name)
        if not spec.accepts(value):
            _broken(record, (f.name,), spec.allowed())
    _check_relations(record)


R = TypeVar("R", bound="DataclassInstance")


def derived(record: R, **changes: object) -> R:
    """A copy of an already checked record with ``changes``, built without the checks.

    For values a reset draws from a checked scenario: gains scaled by ``gain_scale`` and headings
    turned by a random offset may leave the ranges a config may write, and must still play.
    """
    names = {f.name for f in fields(record)}
    unknown = set(changes) - names
    if unknown:
        raise TypeError(f"{type(record).__name__} has no field {', '.join(sorted(unknown))}")
    out = copy.copy(record)
    for name, value in changes.items():
        object.__setattr__(out, name, value)
    return out

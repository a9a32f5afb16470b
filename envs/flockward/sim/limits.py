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
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass, fields
from typing import TypeVar

import numpy as np

from flockward.sim import geometry
from flockward.sim.types import (
    FORMATIONS,
    Circle,
    EpisodeParams,
    FlockParams,
    Polygon,
    PursuerParams,
    Randomisation,
    RewardWeights,
    Scenario,
    SiteParams,
    Zone,
)

__all__ = [
    "LIMITS",
    "MAX_ALIGNMENT_REACH",
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
    "zone_table",
    "zone_text",
]

# Largest alignment_radius / alignment_sigma: beyond it the kernel's tabulated weight drifts from
# the formula by more than 1e-4 relative (flockward.sim.dynamics.alignment_table).
MAX_ALIGNMENT_REACH = 10.0

COORD = 100_000.0  # m, bound on every coordinate: far beyond any airfield's wildlife zone
NAME_RE = re.compile(r"[a-z0-9][a-z0-9_-]{0,39}")
MAX_VERTICES = 256


# --------------------------------------------------------------------------------------------
# Text of numbers and values, shared by record errors and config errors.


def number_text(x: object) -> str:
    """Short number text: 150.0 -> '150', 0.1 -> '0.1'."""
    if isinstance(x, float) and x.is_integer() and abs(x) < 1e15:
        return str(int(x))
    return str(x)


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
# Per-field specs.


def _is_number(value: object) -> bool:
    return not isinstance(value, bool) and isinstance(value, int | float | np.integer | np.floating)


def _is_integer(value: object) -> bool:
    return not isinstance(value, bool) and isinstance(value, int | np.integer)


@dataclass(frozen=True)
class Spec:
    """Type, bounds and unit of one field (one config key).

    kind: "int", "float", "bool", "str", "name" (lower-case identifier), "choice", "point"
    ([x, y]), "zone" (circle or polygon) or "range" ([lo, hi] of ``item`` numbers).
    """

    kind: str
    lo: float | None = None
    hi: float | None = None
    unit: str = ""
    lo_open: bool = False  # lower bound excluded: the value must be strictly greater than lo
    optional: bool = False  # may be absent (None); absence means what the field comment says
    choices: tuple[str, ...] = ()
    item: str = "float"  # element type of a "range"
    max_len: int = 2000  # characters of a "str"

    def bounds(self) -> str:
        """Interval text like '(0, 100] m/s'."""
        left = "(" if self.lo_open else "["
        text = f"{left}{number_text(self.lo)}, {number_text(self.hi)}]"
        return f"{text} {self.unit}" if self.unit else text

    def within(self, x: float) -> bool:
        """Whether a number lies inside the bounds."""
        assert self.lo is not None and self.hi is not None
        below = x <= self.lo if self.lo_open else x < self.lo
        return not below and x <= self.hi

    def allowed(self) -> str:
        """What a valid value looks like, for error messages and the reference table."""
        if self.kind == "int":
            return f"must be an integer in {self.bounds()}"
        if self.kind == "float":
            return f"must be a finite number in {self.bounds()}"
        if self.kind == "bool":
            return "must be true or false"
        if self.kind == "str":
            return f"must be a string of at most {self.max_len} characters"
        if self.kind == "name":
            return "must be a lower-case name of at most 40 characters: a-z, 0-9, '_', '-'"
        if self.kind == "choice":
            return f"must be one of: {', '.join(self.choices)}"
        if self.kind == "point":
            return f"must be [x, y] with x and y finite numbers in {self.bounds()}"
        if self.kind == "zone":
            return (
                "must be { circle = { center = [x, y], radius = r } } or "
                "{ polygon = [[x, y], ...] } (a simple polygon, 3 to "
                f"{MAX_VERTICES} vertices, non-zero area)"
            )
        if self.kind == "range":
            what = "integers" if self.item == "int" else "finite numbers"
            return f"must be [lo, hi] with lo <= hi, {what} in {self.bounds()}"
        raise AssertionError(self.kind)

    def number_ok(self, value: object, integer: bool) -> bool:
        """A bounded number; bool is not a number here (TOML true is not 1), nor are nan, inf."""
        if integer:
            return _is_integer(value) and self.within(int(value))  # type: ignore[arg-type]
        return (
            _is_number(value)
            and math.isfinite(float(value))  # type: ignore[arg-type]
            and self.within(float(value))  # type: ignore[arg-type]
        )

    def accepts(self, value: object) -> bool:
        """Whether a value as a record holds it (tuples, zone records) satisfies this spec."""
        if value is None:
            return self.optional
        kind = self.kind
        if kind in ("int", "float"):
            return self.number_ok(value, integer=kind == "int")
        if kind == "bool":
            return isinstance(value, bool)
        if kind == "str":
            return isinstance(value, str) and len(value) <= self.max_len
        if kind == "name":
            return isinstance(value, str) and NAME_RE.fullmatch(value) is not None
        if kind == "choice":
            return isinstance(value, str) and value in self.choices
        if kind == "point":
            coord = Spec("float", self.lo, self.hi)
            return _pair(value) and all(coord.number_ok(v, False) for v in value)  # type: ignore[union-attr]
        if kind == "zone":
            return _zone_ok(value)
        if kind == "range":
            item = Spec(self.item, self.lo, self.hi, lo_open=self.lo_open)
            integer = self.item == "int"
            return (
                _pair(value)
                and all(item.number_ok(v, integer) for v in value)  # type: ignore[union-attr]
                and value[0] <= value[1]  # type: ignore[index]
            )
        raise AssertionError(kind)


def _pair(value: object) -> bool:
    return isinstance(value, list | tuple) and len(value) == 2


def _f(lo: float, hi: float, unit: str = "", *, open_lo: bool = False, opt: bool = False) -> Spec:
    return Spec("float", lo, hi, unit, lo_open=open_lo, optional=opt)


def _pos(hi: float, unit: str = "", *, opt: bool = False) -> Spec:
    """A strictly positive number up to ``hi``."""
    return _f(0.0, hi, unit, open_lo=True, opt=opt)


def _range(
    lo: float, hi: float, unit: str = "", item: str = "float", open_lo: bool = False
) -> Spec:
    return Spec("range", lo, hi, unit, item=item, optional=True, lo_open=open_lo)


POINT = Spec("point", -COORD, COORD, "m")
RADIUS = _pos(COORD, "m")

# One table per record, keyed by the section name a scenario file uses ("" = top-level keys).
LIMITS: dict[str, dict[str, Spec]] = {
    "": {
        "name": Spec("name"),
        "description": Spec("str", max_len=2000),
    },
    "flock": {
        "name": Spec("name"),
        "source": Spec("str", max_len=400),
        "count": Spec("int", 1, 5000, "birds"),
        "formation": Spec("choice", choices=FORMATIONS),
        "spacing": _pos(100.0, "m"),
        "heading_deg": _f(-360.0, 360.0, "deg", opt=True),
        "speed": _f(0.0, 60.0, "m/s"),
        "cruise_speed": _pos(60.0, "m/s"),
        "min_speed": _f(0.0, 60.0, "m/s"),
        "max_speed": _pos(80.0, "m/s"),
        "max_accel": _pos(100.0, "m/s^2"),
        "separation_radius": _pos(100.0, "m"),
        "separation_gain": _f(0.0, 1000.0, "m^2/s^2"),
        "alignment_radius": _pos(500.0, "m"),
        "alignment_gain": _f(0.0, 100.0, "1/s"),
        "alignment_sigma": _pos(500.0, "m"),
        "alignment_beta": _f(0.0, 5.0),
        "cohesion_radius": _pos(500.0, "m"),
        "cohesion_gain": _f(0.0, 100.0, "1/s^2"),
        "destination_gain": _f(0.0, 100.0, "1/s"),
        "alarm_radius": _pos(1000.0, "m"),
        "flee_gain": _f(0.0, 1000.0, "m/s^2"),
        "dodge_radius": _pos(1000.0, "m"),
        "dodge_gain": _f(0.0, 1000.0, "m/s^2"),
        "noise_std": _f(0.0, 100.0, "m/s^2"),
        "link_radius": _pos(1000.0, "m", opt=True),
    },
    "pursuer": {
        "start": POINT,
        # 44.7 m/s = 87 kn, the groundspeed limit for small drones in US 14 CFR 107.51.
        "max_speed": _pos(44.7, "m/s"),
        "max_accel": _pos(50.0, "m/s^2"),
        "safety_radius": _f(0.0, 100.0, "m"),
    },
    "site": {
        "protected": Spec("zone"),
        "goal": Spec("zone"),
        "destination": POINT,
        "flock_start": POINT,
    },
    "episode": {
        "dt": _pos(1.0, "s"),
        "max_steps": Spec("int", 1, 1_000_000, "steps"),
        "success_fraction": _pos(1.0),
        "max_breaching_birds": Spec("int", 0, 5000, "birds"),
    },
    "reward": {
        "progress": _f(0.0, 1000.0),
        "approach": _f(0.0, 1000.0),
        "fragmentation": _f(0.0, 1000.0),
        "collision": _f(0.0, 1000.0),
        "breach": _f(0.0, 1000.0),
        "time": _f(0.0, 1000.0),
        "success": _f(0.0, 1000.0),
        "discount": _f(0.0, 1.0),
    },
    "randomise": {
        "count": _range(1, 5000, "birds", item="int"),
        "heading_deg": _range(-180.0, 180.0, "deg"),
        "offset_x": _range(-5000.0, 5000.0, "m"),
        "offset_y": _range(-5000.0, 5000.0, "m"),
        "gain_scale": _range(0.0, 10.0, open_lo=True),
        "cruise_speed": _range(0.0, 60.0, "m/s", open_lo=True),
        "noise_std": _range(0.0, 100.0, "m/s^2"),
    },
}

# The record each section builds.
RECORD_SECTIONS: dict[type, str] = {
    Scenario: "",
    FlockParams: "flock",
    PursuerParams: "pursuer",
    SiteParams: "site",
    EpisodeParams: "episode",
    RewardWeights: "reward",
    Randomisation: "randomise",
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


def _zone_ok(zone: object) -> bool:
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
    if flock.alignment_radius > MAX_ALIGNMENT_REACH * flock.alignment_sigma:
        _broken(
            flock,
            ("alignment_radius", "alignment_sigma"),
            f"must keep alignment_radius <= {MAX_ALIGNMENT_REACH:g} * alignment_sigma, where "
            "the tabulated Cucker-Smale weight is accurate to 1e-4 "
            f"(now {n(flock.alignment_radius)} and {n(flock.alignment_sigma)} m)",
        )


def _site_text(site: SiteParams, key: str) -> str:
    value = getattr(site, key)
    return zone_text(value) if isinstance(value, Circle | Polygon) else point_text(value)


def _check_site(site: SiteParams) -> None:
    """Relations between the zones and points of a site."""
    # (key, other key, relation broken, rule when key is named, rule when other is named)
    relations = (
        (
            "goal",
            "protected",
            lambda: geometry.zones_overlap(site.goal, site.protected),
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
            lambda: geometry.zone_contains(site.protected, site.flock_start),
            "must lie outside",
            "must not contain",
        ),
    )
    for first, second, broken, rule_first, rule_second in relations:
        if broken():

            def rule(key: str, a=first, b=second, ra=rule_first, rb=rule_second) -> str:
                other, text = (b, ra) if key == a else (a, rb)
                return f"{text} site.{other} ({_site_text(site, other)})"

            _broken(site, (first, second), rule)


def _check_scenario(scenario: Scenario) -> None:
    """Relations across the records of a scenario."""
    if not isinstance(scenario.name, str):
        _broken(scenario, ("name",), "must be a string")
    flock, span = scenario.flock, scenario.randomise.cruise_speed
    if span is not None and (span[0] < flock.min_speed or span[1] > flock.max_speed):
        _broken(
            scenario,
            ("randomise.cruise_speed",),
            "must lie within [flock.min_speed, flock.max_speed] = "
            f"[{number_text(flock.min_speed)}, {number_text(flock.max_speed)}] m/s",
        )


_RELATIONS: dict[type, Callable[[object], None]] = {
    FlockParams: _check_flock,  # type: ignore[dict-item]
    SiteParams: _check_site,  # type: ignore[dict-item]
    Scenario: _check_scenario,  # type: ignore[dict-item]
}


def check_record(record: object) -> None:
    """Check every field of a parameter record against LIMITS, then its relations."""
    cls = type(record)
    base = next(c for c in cls.__mro__ if c in RECORD_SECTIONS)
    specs = LIMITS[RECORD_SECTIONS[base]]
    for f in fields(record):  # type: ignore[arg-type]
        spec = specs.get(f.name)
        # A scenario's name may come from its file's stem, so only a config's own key is checked
        # as a lower-case name (by the loader).
        if spec is None or (base is Scenario and f.name == "name"):
            continue
        value = getattr(record, f.name)
        if not spec.accepts(value):
            _broken(record, (f.name,), spec.allowed())
    relations = _RELATIONS.get(base)
    if relations is not None:
        relations(record)


R = TypeVar("R")


def derived(record: R, **changes: object) -> R:
    """A copy of an already checked record with ``changes``, built without the checks.

    For values a reset draws from a checked scenario: gains scaled by ``gain_scale`` and headings
    turned by a random offset may leave the ranges a config may write, and must still play.
    """
    names = {f.name for f in fields(record)}  # type: ignore[arg-type]
    unknown = set(changes) - names
    if unknown:
        raise TypeError(f"{type(record).__name__} has no field {', '.join(sorted(unknown))}")
    out = copy.copy(record)
    for name, value in changes.items():
        object.__setattr__(out, name, value)
    return out

"""Read, validate and sample scenarios: TOML files in, frozen records (flockward.sim.types) out.

Every key a config may hold, with its type, range and unit, is listed once in ``SCHEMA``; the
error messages and :func:`config_reference` are both generated from it, so they cannot drift.
Any problem raises :class:`ConfigError` with a one-line message naming the file, the dotted key,
the offending value and what is allowed.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import re
import tomllib
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from flockward.sim.resets import RESET_DRAWS, ResetSample, sample_reset
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
    "SCHEMA",
    "ConfigError",
    "ResetSample",
    "Spec",
    "config_dir",
    "config_kind",
    "config_reference",
    "describe",
    "list_flocks",
    "list_scenarios",
    "load_flock",
    "load_scenario",
    "parse_override",
    "sample_reset",
    "scenario_hash",
]


# Largest alignment_radius / alignment_sigma: beyond it the kernel's tabulated weight drifts from
# the formula by more than 1e-4 relative (flockward.sim.dynamics.alignment_table).
MAX_ALIGNMENT_REACH = 10.0


class ConfigError(ValueError):
    """A config file or override is invalid; the message is one line: FILE: key ... : allowed."""


# --------------------------------------------------------------------------------------------
# The schema: one row per key.

_COORD = 100_000.0  # m, bound on every coordinate: far beyond any airfield's wildlife zone
_NAME_RE = re.compile(r"[a-z0-9][a-z0-9_-]{0,39}")
_MAX_VERTICES = 256


@dataclass(frozen=True)
class Spec:
    """Type, bounds and unit of one config key.

    kind: "int", "float", "str", "name" (lower-case identifier), "choice", "point" ([x, y]),
    "zone" (circle or polygon table) or "range" ([lo, hi] of ``item`` numbers).
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
        text = f"{left}{_num(self.lo)}, {_num(self.hi)}]"
        return f"{text} {self.unit}" if self.unit else text

    def allowed(self) -> str:
        """What a valid value looks like, for error messages and the reference table."""
        if self.kind == "int":
            return f"must be an integer in {self.bounds()}"
        if self.kind == "float":
            return f"must be a finite number in {self.bounds()}"
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
                f"{_MAX_VERTICES} vertices, non-zero area)"
            )
        if self.kind == "range":
            what = "integers" if self.item == "int" else "finite numbers"
            return f"must be [lo, hi] with lo <= hi, {what} in {self.bounds()}"
        raise AssertionError(self.kind)


def _f(lo: float, hi: float, unit: str = "", *, open_lo: bool = False, opt: bool = False) -> Spec:
    return Spec("float", lo, hi, unit, lo_open=open_lo, optional=opt)


def _pos(hi: float, unit: str = "", *, opt: bool = False) -> Spec:
    """A strictly positive number up to ``hi``."""
    return _f(0.0, hi, unit, open_lo=True, opt=opt)


def _range(
    lo: float, hi: float, unit: str = "", item: str = "float", open_lo: bool = False
) -> Spec:
    return Spec("range", lo, hi, unit, item=item, optional=True, lo_open=open_lo)


_POINT = Spec("point", -_COORD, _COORD, "m")

SCHEMA: dict[str, dict[str, Spec]] = {
    # Top-level keys of a scenario file.
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
        "start": _POINT,
        # 44.7 m/s = 87 kn, the groundspeed limit for small drones in US 14 CFR 107.51.
        "max_speed": _pos(44.7, "m/s"),
        "max_accel": _pos(50.0, "m/s^2"),
        "safety_radius": _f(0.0, 100.0, "m"),
    },
    "site": {
        "protected": Spec("zone"),
        "goal": Spec("zone"),
        "destination": _POINT,
        "flock_start": _POINT,
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
_SECTIONS = tuple(s for s in SCHEMA if s)
_FLOCK_FILE_KEY = "file"  # [flock] file = "gulls": the only key not a FlockParams field
_CIRCLE_KEYS = ("center", "radius")
_RADIUS = _pos(_COORD, "m")


def config_reference() -> str:
    """The schema as a Markdown table (key, allowed values), for the documentation."""
    lines = ["| key | allowed |", "| --- | --- |"]
    for section, specs in SCHEMA.items():
        for key, spec in specs.items():
            dotted = f"{section}.{key}" if section else key
            note = " (optional)" if spec.optional else ""
            lines.append(f"| `{dotted}` | {spec.allowed()}{note} |")
    lines.append(
        f"| `flock.{_FLOCK_FILE_KEY}` | a shipped flock name or a path relative to the scenario "
        "file; the other [flock] keys override its values (optional) |"
    )
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------
# Messages.


def _num(x: object) -> str:
    """Short number text: 150.0 -> '150', 0.1 -> '0.1'."""
    if isinstance(x, float) and x.is_integer() and abs(x) < 1e15:
        return str(int(x))
    return str(x)


def _fmt(value: object) -> str:
    """A value as TOML-like text on one line."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, float | int | np.integer | np.floating):
        return _num(float(value) if isinstance(value, np.floating) else value)
    if isinstance(value, Mapping):
        inner = ", ".join(f"{k} = {_fmt(v)}" for k, v in value.items())
        return "{ " + inner + " }"
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_fmt(v) for v in value) + "]"
    if value is None:
        return "(none)"
    return repr(value).replace("\n", " ")


@dataclass(frozen=True)
class _Origin:
    """Where a value came from: a file and a dotted key, or an override of that file's scenario."""

    file: str
    key: str
    override: bool = False
    layer: int = 2  # 0 default, 1 flock file, 2 scenario file, 3 override: later layers win

    def default(self) -> _Origin:
        """The same key, marked as not written anywhere (a record default)."""
        return dataclasses.replace(self, layer=0)

    @property
    def word(self) -> str:
        return "override" if self.override else "key"

    def child(self, sub: str) -> _Origin:
        key = f"{self.key}.{sub}" if self.key else sub
        return dataclasses.replace(self, key=key)

    def error(self, value: object, allowed: str) -> ConfigError:
        text = f"{self.file}: {self.word} '{self.key}' = {_fmt(value)}: {allowed}"
        return ConfigError(" ".join(text.split("\n")))

    def unknown(self, sub: str, allowed: object) -> ConfigError:
        dotted = self.child(sub).key
        names = ", ".join(str(a) for a in allowed)
        return ConfigError(f"{self.file}: unknown {self.word} '{dotted}'; allowed: {names}")


# --------------------------------------------------------------------------------------------
# Value parsing, one function per Spec kind.


def _is_number(value: object) -> bool:
    return not isinstance(value, bool) and isinstance(value, int | float | np.integer | np.floating)


def _number(value: object, spec: Spec, origin: _Origin, integer: bool) -> float | int:
    """A bounded number; bool is rejected (TOML true is not 1), as are nan and inf."""
    if integer:
        ok = not isinstance(value, bool) and isinstance(value, int | np.integer)
    else:
        ok = _is_number(value) and math.isfinite(float(value))  # type: ignore[arg-type]
    if not ok:
        raise origin.error(value, spec.allowed())
    x = int(value) if integer else float(value)  # type: ignore[arg-type]
    assert spec.lo is not None and spec.hi is not None
    below = x <= spec.lo if spec.lo_open else x < spec.lo
    if below or x > spec.hi:
        raise origin.error(value, spec.allowed())
    return x


def _point(value: object, spec: Spec, origin: _Origin) -> tuple[float, float]:
    if not (isinstance(value, list | tuple) and len(value) == 2):
        raise origin.error(value, spec.allowed())
    coord = Spec("float", spec.lo, spec.hi, spec.unit)
    try:
        x, y = (_number(v, coord, origin, integer=False) for v in value)
    except ConfigError:
        raise origin.error(value, spec.allowed()) from None
    return (float(x), float(y))


def _zone(value: object, spec: Spec, origin: _Origin) -> Zone:
    if not (isinstance(value, Mapping) and len(value) == 1):
        raise origin.error(value, spec.allowed())
    ((shape, body),) = value.items()
    if shape == "circle":
        sub = origin.child("circle")
        if not isinstance(body, Mapping):
            raise sub.error(body, "must be a table { center = [x, y], radius = r }")
        for key in body:
            if key not in _CIRCLE_KEYS:
                raise sub.unknown(key, _CIRCLE_KEYS)
        for key in _CIRCLE_KEYS:
            if key not in body:
                raise sub.error(body, f"needs both {' and '.join(_CIRCLE_KEYS)}")
        center = _point(body["center"], _POINT, sub.child("center"))
        radius = _number(body["radius"], _RADIUS, sub.child("radius"), integer=False)
        return Circle(center, float(radius))
    if shape == "polygon":
        sub = origin.child("polygon")
        if not isinstance(body, list | tuple) or not 3 <= len(body) <= _MAX_VERTICES:
            raise sub.error(body, f"must list 3 to {_MAX_VERTICES} vertices [x, y]")
        vertices = tuple(_point(v, _POINT, sub) for v in body)
        if _collinear(vertices):
            raise sub.error(body, "must enclose a non-zero area (the vertices are collinear)")
        if not _is_simple(vertices):
            raise sub.error(
                body, "must be a simple polygon: no repeated vertices, no crossing edges"
            )
        return Polygon(vertices)
    raise origin.unknown(str(shape), ("circle", "polygon"))


def _convert(value: object, spec: Spec, origin: _Origin) -> object:
    """Check one raw value against its Spec and return it in the type the records hold."""
    if value is None and spec.optional:
        return None
    kind = spec.kind
    if kind in ("int", "float"):
        return _number(value, spec, origin, integer=kind == "int")
    if kind == "str":
        if not isinstance(value, str) or len(value) > spec.max_len:
            raise origin.error(value, spec.allowed())
        return value
    if kind == "name":
        if not (isinstance(value, str) and _NAME_RE.fullmatch(value)):
            raise origin.error(value, spec.allowed())
        return value
    if kind == "choice":
        if value not in spec.choices or not isinstance(value, str):
            raise origin.error(value, spec.allowed())
        return value
    if kind == "point":
        return _point(value, spec, origin)
    if kind == "zone":
        return _zone(value, spec, origin)
    if kind == "range":
        if not (isinstance(value, list | tuple) and len(value) == 2):
            raise origin.error(value, spec.allowed())
        item = Spec(spec.item, spec.lo, spec.hi, spec.unit, lo_open=spec.lo_open)
        try:
            lo, hi = (_number(v, item, origin, integer=spec.item == "int") for v in value)
        except ConfigError:
            raise origin.error(value, spec.allowed()) from None
        if lo > hi:
            raise origin.error(value, spec.allowed())
        return (lo, hi)
    raise AssertionError(kind)


# --------------------------------------------------------------------------------------------
# Private polygon geometry (kept here so loading depends on no other module).

Point = tuple[float, float]


def _shoelace(vertices: tuple[Point, ...]) -> float:
    """Signed area (m^2), positive for counter-clockwise vertices."""
    total = 0.0
    for (x0, y0), (x1, y1) in zip(vertices, vertices[1:] + vertices[:1], strict=True):
        total += x0 * y1 - x1 * y0
    return 0.5 * total


def _collinear(vertices: tuple[Point, ...]) -> bool:
    """All vertices lie on one line (to rounding): the polygon has no interior."""
    scale = max(max(abs(c) for v in vertices for c in v), 1.0)
    a = vertices[0]
    b = max(vertices, key=lambda v: math.dist(a, v))
    return all(abs(_orient(a, b, c)) <= 1e-9 * scale * scale for c in vertices)


def _orient(a: Point, b: Point, c: Point) -> float:
    return (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])


def _on_segment(a: Point, b: Point, p: Point) -> bool:
    """p, known collinear with a-b, lies within the segment's bounding box."""
    return min(a[0], b[0]) <= p[0] <= max(a[0], b[0]) and min(a[1], b[1]) <= p[1] <= max(a[1], b[1])


def _segments_intersect(p1: Point, p2: Point, q1: Point, q2: Point) -> bool:
    """Closed segments p1-p2 and q1-q2 share at least one point."""
    d1, d2 = _orient(q1, q2, p1), _orient(q1, q2, p2)
    d3, d4 = _orient(p1, p2, q1), _orient(p1, p2, q2)
    if ((d1 > 0) != (d2 > 0)) and ((d3 > 0) != (d4 > 0)) and 0 not in (d1, d2, d3, d4):
        return True
    return (
        (d1 == 0 and _on_segment(q1, q2, p1))
        or (d2 == 0 and _on_segment(q1, q2, p2))
        or (d3 == 0 and _on_segment(p1, p2, q1))
        or (d4 == 0 and _on_segment(p1, p2, q2))
    )


def _is_simple(vertices: tuple[Point, ...]) -> bool:
    """No repeated vertex, no two non-adjacent edges touch, no adjacent edges fold back."""
    n = len(vertices)
    if len(set(vertices)) != n:
        return False
    edges = [(vertices[i], vertices[(i + 1) % n]) for i in range(n)]
    for i in range(n):
        for j in range(i + 1, n):
            a, b = edges[i], edges[j]
            if j == i + 1 or (i == 0 and j == n - 1):
                # Adjacent edges share one vertex; they must not overlap beyond it.
                shared = a[1] if j == i + 1 else a[0]
                other_a = a[0] if j == i + 1 else a[1]
                other_b = b[1] if j == i + 1 else b[0]
                if _orient(shared, other_a, other_b) == 0:
                    u = (other_a[0] - shared[0], other_a[1] - shared[1])
                    v = (other_b[0] - shared[0], other_b[1] - shared[1])
                    if u[0] * v[0] + u[1] * v[1] > 0:  # same direction: the edges overlap
                        return False
                continue
            if _segments_intersect(a[0], a[1], b[0], b[1]):
                return False
    return True


def _point_in_polygon(p: Point, vertices: tuple[Point, ...]) -> bool:
    """Even-odd ray casting toward +x."""
    inside = False
    x, y = p
    n = len(vertices)
    for i in range(n):
        (x0, y0), (x1, y1) = vertices[i], vertices[(i + 1) % n]
        if (y0 > y) != (y1 > y):
            x_cross = x0 + (y - y0) * (x1 - x0) / (y1 - y0)
            if x < x_cross:
                inside = not inside
    return inside


def _segment_distance(p: Point, a: Point, b: Point) -> float:
    ax, ay = b[0] - a[0], b[1] - a[1]
    t = ((p[0] - a[0]) * ax + (p[1] - a[1]) * ay) / (ax * ax + ay * ay)
    t = min(1.0, max(0.0, t))
    return math.hypot(p[0] - (a[0] + t * ax), p[1] - (a[1] + t * ay))


def _edges(vertices: tuple[Point, ...]) -> list[tuple[Point, Point]]:
    return [(vertices[i], vertices[(i + 1) % len(vertices)]) for i in range(len(vertices))]


def _zone_contains(zone: Zone, p: Point) -> bool:
    if isinstance(zone, Circle):
        return math.dist(zone.center, p) < zone.radius
    return _point_in_polygon(p, zone.vertices)


def _zones_overlap(a: Zone, b: Zone) -> bool:
    """The interiors of two zones intersect (touching boundaries do not count)."""
    if isinstance(a, Circle) and isinstance(b, Circle):
        return math.dist(a.center, b.center) < a.radius + b.radius
    if isinstance(a, Polygon) and isinstance(b, Circle):
        a, b = b, a
    if isinstance(a, Circle):
        assert isinstance(b, Polygon)
        if _point_in_polygon(a.center, b.vertices):
            return True
        return min(_segment_distance(a.center, p, q) for p, q in _edges(b.vertices)) < a.radius
    assert isinstance(b, Polygon)
    for p1, p2 in _edges(a.vertices):
        for q1, q2 in _edges(b.vertices):
            if _segments_intersect(p1, p2, q1, q2):
                return True
    return _point_in_polygon(a.vertices[0], b.vertices) or _point_in_polygon(
        b.vertices[0], a.vertices
    )


def _zone_toml(zone: Zone) -> dict[str, object]:
    """A zone in the shape a config writes it, for messages."""
    if isinstance(zone, Circle):
        return {"circle": {"center": list(zone.center), "radius": zone.radius}}
    return {"polygon": [list(v) for v in zone.vertices]}


def _zone_text(zone: Zone) -> str:
    if isinstance(zone, Circle):
        c = zone.center
        return f"circle centre ({_num(c[0])}, {_num(c[1])}) radius {_num(zone.radius)} m"
    xs = [v[0] for v in zone.vertices]
    ys = [v[1] for v in zone.vertices]
    area = abs(_shoelace(zone.vertices))
    return (
        f"polygon of {len(zone.vertices)} vertices, {area:.0f} m^2, spanning "
        f"x {min(xs):.0f}..{max(xs):.0f} m, y {min(ys):.0f}..{max(ys):.0f} m"
    )


# --------------------------------------------------------------------------------------------
# Files and the configs directory.


def _config_roots() -> list[Path]:
    """Candidate configs directories: inside the installed package first, then the repository."""
    package = Path(__file__).resolve().parent.parent  # flockward/
    return [package / "_configs", package.parent.parent / "configs"]


def config_dir() -> Path:
    """The shipped configs directory (holding flocks/ and scenarios/)."""
    for root in _config_roots():
        if (root / "scenarios").is_dir():
            return root
    tried = ", ".join(str(r) for r in _config_roots())
    raise ConfigError(f"shipped configs not found; looked in: {tried}")


def _names(sub: str) -> list[str]:
    return sorted(p.stem for p in (config_dir() / sub).glob("*.toml"))


def list_scenarios() -> list[str]:
    """Names of the shipped scenarios (file stems under configs/scenarios/)."""
    return _names("scenarios")


def list_flocks() -> list[str]:
    """Names of the shipped flocks (file stems under configs/flocks/)."""
    return _names("flocks")


def _label(path: Path) -> str:
    """A path as shown in messages: relative to the working directory when it lies below it."""
    try:
        return str(path.resolve().relative_to(Path.cwd().resolve()))
    except ValueError:
        return str(path)


def _read_toml(path: Path) -> dict[str, object]:
    label = _label(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise ConfigError(f"{label}: file not found") from None
    except OSError as exc:
        raise ConfigError(f"{label}: cannot read file: {exc.strerror or exc}") from None
    try:
        return tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError:
        raise ConfigError(f"{label}: not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{label}: invalid TOML: {exc}") from None


def _looks_like_path(name: str | Path) -> bool:
    text = str(name)
    return isinstance(name, Path) or text.endswith(".toml") or "/" in text or "\\" in text


def _resolve(name_or_path: str | Path, sub: str, base: Path | None = None) -> Path:
    """A shipped config name (file stem under configs/SUB) or a path (relative to ``base``)."""
    if _looks_like_path(name_or_path):
        path = Path(name_or_path)
        return path if base is None or path.is_absolute() else base / path
    return config_dir() / sub / f"{name_or_path}.toml"


def config_kind(path: str | Path) -> str:
    """'scenario' if the file holds any table (such as [site] or [flock]), else 'flock'."""
    data = _read_toml(Path(path))
    return "scenario" if any(isinstance(v, dict) for v in data.values()) else "flock"


# --------------------------------------------------------------------------------------------
# Building records from raw entries.

_Entries = dict[str, tuple[object, _Origin]]  # field -> (raw value, where it came from)


def _collect(table: Mapping[str, object], section: str, origin: _Origin) -> _Entries:
    """Raw entries of one table, rejecting keys the schema does not list."""
    specs = SCHEMA[section]
    entries: _Entries = {}
    for key, value in table.items():
        if key not in specs:
            allowed = list(specs)
            if section == "flock" and origin.key == "flock":
                allowed.append(_FLOCK_FILE_KEY)
            raise origin.unknown(key, allowed)
        entries[key] = (value, origin.child(key))
    return entries


def _build(section: str, entries: _Entries) -> dict[str, object]:
    specs = SCHEMA[section]
    return {key: _convert(value, specs[key], origin) for key, (value, origin) in entries.items()}


def _blame(where: Callable[[str], _Origin], *keys: str) -> tuple[str, _Origin]:
    """The key of a broken relation to report: the one set last (override > scenario > flock
    file > default); ties go to the first key listed."""
    origins = [(key, where(key)) for key in keys]
    return max(origins, key=lambda item: item[1].layer)


def _check_flock(flock: FlockParams, where: Callable[[str], _Origin]) -> None:
    """Relations between flock keys that a per-key range cannot express."""
    lo, hi = flock.min_speed, flock.max_speed
    if hi < lo:
        blamed, origin = _blame(where, "max_speed", "min_speed")
        raise origin.error(
            getattr(flock, blamed),
            f"must keep min_speed <= max_speed (now {_num(lo)} > {_num(hi)} m/s)",
        )
    for key in ("cruise_speed", "speed"):
        value = getattr(flock, key)
        if not lo <= value <= hi:
            blamed, origin = _blame(where, key, "max_speed", "min_speed")
            raise origin.error(
                getattr(flock, blamed),
                f"must keep min_speed <= {key} <= max_speed "
                f"(now {_num(lo)}, {_num(value)}, {_num(hi)} m/s)",
            )
    if flock.dodge_radius >= flock.alarm_radius:
        blamed, origin = _blame(where, "dodge_radius", "alarm_radius")
        raise origin.error(
            getattr(flock, blamed),
            "must keep dodge_radius < alarm_radius, birds dodge only once alarmed "
            f"(now {_num(flock.dodge_radius)} and {_num(flock.alarm_radius)} m)",
        )
    if flock.alignment_radius > MAX_ALIGNMENT_REACH * flock.alignment_sigma:
        blamed, origin = _blame(where, "alignment_radius", "alignment_sigma")
        raise origin.error(
            getattr(flock, blamed),
            f"must keep alignment_radius <= {MAX_ALIGNMENT_REACH:g} * alignment_sigma, where "
            "the tabulated Cucker-Smale weight is accurate to 1e-4 "
            f"(now {_num(flock.alignment_radius)} and {_num(flock.alignment_sigma)} m)",
        )


def _flock_from(entries: _Entries, default: _Origin) -> FlockParams:
    flock = FlockParams(**_build("flock", entries))  # type: ignore[arg-type]
    _check_flock(
        flock, lambda key: entries[key][1] if key in entries else default.child(key).default()
    )
    return flock


def load_flock(path: str | Path) -> FlockParams:
    """Read a flock file (FlockParams keys at top level) or a shipped flock by name."""
    file = _resolve(path, "flocks")
    data = _read_toml(file)
    origin = _Origin(_label(file), "", layer=1)
    return _flock_from(_collect(data, "flock", origin), origin)


def parse_override(item: str) -> tuple[str, object]:
    """Split 'KEY=VALUE' and read VALUE as a TOML value (bare words stay strings).

    For command lines: ``parse_override("flock.count=80") == ("flock.count", 80)``.
    """
    key, sep, text = item.partition("=")
    if not sep or not key.strip():
        raise ConfigError(f"override {item!r}: expected KEY=VALUE, e.g. flock.count=80")
    try:
        value: object = tomllib.loads(f"v = {text.strip()}")["v"]
    except tomllib.TOMLDecodeError:
        value = text.strip()
    return key.strip(), value


def _override_entries(
    overrides: Mapping[str, object], label: str
) -> tuple[dict[str, _Entries], tuple[object, _Origin] | None]:
    """Overrides as raw entries per section, plus a 'flock.file' override if there is one."""
    entries: dict[str, _Entries] = {s: {} for s in SCHEMA}
    flock_file = None
    for dotted, value in overrides.items():
        section, _, key = dotted.rpartition(".")
        origin = _Origin(label, section, override=True, layer=3)
        if section == "flock" and key == _FLOCK_FILE_KEY:
            flock_file = (value, origin.child(key))
            continue
        if section not in SCHEMA or (not section and key not in SCHEMA[""]):
            raise ConfigError(
                f"{label}: unknown override '{dotted}'; allowed: "
                f"{', '.join(SCHEMA[''])} or SECTION.KEY with SECTION one of "
                f"{', '.join(_SECTIONS)}"
            )
        entries[section].update(_collect({key: value}, section, origin))
    return entries, flock_file


def _flock_file_entries(value: object, origin: _Origin, base: Path) -> _Entries:
    """Raw entries of the flock file named by [flock] file (shipped name or relative path)."""
    if not isinstance(value, str) or not value:
        raise origin.error(value, "must be a shipped flock name or a path to a flock file")
    path = _resolve(value, "flocks", base=base)
    if not path.is_file():
        raise origin.error(
            value,
            "no such flock file; use a shipped flock "
            f"({', '.join(list_flocks())}) or a path relative to the scenario file",
        )
    return _collect(_read_toml(path), "flock", _Origin(_label(path), "", layer=1))


def load_scenario(
    name_or_path: str | Path, overrides: Mapping[str, object] | None = None
) -> Scenario:
    """Read and validate a scenario: a shipped name (see list_scenarios) or a TOML path.

    ``overrides`` maps dotted keys ('flock.count', 'episode.max_steps', 'name') to values and is
    checked exactly like the file's own keys; they apply after the file and its flock file.
    """
    if not _looks_like_path(name_or_path) and name_or_path not in list_scenarios():
        if not Path(name_or_path).is_file():
            shipped = ", ".join(list_scenarios())
            raise ConfigError(f"{name_or_path}: unknown scenario name; shipped: {shipped}")
        name_or_path = Path(name_or_path)
    file = _resolve(name_or_path, "scenarios")
    data = _read_toml(file)
    label = _label(file)
    top = _Origin(label, "")

    # Raw entries per section, each remembering its origin.
    raw: dict[str, _Entries] = {s: {} for s in SCHEMA}
    flock_file: tuple[object, _Origin] | None = None
    for key, value in data.items():
        if key in SCHEMA[""]:
            raw[""][key] = (value, top.child(key))
        elif key in _SECTIONS:
            origin = top.child(key)
            if not isinstance(value, dict):
                raise origin.error(value, "must be a table")
            table = dict(value)
            if key == "flock" and _FLOCK_FILE_KEY in table:
                flock_file = (table.pop(_FLOCK_FILE_KEY), origin.child(_FLOCK_FILE_KEY))
            raw[key] = _collect(table, key, origin)
        else:
            raise top.unknown(key, [*SCHEMA[""], *_SECTIONS])

    override_entries, override_file = _override_entries(overrides or {}, label)
    flock_file = override_file or flock_file

    # The flock: its file (if any), then the scenario's [flock] keys, then overrides.
    flock_entries = {} if flock_file is None else _flock_file_entries(*flock_file, file.parent)
    flock_entries.update(raw["flock"])
    flock_entries.update(override_entries["flock"])
    flock = _flock_from(flock_entries, top.child("flock"))

    values: dict[str, dict[str, object]] = {}
    for section in SCHEMA:
        if section == "flock":
            continue
        raw[section].update(override_entries[section])
        values[section] = _build(section, raw[section])

    def where(section: str, key: str) -> _Origin:
        entry = raw[section].get(key)
        return entry[1] if entry else top.child(section).child(key).default()

    site = SiteParams(**values["site"])  # type: ignore[arg-type]
    randomise = Randomisation(**values["randomise"])  # type: ignore[arg-type]
    _check_site(site, where)
    if randomise.cruise_speed is not None:
        lo, hi = randomise.cruise_speed
        if lo < flock.min_speed or hi > flock.max_speed:
            raise where("randomise", "cruise_speed").error(
                list(randomise.cruise_speed),
                "must lie within [flock.min_speed, flock.max_speed] = "
                f"[{_num(flock.min_speed)}, {_num(flock.max_speed)}] m/s",
            )

    top_values = values[""]
    return Scenario(
        name=str(top_values.get("name", file.stem)),
        description=str(top_values.get("description", "")),
        flock=flock,
        pursuer=PursuerParams(**values["pursuer"]),  # type: ignore[arg-type]
        site=site,
        episode=EpisodeParams(**values["episode"]),  # type: ignore[arg-type]
        reward=RewardWeights(**values["reward"]),  # type: ignore[arg-type]
        randomise=randomise,
        source_file=str(file),
    )


def _check_site(site: SiteParams, where: Callable[[str, str], _Origin]) -> None:
    """Relations between the zones and points of [site]; the key set last is the one blamed."""

    def at(key: str) -> _Origin:
        return where("site", key)

    def shown(key: str) -> object:
        value = getattr(site, key)
        return _zone_toml(value) if isinstance(value, Circle | Polygon) else list(value)

    def text(key: str) -> str:
        value = getattr(site, key)
        return _zone_text(value) if isinstance(value, Circle | Polygon) else _pt(value)

    # (key, other key, relation broken, rule when key is blamed, rule when other is blamed)
    relations = (
        (
            "goal",
            "protected",
            _zones_overlap(site.goal, site.protected),
            "must lie clear of",
            "must lie clear of",
        ),
        (
            "destination",
            "flock_start",
            math.dist(site.destination, site.flock_start) < 1e-6,
            "must differ (it sets the heading) from",
            "must differ (it sets the heading) from",
        ),
        (
            "flock_start",
            "protected",
            _zone_contains(site.protected, site.flock_start),
            "must lie outside",
            "must not contain",
        ),
    )
    for first, second, broken, rule_first, rule_second in relations:
        if broken:
            blamed, origin = _blame(at, first, second)
            other, rule = (second, rule_first) if blamed == first else (first, rule_second)
            raise origin.error(shown(blamed), f"{rule} site.{other} ({text(other)})")


# --------------------------------------------------------------------------------------------
# Provenance and summaries.


def _canonical(obj: object) -> object:
    """Plain JSON data; records carry their class name so a Circle and a Polygon never collide."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        body = {f.name: _canonical(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
        body.pop("source_file", None)
        return {"__record__": type(obj).__name__, **body}
    if isinstance(obj, list | tuple):
        return [_canonical(v) for v in obj]
    return obj


def scenario_hash(scenario: Scenario) -> str:
    """sha256 (hex) of the resolved scenario as canonical JSON, ignoring where it was read from."""
    text = json.dumps(_canonical(scenario), sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _pt(p: tuple[float, float]) -> str:
    return f"({_num(p[0])}, {_num(p[1])})"


def describe(scenario: Scenario) -> str:
    """A short multi-line summary for people: birds, speeds, zones, time step and length."""
    f, site, ep, rnd = scenario.flock, scenario.site, scenario.episode, scenario.randomise
    heading = "toward destination" if f.heading_deg is None else f"{_num(f.heading_deg)} deg"
    lines = [
        f"{scenario.name}: {scenario.description}".rstrip(": "),
        f"  birds:     {f.count} {f.name} in a {f.formation} formation, "
        f"spacing {_num(f.spacing)} m, heading {heading}",
        f"  speeds:    start {_num(f.speed)}, cruise {_num(f.cruise_speed)}, "
        f"range {_num(f.min_speed)}-{_num(f.max_speed)} m/s; noise {_num(f.noise_std)} m/s^2",
        f"  source:    {f.source}",
        f"  protected: {_zone_text(site.protected)}",
        f"  goal:      {_zone_text(site.goal)}",
        f"  route:     {_pt(site.flock_start)} -> {_pt(site.destination)} m",
        f"  pursuer:   start {_pt(scenario.pursuer.start)} m, "
        f"max {_num(scenario.pursuer.max_speed)} m/s, {_num(scenario.pursuer.max_accel)} m/s^2",
        f"  episode:   dt {_num(ep.dt)} s x {ep.max_steps} steps = {_num(ep.dt * ep.max_steps)} s",
    ]
    drawn = [
        f"{name} {_num(span[0])}..{_num(span[1])}"
        for name in RESET_DRAWS
        if (span := getattr(rnd, name)) is not None
    ]
    if drawn:
        lines.append(f"  randomise: {', '.join(drawn)}")
    return "\n".join(lines)

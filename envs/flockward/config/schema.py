"""The key schema of config files and the checking of raw values against it.

Every key a scenario may hold, with its type, range and unit, is one row of ``SCHEMA``: the
records' own table (``flockward.sim.limits.LIMITS``), so a file and a record built in Python obey
the same ranges. Error messages and :func:`config_reference` are both generated from it. Suites
and training configs check their own keys with the same :class:`Spec` and :class:`Origin`.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

import numpy as np

from flockward.config.files import ConfigError
from flockward.sim.limits import LIMITS, polygon_problem, value_text
from flockward.sim.spec import MAX_VERTICES, NAME_RE, POINT, RADIUS, Spec
from flockward.sim.types import Circle, Polygon, Zone

__all__ = [
    "FILE_SECTIONS",
    "SCHEMA",
    "SECTIONS",
    "SECTION_FILE_KEY",
    "Origin",
    "Spec",
    "config_reference",
    "convert",
]

SCHEMA: dict[str, dict[str, Spec]] = LIMITS
SECTIONS = tuple(s for s in SCHEMA if s)
# [flock] file = "gulls", [pursuer] file = "multirotor", [sensor] file = "ground-radar": a
# section whose values may come from a file of their own; "file" is the only key of such a
# section that is not a record field.
SECTION_FILE_KEY = "file"
# section -> directory under configs/
FILE_SECTIONS = {"flock": "flocks", "pursuer": "pursuers", "sensor": "sensors"}
_CIRCLE_KEYS = ("center", "radius")
_MAX_SHOWN = 120  # characters of an offending value quoted in an error message
_PLAIN_KINDS = ("bool", "str", "name", "choice")  # checked, then kept as they are
# What Spec.number_ok accepts as a number; named again here so the type checker sees the type.
_NUMBER_TYPES = (int, float, np.integer, np.floating)


def config_reference() -> str:
    """The schema as a Markdown table (key, allowed values), for the documentation."""
    lines = ["| key | allowed |", "| --- | --- |"]
    for section, specs in SCHEMA.items():
        for key, spec in specs.items():
            dotted = f"{section}.{key}" if section else key
            note = " (optional)" if spec.optional else ""
            lines.append(f"| `{dotted}` | {spec.allowed()}{note} |")
    for section, sub in FILE_SECTIONS.items():
        lines.append(
            f"| `{section}.{SECTION_FILE_KEY}` | a shipped {section} name (configs/{sub}/) or a "
            f"path relative to the scenario file; the other [{section}] keys override its "
            "values (optional) |"
        )
    lines.append(
        "| `[[drones]]` | one table of pursuer keys per drone, each over the [pursuer] values "
        "(optional; none: one drone) |"
    )
    return "\n".join(lines)


@dataclass(frozen=True)
class Origin:
    """Where a value came from: a file and a dotted key, or an override of that file's scenario."""

    file: str
    key: str
    override: bool = False
    layer: int = 2  # 0 default, 1 section file, 2 scenario file, 3 override: later layers win

    def default(self) -> Origin:
        """The same key, marked as not written anywhere (a record default)."""
        return dataclasses.replace(self, layer=0)

    @property
    def word(self) -> str:
        """How messages name the key: "override" for an override of the scenario, else "key"."""
        return "override" if self.override else "key"

    def child(self, sub: str) -> Origin:
        """The origin of a key nested one level below this one."""
        key = f"{self.key}.{sub}" if self.key else sub
        return dataclasses.replace(self, key=key)

    def error(self, value: object, allowed: str) -> ConfigError:
        """The one-line error for a bad value at this key: file, key, value and what is allowed."""
        shown = value_text(value)
        if len(shown) > _MAX_SHOWN:  # one line, never an echo of a long input
            shown = f"{shown[: _MAX_SHOWN - 20]}... ({len(shown)} characters)"
        text = f"{self.file}: {self.word} '{self.key}' = {shown}: {allowed}"
        return ConfigError(" ".join(text.split("\n")), file=self._file(), key=self.key)

    def unknown(self, sub: str, allowed: Iterable[object]) -> ConfigError:
        """The one-line error for a key nobody reads below this one, listing the allowed keys."""
        dotted = self.child(sub).key
        names = ", ".join(str(a) for a in allowed)
        return ConfigError(
            f"{self.file}: unknown {self.word} '{dotted}'; allowed: {names}",
            file=self._file(),
            key=dotted,
        )

    def _file(self) -> str | None:
        """The file a key of this origin lives in; None for an override (no file holds it)."""
        return None if self.override else self.file


# --------------------------------------------------------------------------------------------
# Value parsing, one function per Spec kind.


def _number(value: object, spec: Spec, origin: Origin, integer: bool) -> float | int:
    """A bounded number; bool is rejected (TOML true is not 1), as are nan and inf."""
    if not (spec.number_ok(value, integer) and isinstance(value, _NUMBER_TYPES)):
        raise origin.error(value, spec.allowed())
    return int(value) if integer else float(value)


def _point(value: object, spec: Spec, origin: Origin) -> tuple[float, float]:
    if not (isinstance(value, list | tuple) and len(value) == 2):
        raise origin.error(value, spec.allowed())
    coord = Spec("float", spec.lo, spec.hi, spec.unit)
    try:
        x, y = (_number(v, coord, origin, integer=False) for v in value)
    except ConfigError:
        raise origin.error(value, spec.allowed()) from None
    return (float(x), float(y))


def _zone(value: object, spec: Spec, origin: Origin) -> Zone:
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
        center = _point(body["center"], POINT, sub.child("center"))
        radius = _number(body["radius"], RADIUS, sub.child("radius"), integer=False)
        return Circle(center, float(radius))
    if shape == "polygon":
        sub = origin.child("polygon")
        if not isinstance(body, list | tuple) or not 3 <= len(body) <= MAX_VERTICES:
            raise sub.error(body, f"must list 3 to {MAX_VERTICES} vertices [x, y]")
        vertices = tuple(_point(v, POINT, sub) for v in body)
        problem = polygon_problem(vertices)
        if problem is not None:
            raise sub.error(body, problem)
        return Polygon(vertices)
    raise origin.unknown(str(shape), ("circle", "polygon"))


def _zones(value: object, spec: Spec, origin: Origin) -> Zone | tuple[Zone, ...]:
    """One zone, or a list of spec.lo to spec.hi zones (each reported as key.1, key.2, ...)."""
    if not isinstance(value, list | tuple):
        return _zone(value, spec, origin)
    assert spec.lo is not None and spec.hi is not None
    if not spec.lo <= len(value) <= spec.hi:
        raise origin.error(value, spec.allowed())
    zones = tuple(_zone(v, spec, origin.child(str(i))) for i, v in enumerate(value, start=1))
    return zones[0] if len(zones) == 1 else zones


def _plain_ok(value: object, spec: Spec) -> bool:
    """Whether a bool, str, name or choice value is allowed as it stands (no conversion)."""
    kind = spec.kind
    if kind == "bool":
        return isinstance(value, bool)
    if kind == "str":
        return isinstance(value, str) and len(value) <= spec.max_len
    if kind == "name":
        return isinstance(value, str) and NAME_RE.fullmatch(value) is not None
    return value in spec.choices and isinstance(value, str)


def _range(value: object, spec: Spec, origin: Origin) -> tuple[float | int, float | int]:
    """A [lo, hi] pair of numbers of the spec's item kind, lo <= hi."""
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


def convert(value: object, spec: Spec, origin: Origin) -> object:
    """Check one raw value against its Spec and return it in the type the records hold."""
    if value is None and spec.optional:
        return None
    kind = spec.kind
    if kind in ("int", "float"):
        return _number(value, spec, origin, integer=kind == "int")
    if kind in _PLAIN_KINDS:
        if not _plain_ok(value, spec):
            raise origin.error(value, spec.allowed())
        return value
    if kind == "point":
        return _point(value, spec, origin)
    if kind == "zone":
        return _zone(value, spec, origin)
    if kind == "zones":
        return _zones(value, spec, origin)
    if kind == "range":
        return _range(value, spec, origin)
    raise AssertionError(kind)

"""The type, range and unit of one parameter, declared beside the record field it governs.

A record field is written ``speed: float = param(12.5, number(0, 60, "m/s"))``: the default and
the rule sit on one line, so adding a parameter touches one file. ``flockward.sim.limits`` checks
records against these specs and the config loader reads the same specs to check files.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any, TypeGuard, TypeVar

import numpy as np

__all__ = [
    "COORD",
    "MAX_VERTICES",
    "NAME_RE",
    "POINT",
    "RADIUS",
    "Spec",
    "number",
    "number_text",
    "param",
    "param_factory",
    "positive",
    "span",
    "spec_of",
]

COORD = 100_000.0  # m, bound on every coordinate: far beyond any airfield's wildlife zone
NAME_RE = re.compile(r"[a-z0-9][a-z0-9_-]{0,39}")
MAX_VERTICES = 256

T = TypeVar("T")


def number_text(x: object) -> str:
    """Short number text: 150.0 -> '150', 0.1 -> '0.1'."""
    if isinstance(x, float) and x.is_integer() and abs(x) < 1e15:
        return str(int(x))
    return str(x)


def _is_number(value: object) -> TypeGuard[int | float | np.integer | np.floating]:
    return not isinstance(value, bool) and isinstance(value, int | float | np.integer | np.floating)


def _is_integer(value: object) -> TypeGuard[int | np.integer]:
    return not isinstance(value, bool) and isinstance(value, int | np.integer)


@dataclass(frozen=True)
class Spec:
    """Type, bounds and unit of one field (one config key).

    kind: "int", "float", "bool", "str", "name" (lower-case identifier), "choice", "point"
    ([x, y]), "zone" (circle or polygon), "zones" (one zone or a list of lo to hi zones) or
    "range" ([lo, hi] of ``item`` numbers).
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
        if self.kind == "zones":
            return (
                "must be one zone, { circle = { center = [x, y], radius = r } } or "
                "{ polygon = [[x, y], ...] } (a simple polygon, 3 to "
                f"{MAX_VERTICES} vertices, non-zero area), or a list of "
                f"{number_text(self.lo)} to {number_text(self.hi)} such zones"
            )
        if self.kind == "range":
            what = "integers" if self.item == "int" else "finite numbers"
            return f"must be [lo, hi] with lo <= hi, {what} in {self.bounds()}"
        raise AssertionError(self.kind)

    def number_ok(
        self, value: object, integer: bool
    ) -> TypeGuard[int | float | np.integer | np.floating]:
        """A bounded number; bool is not a number here (TOML true is not 1), nor are nan, inf."""
        if integer:
            return _is_integer(value) and self.within(int(value))
        return _is_number(value) and math.isfinite(float(value)) and self.within(float(value))

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
            return _pair(value) and all(coord.number_ok(v, False) for v in value)
        if kind in ("zone", "zones"):
            return self._zones_ok(value)
        if kind == "range":
            item = Spec(self.item, self.lo, self.hi, lo_open=self.lo_open)
            integer = self.item == "int"
            if not _pair(value):
                return False
            lo, hi = value
            return item.number_ok(lo, integer) and item.number_ok(hi, integer) and bool(lo <= hi)
        raise AssertionError(kind)

    def _zones_ok(self, value: object) -> bool:
        """A valid zone record; for "zones" also a tuple of lo to hi valid zones."""
        # Imported here: zones are records of flockward.sim.types, which imports this module.
        from flockward.sim.limits import zone_ok

        if self.kind == "zones" and isinstance(value, tuple):
            assert self.lo is not None and self.hi is not None
            return self.lo <= len(value) <= self.hi and all(zone_ok(z) for z in value)
        return zone_ok(value)


def _pair(value: object) -> TypeGuard[list[object] | tuple[object, ...]]:
    return isinstance(value, list | tuple) and len(value) == 2


def number(
    lo: float, hi: float, unit: str = "", *, open_lo: bool = False, opt: bool = False
) -> Spec:
    """A finite number in [lo, hi] (or (lo, hi] with ``open_lo``)."""
    return Spec("float", lo, hi, unit, lo_open=open_lo, optional=opt)


def positive(hi: float, unit: str = "", *, opt: bool = False) -> Spec:
    """A strictly positive number up to ``hi``."""
    return number(0.0, hi, unit, open_lo=True, opt=opt)


def span(lo: float, hi: float, unit: str = "", item: str = "float", open_lo: bool = False) -> Spec:
    """An optional [lo, hi] pair of ``item`` numbers inside the bounds (a randomisation range)."""
    return Spec("range", lo, hi, unit, item=item, optional=True, lo_open=open_lo)


POINT = Spec("point", -COORD, COORD, "m")
RADIUS = positive(COORD, "m")


def param(default: T, spec: Spec) -> T:
    """A record field with ``default`` whose values must satisfy ``spec``."""
    return field(default=default, metadata={"spec": spec})


def param_factory(factory: Any, spec: Spec) -> Any:
    """A record field whose default is built by ``factory`` (a record), checked by ``spec``."""
    return field(default_factory=factory, metadata={"spec": spec})


def spec_of(record_field: Any) -> Spec | None:
    """The spec declared on a dataclass field, or None for a field without one."""
    spec = record_field.metadata.get("spec")
    return spec if isinstance(spec, Spec) else None

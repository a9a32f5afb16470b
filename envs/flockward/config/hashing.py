"""Content hashes of scenarios: what determines an episode's outcome, and nothing else.

A record contributes only its values that differ from the record's defaults, so adding a
parameter whose default reproduces today's behaviour leaves every hash unchanged; the model
version (``flockward.sim.version.MODEL_VERSION``) stands in for the code that plays the values.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json

from flockward.sim.types import Scenario
from flockward.sim.version import MODEL_VERSION

__all__ = ["canonical", "scenario_hash"]

# Fields that do not change what is played: where the scenario was read from, and its prose.
_NOT_PLAYED = {"source_file", "description"}
_MISSING = dataclasses.MISSING


def _default(field: dataclasses.Field[object]) -> object:
    """A field's default value, or MISSING if the field has none."""
    if field.default is not _MISSING:
        return field.default
    if field.default_factory is not _MISSING:
        return field.default_factory()
    return _MISSING


def canonical(obj: object) -> object:
    """Plain JSON data of a value. A record becomes its class name (so a Circle and a Polygon
    never collide) and the fields whose canonical value differs from the default's."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        body: dict[str, object] = {"__record__": type(obj).__name__}
        for field in dataclasses.fields(obj):
            if field.name in _NOT_PLAYED:
                continue
            value = canonical(getattr(obj, field.name))
            default = _default(field)
            if default is _MISSING or value != canonical(default):
                body[field.name] = value
        return body
    if isinstance(obj, list | tuple):
        return [canonical(v) for v in obj]
    return obj


def scenario_hash(scenario: Scenario) -> str:
    """sha256 (hex) of the model version and the scenario's canonical values, ignoring where it
    was read from and its description."""
    content = {"model_version": MODEL_VERSION, "scenario": canonical(scenario)}
    text = json.dumps(content, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()

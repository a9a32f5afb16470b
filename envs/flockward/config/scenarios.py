"""Read scenarios: TOML files in, validated frozen records (flockward.sim.types) out.

Each key is checked against the schema (``flockward.config.schema``) as it is read; the records
then check the relations between keys themselves (``flockward.sim.limits``), and a broken one is
reported against the key set last (override > scenario file > section file > default). A section
file is a flock or a drone preset named by ``[flock] file`` or ``[pursuer] file``. Any problem
raises :class:`ConfigError` with a one-line message naming the file, the dotted key, the offending
value and what is allowed.
"""

from __future__ import annotations

import tomllib
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import TypeVar

from flockward.config.describe import describe
from flockward.config.files import (
    ConfigError,
    config_dir,
    label,
    list_flocks,
    list_pursuers,
    list_scenarios,
    looks_like_path,
    read_toml,
    resolve,
    shipped_names,
)
from flockward.config.hashing import scenario_hash
from flockward.config.schema import (
    FILE_SECTIONS,
    SCHEMA,
    SECTION_FILE_KEY,
    SECTIONS,
    Origin,
    Spec,
    config_reference,
    convert,
)
from flockward.sim.limits import ParameterError
from flockward.sim.resets import ResetSample, sample_reset
from flockward.sim.types import (
    MAX_DRONES,
    EpisodeParams,
    FlockParams,
    PursuerParams,
    Randomisation,
    RewardWeights,
    Scenario,
    SensorParams,
    SiteParams,
    WindParams,
)

__all__ = [
    "CONFIG_KINDS",
    "SCHEMA",
    "ConfigError",
    "ResetSample",
    "Spec",
    "config_dir",
    "config_kind",
    "config_reference",
    "describe",
    "list_flocks",
    "list_pursuers",
    "list_scenarios",
    "load_flock",
    "load_pursuer",
    "load_scenario",
    "load_sensor",
    "parse_override",
    "sample_reset",
    "scenario_hash",
]


# The kind of config each shipped directory holds: a file's location says what it is.
KIND_OF_DIRECTORY = {
    "scenarios": "scenario",
    "flocks": "flock",
    "pursuers": "pursuer",
    "sensors": "sensor",
}
CONFIG_KINDS = ("scenario", "flock", "pursuer", "sensor")


def config_kind(path: str | Path) -> str:
    """What a config file is: 'scenario', 'flock', 'pursuer' (a drone preset) or 'sensor'.

    A file in a directory named scenarios/, flocks/, pursuers/ or sensors/ is what its directory
    says. Elsewhere its keys decide: any table (such as [site]) or a drone list makes a scenario;
    only drone keys make a drone preset, only sensor keys a sensor preset; anything else is read
    as a flock. An empty file is an error, not a default.
    """
    file = Path(path)
    data = read_toml(file)
    if not data:
        raise ConfigError(
            f"{label(file)}: defines nothing; a scenario, flock or drone preset needs keys",
            file=label(file),
        )
    by_location = KIND_OF_DIRECTORY.get(file.resolve().parent.name)
    if by_location:
        return by_location
    if any(isinstance(v, dict) for v in data.values()) or DRONES_KEY in data:
        return "scenario"
    if set(data) <= set(SCHEMA["pursuer"]):
        return "pursuer"
    return "sensor" if set(data) <= set(SCHEMA["sensor"]) else "flock"


# --------------------------------------------------------------------------------------------
# Building records from raw entries.

R = TypeVar("R")
_Entries = dict[str, tuple[object, Origin]]  # field -> (raw value, where it came from)
_Where = Callable[[str], Origin]  # field (dotted below a Scenario) -> where it was set


def _collect(table: Mapping[str, object], section: str, origin: Origin) -> _Entries:
    """Raw entries of one table, rejecting keys the schema does not list."""
    specs = SCHEMA[section]
    entries: _Entries = {}
    for key, value in table.items():
        if key not in specs:
            allowed = list(specs)
            if section in FILE_SECTIONS and origin.key == section:
                allowed.append(SECTION_FILE_KEY)
            raise origin.unknown(key, allowed)
        entries[key] = (value, origin.child(key))
    return entries


def _build(section: str, entries: _Entries) -> dict[str, object]:
    specs = SCHEMA[section]
    return {key: convert(value, specs[key], origin) for key, (value, origin) in entries.items()}


def _record(cls: Callable[..., R], values: Mapping[str, object], where: _Where) -> R:
    """Build a record; a rule it refuses becomes a ConfigError against the key set last (ties go
    to the first key the rule lists)."""
    try:
        return cls(**values)
    except ParameterError as error:
        blamed, origin = max(((key, where(key)) for key in error.keys), key=lambda i: i[1].layer)
        value, rule = error.blaming(blamed)
        raise origin.error(value, rule) from None


def _section_record(cls: Callable[..., R], section: str, entries: _Entries, default: Origin) -> R:
    """The record of one section; a key no entry sets is reported as a default below
    ``default``."""

    def where(key: str) -> Origin:
        return entries[key][1] if key in entries else default.child(key).default()

    return _record(cls, _build(section, entries), where)


def _section_file(section: str, path: Path) -> _Entries:
    """Raw entries of a section file: the section's keys at top level of the file."""
    return _collect(read_toml(path), section, Origin(label(path), "", layer=1))


def load_flock(path: str | Path) -> FlockParams:
    """Read a flock file (FlockParams keys at top level) or a shipped flock by name."""
    file = resolve(path, FILE_SECTIONS["flock"])
    return flock_from(read_toml(file), file)


def load_pursuer(path: str | Path) -> PursuerParams:
    """Read a drone preset (PursuerParams keys at top level) or a shipped preset by name."""
    file = resolve(path, FILE_SECTIONS["pursuer"])
    return pursuer_from(read_toml(file), file)


def load_sensor(path: str | Path) -> SensorParams:
    """Read a sensor preset (SensorParams keys at top level) or a shipped preset by name."""
    file = resolve(path, FILE_SECTIONS["sensor"])
    return sensor_from(read_toml(file), file)


def sensor_from(data: Mapping[str, object], file: Path) -> SensorParams:
    """The sensor record of a preset file's parsed ``data`` (``file`` names it in messages)."""
    origin = Origin(label(file), "", layer=1)
    return _section_record(SensorParams, "sensor", _collect(data, "sensor", origin), origin)


def flock_from(data: Mapping[str, object], file: Path) -> FlockParams:
    """The flock record of a flock file's parsed ``data`` (``file`` names it in messages)."""
    origin = Origin(label(file), "", layer=1)
    return _section_record(FlockParams, "flock", _collect(data, "flock", origin), origin)


def pursuer_from(data: Mapping[str, object], file: Path) -> PursuerParams:
    """The drone record of a preset file's parsed ``data`` (``file`` names it in messages)."""
    origin = Origin(label(file), "", layer=1)
    return _section_record(PursuerParams, "pursuer", _collect(data, "pursuer", origin), origin)


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


_FileRef = tuple[object, Origin]  # a section's file key: (raw value, where it was set)


def _override_entries(
    overrides: Mapping[str, object], file_label: str
) -> tuple[dict[str, _Entries], dict[str, _FileRef]]:
    """Overrides as raw entries per section, plus the section files they name ('flock.file')."""
    entries: dict[str, _Entries] = {s: {} for s in SCHEMA}
    files: dict[str, _FileRef] = {}
    for dotted, value in overrides.items():
        section, _, key = dotted.rpartition(".")
        origin = Origin(file_label, section, override=True, layer=3)
        if section in FILE_SECTIONS and key == SECTION_FILE_KEY:
            files[section] = (value, origin.child(key))
            continue
        if section not in SCHEMA or (not section and key not in SCHEMA[""]):
            raise ConfigError(
                f"{file_label}: unknown override '{dotted}'; allowed: "
                f"{', '.join(SCHEMA[''])} or SECTION.KEY with SECTION one of "
                f"{', '.join(SECTIONS)}"
            )
        entries[section].update(_collect({key: value}, section, origin))
    return entries, files


def _named_file_entries(section: str, value: object, origin: Origin, base: Path) -> _Entries:
    """Raw entries of the section file named by ``[SECTION] file`` (shipped name or a path
    relative to the scenario file)."""
    if not isinstance(value, str) or not value:
        raise origin.error(value, f"must be a shipped {section} name or a path to a {section} file")
    sub = FILE_SECTIONS[section]
    path = resolve(value, sub, base=base)
    if not path.is_file():
        raise origin.error(
            value,
            f"no such {section} file; use a shipped {section} "
            f"({', '.join(shipped_names(sub))}) or a path relative to the scenario file",
        )
    return _section_file(section, path)


# [[drones]]: a list of tables, one per drone, each of [pursuer] keys overriding [pursuer]'s values.
DRONES_KEY = "drones"


def _drone_entries(value: object, origin: Origin) -> list[_Entries]:
    """Raw entries of each drone of a ``[[drones]]`` list (checked against [pursuer]'s keys)."""
    if not (isinstance(value, list) and 1 <= len(value) <= MAX_DRONES):
        raise origin.error(
            value,
            f"must be 1 to {MAX_DRONES} [[drones]] tables of [pursuer] keys "
            f"({', '.join(SCHEMA['pursuer'])})",
        )
    drones = []
    for i, table in enumerate(value):
        sub = origin.child(str(i))
        if not isinstance(table, dict):
            raise sub.error(table, "must be a table of [pursuer] keys, e.g. { start = [0, 0] }")
        drones.append(_collect(table, "pursuer", sub))
    return drones


def _drone_records(
    drones: list[_Entries], shared: _Entries, top: Origin
) -> tuple[PursuerParams, ...]:
    """Each drone's record: [pursuer]'s values (file, keys, overrides), then the drone's own."""
    return tuple(
        _section_record(PursuerParams, "pursuer", {**shared, **own}, top.child("pursuer"))
        for own in drones
    )


def _scenario_entries(
    data: Mapping[str, object], top: Origin
) -> tuple[dict[str, _Entries], dict[str, _FileRef]]:
    """A scenario file's raw entries per section, plus the section files it names."""
    raw: dict[str, _Entries] = {s: {} for s in SCHEMA}
    files: dict[str, _FileRef] = {}
    for key, value in data.items():
        if key == DRONES_KEY:
            continue  # read by _drone_entries
        if key in SCHEMA[""]:
            raw[""][key] = (value, top.child(key))
        elif key in SECTIONS:
            origin = top.child(key)
            if not isinstance(value, dict):
                raise origin.error(value, "must be a table")
            table = dict(value)
            if key in FILE_SECTIONS and SECTION_FILE_KEY in table:
                named = table.pop(SECTION_FILE_KEY)
                files[key] = (named, origin.child(SECTION_FILE_KEY))
            raw[key] = _collect(table, key, origin)
        else:
            raise top.unknown(key, [*SCHEMA[""], *SECTIONS, DRONES_KEY])
    return raw, files


def load_scenario(
    name_or_path: str | Path, overrides: Mapping[str, object] | None = None
) -> Scenario:
    """Read and validate a scenario: a shipped name (see list_scenarios) or a TOML path.

    ``overrides`` maps dotted keys ('flock.count', 'episode.max_steps', 'name') to values and is
    checked exactly like the file's own keys; they apply after the file and its section files.
    """
    if not looks_like_path(name_or_path) and name_or_path not in list_scenarios():
        if not Path(name_or_path).is_file():
            shipped = ", ".join(list_scenarios())
            raise ConfigError(f"{name_or_path}: unknown scenario name; shipped: {shipped}")
        name_or_path = Path(name_or_path)
    file = resolve(name_or_path, "scenarios")
    return scenario_from(read_toml(file), file, overrides)


def scenario_from(
    data: Mapping[str, object], file: Path, overrides: Mapping[str, object] | None = None
) -> Scenario:
    """The scenario of a scenario file's parsed ``data``; ``file`` names it in messages and
    anchors the section files it names by relative path."""
    file_label = label(file)
    top = Origin(file_label, "")

    raw, files = _scenario_entries(data, top)
    drones = _drone_entries(data[DRONES_KEY], top.child(DRONES_KEY)) if DRONES_KEY in data else []

    override_entries, override_files = _override_entries(overrides or {}, file_label)
    files.update(override_files)

    # Each section: its file (if any), then the scenario's own keys, then overrides.
    for section in SCHEMA:
        layered = (
            _named_file_entries(section, *files[section], file.parent) if section in files else {}
        )
        layered.update(raw[section])
        layered.update(override_entries[section])
        raw[section] = layered
    flock = _section_record(FlockParams, "flock", raw["flock"], top.child("flock"))

    values: dict[str, dict[str, object]] = {}
    for section in SCHEMA:
        if section != "flock":
            values[section] = _build(section, raw[section])

    def where(dotted: str) -> Origin:
        section, _, key = dotted.rpartition(".")
        entry = raw[section].get(key)
        return entry[1] if entry else top.child(section).child(key).default()

    def within(section: str) -> _Where:
        return lambda key: where(f"{section}.{key}")

    top_values = values[""]
    return _record(
        Scenario,
        {
            "name": str(top_values.get("name", file.stem)),
            "description": str(top_values.get("description", "")),
            "flock": flock,
            "site": _record(SiteParams, values["site"], within("site")),
            "randomise": _record(Randomisation, values["randomise"], within("randomise")),
            "pursuer": _record(PursuerParams, values["pursuer"], within("pursuer")),
            "episode": _record(EpisodeParams, values["episode"], within("episode")),
            "reward": _record(RewardWeights, values["reward"], within("reward")),
            "wind": _record(WindParams, values["wind"], within("wind")),
            "sensor": _record(SensorParams, values["sensor"], within("sensor")),
            "drones": _drone_records(drones, raw["pursuer"], top),
            "source_file": str(file),
        },
        where,
    )

"""Read scenarios: TOML files in, validated frozen records (flockward.sim.types) out.

Each key is checked against the schema (``flockward.config.schema``) as it is read; the records
then check the relations between keys themselves (``flockward.sim.limits``), and a broken one is
reported against the key set last (override > scenario file > flock file > default). Any problem
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
    list_scenarios,
    looks_like_path,
    read_toml,
    resolve,
)
from flockward.config.hashing import scenario_hash
from flockward.config.schema import (
    FLOCK_FILE_KEY,
    SCHEMA,
    SECTIONS,
    Origin,
    Spec,
    config_reference,
    convert,
)
from flockward.sim.limits import ParameterError
from flockward.sim.resets import ResetSample, sample_reset
from flockward.sim.types import (
    EpisodeParams,
    FlockParams,
    PursuerParams,
    Randomisation,
    RewardWeights,
    Scenario,
    SiteParams,
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


def config_kind(path: str | Path) -> str:
    """'scenario' if the file holds any table (such as [site] or [flock]), else 'flock'."""
    data = read_toml(Path(path))
    return "scenario" if any(isinstance(v, dict) for v in data.values()) else "flock"


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
            if section == "flock" and origin.key == "flock":
                allowed.append(FLOCK_FILE_KEY)
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


def _flock_from(entries: _Entries, default: Origin) -> FlockParams:
    def where(key: str) -> Origin:
        return entries[key][1] if key in entries else default.child(key).default()

    return _record(FlockParams, _build("flock", entries), where)


def load_flock(path: str | Path) -> FlockParams:
    """Read a flock file (FlockParams keys at top level) or a shipped flock by name."""
    file = resolve(path, "flocks")
    data = read_toml(file)
    origin = Origin(label(file), "", layer=1)
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
    overrides: Mapping[str, object], file_label: str
) -> tuple[dict[str, _Entries], tuple[object, Origin] | None]:
    """Overrides as raw entries per section, plus a 'flock.file' override if there is one."""
    entries: dict[str, _Entries] = {s: {} for s in SCHEMA}
    flock_file = None
    for dotted, value in overrides.items():
        section, _, key = dotted.rpartition(".")
        origin = Origin(file_label, section, override=True, layer=3)
        if section == "flock" and key == FLOCK_FILE_KEY:
            flock_file = (value, origin.child(key))
            continue
        if section not in SCHEMA or (not section and key not in SCHEMA[""]):
            raise ConfigError(
                f"{file_label}: unknown override '{dotted}'; allowed: "
                f"{', '.join(SCHEMA[''])} or SECTION.KEY with SECTION one of "
                f"{', '.join(SECTIONS)}"
            )
        entries[section].update(_collect({key: value}, section, origin))
    return entries, flock_file


def _flock_file_entries(value: object, origin: Origin, base: Path) -> _Entries:
    """Raw entries of the flock file named by [flock] file (shipped name or relative path)."""
    if not isinstance(value, str) or not value:
        raise origin.error(value, "must be a shipped flock name or a path to a flock file")
    path = resolve(value, "flocks", base=base)
    if not path.is_file():
        raise origin.error(
            value,
            "no such flock file; use a shipped flock "
            f"({', '.join(list_flocks())}) or a path relative to the scenario file",
        )
    return _collect(read_toml(path), "flock", Origin(label(path), "", layer=1))


def load_scenario(
    name_or_path: str | Path, overrides: Mapping[str, object] | None = None
) -> Scenario:
    """Read and validate a scenario: a shipped name (see list_scenarios) or a TOML path.

    ``overrides`` maps dotted keys ('flock.count', 'episode.max_steps', 'name') to values and is
    checked exactly like the file's own keys; they apply after the file and its flock file.
    """
    if not looks_like_path(name_or_path) and name_or_path not in list_scenarios():
        if not Path(name_or_path).is_file():
            shipped = ", ".join(list_scenarios())
            raise ConfigError(f"{name_or_path}: unknown scenario name; shipped: {shipped}")
        name_or_path = Path(name_or_path)
    file = resolve(name_or_path, "scenarios")
    data = read_toml(file)
    file_label = label(file)
    top = Origin(file_label, "")

    # Raw entries per section, each remembering its origin.
    raw: dict[str, _Entries] = {s: {} for s in SCHEMA}
    flock_file: tuple[object, Origin] | None = None
    for key, value in data.items():
        if key in SCHEMA[""]:
            raw[""][key] = (value, top.child(key))
        elif key in SECTIONS:
            origin = top.child(key)
            if not isinstance(value, dict):
                raise origin.error(value, "must be a table")
            table = dict(value)
            if key == "flock" and FLOCK_FILE_KEY in table:
                flock_file = (table.pop(FLOCK_FILE_KEY), origin.child(FLOCK_FILE_KEY))
            raw[key] = _collect(table, key, origin)
        else:
            raise top.unknown(key, [*SCHEMA[""], *SECTIONS])

    override_entries, override_file = _override_entries(overrides or {}, file_label)
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
            "source_file": str(file),
        },
        where,
    )

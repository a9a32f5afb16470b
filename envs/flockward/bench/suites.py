"""Benchmark suites: TOML lists of (scenario, overrides, seed range) entries, read into records.

A suite fixes exactly which episodes a controller is scored on. Its :func:`suite_hash` covers what
determines every episode (each scenario's hash, which includes the model version, plus names,
overrides and seeds), so two result files with the same hash were played on the same episodes.
The shipped suites' hashes are recorded in ``KNOWN_SUITE_HASHES``: changing a shipped suite (or a
scenario it uses) without bumping its ``version`` fails the test suite.

File layout::

    name = "smoke"              # lower-case name, also the results sub-directory
    version = 1                 # integer >= 1; bump it whenever the episodes change
    description = "..."         # optional

    [[entry]]
    scenario = "headon"         # a shipped scenario name or a path relative to this file
    overrides = { "flock.count" = 10, name = "headon-10" }   # optional, dotted scenario keys
    seeds = [1000, 1019]        # inclusive: 20 episodes
    family = "headon-small"     # optional label for grouping results; default: scenario name
    tier = 2                    # optional rung of a difficulty ladder, 1 (default) the easiest
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

from flockward.config.files import (
    ConfigError,
    config_dir,
    list_scenarios,
    looks_like_path,
    read_toml,
    shipped_names,
)
from flockward.config.files import label as _label
from flockward.config.hashing import scenario_hash
from flockward.config.scenarios import load_scenario
from flockward.config.schema import SECTIONS, Origin, convert
from flockward.sim.spec import Spec
from flockward.sim.types import Scenario

__all__ = [
    "KNOWN_SUITE_HASHES",
    "EpisodeSpec",
    "Suite",
    "SuiteEntry",
    "list_suites",
    "load_suite",
    "suite_hash",
]

# sha256 of each shipped suite's resolved episodes, by (name, version). A changed suite needs a
# new version and a new row here (tests/test_suites.py prints the value to record).
KNOWN_SUITE_HASHES: dict[tuple[str, int], str] = {
    ("smoke", 2): "a361c1321ae5fad57349d2a50ad6852a7f9743fa1068d8d6ad00ad93ef5ecaea",
    ("standard", 2): "dd498d4ec615d126f1465a0a9ea0a6e5d8157d8faa6f02c93671fe49afeee81b",
    ("stress", 2): "7ce62d900038c2d36ff5f072ca66467d549e71423fe9e6ccdf862b405e186d01",
    ("validation", 2): "4ff2e9f7b05e649087da87186d963ddb3c4f34eb48f092afdddae5fe0570908b",
    # Model version 2 (flockward/Divert-v2): every suite's episodes changed.
    ("ladder", 1): "6527f570d8d2546ee8c0c93dd1e8666786f4398ecbe8d6beeba65fc17ea869b4",
    ("smoke", 3): "233cfffa8338ae841f9421650d0d2fa889354533daf127a399954125a00c56fc",
    ("standard", 3): "67671cc93d2a9415815c4687ca74e336a84b72fbf317af5053c5f265a179d1fd",
    ("stress", 3): "fc5f74a338932c19837c828ce45b89888601c82241abd5bac0fd621e0f422fd2",
    ("validation", 3): "ee9f4da0047d055068f389cf86ab107fd7c906b4d1f12b74a456566a8a490531",
    # Standard 4: three families added (far-goal, two-zones, two-flocks); stress 4: two open
    # challenges added (far-goal-behind, two-flocks-trailing).
    ("standard", 4): "f618b0aa220d6ec5a895adaf1d348ac0f06b64da34b243f9a02d8361cfded877",
    ("stress", 4): "29571647fd5c766449df0c12f780811b3e982a3c38fc9aef09b7af311a3bed8c",
    # Field 1: one drone against two on a large flock, gusty crosswind, radar and camera sensing,
    # and two drones with wind and radar together.
    ("field", 1): "2725d1294d1363518152a48ff8007d2d9bb5c59264576343a245a9825443e98a",
    # Validation 4: the standard suite's three new families added.
    ("validation", 4): "efa7dfa1bd7a93221154549ba5daa01d655a4b93eccbae5fddf54ecd9b39f241",
}

_MAX_SEED = 2**31 - 1
_MAX_VERSION = 1_000_000
_NAME = Spec("name")
# The suite file's top-level values, checked like scenario keys (one-line errors, same wording).
_TOP_SPECS = {
    "name": _NAME,
    "version": Spec("int", 1, _MAX_VERSION),
    "description": Spec("str", max_len=2000),
}
_TOP_KEYS = ("name", "version", "description", "entry")
_ENTRY_KEYS = ("scenario", "overrides", "seeds", "family", "tier")
_TIER = Spec("int", 1, 100)


@dataclass(frozen=True)
class SuiteEntry:
    """One line of a suite: a resolved scenario played from every seed of an inclusive range."""

    family: str  # label grouping results; the scenario name unless the file sets one
    scenario: Scenario  # with the entry's overrides applied
    overrides: tuple[tuple[str, object], ...]  # (dotted key, value), sorted by key
    seeds: tuple[int, int]  # first, last (inclusive)
    tier: int = 1  # rung of a difficulty ladder, 1 the easiest; suites without tiers are all 1
    # the scenario name or resolved file path the entry was built from, for rebuilding it with
    # further overrides (training's reward.gamma); not part of the suite's hash
    source: str = ""

    @property
    def count(self) -> int:
        """Episodes this entry contributes."""
        return self.seeds[1] - self.seeds[0] + 1


@dataclass(frozen=True)
class EpisodeSpec:
    """One episode of a suite; ``index`` is its position in the suite's fixed order."""

    family: str
    scenario_name: str
    seed: int
    index: int


@dataclass(frozen=True)
class Suite:
    """A validated suite; ``entries`` in file order."""

    name: str
    version: int
    description: str
    entries: tuple[SuiteEntry, ...]
    source_file: str

    def episodes(self) -> list[EpisodeSpec]:
        """Every episode: entries in file order, seeds ascending within each, indices 0..n-1."""
        specs: list[EpisodeSpec] = []
        for entry in self.entries:
            for seed in range(entry.seeds[0], entry.seeds[1] + 1):
                specs.append(EpisodeSpec(entry.family, entry.scenario.name, seed, len(specs)))
        return specs

    @property
    def scenarios(self) -> dict[str, Scenario]:
        """The resolved scenarios by name (names are unique within a suite)."""
        return {entry.scenario.name: entry.scenario for entry in self.entries}


def list_suites() -> list[str]:
    """Names of the shipped suites (file stems under configs/suites/)."""
    return shipped_names("suites")


def _suite_file(name_or_path: str | Path) -> Path:
    text = str(name_or_path)
    if looks_like_path(name_or_path):
        return Path(name_or_path)
    if text not in list_suites():
        raise ConfigError(f"{text}: unknown suite name; shipped: {', '.join(list_suites())}")
    return config_dir() / "suites" / f"{text}.toml"


def _flat_overrides(table: Mapping[str, object]) -> dict[str, object]:
    """Dotted keys from ``{ "flock.count" = 10 }`` or TOML's nested ``{ flock.count = 10 }``.

    Only one level is unfolded: a section's value stays whole, so zone tables survive intact.
    """
    flat: dict[str, object] = {}
    for key, value in table.items():
        if key in SECTIONS and isinstance(value, Mapping):
            for sub, inner in value.items():
                flat[f"{key}.{sub}"] = inner
        else:
            flat[key] = value
    return flat


class _EntryErrors:
    """One-line errors about entry number ``n`` (1-based) of the suite file ``label``."""

    def __init__(self, label: str, n: int):
        self.prefix = f"{label}: entry {n}"
        self.origin = Origin(self.prefix, "")

    def __call__(self, key: str, value: object, allowed: str) -> ConfigError:
        return self.origin.child(key).error(value, allowed)

    def plain(self, message: str) -> ConfigError:
        """An error about the entry as a whole rather than one key's value."""
        return ConfigError(f"{self.prefix}: {message}")


def _check_entry_keys(raw: Mapping[str, object], fail: _EntryErrors) -> None:
    """Only known keys, and the required ones present."""
    for key in raw:
        if key not in _ENTRY_KEYS:
            raise fail.plain(f"unknown key '{key}'; allowed: {', '.join(_ENTRY_KEYS)}")
    for key in ("scenario", "seeds"):
        if key not in raw:
            raise fail.plain(f"missing key '{key}'")


def _scenario_ref(ref: object, base: Path, fail: _EntryErrors) -> tuple[str, bool]:
    """The entry's scenario reference and whether it is a path (relative to ``base``)."""
    if not isinstance(ref, str) or not ref:
        raise fail("scenario", ref, "must be a shipped scenario name or a path to a TOML file")
    is_path = looks_like_path(ref)
    if not is_path and ref not in list_scenarios():
        raise fail(
            "scenario",
            ref,
            f"unknown scenario; shipped: {', '.join(list_scenarios())} "
            "(or a path relative to the suite file)",
        )
    if is_path and not (base / ref).is_file():
        raise fail("scenario", ref, f"no such file {_label(base / ref)}")
    return ref, is_path


def _seed_range(seeds: object, fail: _EntryErrors) -> tuple[int, int]:
    """The entry's inclusive ``[first, last]`` seeds."""
    if (
        not isinstance(seeds, list)
        or len(seeds) != 2
        or not all(isinstance(s, int) and not isinstance(s, bool) for s in seeds)
        or not 0 <= seeds[0] <= seeds[1] <= _MAX_SEED
    ):
        raise fail(
            "seeds",
            seeds,
            f"must be [first, last], integers with 0 <= first <= last <= {_MAX_SEED} "
            "(inclusive; an empty or reversed range plays nothing)",
        )
    return int(seeds[0]), int(seeds[1])


def _entry(raw: object, n: int, label: str, base: Path) -> SuiteEntry:
    """Validate entry number ``n`` (1-based) of the file ``label``."""
    fail = _EntryErrors(label, n)
    if not isinstance(raw, Mapping):
        raise fail.plain("must be a table ([[entry]])")
    _check_entry_keys(raw, fail)
    ref, is_path = _scenario_ref(raw["scenario"], base, fail)
    seeds = _seed_range(raw["seeds"], fail)
    overrides_raw = raw.get("overrides", {})
    if not isinstance(overrides_raw, Mapping):
        raise fail(
            "overrides", overrides_raw, 'must be an inline table, e.g. { "flock.count" = 80 }'
        )
    overrides = _flat_overrides(overrides_raw)
    try:
        scenario = load_scenario(base / ref if is_path else ref, overrides)
    except ConfigError as error:
        raise fail.plain(str(error)) from None

    family = convert(raw.get("family", scenario.name), _NAME, fail.origin.child("family"))
    tier = convert(raw.get("tier", 1), _TIER, fail.origin.child("tier"))
    return SuiteEntry(
        family=str(family),
        scenario=scenario,
        overrides=tuple(sorted(overrides.items())),
        seeds=seeds,
        tier=int(tier),  # type: ignore[call-overload]
        source=str(base / ref) if is_path else ref,
    )


def load_suite(name_or_path: str | Path) -> Suite:
    """Read and validate a suite: a shipped name (see list_suites) or a TOML path.

    Raises ConfigError with a one-line message naming the file, the key, the value and what is
    allowed.
    """
    file = _suite_file(name_or_path)
    label = _label(file)
    data = read_toml(file)
    for key in data:
        if key not in _TOP_KEYS:
            raise ConfigError(f"{label}: unknown key '{key}'; allowed: {', '.join(_TOP_KEYS)}")
    for key in ("name", "version", "entry"):
        if key not in data:
            raise ConfigError(f"{label}: missing key '{key}'")
    top = Origin(label, "")
    name, version, description = (
        convert(data.get(key, ""), spec, top.child(key)) for key, spec in _TOP_SPECS.items()
    )
    assert isinstance(version, int)  # convert returned an int for an "int" spec
    raw_entries = data["entry"]
    if not isinstance(raw_entries, list) or not raw_entries:
        raise ConfigError(f"{label}: key 'entry': must be one or more [[entry]] tables")

    entries = tuple(
        _entry(raw, n, label, file.parent) for n, raw in enumerate(raw_entries, start=1)
    )
    _check_distinct(entries, label)
    return Suite(str(name), version, str(description), entries, str(file))


def _check_distinct(entries: tuple[SuiteEntry, ...], label: str) -> None:
    """One scenario per name (results are keyed by name) and no episode played twice."""
    hashes: dict[str, tuple[str, int]] = {}
    seen: dict[tuple[str, int], int] = {}
    for n, entry in enumerate(entries, start=1):
        name, digest = entry.scenario.name, scenario_hash(entry.scenario)
        if name in hashes and hashes[name][0] != digest:
            raise ConfigError(
                f"{label}: entry {n}: scenario name '{name}' already names a different scenario "
                f"in entry {hashes[name][1]}; give one a distinct name, e.g. "
                f'overrides = {{ name = "{name}-{n}" }}'
            )
        hashes.setdefault(name, (digest, n))
        first = next(
            (s for s in range(entry.seeds[0], entry.seeds[1] + 1) if (name, s) in seen), None
        )
        if first is not None:
            raise ConfigError(
                f"{label}: entry {n}: key 'seeds' = {list(entry.seeds)}: seed {first} of "
                f"scenario '{name}' is already played by entry {seen[(name, first)]}; "
                "seed ranges of one scenario must not overlap"
            )
        for seed in range(entry.seeds[0], entry.seeds[1] + 1):
            seen[(name, seed)] = n


def _canonical_suite(suite: Suite) -> dict[str, object]:
    """What the hash covers: name, version and every entry's resolved content (not the prose)."""
    return {
        "name": suite.name,
        "version": suite.version,
        "entries": [_canonical_entry(e) for e in suite.entries],
    }


def _canonical_entry(entry: SuiteEntry) -> dict[str, object]:
    """One entry's hashed content; the tier only where set, so suites without tiers keep their
    hashes."""
    canonical: dict[str, object] = {
        "family": entry.family,
        "scenario": entry.scenario.name,
        "scenario_hash": scenario_hash(entry.scenario),
        "overrides": [[k, v] for k, v in entry.overrides],
        "seeds": list(entry.seeds),
    }
    if entry.tier != 1:
        canonical["tier"] = entry.tier
    return canonical


def suite_hash(suite: Suite) -> str:
    """sha256 (hex) of the suite's canonical resolved episodes; any change of content changes it."""
    text = json.dumps(
        _canonical_suite(suite), sort_keys=True, separators=(",", ":"), allow_nan=False
    )
    return hashlib.sha256(text.encode("utf-8")).hexdigest()

"""Suites: the shipped ones, their recorded hashes, episode order, one-line validation errors."""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from flockward.bench.suites import (
    KNOWN_SUITE_HASHES,
    EpisodeSpec,
    list_suites,
    load_suite,
    suite_hash,
)
from flockward.config.scenarios import ConfigError, list_scenarios
from flockward.sim.geometry import zone_center

ROOT = Path(__file__).resolve().parent.parent


def _write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


TINY = """
name = "tiny"
version = 1
[[entry]]
scenario = "trio"
seeds = [5, 7]
[[entry]]
scenario = "headon"
family = "gulls"
overrides = { "episode.max_steps" = 50 }
seeds = [0, 1]
"""


def test_shipped_suites_are_the_expected_ones() -> None:
    assert {"smoke", "standard", "stress"} <= set(list_suites())


@pytest.mark.parametrize("name", list_suites())
def test_shipped_suite_hash_is_recorded(name: str) -> None:
    suite = load_suite(name)
    assert suite.name == name
    digest = suite_hash(suite)
    key = (suite.name, suite.version)
    assert key in KNOWN_SUITE_HASHES, (
        f"suite {name!r} version {suite.version} has no recorded hash; add "
        f"{key!r}: {digest!r} to KNOWN_SUITE_HASHES in flockward/bench/suites.py"
    )
    assert KNOWN_SUITE_HASHES[key] == digest, (
        f"suite {name!r} version {suite.version} now hashes to {digest}, not the recorded "
        f"{KNOWN_SUITE_HASHES[key]}: its episodes changed (the suite file or a scenario it uses). "
        "Published results would no longer be comparable: bump the version and record the new "
        f"hash in KNOWN_SUITE_HASHES ({name!r}, {suite.version + 1}): {digest!r}"
    )


def test_standard_suite_covers_the_benchmark() -> None:
    suite = load_suite("standard")
    families = {e.family for e in suite.entries}
    assert len(families) >= 6
    counts = [e.scenario.flock.count for e in suite.entries]
    ranged = [e.scenario.randomise.count for e in suite.entries if e.scenario.randomise.count]
    assert min(counts + [lo for lo, _ in ranged]) <= 10
    assert max(counts + [hi for _, hi in ranged]) >= 100
    assert {e.scenario.flock.formation for e in suite.entries} >= {"disc", "hex", "line", "cluster"}
    # Calm: the species' own small heading noise (0.05 rad/s^0.5 or less).
    assert any(e.scenario.flock.noise_std <= 0.05 for e in suite.entries)
    # Noisy families: herdable noise here; noise that frays the flock (polarisation falls well
    # below 1) and the murmurations are the stress suite's open challenges.
    assert any(e.scenario.flock.noise_std >= 0.2 for e in suite.entries)
    stress = load_suite("stress")
    assert any(e.scenario.flock.noise_std >= 0.5 for e in stress.entries)
    assert max(e.scenario.flock.count for e in stress.entries) >= 300
    # Birds nearly as fast as the drone: escape speed within 5 % of its top speed.
    assert any(
        e.scenario.flock.burst_speed >= 0.95 * e.scenario.pursuer.max_speed for e in suite.entries
    )

    # A goal beyond the zone seen from the start, two protected zones, a flock in two groups.
    def far_side(entry: Any) -> bool:
        site = entry.scenario.site
        start, zone = np.asarray(site.flock_start), np.asarray(zone_center(site.protected_zones[0]))
        return float((np.asarray(zone_center(site.goal)) - zone) @ (zone - start)) > 0.0

    assert any(far_side(e) for e in suite.entries)
    assert any(len(e.scenario.site.protected_zones) >= 2 for e in suite.entries)
    assert any(e.scenario.site.second_start is not None for e in suite.entries)
    per_family: dict[str, int] = {}
    for entry in suite.entries:
        per_family[entry.family] = per_family.get(entry.family, 0) + entry.count
        assert entry.seeds[0] >= 1000
    assert min(per_family.values()) >= 20


def test_episodes_are_in_file_then_seed_order(tmp_path: Path) -> None:
    suite = load_suite(_write(tmp_path / "tiny.toml", TINY))
    assert suite.episodes() == [
        EpisodeSpec("trio", "trio", 5, 0),
        EpisodeSpec("trio", "trio", 6, 1),
        EpisodeSpec("trio", "trio", 7, 2),
        EpisodeSpec("gulls", "headon", 0, 3),
        EpisodeSpec("gulls", "headon", 1, 4),
    ]
    assert suite.entries[1].scenario.episode.max_steps == 50


def test_dotted_and_nested_overrides_agree(tmp_path: Path) -> None:
    quoted = TINY.replace('"episode.max_steps" = 50', '"episode.max_steps" = 50, name = "h"')
    nested = TINY.replace('"episode.max_steps" = 50', 'episode.max_steps = 50, name = "h"')
    a = load_suite(_write(tmp_path / "a.toml", quoted))
    b = load_suite(_write(tmp_path / "b.toml", nested))
    assert a.entries == b.entries
    assert suite_hash(a) == suite_hash(b)


def test_zone_override_reaches_the_scenario(tmp_path: Path) -> None:
    text = TINY.replace(
        '"episode.max_steps" = 50',
        "site.protected = { circle = { center = [0.0, 0.0], radius = 220.0 } }",
    )
    suite = load_suite(_write(tmp_path / "zone.toml", text))
    assert suite.entries[1].scenario.site.protected.radius == 220.0


@pytest.mark.parametrize(
    ("old", "new"),
    [
        ("seeds = [5, 7]", "seeds = [5, 8]"),
        ("seeds = [0, 1]", "seeds = [1, 2]"),
        ('"episode.max_steps" = 50', '"episode.max_steps" = 51'),
        ("version = 1", "version = 2"),
        ('family = "gulls"', 'family = "gull"'),
        ('name = "tiny"', 'name = "tiny2"'),
        ('family = "gulls"', 'family = "gulls"\ntier = 2'),
    ],
)
def test_hash_follows_content(tmp_path: Path, old: str, new: str) -> None:
    base = suite_hash(load_suite(_write(tmp_path / "a.toml", TINY)))
    assert new != old and old in TINY
    changed = suite_hash(load_suite(_write(tmp_path / "b.toml", TINY.replace(old, new))))
    assert changed != base


def test_tier_one_is_the_default_and_leaves_the_hash_alone(tmp_path: Path) -> None:
    # Regression test: suites written before tiers existed keep their hashes.
    base = load_suite(_write(tmp_path / "a.toml", TINY))
    tiered = TINY.replace('family = "gulls"', 'family = "gulls"\ntier = 1')
    explicit = load_suite(_write(tmp_path / "b.toml", tiered))
    assert [e.tier for e in base.entries] == [1, 1] == [e.tier for e in explicit.entries]
    assert suite_hash(explicit) == suite_hash(base)


def test_ladder_tiers_rise_from_the_easiest() -> None:
    tiers = [e.tier for e in load_suite("ladder").entries]
    assert tiers == sorted(tiers) and tiers[0] == 1 and len(set(tiers)) >= 4


def test_hash_ignores_prose_and_location(tmp_path: Path) -> None:
    base = suite_hash(load_suite(_write(tmp_path / "a.toml", TINY)))
    (tmp_path / "sub").mkdir()
    described = TINY.replace("version = 1", 'version = 1\ndescription = "words"')
    assert suite_hash(load_suite(_write(tmp_path / "sub" / "b.toml", described))) == base


def test_hash_follows_a_scenario_file(tmp_path: Path) -> None:
    shutil.copy(ROOT / "configs" / "scenarios" / "trio.toml", tmp_path / "mine.toml")
    text = TINY.replace('scenario = "trio"', 'scenario = "mine.toml"')
    suite = load_suite(_write(tmp_path / "s.toml", text))
    assert suite.entries[0].scenario.flock.count == 3
    before = suite_hash(suite)
    scenario = tmp_path / "mine.toml"
    scenario.write_text(scenario.read_text().replace("count = 3", "count = 4"))
    assert suite_hash(load_suite(tmp_path / "s.toml")) != before


@pytest.mark.parametrize(
    ("old", "new", "expected"),
    [
        ("version = 1", "version = 1\ncolour = 2", "unknown key 'colour'; allowed: name"),
        ("seeds = [5, 7]", "seeds = [5, 7]\nseed = 3", "entry 1: unknown key 'seed'"),
        ("seeds = [5, 7]", "seeds = [7, 5]", "entry 1: key 'seeds' = [7, 5]: must be [first"),
        ("seeds = [5, 7]", "seeds = [-1, 2]", "key 'seeds' = [-1, 2]"),
        ("seeds = [5, 7]", "seeds = 5", "key 'seeds' = 5"),
        ("seeds = [5, 7]", 'seeds = ["a", "b"]', "key 'seeds'"),
        ("seeds = [5, 7]", "", "entry 1: missing key 'seeds'"),
        ('scenario = "trio"', 'scenario = "trios"', "unknown scenario; shipped: " + ", ".join(
            list_scenarios())),
        ('scenario = "trio"', 'scenario = "nope.toml"', "no such file"),
        ("version = 1", "version = 0", "key 'version' = 0: must be an integer in [1"),
        ("version = 1", "version = true", "key 'version' = true"),
        ("version = 1", "", "missing key 'version'"),
        ('name = "tiny"', 'name = "Tiny Suite"', "key 'name' = \"Tiny Suite\": must be a lower"),
        ('family = "gulls"', 'family = "Gulls!"', "entry 2: key 'family'"),
        ('family = "gulls"', 'family = "gulls"\ntier = 0', "entry 2: key 'tier' = 0: must be"),
        ('family = "gulls"', 'family = "gulls"\ntier = "easy"', "entry 2: key 'tier' = \"easy\""),
        ('"episode.max_steps" = 50', '"episode.max_steps" = 0', "override 'episode.max_steps'"),
        ('"episode.max_steps" = 50', '"flock.colour" = 1', "unknown override 'flock.colour'"),
        ('overrides = { "episode.max_steps" = 50 }', "overrides = 3", "key 'overrides' = 3"),
        ('seeds = [0, 1]', 'seeds = [0, 1]\n[[entry]]\nscenario = "trio"\nseeds = [7, 9]',
         "seed 7 of scenario 'trio' is already played by entry 1"),
        ('scenario = "headon"', "scenario = 3", "entry 2: key 'scenario' = 3: must be a shipped"),
        ("seeds = [0, 1]", 'seeds = [0, 1]\n[[entry]]\nscenario = "trio"\n'
         'overrides = { "flock.count" = 5 }\nseeds = [0, 1]',
         "scenario name 'trio' already names a different scenario in entry 1"),
    ],
)  # fmt: skip
def test_invalid_suite_is_one_line(tmp_path: Path, old: str, new: str, expected: str) -> None:
    assert old in TINY
    path = _write(tmp_path / "bad.toml", TINY.replace(old, new, 1))
    with pytest.raises(ConfigError) as info:
        load_suite(path)
    message = str(info.value)
    assert "\n" not in message
    assert "bad.toml" in message
    assert expected in message


def test_unknown_suite_name_lists_shipped() -> None:
    with pytest.raises(ConfigError, match=r"unknown suite name; shipped: .*standard"):
        load_suite("standrad")


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("name = ", "invalid TOML"),
        ('name = "x"\nversion = 1\nentry = []', "key 'entry': must be one or more"),
        ('name = "x"\nversion = 1\nentry = [1]', "entry 1: must be a table"),
    ],
)
def test_malformed_suite_file(tmp_path: Path, text: str, expected: str) -> None:
    with pytest.raises(ConfigError) as info:
        load_suite(_write(tmp_path / "bad.toml", text))
    assert expected in str(info.value)
    assert "\n" not in str(info.value)


def test_a_long_bad_value_is_not_echoed_whole(tmp_path):
    # Error messages stay one short line even when the offending value is kilobytes long.
    suite = tmp_path / "long.toml"
    suite.write_text(
        'name = "long"\nversion = 1\ndescription = "' + "x" * 5000 + '"\n'
        '[[entry]]\nscenario = "headon"\nseeds = [0, 1]\n'
    )
    with pytest.raises(ConfigError) as caught:
        load_suite(suite)
    message = str(caught.value)
    assert "key 'description'" in message and "5002 characters" in message
    assert len(message) < 400 and "\n" not in message

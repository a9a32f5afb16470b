"""Scenario and suite hashes track what is played: values that differ from the records' defaults
and the model version, nothing else."""

from __future__ import annotations

import dataclasses

import pytest

import flockward.config.hashing as hashing
from flockward.bench.suites import load_suite, suite_hash
from flockward.config.hashing import scenario_hash
from flockward.config.scenarios import load_scenario
from flockward.sim import types


@dataclasses.dataclass(frozen=True)
class FlockParams(types.FlockParams):
    """The flock record as it would read with one more parameter whose default changes nothing."""

    wing_loading: float = 1.0  # a parameter added later; 1.0 reproduces today's behaviour


def _with_new_field(scenario: types.Scenario, **extra: float) -> types.Scenario:
    values = {f.name: getattr(scenario.flock, f.name) for f in dataclasses.fields(scenario.flock)}
    return dataclasses.replace(scenario, flock=FlockParams(**values, **extra))


@pytest.mark.parametrize("name", ["headon", "crosswind-mix"])
def test_new_field_at_its_default_keeps_the_hash(name: str) -> None:
    scenario = load_scenario(name)
    assert scenario_hash(_with_new_field(scenario)) == scenario_hash(scenario)


def test_new_field_away_from_its_default_changes_the_hash() -> None:
    scenario = load_scenario("headon")
    assert scenario_hash(_with_new_field(scenario, wing_loading=2.0)) != scenario_hash(scenario)


@pytest.mark.parametrize(
    "override",
    [
        {"flock.count": 51},
        {"episode.max_steps": 1501},
        {"site.goal": {"circle": {"center": [0.0, 520.0], "radius": 150.0}}},
        {"randomise.count": [20, 30]},
        {"name": "headon-renamed"},
    ],
)
def test_changed_value_changes_the_hash(override: dict) -> None:
    assert scenario_hash(load_scenario("headon", override)) != scenario_hash(
        load_scenario("headon")
    )


def test_default_written_out_keeps_the_hash() -> None:
    base = load_scenario("headon")
    explicit = load_scenario("headon", {"reward.gamma": types.RewardWeights().gamma})
    assert scenario_hash(explicit) == scenario_hash(base)


def test_description_is_not_hashed() -> None:
    base = load_scenario("headon")
    assert scenario_hash(load_scenario("headon", {"description": "words"})) == scenario_hash(base)


def test_model_version_bump_changes_scenario_and_suite_hashes(monkeypatch) -> None:
    scenario, suite = load_scenario("headon"), load_suite("smoke")
    before = scenario_hash(scenario), suite_hash(suite)
    monkeypatch.setattr(hashing, "MODEL_VERSION", hashing.MODEL_VERSION + 1)
    after = scenario_hash(scenario), suite_hash(suite)
    assert after[0] != before[0] and after[1] != before[1]

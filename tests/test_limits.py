"""Parameter records check their own ranges and relations when built in Python."""

from __future__ import annotations

import dataclasses

import pytest

from flockward.config.scenarios import ConfigError, load_scenario
from flockward.sim.limits import LIMITS, RECORD_SECTIONS, ParameterError, derived
from flockward.sim.types import (
    Circle,
    EpisodeParams,
    FlockParams,
    Polygon,
    PursuerParams,
    Randomisation,
    RewardWeights,
    Scenario,
    SiteParams,
)

RUNWAY = Polygon(((-50.0, -20.0), (50.0, -20.0), (50.0, 20.0), (-50.0, 20.0)))


def _refused(build, record: str, key: str, rule: str) -> ParameterError:
    with pytest.raises(ParameterError) as info:
        build()
    message = str(info.value)
    assert isinstance(info.value, ValueError)
    assert "\n" not in message
    assert message.startswith(f"{record}.{key} = "), message
    assert rule in message, message
    return info.value


def test_defaults_build() -> None:
    for cls in RECORD_SECTIONS:
        record = cls(name="default") if cls is Scenario else cls()
        assert dataclasses.is_dataclass(record)


def test_every_record_field_has_a_spec() -> None:
    for cls, section in RECORD_SECTIONS.items():
        names = {f.name for f in dataclasses.fields(cls)} - {"source_file"}
        if cls is Scenario:
            names &= {"name", "description"}
        assert names == set(LIMITS[section]), cls.__name__


@pytest.mark.parametrize(
    ("build", "record", "key", "rule"),
    [
        (lambda: FlockParams(count=0), "FlockParams", "count", "integer in [1, 5000] birds"),
        (lambda: FlockParams(count=True), "FlockParams", "count", "integer in [1, 5000]"),
        (lambda: FlockParams(spacing=float("nan")), "FlockParams", "spacing", "finite number"),
        (lambda: FlockParams(formation="ring"), "FlockParams", "formation", "one of: disc"),
        (lambda: FlockParams(name="Gulls"), "FlockParams", "name", "lower-case name"),
        (lambda: EpisodeParams(dt=0.0), "EpisodeParams", "dt", "finite number in (0, 1] s"),
        (lambda: EpisodeParams(max_steps=2.5), "EpisodeParams", "max_steps", "integer"),
        (lambda: PursuerParams(max_speed=50.0), "PursuerParams", "max_speed", "(0, 44.7] m/s"),
        (lambda: PursuerParams(start=(0.0,)), "PursuerParams", "start", "must be [x, y]"),
        (lambda: RewardWeights(discount=1.5), "RewardWeights", "discount", "[0, 1]"),
        (lambda: Randomisation(count=(5, 2)), "Randomisation", "count", "lo <= hi"),
        (lambda: Randomisation(gain_scale=(0.0, 2.0)), "Randomisation", "gain_scale", "(0, 10]"),
        (
            lambda: SiteParams(protected=Circle((0.0, 0.0), 0.0)),
            "SiteParams",
            "protected",
            "must be one zone, { circle",
        ),
        (
            lambda: SiteParams(protected=(Circle((0.0, 0.0), 10.0),) * 9),
            "SiteParams",
            "protected",
            "a list of 1 to 8 such zones",
        ),
        (
            lambda: SiteParams(protected=Polygon(((0.0, 0.0), (1.0, 1.0), (2.0, 2.0)))),
            "SiteParams",
            "protected",
            "non-zero area",
        ),
        (
            lambda: SiteParams(
                protected=Polygon(((0.0, 0.0), (10.0, 10.0), (10.0, 0.0), (0.0, 10.0)))
            ),
            "SiteParams",
            "protected",
            "simple polygon",
        ),
    ],
)
def test_out_of_range_field_refused(build, record: str, key: str, rule: str) -> None:
    _refused(build, record, key, rule)


# One case per relation between fields.


def test_min_speed_above_max_speed() -> None:
    error = _refused(
        lambda: FlockParams(min_speed=30.0, max_speed=10.0),
        "FlockParams",
        "max_speed",
        "must keep min_speed <= max_speed (now 30 > 10 m/s)",
    )
    assert error.keys == ("max_speed", "min_speed")
    assert error.blaming("min_speed") == (30.0, error.allowed)


def test_cruise_speed_outside_speed_range() -> None:
    _refused(
        lambda: FlockParams(cruise_speed=25.0),
        "FlockParams",
        "cruise_speed",
        "min_speed <= cruise_speed <= max_speed (now 3.75, 25, 23.4 m/s)",
    )


def test_initial_speed_outside_speed_range() -> None:
    _refused(
        lambda: FlockParams(speed=3.0),
        "FlockParams",
        "speed",
        "min_speed <= speed <= max_speed",
    )


def test_dodge_radius_not_inside_alarm_radius() -> None:
    _refused(
        lambda: FlockParams(dodge_radius=80.0),
        "FlockParams",
        "dodge_radius",
        "dodge_radius < alarm_radius",
    )


def test_flee_acceleration_must_stay_below_the_budget() -> None:
    _refused(
        lambda: FlockParams(flee_accel=12.0),  # the default budget max_accel is 12 m/s^2
        "FlockParams",
        "flee_accel",
        "flee_accel < max_accel",
    )


def test_goal_overlapping_protected_zone() -> None:
    error = _refused(
        lambda: SiteParams(protected=RUNWAY, goal=Circle((0.0, 30.0), 20.0)),
        "SiteParams",
        "goal",
        "must lie clear of site.protected (polygon of 4 vertices",
    )
    assert "clear of site.goal (circle centre (0, 30) radius 20 m)" in error.blaming("protected")[1]


def test_destination_equal_to_flock_start() -> None:
    _refused(
        lambda: SiteParams(destination=(-600.0, 0.0)),
        "SiteParams",
        "destination",
        "must differ (it sets the heading) from site.flock_start ((-600, 0))",
    )


def test_flock_start_inside_protected_zone() -> None:
    error = _refused(
        lambda: SiteParams(flock_start=(10.0, 0.0)),
        "SiteParams",
        "flock_start",
        "must lie outside site.protected (circle centre (0, 0) radius 150 m)",
    )
    assert error.blaming("protected")[1].startswith("must not contain site.flock_start")


def test_randomised_cruise_speed_outside_flock_speeds() -> None:
    _refused(
        lambda: Scenario(name="s", randomise=Randomisation(cruise_speed=(2.0, 15.0))),
        "Scenario",
        "randomise.cruise_speed",
        "must lie within [flock.min_speed, flock.max_speed] = [3.75, 23.4] m/s",
    )


def test_loader_names_file_and_key_for_a_record_rule() -> None:
    with pytest.raises(ConfigError) as info:
        load_scenario("headon", {"flock.min_speed": 30})
    message = str(info.value)
    assert message.split(": ")[0].endswith("headon.toml")
    assert ": override 'flock.min_speed' = 30: " in message
    assert "must keep min_speed <= max_speed" in message


def test_derived_copy_skips_range_checks_but_not_field_names() -> None:
    flock = FlockParams()
    turned = derived(flock, heading_deg=500.0, alignment_gain=400.0)
    assert turned.heading_deg == 500.0 and turned.alignment_gain == 400.0
    assert flock.heading_deg is None  # the original is untouched
    with pytest.raises(ParameterError):
        dataclasses.replace(flock, heading_deg=500.0)
    with pytest.raises(TypeError, match="no field wingspan"):
        derived(flock, wingspan=1.0)


def test_every_parameter_field_declares_its_spec_beside_it():
    # A parameter's range lives on its field (flockward.sim.spec.param), so a new parameter is one
    # line in flockward.sim.types; the only fields without a spec hold nested records or provenance.
    from dataclasses import fields

    from flockward.sim.spec import spec_of

    unchecked = {
        "flock",
        "pursuer",
        "site",
        "episode",
        "reward",
        "randomise",
        "wind",
        "sensor",
        "drones",
        "source_file",
    }
    for record, section in RECORD_SECTIONS.items():
        for f in fields(record):
            if f.name in unchecked and record.__name__ == "Scenario":
                continue
            assert spec_of(f) is not None, f"{record.__name__}.{f.name} has no spec"
            assert LIMITS[section][f.name] is spec_of(f)

"""Scenario loading, validation, reset sampling and initial formations."""

from __future__ import annotations

import dataclasses
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial import cKDTree

from flockward.config.scenarios import (
    SCHEMA,
    ConfigError,
    config_dir,
    config_kind,
    config_reference,
    describe,
    list_flocks,
    list_pursuers,
    list_scenarios,
    load_flock,
    load_pursuer,
    load_scenario,
    parse_override,
    sample_reset,
    scenario_hash,
)
from flockward.sim.formations import formation_offsets
from flockward.sim.types import FORMATIONS, SCALABLE_GAINS, Circle, Polygon, Randomisation

ROOT = Path(__file__).resolve().parent.parent
BAD = Path(__file__).resolve().parent / "fixtures" / "bad"
SCENARIO_FILES = sorted((ROOT / "configs" / "scenarios").glob("*.toml"))
FLOCK_FILES = sorted((ROOT / "configs" / "flocks").glob("*.toml"))
PURSUER_FILES = sorted((ROOT / "configs" / "pursuers").glob("*.toml"))

# fixture -> (dotted key the message must name, fragment of what is allowed)
BAD_CASES = {
    "unknown_key.toml": ("'flock.cout'", "allowed: name, source, count"),
    "flee_cap.toml": ("'flock.flee_accel'", "flee_accel < max_accel"),
    "wrong_type.toml": ("'flock.count'", "integer in [1, 5000]"),
    "bool_number.toml": ("'episode.dt'", "finite number in (0, 1] s"),
    "nan_value.toml": ("'flock.spacing'", "finite number"),
    "inf_value.toml": ("'pursuer.max_speed'", "finite number in (0, 44.7] m/s"),
    "out_of_range.toml": ("'flock.count'", "integer in [1, 5000]"),
    "degenerate_polygon.toml": ("'site.protected.polygon'", "3 to 256 vertices"),
    "zero_area_polygon.toml": ("'site.protected.polygon'", "non-zero area"),
    "self_intersecting.toml": ("'site.protected.polygon'", "no crossing edges"),
    "goal_inside_zone.toml": ("'site.goal'", "clear of site.protected"),
    "goal_overlaps_runway.toml": ("'site.goal'", "clear of site.protected"),
    "bad_syntax.toml": ("invalid TOML", "line 4, column"),
    "lo_gt_hi.toml": ("'randomise.count'", "lo <= hi"),
    "missing_flock_file.toml": ("'flock.file'", "shipped flock (geese, gulls, pigeons, starlings)"),
    "speed_order.toml": ("'flock.cruise_speed'", "min_speed <= cruise_speed <= max_speed"),
    "dodge_radius.toml": ("'flock.dodge_radius'", "dodge_radius < alarm_radius"),
    "destination_is_start.toml": ("'site.destination'", "must differ"),
    "unknown_zone_shape.toml": ("'site.protected.square'", "allowed: circle, polygon"),
    "flock_typo.toml": ("'spacng'", "allowed: name, source"),
}


def _load_any(path: Path) -> object:
    loaders = {"scenario": load_scenario, "flock": load_flock, "pursuer": load_pursuer}
    return loaders[config_kind(path)](path)


# ---------------------------------------------------------------------------------------------
# Shipped configs.


def test_shipped_lists_match_directories() -> None:
    assert list_scenarios() == sorted(p.stem for p in SCENARIO_FILES)
    assert list_flocks() == sorted(p.stem for p in FLOCK_FILES)
    assert list_pursuers() == sorted(p.stem for p in PURSUER_FILES) == ["fixed-wing", "multirotor"]
    assert config_dir().resolve() == (ROOT / "configs").resolve()
    required = {"headon", "oblique", "trio", "murmuration", "geese-line", "pigeons-cluster"}
    assert required | {"crosswind-mix"} <= set(list_scenarios())


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.stem)
def test_shipped_scenario_validates(path: Path) -> None:
    scenario = load_scenario(path)
    assert scenario.name == path.stem
    assert scenario.description
    assert path.read_text().startswith("#"), "every config starts with a header comment"
    assert load_scenario(path.stem) == scenario  # by name and by path alike
    # Layout rules of the benchmark: flock starts 500-700 m from the (first) zone, dt = 0.1 s.
    zone = scenario.site.protected_zones[0]
    centre = zone.center if isinstance(zone, Circle) else tuple(np.mean(zone.vertices, axis=0))
    assert 500.0 <= math.dist(centre, scenario.site.flock_start) <= 700.0
    assert scenario.episode.dt == 0.1
    assert 1200 <= scenario.episode.max_steps <= 1800


@pytest.mark.parametrize("path", FLOCK_FILES, ids=lambda p: p.stem)
def test_shipped_flock_validates(path: Path) -> None:
    flock = load_flock(path)
    assert flock.name == path.stem
    assert "Alerstam et al. 2007" in flock.source
    assert path.read_text().startswith("#")


# Cruise-speed ranges from memory of Alerstam et al. 2007, PLoS Biol 5:e197 (not checked against
# its species table).
CRUISE_RANGES = {"gulls": (11, 14), "starlings": (15, 18), "geese": (16, 19), "pigeons": (15, 18)}


@pytest.mark.parametrize("name", sorted(CRUISE_RANGES))
def test_flock_cruise_speed_in_published_range(name: str) -> None:
    flock = load_flock(name)
    lo, hi = CRUISE_RANGES[name]
    assert lo <= flock.cruise_speed <= hi


def test_flock_speed_limits_cover_measured_airspeeds() -> None:
    # Confirmed single measurements must be flyable within [min_speed, max_speed]:
    # Sabine's gull 13.9 m/s, Ross's gull 12.2 and 14.6 m/s (Hedenstrom 1998, Arctic);
    # a Brent goose at 14.5 m/s (Pennycuick et al. 2013); ducks and geese about 18 m/s
    # (Cooke, USDA Circular 428, 1937).
    gulls, geese = load_flock("gulls"), load_flock("geese")
    for v in (13.9, 12.2, 14.6):
        assert gulls.min_speed <= v <= gulls.max_speed
    for v in (14.5, 18.0):
        assert geese.min_speed <= v <= geese.max_speed


def test_species_scaling() -> None:
    gulls, starlings, geese = load_flock("gulls"), load_flock("starlings"), load_flock("geese")
    assert starlings.spacing < gulls.spacing < geese.spacing
    assert starlings.count > gulls.count
    assert starlings.cohesion_radius < gulls.cohesion_radius


def test_required_scenario_features() -> None:
    s = {name: load_scenario(name) for name in list_scenarios()}
    assert s["headon"].flock.name == "gulls" and s["headon"].flock.count == 50
    assert s["trio"].flock.count == 3
    assert s["murmuration"].flock.name == "starlings" and s["murmuration"].flock.count == 300
    assert s["geese-line"].flock.formation == "line"
    assert s["pigeons-cluster"].flock.formation == "cluster"
    assert s["pigeons-cluster"].flock.noise_std > 0
    mix = s["crosswind-mix"].randomise
    assert mix.count == (20, 80) and mix.heading_deg == (-20.0, 20.0)
    assert mix.gain_scale == (0.8, 1.2) and mix.offset_x is not None
    assert sum(isinstance(x.site.protected, Polygon) for x in s.values()) >= 2


def test_headon_route_crosses_zone_and_oblique_clips_edge() -> None:
    for name, lo, hi in (("headon", 0.0, 1.0), ("oblique", 60.0, 150.0)):
        site = load_scenario(name).site
        a, b = np.array(site.flock_start), np.array(site.destination)
        c = np.array(site.protected.center)
        d = b - a
        t = np.clip(np.dot(c - a, d) / np.dot(d, d), 0.0, 1.0)
        miss = float(np.linalg.norm(a + t * d - c))  # closest approach of the route to the centre
        assert lo <= miss < hi
    site = load_scenario("oblique").site
    bearing = math.degrees(math.atan2(*(np.subtract(site.destination, site.flock_start)[::-1])))
    assert 35.0 <= bearing <= 45.0


def test_runway_polygon_area() -> None:
    # Hand-worked: a 700 m x 120 m strip has area 84 000 m^2 (vertices rounded to 0.1 m).
    for name in ("geese-line", "crosswind-mix"):
        zone = load_scenario(name).site.protected
        assert isinstance(zone, Polygon)
        v = np.array(zone.vertices)
        area = 0.5 * abs(
            np.dot(v[:, 0], np.roll(v[:, 1], -1)) - np.dot(v[:, 1], np.roll(v[:, 0], -1))
        )
        assert area == pytest.approx(84_000.0, rel=1e-3)


def test_pursuer_speed_within_legal_groundspeed() -> None:
    # US 14 CFR 107.51: small drones may not exceed 87 kn (44.7 m/s) groundspeed.
    assert SCHEMA["pursuer"]["max_speed"].hi == 44.7
    for name in list_scenarios():
        s = load_scenario(name)
        assert s.pursuer.max_speed <= 44.7
        # Drone faster than the birds' cruise (common practice: 1.2-1.5x).
        assert s.pursuer.max_speed >= 1.2 * s.flock.cruise_speed


# ---------------------------------------------------------------------------------------------
# Rejected configs.


@pytest.mark.parametrize("fixture", sorted(BAD_CASES))
def test_bad_fixture_rejected(fixture: str) -> None:
    path = BAD / fixture
    key, allowed = BAD_CASES[fixture]
    with pytest.raises(ConfigError) as info:
        _load_any(path)
    message = str(info.value)
    assert "\n" not in message
    assert message.split(": ")[0].endswith(fixture)  # the file comes first
    assert key in message
    assert allowed in message


def test_every_bad_fixture_has_a_case() -> None:
    assert {p.name for p in BAD.glob("*.toml")} == set(BAD_CASES)


def test_missing_file_and_unknown_name() -> None:
    with pytest.raises(ConfigError, match="file not found"):
        load_scenario(BAD / "no-such-file.toml")
    with pytest.raises(ConfigError, match="unknown scenario name; shipped: crosswind-mix"):
        load_scenario("no-such-scenario")


def _write(tmp_path: Path, text: str, name: str = "s.toml") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ("[flock]\nmin_speed = 15.0\nmax_speed = 10.0\ncruise_speed = 12.0", "'flock.max_speed'"),
        ("[flock]\nspeed = 30.0", "'flock.speed'"),
        ("[flock]\ncount = 50.0", "'flock.count'"),
        ("[flock]\nformation = 'vee'", "'flock.formation'"),
        ("[flock]\nheading_deg = true", "'flock.heading_deg'"),
        ("[site]\nflock_start = [0.0, 10.0]", "'site.flock_start'"),
        ("[flock]\nmax_speed = 12.0", "'flock.max_speed' = 12: must keep min_speed <="),
        ("[site]\ndestination = [1.0, 2.0, 3.0]", "'site.destination'"),
        ("[site]\ngoal = { circle = { center = [0.0, 600.0] } }", "'site.goal.circle'"),
        ("[site]\ngoal = { circle = { center = [0, 600], radius = -1 } }", "circle.radius'"),
        ("[randomise]\ncruise_speed = [2.0, 14.0]", "'randomise.cruise_speed'"),
        ("[randomise]\ngain_scale = [0.0, 1.0]", "'randomise.gain_scale'"),
        ("[randomise]\ncount = [true, 3]", "'randomise.count'"),
        ("[reward]\ndiscount = 1.5", "'reward.discount'"),
        ("flock = 3", "'flock'"),
        ("nmae = 'x'", "'nmae'"),
        ("name = 'Has Spaces'", "'name'"),
    ],
)
def test_inline_rejections(tmp_path: Path, text: str, key: str) -> None:
    path = _write(tmp_path, text)
    with pytest.raises(ConfigError) as info:
        load_scenario(path)
    assert key in str(info.value)
    assert str(path) in str(info.value) or "s.toml" in str(info.value)


# ---------------------------------------------------------------------------------------------
# Flock files, overrides and defaults.


def test_flock_file_relative_path_and_inline_override(tmp_path: Path) -> None:
    shutil.copy(ROOT / "configs" / "flocks" / "geese.toml", tmp_path / "mine.toml")
    path = _write(tmp_path, "name = 'x'\n[flock]\nfile = 'mine.toml'\ncount = 12\n")
    flock = load_scenario(path).flock
    assert flock.name == "geese" and flock.count == 12
    assert flock.cruise_speed == load_flock("geese").cruise_speed


def test_error_in_flock_file_names_that_file(tmp_path: Path) -> None:
    (tmp_path / "f.toml").write_text("count = -3\n")
    path = _write(tmp_path, "[flock]\nfile = 'f.toml'\n")
    with pytest.raises(ConfigError, match=r"f\.toml: key 'count' = -3: must be an integer"):
        load_scenario(path)


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.stem)
def test_shipped_scenario_same_without_its_preset_line(path: Path, tmp_path: Path) -> None:
    """Regression test: a scenario naming a preset equals its text with the file line removed
    (then the drone takes the record defaults, the values before presets existed)."""
    text = path.read_text()
    stripped = "\n".join(
        line for line in text.splitlines() if not line.startswith('file = "multirotor"')
    )
    copy = tmp_path / path.name
    copy.write_text(stripped)
    before, after = load_scenario(copy), load_scenario(path)
    assert dataclasses.replace(before, source_file=after.source_file) == after


@pytest.mark.parametrize("path", PURSUER_FILES, ids=lambda p: p.stem)
def test_shipped_pursuer_validates(path: Path) -> None:
    text = path.read_text()
    assert text.startswith("#")
    assert "common practice" in text and "14 CFR 107.51" in text and "44.7 m/s" in text
    assert config_kind(path) == "pursuer"
    assert load_pursuer(path) == load_pursuer(path.stem)


def test_fixed_wing_preset_limits_and_basis(tmp_path: Path) -> None:
    path = _write(tmp_path, "[pursuer]\nfile = 'fixed-wing'\nstart = [-10.0, 5.0]\n")
    drone = load_scenario(path).pursuer
    assert (drone.max_speed, drone.max_accel, drone.start) == (28.0, 6.0, (-10.0, 5.0))
    # Level coordinated turn: lateral acceleration = g tan(bank) (standard flight mechanics);
    # the preset rounds a 30 degree bank, 5.66 m/s^2, to the nearest whole m/s^2.
    assert round(9.80665 * math.tan(math.radians(30.0))) == drone.max_accel
    # 14 CFR 107.51(a): at most 87 knots groundspeed (1 kn = 0.514444 m/s), about 44.7 m/s.
    assert drone.max_speed < 87 * 0.514444
    assert "stall" in (ROOT / "configs" / "pursuers" / "fixed-wing.toml").read_text()


def test_pursuer_file_keys_overridden_by_scenario_and_override(tmp_path: Path) -> None:
    path = _write(tmp_path, "[pursuer]\nfile = 'fixed-wing'\nmax_accel = 4.0\n")
    drone = load_scenario(path).pursuer
    assert (drone.max_speed, drone.max_accel) == (28.0, 4.0)
    drone = load_scenario(path, {"pursuer.max_speed": 25.0}).pursuer
    assert (drone.max_speed, drone.max_accel) == (25.0, 4.0)
    # An override naming a preset replaces the file's preset; the scenario's keys still win.
    drone = load_scenario(path, {"pursuer.file": "multirotor"}).pursuer
    assert (drone.max_speed, drone.max_accel) == (22.0, 4.0)
    assert load_scenario("headon", {"pursuer.file": "fixed-wing"}).pursuer == dataclasses.replace(
        load_scenario("headon").pursuer, max_speed=28.0, max_accel=6.0
    )


def test_unknown_pursuer_preset_is_one_line_error(tmp_path: Path) -> None:
    path = _write(tmp_path, "[pursuer]\nfile = 'glider'\n")
    with pytest.raises(ConfigError) as info:
        load_scenario(path)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(str(path)) or message.startswith("s.toml")
    assert "key 'pursuer.file' = \"glider\"" in message
    assert "shipped pursuer (fixed-wing, multirotor)" in message
    with pytest.raises(ConfigError, match=r"override 'pursuer.file' = \"glider\""):
        load_scenario("headon", {"pursuer.file": "glider"})


def test_error_in_pursuer_file_names_that_file(tmp_path: Path) -> None:
    (tmp_path / "d.toml").write_text("max_speed = 60.0\n")
    path = _write(tmp_path, "[pursuer]\nfile = 'd.toml'\n")
    with pytest.raises(ConfigError, match=r"d\.toml: key 'max_speed' = 60: .*\(0, 44\.7\] m/s"):
        load_scenario(path)


def test_defaults_and_name_from_stem(tmp_path: Path) -> None:
    scenario = load_scenario(_write(tmp_path, "[episode]\nmax_steps = 10\n", "plain.toml"))
    assert scenario.name == "plain"
    assert scenario.flock.heading_deg is None  # absent -> toward destination
    assert scenario.episode.max_steps == 10
    assert isinstance(scenario.episode.dt, float)


def test_overrides_apply_and_validate() -> None:
    s = load_scenario("headon", {"flock.count": 80, "episode.max_steps": 300, "name": "h2"})
    assert (s.flock.count, s.episode.max_steps, s.name) == (80, 300, "h2")
    s = load_scenario("headon", {"site.goal": {"circle": {"center": [0, -500], "radius": 100}}})
    assert s.site.goal == Circle((0.0, -500.0), 100.0)
    assert load_scenario("headon", {"flock.file": "geese"}).flock.name == "geese"
    assert load_scenario("headon", {"randomise.count": (10, 20)}).max_birds == 20
    cases = {
        "flock.count": (0, "override 'flock.count' = 0: must be an integer in [1, 5000]"),
        "episode.max_steps": (True, "override 'episode.max_steps' = true"),
        "flock.spacing": (float("nan"), "override 'flock.spacing' = nan"),
        "flock.cout": (5, "unknown override 'flock.cout'; allowed: name, source, count"),
        "site": (5, "unknown override 'site'"),
        "site.goal.circle.radius": (5, "unknown override 'site.goal.circle.radius'"),
        "flock.max_speed": (10.0, "override 'flock.max_speed' = 10: must keep min_speed <="),
        "site.protected": (
            {"circle": {"center": [0, 400], "radius": 200}},
            "override 'site.protected' = { circle = { center = [0, 400], radius = 200 } }: "
            "must lie clear of site.goal",
        ),
    }
    for key, (value, expected) in cases.items():
        with pytest.raises(ConfigError) as info:
            load_scenario("headon", {key: value})
        assert expected in str(info.value), key
        assert str(info.value).split(":")[0].endswith("headon.toml")


def test_parse_override() -> None:
    assert parse_override("flock.count=80") == ("flock.count", 80)
    assert parse_override("randomise.count = [1, 5]") == ("randomise.count", [1, 5])
    assert parse_override("flock.formation=hex") == ("flock.formation", "hex")
    with pytest.raises(ConfigError, match="KEY=VALUE"):
        parse_override("flock.count")


def test_hash_ignores_location_and_tracks_content(tmp_path: Path) -> None:
    path = tmp_path / "headon.toml"
    shutil.copy(ROOT / "configs" / "scenarios" / "headon.toml", path)
    base = scenario_hash(load_scenario("headon"))
    assert len(base) == 64 and int(base, 16) >= 0
    assert scenario_hash(load_scenario(path)) == base
    assert scenario_hash(load_scenario("headon", {"flock.count": 51})) != base
    hashes = {scenario_hash(load_scenario(n)) for n in list_scenarios()}
    assert len(hashes) == len(list_scenarios())


def test_describe_and_reference() -> None:
    text = describe(load_scenario("crosswind-mix"))
    assert text.startswith("crosswind-mix:")
    assert "50 gulls" in text and "polygon" in text and "dt 0.1 s x 1800 steps" in text
    assert "count 20..80" in text
    reference = config_reference()
    for section, specs in SCHEMA.items():
        for key in specs:
            assert f"`{section}.{key}`" in reference or f"`{key}`" in reference


# ---------------------------------------------------------------------------------------------
# Resets.


def _arrays(sample: object) -> list[np.ndarray]:
    return [getattr(sample, n) for n in ("bird_pos", "bird_vel", "pursuer_pos", "pursuer_vel")]


@pytest.mark.parametrize("name", ["crosswind-mix", "pigeons-cluster", "headon"])
def test_reset_deterministic_under_seed(name: str) -> None:
    scenario = load_scenario(name)
    a = sample_reset(scenario, np.random.default_rng(123))
    b = sample_reset(scenario, np.random.default_rng(123))
    assert a.flock == b.flock
    for x, y in zip(_arrays(a), _arrays(b), strict=True):
        assert x.tobytes() == y.tobytes()


@pytest.mark.parametrize("name", ["crosswind-mix", "pigeons-cluster"])
def test_reset_differs_between_seeds_when_random(name: str) -> None:
    scenario = load_scenario(name)
    a = sample_reset(scenario, np.random.default_rng(1))
    b = sample_reset(scenario, np.random.default_rng(2))
    assert a.bird_pos.shape != b.bird_pos.shape or not np.array_equal(a.bird_pos, b.bird_pos)


def test_reset_ranges_respected() -> None:
    scenario = load_scenario("crosswind-mix")
    base, r = scenario.flock, scenario.randomise
    rng = np.random.default_rng(7)
    counts, scales = [], []
    for _ in range(400):
        sample = sample_reset(scenario, rng)
        f = sample.flock
        n = f.count
        counts.append(n)
        assert r.count[0] <= n <= r.count[1] <= scenario.max_birds
        assert sample.bird_pos.shape == sample.bird_vel.shape == (n, 2)
        offset = sample.start - np.array(scenario.site.flock_start)
        assert r.offset_x[0] <= offset[0] <= r.offset_x[1]
        assert r.offset_y[0] <= offset[1] <= r.offset_y[1]
        bearing = np.arctan2(*(np.array(scenario.site.destination) - sample.start)[::-1])
        delta = math.degrees(math.remainder(sample.heading - bearing, 2 * math.pi))
        assert r.heading_deg[0] - 1e-9 <= delta <= r.heading_deg[1] + 1e-9
        ratios = {getattr(f, g) / getattr(base, g) for g in SCALABLE_GAINS}
        assert max(ratios) - min(ratios) < 1e-12  # one factor for every gain
        scales.append(ratios.pop())
        assert r.gain_scale[0] <= scales[-1] <= r.gain_scale[1]
        assert r.cruise_speed[0] <= f.cruise_speed <= r.cruise_speed[1]
        assert r.noise_std[0] <= f.noise_std <= r.noise_std[1]
        np.testing.assert_allclose(sample.bird_pos.mean(axis=0), sample.start, atol=1e-9)
        np.testing.assert_allclose(np.linalg.norm(sample.bird_vel, axis=1), base.speed)
        assert f.alarm_radius == base.alarm_radius  # radii are not randomised
    # The ranges are explored, not just respected: both ends of the count range are reached.
    assert min(counts) == r.count[0] and max(counts) == r.count[1]
    assert min(scales) < 0.85 and max(scales) > 1.15


def test_headon_reset_by_hand() -> None:
    # Start (-600, 0), destination (800, 0): the heading is due east, velocity (12.5, 0) m/s.
    # Without the shipped per-reset jitter, so the start is exactly the configured one.
    scenario = dataclasses.replace(load_scenario("headon"), randomise=Randomisation())
    sample = sample_reset(scenario, np.random.default_rng(0))
    assert sample.heading == 0.0 and sample.flock.heading_deg == 0.0
    assert sample.bird_vel.shape == (50, 2)
    np.testing.assert_array_equal(sample.bird_vel, np.tile([12.5, 0.0], (50, 1)))
    np.testing.assert_array_equal(sample.pursuer_pos, [-150.0, -100.0])
    np.testing.assert_array_equal(sample.pursuer_vel, [0.0, 0.0])
    assert sample.flock.count == scenario.flock.count


def test_fixed_heading_and_line_abreast_rotation() -> None:
    scenario = load_scenario("geese-line", {"flock.heading_deg": 90.0})
    scenario = dataclasses.replace(scenario, randomise=Randomisation())
    sample = sample_reset(scenario, np.random.default_rng(0))
    # Heading north: the line abreast lies east-west, every bird at the start's y.
    np.testing.assert_allclose(sample.bird_pos[:, 1], scenario.site.flock_start[1], atol=1e-9)
    np.testing.assert_allclose(sample.bird_vel, np.tile([0.0, 17.5], (30, 1)), atol=1e-12)


# ---------------------------------------------------------------------------------------------
# Formations.


@pytest.mark.parametrize("count", [2, 3, 7, 19, 50, 301])
def test_hex_nearest_neighbour_is_spacing(count: int) -> None:
    points = formation_offsets("hex", count, 2.5, np.random.default_rng(0))
    dist, _ = cKDTree(points).query(points, k=2)
    np.testing.assert_allclose(dist[:, 1], 2.5, rtol=1e-12)


def test_line_is_collinear_and_perpendicular() -> None:
    points = formation_offsets("line", 12, 4.0, np.random.default_rng(0))
    np.testing.assert_array_equal(points[:, 0], 0.0)  # perpendicular to the +x heading
    np.testing.assert_allclose(np.diff(points[:, 1]), 4.0)


def test_disc_spacing_close_to_requested() -> None:
    points = formation_offsets("disc", 300, 3.0, np.random.default_rng(0))
    dist, _ = cKDTree(points).query(points, k=2)
    assert np.median(dist[:, 1]) == pytest.approx(3.0, rel=0.05)
    assert dist[:, 1].min() > 0.85 * 3.0


def test_cluster_deterministic_and_loose() -> None:
    a = formation_offsets("cluster", 200, 2.0, np.random.default_rng(5))
    b = formation_offsets("cluster", 200, 2.0, np.random.default_rng(5))
    c = formation_offsets("cluster", 200, 2.0, np.random.default_rng(6))
    assert a.tobytes() == b.tobytes()
    assert not np.array_equal(a, c)
    dist, _ = cKDTree(a).query(a, k=2)
    assert dist[:, 1].min() >= 1.0  # no pair closer than spacing / 2
    # The disc's area gives about spacing^2 per bird: radius sqrt(200 / pi) * 2 = 16 m.
    assert np.linalg.norm(a, axis=1).max() < 1.5 * 2.0 * math.sqrt(200 / math.pi)


@settings(max_examples=40, deadline=None)
@given(
    kind=st.sampled_from(FORMATIONS),
    count=st.integers(1, 400),
    spacing=st.floats(0.2, 20.0),
    seed=st.integers(0, 2**32 - 1),
)
def test_formations_centred(kind: str, count: int, spacing: float, seed: int) -> None:
    points = formation_offsets(kind, count, spacing, np.random.default_rng(seed))
    assert points.shape == (count, 2)
    assert np.all(np.isfinite(points))
    np.testing.assert_allclose(points.mean(axis=0), 0.0, atol=1e-9 * spacing * count)


def test_formation_arguments_checked() -> None:
    rng = np.random.default_rng(0)
    with pytest.raises(ValueError, match="unknown formation 'vee'"):
        formation_offsets("vee", 5, 1.0, rng)
    with pytest.raises(ValueError, match="spacing"):
        formation_offsets("disc", 5, 0.0, rng)
    assert formation_offsets("hex", 0, 1.0, rng).shape == (0, 2)

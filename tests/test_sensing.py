"""The sensor model: what observations see of the birds (flockward.sim.sensing)."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from flockward.bench.episode import play_episode
from flockward.bench.leaderboard import information_label
from flockward.config.files import ConfigError
from flockward.config.hashing import scenario_hash
from flockward.config.reference import reference_rows
from flockward.config.scenarios import load_scenario, load_sensor
from flockward.controller import StateView
from flockward.sim.sensing import Sensor
from flockward.sim.types import SensorParams, WorldState
from flockward.task.env import DivertEnv
from flockward.task.observation import GLOBAL_SIZE, OFFSET, RIM_FIELDS
from flockward.task.vector_env import DivertVectorEnv
from flockward_baselines.controllers import BoundaryArc

FIXTURES = Path(__file__).parent / "fixtures"
RIM_PRESENT = 2  # index of rim_present within one rim bird's entries (offset x, offset y, present)


def _play(scenario: object, mode: str, steps: int = 30) -> dict[str, np.ndarray]:
    """Observations of seed 5 under the recording's fixed action pattern (see the fixture)."""
    env = DivertEnv(scenario, observation=mode)
    obs, _ = env.reset(seed=5)
    frames = [obs]
    for t in range(steps):
        obs, *_ = env.step(np.array([math.cos(0.3 * t), math.sin(0.2 * t)]))
        frames.append(obs)
    if mode == "vector":
        return {"vector": np.stack(frames)}
    return {f"dict_{k}": np.stack([f[k] for f in frames]) for k in ("context", "birds", "mask")}


@pytest.mark.parametrize(
    "overrides",
    [
        None,
        {"sensor.file": "perfect"},
        # Not the perfect sensor (it has a range), so the sensing path runs: all in range, no
        # noise, no loss, so it must reproduce the truth exactly too.
        {"sensor.detection_range": 100_000.0},
    ],
)
def test_perfect_sensor_observations_are_unchanged_bit_for_bit(overrides: object) -> None:
    # Regression test: tests/fixtures/perfect_sensor_observations.npz was recorded by the code
    # before sensors existed (headon, seed 5, 30 decisions, vector and dict modes).
    reference = np.load(FIXTURES / "perfect_sensor_observations.npz")
    scenario = load_scenario("headon", overrides)  # type: ignore[arg-type]
    for mode in ("vector", "dict"):
        for key, value in _play(scenario, mode).items():
            assert np.array_equal(value, reference[key]), (overrides, key)


def test_perfect_preset_leaves_the_scenario_hash() -> None:
    # Regression test: hashes leave out values equal to a default, and perfect.toml holds them.
    assert load_sensor("perfect") == SensorParams()
    plain = load_scenario("headon")
    assert scenario_hash(load_scenario("headon", {"sensor.file": "perfect"})) == scenario_hash(
        plain
    )
    assert scenario_hash(load_scenario("headon-radar")) != scenario_hash(plain)


def _ring_state(radii: np.ndarray, per_radius: int) -> WorldState:
    """One world with ``per_radius`` birds evenly around the origin on each of ``radii`` (m)."""
    angles = np.linspace(0.0, 2.0 * math.pi, per_radius, endpoint=False)
    r, a = np.meshgrid(radii, angles, indexing="ij")
    pos = np.stack([r * np.cos(a), r * np.sin(a)], axis=-1).reshape(1, -1, 2)
    state = WorldState.zeros(1, pos.shape[1])
    state.bird_pos[:] = pos
    state.count[:] = pos.shape[1]
    return state


def _measurements(params: SensorParams, state: WorldState, updates: int) -> np.ndarray:
    """(updates, n, 2) sensed positions of a ground sensor at the origin, one per update."""
    sensor = Sensor(params, 1, state.bird_pos.shape[1], dt=0.1)
    sensor.reset(0, np.random.default_rng(2024), state)
    out = [sensor.pos[0].copy()]
    for step in range(1, updates):
        sensor.step(state, np.array([step]), np.array([True]))
        out.append(sensor.pos[0].copy())
    return np.stack(out)


def test_range_and_bearing_errors_follow_their_parameters() -> None:
    sigma_r, sigma_b_deg = 6.0, 1.5
    params = SensorParams(position="ground", range_noise=sigma_r, bearing_noise_deg=sigma_b_deg)
    radii = np.array([200.0, 1500.0])
    state = _ring_state(radii, 500)
    sensed = _measurements(params, state, updates=20)
    true = state.bird_pos[0]
    range_error = np.hypot(*sensed.transpose(2, 0, 1)) - np.hypot(*true.T)
    turn = np.arctan2(sensed[..., 1], sensed[..., 0]) - np.arctan2(true[:, 1], true[:, 0])
    bearing_error = np.angle(np.exp(1j * turn))  # wrapped to (-pi, pi]
    near = np.hypot(*true.T) < 1000.0
    # Polar noise: the same bearing spread near and far (Cartesian noise of fixed size would
    # spread the far birds' bearings 7.5 times less), and the same range spread.
    for group in (near, ~near):
        for errors, sigma in (
            (range_error[:, group].ravel(), sigma_r),
            (bearing_error[:, group].ravel(), math.radians(sigma_b_deg)),
        ):
            n = errors.size
            # z-test of the mean against 0 (scipy.stats.norm): two-sided p > 1e-3.
            z = errors.mean() / (sigma / math.sqrt(n))
            assert 2.0 * stats.norm.sf(abs(z)) > 1e-3, (z, sigma)
            # Chi-square test of the variance (scipy.stats.chi2): (n-1) s^2 / sigma^2 follows
            # chi2(n - 1) for Gaussian errors; two-sided p > 1e-3.
            q = (n - 1) * errors.var(ddof=1) / sigma**2
            p = 2.0 * min(stats.chi2.cdf(q, n - 1), stats.chi2.sf(q, n - 1))
            assert p > 1e-3, (q, n, sigma)
            # and the estimate itself is within 3 % of sigma (n = 5000: the standard error of
            # a standard deviation is sigma / sqrt(2n) = 1 % of sigma)
            assert errors.std(ddof=1) == pytest.approx(sigma, rel=0.03)


def test_track_loss_and_reacquisition_follow_their_probabilities() -> None:
    p_loss, p_acq = 0.08, 0.3
    params = SensorParams(position="ground", loss_probability=p_loss, reacquire_probability=p_acq)
    # About 80 000 loss trials: a loss probability 10 % off (0.072) lies 8 standard errors away.
    state = _ring_state(np.array([100.0, 300.0]), 500)
    sensor = Sensor(params, 1, state.bird_pos.shape[1], dt=0.1)
    sensor.reset(0, np.random.default_rng(7), state)
    losses = kept = acquired = missed = 0
    for step in range(1, 100):
        before = sensor.tracked[0].copy()
        sensor.step(state, np.array([step]), np.array([True]))
        after = sensor.tracked[0]
        losses += int((before & ~after).sum())
        kept += int((before & after).sum())
        acquired += int((~before & after).sum())
        missed += int((~before & ~after).sum())
    # Exact binomial tests (scipy.stats.binomtest): each update's losses among tracked birds
    # and acquisitions among untracked birds in range are Bernoulli trials.
    assert stats.binomtest(losses, losses + kept, p_loss).pvalue > 1e-3, (losses, kept)
    assert stats.binomtest(acquired, acquired + missed, p_acq).pvalue > 1e-3, (acquired, missed)


def test_a_bird_beyond_detection_range_is_never_sensed() -> None:
    reach = 500.0
    params = SensorParams(
        position="ground", detection_range=reach, range_noise=20.0, loss_probability=0.1
    )
    state = _ring_state(np.array([100.0, 499.0, 501.0, 2000.0]), 50)
    true_range = np.hypot(*state.bird_pos[0].T)
    sensor = Sensor(params, 1, state.bird_pos.shape[1], dt=0.1)
    sensor.reset(0, np.random.default_rng(3), state)
    assert sensor.tracked[0].sum() == 100  # at a reset every bird in range is tracked
    for step in range(1, 40):
        sensor.step(state, np.array([step]), np.array([True]))
        assert not sensor.tracked[0][true_range > reach].any()
        picture, slots = sensor.picture(state)
        assert (true_range[slots[0, : picture.count[0]]] <= reach).all()


def test_onboard_sensor_measures_from_drone_zero() -> None:
    params = SensorParams(position="onboard", detection_range=150.0)
    state = _ring_state(np.array([100.0]), 8)
    # On top of bird 0; birds 1 and 7 are 76.5 m away, 2 and 6 141.4 m, 3 and 5 184.8 m, 4 200 m.
    state.pursuer_pos[0, 0] = (100.0, 0.0)
    sensor = Sensor(params, 1, 8, dt=0.1)
    sensor.reset(0, np.random.default_rng(0), state)
    assert sensor.tracked[0].tolist() == [True, True, True, False, False, False, True, True]


def test_lost_tracks_are_masked_never_stale() -> None:
    # No noise, so every sensed bird must equal a true tracked bird exactly; lost ones vanish.
    scenario = load_scenario(
        "headon", {"sensor.loss_probability": 0.3, "sensor.reacquire_probability": 0.2}
    )
    env = DivertEnv(scenario, observation="dict")
    obs, _ = env.reset(seed=1)
    scales = env.task.setting.scales
    shrank = False
    for _ in range(6):
        obs, *_ = env.step(np.array([0.3, 0.1]))
        view = env.task.sensed()
        assert view is not None
        n = int(view.state.count[0])
        shrank |= n < int(env.task.state.count[0])
        mask = obs["mask"]
        assert mask.sum() == n and (mask[:n] == 1).all()
        assert (obs["birds"][n:] == 0).all()
        drone = env.task.state.pursuer_pos[0, 0]
        truth = env.task.state.bird_pos[0, view.slots[0, :n]]
        assert np.allclose(obs["birds"][:n, :2], (truth - drone) / scales.near, atol=1e-5)
        # rim birds come only from the tracked ones: an absent slot is (0, 0) with present 0
        k = (obs["context"].size - GLOBAL_SIZE) // RIM_FIELDS
        rims = obs["context"][GLOBAL_SIZE:].reshape(k, RIM_FIELDS)
        absent = rims[:, RIM_PRESENT] == 0
        assert (rims[absent, :RIM_PRESENT] == 0).all()
    assert shrank, "no track was lost: the test exercised nothing"


def test_nothing_sensed_reads_as_an_empty_flock() -> None:
    # The camera's 250 m reach misses the flock ~460 m from the drone at the start of headon.
    env = DivertEnv("headon-camera")
    obs, _ = env.reset(seed=0)
    assert env.task.sensed().state.count[0] == 0  # type: ignore[union-attr]
    assert (obs[OFFSET["centroid_offset"] : GLOBAL_SIZE] == 0).all()
    assert obs[OFFSET["largest_cluster"]] == 0  # the marker: >= 1/n whenever a bird is seen
    assert (obs[GLOBAL_SIZE:] == 0).all()  # every rim slot absent
    assert np.isfinite(obs).all()


def test_picture_is_held_between_updates_with_its_age() -> None:
    scenario = load_scenario("headon-radar")  # 2.5 s scans: every 25 control steps
    env = DivertEnv(scenario)
    env.reset(seed=2)
    task = env.task
    assert task.sensor is not None and task.sensor.update_steps == 25
    last = task.sensed()
    updates = 0
    for _ in range(20):  # 80 control steps
        env.step(np.array([0.2, 0.5]))
        view = task.sensed()
        assert view is not None and last is not None
        steps = int(task.world.steps[0])
        assert view.age[0] == pytest.approx((steps % 25) * scenario.episode.dt)
        same = np.array_equal(view.state.bird_pos, last.state.bird_pos)
        if steps // 25 == (steps - 4) // 25:  # no multiple of 25 in this decision's steps
            assert same
        else:
            updates += 1
            assert not same
        last = view
    assert updates == 3


def test_same_seed_same_sensed_picture_single_and_vector() -> None:
    seeds = [4, 5, 6]
    vec = DivertVectorEnv(3, "headon-radar", observation="dict")
    vobs, _ = vec.reset(seed=seeds)
    singles = [DivertEnv("headon-radar", observation="dict") for _ in seeds]
    sobs = [env.reset(seed=s)[0] for env, s in zip(singles, seeds, strict=True)]
    for t in range(40):
        action = np.array([math.cos(0.1 * t), 0.6])
        for i in range(3):
            for key in ("context", "birds", "mask"):
                assert np.array_equal(vobs[key][i], sobs[i][key]), (t, i, key)
        vobs, *_ = vec.step(np.tile(action, (3, 1)))
        sobs = [env.step(action)[0] for env in singles]


def test_a_sensor_leaves_the_flocks_random_stream_alone() -> None:
    # The sensor's generator is a jumped copy of the world's: same seed and actions, same flock.
    plain, radar = DivertEnv("headon"), DivertEnv("headon-radar")
    plain.reset(seed=9)
    radar.reset(seed=9)
    for _ in range(30):
        plain.step(np.array([0.4, 0.4]))
        radar.step(np.array([0.4, 0.4]))
    assert np.array_equal(plain.task.state.bird_pos, radar.task.state.bird_pos)


@pytest.mark.parametrize(
    ("key", "value", "allowed"),
    [
        ("sensor.range_noise", -1.0, "must be a finite number in [0, 1000] m"),
        ("sensor.bearing_noise_deg", 90.0, "must be a finite number in [0, 45] deg"),
        ("sensor.loss_probability", 1.5, "must be a finite number in [0, 1]"),
        ("sensor.detection_range", 0.0, "must be a finite number in (0, 100000] m"),
        ("sensor.position", "sky", "must be one of: onboard, ground"),
        ("sensor.update_period", "fast", "must be a finite number in [0, 600] s"),
    ],
)
def test_bad_sensor_values_give_one_line_errors(key: str, value: object, allowed: str) -> None:
    with pytest.raises(ConfigError) as caught:
        load_scenario("headon-radar", {key: value})
    message = str(caught.value)
    assert "\n" not in message
    assert "headon-radar.toml: override" in message
    assert f"'{key}' = " in message and allowed in message


def test_bad_sensor_file_and_key_give_one_line_errors(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match=r"no such sensor file; use a shipped sensor \(drone-"):
        load_scenario("headon", {"sensor.file": "sonar"})
    bad = tmp_path / "mine.toml"
    bad.write_text('[sensor]\nfile = "ground-radar"\nrange_noise_m = 3.0\n')
    with pytest.raises(ConfigError, match=r"mine.toml: unknown key 'sensor.range_noise_m'; allow"):
        load_scenario(bad)
    preset = tmp_path / "sensors" / "wide.toml"
    preset.parent.mkdir()
    preset.write_text('name = "wide"\nloss_probability = -0.1\n')
    with pytest.raises(ConfigError, match=r"wide.toml: key 'loss_probability' = -0.1: must be"):
        load_sensor(preset)


def test_schema_lists_every_sensor_key_with_its_meaning() -> None:
    rows = {key: meaning for key, _, _, meaning in reference_rows()}
    for name in SensorParams.__dataclass_fields__:
        assert rows.get(f"sensor.{name}"), name
    assert "sensor.file" in rows


def test_leaderboard_names_what_each_entry_saw() -> None:
    assert information_label("observation", ["perfect", "perfect"]) == "observation"
    assert information_label("state", []) == "state"
    mixed = ["perfect", "ground-radar", "drone-camera"]
    shown = "observation (drone-camera, ground-radar, perfect)"
    assert information_label("observation", mixed) == shown
    assert information_label("sensed", ["ground-radar"]) == "sensed (ground-radar)"
    assert information_label("state", mixed) == "state (truth)"


def test_sensed_controllers_see_the_sensors_birds() -> None:
    seen: list[int] = []

    class Counting(BoundaryArc):
        def act(self, observation: object, state: StateView | None) -> np.ndarray:
            assert state is not None
            seen.append(len(state.bird_pos))
            return super().act(observation, state)

    scenario = load_scenario("headon-camera", {"episode.max_steps": 200})
    play_episode(scenario, Counting(information="sensed"), seed=0)
    assert seen[0] == 0 and max(seen) > 0  # nothing in the camera's reach at first
    seen.clear()
    play_episode(scenario, Counting(), seed=0)
    assert set(seen) == {50}  # state level: the truth, every bird


def test_sensed_level_with_a_perfect_sensor_plays_like_state() -> None:
    # Regression test: with the perfect sensor "sensed" is the truth, so the episodes agree.
    scenario = load_scenario("headon", {"episode.max_steps": 300})
    state_record, _ = play_episode(scenario, BoundaryArc(), seed=3)
    sensed_record, _ = play_episode(scenario, BoundaryArc(information="sensed"), seed=3)
    assert state_record == sensed_record

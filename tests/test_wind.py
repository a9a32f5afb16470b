"""Wind: the Dryden gust generator against its published spectrum, steady drift, still air.

Outside checks: the Dryden spectra and low-altitude scales of MIL-F-8785C (as given on
Wikipedia's "Dryden Wind Turbulence Model", the Modelica example DrydenContinuousTurbulence and
the MathWorks Aerospace Blockset Dryden help), scipy.signal.welch as the spectral estimator,
and Galilean kinematics (a uniform wind carries everything in the air with it: common
practice).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy.signal import welch

from flockward.config.scenarios import ConfigError, load_scenario
from flockward.sim.types import FlockParams, PursuerParams, Scenario, WindParams
from flockward.sim.wind import DrydenGusts, dryden_psd_hz, dryden_scales, dryden_spectrum
from flockward.sim.world import World

FIXTURES = Path(__file__).parent / "fixtures"

# The check case: h = 50 m (164.04 ft), W20 = 10 m/s, V = 15 m/s, dt = 0.05 s.
ALTITUDE, W20, SPEED, DT = 50.0, 10.0, 15.0, 0.05


def test_low_altitude_scales_match_the_formula_at_50_m() -> None:
    # L_u = h / (0.177 + 0.000823 h)^1.2 and sigma_u = 0.1 W20 / (0.177 + 0.000823 h)^0.4 with
    # h in feet (MIL-F-8785C low altitude), worked by hand for h = 164.04 ft.
    length, sigma = dryden_scales(ALTITUDE, W20)
    assert length == pytest.approx(202.289589, rel=1e-8)
    assert sigma == pytest.approx(1.59343557, rel=1e-8)
    # at 1000 ft the factor is 1: sigma_u = sigma_w = 0.1 W20 and L_u = 1000 ft
    length, sigma = dryden_scales(1000 * 0.3048, W20)
    assert (length, sigma) == (pytest.approx(304.8), pytest.approx(1.0))


def test_spectra_match_worked_values_and_integrate_to_sigma_squared() -> None:
    length, sigma = dryden_scales(ALTITUDE, W20)
    omega = np.array([0.001, 0.01, 0.1])
    # Phi_u = sigma^2 (2L/pi) / (1 + (L Omega)^2), Phi_v = sigma^2 (L/pi)(1 + 3x)/(1 + x)^2,
    # evaluated by hand at the check case.
    assert dryden_spectrum(omega, sigma, length, "u") == pytest.approx(
        [314.12671, 64.213314, 0.79710513], rel=1e-7
    )
    assert dryden_spectrum(omega, sigma, length, "v") == pytest.approx(
        [169.41242, 83.709611, 1.1937145], rel=1e-7
    )
    from scipy.integrate import quad

    for axis in "uv":
        total, _ = quad(lambda w, a=axis: float(dryden_spectrum(w, sigma, length, a)), 0, np.inf)
        assert total == pytest.approx(sigma**2, rel=1e-9)


def _gust_series(runs: int, steps: int) -> np.ndarray:
    """(runs, steps, 2) gusts of the check case, one generator per run."""
    length, sigma = dryden_scales(ALTITUDE, W20)
    out = np.empty((runs, steps, 2))
    for r in range(runs):
        gusts = DrydenGusts(sigma, length, SPEED, DT, np.random.default_rng(1000 + r))
        out[r] = gusts.next(steps)
    return out


@pytest.fixture(scope="module")
def gust_series() -> np.ndarray:
    return _gust_series(32, 2**14)


# Bands (Hz) in which the Welch estimate's power must match the Dryden spectrum, and the
# tolerance: 10 % of the band power, the theory summed on Welch's own frequency bins.
PSD_BANDS = ((0.02, 0.05), (0.05, 0.2), (0.5, 2.0))
PSD_TOLERANCE = 0.10


@pytest.mark.parametrize("axis", [0, 1], ids=["longitudinal", "lateral"])
def test_gust_psd_matches_the_dryden_spectrum(gust_series: np.ndarray, axis: int) -> None:
    length, sigma = dryden_scales(ALTITUDE, W20)
    f, pxx = welch(gust_series[:, :, axis], fs=1.0 / DT, nperseg=4096, axis=-1)
    estimate = pxx.mean(axis=0)
    theory = dryden_psd_hz(f, sigma, length, SPEED, "uv"[axis])
    for lo, hi in PSD_BANDS:
        band = (f >= lo) & (f < hi)
        ratio = estimate[band].sum() / theory[band].sum()
        assert abs(ratio - 1.0) < PSD_TOLERANCE, (axis, lo, hi, ratio)


def test_gust_variance_is_sigma_squared(gust_series: np.ndarray) -> None:
    _, sigma = dryden_scales(ALTITUDE, W20)
    variance = gust_series.reshape(-1, 2).var(axis=0)
    # 32 runs of 819 s, about 60 correlation times L/V each: about 4 % standard error.
    assert variance == pytest.approx([sigma**2, sigma**2], rel=0.10)


def test_direction_is_where_the_wind_blows_from() -> None:
    # from 180 deg (from -x) blows toward +x; from 90 deg (from +y) toward -y
    assert WindParams(speed=5.0, from_deg=180.0).velocity == pytest.approx((5.0, 0.0))
    assert WindParams(speed=5.0, from_deg=90.0).velocity == pytest.approx((0.0, -5.0))


def _still_air_reference_world(wind: WindParams) -> World:
    """The world the still-air fixture was recorded from (tests/fixtures/still_air_reference.npz,
    recorded by the code before wind existed), played 40 steps."""
    scenario = Scenario(
        name="ref",
        flock=FlockParams(count=30),
        pursuer=PursuerParams(start=(-520.0, 10.0)),
        wind=wind,
    )
    world = World(scenario, worlds=2)
    world.reset(0, np.random.default_rng(11))
    world.reset(1, np.random.default_rng(12))
    action = np.zeros((2, 1, 2))
    action[:, 0] = [0.6, -0.3]
    for _ in range(40):
        world.step(action)
    return world


@pytest.mark.parametrize("wind", [WindParams(), WindParams(speed=0.0, from_deg=123.0)])
def test_zero_wind_reproduces_still_air_bit_for_bit(wind: WindParams) -> None:
    # Regression test: the arrays were recorded before the wind was added to the kernel.
    world = _still_air_reference_world(wind)
    reference = np.load(FIXTURES / "still_air_reference.npz")
    for name in ("bird_pos", "bird_vel", "pursuer_pos", "pursuer_vel"):
        assert np.array_equal(getattr(world.state, name), reference[name]), name


def _drift_world(wind: WindParams, drones: int) -> World:
    # No roost pull: the destination turn depends on absolute position, everything else on
    # relative positions and air velocities, which a uniform wind leaves alone.
    flock = FlockParams(count=20, destination_gain=0.0)
    world = World(Scenario(name="drift", flock=flock, wind=wind), worlds=1, drones=drones)
    world.reset(0, np.random.default_rng(5))
    return world


def test_flock_in_steady_wind_drifts_by_wind_times_time() -> None:
    wind = WindParams(speed=6.0, from_deg=30.0)
    calm, windy = _drift_world(WindParams(), 0), _drift_world(wind, 0)
    steps = 200
    for _ in range(steps):
        calm.step(np.zeros((1, 0, 2)))
        windy.step(np.zeros((1, 0, 2)))
    t = steps * calm.dt
    drift = windy.state.bird_pos - calm.state.bird_pos
    expected = np.asarray(wind.velocity) * t  # Galilean: x_ground = x_air + w t
    n = int(calm.state.count[0])
    assert np.allclose(drift[0, :n], expected, atol=1e-6)
    # airspeeds are the still-air ones (birds hold airspeed)
    assert np.allclose(windy.state.bird_vel[0, :n], calm.state.bird_vel[0, :n], atol=1e-9)


def test_drone_ground_track_includes_the_wind() -> None:
    # Hand-worked: a drone at rest in the air in a 5 m/s wind is carried 5 m/s x 10 s = 50 m
    # downwind; commanded at full thrust against it (10 m/s^2 up to its 22 m/s airspeed limit),
    # its ground speed is 22 - 5 = 17 m/s once at the limit.
    wind = WindParams(speed=5.0, from_deg=0.0)  # from +x, toward -x
    world = World(Scenario(name="drone", wind=wind), worlds=1)
    world.reset(0, np.random.default_rng(0))
    start = world.state.pursuer_pos[0, 0].copy()
    for _ in range(100):
        world.step(np.zeros((1, 1, 2)))
    assert world.state.pursuer_pos[0, 0] - start == pytest.approx([-50.0, 0.0], abs=1e-9)
    before = world.state.pursuer_pos[0, 0].copy()
    for _ in range(100):  # 2.2 s to the limit, then 7.8 s at it
        world.step(np.array([[[1.0, 0.0]]]))
    flown = world.state.pursuer_pos[0, 0, 0] - before[0]
    assert world.state.pursuer_vel[0, 0] == pytest.approx([22.0, 0.0])
    # x = (0.5 * 10 * 2.2^2 + 22 * 7.8) - 5 * 10 = 24.2 + 171.6 - 50 = 145.8 m
    assert flown == pytest.approx(145.8, abs=1e-6)


def _turbulent_scenario() -> Scenario:
    flock = FlockParams(count=12)
    wind = WindParams(speed=4.0, from_deg=200.0, turbulence="moderate", altitude=30.0)
    return Scenario(name="gusty", flock=flock, wind=wind)


def test_gusts_follow_the_world_seed_alone_or_batched() -> None:
    # Regression test of determinism: world 1 of three equals the same seed stepped alone.
    scenario = _turbulent_scenario()
    batch, alone = World(scenario, worlds=3), World(scenario, worlds=1)
    for b in range(3):
        batch.reset(b, np.random.default_rng(40 + b))
    alone.reset(0, np.random.default_rng(41))
    winds = []
    for _ in range(30):
        batch.step(np.full((3, 1, 2), 0.2))
        alone.step(np.full((1, 1, 2), 0.2))
        assert np.array_equal(batch.wind[1], alone.wind[0])
        winds.append(batch.wind.copy())
    assert np.array_equal(batch.state.bird_pos[1], alone.state.bird_pos[0])
    # the gusts do vary and differ between worlds
    series = np.array(winds)
    assert series[:, 0].std() > 0.1
    assert not np.array_equal(series[:, 0], series[:, 1])


def test_gusts_agree_between_single_and_vector_env() -> None:
    from flockward.task.env import DivertEnv
    from flockward.task.vector_env import DivertVectorEnv

    scenario = _turbulent_scenario()
    single = DivertEnv(scenario)
    vector = DivertVectorEnv(2, scenario)
    obs, _ = single.reset(seed=7)
    vobs, _ = vector.reset(seed=[7, 8])
    assert np.array_equal(obs, vobs[0])
    for _ in range(20):
        obs, *_ = single.step(np.array([0.3, -0.1], np.float32))
        vobs, *_ = vector.step(np.tile(np.array([0.3, -0.1], np.float32), (2, 1)))
        assert np.array_equal(obs, vobs[0])


def test_wind_keys_load_from_a_scenario_file(tmp_path: Path) -> None:
    path = tmp_path / "breezy.toml"
    path.write_text('[wind]\nspeed = 7.5\nfrom_deg = 270\nturbulence = "light"\naltitude = 20\n')
    wind = load_scenario(path).wind
    assert (wind.speed, wind.from_deg, wind.turbulence, wind.altitude) == (
        7.5,
        270.0,
        "light",
        20.0,
    )
    assert wind.velocity == pytest.approx((0.0, 7.5), abs=1e-12)
    path.write_text('[wind]\nturbulence = "gale"\n')
    with pytest.raises(ConfigError) as err:
        load_scenario(path)
    message = str(err.value)
    assert "\n" not in message and "wind.turbulence" in message and "gale" in message


def test_rendering_draws_the_wind_arrow_toward_where_it_blows() -> None:
    from matplotlib.figure import Figure
    from matplotlib.text import Annotation

    from flockward.render import draw_wind

    extent = (-100.0, 100.0, -100.0, 100.0)
    ax = Figure().add_subplot()
    draw_wind(ax, Scenario(name="calm"), extent)
    assert not ax.texts
    ax = Figure().add_subplot()
    draw_wind(ax, Scenario(name="breezy", wind=WindParams(speed=6.0, from_deg=270.0)), extent)
    (arrow,) = [t for t in ax.texts if isinstance(t, Annotation)]
    tip, tail = np.asarray(arrow.xy), np.asarray(arrow.xyann)
    # from 270 deg (from -y): the arrow points toward +y
    assert (tip - tail) / np.linalg.norm(tip - tail) == pytest.approx([0.0, 1.0])


def test_gust_series_does_not_depend_on_how_it_is_asked_for() -> None:
    # Regression test: blocks of 4 substeps (a world's step) give the one long series.
    length, sigma = dryden_scales(ALTITUDE, W20)
    whole = DrydenGusts(sigma, length, SPEED, DT, np.random.default_rng(9)).next(1000)
    parts = DrydenGusts(sigma, length, SPEED, DT, np.random.default_rng(9))
    pieces = np.concatenate([parts.next(4) for _ in range(250)])
    assert np.array_equal(whole, pieces)


def _gusty_episode_in_worker(seed: int) -> np.ndarray:
    from flockward.task.env import DivertEnv

    overrides = {"episode.max_steps": 40, "wind.speed": 5.0, "wind.turbulence": "moderate"}
    env = DivertEnv("pigeons-cluster", overrides=overrides)
    obs, _ = env.reset(seed=seed)
    for _ in range(40):
        obs, *_ = env.step(np.array([0.4, 0.1], np.float32))
    return np.asarray(obs)


def test_gusty_episode_is_the_same_in_a_worker_process() -> None:
    import multiprocessing as mp

    here = _gusty_episode_in_worker(3)
    with mp.get_context("spawn").Pool(1) as pool:
        there = pool.apply(_gusty_episode_in_worker, (3,))
    assert np.array_equal(here, there)

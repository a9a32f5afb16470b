"""Teams of drones: scenarios listing [[drones]], the centralised Gymnasium env, the PettingZoo
env, the team baselines and the team metrics."""

from __future__ import annotations

import itertools
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from flock_helpers import FAR, OFF

from flockward.bench.episode import play_episode
from flockward.bench.leaderboard import episode_score
from flockward.config.files import ConfigError
from flockward.config.hashing import scenario_hash
from flockward.config.scenarios import load_scenario
from flockward.controller import Controller
from flockward.sim.dynamics import flock_acceleration, flock_context
from flockward.sim.limits import derived
from flockward.sim.world import World
from flockward.task.env import DivertEnv
from flockward.task.multi_env import DivertParallelEnv
from flockward.task.vector_env import DivertVectorEnv
from flockward_baselines.controllers import make_controller
from flockward_baselines.controllers.sector_arc import sectors
from flockward_baselines.sb3 import FlockwardVecEnv

TEAM = """
name = "team"
[flock]
count = 12
[episode]
max_steps = {steps}
[[drones]]
start = [0.0, 0.0]
[[drones]]
start = {second}
max_speed = 18.0
"""


def write_team(tmp_path: Path, steps: int = 40, second: str = "[-200.0, 150.0]") -> Path:
    path = tmp_path / "team.toml"
    path.write_text(TEAM.format(steps=steps, second=second), encoding="utf-8")
    return path


# ---------------------------------------------------------------------------------------------
# Scenarios.


def test_a_drone_list_gives_each_drone_its_start_and_limits(tmp_path):
    scenario = load_scenario(write_team(tmp_path))
    assert scenario.drone_count == 2
    assert [d.start for d in scenario.fleet] == [(0.0, 0.0), (-200.0, 150.0)]
    assert [d.max_speed for d in scenario.fleet] == [22.0, 18.0]  # [pursuer] default, own value
    world = World(scenario, 2)
    world.reset(0, np.random.default_rng(0))
    np.testing.assert_array_equal(world.state.pursuer_pos[0], [[0.0, 0.0], [-200.0, 150.0]])
    np.testing.assert_array_equal(world.pursuer_limits[1], [[22.0, 10.0], [18.0, 10.0]])


@pytest.mark.parametrize(
    ("body", "message"),
    [
        ("drones = [1, 2]", "key 'drones.0' = 1: must be a table of [pursuer] keys"),
        ("drones = []", "key 'drones' = []: must be 1 to 8 [[drones]] tables"),
        ("drones = 3", "key 'drones' = 3: must be 1 to 8 [[drones]] tables"),
        ("[[drones]]\nspeed = 3", "unknown key 'drones.0.speed'; allowed: start, max_speed"),
        ("[[drones]]\nmax_speed = 100", "key 'drones.0.max_speed' = 100: must be a finite number"),
        ("[[drones]]\nstart = [1]", "key 'drones.0.start' = [1]: "),
    ],
)
def test_a_malformed_drone_list_is_a_one_line_error(tmp_path, body, message):
    path = tmp_path / "bad.toml"
    path.write_text(f'name = "bad"\n{body}\n', encoding="utf-8")
    with pytest.raises(ConfigError) as error:
        load_scenario(path)
    text = str(error.value)
    assert "\n" not in text and text.split(": ")[0].endswith(path.name)  # file named first
    assert message in text


def test_one_drone_scenarios_play_bit_for_bit():
    # Regression test: a list of one drone, the [pursuer] itself, plays the episode of the plain
    # one-drone scenario bit for bit (only its hash differs: the list is not the default). The
    # shipped scenarios' hashes are unchanged (tests/test_suites.py, tests/test_hashing.py), and
    # tests/test_committed_results.py replays the committed one-drone results as the wider check.
    plain = load_scenario("headon", {"flock.count": 12, "episode.max_steps": 30})
    assert plain.drones == () and plain.drone_count == 1
    listed = replace(plain, drones=(plain.pursuer,))
    assert listed.drone_count == 1 and scenario_hash(listed) != scenario_hash(plain)
    runs = []
    for scenario in (plain, listed):
        env = DivertEnv(scenario, max_episode_steps=30)
        obs, _ = env.reset(seed=5)
        assert env.action_space.shape == (2,) and obs.shape == (26,)
        trace = [obs]
        for t in range(30):
            obs, reward, ended, cut, _ = env.step(np.array([math.cos(t), math.sin(t)]))
            trace += [obs, np.array([reward])]
            if ended or cut:
                break
        runs.append((np.concatenate(trace), env.task.state.bird_pos.copy()))
    np.testing.assert_array_equal(runs[0][0], runs[1][0])
    np.testing.assert_array_equal(runs[0][1], runs[1][1])


# ---------------------------------------------------------------------------------------------
# Fear of the nearest drone.


@pytest.mark.parametrize("seed", range(5))
def test_a_bird_fears_only_its_nearest_drone(seed):
    # Property test of the model's rule (sim.dynamics): a bird's acceleration with two drones
    # equals its acceleration with only the nearer one. Both drones sit inside the alarm radius,
    # so a summed fear would differ (checked too, so the test can fail).
    flock = derived(OFF, flee_accel=4.0, dodge_accel=12.0)
    rng = np.random.default_rng(seed)
    bird = np.zeros((1, 2))
    vel = np.array([[12.5, 0.0]])
    near_angle, far_angle = rng.uniform(0, 2 * math.pi, 2)
    near = 30.0 * np.array([math.cos(near_angle), math.sin(near_angle)])
    far = 60.0 * np.array([math.cos(far_angle), math.sin(far_angle)])

    def accel(drones):
        drones = np.ascontiguousarray(drones, np.float64)
        ctx = flock_context(flock.kernel_vector(), FAR, drones, np.zeros_like(drones), 1, False)
        out = np.zeros((1, 2))
        flock_acceleration(bird, vel, 1, ctx, out)
        return out[0]

    both = accel([far, near])
    np.testing.assert_array_equal(both, accel([near]))
    summed = accel([near]) + accel([far])
    assert not np.allclose(both, summed)


# ---------------------------------------------------------------------------------------------
# The centralised Gymnasium env and the SB3 adapter.


def test_gymnasium_and_sb3_checkers_pass_a_two_drone_env(tmp_path):
    # Outside checks: Gymnasium's env checker and Stable-Baselines3's env checker.
    from gymnasium.utils.env_checker import check_env
    from stable_baselines3.common.env_checker import check_env as sb3_check_env

    path = write_team(tmp_path)
    env = DivertEnv(path)
    assert env.action_space.shape == (2, 2)
    assert env.observation_space.shape == (2, 26)
    check_env(env, skip_render_check=True)
    sb3_check_env(DivertEnv(path), warn=False)


def test_sb3_adapter_flattens_the_team_action(tmp_path):
    venv = FlockwardVecEnv(2, write_team(tmp_path))
    assert venv.action_space.shape == (4,)
    venv.seed(3)
    venv.reset()
    venv.step_async(np.tile([1.0, 0.0, 0.0, 1.0], (2, 1)))
    obs, reward, _, _ = venv.step_wait()
    assert obs.shape == (2, 2, 26) and reward.shape == (2,)
    vel = venv.task.state.pursuer_vel
    assert (vel[:, 0, 0] > 0).all() and (vel[:, 1, 1] > 0).all()  # row k is drone k's command
    assert np.allclose(vel[:, 0, 1], 0.0) and np.allclose(vel[:, 1, 0], 0.0)


def test_team_reward_is_the_mean_of_the_drones_own_rewards(tmp_path):
    env = DivertEnv(write_team(tmp_path))
    env.reset(seed=2)
    _, reward, _, _, info = env.step(np.array([[1.0, 0.0], [0.0, -1.0]]))
    own = info["agent_reward"]
    assert own.shape == (2,) and own[0] != own[1]  # proximity differs per drone
    assert reward == pytest.approx(own.mean(), rel=1e-12, abs=1e-15)


def test_a_two_drone_episode_is_the_same_in_every_face(tmp_path):
    # Determinism: the same seed and actions give the same episode in the single env, the
    # vector env (world 1 of 2, seeded seed + 1) and the PettingZoo env.
    path = write_team(tmp_path, steps=24)
    rng = np.random.default_rng(0)
    actions = rng.uniform(-1, 1, (6, 2, 2))
    single = DivertEnv(path)
    obs_s, _ = single.reset(seed=8)
    vector = DivertVectorEnv(2, path)
    obs_v, _ = vector.reset(seed=7)
    multi = DivertParallelEnv(path)
    obs_m, _ = multi.reset(seed=8)
    np.testing.assert_array_equal(obs_s, obs_v[1])
    np.testing.assert_array_equal(obs_s, np.stack([obs_m["drone_0"][:26], obs_m["drone_1"][:26]]))
    for a in actions:
        obs_s, r_s, *_ = single.step(a)
        obs_v, r_v, *_ = vector.step(np.stack([a, a]))
        obs_m, r_m, *_ = multi.step({"drone_0": a[0], "drone_1": a[1]})
        np.testing.assert_array_equal(obs_s, obs_v[1])
        own = np.stack([obs_m["drone_0"][:26], obs_m["drone_1"][:26]])  # then the teammate's
        np.testing.assert_array_equal(obs_s, own)
        assert r_s == r_v[1] == r_m["drone_0"] == r_m["drone_1"]
    np.testing.assert_array_equal(single.task.state.bird_pos[0], vector.task.state.bird_pos[1])
    np.testing.assert_array_equal(single.task.state.bird_pos[0], multi.task.state.bird_pos[0])


# ---------------------------------------------------------------------------------------------
# The PettingZoo env.


def test_pettingzoo_parallel_api_test_passes(tmp_path):
    # Outside check: PettingZoo's own API test for Parallel envs.
    from pettingzoo.test import parallel_api_test

    parallel_api_test(DivertParallelEnv(write_team(tmp_path, steps=40)), num_cycles=60)
    parallel_api_test(DivertParallelEnv("headon", max_episode_steps=12), num_cycles=20)


@pytest.mark.parametrize("reward_mode", ["team", "own"])
def test_pettingzoo_parallel_seed_test_passes(tmp_path, reward_mode):
    # Outside check: PettingZoo's own seed test (two envs, same seed, same sampled actions).
    from pettingzoo.test import parallel_seed_test

    path = write_team(tmp_path, steps=40)
    parallel_seed_test(lambda: DivertParallelEnv(path, reward_mode=reward_mode), num_cycles=20)


def test_pettingzoo_agents_see_the_world_from_their_own_drone(tmp_path):
    env = DivertParallelEnv(write_team(tmp_path), reward_mode="own")
    obs, _ = env.reset(seed=1)
    assert env.possible_agents == ["drone_0", "drone_1"]
    centroid = env.task.metrics.centroid[0]
    site = env.task.setting.scales.site
    pos = env.task.state.pursuer_pos[0]
    near = env.task.setting.scales.near
    assert env.observation_space("drone_0").shape == (26 + 4,)
    for k, agent in enumerate(env.agents):
        # vector entries 2-3: (flock centroid - this agent's drone) / site scale
        expected = (centroid - pos[k]) / site
        np.testing.assert_allclose(obs[agent][2:4], expected, rtol=1e-6)
        # then the teammate: its offset from this agent's drone / alarm radius, and velocity
        np.testing.assert_allclose(obs[agent][26:28], (pos[1 - k] - pos[k]) / near, rtol=1e-6)
        np.testing.assert_array_equal(obs[agent][28:30], 0.0)  # both at rest
    _, rewards, *_ = env.step({"drone_0": np.zeros(2), "drone_1": np.zeros(2)})
    assert rewards["drone_0"] != rewards["drone_1"]


# ---------------------------------------------------------------------------------------------
# Controllers, the episode record and the score.


def test_sector_split_covers_the_arc_exactly_once():
    # Geometry check (arithmetic, common practice): the sectors tile [-span/2, span/2] with equal
    # widths, no gap and no overlap; every sampled angle lies in exactly one half-open sector.
    for drones in range(1, 6):
        span = math.radians(120.0)
        parts = sectors(span, drones)
        assert parts[0][0] == -span / 2 and parts[-1][1] == span / 2
        for (_, hi), (next_lo, _) in itertools.pairwise(parts):
            assert hi == next_lo
        assert all(hi - lo == pytest.approx(span / drones) for lo, hi in parts)
        for angle in np.linspace(-span / 2, span / 2, 997, endpoint=False):
            assert sum(lo <= angle < hi for lo, hi in parts) == 1


class Still(Controller):
    """Drone 0 flies east; returns (2,), so the other drones get a zero command."""

    name = "still"

    def act(self, observation, state):
        return np.array([1.0, 0.0])


def test_a_one_drone_controller_leaves_the_other_drones_still(tmp_path):
    scenario = load_scenario(write_team(tmp_path, steps=20))
    record, frames = play_episode(scenario, Still(), 4, record_frames=True)
    first, last = frames[0]["pursuer_pos"], frames[-1]["pursuer_pos"]
    assert last[0, 0] > first[0, 0]
    np.testing.assert_array_equal(first[1], last[1])
    assert record.drone_path_length[1] == 0.0 and record.drone_energy[1] == 0.0
    assert record.drone_path_length[0] == pytest.approx(record.path_length)
    assert sum(record.drone_energy) == pytest.approx(record.energy)
    assert min(record.drone_closest_approach) == pytest.approx(record.closest_approach)


def test_a_drone_drone_conflict_counts_as_a_contact(tmp_path):
    # Two drones 6 m apart with 5 m safety radii each: closer than the sum (10 m), a conflict
    # on every control step, counted in collision_steps, so the score's no-contact term is lost.
    scenario = load_scenario(write_team(tmp_path, steps=8, second="[6.0, 0.0]"))
    record, _ = play_episode(scenario, Still(), 1)
    assert record.min_drone_separation < 10.0
    assert record.conflict_steps == record.steps == 8
    assert record.collision_steps == 8
    apart = load_scenario(write_team(tmp_path, steps=8))
    clear, _ = play_episode(apart, Still(), 1)
    assert clear.conflict_steps == 0 == clear.collision_steps
    assert episode_score(record.as_dict()) < episode_score(clear.as_dict())


def test_one_drone_records_keep_their_fields():
    # Regression test: a one-drone record has exactly the fields it always had (no team fields).
    scenario = load_scenario("headon", {"flock.count": 8, "episode.max_steps": 8})
    record, _ = play_episode(scenario, make_controller("idle"), 0)
    assert not {"drone_path_length", "conflict_steps", "min_drone_separation"} & set(
        record.as_dict()
    )


@pytest.mark.parametrize("name", ["sector-arc", "collect-drive-roles"])
def test_team_controllers_fly_every_drone(tmp_path, name):
    scenario = load_scenario(write_team(tmp_path, steps=40))
    record, _ = play_episode(scenario, make_controller(name), 3)
    assert record.error is None
    assert all(length > 10.0 for length in record.drone_path_length)  # m in 4 s


def test_check_reports_every_bad_drone_key_with_its_line(tmp_path):
    from flockward.config.checking import file_errors

    path = tmp_path / "bad.toml"
    path.write_text(
        'name = "bad"\n[[drones]]\nstart = [0, 0]\nmax_accel = 99\n[[drones]]\nspeed = 3\n',
        encoding="utf-8",
    )
    errors = file_errors(path, "scenario")
    assert len(errors) == 2
    assert ":6: unknown key 'drones.1.speed'" in errors[0]
    assert ":4: key 'drones.0.max_accel' = 99" in errors[1]


def test_teammates_need_a_vector_observation(tmp_path):
    path = write_team(tmp_path)
    assert DivertParallelEnv(path, teammates=False).observation_space("drone_1").shape == (26,)
    spaces = DivertParallelEnv(path, observation="dict").observation_space("drone_0")
    assert "birds" in spaces.spaces  # no teammates by default with a dict observation
    with pytest.raises(ValueError, match=r"^teammates = True: needs a vector"):
        DivertParallelEnv(path, observation="dict", teammates=True)


def test_command_line_plays_shows_and_ranks_a_team(tmp_path, capsys):
    # Through the real entry point with a tiny budget: a two-drone suite run by a team baseline
    # and a one-drone baseline, ranked, and one episode drawn.
    from flockward_baselines.cli import main

    write_team(tmp_path, steps=30)
    suite = tmp_path / "teams.toml"
    suite.write_text(
        'name = "teams"\nversion = 1\n[[entry]]\nscenario = "team.toml"\nseeds = [0, 1]\n',
        encoding="utf-8",
    )
    results = tmp_path / "results"
    for name in ("sector-arc", "boundary-arc"):
        args = ["run", "--suite", str(suite), "--controller", name, "--results", str(results)]
        assert main(args) == 0
    assert main(["board", "--suite", str(suite), "--results", str(results)]) == 0
    assert "| sector-arc |" in capsys.readouterr().out
    out = tmp_path / "team.png"
    args = ["show", "--scenario", str(tmp_path / "team.toml"), "--controller", "sector-arc"]
    assert main([*args, "--seed", "1", "--out", str(out)]) == 0
    assert out.stat().st_size > 0


def test_result_files_check_team_fields_and_accept_records_without_them():
    from flockward.bench.results import episode_problem

    scenario = load_scenario("headon", {"flock.count": 8, "episode.max_steps": 8})
    record, _ = play_episode(scenario, make_controller("idle"), 0)
    row = {"family": "f", **record.as_dict()}
    assert episode_problem(row) is None  # a one-drone record, as every file before teams
    assert episode_problem({**row, "conflict_steps": 0, "drone_energy": [1.0, None]}) is None
    bad = {**row, "conflict_steps": row["collision_steps"] + 1}
    assert episode_problem(bad) == (
        "has 'conflict_steps' that is not an integer in [0, collision_steps]"
    )
    assert "not a list of numbers" in episode_problem({**row, "drone_path_length": "far"})


def test_a_one_drone_model_flies_drone_0_from_drone_0s_view():
    # A committed one-drone policy on a team scenario: the stacked (P, 26) observation is cut to
    # drone 0's row, which is exactly the observation the model was trained on (regression).
    from flockward_baselines.policy import PolicyController

    model = Path(__file__).resolve().parent.parent / "results/models/ppo-standard-s0.zip"
    policy = PolicyController(str(model))
    scenario = load_scenario("large-flock-two-drones")
    policy.reset(scenario, seed=0)
    env = DivertEnv(scenario=scenario)
    observation, _ = env.reset(seed=0)
    assert observation.shape == (2, 26)
    np.testing.assert_array_equal(policy.act(observation, None), policy.act(observation[0], None))
    with pytest.raises(ValueError, match="expects observations of shape"):
        policy.act(observation[:, :20], None)

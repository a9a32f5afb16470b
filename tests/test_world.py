"""The batched World on shipped scenarios: airspeed limits, determinism, neighbour search."""

from __future__ import annotations

import numpy as np
import pytest

from flockward.config.scenarios import list_scenarios, load_scenario
from flockward.sim.dynamics import GRID_MIN_BIRDS
from flockward.sim.types import WorldState
from flockward.sim.world import NOISE_BLOCK, World

STATE_FIELDS = ("bird_pos", "bird_vel", "pursuer_pos", "pursuer_vel", "count")


def make_world(scenario, seeds, neighbour_search="auto"):
    world = World(scenario, len(seeds), neighbour_search=neighbour_search)
    for b, seed in enumerate(seeds):
        world.reset(b, np.random.default_rng(seed))
    return world


def pursuer_into_flock(world: World, b: int, offset=(20.0, 5.0)) -> None:
    """Put world b's drones beside its flock's centroid, so fear and dodging act at once."""
    n = int(world.state.count[b])
    world.state.pursuer_pos[b] = world.state.bird_pos[b, :n].mean(axis=0) + np.asarray(offset)


def same_state(a: WorldState, b: WorldState, index_a=slice(None), index_b=slice(None)) -> bool:
    return all(np.array_equal(getattr(a, f)[index_a], getattr(b, f)[index_b]) for f in STATE_FIELDS)


def test_scenarios_used_here_are_shipped():
    assert {"headon", "pigeons-cluster", "crosswind-mix", "murmuration"} <= set(list_scenarios())


# ---------------------------------------------------------------------------------------------
# 8. Airspeed limits.


@pytest.mark.parametrize("name", ["headon", "pigeons-cluster", "crosswind-mix"])
def test_airspeeds_stay_within_limits(name):
    # Birds keep min_speed <= |v| <= max_speed (the airspeed safety net behind the smooth speed
    # regulation); the drone keeps |v| <= its max_speed. Random commands; in two of the four
    # worlds the pursuer starts inside the flock, so birds flee toward burst speed.
    scenario = load_scenario(name)
    world = make_world(scenario, [11, 12, 13, 14])
    pursuer_into_flock(world, 0)
    pursuer_into_flock(world, 1, offset=(-5.0, 0.0))
    lo = np.array([f.min_speed for f in world.flocks])[:, None]
    hi = np.array([f.max_speed for f in world.flocks])[:, None]
    slots = np.arange(world.max_birds)[None, :] < world.state.count[:, None]
    rng = np.random.default_rng(0)
    fastest = 0.0
    for _ in range(300):
        world.step(rng.uniform(-1.5, 1.5, (world.n_worlds, 1, 2)))
        speed = np.linalg.norm(world.state.bird_vel, axis=-1)
        assert np.all(speed[slots] >= np.broadcast_to(lo, speed.shape)[slots] * (1 - 1e-12))
        assert np.all(speed[slots] <= np.broadcast_to(hi, speed.shape)[slots] * (1 + 1e-12))
        fastest = max(fastest, float(speed[slots].max()))
        p_speed = np.linalg.norm(world.state.pursuer_vel, axis=-1)
        assert np.all(p_speed <= world.pursuer_limits[..., 0] * (1 + 1e-12))
    # Fear was exercised: some bird flew faster than cruise, toward its burst speed.
    assert fastest > max(f.cruise_speed for f in world.flocks) * 1.05
    assert np.all(np.isfinite(world.state.bird_pos))


# ---------------------------------------------------------------------------------------------
# 9. Determinism.


def rollout(world: World, steps: int, seed: int = 5) -> None:
    rng = np.random.default_rng(seed)
    for _ in range(steps):
        world.step(rng.uniform(-1.0, 1.0, (world.n_worlds, 1, 2)))


def test_same_seed_same_trajectory():
    # Reproducibility: the same seed gives a bit-identical trajectory (noise is drawn from it).
    scenario = load_scenario("pigeons-cluster")
    assert scenario.flock.noise_std > 0.0
    runs = []
    for _ in range(2):
        world = make_world(scenario, [42])
        pursuer_into_flock(world, 0)
        rollout(world, 200)
        runs.append(world.state)
    assert same_state(runs[0], runs[1])
    other = make_world(scenario, [43])
    pursuer_into_flock(other, 0)
    rollout(other, 200)
    assert not np.array_equal(other.state.bird_pos, runs[0].bird_pos)  # the seed matters


@pytest.mark.parametrize("name", ["pigeons-cluster", "crosswind-mix", "headon"])
def test_batched_worlds_equal_worlds_alone(name):
    # A world's trajectory depends on its own seed only: B worlds stepped together equal each
    # world stepped alone in a B = 1 World, bit for bit. crosswind-mix randomises the flock size
    # (20-80 birds), gains, cruise speed and noise per reset; pigeons-cluster has noise. 150 steps
    # cross the noise-block boundary (NOISE_BLOCK = 64) twice.
    scenario = load_scenario(name)
    seeds = [101, 202, 303, 404]
    steps = 150
    assert steps > 2 * NOISE_BLOCK
    together = make_world(scenario, seeds)
    pursuer_into_flock(together, 1)
    actions = np.random.default_rng(9).uniform(-1.0, 1.0, (steps, len(seeds), 1, 2))
    for k in range(steps):
        together.step(actions[k])
    if name == "crosswind-mix":
        assert len(set(together.state.count.tolist())) > 1  # flocks of different sizes
    for b, seed in enumerate(seeds):
        alone = make_world(scenario, [seed])
        if b == 1:
            pursuer_into_flock(alone, 0)
        for k in range(steps):
            alone.step(actions[k, b : b + 1])
        assert same_state(together.state, alone.state, b, 0), f"world {b} differs"


def test_live_mask_leaves_other_worlds_untouched():
    # A world outside the live mask is not advanced at all (state, step count, noise position),
    # and when it resumes it continues exactly as a world that never paused.
    scenario = load_scenario("crosswind-mix")
    world = make_world(scenario, [7, 8, 9])
    reference = make_world(scenario, [8])
    rng = np.random.default_rng(1)
    paused_steps = 0
    for k in range(120):
        live = np.array([True, k % 3 == 0, True])
        before = world.state.copy()
        action = rng.uniform(-1.0, 1.0, (3, 1, 2))
        world.step(action, live)
        if live[1]:
            reference.step(action[1:2])
            assert same_state(world.state, reference.state, 1, 0)
        else:
            paused_steps += 1
            assert same_state(world.state, before, 1, 1)
        assert not np.array_equal(world.state.bird_pos[0], before.bird_pos[0])  # others move
    assert paused_steps == 80
    assert world.steps.tolist() == [120, 40, 120]


def test_reset_restarts_one_world_only():
    # Resetting one world with a seed reproduces a fresh world of that seed; the others go on.
    scenario = load_scenario("pigeons-cluster")
    world = make_world(scenario, [1, 2])
    rollout(world, 70)
    other_before = world.state.copy()
    world.reset(0, np.random.default_rng(55))
    fresh = make_world(scenario, [55])
    assert same_state(world.state, fresh.state, 0, 0)
    assert same_state(world.state, other_before, 1, 1)
    rng = np.random.default_rng(3)
    for _ in range(70):
        action = rng.uniform(-1.0, 1.0, (2, 1, 2))
        world.step(action)
        fresh.step(action[:1])
    assert same_state(world.state, fresh.state, 0, 0)


# ---------------------------------------------------------------------------------------------
# 10. All pairs versus the cell grid.


@pytest.mark.parametrize("count", [300, 2000])
def test_grid_equals_all_pairs(count):
    # The two neighbour searches visit the same pairs (every pair within the cut-off) and sum the
    # same terms in a different order, so they agree to rounding: after one step to 1e-9.
    # Rounding differences (~1e-15 m/s) then grow with the flock's sensitivity to its initial
    # state: sub-metre starling spacing under 1/d^2 repulsion e-folds a perturbation in about
    # 0.2 s (measured here: 1e-15 -> 1e-12 by step 20, ~1e-6 by step 50, O(10 m) by step 100), so
    # 1e-8 after 20 steps (2 s) is a strict check with three orders of magnitude to spare, far
    # below the 0.1-1 m difference a missed or double-counted neighbour would make in one step.
    scenario = load_scenario("murmuration", {"flock.count": count})
    worlds = {}
    for mode in ("all-pairs", "grid"):
        worlds[mode] = make_world(scenario, [10, 11], neighbour_search=mode)
        pursuer_into_flock(worlds[mode], 1, offset=(25.0, 5.0))  # fear and dodging in world 1
    assert worlds["grid"].use_grid and not worlds["all-pairs"].use_grid
    assert make_world(scenario, [0]).use_grid == (count >= GRID_MIN_BIRDS)  # 'auto'
    actions = np.random.default_rng(2).uniform(-1.0, 1.0, (20, 2, 1, 2))
    for k in range(20):
        for world in worlds.values():
            world.step(actions[k])
        a, g = worlds["all-pairs"].state, worlds["grid"].state
        tol = 1e-9 if k == 0 else 1e-8
        np.testing.assert_allclose(g.bird_pos, a.bird_pos, rtol=0, atol=tol)
        np.testing.assert_allclose(g.bird_vel, a.bird_vel, rtol=0, atol=tol)
    start = make_world(scenario, [10]).state
    moved = np.linalg.norm(a.bird_vel[0] - start.bird_vel[0], axis=-1)
    assert moved.max() > 0.1  # the birds interacted: the comparison is not of idle flocks


# ---------------------------------------------------------------------------------------------
# 11. The smallest flocks.


@pytest.mark.parametrize("count", [1, 2])
def test_tiny_flocks_run(count):
    scenario = load_scenario("headon", {"flock.count": count})
    world = make_world(scenario, [0, 1])
    pursuer_into_flock(world, 1, offset=(10.0, 3.0))
    rollout(world, 300)
    assert world.state.count.tolist() == [count, count]
    for name in ("bird_pos", "bird_vel"):
        assert np.all(np.isfinite(getattr(world.state, name)))
    speed = np.linalg.norm(world.state.bird_vel, axis=-1)
    assert np.all(speed >= scenario.flock.min_speed * (1 - 1e-12))
    assert np.all(speed <= scenario.flock.max_speed * (1 + 1e-12))

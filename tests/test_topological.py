"""Topological neighbours (``neighbours = k``): each bird aligns with and coheres to its k nearest
flockmates whatever their distance (Ballerini et al. 2008, PNAS 105:1232, about 6-7 for
starlings; the count is from memory of the paper's abstract)."""

from __future__ import annotations

import numpy as np
import pytest
from flock_helpers import FAR, OFF
from scipy.spatial import cKDTree

from flockward.config.files import ConfigError
from flockward.config.scenarios import load_scenario
from flockward.sim.dynamics import flock_acceleration, flock_context, neighbour_radii
from flockward.sim.limits import derived
from flockward.sim.types import FlockParams
from flockward.sim.world import World


def accel(flock: FlockParams, x: np.ndarray, v: np.ndarray, grid: bool = False) -> np.ndarray:
    """``flock_acceleration`` of one world without drones, (N, 2)."""
    x = np.ascontiguousarray(x, np.float64)
    v = np.ascontiguousarray(v, np.float64)
    ctx = flock_context(flock.kernel_vector(), np.array(FAR), np.zeros((0, 2)),
                        np.zeros((0, 2)), len(x), grid)  # fmt: skip
    out = np.zeros_like(x)
    flock_acceleration(x, v, len(x), ctx, out)
    return out


def radii(flock: FlockParams, x: np.ndarray, grid: bool = False) -> np.ndarray:
    """Each bird's alignment and cohesion radius, (N, 2)."""
    x = np.ascontiguousarray(x, np.float64)
    ctx = flock_context(flock.kernel_vector(), np.array(FAR), np.zeros((0, 2)),
                        np.zeros((0, 2)), len(x), grid)  # fmt: skip
    out = np.zeros_like(x)
    neighbour_radii(x, len(x), ctx, out)
    return out


def smoothstep_bump(z: float, h: float) -> float:
    """The documented cut-off: 1 below h, 1 - 3t^2 + 2t^3 with t = (z - h)/(1 - h) up to 1."""
    if z < h:
        return 1.0
    if z >= 1.0:
        return 0.0
    t = (z - h) / (1.0 - h)
    return 1.0 - 3.0 * t * t + 2.0 * t**3


# Bird 0 at the origin; three close neighbours (1, 1.2, 1.5 m), one in the fade zone (2 m) and
# four far ones at 10 m, inside the metric alignment radius (15 m) but far beyond 1.5 x 1.5 m.
X = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.2], [-1.5, 0.0], [0.0, -2.0],
              [10.0, 0.0], [0.0, 10.0], [-10.0, 0.0], [0.0, -10.0]])  # fmt: skip
V = np.array([[12.0, 0.0], [13.0, 1.0], [11.0, -2.0], [12.5, 0.5], [10.0, 3.0],
              [5.0, 5.0], [20.0, 0.0], [0.0, -8.0], [14.0, 14.0]])  # fmt: skip


def _expected_weights(k: int, reach: float) -> np.ndarray:
    """Weights of bird 0's flockmates from the formula: R = c d_k, w = rho_{1/c}(d / R)."""
    d = np.hypot(*(X[1:] - X[0]).T)
    radius = reach * np.sort(d)[k - 1]
    return np.array([smoothstep_bump(dj / radius, 1.0 / reach) for dj in d])


@pytest.mark.parametrize("alignment_model", ["motsch-tadmor", "cucker-smale"])
def test_alignment_weighs_exactly_the_k_nearest_and_fades_beyond(alignment_model):
    # Motsch-Tadmor: k_ali sum_j w_j (v_j - v_0) / (1 + sum_j w_j); Cucker-Smale:
    # (k_ali / N) sum_j psi(d_j) w_j (v_j - v_0), psi = (1 + d^2/sigma^2)^-beta, worked by hand.
    f = derived(OFF, alignment_gain=2.0, alignment_model=alignment_model, neighbours=3)
    w = _expected_weights(3, 1.5)
    assert list(w[:3]) == [1.0, 1.0, 1.0] and 0.0 < w[3] < 1.0 and not w[4:].any()
    dv = V[1:] - V[0]
    if alignment_model == "motsch-tadmor":
        expected = 2.0 * (w[:, None] * dv).sum(0) / (1.0 + w.sum())
    else:
        d2 = ((X[1:] - X[0]) ** 2).sum(1)
        psi = (1.0 + d2 / 5.0**2) ** -0.25
        expected = 2.0 / len(X) * ((w * psi)[:, None] * dv).sum(0)
    np.testing.assert_allclose(accel(f, X, V)[0], expected, rtol=1e-13, atol=1e-13)
    # The metric law reaches the far birds too: a different acceleration.
    metric = accel(derived(f, neighbours=0), X, V)[0]
    assert np.hypot(*(metric - expected)) > 1.0


def test_cohesion_pulls_toward_the_k_nearest():
    # k_coh sum_j w_j (x_j - x_0) / (1 + sum_j w_j) with the same topological weights.
    f = derived(OFF, cohesion_gain=0.5, neighbours=3)
    w = _expected_weights(3, 1.5)
    expected = 0.5 * (w[:, None] * (X[1:] - X[0])).sum(0) / (1.0 + w.sum())
    np.testing.assert_allclose(accel(f, X, V)[0], expected, rtol=1e-13, atol=1e-13)


def test_radius_is_reach_times_kth_neighbour_distance_capped_at_cohesion_radius():
    # Reference k-th neighbour distances from scipy's k-d tree (query k + 1: the bird itself
    # comes first), on a flock sparse enough at its rim for the cap to act.
    f = derived(FlockParams(), neighbours=7, topological_reach=1.5)
    rng = np.random.default_rng(5)
    x = np.concatenate([rng.uniform(-20.0, 20.0, (300, 2)), rng.uniform(-400.0, 400.0, (20, 2))])
    dk = cKDTree(x).query(x, 8)[0][:, 7]
    expected = np.minimum(1.5 * dk, f.cohesion_radius)
    assert (expected == f.cohesion_radius).any() and (expected < f.cohesion_radius).any()
    for grid in (False, True):
        got = radii(f, x, grid)
        np.testing.assert_allclose(got[:, 0], expected, rtol=1e-14)
        np.testing.assert_array_equal(got[:, 0], got[:, 1])
    metric = radii(FlockParams(), x)
    assert (metric == [f.alignment_radius, f.cohesion_radius]).all()


def test_interaction_count_does_not_depend_on_density():
    # Ballerini et al. 2008: a bird interacts with a fixed number of neighbours however sparse
    # the flock. The same random flock scaled by powers of two (exact in floating point) from
    # 0.5 m to 64 m mean spacing: the metric count (flockmates inside alignment_radius) falls
    # from hundreds to well under one on average; the topological count (flockmates of positive
    # weight) is the same bird for bird at every scale, never below k. Cohesion radius at its
    # largest allowed value, so that the cap stays out of reach.
    k = 7
    f = derived(FlockParams(), neighbours=k, cohesion_radius=500.0)
    base = np.random.default_rng(6).uniform(0.0, 20.0, (400, 2))  # mean spacing about 1 m
    metric_counts, topo_counts = [], []
    for scale in (0.5, 2.0, 8.0, 64.0):
        x = base * scale
        d = np.hypot(*(x[:, None, :] - x[None, :, :]).transpose(2, 0, 1))
        np.fill_diagonal(d, np.inf)
        metric_counts.append((d < f.alignment_radius).sum(1))
        topo_counts.append((d < radii(f, x)[:, :1]).sum(1))
    assert metric_counts[0].mean() > 100 and metric_counts[-1].mean() < 0.5
    for counts in topo_counts:
        np.testing.assert_array_equal(counts, topo_counts[0])
    assert topo_counts[0].min() >= k and topo_counts[0].mean() < 3 * k


def test_grid_and_all_pairs_agree():
    # Both searches visit the same ordered pairs: equal radii, accelerations equal to rounding.
    f = derived(FlockParams(), neighbours=7, informed_fraction=0.5)
    rng = np.random.default_rng(4)
    x = rng.uniform(-60.0, 60.0, (400, 2))
    v = np.array([12.5, 0.0]) + rng.normal(0.0, 1.0, (400, 2))
    np.testing.assert_array_equal(radii(f, x, True), radii(f, x, False))
    np.testing.assert_allclose(accel(f, x, v, True), accel(f, x, v, False), atol=1e-12)


def test_fewer_flockmates_than_k_fall_back_to_the_cohesion_radius():
    f = derived(OFF, cohesion_gain=0.5, neighbours=7)
    x = np.array([[0.0, 0.0], [3.0, 4.0]])
    np.testing.assert_array_equal(radii(f, x), [[25.0, 25.0], [25.0, 25.0]])
    w = smoothstep_bump(5.0 / 25.0, 1.0 / 1.5)
    expected = 0.5 * w * x[1] / (1.0 + w)
    np.testing.assert_allclose(accel(f, x, np.zeros((2, 2)))[0], expected, rtol=1e-14)


def _episode(worlds: int, seed: int, steps: int = 30) -> np.ndarray:
    scenario = load_scenario("headon", {"flock.neighbours": 7, "flock.count": 60})
    world = World(scenario, worlds, drones=1)
    for b in range(worlds):
        world.reset(b, np.random.default_rng(seed + b))
    for _ in range(steps):
        world.step(np.full((worlds, 1, 2), 0.3))
    return world.state.bird_pos.copy()


@pytest.mark.parametrize("threads", [1, 2, 4])
def test_topological_flock_is_deterministic_alone_and_in_a_batch(threads, monkeypatch):
    # Same seed, same trajectory: twice on its own, and as the first world of a batch of three,
    # whatever the thread count (FLOCKWARD_THREADS).
    monkeypatch.setenv("FLOCKWARD_THREADS", str(threads))
    alone = _episode(1, 11)
    np.testing.assert_array_equal(alone, _episode(1, 11))
    np.testing.assert_array_equal(alone[0], _episode(3, 11)[0])
    assert not np.array_equal(alone[0], _episode(1, 12)[0])


@pytest.mark.parametrize(
    ("key", "value", "allowed"),
    [("neighbours", 17, "[0, 16]"), ("neighbours", 2.5, "integer"), ("topological_reach", 1.0,
     "(1, 10]")],
)  # fmt: skip
def test_bad_values_get_a_one_line_error(key, value, allowed):
    with pytest.raises(ConfigError) as err:
        load_scenario("headon", {f"flock.{key}": value})
    text = str(err.value)
    assert "\n" not in text and key in text and allowed in text, text

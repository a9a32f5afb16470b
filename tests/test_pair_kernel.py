"""The vectorised pair loop: one force evaluation against the published laws in plain NumPy and
against the scalar kernel it replaced, and the threaded step against the serial one.

Sources: Motsch & Tadmor 2011 (J. Stat. Phys.) and Cucker & Smale 2007 (IEEE TAC) for alignment,
Olfati-Saber 2006 (IEEE TAC) for the smooth cut-off, as written in the dynamics docstring. The
comparison with the frozen scalar kernel (flockward_baselines.scalar_kernel) is a regression test:
both are our own code; only the summation order differs, so they agree to rounding.
"""

from __future__ import annotations

import numpy as np
import pytest
from flock_helpers import FAR, OFF

from flockward.config.scenarios import load_scenario
from flockward.sim.dynamics import (
    BUMP_PLATEAU,
    SEPARATION_FLOOR,
    THREADED_MIN_BIRDS,
    candidate_counts,
    flock_acceleration,
    flock_context,
    neighbour_radii,
)
from flockward.sim.limits import derived
from flockward.sim.types import FlockParams
from flockward.sim.world import World
from flockward_baselines.scalar_kernel import scalar_flock_acceleration

MODELS = {
    "motsch-tadmor": {},
    "cucker-smale": {"alignment_model": "cucker-smale"},
    "topological": {"neighbours": 7},
}


def _flock_state(n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """A dense random flock: n birds in a square of 3 m per bird (many within every radius, a few
    inside the separation radius), random velocities."""
    rng = np.random.default_rng(seed)
    side = 3.0 * np.sqrt(n)
    return rng.uniform(0.0, side, (n, 2)), rng.normal(10.0, 3.0, (n, 2))


NO_DRONE = np.zeros((0, 2))


def _kernel(flock: FlockParams, x, v, grid: bool, drones=NO_DRONE, dtype=np.float64) -> np.ndarray:
    ctx = flock_context(flock.kernel_vector(), np.array([300.0, -40.0]), drones,
                        np.zeros_like(drones), len(x), grid, dtype)  # fmt: skip
    out = np.zeros_like(x)
    flock_acceleration(x, v, len(x), ctx, out)
    return out


def _ramp(z: np.ndarray, h: float) -> np.ndarray:
    """Olfati-Saber's C1 bump with the cubic ramp (dynamics docstring), elementwise."""
    t = np.clip((z - h) / (1.0 - h), 0.0, 1.0)
    return 1.0 - t * t * (3.0 - 2.0 * t)


def _numpy_reference(flock: FlockParams, x: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Separation + alignment + cohesion from the published laws, all pairs in NumPy (no budget,
    speed regulation, fear or destination: the caller switches them off)."""
    dxy = x[None, :, :] - x[:, None, :]  # [i, j] = x_j - x_i
    d = np.hypot(dxy[..., 0], dxy[..., 1])
    np.fill_diagonal(d, np.inf)
    r_sep = flock.separation_radius
    q = r_sep / np.maximum(d, SEPARATION_FLOOR * r_sep) - 1.0
    f = flock.separation_gain * q * q * _ramp(d / r_sep, 0.0) / d
    sep = -(f[..., None] * dxy).sum(axis=1)
    if flock.neighbours > 0:
        dk = np.sort(d, axis=1)[:, flock.neighbours - 1]
        limit = flock.cohesion_radius / flock.topological_reach
        radius = np.where(dk < limit, flock.topological_reach * dk, flock.cohesion_radius)
        radius = np.minimum(radius, flock.cohesion_radius)[:, None]
        w_a = w_c = _ramp(d / radius, 1.0 / flock.topological_reach)
    else:
        w_a = _ramp(d / flock.alignment_radius, BUMP_PLATEAU)
        w_c = _ramp(d / flock.cohesion_radius, BUMP_PLATEAU)
    dv = v[None, :, :] - v[:, None, :]
    if flock.alignment_model == "cucker-smale":
        psi = (1.0 + d**2 / flock.alignment_sigma**2) ** -flock.alignment_beta
        ali = flock.alignment_gain / len(x) * ((w_a * psi)[..., None] * dv).sum(axis=1)
    else:
        ali = flock.alignment_gain * (w_a[..., None] * dv).sum(axis=1)
        ali /= (1.0 + w_a.sum(axis=1))[:, None]
    coh = flock.cohesion_gain * (w_c[..., None] * dxy).sum(axis=1)
    coh /= (1.0 + w_c.sum(axis=1))[:, None]
    return sep + ali + coh


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("grid", [False, True])
def test_pair_sums_match_the_published_laws_in_numpy(model: str, grid: bool) -> None:
    # The steering budget is taken out of play (max_accel 1e9: a request m is granted
    # m / (1 + (m/B)^4)^(1/4), within 1e-28 relative of m), so the acceleration is the plain sum.
    flock = derived(OFF, separation_gain=8.0, alignment_gain=2.0, cohesion_gain=0.3,
                    **MODELS[model])  # fmt: skip
    x, v = _flock_state(300, seed=3)
    got = _kernel(flock, x, v, grid)
    want = _numpy_reference(flock, x, v)
    scale = np.abs(want).max()
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12 * scale)


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("grid", [False, True])
def test_float32_pair_sums_match_the_published_laws_to_single_precision(
    model: str, grid: bool
) -> None:
    # The float32 specialisation (StepWork's slot_dtype, a measurement): the same laws, with
    # single-precision rounding. The flock sits 600 m from the origin, as on the demo site; the
    # slots hold positions relative to one bird, so that costs nothing. Expected error, from the
    # float32 unit roundoff u = 6e-8: a pair offset of a flock 50 m wide is off by about 50 u =
    # 3e-6 m, which at the separation floor (0.1 m, force ~ 1/d^3) is 1e-4 of the largest term;
    # the sums of about 300 terms add sqrt(300) u. Hence 1e-4 of the largest acceleration.
    flock = derived(OFF, separation_gain=8.0, alignment_gain=2.0, cohesion_gain=0.3,
                    **MODELS[model])  # fmt: skip
    x, v = _flock_state(300, seed=3)
    x += np.array([-600.0, 40.0])
    got = _kernel(flock, x, v, grid, dtype=np.float32)
    want = _numpy_reference(flock, x, v)
    scale = np.abs(want).max()
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-4 * scale)
    # ... and not float64 in disguise: it differs from the float64 kernel by far more than the
    # 1e-12 of the float64 comparisons above.
    assert np.abs(got - _kernel(flock, x, v, grid)).max() > 1e-9 * scale


def test_candidate_counts_are_the_birds_in_each_birds_three_by_three_cells() -> None:
    # The cell-list definition (common practice): with cells as wide as the cut-off, a bird's
    # candidates are the birds whose cell differs from its own by at most one in each axis.
    flock = FlockParams()
    x, _ = _flock_state(500, seed=9)
    cut = flock.interaction_radius
    cells = np.floor(x / cut).astype(np.int64)
    near = (np.abs(cells[:, None, :] - cells[None, :, :]) <= 1).all(axis=2)
    for grid, want in ((True, near.sum(axis=1)), (False, np.full(len(x), len(x)))):
        ctx = flock_context(flock.kernel_vector(), np.array(FAR), NO_DRONE, NO_DRONE, len(x), grid)
        got = np.zeros(len(x), dtype=np.int64)
        candidate_counts(x, len(x), ctx, got)
        np.testing.assert_array_equal(got, want)


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("grid", [False, True])
def test_vectorised_kernel_matches_the_scalar_kernel(model: str, grid: bool) -> None:
    # Regression test: every term on (budget, fear, dodge, destination), a drone among the birds.
    flock = derived(FlockParams(), **MODELS[model])
    x, v = _flock_state(400, seed=5)
    drones = np.array([[20.0, 25.0], [40.0, 10.0]])
    got = _kernel(flock, x, v, grid, drones)
    want = np.zeros_like(x)
    ctx = flock_context(flock.kernel_vector(), np.array([300.0, -40.0]), drones,
                        np.zeros_like(drones), len(x), grid)  # fmt: skip
    scalar_flock_acceleration(x, v, len(x), *ctx[:5], ctx[5][0], ctx[5][1], want)
    scale = np.abs(want).max()
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12 * scale)


def test_coincident_birds_stay_finite() -> None:
    # The separation distance is floored: two birds on the same spot push apart, finitely.
    flock = derived(FlockParams(), neighbours=1)
    x = np.array([[0.0, 0.0], [0.0, 0.0], [5.0, 0.0]])
    v = np.array([[10.0, 0.0], [10.0, 1.0], [10.0, 0.0]])
    assert np.isfinite(_kernel(flock, x, v, False)).all()
    out = np.zeros_like(x)
    ctx = flock_context(flock.kernel_vector(), np.array(FAR), np.zeros((0, 2)), np.zeros((0, 2)),
                        3)  # fmt: skip
    neighbour_radii(x, 3, ctx, out)
    assert out[0, 0] == 0.0  # the nearest flockmate is at distance 0


def _rollout(scenario_name: str, worlds: int, threads: int, steps: int, birds: int | None):
    overrides = {"episode.max_steps": 10_000}
    if birds is not None:
        overrides["flock.count"] = birds
    scenario = load_scenario(scenario_name, overrides)
    world = World(scenario, worlds, threads=threads)
    for b in range(worlds):
        world.reset(b, np.random.default_rng(100 + b))
    rng = np.random.default_rng(0)
    for _ in range(steps):
        world.step(rng.uniform(-1, 1, (worlds, 1, 2)))
    return world.state.bird_pos.copy(), world.state.bird_vel.copy(), world.clamps.copy()


@pytest.mark.parametrize("threads", [2, 4])
def test_threaded_worlds_equal_serial_bit_for_bit(threads: int) -> None:
    serial = _rollout("crosswind-mix", 5, 1, 12, None)
    threaded = _rollout("crosswind-mix", 5, threads, 12, None)
    for a, b in zip(serial, threaded, strict=True):
        np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize("threads", [2, 4])
def test_threaded_birds_of_one_large_world_equal_serial_bit_for_bit(threads: int) -> None:
    serial = _rollout("headon", 1, 1, 3, THREADED_MIN_BIRDS + 100)
    threaded = _rollout("headon", 1, threads, 3, THREADED_MIN_BIRDS + 100)
    for a, b in zip(serial, threaded, strict=True):
        np.testing.assert_array_equal(a, b)


def test_threads_setting_is_checked(monkeypatch: pytest.MonkeyPatch) -> None:
    scenario = load_scenario("headon")
    monkeypatch.setenv("FLOCKWARD_THREADS", "2")
    assert World(scenario, 2).threads == 2
    monkeypatch.setenv("FLOCKWARD_THREADS", "two")
    with pytest.raises(ValueError, match="FLOCKWARD_THREADS = 'two': must be a whole number"):
        World(scenario, 2)
    with pytest.raises(ValueError, match="threads = 0: must be at least 1"):
        World(scenario, 2, threads=0)


def test_four_threads_are_available_to_the_thread_checks() -> None:
    # tests/conftest.py raises numba's cap, so the 4-thread runs above do use 4 threads.
    from flockward.sim.dynamics import max_threads

    assert max_threads() >= 4


def test_pair_loop_compiles_to_packed_vector_instructions() -> None:
    # Guards the vectorisation: a branch or an exception exit added to _pair_sums would leave
    # only scalar code (sqrtsd) and the kernel would fall back to half its speed. The function is
    # compiled afresh with the kernel's options, since cached code cannot be inspected.
    import numba

    from flockward.sim import dynamics

    fresh = numba.njit(fastmath=dynamics._FAST, error_model="numpy")(dynamics._flock_slots.py_func)
    x, v = _flock_state(40, seed=1)
    asm = {}
    for dtype in (np.float64, np.float32):
        ctx = flock_context(FlockParams().kernel_vector(), np.array(FAR), NO_DRONE, NO_DRONE, 40,
                            False, dtype)  # fmt: skip
        runs = dynamics._sort_into_slots(x, v, 40, 25.0, False, ctx[5], ctx[6])
        fresh(0, 40, x, v, 40, ctx, runs, np.empty(16), np.zeros_like(x))
        asm[dtype] = fresh.inspect_asm(fresh.signatures[-1])
    assert "sqrtpd" in asm[np.float64]  # packed square roots (x86: SSE2 xmm or AVX ymm/zmm)
    # The float32 specialisation's loop is packed single precision, with no packed double left:
    # a float64 literal in the loop would promote it to float64 (numba types literals float64).
    assert "sqrtps" in asm[np.float32]
    assert "sqrtpd" not in asm[np.float32]

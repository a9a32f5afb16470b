"""`flockward bench`: throughput of the simulator, the environments and PPO, measured in one run.

Every figure is the median of several timed repeats after a warm-up (compilation excluded), and
ratios are taken between figures of the same run, because the machines are noisy.
"""

from __future__ import annotations

import json
import math
import os
import statistics
import subprocess
import sys
import time
from collections.abc import Callable
from functools import partial
from typing import TYPE_CHECKING, Any, TypedDict

import numpy as np

from flockward.sim.types import EpisodeParams
from flockward.task.registration import ENV_ID

if TYPE_CHECKING:
    from flockward.sim.types import WorldState
    from flockward.sim.world import World

# Rough floating-point operations per unordered pair of birds (the kernel sums ordered pairs, each
# about 50 operations: distance, three cut-offs and terms) and per bird (steering sum, fear,
# clamps, integration): counted by hand from the kernel source, so the GFLOP/s figure is an
# estimate, not a hardware count.
FLOPS_PER_PAIR = 100
FLOPS_PER_BIRD = 70

SIM_SIZES = ((1, 50), (64, 50), (16, 300), (1, 2000))
SCALING_SIZES = (250, 500, 1000, 2000)  # birds in one murmuration world
# Larger headon flocks the grid's exponent is also fitted on (from N = 1000), in the same turns.
GRID_LARGER_SIZES = (3500, 5000)
SCALING_WARMUP = 5  # steps before timing, so the flock has left its initial formation
BENCH_THREADS = 2  # the thread count the scaling figure compares with one thread
# Control steps per policy decision for the per-decision figures: the environment's default.
CONTROL_STEPS_PER_DECISION = EpisodeParams().decision_steps
PPO_PER_CONTROL_STEP = f"{ENV_ID}, 1 step/decision"
PPO_DEFAULT = f"{ENV_ID}, {CONTROL_STEPS_PER_DECISION} steps/decision"
PPO_THREADED = f"{PPO_DEFAULT}, simulator on {BENCH_THREADS} threads"
PPO_NO_SIMULATOR = "no simulator, flockward's spaces"
PPO_CARTPOLE = "CartPole-v1"
# The share of CartPole's PPO decisions per second that flockward's default decision interval
# aims at (speed issue); the bench prints what the simulator would need to reach it.
PPO_TARGET_SHARE = 0.7
# Force evaluations per control step: one fresh evaluation, then one per substep (the
# Verlet-Heun integrator of sim.dynamics re-evaluates at each substep's predicted velocity).
FORCE_EVALUATIONS_PER_CONTROL_STEP = EpisodeParams().substeps + 1
PPO_BIRDS = 50  # the headon flock the PPO figures play
NEIGHBOUR_SEARCHES = ("auto", "all-pairs", "grid")

# What scaling_table returns. Its "table" holds one list per column: "N" (flock sizes), one per
# neighbour search, "metrics", "components pairs", "components grid" (s per call) and "uses"
# (the search "auto" picked), one entry per flock size.
Scaling = TypedDict(
    "Scaling",
    {
        "table": dict[str, list[Any]],
        "exponent auto": float,
        "exponent metrics": float,
        "crossover": float | None,
        "crossover components": float | None,
        "grid_min_birds": int,
        "metrics_grid_min_birds": int,
    },
)


def _median_rate(run: Callable[[], int], repeats: int) -> float:
    """Median units per second of ``run`` (which returns the units it did) after a warm-up."""
    run()  # warm-up: compilation, caches
    rates = []
    for _ in range(repeats):
        start = time.perf_counter()
        units = run()
        rates.append(units / (time.perf_counter() - start))
    return statistics.median(rates)


def _world(worlds: int, birds: int, neighbour_search: str = "auto") -> World:
    """``worlds`` headon worlds of ``birds`` birds, each reset from its own index as seed."""
    from flockward.config.scenarios import load_scenario
    from flockward.sim.world import World

    scenario = load_scenario("headon", {"flock.count": birds, "episode.max_steps": 100000})
    world = World(scenario, worlds, neighbour_search)
    for b in range(worlds):
        world.reset(b, np.random.default_rng(b))
    return world


def simulator_rate(
    worlds: int, birds: int, steps: int, repeats: int = 5, search: str = "auto"
) -> float:
    """Bird-steps per second of the bare step kernel."""
    world = _world(worlds, birds, search)
    action = np.zeros((worlds, world.n_drones, 2))

    def run() -> int:
        for _ in range(steps):
            world.step(action)
        return worlds * birds * steps

    return _median_rate(run, repeats)


def _restore(world: World, start: WorldState) -> None:
    """Put ``world`` back into state ``start`` (arrays copied in place)."""
    for name in ("bird_pos", "bird_vel", "pursuer_pos", "pursuer_vel", "count"):
        np.copyto(getattr(world.state, name), getattr(start, name))


def _replay_from_here(world: World, steps: int) -> Callable[[], None]:
    """A run that restores ``world`` to its present state and plays ``steps`` idle control
    steps: every call times the same work."""
    start = world.state.copy()
    action = np.zeros((world.n_worlds, world.n_drones, 2))

    def run() -> None:
        _restore(world, start)
        for _ in range(steps):
            world.step(action)

    return run


def kernel_comparison(
    worlds: int, birds: int, steps: int, repeats: int = 5, seconds: float = 0.3
) -> dict[str, float]:
    """Seconds per control step of today's kernel and of the scalar kernel it replaced
    (flockward_baselines.scalar_kernel), each run from the same state, timed in turns."""
    from flockward_baselines.scalar_kernel import scalar_step_worlds

    world = _world(worlds, birds)
    world.step(np.zeros((worlds, world.n_drones, 2)))  # draws the first noise block
    start = world.state.copy()
    old = start.copy()
    action = np.zeros((worlds, world.n_drones, 2))
    rows = np.zeros(worlds, dtype=np.int64)

    def run_new() -> None:
        _restore(world, start)
        for _ in range(steps):
            world.step(action)

    def run_old() -> None:
        for name in ("bird_pos", "bird_vel", "pursuer_pos", "pursuer_vel"):
            np.copyto(getattr(old, name), getattr(start, name))
        for _ in range(steps):
            scalar_step_worlds(
                old.bird_pos, old.bird_vel, old.pursuer_pos, old.pursuer_vel, old.count,
                world.destination, world.params, world.pursuer_limits, action, world._noise,
                rows, world.dt, world.substeps, world.use_grid, world.clamps,
            )  # fmt: skip

    t = _timed_together({"today": run_new, "scalar": run_old}, repeats, seconds)
    return {"today": t["today"] / steps, "scalar": t["scalar"] / steps}


def precision_comparison(
    worlds: int, birds: int, steps: int, repeats: int = 5, seconds: float = 0.3
) -> dict[str, float]:
    """Seconds per control step with the pair sums in float64 (the shipped kernel) and in
    float32 (the same kernel specialised on float32 slots, ``StepWork``), from the same state,
    timed in turns. A measurement only: the environments always run float64 (DEVELOPERS.md says
    why)."""
    from flockward.sim.dynamics import StepWork

    runs: dict[str, Callable[[], object]] = {}
    for name, dtype in (("float64", np.float64), ("float32", np.float32)):
        world = _world(worlds, birds)
        world._work = StepWork(worlds, world.max_birds, slot_dtype=dtype)
        runs[name] = _replay_from_here(world, steps)
    t = _timed_together(runs, repeats, seconds)
    return {k: v / steps for k, v in t.items()}


def thread_scaling(
    worlds: int, birds: int, steps: int, threads: int = 2, repeats: int = 5, seconds: float = 0.3
) -> dict[int, float]:
    """Seconds per control step on 1 and on ``threads`` threads, from the same state, in turns."""
    runs: dict[str, Callable[[], object]] = {}
    for count in (1, threads):
        world = _world(worlds, birds)
        world.threads = count
        runs[str(count)] = _replay_from_here(world, steps)
    t = _timed_together(runs, repeats, seconds)
    return {int(k): v / steps for k, v in t.items()}


def step_split(birds: int = 2000, repeats: int = 5, seconds: float = 0.3) -> dict[str, float]:
    """Seconds per environment step of one murmuration world of ``birds`` birds: the whole
    vector-env step, the simulator kernel and the flock metrics; the rest (observation, reward,
    bookkeeping) is the difference."""
    from flockward.task.vector_env import DivertVectorEnv

    # One control step per env step, so the env step and the kernel cover the same simulated time.
    overrides = {"flock.count": birds, "episode.max_steps": 10**6, "episode.decision_steps": 1}
    env = DivertVectorEnv(1, "murmuration", overrides=overrides)
    env.reset(seed=0)
    action = np.zeros((1, 2))
    for _ in range(SCALING_WARMUP):
        env.step(action)
    task = env.task
    kernel_world = _murmuration_world(birds, "auto")
    kernel_action = np.zeros((1, kernel_world.n_drones, 2))
    kernel_start = kernel_world.state.copy()

    def kernel() -> None:
        _restore(kernel_world, kernel_start)
        kernel_world.step(kernel_action)

    t = _timed_together(
        {"env step": partial(env.step, action), "kernel": kernel, "metrics": task.measure},
        repeats,
        seconds,
    )
    t["observation, reward, rest"] = max(t["env step"] - t["kernel"] - t["metrics"], 0.0)
    return t


def per_decision_rate(world_steps_per_s: float, control_steps_per_decision: int = 1) -> float:
    """Decisions per second when the policy acts every ``control_steps_per_decision`` control
    steps (the hook for a decision interval: pass the environment's default when it has one)."""
    return world_steps_per_s / control_steps_per_decision


def grid_exponent(
    sizes: tuple[int, ...] = SCALING_SIZES,
    larger: tuple[int, ...] = GRID_LARGER_SIZES,
    repeats: int = 5,
    seconds: float = 0.2,
) -> dict[str, Any]:
    """Seconds per step with the grid forced for the headon flock (a disc at 3 m spacing whose
    separation holds) and the fitted exponent over ``sizes``; also the mean number of birds within
    the interaction cut-off per bird (it still grows while the disc is not much wider than the
    cut-off: edge birds have fewer) and the exponent against the number of neighbour pairs; and
    the mean number of candidates the pair loop scans per bird (its 3 x 3 cells, itself included)
    with the exponent against their total, which is what the pair loop's cost follows.

    The exponent is also fitted in every repeat (all sizes take turns within a repeat), and its
    range over the repeats is reported beside the fit of the medians: on a shared machine it
    spreads by several hundredths. The ``larger`` sizes, timed in the same turns, give the
    exponent from N = 1000 on, where the disc is many cells wide; the fit over ``sizes`` is
    unchanged by them."""
    from scipy.spatial import cKDTree

    from flockward.sim.dynamics import candidate_counts, flock_context

    runs: dict[str, Callable[[], object]] = {}
    neighbours = []
    candidates = []
    every = (*sizes, *larger)
    for birds in every:
        world = _world(1, birds, "grid")
        for _ in range(SCALING_WARMUP):
            world.step(np.zeros((1, world.n_drones, 2)))
        start = world.state.copy()
        tree = cKDTree(start.bird_pos[0, :birds])
        pairs = tree.query_pairs(world.scenario.flock.interaction_radius, output_type="ndarray")
        neighbours.append(2 * len(pairs) / birds)
        x = np.ascontiguousarray(start.bird_pos[0, :birds])
        ctx = flock_context(world.params[0], world.destination[0], start.pursuer_pos[0],
                            start.pursuer_vel[0], birds, use_grid=True)  # fmt: skip
        scanned = np.zeros(birds, dtype=np.int64)
        candidate_counts(x, birds, ctx, scanned)
        candidates.append(float(scanned.mean()))
        action = np.zeros((1, world.n_drones, 2))

        def run(world: World = world, start: WorldState = start, action: Any = action) -> None:
            _restore(world, start)
            world.step(action)

        runs[str(birds)] = run
    turns = _timed_turns(runs, repeats, seconds)
    all_times = [statistics.median(turns[str(birds)]) for birds in every]
    k = len(sizes)
    times = all_times[:k]
    pair_counts = [birds * n for birds, n in zip(every, neighbours, strict=True)]
    scanned_counts = [birds * c for birds, c in zip(every, candidates, strict=True)]
    per_repeat = [
        _slope(list(sizes), [turns[str(birds)][r] for birds in sizes]) for r in range(repeats)
    ]
    upper = [(birds, t) for birds, t in zip(every, all_times, strict=True) if birds >= 1000]
    return {
        "N": list(sizes),
        "seconds": times,
        "exponent": _slope(list(sizes), times),
        "exponent per repeat": (min(per_repeat), max(per_repeat)),
        "neighbours": neighbours[:k],
        "exponent per pair": _slope(pair_counts[:k], times),
        "candidates": candidates[:k],
        "exponent per candidate": _slope(scanned_counts[:k], times),
        "pairs exponent": _slope(list(sizes), pair_counts[:k]),
        "larger N": list(larger),
        "larger seconds": all_times[k:],
        "larger neighbours": neighbours[k:],
        "larger candidates": candidates[k:],
        "exponent from 1000": _slope([b for b, _ in upper], [t for _, t in upper]),
        "sizes from 1000": [b for b, _ in upper],
    }


def interpreted_rate() -> float:
    """Bird-steps/s of the same kernel run as plain Python (numba off) at (1, 50), in a child."""
    code = (
        "import json,time,numpy as np\n"
        "from flockward_baselines.bench import _world\n"
        "w=_world(1,50); a=np.zeros((1,w.n_drones,2)); w.step(a)\n"
        "t=time.perf_counter()\n"
        "for _ in range(5): w.step(a)\n"
        "print(json.dumps(250/(time.perf_counter()-t)))\n"
    )
    env = dict(os.environ, NUMBA_DISABLE_JIT="1")
    out = subprocess.run(
        [sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True
    )
    return float(json.loads(out.stdout.strip().splitlines()[-1]))


def matmul_gflops(n: int = 1000, repeats: int = 5) -> float:
    """NumPy float64 matrix-product GFLOP/s: the machine's dense-arithmetic yardstick."""
    rng = np.random.default_rng(0)
    a, b = rng.random((n, n)), rng.random((n, n))

    def run() -> int:
        a @ b
        return 2 * n**3

    return _median_rate(run, repeats) / 1e9


def kernel_gflops(worlds: int, birds: int, bird_steps_per_s: float) -> float:
    """Estimated GFLOP/s of the step kernel at a measured rate (hand-counted FLOPS_PER_*)."""
    pairs = birds * (birds - 1) / 2
    flops_per_world_step = pairs * FLOPS_PER_PAIR + birds * FLOPS_PER_BIRD
    return bird_steps_per_s / birds * flops_per_world_step / 1e9


def env_rates(worlds: int = 64, steps: int = 200, repeats: int = 5) -> dict[str, float]:
    """World-steps per second of each face at N = 50, plus CartPole's vector env as a yardstick."""
    import gymnasium as gym

    from flockward.task.env import DivertEnv
    from flockward.task.vector_env import DivertVectorEnv
    from flockward_baselines.sb3 import make_vec_env

    rng = np.random.default_rng(0)
    batch_actions = rng.uniform(-1, 1, (steps, worlds, 2))
    out: dict[str, float] = {}
    # One decision per control step, so that every face's step is one world-step of the kernel.
    one = {"decision_steps": 1}

    single = DivertEnv("headon", **one)
    single.reset(seed=0)

    def run_single() -> int:
        for t in range(steps):
            _, _, terminated, truncated, _ = single.step(batch_actions[t, 0])
            if terminated or truncated:
                single.reset()
        return steps

    out["single env"] = _median_rate(run_single, repeats)

    vector = DivertVectorEnv(worlds, "headon", **one)
    vector.reset(seed=0)

    def run_vector() -> int:
        for t in range(steps):
            vector.step(batch_actions[t])
        return worlds * steps

    out["vector env"] = _median_rate(run_vector, repeats)

    adapter = make_vec_env(num_envs=worlds, seed=0, scenario="headon", decision_steps=1)
    adapter.reset()

    def run_adapter() -> int:
        for t in range(steps):
            adapter.step(batch_actions[t])
        return worlds * steps

    out["SB3 adapter"] = _median_rate(run_adapter, repeats)
    out["bare kernel"] = simulator_rate(worlds, 50, steps, repeats) / 50

    cartpole = gym.make_vec("CartPole-v1", num_envs=worlds, vectorization_mode="vector_entry_point")
    cartpole.reset(seed=0)
    cart_actions = rng.integers(0, 2, (steps, worlds))

    def run_cartpole() -> int:
        for t in range(steps):
            cartpole.step(cart_actions[t])
        return worlds * steps

    out["CartPole-v1 vector env"] = _median_rate(run_cartpole, repeats)
    return out


def no_simulator_env(num_envs: int, observation_space: Any, action_space: Any, length: int) -> Any:
    """An SB3 VecEnv with the given spaces that returns zeros and ends every episode after
    ``length`` decisions: PPO on it costs what PPO itself costs on those spaces."""
    from stable_baselines3.common.vec_env.base_vec_env import VecEnv

    class NoSimulator(VecEnv):
        def __init__(self) -> None:
            super().__init__(num_envs, observation_space, action_space)
            self.zeros = np.zeros((num_envs, *observation_space.shape), observation_space.dtype)
            self.decisions = 0

        def reset(self) -> np.ndarray:
            return self.zeros.copy()

        def step_async(self, actions: np.ndarray) -> None:
            self.decisions += 1

        def step_wait(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[dict[str, Any]]]:
            ended = self.decisions % length == 0
            done = np.full(num_envs, ended)
            infos = [{"terminal_observation": self.zeros[0]} if ended else {} for _ in done]
            return self.zeros.copy(), np.zeros(num_envs, np.float32), done, infos

        def close(self) -> None:
            return None

        def get_attr(self, attr_name: str, indices: Any = None) -> list[Any]:
            return [None] * num_envs

        def set_attr(self, attr_name: str, value: Any, indices: Any = None) -> None:
            return None

        def env_method(self, method_name: str, *args: Any, indices: Any = None, **kw: Any) -> Any:
            return [None] * num_envs

        def env_is_wrapped(self, wrapper_class: Any, indices: Any = None) -> list[bool]:
            return [False] * num_envs

    return NoSimulator()


def ppo_rates(worlds: int = 16, timesteps: int = 16 * 256, repeats: int = 3) -> dict[str, float]:
    """PPO (MlpPolicy, CPU, identical hyperparameters) steps per second on flockward, on
    CartPole, and on a vector env with flockward's spaces and no simulator (PPO's own cost)."""
    import torch
    from stable_baselines3 import PPO
    from stable_baselines3.common.env_util import make_vec_env as sb3_make_vec_env

    from flockward_baselines.sb3 import make_vec_env

    torch.set_num_threads(1)
    default = make_vec_env(num_envs=worlds, seed=0, scenario="headon")
    episode = EpisodeParams()
    envs = {
        # One decision per control step (an env step costs the simulator what CartPole's costs),
        # and the default decision interval (what training pays per decision).
        PPO_PER_CONTROL_STEP: make_vec_env(
            num_envs=worlds, seed=0, scenario="headon", decision_steps=1
        ),
        PPO_DEFAULT: default,
        PPO_THREADED: _threaded(
            partial(make_vec_env, num_envs=worlds, seed=0, scenario="headon"), BENCH_THREADS
        ),
        PPO_NO_SIMULATOR: no_simulator_env(
            worlds,
            default.observation_space,
            default.action_space,
            episode.max_steps // CONTROL_STEPS_PER_DECISION,
        ),
        PPO_CARTPOLE: sb3_make_vec_env("CartPole-v1", n_envs=worlds, seed=0),
    }
    out: dict[str, float] = {}
    for name, venv in envs.items():
        model = PPO("MlpPolicy", venv, n_steps=128, batch_size=256, n_epochs=4, seed=0)
        model.learn(total_timesteps=worlds * 128)  # warm-up

        def run(model: PPO = model) -> int:
            model.learn(total_timesteps=timesteps, reset_num_timesteps=False)
            return timesteps

        out[name] = _median_rate(run, repeats)
    return out


def _threaded(make: Callable[[], Any], threads: int) -> Any:
    """``make()`` with its worlds stepped on ``threads`` numba threads (FLOCKWARD_THREADS)."""
    from flockward.sim.world import THREADS_VARIABLE

    before = os.environ.get(THREADS_VARIABLE)
    os.environ[THREADS_VARIABLE] = str(threads)
    try:
        return make()
    finally:
        if before is None:
            del os.environ[THREADS_VARIABLE]
        else:
            os.environ[THREADS_VARIABLE] = before


def ppo_budget(
    rates: dict[str, float],
    share: float = PPO_TARGET_SHARE,
    pair_evaluations: float = (
        CONTROL_STEPS_PER_DECISION
        * FORCE_EVALUATIONS_PER_CONTROL_STEP
        * PPO_BIRDS
        * (PPO_BIRDS - 1)
    ),
) -> dict[str, float]:
    """Seconds per decision that PPO itself and the simulator with its task take now, and what
    the simulator may take for flockward to reach ``share`` of CartPole's decisions per second.

    PPO's own cost is its time on the no-simulator env with flockward's spaces; the rest of a
    flockward decision is the environment's. "allowed" <= 0 means the share is out of reach even
    with a simulator that costs nothing. Per pair: the environment's seconds divided by the
    ordered pair evaluations of one world's decision (an upper bound on the pair loop's cost).
    """
    ppo_own = 1.0 / rates[PPO_NO_SIMULATOR]
    environment = 1.0 / rates[PPO_DEFAULT] - ppo_own
    allowed = 1.0 / (share * rates[PPO_CARTPOLE]) - ppo_own
    return {
        "ppo_own": ppo_own,
        "environment": environment,
        "allowed": allowed,
        "speed_up_needed": environment / allowed if allowed > 0 else math.inf,
        "pair_evaluations": pair_evaluations,
        "per_pair_now": environment / pair_evaluations,
        "per_pair_allowed": allowed / pair_evaluations,
    }


def machine() -> dict[str, object]:
    """What the figures were measured on: the CPU (vector width changes the kernel's ratios),
    its cores, the CPU numba compiles for (``sim.jit.COMPILE_TARGET`` unless NUMBA_CPU_NAME
    says otherwise) and the versions of numba and NumPy."""
    import platform

    import numba

    import flockward.sim.jit  # noqa: F401  (it names the CPU numba compiles for)

    name, flags = platform.processor() or platform.machine(), set[str]()
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as info:
            fields = dict(
                (key.strip(), value.strip())
                for key, _, value in (line.partition(":") for line in info)
                if key.strip() in ("model name", "cpu family", "model", "flags")
            )
        name = f"{fields['model name']} (family {fields['cpu family']}, model {fields['model']})"
        flags = set(fields["flags"].split())
    except (OSError, KeyError):
        pass
    widest = next((f for f in ("avx512f", "avx2", "avx", "sse4_2") if f in flags), "unknown")
    return {
        "cpu": name,
        "cores": os.cpu_count() or 0,
        "widest_vector_extension": widest,
        "compiled_for": numba.config.CPU_NAME or "this CPU",  # type: ignore[attr-defined]
        "numba": numba.__version__,
        "numpy": np.__version__,
    }


def runner_times(suite_name: str = "smoke") -> dict[int, float]:
    """Wall seconds to play a suite for every scripted baseline with 1 and with 2 workers."""
    import tempfile
    from functools import partial

    from flockward.bench.evaluation import run_suite
    from flockward.bench.suites import load_suite
    from flockward_baselines.controllers import BUILTIN, make_controller

    suite = load_suite(suite_name)
    out: dict[int, float] = {}
    for workers in (1, 2):
        with tempfile.TemporaryDirectory() as tmp:
            start = time.perf_counter()
            for name in BUILTIN:
                factory = partial(make_controller, name)
                run_suite(suite, factory, name, tmp, workers=workers, progress=False)
            out[workers] = time.perf_counter() - start
    return out


def _slope(sizes: list[int] | list[float], seconds: list[float]) -> float:
    """Least-squares slope of log(seconds) against log(size): the empirical scaling exponent."""
    return float(np.polyfit(np.log(sizes), np.log(seconds), 1)[0])


def _crossover(sizes: list[int], pairs: list[float], grid: list[float]) -> float | None:
    """First flock size where the faster of the two searches changes (log-log interpolation
    between the measured sizes), or None if one search wins at every measured size."""
    gaps = [math.log(p / g) for p, g in zip(pairs, grid, strict=True)]  # > 0: grid faster
    for k in range(len(sizes) - 1):
        if gaps[k] <= 0 < gaps[k + 1] or gaps[k] > 0 >= gaps[k + 1]:
            share = gaps[k] / (gaps[k] - gaps[k + 1])
            return float(math.exp(math.log(sizes[k]) + share * math.log(sizes[k + 1] / sizes[k])))
    return None


def _murmuration_world(birds: int, search: str) -> World:
    """One murmuration world of ``birds`` birds, reset from seed 0 and stepped SCALING_WARMUP."""
    from flockward.config.scenarios import load_scenario
    from flockward.sim.world import World

    scenario = load_scenario("murmuration", {"flock.count": birds, "episode.max_steps": 10**6})
    world = World(scenario, 1, search)
    world.reset(0, np.random.default_rng(0))
    for _ in range(SCALING_WARMUP):
        world.step(np.zeros((1, world.n_drones, 2)))
    return world


def _timed_together(
    runs: dict[str, Callable[[], object]], repeats: int, seconds: float
) -> dict[str, float]:
    """Median wall seconds of one call of each run. The runs take turns within every repeat, so
    a change in the machine's load hits all of them alike; a turn lasts about ``seconds``."""
    return {name: statistics.median(t) for name, t in _timed_turns(runs, repeats, seconds).items()}


def _timed_turns(
    runs: dict[str, Callable[[], object]], repeats: int, seconds: float
) -> dict[str, list[float]]:
    """Wall seconds of one call of each run in every repeat (``_timed_together`` without the
    median, for figures fitted per repeat)."""
    calls = {}
    for name, run in runs.items():
        run()  # warm-up: compilation, caches
        start = time.perf_counter()
        run()
        calls[name] = max(1, int(seconds / max(time.perf_counter() - start, 1e-9)))
    times: dict[str, list[float]] = {name: [] for name in runs}
    for _ in range(repeats):
        for name, run in runs.items():
            start = time.perf_counter()
            for _ in range(calls[name]):
                run()
            times[name].append((time.perf_counter() - start) / calls[name])
    return times


def _scaling_runs(birds: int) -> tuple[dict[str, Callable[[], object]], bool]:
    """What scaling_table times at one flock size, and whether "auto" picked the grid."""
    from flockward.sim import metrics
    from flockward.sim.geometry import site_zone_arrays, zone_arrays

    worlds = {search: _murmuration_world(birds, search) for search in NEIGHBOUR_SEARCHES}
    action = np.zeros((1, worlds["auto"].n_drones, 2))
    runs: dict[str, Callable[[], object]] = {
        search: partial(world.step, action) for search, world in worlds.items()
    }
    world = _murmuration_world(birds, "auto")  # a copy the timed steps do not advance
    s, site = world.state, world.scenario.site
    radius = world.scenario.flock.linking_radius
    runs["metrics"] = partial(
        metrics.step_metrics, s.bird_pos, s.bird_vel, s.count, s.pursuer_pos, radius,
        site_zone_arrays(site.protected), zone_arrays(site.goal),
    )  # fmt: skip
    for method in ("pairs", "grid"):
        runs[f"components {method}"] = partial(
            metrics.components, s.bird_pos, s.count, radius, method
        )
    return runs, worlds["auto"].use_grid


def scaling_table(
    sizes: tuple[int, ...] = SCALING_SIZES, repeats: int = 5, seconds: float = 0.2
) -> Scaling:
    """Seconds per step of one murmuration world, and of step_metrics on it, against flock size.

    For every N: the simulator step with the automatic neighbour search, with all pairs and with
    the grid forced, and the per-step metrics; for reference also metrics.components alone with
    either of its methods, since step_metrics switches to the grid at metrics.GRID_MIN_BIRDS.
    Returns the table, the fitted exponents and the measured grid/all-pairs crossover.
    """
    from flockward.sim import dynamics, metrics

    keys = ("N", *NEIGHBOUR_SEARCHES, "metrics", "components pairs", "components grid", "uses")
    table: dict[str, list[Any]] = {key: [] for key in keys}
    for birds in sizes:
        runs, uses_grid = _scaling_runs(birds)
        for name, median in _timed_together(runs, repeats, seconds).items():
            table[name].append(median)
        table["N"].append(birds)
        table["uses"].append("grid" if uses_grid else "all-pairs")
    return {
        "table": table,
        "exponent auto": _slope(table["N"], table["auto"]),
        "exponent metrics": _slope(table["N"], table["metrics"]),
        "crossover": _crossover(table["N"], table["all-pairs"], table["grid"]),
        "crossover components": _crossover(
            table["N"], table["components pairs"], table["components grid"]
        ),
        "grid_min_birds": dynamics.GRID_MIN_BIRDS,
        "metrics_grid_min_birds": metrics.GRID_MIN_BIRDS,
    }


def _where(crossover: float | None, pairs: list[float], grid: list[float]) -> str:
    """Where the all-pairs and grid searches trade places, in words."""
    if crossover is not None:
        return f"all pairs and grid cross near N = {crossover:.0f}"
    return f"{'grid' if grid[0] < pairs[0] else 'all pairs'} faster at every measured N"


def _emit_scaling(scaling: Scaling, emit: Callable[[str], None]) -> None:
    """Print the scaling table, its fitted exponents and whether the automatic choices pay."""
    t = scaling["table"]
    emit("  ms per step     simulator step                     step_metrics   components")
    emit("  N      auto (uses)         all-pairs     grid                    pairs     grid")
    for k, birds in enumerate(t["N"]):
        emit(
            f"  {birds:<5} {t['auto'][k] * 1e3:7.3f} ({t['uses'][k]:<9})"
            f" {t['all-pairs'][k] * 1e3:9.3f} {t['grid'][k] * 1e3:8.3f}"
            f" {t['metrics'][k] * 1e3:14.3f} {t['components pairs'][k] * 1e3:11.3f}"
            f" {t['components grid'][k] * 1e3:8.3f}"
        )
    emit(
        f"  fitted exponent (time ~ N^k): auto k = {scaling['exponent auto']:.2f}, "
        f"step_metrics k = {scaling['exponent metrics']:.2f}"
    )
    for label, pairs, grid, crossover, switch in (
        ("simulator", t["all-pairs"], t["grid"], scaling["crossover"], scaling["grid_min_birds"]),
        (
            "components",
            t["components pairs"],
            t["components grid"],
            scaling["crossover components"],
            scaling["metrics_grid_min_birds"],
        ),
    ):
        # The automatic choice loses where the search it picks is >10 % slower than the other.
        lost = [
            birds
            for k, birds in enumerate(t["N"])
            if (grid[k] > 1.1 * pairs[k] if birds >= switch else pairs[k] > 1.1 * grid[k])
        ]
        verdict = f"; that choice is the slower one at N = {lost}" if lost else ""
        emit(
            f"  {label}: {_where(crossover, pairs, grid)}; automatic grid from N = "
            f"{switch}{verdict}"
        )


def threading_layer() -> str:
    """The threading layer numba runs parallel code on (starting it if need be)."""
    import numba

    from flockward.sim import jit

    jit.start_threads()
    return str(numba.threading_layer())


def to_json(results: dict[str, object]) -> str:
    """The bench's figures as one JSON object (dictionary keys as strings)."""

    def plain(value: object) -> object:
        if isinstance(value, dict):
            return {str(k): plain(v) for k, v in value.items()}
        if isinstance(value, (list, tuple)):
            return [plain(v) for v in value]
        if isinstance(value, np.generic):
            return value.item()
        return value

    return json.dumps(plain(results), indent=1)


def _paired_rows(
    emit: Callable[[str], None],
    compare: Callable[..., dict[str, float]],
    names: tuple[str, str],
    repeats: int,
    quick: bool,
) -> dict[str, dict[str, float]]:
    """Time two kernels in turns at each size past the first, one line each (ms per step and
    the first's speed-up over the second, ``names`` = (first, second))."""
    first, second = names
    rows: dict[str, dict[str, float]] = {}
    for worlds, birds in SIM_SIZES[1:]:
        steps = max(2, int(20_000 / (worlds * birds)))
        t = compare(worlds, birds, steps, repeats, 0.1 if quick else 0.3)
        rows[f"{worlds}x{birds}"] = t
        emit(
            f"    (B, N) = ({worlds:>2}, {birds:>4}): {first} {t[first] * 1e3:7.3f}"
            f"   {second} {t[second] * 1e3:7.3f}   speed-up x{t[second] / t[first]:.2f}"
        )
    return rows


def run_bench(quick: bool = False, emit: Callable[[str], None] = print) -> dict[str, object]:
    """Measure and print everything; return the figures (also useful to tests)."""
    repeats = 3 if quick else 5
    results: dict[str, object] = {}
    emit("flockward bench: medians over repeats after a warm-up; ratios from this run only")
    host = machine()
    emit(
        f"machine: {host['cpu']}, {host['cores']} cores, widest vector extension "
        f"{host['widest_vector_extension']}, compiled for {host['compiled_for']}; "
        f"numba {host['numba']}, NumPy {host['numpy']}"
    )
    results["machine"] = host
    emit("\nSimulator kernel (one thread, float64):")
    sim: dict[tuple[int, int], float] = {}
    for worlds, birds in SIM_SIZES:
        steps = max(5, int(200_000 / (worlds * birds))) if not quick else 5
        rate = simulator_rate(worlds, birds, steps, repeats)
        sim[(worlds, birds)] = rate
        emit(
            f"  (B, N) = ({worlds:>2}, {birds:>4}): {rate / 1e6:8.2f} M bird-steps/s"
            f"  ~{kernel_gflops(worlds, birds, rate):5.2f} GFLOP/s (estimate)"
        )
    for birds in (300, 2000):
        pairs = simulator_rate(1, birds, 5, repeats, "all-pairs")
        grid = simulator_rate(1, birds, 5, repeats, "grid")
        emit(f"  N = {birds}: grid / all-pairs = {grid / pairs:5.2f}x")
    emit("  today's kernel against the scalar kernel it replaced, same state, in turns (ms/step):")
    results["versus_scalar"] = _paired_rows(
        emit, kernel_comparison, ("today", "scalar"), repeats, quick
    )
    emit(
        "  pair sums in float32 against float64, same state, in turns (ms/step; not an env option):"
    )
    results["float32_pair_sums"] = _paired_rows(
        emit, precision_comparison, ("float32", "float64"), repeats, quick
    )
    emit(f"  threads, 1 against {BENCH_THREADS} (numba layer {threading_layer()}), ms/step:")
    threads: dict[str, dict[int, float]] = {}
    for worlds, birds in ((64, 50), (1, 2000)):
        steps = max(2, int(20_000 / (worlds * birds)))
        t2 = thread_scaling(worlds, birds, steps, BENCH_THREADS, repeats, 0.1 if quick else 0.3)
        threads[f"{worlds}x{birds}"] = t2
        emit(
            f"    (B, N) = ({worlds:>2}, {birds:>4}): 1 thread {t2[1] * 1e3:7.3f}"
            f"   {BENCH_THREADS} threads {t2[BENCH_THREADS] * 1e3:7.3f}"
            f"   speed-up x{t2[1] / t2[BENCH_THREADS]:.2f}"
        )
    results["threads"] = threads
    python_rate = interpreted_rate()
    mm = matmul_gflops()
    emit(
        f"  plain Python loop, same kernel with numba off, (1, 50): {python_rate:,.0f} bird-steps/s"
    )
    emit(f"  compiled (64, 50) / Python loop (1, 50): {sim[(64, 50)] / python_rate:,.0f}x")
    emit(f"  NumPy matmul float64: {mm:.1f} GFLOP/s")
    results["simulator"] = {f"{b}x{n}": r for (b, n), r in sim.items()}
    results["python_loop"] = python_rate
    results["matmul_gflops"] = mm

    emit("\nEnvironments, N = 50 (world-steps/s):")
    envs = env_rates(steps=50 if quick else 200, repeats=repeats)
    for name, rate in envs.items():
        emit(f"  {name:<24} {rate:12,.0f}")
    emit(f"  vector env / bare kernel:  {envs['vector env'] / envs['bare kernel']:6.2f}")
    emit(f"  SB3 adapter / vector env:  {envs['SB3 adapter'] / envs['vector env']:6.2f}")
    emit(f"  vector env / single env:   {envs['vector env'] / envs['single env']:6.1f}")
    per_decision = per_decision_rate(envs["vector env"], CONTROL_STEPS_PER_DECISION)
    emit(
        f"  vector env decisions/s ({CONTROL_STEPS_PER_DECISION} control step per decision):"
        f" {per_decision:,.0f}"
    )
    results["environments"] = envs
    results["decisions_per_s"] = per_decision

    emit("\nRunner, smoke suite, every scripted baseline (wall seconds, one run each):")
    runner = runner_times()
    emit(
        f"  1 worker: {runner[1]:.1f} s   2 workers: {runner[2]:.1f} s   speed-up "
        f"{runner[1] / runner[2]:.2f}x"
    )
    results["runner"] = runner

    emit("\nLarge flocks, one murmuration world (medians):")
    scaling = scaling_table(repeats=repeats, seconds=0.05 if quick else 0.2)
    _emit_scaling(scaling, emit)
    results["scaling"] = scaling
    headon = grid_exponent(repeats=repeats, seconds=0.05 if quick else 0.2)
    sizes = zip(headon["N"], headon["seconds"], strict=True)
    emit(
        "  grid, headon flock (separation holds), ms per step: "
        + ", ".join(f"N = {n} {t * 1e3:.2f}" for n, t in sizes)
    )
    low, high = headon["exponent per repeat"]
    emit(
        f"  grid fitted exponent, headon flock: k = {headon['exponent']:.2f} in N (fitted per"
        f" repeat: {low:.2f} to {high:.2f}); neighbours"
        " within the cut-off per bird "
        + ", ".join(f"{k:.0f}" for k in headon["neighbours"])
        + f"; k = {headon['exponent per pair']:.2f} in neighbour pairs"
    )
    rows = zip(headon["N"], headon["seconds"], headon["candidates"], strict=True)
    per_candidate = [t / (n * c) * 1e9 for n, t, c in rows]
    emit(
        "  grid, headon flock: candidates scanned per bird (3 x 3 cells of the cut-off) "
        + ", ".join(f"{c:.0f}" for c in headon["candidates"])
        + f"; k = {headon['exponent per candidate']:.2f} in candidates; ns per candidate per step "
        + ", ".join(f"{c:.1f}" for c in per_candidate)
        + f"; neighbour pairs grow as N^{headon['pairs exponent']:.2f}"
    )
    larger = zip(
        headon["larger N"], headon["larger seconds"], headon["larger candidates"], strict=True
    )
    emit(
        "  grid, headon flock, larger: "
        + ", ".join(f"N = {n} {t * 1e3:.2f} ms ({c:.0f} candidates per bird)" for n, t, c in larger)
        + f"; k = {headon['exponent from 1000']:.2f} in N over N = "
        + ", ".join(str(n) for n in headon["sizes from 1000"])
    )
    results["grid_headon"] = headon
    split = step_split(seconds=0.1 if quick else 0.3, repeats=repeats)
    emit("  one environment step at N = 2000 (murmuration), ms: " + ", ".join(
        f"{name} {t * 1e3:.2f}" for name, t in split.items()
    ))  # fmt: skip
    results["step_split_2000"] = split

    if not quick:
        emit("\nPPO (MlpPolicy, CPU, 16 worlds, same hyperparameters), decisions/s:")
        ppo = ppo_rates()
        width = max(map(len, ppo))
        for name, rate in ppo.items():
            emit(f"  {name:<{width}} {rate:10,.0f}")
        for name in (PPO_PER_CONTROL_STEP, PPO_DEFAULT, PPO_THREADED):
            emit(f"  {name} / CartPole: {ppo[name] / ppo[PPO_CARTPOLE]:6.2f}")
        budget = ppo_budget(ppo)
        emit(
            f"  per decision of {PPO_DEFAULT}: PPO itself {budget['ppo_own'] * 1e6:.0f} us,"
            f" simulator and task {budget['environment'] * 1e6:.0f} us for"
            f" {budget['pair_evaluations']:,.0f} ordered pair evaluations"
            f" ({CONTROL_STEPS_PER_DECISION} control steps x {FORCE_EVALUATIONS_PER_CONTROL_STEP}"
            f" force evaluations x {PPO_BIRDS} x {PPO_BIRDS - 1}),"
            f" {budget['per_pair_now'] * 1e9:.1f} ns a pair all told"
        )
        if budget["allowed"] > 0:
            reach = (
                f"the simulator and task may take {budget['allowed'] * 1e6:.0f} us: "
                f"x{budget['speed_up_needed']:.1f} faster than now,"
                f" {budget['per_pair_allowed'] * 1e9:.1f} ns a pair all told"
            )
        else:
            reach = "out of reach even with a simulator that costs nothing"
        emit(f"  to reach {PPO_TARGET_SHARE:.2f} of CartPole's decisions/s: {reach}")
        results["ppo"] = ppo
        results["ppo_budget"] = budget
    return results

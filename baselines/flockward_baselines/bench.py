"""`flockward bench`: throughput of the simulator, the environments and PPO, measured in one run.

Every figure is the median of several timed repeats after a warm-up (compilation excluded), and
ratios are taken between figures of the same run, because the machines are noisy.
"""

from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import time
from collections.abc import Callable

import numpy as np

# Rough floating-point operations per interacting pair (distance, three terms, both birds'
# accumulators) and per bird (steering sum, fear, clamps, integration): counted by hand from the
# kernel source, so the GFLOP/s figure is an estimate, not a hardware count.
FLOPS_PER_PAIR = 40
FLOPS_PER_BIRD = 70

SIM_SIZES = ((1, 50), (64, 50), (16, 300), (1, 2000))


def _median_rate(run: Callable[[], int], repeats: int) -> float:
    run()  # warm-up: compilation, caches
    rates = []
    for _ in range(repeats):
        start = time.perf_counter()
        units = run()
        rates.append(units / (time.perf_counter() - start))
    return statistics.median(rates)


def _world(worlds: int, birds: int, neighbour_search: str = "auto"):
    from flockward.scenarios import load_scenario
    from flockward.world import World

    scenario = load_scenario("headon", {"flock.count": birds, "episode.max_steps": 100000})
    world = World(scenario, worlds, neighbour_search)
    for b in range(worlds):
        world.reset(b, np.random.default_rng(b))
    return world


def simulator_rate(worlds: int, birds: int, steps: int, repeats: int = 5, search="auto") -> float:
    """Bird-steps per second of the bare step kernel."""
    world = _world(worlds, birds, search)
    action = np.zeros((worlds, 2))

    def run() -> int:
        for _ in range(steps):
            world.step(action)
        return worlds * birds * steps

    return _median_rate(run, repeats)


def interpreted_rate() -> float:
    """Bird-steps/s of the same kernel run as plain Python (numba off) at (1, 50), in a child."""
    code = (
        "import json,time,numpy as np\n"
        "from flockward_baselines.bench import _world\n"
        "w=_world(1,50); a=np.zeros((1,2)); w.step(a)\n"
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
    pairs = birds * (birds - 1) / 2
    flops_per_world_step = pairs * FLOPS_PER_PAIR + birds * FLOPS_PER_BIRD
    return bird_steps_per_s / birds * flops_per_world_step / 1e9


def env_rates(worlds: int = 64, steps: int = 200, repeats: int = 5) -> dict[str, float]:
    """World-steps per second of each face at N = 50, plus CartPole's vector env as a yardstick."""
    import gymnasium as gym

    from flockward.env import DivertEnv
    from flockward.vector_env import DivertVectorEnv
    from flockward_baselines.sb3 import make_vec_env

    rng = np.random.default_rng(0)
    batch_actions = rng.uniform(-1, 1, (steps, worlds, 2))
    out: dict[str, float] = {}

    single = DivertEnv("headon")
    single.reset(seed=0)

    def run_single() -> int:
        for t in range(steps):
            _, _, terminated, truncated, _ = single.step(batch_actions[t, 0])
            if terminated or truncated:
                single.reset()
        return steps

    out["single env"] = _median_rate(run_single, repeats)

    vector = DivertVectorEnv(worlds, "headon")
    vector.reset(seed=0)

    def run_vector() -> int:
        for t in range(steps):
            vector.step(batch_actions[t])
        return worlds * steps

    out["vector env"] = _median_rate(run_vector, repeats)

    adapter = make_vec_env(num_envs=worlds, seed=0, scenario="headon")
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


def ppo_rates(worlds: int = 16, timesteps: int = 16 * 256, repeats: int = 3) -> dict[str, float]:
    """PPO (MlpPolicy, CPU, identical hyperparameters) steps per second on both tasks."""
    import torch
    from stable_baselines3 import PPO
    from stable_baselines3.common.env_util import make_vec_env as sb3_make_vec_env

    from flockward_baselines.sb3 import make_vec_env

    torch.set_num_threads(1)
    envs = {
        "flockward/Divert-v0": make_vec_env(num_envs=worlds, seed=0, scenario="headon"),
        "CartPole-v1": sb3_make_vec_env("CartPole-v1", n_envs=worlds, seed=0),
    }
    out = {}
    for name, venv in envs.items():
        model = PPO("MlpPolicy", venv, n_steps=128, batch_size=256, n_epochs=4, seed=0)
        model.learn(total_timesteps=worlds * 128)  # warm-up

        def run(model=model) -> int:
            model.learn(total_timesteps=timesteps, reset_num_timesteps=False)
            return timesteps

        out[name] = _median_rate(run, repeats)
    return out


def run_bench(quick: bool = False, emit: Callable[[str], None] = print) -> dict[str, object]:
    """Measure and print everything; return the figures (also useful to tests)."""
    repeats = 3 if quick else 5
    results: dict[str, object] = {}
    emit("flockward bench: medians over repeats after a warm-up; ratios from this run only")
    emit("\nSimulator kernel (one thread, float64):")
    sim = {}
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
    results["environments"] = envs

    if not quick:
        emit("\nPPO (MlpPolicy, CPU, 16 worlds, same hyperparameters), steps/s:")
        ppo = ppo_rates()
        for name, rate in ppo.items():
            emit(f"  {name:<24} {rate:10,.0f}")
        ratio = ppo["flockward/Divert-v0"] / ppo["CartPole-v1"]
        emit(f"  flockward / CartPole:      {ratio:6.2f}")
        results["ppo"] = ppo
    return results

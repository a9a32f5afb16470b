"""Train PPO with Stable-Baselines3 on the native vector env, then evaluate it as a controller.

Run from the repository root:  python examples/train_sb3.py [--timesteps N]

Uses `flockward_baselines.sb3.make_vec_env` (16 worlds in one batched simulator, an SB3 VecEnv)
and plays the trained policy on a few seeded episodes of `trio` through the same episode player
the benchmark uses. With the default budget (200 000 decisions, a few minutes on a laptop CPU)
the policy learns to turn the three gulls; the tests run it with a tiny budget only to check that
it works end to end.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

from stable_baselines3 import PPO

from flockward.bench.episode import play_episode
from flockward.config.scenarios import load_scenario
from flockward_baselines.policy import PolicyController
from flockward_baselines.sb3 import make_vec_env


def main() -> None:
    """Train, save, reload as a controller, play."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--timesteps", type=int, default=200_000, help="decisions to train")
    parser.add_argument("--episodes", type=int, default=5, help="evaluation episodes")
    args = parser.parse_args()
    env = make_vec_env(num_envs=16, seed=0, scenario="trio")
    model = PPO("MlpPolicy", env, n_steps=256, seed=0, device="cpu", verbose=0)
    model.learn(total_timesteps=args.timesteps)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "trio-policy.zip"
        model.save(path)
        scenario = load_scenario("trio")
        for seed in range(args.episodes):
            record, _ = play_episode(scenario, PolicyController(path), seed)
            print(f"trio seed {seed}: {record.outcome} after {record.steps} control steps")


if __name__ == "__main__":
    main()

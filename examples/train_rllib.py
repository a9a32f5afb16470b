"""Train PPO from RLlib on flockward's Gymnasium environment for a few iterations.

Run from the repository root:  python examples/train_rllib.py [--iterations N] [--batch STEPS]

RLlib is not one of flockward's extras: install it beside flockward with
`pip install 'ray[rllib]' torch==2.13.0` (torch pinned to the CPU build, as the Makefile does).
Note that ray[rllib] 2.60 pins gymnasium 1.2.2, so pip moves gymnasium back to that version;
`make rllib-example` builds such a venv of its own (.venv-rllib) and runs this example's test there.

The environment registers with RLlib like any Gymnasium environment: `env_config` holds
`DivertEnv`'s keyword arguments (scenario, overrides, observation, ...). A Ray instance starts on
this machine with --cpus CPUs; episodes are sampled by --env-runners remote runners (0: in this
process). Each iteration prints the mean return of the episodes finished so far and the
environment steps sampled; a couple of iterations only show that training runs, not that it
learns (see the README's "Training a policy" for budgets that do).
"""

from __future__ import annotations

import argparse
import logging
import math
import sys
from typing import Any


def make_env(config: dict[str, Any]) -> Any:
    """A DivertEnv from RLlib's env_config (imported here, so every runner process has it)."""
    from flockward.task.env import DivertEnv

    return DivertEnv(**config)


def main() -> int:
    """Train for --iterations iterations and print each one's return and sampled steps."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--scenario", default="headon", help="shipped scenario name or TOML path")
    parser.add_argument("--iterations", type=int, default=2, help="training iterations")
    parser.add_argument("--batch", type=int, default=1000, help="environment steps per iteration")
    parser.add_argument("--env-runners", type=int, default=1, help="remote sampling processes")
    parser.add_argument("--cpus", type=int, default=2, help="CPUs of the local Ray instance")
    parser.add_argument("--seed", type=int, default=0, help="RLlib's seed")
    args = parser.parse_args()
    try:
        import ray
        from ray.rllib.algorithms.ppo import PPOConfig
        from ray.tune.registry import register_env
    except ImportError as error:
        print(f"this example needs RLlib ({error}): pip install 'ray[rllib]' torch==2.13.0",
              file=sys.stderr)  # fmt: skip
        return 2

    from flockward.config.files import ConfigError
    from flockward.config.scenarios import load_scenario

    try:  # a bad scenario is one line here, not a traceback from inside a runner
        load_scenario(args.scenario)
    except (ConfigError, ValueError) as error:
        print(" ".join(str(error).split()), file=sys.stderr)
        return 2
    ray.init(num_cpus=args.cpus, include_dashboard=False, logging_level=logging.ERROR,
             log_to_driver=False)  # fmt: skip
    try:
        register_env("flockward-divert", make_env)
        config = (
            PPOConfig()
            .environment("flockward-divert", env_config={"scenario": args.scenario})
            .env_runners(num_env_runners=args.env_runners)
            .training(
                train_batch_size_per_learner=args.batch,
                minibatch_size=max(args.batch // 4, 1),
                num_epochs=2,
            )
            .debugging(seed=args.seed)
        )
        algo = config.build_algo()
        try:
            for iteration in range(1, args.iterations + 1):
                result = algo.train()
                runners = result.get("env_runners", {})
                mean_return = runners.get("episode_return_mean", math.nan)
                steps = runners.get("num_env_steps_sampled_lifetime", math.nan)
                print(f"iteration {iteration}: mean episode return {mean_return:.2f} "
                      f"({steps:.0f} environment steps sampled so far)")  # fmt: skip
        finally:
            algo.stop()
    finally:
        ray.shutdown()
    return 0


if __name__ == "__main__":
    sys.exit(main())

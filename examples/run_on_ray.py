"""Score a controller on a suite with its episodes played as Ray tasks, as `flockward run --ray`.

Run from the repository root:  python examples/run_on_ray.py [--episodes N] [--address HEAD:6379]

Needs Ray (`pip install 'flockward[ray]'`). Without --address a Ray instance starts on this
machine with --cpus CPUs for the run and stops at the end; with one, the script joins that
cluster (flockward must be installed on every node). Ray 2.60 turns on token authentication for
a head started with `ray start --head`: set RAY_AUTH_MODE=token and copy the head's
~/.ray/auth_token to this machine first (see the README's "Scaling out").

Every Ray task plays one episode and returns its row; this process alone writes the result
file, so the file is the one `flockward run` writes with local workers, and a rerun resumes it.
The script prints each family's success count and episode score (the leaderboard's).
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from collections import defaultdict
from functools import partial

import numpy as np

from flockward.bench.evaluation import read_results, run_suite
from flockward.bench.leaderboard import episode_score
from flockward.bench.ray_backend import import_ray, ray_session
from flockward.bench.suites import load_suite
from flockward.config.files import ConfigError
from flockward_baselines.controllers import make_controller


def main() -> int:
    """Play the suite's first N episodes through Ray and print a per-family summary."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--suite", default="smoke", help="suite name or TOML path")
    parser.add_argument("--controller", default="boundary-arc", help="controller name")
    parser.add_argument("--episodes", type=int, default=None, help="play only the first N")
    parser.add_argument("--address", default="", help="a running cluster's HEAD:PORT")
    parser.add_argument("--cpus", type=int, default=2, help="CPUs of a local Ray instance")
    parser.add_argument("--results", default=None, help="result folder (default: a temporary one)")
    args = parser.parse_args()
    try:
        import_ray("this example")
    except ImportError as error:
        print(error, file=sys.stderr)
        return 2
    cpus = None if args.address else args.cpus  # a cluster's size is set where it was started
    with tempfile.TemporaryDirectory() as scratch:
        try:
            suite = load_suite(args.suite)
            with ray_session(args.address, cpus) as backend:
                path = run_suite(
                    suite,
                    partial(make_controller, args.controller),
                    args.controller,
                    args.results or scratch,
                    progress=False,
                    limit=args.episodes,
                    backend=backend,
                )
        except (ConfigError, ValueError, ConnectionError, RuntimeError) as error:
            print(" ".join(str(error).split()), file=sys.stderr)  # one line, no traceback
            return 2
        episodes = read_results(path)["episodes"]
        families: dict[str, list[dict]] = defaultdict(list)
        for row in episodes:
            families[row["family"]].append(row)
        print(f"{args.controller} on {suite.name} v{suite.version} through Ray: "
              f"{len(episodes)} episodes -> {path.name}")  # fmt: skip
        for family, rows in sorted(families.items()):
            wins = sum(bool(row["success"]) for row in rows)
            score = float(np.mean([episode_score(row) for row in rows]))
            print(f"  {family:<16} {wins}/{len(rows)} delivered, mean score {score:.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())

"""Score two controllers on the same episodes and compare them the way `flockward compare` does.

Run from the repository root:  python examples/compare_two.py [--seeds N]

Plays boundary-arc and collect-drive on a small suite of your own (two families, N seeds each)
through the runner, then pairs the episodes by (family, seed) and prints the comparison: the
paired score difference with a stratified bootstrap interval, the probability of improvement,
McNemar's test on success and Wilcoxon's on time.
"""

from __future__ import annotations

import argparse
import tempfile
from functools import partial
from pathlib import Path

from flockward.bench.compare import compare_results, render_comparison
from flockward.bench.evaluation import read_results, run_suite
from flockward.bench.suites import load_suite
from flockward_baselines.controllers import make_controller

SUITE = """
name = "pair"
version = 1
[[entry]]
family = "headon"
scenario = "headon"
seeds = [0, {last}]
[[entry]]
family = "fast-gulls"
scenario = "headon"
overrides = {{ name = "headon-fast15", "flock.speed" = 15.0, "flock.cruise_speed" = 15.0, \
"flock.burst_speed" = 21.6, "flock.max_speed" = 28.0 }}
seeds = [0, {last}]
"""


def main() -> None:
    """Run both controllers on the suite and print their comparison."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=10, help="seeds per family")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        suite_file = Path(folder) / "pair.toml"
        suite_file.write_text(SUITE.format(last=args.seeds - 1))
        suite = load_suite(suite_file)
        files = [
            run_suite(suite, partial(make_controller, name), name, folder, progress=False)
            for name in ("boundary-arc", "collect-drive")
        ]
        a, b = (read_results(path) for path in files)
        print(render_comparison(compare_results(a, b, reps=500)))


if __name__ == "__main__":
    main()

"""A scenario and a flock of your own, written as TOML, checked, and played.

Run from the repository root:  python examples/custom_scenario.py [--steps N]

Writes a flock file (a small, skittish flock of lapwing-like waders: slower, with a wider alarm
radius) and a scenario at the fictional Saltmarsh Field that uses it, checks both the way
`flockward check` does, prints every key the flock sets, and plays idle and boundary-arc on it.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

from flockward.bench.episode import play_episode
from flockward.config.checking import file_errors
from flockward.config.scenarios import describe, load_scenario
from flockward_baselines.controllers import make_controller

FLOCK = """\
# Waders: a small, skittish flock (illustrative values; modelling choices, not measurements).
name = "waders"
source = "illustrative values for an example, not measurements"
count = 24
formation = "cluster"
spacing = 2.5
speed = 11.0
cruise_speed = 11.0
burst_speed = 16.0
max_speed = 21.0
alarm_radius = 110.0
dodge_radius = 45.0
"""

SCENARIO = """\
name = "saltmarsh-waders"
description = "Two dozen waders cross the fictional Saltmarsh Field's protected circle."

[flock]
file = "waders.toml"

[site]
protected = { circle = { center = [0.0, 0.0], radius = 150.0 } }
goal = { circle = { center = [0.0, 500.0], radius = 150.0 } }
destination = [800.0, 0.0]
flock_start = [-600.0, 0.0]

[pursuer]
file = "multirotor"
start = [-150.0, -100.0]

[episode]
max_steps = {steps}
"""


def main() -> None:
    """Write, check, describe and play the scenario."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steps", type=int, default=1500, help="episode length in steps")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        flock, scenario_file = Path(folder) / "waders.toml", Path(folder) / "saltmarsh.toml"
        flock.write_text(FLOCK)
        scenario_file.write_text(SCENARIO.replace("{steps}", str(args.steps)))
        for path, kind in ((flock, "flock"), (scenario_file, "scenario")):
            problems = file_errors(path, kind)
            print(f"{path.name}: {'ok' if not problems else '; '.join(problems)}")
        scenario = load_scenario(scenario_file)
        print(describe(scenario))
        for name in ("idle", "boundary-arc"):
            record, _ = play_episode(scenario, make_controller(name), seed=0)
            print(f"{name}: {record.outcome} after {record.steps} steps, "
                  f"{record.breached_birds} birds breached")  # fmt: skip


if __name__ == "__main__":
    main()

"""Write a controller of your own and score it on a suite beside a built-in baseline.

Run from the repository root:  python examples/own_controller.py [--episodes N]

The controller below is deliberately simple: it flies to a point behind the flock's centroid,
on the side away from the goal, and holds there. It sees the full state (information level
"state"). The script plays it and boundary-arc on the first N episodes of the smoke suite and
prints both records side by side.
"""

from __future__ import annotations

import argparse
from typing import Any

import numpy as np

from flockward.bench.episode import play_episode
from flockward.bench.suites import load_suite
from flockward.controller import Controller, StateView
from flockward.sim.types import Scenario
from flockward_baselines.controllers import make_controller


class StandBehind(Controller):
    """Hold a point ``distance`` metres behind the flock's centroid, opposite the goal."""

    name = "stand-behind"
    information_level = "state"

    def __init__(self, distance: float = 60.0, gain: float = 0.5) -> None:
        self.distance = distance
        self.gain = gain
        self._goal = np.zeros(2)

    def reset(self, scenario: Scenario, seed: int | None = None) -> None:
        """Remember where the goal region is."""
        goal = scenario.site.goal
        self._goal = np.asarray(getattr(goal, "center", np.zeros(2)), dtype=float)

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """Steer toward the standoff point; the command is a normalised acceleration."""
        assert state is not None  # information level "state": the view is always given
        centroid = state.bird_pos.mean(axis=0)
        away = centroid - self._goal
        target = centroid + self.distance * away / max(float(np.hypot(*away)), 1e-9)
        error = target - state.pursuer_pos[0]
        return np.clip(self.gain * error / 10.0 - 0.3 * state.pursuer_vel[0] / 10.0, -1.0, 1.0)


def main() -> None:
    """Play both controllers on the first episodes of the smoke suite and print the outcomes."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--episodes", type=int, default=4, help="suite episodes to play")
    args = parser.parse_args()
    suite = load_suite("smoke")
    for spec in suite.episodes()[: args.episodes]:
        scenario = suite.scenarios[spec.scenario_name]
        mine, _ = play_episode(scenario, StandBehind(), spec.seed)
        ref, _ = play_episode(scenario, make_controller("boundary-arc"), spec.seed)
        print(f"{spec.scenario_name:10s} seed {spec.seed}: stand-behind {mine.outcome:8s} "
              f"| boundary-arc {ref.outcome}")  # fmt: skip


if __name__ == "__main__":
    main()

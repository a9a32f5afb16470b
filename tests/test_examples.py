"""Every script in examples/ runs, with a tiny budget, as a user would run it."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
# Each example with the arguments that keep it to a few seconds.
BUDGETS = {
    "own_controller.py": ["--episodes", "1"],
    "custom_scenario.py": ["--steps", "200"],
    "train_sb3.py": ["--timesteps", "4096", "--episodes", "1"],
    "compare_two.py": ["--seeds", "2"],
}


def test_every_example_has_a_budget() -> None:
    assert sorted(p.name for p in (ROOT / "examples").glob("*.py")) == sorted(BUDGETS)


@pytest.mark.parametrize("script", sorted(BUDGETS))
def test_example_runs(script: str) -> None:
    env = {
        **os.environ,
        "PYTHONPATH": os.pathsep.join([str(ROOT / "envs"), str(ROOT / "baselines")]),
    }
    result = subprocess.run(
        [sys.executable, str(ROOT / "examples" / script), *BUDGETS[script]],
        capture_output=True, text=True, env=env, cwd=ROOT, timeout=300, check=False,
    )  # fmt: skip
    assert result.returncode == 0, result.stderr[-2000:]
    assert "Traceback" not in result.stderr
    assert result.stdout.strip(), "an example prints what it did"

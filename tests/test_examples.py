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
    # A local Ray instance of 2 CPUs, as tests/test_ray.py starts: about 15 s, mostly Ray's start.
    "run_on_ray.py": ["--episodes", "3", "--cpus", "2"],
    "train_rllib.py": ["--iterations", "1", "--batch", "200", "--env-runners", "0"],
}
# Examples that need a package flockward's test extra may lack, with what installs it. RLlib
# is no extra of flockward: ray[rllib] adds about 70 MB of wheels (pyarrow, pandas) and pins
# an older gymnasium, so `make rllib-example` runs its test in a venv of its own.
NEEDS = {
    "run_on_ray.py": ("ray", "pip install 'flockward[ray]'"),
    "train_rllib.py": (
        "ray.rllib",
        "`make rllib-example` runs it in its own venv (.venv-rllib), "
        "or pip install 'ray[rllib]' torch==2.13.0",
    ),
}
# Examples named here (comma-separated) fail instead of skipping when their package does not
# import: `make rllib-example` sets it, so a broken RLlib venv cannot pass as a skip.
REQUIRED = {name for name in os.environ.get("FLOCKWARD_REQUIRE_EXAMPLES", "").split(",") if name}


def _importable(module: str, env: dict[str, str]) -> bool:
    """Whether ``module`` imports in a fresh interpreter (RLlib can be present but broken)."""
    done = subprocess.run([sys.executable, "-c", f"import {module}"], env=env,
                          capture_output=True, check=False, timeout=120)  # fmt: skip
    return done.returncode == 0


def test_every_example_has_a_budget() -> None:
    assert sorted(p.name for p in (ROOT / "examples").glob("*.py")) == sorted(BUDGETS)


@pytest.mark.parametrize("script", sorted(BUDGETS))
def test_example_runs(script: str) -> None:
    env = {
        **os.environ,
        # the caller's own path entries last (such as a folder holding RLlib)
        "PYTHONPATH": os.pathsep.join(
            [
                str(ROOT / "envs"),
                str(ROOT / "baselines"),
                *filter(None, [os.environ.get("PYTHONPATH")]),
            ]
        ),
    }
    if script in NEEDS and not _importable(NEEDS[script][0], env):
        module, hint = NEEDS[script]
        message = f"{script} needs {module}, which does not import here: {hint}"
        if script in REQUIRED:
            pytest.fail(message + " (required by FLOCKWARD_REQUIRE_EXAMPLES)")
        pytest.skip(message)
    result = subprocess.run(
        [sys.executable, str(ROOT / "examples" / script), *BUDGETS[script]],
        capture_output=True, text=True, env=env, cwd=ROOT, timeout=300, check=False,
    )  # fmt: skip
    assert result.returncode == 0, result.stderr[-2000:]
    assert "Traceback" not in result.stderr
    assert result.stdout.strip(), "an example prints what it did"

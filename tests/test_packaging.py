"""The wheel: both packages, the shipped configs, the console script, nothing generic on top."""

from __future__ import annotations

import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("wheel")
    subprocess.run(
        [
            sys.executable,
            "-m",
            "pip",
            "wheel",
            "--no-deps",
            "--no-build-isolation",
            "-q",
            "-w",
            str(out),
            str(ROOT),
        ],
        check=True,
    )
    (path,) = out.glob("flockward-*.whl")
    return path


def test_wheel_contents(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    tops = {name.split("/")[0] for name in names}
    assert {"flockward", "flockward_baselines"} <= tops
    assert not tops & {"envs", "baselines", "configs", "tests"}
    assert "flockward/_configs/scenarios/headon.toml" in names
    entry_points = next(n for n in names if n.endswith("entry_points.txt"))
    text = zipfile.ZipFile(wheel).read(entry_points).decode()
    assert "flockward = flockward_baselines.cli:main" in text


def test_installed_wheel_runs_outside_the_repo(wheel, tmp_path):
    # Unpacking a wheel is what installing it does (PEP 427); PYTHONPATH puts that copy ahead of
    # the editable install, and the working directory is outside the repository.
    site = tmp_path / "site"
    zipfile.ZipFile(wheel).extractall(site)
    code = (
        "import flockward, flockward_baselines.cli as cli\n"
        f"assert flockward.__file__.startswith({str(site)!r}), flockward.__file__\n"
        "from flockward.config.scenarios import list_scenarios, load_scenario\n"
        "assert 'headon' in list_scenarios(); load_scenario('headon')\n"
        "import gymnasium as gym\n"
        "env = gym.make('flockward/Divert-v2', scenario='trio'); env.reset(seed=0)\n"
        "raise SystemExit(cli.main(['check', '--quiet', "
        f"{str(site / 'flockward/_configs/scenarios/headon.toml')!r}]))\n"
    )
    env = {"PYTHONPATH": str(site), "PATH": "/usr/bin:/bin"}
    result = subprocess.run(
        [sys.executable, "-c", code], cwd=tmp_path, env=env, capture_output=True, text=True
    )
    assert result.returncode == 0, result.stderr

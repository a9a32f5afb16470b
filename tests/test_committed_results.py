"""Committed standard-suite results replay episode for episode (a regression test).

Refactors that change no behaviour must leave every committed episode bit for bit the same; this
replays a sample of them (the first seed of every family for every committed controller) and
compares each record field exactly. The expensive variant replays every episode of every file.
"""

from __future__ import annotations

import functools
import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

from flockward.bench.evaluation import _play, run_suite
from flockward.bench.suites import load_suite
from flockward.controller import Controller
from flockward_baselines.controllers import make_controller
from flockward_baselines.policy import PolicyController

ROOT = Path(__file__).resolve().parents[1]
RESULT_FILES = sorted((ROOT / "results" / "standard").glob("*.json"))


def _factory(data: dict[str, Any]) -> Callable[[], Controller]:
    """A picklable zero-argument factory of the file's controller (for worker processes too)."""
    params = data["controller_parameters"]
    if "model_sha256" in params:
        model = ROOT / "results" / "models" / Path(params["model"]).name
        return functools.partial(PolicyController, model, params.get("algorithm", "ppo"))
    return functools.partial(make_controller, data["controller"], **params)


def _replay(path: Path, first_of_family_only: bool) -> list[tuple[int, str, Any, Any]]:
    data = json.loads(path.read_text(encoding="utf-8"))
    suite = load_suite(data["suite"])
    scenarios = suite.scenarios
    rows = {row["index"]: row for row in data["episodes"]}
    seen: set[str] = set()
    mismatches = []
    factory = _factory(data)
    for spec in suite.episodes():
        if first_of_family_only and spec.family in seen:
            continue
        seen.add(spec.family)
        fresh = _play(factory, scenarios[spec.scenario_name], spec)
        committed = rows[spec.index]
        for key, value in committed.items():
            if fresh.get(key) != value:
                mismatches.append((spec.index, key, value, fresh.get(key)))
    return mismatches


@pytest.mark.parametrize("path", RESULT_FILES, ids=lambda p: p.stem)
def test_first_episode_of_every_family_replays_bit_for_bit(path: Path) -> None:
    assert _replay(path, first_of_family_only=True) == []


@pytest.mark.expensive
@pytest.mark.parametrize("path", RESULT_FILES, ids=lambda p: p.stem)
def test_every_committed_episode_replays_bit_for_bit(path: Path, tmp_path: Path) -> None:
    # Through the runner with two worker processes, as `flockward run --workers 2` plays them.
    data = json.loads(path.read_text(encoding="utf-8"))
    fresh_path = run_suite(
        load_suite(data["suite"]),
        _factory(data),
        data["controller"],
        results_dir=tmp_path,
        workers=2,
        progress=False,
        env_options=data.get("environment"),
    )
    fresh = json.loads(fresh_path.read_text(encoding="utf-8"))
    assert fresh["suite_hash"] == data["suite_hash"]
    assert fresh["episodes"] == data["episodes"]

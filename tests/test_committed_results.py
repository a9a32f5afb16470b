"""Committed standard-, field- and ladder-suite results replay episode for episode (a regression
test).

Refactors that change no behaviour must leave every committed episode bit for bit the same; this
replays a sample of them (the first seed of every family of every committed standard file, of
the field suite's all-at-once family and of two ladder families, through the ``flockward audit``
machinery) and compares each record field exactly. The expensive variant replays every episode
of every scripted baseline's file and of each learned config's seed 0 through the runner, and a
seeded sixth of the episodes of its other seeds (same code path, one process): the learned seeds
are most of the files, and replaying all of them would put CI past its time budget.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest

from flockward.bench.audit import audit_results
from flockward.bench.evaluation import run_suite
from flockward.bench.suites import load_suite
from flockward_baselines.replay import factory_from_results

ROOT = Path(__file__).resolve().parents[1]
RESULT_FILES = [
    path
    for suite in ("standard", "field", "ladder")
    for path in sorted((ROOT / "results" / suite).glob("*.json"))
]
# Families sampled by the quick test where a suite is not sampled whole: the field suite's two
# drones, wind and radar at once; the ladder's first rung and its noisy, randomised one.
SAMPLE = {
    "field": ("two-drones-windy-radar",),
    "ladder": ("t1-graze", "t4-oblique-noisy"),
}
MODELS = ROOT / "results" / "models"
ONE_IN = 6  # the expensive replay of a learned config's seeds 1 and 2 plays 1 episode in 6


def _factory(data: dict[str, Any]) -> Any:
    # The ladder's models were trained on it and are kept apart from the standard references.
    return factory_from_results(data, MODELS / "ladder" if data["suite"] == "ladder" else MODELS)


@pytest.mark.parametrize("path", RESULT_FILES, ids=lambda p: p.stem)
def test_first_episode_of_every_family_replays_bit_for_bit(path: Path) -> None:
    data = json.loads(path.read_text(encoding="utf-8"))
    first: dict[str, int] = {}
    for spec in load_suite(data["suite"]).episodes():
        if data["suite"] not in SAMPLE or spec.family in SAMPLE[data["suite"]]:
            first.setdefault(spec.family, spec.index)
    report = audit_results(path, _factory(data), indices=list(first.values()))
    assert len(report.audited) == len(first) >= 1
    assert [m.text() for m in report.mismatches] == []


@pytest.mark.expensive
@pytest.mark.parametrize("path", RESULT_FILES, ids=lambda p: p.stem)
def test_committed_files_replay_bit_for_bit_whole_or_sampled(path: Path, tmp_path: Path) -> None:
    data = json.loads(path.read_text(encoding="utf-8"))
    if data["controller"].startswith("model-") and not path.stem.endswith("-s0"):
        # A learned config's other seeds: a seeded sample, in this process.
        report = audit_results(path, _factory(data), sample=len(data["episodes"]) // ONE_IN)
        assert len(report.audited) == len(data["episodes"]) // ONE_IN >= 1
        assert [m.text() for m in report.mismatches] == []
        return
    # The whole file through the runner with two worker processes, as `flockward run --workers 2`.
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

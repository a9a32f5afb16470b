"""Auditing a result file: replay some of its episodes from the stored provenance and compare.

A result file records each episode's outcome and metrics. Anyone can check them: the suite (by
hash), the controller and its settings, and the environment arguments are in the file's header,
and every episode is determined by its scenario and seed. A record that differs from its replay
means a file edited by hand, another package version, or a nondeterminism bug.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from flockward.bench.evaluation import ControllerFactory, play_row, read_results
from flockward.bench.suites import Suite, load_suite, suite_hash

__all__ = ["AuditReport", "Mismatch", "audit_results", "choose_episodes"]


@dataclass(frozen=True)
class Mismatch:
    """One stored value that its replay does not reproduce."""

    index: int
    family: str
    seed: int
    key: str
    stored: Any
    replayed: Any

    def text(self) -> str:
        """The mismatch in one line."""
        return (
            f"episode {self.index} ({self.family} seed {self.seed}): {self.key} stored "
            f"{self.stored!r:.60}, replayed {self.replayed!r:.60}"
        )


@dataclass(frozen=True)
class AuditReport:
    """Which episodes of a file were replayed and what differed."""

    path: str
    audited: tuple[int, ...]  # episode indices replayed
    total: int  # episodes in the file
    mismatches: tuple[Mismatch, ...]

    @property
    def ok(self) -> bool:
        """True when every replayed episode matched its record exactly."""
        return not self.mismatches


def choose_episodes(indices: Sequence[int], sample: int | None, seed: int) -> list[int]:
    """``sample`` of ``indices`` drawn without replacement by ``seed`` (all of them for None),
    ascending."""
    chosen = list(indices)
    if sample is not None and sample < len(chosen):
        rng = np.random.default_rng(seed)
        chosen = [chosen[i] for i in rng.choice(len(chosen), size=sample, replace=False)]
    return sorted(chosen)


def _suite_of(data: dict[str, Any], path: Path, suite: Suite | None) -> Suite:
    """The file's suite, checked against the hash it was run on."""
    suite = suite if suite is not None else load_suite(str(data["suite"]))
    if suite_hash(suite) != data.get("suite_hash"):
        raise ValueError(
            f"{path}: was run on suite {data['suite']!r} with hash {data.get('suite_hash')}, "
            f"not the suite given (hash {suite_hash(suite)}); pass the suite file it was run on"
        )
    return suite


def audit_results(
    path: str | Path,
    factory: ControllerFactory,
    suite: Suite | None = None,
    sample: int | None = None,
    seed: int = 0,
    indices: Sequence[int] | None = None,
) -> AuditReport:
    """Replay ``sample`` episodes of the result file at ``path`` (all for None), or exactly the
    episodes ``indices``, with controllers from ``factory``; compare every stored field exactly.

    ``suite`` is the suite the file was run on (by default the shipped suite of its name); its
    hash must match the file's. Raises ValueError for a file that cannot be audited.
    """
    path = Path(path)
    data = read_results(path)
    suite = _suite_of(data, path, suite)
    specs = {spec.index: spec for spec in suite.episodes()}
    rows = {row["index"]: row for row in data["episodes"]}
    scenarios = suite.scenarios
    mismatches: list[Mismatch] = []
    chosen = sorted(indices) if indices is not None else choose_episodes(sorted(rows), sample, seed)
    unknown = [i for i in chosen if i not in rows or i not in specs]
    if unknown:
        raise ValueError(f"{path}: no episode with index {unknown[0]} in the file and its suite")
    for index in chosen:
        spec = specs[index]
        fresh = play_row(factory, scenarios[spec.scenario_name], spec, data.get("environment"))
        for key, stored in rows[index].items():
            if fresh.get(key) != stored:
                mismatches.append(
                    Mismatch(index, spec.family, spec.seed, key, stored, fresh.get(key))
                )
    return AuditReport(str(path), tuple(chosen), len(rows), tuple(mismatches))

"""Whether the pair sums could run in float32: whole episodes played in both precisions, compared.

The kernel's pair sums can run in float32 (the same code specialised on float32 slots,
``flockward.sim.dynamics.StepWork``); `flockward bench` times it. This script measures what it
does to results: it plays every episode of a suite with a scripted controller three ways,

- float64: the shipped kernel;
- float32: the pair sums in single precision (state, per-bird terms and integration in float64);
- reference: float64 with the cell grid forced, which sums the same pairs in another order. It
  changes nothing but rounding, so its disagreements with float64 are the chaotic sensitivity
  every episode already has: the yardstick for float32's.

Single episodes are expected to part ways: forces switch on and off at radii, so a rounding
difference can put a bird on the other side of a cut-off and the trajectories diverge. What can be
asked is that the statistics do not move. The tolerance, stated before measuring:

1. outcomes: float32 agrees with float64 on each episode's outcome (success, breach, timeout) and
   on whether the flock split (peak components > 1) at least as often as the reference does,
   within the 95 % Wilson interval of the reference's agreement rate;
2. the suite's success rate: the float32 - float64 difference lies inside the float64 rate's 95 %
   Wilson interval, and McNemar's exact test on the paired outcomes does not reject (p >= 0.05);
3. each episode metric: the 95 % family-stratified bootstrap interval of the mean paired
   difference float32 - float64 contains 0, or lies within the reference's interval's span.

Usage (about 4 minutes on one core for the standard suite):
    python scripts/float32_check.py [--suite standard] [--controller boundary-arc] [--seeds K]
``--seeds K`` plays only the first K seeds of each family.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from functools import partial
from typing import Any
from unittest import mock

import numpy as np

from flockward.bench.episode import EpisodeRecord, play_episode
from flockward.bench.statistics import mcnemar_exact, paired_bootstrap, wilson_interval
from flockward.bench.suites import load_suite
from flockward.sim.dynamics import StepWork
from flockward_baselines.controllers import make_controller

METRICS = (
    "duration",
    "breached_birds",
    "peak_components",
    "min_largest_fraction",
    "closest_approach",
    "diameter_growth",
    "episode_return",
    "min_zone_clearance",
    "path_length",
)
VARIANTS = ("float64", "float32", "reference")


@contextmanager
def _float32_slots() -> Iterator[None]:
    """Every World built inside runs its pair sums on float32 slots."""
    with mock.patch("flockward.sim.world.StepWork", partial(StepWork, slot_dtype=np.float32)):
        yield


def play_suite(suite_name: str, controller: str, seeds: int | None) -> dict[str, list[Any]]:
    """Every episode of the suite (the first ``seeds`` per family if given), three ways: records
    by variant, and the family of each episode."""
    suite = load_suite(suite_name)
    played: dict[str, list[Any]] = {name: [] for name in (*VARIANTS, "family")}
    for entry in suite.entries:
        last = entry.seeds[1] if seeds is None else min(entry.seeds[1], entry.seeds[0] + seeds - 1)
        for seed in range(entry.seeds[0], last + 1):
            played["float64"].append(_play(entry.scenario, controller, seed, {}))
            with _float32_slots():
                played["float32"].append(_play(entry.scenario, controller, seed, {}))
            grid = {"neighbour_search": "grid"}
            played["reference"].append(_play(entry.scenario, controller, seed, grid))
            played["family"].append(entry.family)
    return played


def _play(scenario: Any, controller: str, seed: int, env_kwargs: dict[str, Any]) -> EpisodeRecord:
    record, _ = play_episode(scenario, make_controller(controller), seed, env_kwargs=env_kwargs)
    if record.outcome == "error":
        raise RuntimeError(f"{scenario.name} seed {seed}: {record.error}")
    return record


def _split(record: EpisodeRecord) -> bool:
    return record.peak_components > 1


def _agreement(a: list[EpisodeRecord], b: list[EpisodeRecord], key: Callable[[Any], Any]) -> int:
    return sum(key(x) == key(y) for x, y in zip(a, b, strict=True))


def _by_family(values: list[float], families: list[str]) -> list[list[float]]:
    order = list(dict.fromkeys(families))
    return [[v for v, f in zip(values, families, strict=True) if f == name] for name in order]


def report(played: dict[str, list[Any]], emit: Callable[[str], None] = print) -> bool:
    """Print the comparison; return whether float32 meets every tolerance of the docstring."""
    f64, f32, ref = played["float64"], played["float32"], played["reference"]
    families = played["family"]
    n = len(f64)
    ok = True
    emit(f"{n} episodes, {len(set(families))} families")
    emit("\n1. per-episode agreement with float64 (95 % Wilson interval)")
    for label, key in (("outcome", lambda r: r.outcome), ("split", _split)):
        same32 = _agreement(f32, f64, key)
        same_ref = _agreement(ref, f64, key)
        low, high = wilson_interval(same_ref, n)
        passes = same32 / n >= low
        ok &= passes
        emit(
            f"  {label:<8} float32 {same32}/{n} = {same32 / n:.3f}   reference (grid, float64) "
            f"{same_ref}/{n} = {same_ref / n:.3f} [{low:.3f}, {high:.3f}]   "
            + ("within" if passes else "OUTSIDE")
        )
    emit("\n2. success rate (95 % Wilson interval), McNemar exact against float64")
    wins = {name: int(sum(r.success for r in played[name])) for name in VARIANTS}
    low, high = wilson_interval(wins["float64"], n)
    for name in VARIANTS:
        lo, hi = wilson_interval(wins[name], n)
        line = f"  {name:<9} {wins[name]}/{n} = {wins[name] / n:.3f} [{lo:.3f}, {hi:.3f}]"
        if name != "float64":
            test = mcnemar_exact([r.success for r in played[name]], [r.success for r in f64])
            line += f"   discordant {test.n}, p = {test.p_value:.3f}"
        emit(line)
    test32 = mcnemar_exact([r.success for r in f32], [r.success for r in f64])
    rate_ok = low <= wins["float32"] / n <= high and test32.p_value >= 0.05
    ok &= rate_ok
    emit(f"  float32 inside float64's interval and p >= 0.05: {'yes' if rate_ok else 'NO'}")
    emit("\n3. mean paired difference against float64, 95 % bootstrap interval (by family)")
    heads = ("metric", "float64 mean", "float32 - float64", "reference - float64")
    emit(f"  {heads[0]:<22} {heads[1]:>13} {heads[2]:>28} {heads[3]:>28}")
    for metric in METRICS:
        base = [float(getattr(r, metric)) for r in f64]
        base_fam = _by_family(base, families)
        cells = []
        spans = {}
        for name in ("float32", "reference"):
            values = [float(getattr(r, metric)) for r in played[name]]
            mean = float(np.mean(np.subtract(values, base)))
            lo, hi = paired_bootstrap(_by_family(values, families), base_fam)["difference"]
            spans[name] = (lo, hi)
            cells.append(f"{mean:+9.3g} [{lo:+8.3g}, {hi:+8.3g}]")
        lo32, hi32 = spans["float32"]
        lo_ref, hi_ref = spans["reference"]
        passes = lo32 <= 0.0 <= hi32 or (min(lo_ref, 0.0) <= lo32 and hi32 <= max(hi_ref, 0.0))
        ok &= passes
        emit(
            f"  {metric:<22} {np.mean(base):13.4g} {cells[0]:>28} {cells[1]:>28}"
            + ("" if passes else "   OUTSIDE")
        )
    emit(f"\nfloat32 within every stated tolerance: {'yes' if ok else 'no'}")
    return ok


def main() -> None:
    """Play the suite three ways and print the comparison."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--suite", default="standard")
    parser.add_argument("--controller", default="boundary-arc")
    parser.add_argument("--seeds", type=int, default=None, help="first K seeds of each family")
    args = parser.parse_args()
    start = time.perf_counter()
    played = play_suite(args.suite, args.controller, args.seeds)
    print(f"suite {args.suite}, controller {args.controller}: ", end="")
    report(played)
    print(f"({time.perf_counter() - start:.0f} s)")


if __name__ == "__main__":
    main()

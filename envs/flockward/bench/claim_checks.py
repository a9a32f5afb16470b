"""The field's claims about herding with one drone, played as episodes and counted.

Claims (common practice of drone hazing, as the benchmark's baselines encode it): pushing from
the flock's boundary at a distance between the birds' dodge and alarm radii diverts a flock whole;
pushing from too close splits it; pushing from too far lets it spill past; chasing straight into
a large flock splits it; an aggressive chase keeps two or three birds out of the zone. Each check
plays the shipped head-on site with the scripted controllers (given by the caller, since the
core ships none) over fixed seeds and counts outcomes; counts come with Wilson 95 % intervals.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

from scipy.stats import binomtest

from flockward.bench.episode import EpisodeRecord, play_episode
from flockward.bench.verify import (
    CheckResult,
    ControllerFactory,
    Figure,
    Series,
    VerifySettings,
    judged,
    not_applicable,
)
from flockward.config.scenarios import load_scenario

HERD_SCENARIO = "headon"  # 50 gulls head-on across the protected circle
SMALL_SCENARIO = "trio"  # 3 gulls on the same route
LARGE_FLOCK = 120  # birds of the large flock a direct chase is claimed to split
WHOLE_FRACTION = 0.9  # a flock is split once its largest fragment held less than this share
BAND_COUNT = 19 / 20  # the push band diverts the flock whole in at least this share of seeds
MAJORITY = 0.5  # "splits" / "spills": in at least half the seeds
SMALL_FLOCK_KEPT_OUT = 0.9  # share of small-flock chases without a breach
AGGRESSIVE_FRACTION = 0.5  # aggressive push distance, as a fraction of the dodge radius
TIMID_FRACTION = 0.95  # timid push distance, as a fraction of the way from dodge to alarm
# The claims are about controllers that react every control step (0.1 s), as the field's
# experiments steer continuously: they are played with one decision per control step, not at
# the benchmark's decision interval.
CLAIM_ENV = {"decision_steps": 1}

SOURCE_BAND = "field claim: boundary pushing in the dodge-alarm band diverts without splitting"
SOURCE_AGGRESSIVE = "field claim: pushing from inside the dodge radius splits the flock"
SOURCE_TIMID = "field claim: pushing from too far lets the flock spill past"
SOURCE_CHASE = "field claim: a direct chase splits a large flock"
SOURCE_SMALL = "field claim: an aggressive chase keeps 2-3 birds out of the zone"


@dataclass(frozen=True)
class Counts:
    """Outcome counts over a seed set."""

    seeds: int
    whole: int  # succeeded with the flock whole
    split: int  # largest fragment fell below WHOLE_FRACTION at some step
    breach: int  # at least one bird entered the protected zone

    @classmethod
    def of(cls, records: Sequence[EpisodeRecord]) -> Counts:
        """The counts of a list of episode records."""
        split = [r.min_largest_fraction < WHOLE_FRACTION for r in records]
        return cls(
            seeds=len(records),
            whole=sum(r.success and not s for r, s in zip(records, split, strict=True)),
            split=sum(split),
            breach=sum(r.breached_birds > 0 for r in records),
        )

    def text(self) -> str:
        """The counts in words."""
        return f"whole {self.whole}, split {self.split}, breach {self.breach} of {self.seeds}"


def wilson(k: int, n: int) -> str:
    """The Wilson 95 % interval of k successes in n trials, as text."""
    ci = binomtest(k, n).proportion_ci(method="wilson")
    return f"{k}/{n} [{ci.low:.2f}, {ci.high:.2f}]"


def fear_radii() -> tuple[float, float] | None:
    """(dodge, alarm) radii of the herding scenario's flock, None if the model has no such pair."""
    flock = load_scenario(HERD_SCENARIO).flock
    dodge, alarm = getattr(flock, "dodge_radius", None), getattr(flock, "alarm_radius", None)
    if dodge is None or alarm is None or not dodge < alarm:
        return None
    return float(dodge), float(alarm)


def play_counts(
    make: ControllerFactory,
    controller: str,
    params: Mapping[str, Any],
    scenario: str,
    overrides: Mapping[str, object] | None,
    seeds: Sequence[int],
) -> Counts:
    """Outcome counts of ``controller`` (built by ``make`` with ``params``) over ``seeds``."""
    loaded = load_scenario(scenario, overrides)
    records = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # push distances outside the band are the point here
        for seed in seeds:
            records.append(
                play_episode(loaded, make(controller, **params), seed, env_kwargs=CLAIM_ENV)[0]
            )
    return Counts.of(records)


@lru_cache(maxsize=64)
def _push_counts(make: ControllerFactory, distance: float, seeds: tuple[int, ...]) -> Counts:
    return play_counts(
        make, "boundary-arc", {"push_distance": distance}, HERD_SCENARIO, None, seeds
    )


def band_distances(settings: VerifySettings, radii: tuple[float, float]) -> list[float]:
    """Push distances swept inside the band, m."""
    dodge, alarm = radii
    return [round(dodge + f * (alarm - dodge), 2) for f in settings.push_fractions]


def _premise(name: str, bound: str, source: str, settings: VerifySettings) -> Any:
    """(make_controller, radii), or a not-applicable result saying what is missing."""
    if settings.make_controller is None:
        return not_applicable(name, bound, source, "no controllers given to play the claim")
    radii = fear_radii()
    if radii is None:
        return not_applicable(name, bound, source, "the flock has no dodge and alarm radii")
    return settings.make_controller, radii


def check_push_band(settings: VerifySettings) -> CheckResult:
    """Some push distance in the band diverts a 50-bird flock whole in >= 19 of 20 seeds."""
    name, bound = "claim-push-band", f"best whole share >= {BAND_COUNT:.2f}"
    premise = _premise(name, bound, SOURCE_BAND, settings)
    if isinstance(premise, CheckResult):
        return premise
    make, radii = premise
    seeds = settings.episode_seeds
    distances = band_distances(settings, radii)
    sweep = [_aggressive_distance(radii), *distances, _timid_distance(radii)]
    counts = [_push_counts(make, d, seeds) for d in sweep]
    inside = counts[1:-1]
    best = max(range(len(inside)), key=lambda k: inside[k].whole)
    share = inside[best].whole / len(seeds)
    figure = Figure(
        "push-band",
        f"Boundary-arc on {HERD_SCENARIO} (dodge {radii[0]:g} m, alarm {radii[1]:g} m)",
        "push distance (m)",
        f"episodes of {len(seeds)}",
        tuple(
            Series(label, tuple(sweep), tuple(float(getattr(c, key)) for c in counts))
            for label, key in (("whole", "whole"), ("split", "split"), ("breach", "breach"))
        ),
    )
    detail = "; ".join(f"{d:g} m: {c.text()}" for d, c in zip(distances, inside, strict=True))
    return judged(
        name,
        share,
        bound,
        share >= BAND_COUNT,
        SOURCE_BAND,
        f"best {distances[best]:g} m whole {wilson(inside[best].whole, len(seeds))}; {detail}",
        [figure],
    )


def _aggressive_distance(radii: tuple[float, float]) -> float:
    """Push distance of the aggressive claim: a fraction of the dodge radius (m)."""
    return radii[0] * AGGRESSIVE_FRACTION


def _timid_distance(radii: tuple[float, float]) -> float:
    """Push distance of the timid claim: most of the way from the dodge to the alarm radius (m)."""
    return radii[0] + TIMID_FRACTION * (radii[1] - radii[0])


def _single_push_claim(
    settings: VerifySettings,
    name: str,
    source: str,
    outcome: str,
    distance_of: Callable[[tuple[float, float]], float],
) -> CheckResult:
    """Boundary-arc pushing from one distance: the share of seeds whose episode had ``outcome``
    (a Counts field: "split" or "breach") must be a majority."""
    bound = f"{outcome} share >= {MAJORITY}"
    premise = _premise(name, bound, source, settings)
    if isinstance(premise, CheckResult):
        return premise
    make, radii = premise
    distance = distance_of(radii)
    counts = _push_counts(make, distance, settings.episode_seeds)
    hits = int(getattr(counts, outcome))
    share = hits / counts.seeds
    return judged(
        name,
        share,
        bound,
        share >= MAJORITY,
        source,
        f"push {distance:g} m: {outcome} {wilson(hits, counts.seeds)}; {counts.text()}",
    )


def check_aggressive_push(settings: VerifySettings) -> CheckResult:
    """Pushing from half the dodge radius splits the flock in most seeds."""
    return _single_push_claim(
        settings, "claim-aggressive-push-splits", SOURCE_AGGRESSIVE, "split", _aggressive_distance
    )


def check_timid_push(settings: VerifySettings) -> CheckResult:
    """Pushing from near the alarm radius lets the flock breach in most seeds."""
    return _single_push_claim(
        settings, "claim-timid-push-spills", SOURCE_TIMID, "breach", _timid_distance
    )


def check_chase_large(settings: VerifySettings) -> CheckResult:
    """Direct pursuit splits a 120-bird flock in most seeds."""
    name, bound = "claim-chase-splits-large-flock", f"split share >= {MAJORITY}"
    if settings.make_controller is None:
        return not_applicable(name, bound, SOURCE_CHASE, "no controllers given to play the claim")
    counts = play_counts(
        settings.make_controller,
        "direct-pursuit",
        {},
        HERD_SCENARIO,
        {"flock.count": LARGE_FLOCK},
        settings.episode_seeds,
    )
    share = counts.split / counts.seeds
    return judged(
        name,
        share,
        bound,
        share >= MAJORITY,
        SOURCE_CHASE,
        f"{LARGE_FLOCK} gulls: split {wilson(counts.split, counts.seeds)}; {counts.text()}",
    )


def check_chase_small(settings: VerifySettings) -> CheckResult:
    """Direct pursuit keeps three birds out of the protected zone."""
    name, bound = "claim-chase-turns-small-flock", f"breach-free share >= {SMALL_FLOCK_KEPT_OUT}"
    if settings.make_controller is None:
        return not_applicable(name, bound, SOURCE_SMALL, "no controllers given to play the claim")
    counts = play_counts(
        settings.make_controller, "direct-pursuit", {}, SMALL_SCENARIO, None, settings.episode_seeds
    )
    kept = counts.seeds - counts.breach
    share = kept / counts.seeds
    return judged(
        name,
        share,
        bound,
        share >= SMALL_FLOCK_KEPT_OUT and math.isfinite(share),
        SOURCE_SMALL,
        f"3 gulls: breach-free {wilson(kept, counts.seeds)}; {counts.text()}",
    )


CHECKS = {
    "claim-push-band": check_push_band,
    "claim-aggressive-push-splits": check_aggressive_push,
    "claim-timid-push-spills": check_timid_push,
    "claim-chase-splits-large-flock": check_chase_large,
    "claim-chase-turns-small-flock": check_chase_small,
}

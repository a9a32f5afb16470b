"""The field's herding claims under flock model v1, played as episodes (20 seeds each).

These are measurements of the model against qualitative claims of the field (the method papers'
boundary-pushing rule: push between the birds' dodge and alarm radii), not published numbers, so
each bound sits a margin below what was measured (in the comment) to catch a regression without
tripping on seed luck. `flockward verify` reports the same claims with intervals.
"""

from __future__ import annotations

from flockward.bench.claim_checks import CLAIM_ENV
from flockward.bench.episode import EpisodeRecord, play_episode
from flockward.config.scenarios import load_scenario
from flockward_baselines.controllers import make_controller

SEEDS = range(1000, 1020)
WHOLE = 0.9  # a flock is split once its largest fragment held less than this share


def _play(controller: str, overrides: dict[str, object] | None = None, **params: object):
    scenario = load_scenario("headon", overrides or {})
    return [
        play_episode(scenario, make_controller(controller, **params), s, env_kwargs=CLAIM_ENV)[0]
        for s in SEEDS
    ]


def _split(records: list[EpisodeRecord]) -> int:
    return sum(r.min_largest_fraction < WHOLE for r in records)


def test_a_chase_through_the_flock_splits_it_and_the_dodge_is_why() -> None:
    # Measured: direct pursuit splits the 50 gulls in 18/20 seeds with the dodge regime on and in
    # 0/20 with it off (dodge_accel = 0), where every flock instead breaches. The dodge regime,
    # not the flight alone, parts the flock around the drone's path.
    on = _play("direct-pursuit")
    off = _play("direct-pursuit", {"flock.dodge_accel": 0.0})
    assert _split(on) >= 14, _split(on)
    assert _split(off) <= 3, _split(off)
    assert sum(r.breached_birds > 0 for r in off) >= 15


def test_a_push_between_the_dodge_and_alarm_radii_diverts_the_flock_whole() -> None:
    # Measured: boundary-arc at a 50 m push (dodge radius 40 m, alarm radius 80 m) succeeds
    # with the flock whole in 20/20 seeds; the field's band, required at >= 19/20.
    records = _play("boundary-arc", push_distance=50.0)
    whole = sum(r.outcome == "success" and r.min_largest_fraction >= WHOLE for r in records)
    assert whole >= 19, whole


def test_herded_outcomes_do_not_depend_on_the_physics_step() -> None:
    # Halving the physics step (4 -> 8 substeps per 0.1 s control step) must leave the herded
    # outcome counts on a fixed 20-seed set within 2 of each other (model requirement; measured:
    # identical counts, boundary-arc 20 successes, direct pursuit 18 splits, at either step).
    def counts(controller: str, substeps: int) -> tuple[int, int, int]:
        records = _play(controller, {"episode.substeps": substeps})
        return (
            sum(r.outcome == "success" for r in records),
            sum(r.outcome == "breach" for r in records),
            _split(records),
        )

    for controller in ("boundary-arc", "direct-pursuit"):
        coarse, fine = counts(controller, 4), counts(controller, 8)
        assert all(abs(a - b) <= 2 for a, b in zip(coarse, fine, strict=True)), (coarse, fine)

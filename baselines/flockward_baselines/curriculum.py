"""A curriculum over a tiered suite: training worlds promoted up the difficulty ladder.

Each training world (a *slot*) plays episodes of the families of its current tier; after every
episode its last ``window`` outcomes at that tier are checked, and when their success rate
reaches ``promote_at`` the slot moves up one tier (it never moves down). With probability
``review`` an episode is drawn from a lower tier instead, so that what was learnt first is not
forgotten. ``mode = "uniform"`` turns promotion off and draws every episode from all families
alike: the control a curriculum is measured against.

This module holds the bookkeeping (``Ladder``); ``flockward_baselines.sb3.CurriculumVecEnv``
steps the worlds. The same seed gives the same sequence of draws.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass
from typing import Any

import numpy as np

from flockward.bench.suites import Suite
from flockward.task.env_config import EnvConfig

MODES = ("promote", "uniform")
DRAW_STREAM = 2  # SeedSequence key of the curriculum's own draws: (seed, DRAW_STREAM)


@dataclass(frozen=True)
class CurriculumSettings:
    """How worlds climb the ladder (see the module docstring)."""

    suite: str = "ladder"  # a tiered suite: name or TOML path
    mode: str = "promote"  # "promote" or "uniform"
    window: int = 8  # episodes a slot's success rate is taken over
    promote_at: float = 0.75  # success rate over the window that moves a slot up one tier
    review: float = 0.2  # chance an episode is drawn from a lower tier than the slot's


def family_configs(
    suite: Suite, env_options: dict[str, Any], overrides: dict[str, Any]
) -> list[EnvConfig]:
    """The environment config of each family of ``suite`` (file order), with ``overrides``
    applied over the entry's own."""
    configs = []
    for entry in suite.entries:
        merged = {**dict(entry.overrides), **overrides}
        configs.append(EnvConfig(scenario=entry.source, overrides=merged, **env_options))
    return configs


@dataclass
class Slot:
    """One training world's place on the ladder."""

    tier: int  # index into the ladder's tiers, 0 the easiest
    family: int  # index of the family playing its current episode
    recent: deque[bool]  # success of its last episodes at its own tier


class Ladder:
    """The tier of every slot, the family of its current episode, and promotion."""

    def __init__(
        self, suite: Suite, settings: CurriculumSettings, slots: int, seed: int, resumed_at: int = 0
    ):
        self.settings = settings
        self.tier_numbers = sorted({entry.tier for entry in suite.entries})
        self.families = [entry.family for entry in suite.entries]
        self.family_tier = [self.tier_numbers.index(entry.tier) for entry in suite.entries]
        # A resumed run draws a stream of its own (salted by the decisions at the checkpoint),
        # not the start's again; a fresh run's stream is (seed, DRAW_STREAM) as always.
        key = [seed, DRAW_STREAM, resumed_at] if resumed_at else [seed, DRAW_STREAM]
        self._draws = np.random.default_rng(key)
        start = 0 if settings.mode == "promote" else len(self.tier_numbers) - 1
        self.slots = [Slot(start, 0, deque(maxlen=settings.window)) for _ in range(slots)]
        for slot in self.slots:
            slot.family = self.draw_family(slot.tier)

    def tier_counts(self) -> list[int]:
        """Slots on each tier, easiest first."""
        counts = [0] * len(self.tier_numbers)
        for slot in self.slots:
            counts[slot.tier] += 1
        return counts

    def state(self) -> list[dict[str, Any]]:
        """Each slot's tier (index, easiest 0) and its window of outcomes there, for a
        checkpoint: what ``restore`` needs to resume the climb where it stopped."""
        return [{"tier": slot.tier, "recent": list(slot.recent)} for slot in self.slots]

    def restore(self, state: list[dict[str, Any]]) -> None:
        """Put every slot back on the tier ``state`` gives (``state()`` of a ladder on the same
        suite with as many slots) and draw its next family there."""
        if len(state) != len(self.slots):
            raise ValueError(
                f"curriculum state of {len(state)} worlds, this run has {len(self.slots)}"
            )
        top = len(self.tier_numbers) - 1
        for slot, saved in zip(self.slots, state, strict=True):
            tier = int(saved["tier"])
            if not 0 <= tier <= top:
                raise ValueError(f"curriculum state: tier index {tier} outside 0..{top}")
            slot.tier = tier
            slot.recent.clear()
            slot.recent.extend(bool(x) for x in saved["recent"])
            slot.family = self.draw_family(slot.tier)

    def draw_family(self, tier: int) -> int:
        """A family for an episode at ``tier``: one of the tier's, or a lower tier's to review."""
        s = self.settings
        if s.mode == "uniform":
            return int(self._draws.integers(len(self.families)))
        if tier > 0 and self._draws.random() < s.review:
            tier = int(self._draws.integers(tier))
        choices = [f for f, t in enumerate(self.family_tier) if t == tier]
        return choices[int(self._draws.integers(len(choices)))]

    def finish(self, index: int, success: bool) -> int:
        """Record slot ``index``'s episode; promote it when its window says so; draw and return
        the family of its next episode."""
        s = self.settings
        slot = self.slots[index]
        if s.mode == "promote" and self.family_tier[slot.family] == slot.tier:
            slot.recent.append(success)
            top = len(self.tier_numbers) - 1
            full = len(slot.recent) == s.window
            if full and sum(slot.recent) >= s.promote_at * s.window and slot.tier < top:
                slot.tier += 1
                slot.recent.clear()
        slot.family = self.draw_family(slot.tier)
        return slot.family

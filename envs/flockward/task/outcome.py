"""Why an episode ended, as reported in ``info["outcome"]`` and in result files.

A StrEnum: each member equals its string ("success" == Outcome.SUCCESS), so JSON files and
comparisons with plain strings are unchanged.
"""

from __future__ import annotations

from enum import StrEnum


class Outcome(StrEnum):
    """How an episode stands after a step; every value but RUNNING ends it."""

    RUNNING = "running"  # the episode goes on
    SUCCESS = "success"  # the goal region holds the required share of the flock
    BREACH = "breach"  # more birds entered the protected zone than the scenario tolerates
    TIMEOUT = "timeout"  # the step limit was reached first
    ERROR = "error"  # the controller failed (raised, or returned an unusable action)

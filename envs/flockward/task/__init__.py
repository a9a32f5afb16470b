"""The task layer: observations, reward terms, the batched task and its Gymnasium faces.

Knows nothing of suites or result files. ``from flockward.task import DivertTask`` (the old flat
module's names) still works: they load from ``flockward.task.batched`` on first use.
"""

from __future__ import annotations

import importlib
from typing import Any

_BATCHED = ("DivertTask", "StepBatch", "check_actions")


def __getattr__(name: str) -> Any:
    if name in _BATCHED:
        return getattr(importlib.import_module("flockward.task.batched"), name)
    raise AttributeError(f"module 'flockward.task' has no attribute {name!r}")

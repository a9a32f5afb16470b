"""Result files: their format, reading, writing and validation, shared by the runner that writes
them (``flockward.bench.evaluation``) and the leaderboard that reads them.

A result file ``<results>/<suite>/<controller-slug>.json`` is one strict JSON object (indent 1)::

    {"format": "flockward-results/1", "suite", "suite_version", "suite_hash", "controller",
     "information_level", "controller_parameters", "provenance": {...},
     "episodes": [{"family", "scenario", "seed", "index", **EpisodeRecord.as_dict()}, ...]}
"""

from __future__ import annotations

import contextlib
import fcntl
import json
import math
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any, TypeGuard

from flockward.config.atomic import write_atomic
from flockward.controller import INFORMATION_LEVELS
from flockward.task.outcome import Outcome

__all__ = [
    "OUTCOMES",
    "RESULTS_FORMAT",
    "ResultsBusy",
    "UnreadableResults",
    "episode_problem",
    "file_problem",
    "format_problem",
    "read_json",
    "write_results",
    "writer_lock",
]

RESULTS_FORMAT = "flockward-results/1"
OUTCOMES = tuple(o.value for o in Outcome if o is not Outcome.RUNNING)  # how episodes end


class ResultsBusy(ValueError):
    """Another run is writing the same result file; this one stops before touching it."""


@contextlib.contextmanager
def writer_lock(path: str | os.PathLike[str]) -> Iterator[None]:
    """Hold the right to write the result file ``path`` (an exclusive lock on ``PATH.lock``).

    Two runs writing one file would each resume from what it held when they started and the
    later save would drop the other's episodes, so the second run is refused at once with
    ResultsBusy. The lock is the operating system's (flock): a run that dies releases it; the
    lock file is removed when the run ends.
    """
    lock = Path(f"{path}.lock")
    lock.parent.mkdir(parents=True, exist_ok=True)
    handle = _locked(lock, path)
    try:
        yield
    finally:
        lock.unlink(missing_ok=True)  # unlinked while held: a waiting run retries on a new file
        os.close(handle)  # closing releases the lock


def _locked(lock: Path, path: str | os.PathLike[str]) -> int:
    """An open descriptor holding the exclusive lock on the file now at ``lock``."""
    while True:
        handle = os.open(lock, os.O_CREAT | os.O_RDWR, 0o666)
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(handle)
            raise ResultsBusy(
                f"{path}: another run is writing this result file; wait for it to finish, or "
                "write elsewhere with --results DIR"
            ) from None
        try:
            current = os.stat(lock).st_ino
        except FileNotFoundError:
            current = -1
        if current == os.fstat(handle).st_ino:
            return handle
        os.close(handle)  # the holder unlinked it as we locked: lock the new file instead


class UnreadableResults(ValueError):
    """A result file cannot be read or is not JSON; the message says why."""


def read_json(path: str | os.PathLike[str]) -> Any:
    """The parsed content of a result file (not yet validated)."""
    try:
        return json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as error:
        raise UnreadableResults(str(error)) from None


def write_results(path: str | os.PathLike[str], data: dict[str, Any]) -> None:
    """Replace ``path`` by ``data`` as strict JSON: a reader sees the old file or the new."""
    write_atomic(path, json.dumps(data, indent=1, allow_nan=False) + "\n")


def format_problem(data: Any) -> str | None:
    """Why parsed content is not a result file of this format, or None."""
    if not isinstance(data, dict):
        return "is not a JSON object"
    if data.get("format") != RESULTS_FORMAT:
        return f"has format {data.get('format')!r}, expected {RESULTS_FORMAT!r}"
    return None


def _is_int(v: object) -> TypeGuard[int]:
    """An int that is not a bool (JSON true/false are not counts)."""
    return isinstance(v, int) and not isinstance(v, bool)


def _is_num(v: object) -> TypeGuard[int | float]:
    """A finite int or float, not a bool."""
    return (_is_int(v) or isinstance(v, float)) and math.isfinite(v)


def _score_fields_problem(ep: dict[str, Any]) -> str | None:
    """Why the fields the score added after the first result files are missing or bad, or None."""
    for key in ("min_zone_clearance", "time_limit", "duration"):
        if key not in ep:
            return f"has no {key!r} (written before the score used it); re-run the controller"
    if not _is_num(ep["min_zone_clearance"]):
        return "has 'min_zone_clearance' that is not a finite number (m)"
    if not (_is_num(ep["time_limit"]) and ep["time_limit"] > 0):
        return "has 'time_limit' that is not a positive number (s)"
    if not (_is_num(ep["duration"]) and 0 <= ep["duration"] <= ep["time_limit"] + 1e-9):
        return "has 'duration' that is not a number in [0, time_limit] (s)"
    return None


def _team_fields_problem(ep: dict[str, Any]) -> str | None:
    """Why a team's fields (present only in records of P > 1 drones) are bad, or None. Records
    without them, every one-drone record and every file written before teams, are fine."""
    if "conflict_steps" in ep and not (
        _is_int(ep["conflict_steps"]) and 0 <= ep["conflict_steps"] <= ep["collision_steps"]
    ):
        return "has 'conflict_steps' that is not an integer in [0, collision_steps]"
    for key in ("drone_path_length", "drone_energy", "drone_closest_approach"):
        value = ep.get(key)
        if value is not None and not (
            isinstance(value, list) and value and all(_is_num(v) or v is None for v in value)
        ):
            return f"has {key!r} that is not a list of numbers (or null), one per drone"
    return None


def episode_problem(ep: Any) -> str | None:
    """Why an episode record cannot be scored, or None when it can."""
    if not isinstance(ep, dict):
        return "is not an object"
    if not isinstance(ep.get("family"), str):
        return "has no string 'family'"
    outcome = ep.get("outcome")
    if outcome not in OUTCOMES:
        return f"has outcome {outcome!r}; allowed: {', '.join(OUTCOMES)}"
    if not isinstance(ep.get("success"), bool) or ep["success"] != (outcome == "success"):
        return "has 'success' that is not a boolean matching its outcome"
    if outcome == "error":
        return None  # an error scores 0 whatever its other fields hold
    birds, breached = ep.get("birds"), ep.get("breached_birds")
    if not (_is_int(birds) and birds >= 1):
        return "has 'birds' that is not a positive integer"
    if not (_is_int(breached) and 0 <= breached <= birds):
        return "has 'breached_birds' that is not an integer in [0, birds]"
    if not (_is_int(ep.get("collision_steps")) and ep["collision_steps"] >= 0):
        return "has 'collision_steps' that is not a non-negative integer"
    problem = _score_fields_problem(ep) or _team_fields_problem(ep)
    if problem:
        return problem
    mlf = ep.get("min_largest_fraction")
    if not (_is_num(mlf) and 0.0 <= mlf <= 1.0):
        return "has 'min_largest_fraction' that is not a number in [0, 1]"
    t = ep.get("time_to_success")
    if outcome == "success" and not (_is_num(t) and 0 <= t <= ep["time_limit"]):
        return "is a success without a 'time_to_success' in [0, time_limit]"
    return None


def file_problem(data: Any, suite: str, expected_hash: str) -> str | None:
    """Why a parsed result file cannot be scored against ``suite`` as shipped, or None."""
    problem = format_problem(data)
    if problem is not None:
        return problem
    if data.get("suite") != suite:
        return f"is for suite {data.get('suite')!r}, not {suite!r}"
    if data.get("suite_hash") != expected_hash:
        return (
            f"has suite hash {data.get('suite_hash')!r} but suite {suite!r} as shipped has "
            f"{expected_hash!r}; re-run the controller on the current suite"
        )
    if not _is_int(data.get("suite_version")):
        return "has no integer 'suite_version'"
    if not isinstance(data.get("controller"), str) or not data["controller"]:
        return "has no controller name"
    if data.get("information_level") not in INFORMATION_LEVELS:
        return f"has 'information_level' that is not one of {', '.join(INFORMATION_LEVELS)}"
    episodes = data.get("episodes")
    if not isinstance(episodes, list) or not episodes:
        return "holds no episodes"
    for i, ep in enumerate(episodes):
        problem = episode_problem(ep)
        if problem:
            return f"episode {i} {problem}"
    return None

"""Checking a config file whole: every error of one file in one pass, each with its line.

The loaders stop at the first error: a run needs only one reason to refuse a file. A person fixing
the file wants them all. ``file_errors`` loads the parsed file again and again, each time without
the key the last error blamed (so that key takes its default), until the file loads or an error
names no key of this file; each message gets the line of its key where the text shows one.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Mapping
from pathlib import Path

from flockward.config.files import ConfigError, label, read_toml
from flockward.config.scenarios import (
    CONFIG_KINDS,
    flock_from,
    pursuer_from,
    scenario_from,
    sensor_from,
)
from flockward.config.schema import SECTIONS

__all__ = ["MAX_ERRORS", "file_errors", "key_line"]

MAX_ERRORS = 50  # a file with more problems than this is reported up to here
_HEADER = re.compile(r"^\s*\[\s*([A-Za-z0-9_.-]+)\s*\]\s*(#.*)?$")
_DRONE_HEADER = re.compile(r"^\s*\[\[\s*drones\s*\]\]\s*(#.*)?$")  # one drone of a team

_LOADERS: dict[str, Callable[[dict[str, object], Path], object]] = {
    "scenario": scenario_from,
    "flock": flock_from,
    "pursuer": pursuer_from,
    "sensor": sensor_from,
}


def _table_and_key(data: Mapping[str, object], dotted: str) -> tuple[str | None, str]:
    """The table (None: top level) and the key in it that a dotted error key points into."""
    first, _, rest = dotted.partition(".")
    if rest and first in SECTIONS and isinstance(data.get(first), dict):
        return first, rest.split(".")[0]
    return None, first


def _drop(data: dict[str, object], dotted: str) -> bool:
    """Remove the file's entry that ``dotted`` points into; False if the file has none."""
    parts = dotted.split(".")
    drones = data.get("drones")
    if len(parts) == 3 and parts[0] == "drones" and parts[1].isdigit() and isinstance(drones, list):
        own = drones[int(parts[1])] if int(parts[1]) < len(drones) else None
        if isinstance(own, dict) and parts[2] in own:
            del own[parts[2]]  # the drone's bad key only: its other keys are checked on
            return True
    table, key = _table_and_key(data, dotted)
    holder = data.get(table) if table else data
    if not isinstance(holder, dict) or key not in holder:
        return False
    del holder[key]
    return True


def key_line(text: str, table: str | None, key: str) -> int | None:
    """The 1-based line where ``key`` is set in ``[table]`` (None: before any table) of a TOML
    text, or None if no line sets it that plainly."""
    current: str | None = None
    setting = re.compile(rf"^\s*[\"']?{re.escape(key)}[\"']?\s*=")
    for number, line in enumerate(text.splitlines(), start=1):
        header = _HEADER.match(line)
        if header:
            current = header.group(1)
        elif current == table and setting.match(line):
            return number
    return None


def drone_key_line(text: str, index: int, key: str) -> int | None:
    """The 1-based line where ``key`` is set in the ``index``-th ``[[drones]]`` table of a TOML
    text, or None if no line sets it that plainly."""
    setting = re.compile(rf"^\s*[\"']?{re.escape(key)}[\"']?\s*=")
    seen = -1  # how many [[drones]] headers so far, minus one
    inside = False  # reading a [[drones]] table
    for number, line in enumerate(text.splitlines(), start=1):
        if _DRONE_HEADER.match(line):
            seen += 1
            inside = True
        elif line.lstrip().startswith("["):
            inside = False
        elif inside and seen == index and setting.match(line):
            return number
    return None


def _line_of(text: str, data: Mapping[str, object], dotted: str) -> int | None:
    """The line an error's dotted key points at: a drone's key, or a table's key."""
    parts = dotted.split(".")
    if len(parts) == 3 and parts[0] == "drones" and parts[1].isdigit():
        return drone_key_line(text, int(parts[1]), parts[2])
    return key_line(text, *_table_and_key(data, dotted))


def _with_line(error: ConfigError, shown: str, line: int | None) -> str:
    """The error's message with ``:LINE`` after the file name when the line is known."""
    message = str(error)
    if line is None or not message.startswith(f"{shown}: "):
        return message
    return f"{shown}:{line}: {message[len(shown) + 2 :]}"


def file_errors(path: Path, kind: str) -> list[str]:
    """Every problem of the config file at ``path`` read as ``kind`` (see CONFIG_KINDS), one
    line each; empty when the file is valid."""
    if kind not in CONFIG_KINDS:
        raise ValueError(f"kind {kind!r}: allowed {', '.join(CONFIG_KINDS)}")
    try:
        data = read_toml(path)
    except ConfigError as error:
        return [str(error)]
    shown = label(path)
    if not data:
        return [f"{shown}: defines nothing; a {kind} file needs keys"]
    text = path.read_text(encoding="utf-8")
    errors: list[str] = []
    while len(errors) < MAX_ERRORS:
        try:
            _LOADERS[kind](data, path)
            return errors
        except ConfigError as error:
            line = None
            if error.file == shown and error.key:
                line = _line_of(text, data, error.key)
            errors.append(_with_line(error, shown, line))
            if error.file != shown or not error.key or not _drop(data, error.key):
                return errors
    return errors

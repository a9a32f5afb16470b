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

__all__ = ["MAX_ERRORS", "array_table_line", "file_errors", "key_line"]

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


def array_table_line(text: str, name: str, index: int) -> int | None:
    """The 1-based line of the ``index``-th (from 1) ``[[name]]`` header of a TOML text, or None:
    where a key written as an array of tables (``[[site.protected]]``) has its index-th item."""
    header = re.compile(rf"^\s*\[\[\s*{re.escape(name)}\s*\]\]\s*(#.*)?$")
    seen = 0
    for number, line in enumerate(text.splitlines(), start=1):
        if header.match(line):
            seen += 1
            if seen == index:
                return number
    return None


def _error_line(text: str, data: Mapping[str, object], dotted: str) -> int | None:
    """The line an error's dotted key points at: where the key is set, or, for an item of an
    array of tables (key.N...), that item's header."""
    table, key = _table_and_key(data, dotted)
    line = key_line(text, table, key)
    parts = dotted.split(".")
    at = 2 if table else 1  # the part after the key
    if line is None and len(parts) > at and parts[at].isdigit():
        name = f"{table}.{key}" if table else key
        line = array_table_line(text, name, int(parts[at]))
    return line


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
    """The line an error's dotted key points at: a drone's key, or as `_error_line` finds it."""
    parts = dotted.split(".")
    if len(parts) == 3 and parts[0] == "drones" and parts[1].isdigit():
        return drone_key_line(text, int(parts[1]), parts[2])
    return _error_line(text, data, dotted)


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

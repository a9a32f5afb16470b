"""The config reference: every scenario key with its type, range, unit, default and meaning.

Generated, never written by hand: keys, ranges and defaults come from the parameter records
(``flockward.sim.types``); a key's meaning is the comment written beside its field there (the
comment lines just above it and any comment at the end of its line). ``flockward schema`` prints
it.
"""

from __future__ import annotations

import inspect
import io
import tokenize
from dataclasses import MISSING, fields
from typing import Any

from flockward.config.schema import FILE_SECTIONS, SECTION_FILE_KEY
from flockward.sim.limits import RECORD_SECTIONS, value_text
from flockward.sim.spec import spec_of
from flockward.sim.types import MAX_DRONES

__all__ = ["field_notes", "reference_rows", "reference_table"]


def field_notes(record: type) -> dict[str, str]:
    """Each field of a dataclass ``record`` mapped to the comment beside it in its source."""
    source = inspect.getsource(record)
    notes: dict[str, str] = {}
    pending: list[str] = []
    line_of_field: dict[int, str] = {}
    for number, line in enumerate(source.splitlines(), start=1):
        head = line.strip().split(":", 1)[0]
        if line.startswith("    ") and not line.startswith("     ") and head.isidentifier():
            line_of_field[number] = head
    comments: dict[int, tuple[str, bool]] = {}  # line -> (text, whole line)
    for token in tokenize.generate_tokens(io.StringIO(source).readline):
        if token.type == tokenize.COMMENT:
            whole = token.line.strip().startswith("#")
            comments[token.start[0]] = (token.string.lstrip("#").strip(), whole)
    for number in range(1, len(source.splitlines()) + 1):
        text, whole = comments.get(number, ("", False))
        if number in line_of_field:
            tail = [text] if text and not whole else []
            if pending or tail:
                notes[line_of_field[number]] = " ".join([*pending, *tail])
            pending = []
        elif whole and text:
            pending.append(text)
        elif not whole:
            pending = []
    return notes


def _default(f: Any) -> str:
    if f.default is not MISSING:
        return "none" if f.default is None else value_text(f.default)
    if f.default_factory is not MISSING:
        return value_text(f.default_factory())
    return "required"


def reference_rows() -> list[tuple[str, str, str, str]]:
    """(dotted key, allowed values, default, meaning) for every key a scenario may set."""
    rows = []
    for record, section in RECORD_SECTIONS.items():
        notes = field_notes(record)
        for f in fields(record):
            spec = spec_of(f)
            if spec is None:
                continue
            dotted = f"{section}.{f.name}" if section else f.name
            allowed = spec.allowed() + (" (optional)" if spec.optional else "")
            default = "the file's name without .toml" if dotted == "name" else _default(f)
            rows.append((dotted, allowed, default, notes.get(f.name, "")))
    for section, sub in FILE_SECTIONS.items():
        rows.append(
            (
                f"{section}.{SECTION_FILE_KEY}",
                f"a shipped {section} name (configs/{sub}/) or a path relative to the scenario",
                "none",
                f"load the [{section}] values from that file; keys beside it override them",
            )
        )
    rows.append(
        (
            "[[drones]]",
            f"1 to {MAX_DRONES} tables of pursuer keys (start, max_speed, max_accel, "
            "safety_radius)",
            "none: one drone, [pursuer]",
            "one table per drone, in index order; each drone takes the [pursuer] values (its "
            "file and keys), then its own",
        )
    )
    return rows


def reference_table(markdown: bool = True) -> str:
    """The reference as a Markdown table, or as plain text (one key per block)."""
    rows = reference_rows()
    if markdown:
        lines = ["| key | allowed | default | meaning |", "| --- | --- | --- | --- |"]
        lines += [f"| `{k}` | {a} | {d} | {m} |" for k, a, d, m in rows]
        return "\n".join(lines)
    blocks = []
    for key, allowed, default, meaning in rows:
        block = f"{key}\n  allowed: {allowed}\n  default: {default}"
        blocks.append(block + (f"\n  meaning: {meaning}" if meaning else ""))
    return "\n".join(blocks)

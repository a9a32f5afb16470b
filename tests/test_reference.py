"""The generated config reference (`flockward schema`)."""

from __future__ import annotations

from dataclasses import dataclass

import pytest

from flockward.config.reference import field_notes, reference_rows
from flockward.config.schema import FILE_SECTIONS, SCHEMA, SECTION_FILE_KEY
from flockward_baselines.cli import main


@dataclass(frozen=True)
class Example:
    """A record written like the parameter records."""

    # first line of a note
    # and its second line
    alpha: float = 1.0
    beta: int = 2  # a trailing note
    gamma: str = "x"

    # a note above delta, after a blank line
    delta: float = 0.5  # with a tail


def test_field_notes_read_the_comments_beside_each_field() -> None:
    assert field_notes(Example) == {
        "alpha": "first line of a note and its second line",
        "beta": "a trailing note",
        "delta": "a note above delta, after a blank line with a tail",
    }


def test_reference_lists_every_schema_key_once() -> None:
    keys = [row[0] for row in reference_rows()]
    expected = [f"{s}.{k}" if s else k for s, specs in SCHEMA.items() for k in specs]
    expected += [f"{s}.{SECTION_FILE_KEY}" for s in FILE_SECTIONS]
    expected += ["[[drones]]"]  # a team's drone tables, each of pursuer keys
    assert sorted(keys) == sorted(expected) and len(keys) == len(set(keys))


def test_schema_command_prints_defaults_and_meanings(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["schema"]) == 0
    text = capsys.readouterr().out
    block = text.split("episode.success_fraction\n", 1)[1].split("\n\\S", 1)[0]
    assert "default: 0.9" in block and "meaning: share of birds inside the goal" in block
    assert main(["schema", "--markdown"]) == 0
    table = capsys.readouterr().out.splitlines()
    assert table[0] == "| key | allowed | default | meaning |"
    assert any(
        line.startswith("| `flock.count` | must be an integer in [1, 5000]") for line in table
    )

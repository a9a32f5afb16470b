"""The README's code examples run as written (a user's first contact must not be broken)."""

from __future__ import annotations

import importlib.util
import re
from pathlib import Path
from types import ModuleType
from typing import Any

import pytest

README = Path(__file__).resolve().parents[1] / "README.md"
SCRIPT = README.parent / "scripts" / "readme_tables.py"


def _python_blocks(heading: str) -> list[str]:
    """The ```python blocks of the README section under ``heading``."""
    text = README.read_text(encoding="utf-8")
    match = re.search(rf"^## {re.escape(heading)}\n(.*?)(?=^## |\Z)", text, re.M | re.S)
    assert match is not None, f"README has no '## {heading}' section"
    return re.findall(r"```python\n(.*?)```", match.group(1), re.S)


def test_five_line_example_runs() -> None:
    blocks = _python_blocks("Five lines")
    assert len(blocks) == 1
    code = blocks[0]
    assert len(code.strip().splitlines()) == 5
    namespace: dict[str, object] = {}
    exec(compile(code, str(README), "exec"), namespace)
    obs = namespace["obs"]
    venv = namespace["venv"]
    assert obs.shape[0] == 64  # type: ignore[attr-defined]
    assert venv.observation_space.contains(obs)  # type: ignore[attr-defined]


@pytest.mark.parametrize("heading", ["Five lines"])
def test_examples_use_registered_ids(heading: str) -> None:
    import gymnasium as gym

    import flockward  # noqa: F401

    for block in _python_blocks(heading):
        for env_id in re.findall(r'"(flockward/[A-Za-z]+-v\d+)"', block):
            assert env_id in gym.registry


def _readme_tables() -> ModuleType:
    """scripts/readme_tables.py, the script that copies committed tables into the README."""
    spec = importlib.util.spec_from_file_location("readme_tables", SCRIPT)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


TABLES = _readme_tables()


@pytest.mark.parametrize("source", TABLES.SOURCES, ids=lambda s: f"{s.file}:{s.marker or s.header}")
def test_readme_tables_are_the_committed_ones(source: Any) -> None:
    # README figures come from committed results: each table is copied whole (or the rows of
    # some families), never typed.
    lines = README.read_text(encoding="utf-8").splitlines()
    start, stop = TABLES.readme_span(lines, source)
    assert lines[start:stop] == TABLES.committed_table(source)

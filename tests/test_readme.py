"""The README's code examples run as written (a user's first contact must not be broken)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

README = Path(__file__).resolve().parents[1] / "README.md"


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


def _table_rows(text: str, header: str) -> list[str]:
    """The rows of the first Markdown table whose header line starts with ``header``."""
    lines = text.splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith(header))
    rows = []
    for line in lines[start:]:
        if not line.startswith("|"):
            break
        rows.append(line)
    return rows


@pytest.mark.parametrize(
    ("committed", "header"),
    [
        ("results/standard/leaderboard.md", "| rank | controller"),
        ("results/verify/report.md", "| check | measured"),
        ("results/models/ppo-headon-curve.md", "| run | success target"),
    ],
)
def test_readme_tables_are_the_committed_ones(committed: str, header: str) -> None:
    # README figures come from committed results: each table is copied whole, never typed.
    source = README.parent / committed
    assert _table_rows(README.read_text(encoding="utf-8"), header) == _table_rows(
        source.read_text(encoding="utf-8"), header
    )

"""Copy the committed result tables into README.md, so its figures are never typed by hand.

Each README table named in ``SOURCES`` is replaced whole by its committed file's table (the
standard, field and ladder leaderboards, the verification report, the envelope's push bands and
approach angles, the headon, standard and ladder training seeds). A source may keep only the rows
of some families (the first column), and a README table may be found after a marker comment
instead of by its header, where one header is used twice. Run by `make results`, `make
headon-curve` and `make ladder-curve` after regenerating; tests/test_readme.py checks that the
two agree.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import NamedTuple

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"


class Source(NamedTuple):
    """One README table: where it comes from and how to find it."""

    file: str  # committed file, relative to the repository
    header: str  # start of the table's header line, in the file and the README
    families: tuple[str, ...] = ()  # keep only rows whose first cell is one of these (all: empty)
    marker: str = ""  # the README table is the first after this line (first by header: empty)


SOURCES = (
    Source("results/standard/leaderboard.md", "| rank | controller"),
    Source("results/verify/report.md", "| check | measured"),
    Source("results/sweeps/envelope-bands.md", "| sweep | where"),
    Source("results/sweeps/approach-angles.md", "| goal bearing (deg)"),
    Source("results/models/ppo-headon-curve.md", "| run | success target"),
    Source(
        "results/models/ppo-standard-curve.md",
        "| run | success target",
        (),
        "<!-- table: standard references' training -->",
    ),
    Source(
        "results/models/ppo-ladder-curve.md",
        "| run | success target",
        (),
        "<!-- table: ladder curriculum training -->",
    ),
    Source(
        "results/models/ppo-ladder-uniform-curve.md",
        "| run | success target",
        (),
        "<!-- table: ladder uniform training -->",
    ),
    Source(
        "results/models/sac-standard-curve.md",
        "| run | success target",
        (),
        "<!-- table: standard SAC references' training -->",
    ),
    Source(
        "results/models/sac-ladder-curve.md",
        "| run | success target",
        (),
        "<!-- table: ladder SAC training -->",
    ),
    Source(
        "results/ladder/leaderboard.md",
        "| rank | controller",
        (),
        "<!-- table: ladder leaderboard -->",
    ),
    Source(
        "results/ladder/leaderboard.md",
        "| family | controller",
        ("t3-oblique", "t5-murmuration"),
        "<!-- table: ladder, two families -->",
    ),
    Source(
        "results/field/leaderboard.md",
        "| family | controller",
        ("large-flock-one-drone", "large-flock-two-drones"),
        "<!-- table: field suite, one drone against two -->",
    ),
    Source(
        "results/field/leaderboard.md",
        "| family | controller",
        ("headon-radar", "headon-camera"),
        "<!-- table: field suite, sensing -->",
    ),
)


def table_span(lines: list[str], header: str, after: int = 0) -> tuple[int, int]:
    """[start, stop) of the first Markdown table at or after line ``after`` whose header line
    starts with ``header``."""
    start = next(
        (i for i in range(after, len(lines)) if lines[i].startswith(header)),
        None,
    )
    if start is None:
        raise SystemExit(f"no table starting with {header!r}")
    stop = start
    while stop < len(lines) and lines[stop].startswith("|"):
        stop += 1
    return start, stop


def committed_table(source: Source) -> list[str]:
    """The lines of ``source``'s table in its committed file, filtered to its families."""
    lines = (ROOT / source.file).read_text(encoding="utf-8").splitlines()
    a, b = table_span(lines, source.header)
    table = lines[a:b]
    if not source.families:
        return table
    keep = set(source.families)
    return table[:2] + [row for row in table[2:] if row.split("|")[1].strip() in keep]


def readme_span(lines: list[str], source: Source) -> tuple[int, int]:
    """[start, stop) of ``source``'s table in the README lines."""
    after = 0
    if source.marker:
        after = next((i for i, line in enumerate(lines) if line.strip() == source.marker), -1)
        if after < 0:
            raise SystemExit(f"README.md has no line {source.marker!r}")
    return table_span(lines, source.header, after)


def main() -> int:
    """Replace each table in README.md by its committed source; report what changed."""
    lines = README.read_text(encoding="utf-8").splitlines()
    for source in SOURCES:
        table = committed_table(source)
        start, stop = readme_span(lines, source)
        if lines[start:stop] != table:
            lines[start:stop] = table
            print(f"README.md: table from {source.file} updated")
    README.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())

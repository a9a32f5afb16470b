"""Copy the committed result tables into README.md, so its figures are never typed by hand.

Each README table whose header line matches one in a committed result file (the standard
leaderboard, the verification report, the headon training seeds) is replaced whole by that
file's table. Run by `make results` and `make headon-curve` after regenerating;
tests/test_readme.py checks that the two agree.
"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
SOURCES = (
    ("results/standard/leaderboard.md", "| rank | controller"),
    ("results/verify/report.md", "| check | measured"),
    ("results/models/ppo-headon-curve.md", "| run | success target"),
)


def table_span(lines: list[str], header: str) -> tuple[int, int]:
    """[start, stop) of the first Markdown table whose header line starts with ``header``."""
    start = next((i for i, line in enumerate(lines) if line.startswith(header)), None)
    if start is None:
        raise SystemExit(f"no table starting with {header!r}")
    stop = start
    while stop < len(lines) and lines[stop].startswith("|"):
        stop += 1
    return start, stop


def main() -> int:
    """Replace each table in README.md by its committed source; report what changed."""
    lines = README.read_text(encoding="utf-8").splitlines()
    for source, header in SOURCES:
        src = (ROOT / source).read_text(encoding="utf-8").splitlines()
        a, b = table_span(src, header)
        start, stop = table_span(lines, header)
        if lines[start:stop] != src[a:b]:
            lines[start:stop] = src[a:b]
            print(f"README.md: table from {source} updated")
    README.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())

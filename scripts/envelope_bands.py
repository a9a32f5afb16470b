"""The push band of each committed herding-envelope sweep, as one Markdown table.

For every value of a sweep's second axis (flock size, approach, cruise speed): the push distances
whose cells boundary-arc diverts, in metres and in the flock's dodge and alarm radii, and what
happens just closer and just farther. Written to results/sweeps/envelope-bands.md from the
committed sweep files only; `make results` runs it after the sweeps, and scripts/readme_tables.py
copies the table into README.md.
"""

from __future__ import annotations

import sys
from pathlib import Path

from flockward.bench.results import read_json
from flockward.bench.sweep import summarise
from flockward.bench.sweep_report import BAND_HEADER, band_rows
from flockward.config.scenarios import load_scenario

ROOT = Path(__file__).resolve().parents[1]
SWEEPS = ("envelope-push-count", "envelope-push-approach", "envelope-push-speed")
OUT = ROOT / "results" / "sweeps" / "envelope-bands.md"


def render() -> str:
    """The table of every committed envelope sweep, with a line saying how it was made."""
    lines = [
        "# Push bands of the herding envelope",
        "",
        "Boundary-arc on headon: per row, the push distances whose cell is 'diverted' (the "
        "majority outcome, its Wilson interval narrower than 0.5), in metres and in the flock's "
        "dodge and alarm radii, and the region just closer and just farther. From "
        + ", ".join(f"`results/sweeps/{name}.json`" for name in SWEEPS)
        + " (scripts/envelope_bands.py).",
        "",
        "| " + " | ".join(BAND_HEADER) + " |",
        "|" + "|".join("---" for _ in BAND_HEADER) + "|",
    ]
    for name in SWEEPS:
        data = read_json(ROOT / "results" / "sweeps" / f"{name}.json")
        flock = load_scenario(data["scenario"]).flock
        rows = band_rows(data, summarise(data), flock.dodge_radius, flock.alarm_radius)
        lines += ["| " + " | ".join(row) + " |" for row in rows]
    return "\n".join(lines) + "\n"


def main() -> int:
    """Write results/sweeps/envelope-bands.md."""
    OUT.write_text(render(), encoding="utf-8")
    print(f"-> {OUT.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())

"""What site.goal_bearing_deg does to boundary-arc's approach, measured in played episodes.

For each goal bearing of the approach envelope and two drone starts (the shipped one south of
the flock's route and its mirror north of it), plays boundary-arc (its default push) on headon
and reports, as medians over the seeds: the push direction at reset (from the flock's heading,
the controller's own formula), the angle at first contact between the flock's velocity and the
line from the drone to the flock's centroid (0: the drone comes from behind, 180: head-on), and
the same angle over every step with a bird inside the drone's alarm radius. Written to
results/sweeps/approach-angles.md; `make results` runs it, scripts/readme_tables.py copies the
table into README.md.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np

from flockward.bench.episode import play_episode
from flockward.config.scenarios import load_scenario
from flockward_baselines.controllers import make_controller

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "results" / "sweeps" / "approach-angles.md"
BEARINGS = (30.0, 60.0, 90.0, 120.0, 150.0, 180.0)
STARTS = ((-150.0, -100.0), (-150.0, 100.0))  # m: shipped (south of the route), mirrored north
SEEDS = range(5000, 5005)
HEADER = ("| goal bearing (deg) | drone start (m) | diverted | push at reset (deg) "
          "| first contact (deg) | in contact (deg) |")  # fmt: skip


def _angle(u: np.ndarray, v: np.ndarray) -> float:
    """Unsigned angle between two vectors, degrees in [0, 180]."""
    return abs(math.degrees(math.atan2(u[0] * v[1] - u[1] * v[0], float(u @ v))))


def _episode(bearing: float, start: tuple[float, float], seed: int) -> tuple[bool, float, float]:
    """(diverted, first-contact angle, median in-contact angle) of one episode (NaN: no contact)."""
    scenario = load_scenario("headon", {"site.goal_bearing_deg": bearing, "pursuer.start": start})
    record, frames = play_episode(scenario, make_controller("boundary-arc"), seed,
                                  record_frames=True)  # fmt: skip
    alarm = scenario.flock.alarm_radius
    angles = []
    for frame in frames:
        birds, drone = np.asarray(frame["bird_pos"]), np.asarray(frame["pursuer_pos"])[0]
        if float(np.min(np.hypot(*(birds - drone).T))) < alarm:
            heading = np.asarray(frame["bird_vel"]).mean(axis=0)
            angles.append(_angle(heading, birds.mean(axis=0) - drone))
    if not angles:
        return record.success, math.nan, math.nan
    return record.success, angles[0], float(np.median(angles))


def _push_at_reset(bearing: float) -> float:
    """Boundary-arc's push direction at the flock's start, from its heading (deg)."""
    scenario = load_scenario("headon", {"site.goal_bearing_deg": bearing})
    arc = make_controller("boundary-arc")
    arc.reset(scenario)
    heading = scenario.nominal_heading
    speed = scenario.flock.speed
    velocity = np.array([math.cos(heading), math.sin(heading)]) * speed
    push = arc.push_direction(np.asarray(scenario.site.flock_start), velocity)
    return _angle(velocity, push)


def render() -> str:
    """Play every episode and return the Markdown table."""
    lines = [
        "# Boundary-arc's approach against site.goal_bearing_deg",
        "",
        f"headon, seeds {SEEDS[0]}-{SEEDS[-1]}, boundary-arc's default push; angles are medians "
        "over the seeds, between the flock's velocity and the line from the drone to the "
        "flock's centroid (0: from behind, 180: head-on); contact: a bird inside the alarm "
        "radius (scripts/approach_angles.py).",
        "",
        HEADER,
        "|---|---|---|---|---|---|",
    ]
    for bearing in BEARINGS:
        push = _push_at_reset(bearing)
        for start in STARTS:
            runs = [_episode(bearing, start, seed) for seed in SEEDS]
            wins = sum(won for won, _, _ in runs)
            first = float(np.nanmedian([a for _, a, _ in runs]))
            during = float(np.nanmedian([a for _, _, a in runs]))
            lines.append(
                f"| {bearing:g} | ({start[0]:g}, {start[1]:g}) | {wins}/{len(runs)} "
                f"| {push:.0f} | {first:.0f} | {during:.0f} |"
            )
    return "\n".join(lines) + "\n"


def main() -> int:
    """Write results/sweeps/approach-angles.md."""
    OUT.write_text(render(), encoding="utf-8")
    print(f"-> {OUT.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())

"""A scenario in a few lines of text, for people (``flockward check``, ``flockward scenarios``)."""

from __future__ import annotations

from flockward.sim.limits import number_text, point_text, zone_text, zones_text
from flockward.sim.resets import RESET_DRAWS
from flockward.sim.types import Scenario

__all__ = ["describe"]


def describe(scenario: Scenario) -> str:
    """A short multi-line summary: birds, speeds, zones, time step and length."""
    n = number_text
    f, site, ep, rnd = scenario.flock, scenario.site, scenario.episode, scenario.randomise
    heading = "toward destination" if f.heading_deg is None else f"{n(f.heading_deg)} deg"
    lines = [
        f"{scenario.name}: {scenario.description}".rstrip(": "),
        f"  birds:     {f.count} {f.name} in a {f.formation} formation, "
        f"spacing {n(f.spacing)} m, heading {heading}",
        f"  speeds:    start {n(f.speed)}, cruise {n(f.cruise_speed)}, "
        f"range {n(f.min_speed)}-{n(f.max_speed)} m/s; noise {n(f.noise_std)} "
        f"{'rad/s^0.5 (heading)' if f.noise_model == 'heading' else 'm/s^1.5 (acceleration)'}",
        f"  source:    {f.source}",
        f"  protected: {zones_text(site.protected)}",
        f"  goal:      {zone_text(site.goal)}",
        f"  route:     {point_text(site.flock_start)} -> {point_text(site.destination)} m",
        *(
            [
                f"  second:    {round(100 * site.second_share, 6):g} % of the birds start as a "
                f"second group at {point_text(site.second_start)} m"
            ]
            if site.second_start is not None
            else []
        ),
        *(
            f"  {'pursuer:  ' if not scenario.drones else f'drone {k}:  '} "
            f"start {point_text(d.start)} m, max {n(d.max_speed)} m/s, {n(d.max_accel)} m/s^2"
            for k, d in enumerate(scenario.fleet)
        ),
        f"  episode:   dt {n(ep.dt)} s x {ep.max_steps} steps = {n(ep.dt * ep.max_steps)} s",
        f"  decisions: every {ep.decision_steps} steps = {round(ep.decision_period, 6):g} s",
    ]
    drawn = [
        f"{name} {n(span[0])}..{n(span[1])}"
        for name in RESET_DRAWS
        if (span := getattr(rnd, name)) is not None
    ]
    if drawn:
        lines.append(f"  randomise: {', '.join(drawn)}")
    wind = scenario.wind
    if not wind.calm:
        lines.append(
            f"  wind:      {n(wind.speed)} m/s from {n(wind.from_deg)} deg, "
            f"turbulence {wind.turbulence} at {n(wind.altitude)} m"
        )
    sensor = scenario.sensor
    if not sensor.perfect:
        reach = "unlimited" if sensor.detection_range is None else f"{n(sensor.detection_range)} m"
        where = (
            "on drone 0"
            if sensor.position == "onboard"
            else f"at {point_text(sensor.ground_position)} m"
        )
        lines.append(
            f"  sensor:    {sensor.name} {where}, reach {reach}, errors "
            f"{n(sensor.range_noise)} m and {n(sensor.bearing_noise_deg)} deg, "
            f"update every {n(sensor.update_period)} s"
        )
    return "\n".join(lines)

"""The ``flockward`` command line: one subcommand per ``_cmd_NAME`` function.

To add a subcommand, write ``_cmd_NAME(args) -> int`` and register its parser in
:func:`build_parser`; ``main`` dispatches on ``args.handler``.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

from flockward.scenarios import ConfigError, config_kind, load_flock, load_scenario
from flockward.types import Randomisation

CAUTION = (
    "Caution: flockward is a simulation for research and teaching. Its controllers are not "
    "flight-certified and must not be flown as they are. Flying drones near an airfield and "
    "hazing birds, many of which are legally protected, need authorisations; defer to local "
    "regulations, the airfield's wildlife hazard management plan and licensed wildlife-control "
    "practitioners."
)

EXIT_OK = 0
EXIT_INVALID = 2  # a config is invalid (argparse also uses 2 for a bad command line)


def _summary(path: Path) -> str:
    """Validate one scenario or flock file and return a one-line summary of it."""
    if config_kind(path) == "scenario":
        s = load_scenario(path)
        f, rnd = s.flock, s.randomise
        birds = f"{rnd.count[0]}-{rnd.count[1]}" if rnd.count else str(f.count)
        drawn = ", randomised" if rnd != Randomisation() else ""
        zone = type(s.site.protected).__name__.lower()
        return (
            f"scenario '{s.name}': {birds} {f.name} ({f.formation}{drawn}), {zone} zone, "
            f"{s.episode.max_steps} steps of {s.episode.dt:g} s"
        )
    f = load_flock(path)
    return (
        f"flock '{f.name}': {f.count} birds ({f.formation}), cruise {f.cruise_speed:g} m/s "
        f"in [{f.min_speed:g}, {f.max_speed:g}]"
    )


def _cmd_check(args: argparse.Namespace) -> int:
    """Validate scenario and flock files; print one line per file."""
    status = EXIT_OK
    for name in args.files:
        try:
            line = _summary(Path(name))
        except (ConfigError, OSError) as exc:
            message = str(exc) if isinstance(exc, ConfigError) else f"{name}: {exc}"
            print(" ".join(message.split()), file=sys.stderr)
            status = EXIT_INVALID
            continue
        if not args.quiet:
            print(f"ok  {name}  ({line})")
    return status


def _cmd_bench(args: argparse.Namespace) -> int:
    """Print simulator, environment and PPO throughput with ratios, all measured in one run."""
    from flockward_baselines.bench import run_bench

    run_bench(quick=args.quick)
    return EXIT_OK


def _play(scenario_name: str, controller_name: str, seed: int, frames: bool):
    from flockward.episode import play_episode
    from flockward_baselines.controllers import make_controller

    scenario = load_scenario(scenario_name)
    return scenario, *play_episode(scenario, make_controller(controller_name), seed, frames)


def _cmd_show(args: argparse.Namespace) -> int:
    """Render one episode as a GIF animation or a PNG still."""
    from flockward.render import episode_animation, episode_still

    out = Path(args.out)
    if out.suffix.lower() not in (".gif", ".png"):
        print(f"--out {out}: must end in .gif (animation) or .png (still)", file=sys.stderr)
        return EXIT_INVALID
    try:
        scenario, record, frames = _play(args.scenario, args.controller, args.seed, True)
    except (ConfigError, ValueError) as exc:
        print(" ".join(str(exc).split()), file=sys.stderr)
        return EXIT_INVALID
    out.parent.mkdir(parents=True, exist_ok=True)
    if out.suffix.lower() == ".gif":
        episode_animation(scenario, frames, out)
    else:
        episode_still(scenario, frames, out)
    print(
        f"{args.controller} on {scenario.name}, seed {args.seed}: {record.outcome} after "
        f"{record.steps} steps, {record.breached_birds} birds breached, "
        f"{record.peak_components} fragment(s) at most -> {out}"
    )
    return EXIT_OK


def _cmd_demo(args: argparse.Namespace) -> int:
    """The main job on the shipped defaults: every scripted baseline on the shipped scenarios."""
    from flockward.scenarios import list_scenarios
    from flockward_baselines.controllers import BUILTIN

    print(CAUTION, "\n")
    names = [n for n in list_scenarios() if n != "murmuration"]
    print(
        f"{'controller':<16}{'scenario':<18}{'outcome':<10}{'steps':>6}{'breached':>10}"
        f"{'fragments':>11}"
    )
    for controller in BUILTIN:
        for name in names:
            _, record, _ = _play(name, controller, 0, False)
            print(
                f"{controller:<16}{name:<18}{record.outcome:<10}{record.steps:>6}"
                f"{record.breached_birds:>10}{record.peak_components:>11}"
            )
    ns = argparse.Namespace(scenario="headon", controller="boundary-arc", seed=0, out=args.gif)
    return _cmd_show(ns)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand registered."""
    parser = argparse.ArgumentParser(
        prog="flockward",
        description="Benchmark for drone controllers that herd bird flocks away from airfields.",
        epilog=CAUTION,
    )
    sub = parser.add_subparsers(title="commands", metavar="COMMAND", required=True)

    check = sub.add_parser(
        "check",
        help="validate scenario and flock files",
        description="Validate scenario and flock TOML files (the kind is detected from the "
        "content). Exit status 0 if all are valid, 2 if any is not.",
        epilog=CAUTION,
    )
    check.add_argument("files", nargs="+", metavar="FILE", help="scenario or flock TOML file")
    check.add_argument("-q", "--quiet", action="store_true", help="print only the errors")
    check.set_defaults(handler=_cmd_check)

    bench = sub.add_parser(
        "bench",
        help="measure simulator and environment throughput",
        description="Simulator bird-steps/s, environment world-steps/s and PPO steps/s, with "
        "ratios between figures of the same run (medians of repeats).",
    )
    bench.add_argument("--quick", action="store_true", help="fewer repeats, no PPO (seconds)")
    bench.set_defaults(handler=_cmd_bench)

    show = sub.add_parser(
        "show",
        help="render one episode as a GIF or PNG",
        description="Play one episode and write an animation (.gif) or a still (.png).",
        epilog=CAUTION,
    )
    show.add_argument("--scenario", default="headon", help="shipped scenario name or TOML path")
    show.add_argument("--controller", default="boundary-arc", help="controller name or module:Name")
    show.add_argument("--seed", type=int, default=0, help="episode seed")
    show.add_argument("--out", default="episode.gif", help="output file, .gif or .png")
    show.set_defaults(handler=_cmd_show)

    demo = sub.add_parser(
        "demo",
        help="run the shipped demo",
        description="Run every scripted baseline on the shipped scenarios and draw boundary-arc "
        "on the head-on scenario.",
        epilog=CAUTION,
    )
    demo.add_argument("--gif", default="episode.gif", help="where to write the animation")
    demo.set_defaults(handler=_cmd_demo)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``flockward`` console script; returns the exit status."""
    args = build_parser().parse_args(argv)
    return int(args.handler(args))


if __name__ == "__main__":
    raise SystemExit(main())

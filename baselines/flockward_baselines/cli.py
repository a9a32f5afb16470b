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
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``flockward`` console script; returns the exit status."""
    args = build_parser().parse_args(argv)
    return int(args.handler(args))


if __name__ == "__main__":
    raise SystemExit(main())

"""The ``flockward`` command line: one subcommand per ``_cmd_NAME`` function.

To add a subcommand, write ``_cmd_NAME(args) -> int`` and register its parser in
:func:`build_parser`; ``main`` dispatches on ``args.handler``.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any

from flockward.config.scenarios import (
    ConfigError,
    config_kind,
    load_flock,
    load_pursuer,
    load_scenario,
)
from flockward.sim.types import Randomisation, Scenario

if TYPE_CHECKING:
    from flockward.bench.episode import EpisodeRecord
    from flockward.bench.evaluation import Backend
    from flockward.controller import Controller

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
    """Validate one scenario, flock or pursuer file and return a one-line summary of it."""
    kind = config_kind(path)
    if kind == "pursuer":
        p = load_pursuer(path)
        return (
            f"pursuer '{path.stem}': max speed {p.max_speed:g} m/s, max accel {p.max_accel:g} m/s^2"
        )
    if kind == "scenario":
        s = load_scenario(path)
        f, rnd = s.flock, s.randomise
        birds = f"{rnd.count[0]}-{rnd.count[1]}" if rnd.count else str(f.count)
        drawn = ", randomised" if rnd != Randomisation() else ""
        zone = type(s.site.protected).__name__.lower()
        return (
            f"scenario '{s.name}': {birds} {f.name} ({f.formation}{drawn}), {zone} zone, "
            f"{s.episode.max_steps} steps of {s.episode.dt:g} s, a decision every "
            f"{s.episode.decision_steps} ({round(s.episode.decision_period, 6):g} s)"
        )
    f = load_flock(path)
    return (
        f"flock '{f.name}': {f.count} birds ({f.formation}), cruise {f.cruise_speed:g} m/s "
        f"in [{f.min_speed:g}, {f.max_speed:g}]"
    )


def _cmd_check(args: argparse.Namespace) -> int:
    """Validate scenario, flock and pursuer files; print one line per file."""
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


def _play(
    scenario_name: str, controller_name: str, seed: int, frames: bool
) -> tuple[Scenario, EpisodeRecord, list[dict[str, Any]]]:
    """One episode of a built-in or imported controller: the scenario, its record and frames."""
    from flockward.bench.episode import play_episode
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
    """The main job on the shipped defaults: the smoke suite for every scripted baseline, the
    leaderboard, and an animation of boundary-arc on the head-on scenario."""
    from functools import partial

    from flockward.bench.evaluation import run_suite
    from flockward.bench.leaderboard import build_leaderboard
    from flockward.bench.suites import load_suite
    from flockward_baselines.controllers import BUILTIN, make_controller

    print(CAUTION, "\n")
    suite = load_suite("smoke")
    for name in BUILTIN:
        run_suite(suite, partial(make_controller, name), name, args.results, progress=False)
        print(_run_summary(Path(args.results) / suite.name / f"{name}.json", len(suite.episodes())))
    board = build_leaderboard(args.results, suite.name)
    print()
    print(board.render("markdown"), end="")
    board.write(args.results)
    ns = argparse.Namespace(scenario="headon", controller="boundary-arc", seed=0, out=args.gif)
    return _cmd_show(ns)


def _cmd_board(args: argparse.Namespace) -> int:
    """Score a suite's result files; print the table, write leaderboard.md and leaderboard.png."""
    from flockward.bench.leaderboard import LeaderboardError, build_leaderboard

    try:
        board = build_leaderboard(args.results, args.suite)
    except LeaderboardError as exc:
        print(exc, file=sys.stderr)
        return EXIT_INVALID
    print(board.render(args.format), end="")
    md, png = board.write(args.results)
    print(f"wrote {md} and {png}", file=sys.stderr)
    return EXIT_OK


def _controller_param(item: str) -> tuple[str, object]:
    """'KEY=VALUE' from --param; VALUE read as a TOML value (numbers, true/false), else a string."""
    from flockward.config.scenarios import parse_override

    try:
        key, value = parse_override(item)
    except ConfigError:
        key, value = "", None
    if not key.isidentifier():
        raise ValueError(f"--param {item!r}: expected KEY=VALUE, e.g. --param push_fraction=0.4")
    return key, value


def _run_summary(path: Path, total: int) -> str:
    """One line: episodes played, success and breach-free rates, errors, the file."""
    from flockward.bench.evaluation import read_results

    data = read_results(path)
    rows = data["episodes"]
    n = len(rows)

    def rate(k: int) -> str:
        return f"{k / n:.1%}" if n else "n/a"

    success = sum(1 for r in rows if r["success"])
    clean = sum(1 for r in rows if r["outcome"] != "error" and r["breached_birds"] == 0)
    errors = sum(1 for r in rows if r["outcome"] == "error")
    rest = f" ({total - n} left: rerun to continue)" if n < total else ""
    return (
        f"{data['controller']} on {data['suite']} v{data['suite_version']}: {n}/{total} episodes"
        f"{rest}, success {rate(success)}, breach-free {rate(clean)}, {errors} error(s) -> {path}"
    )


@contextmanager
def _backend(args: argparse.Namespace) -> Iterator[tuple[int, Backend | None]]:
    """(workers, backend) for run_suite: local processes, or Ray tasks with --ray."""
    if args.ray is None:
        yield (1 if args.workers is None else args.workers), None
        return
    from flockward.bench.ray_backend import import_ray, ray_session

    import_ray("--ray")
    if args.ray and args.workers is not None:
        raise ValueError(
            f"--workers applies to a local Ray instance only; the CPUs of the cluster at "
            f"{args.ray} are set by `ray start --num-cpus` on its nodes: drop --workers"
        )
    if args.workers is not None and args.workers < 1:
        raise ValueError(f"workers = {args.workers}: must be an integer >= 1")
    with ray_session(args.ray, args.workers) as backend:
        yield 1, backend


def _cmd_run(args: argparse.Namespace) -> int:
    """Play a suite with one controller or saved model; write or resume its result file."""
    from functools import partial

    from flockward.bench.evaluation import controller_slug, run_suite
    from flockward.bench.suites import load_suite

    try:
        suite = load_suite(args.suite)
        params: dict[str, Any] = dict(_controller_param(item) for item in args.param)
        factory: Callable[[], Controller]
        if (args.controller is None) == (args.model is None):
            raise ValueError("give exactly one of --controller NAME and --model FILE.zip")
        if args.model is not None:
            from flockward_baselines.policy import PolicyController

            name = f"model-{Path(args.model).stem}"
            factory = partial(PolicyController, args.model, **params)
            PolicyController(args.model, **params)  # fail here, not in a worker
        else:
            from flockward_baselines.controllers import make_controller

            name = args.controller
            factory = partial(make_controller, args.controller, **params)
        env_options = {
            key: getattr(args, key)
            for key in ("observation", "reward", "decision_steps")
            if getattr(args, key)
        }
        with _backend(args) as (workers, backend):
            path = run_suite(
                suite,
                factory,
                name,
                args.results,
                workers=workers,
                limit=args.limit,
                slug=controller_slug(name),
                backend=backend,
                env_options=env_options,
            )
    except KeyboardInterrupt:
        print("interrupted: finished episodes are saved; rerun the command to resume",
              file=sys.stderr)  # fmt: skip
        return 130
    except (ConfigError, ValueError, ImportError, TypeError, OSError) as exc:
        print(" ".join(str(exc).split()), file=sys.stderr)
        return EXIT_INVALID
    except RuntimeError as exc:  # a worker process died; the finished episodes are saved
        print(f"run stopped: {' '.join(str(exc).split())}; rerun to resume", file=sys.stderr)
        return 1
    print(_run_summary(path, len(suite.episodes())))
    return EXIT_OK


def _cmd_train(args: argparse.Namespace) -> int:
    """Train an SB3 policy from a TOML config; --resume continues from the last checkpoint."""
    from flockward_baselines.train import load_train_config, train

    try:
        config = load_train_config(args.config)
        out = Path(args.out) if args.out else Path("runs") / config.name
        final = train(config, out, resume=args.resume, progress=not args.quiet)
    except (ConfigError, ValueError) as exc:
        print(" ".join(str(exc).split()), file=sys.stderr)
        return EXIT_INVALID
    print(f"model written to {final}; curve and logs in {final.parent}")
    return EXIT_OK


EXIT_CHECK_FAILED = 1  # flockward verify: at least one check failed


def _cmd_verify(args: argparse.Namespace) -> int:
    """Run the model's published checks; print one row per check; write the Markdown report."""
    from flockward.bench.verify import VerifySettings, all_hold, registry, run_checks, table_rows
    from flockward.bench.verify_report import HEADER, summary, text_row, write_report
    from flockward_baselines.controllers import make_controller

    checks = registry()
    unknown = [name for name in args.check if name not in checks]
    if unknown:
        print(f"--check {', '.join(unknown)}: unknown; allowed: {', '.join(checks)}",
              file=sys.stderr)  # fmt: skip
        return EXIT_INVALID
    settings = VerifySettings(quick=args.quick, make_controller=make_controller)
    # Column widths fixed up front (check names, short values), so each row prints when its
    # check finishes.
    widths = [max(len(HEADER[0]), *map(len, checks)), 10, 48, 6]
    print(text_row(HEADER, widths), flush=True)
    results = run_checks(
        settings,
        args.check or None,
        checks,
        on_result=lambda result: print(text_row(table_rows([result])[0], widths), flush=True),
    )
    path = write_report(results, args.out, args.quick)
    print(f"{summary(results)}; report written to {path}")
    return EXIT_OK if all_hold(results) else EXIT_CHECK_FAILED


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
        help="validate scenario, flock and pursuer files",
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
        description="Play the smoke suite with every scripted baseline, print its leaderboard "
        "and draw boundary-arc on the head-on scenario.",
        epilog=CAUTION,
    )
    demo.add_argument("--gif", default="episode.gif", help="where to write the animation")
    demo.add_argument(
        "--results", default="runs/demo", help="where the smoke-suite result files go"
    )
    demo.set_defaults(handler=_cmd_demo)

    run = sub.add_parser(
        "run",
        help="score a controller on a benchmark suite",
        description="Play every episode of a suite with one controller and write "
        "RESULTS/SUITE/CONTROLLER.json. Rerunning resumes: finished episodes are kept and only "
        "the missing ones are played; a file from another suite version or other controller "
        "parameters is refused, never overwritten.",
        epilog=CAUTION,
    )
    run.add_argument("--suite", default="standard", help="shipped suite name or TOML path")
    run.add_argument(
        "--controller", help="built-in controller name or an import path package.module:Name"
    )
    run.add_argument("--model", help="a Stable-Baselines3 model .zip (observation only)")
    run.add_argument("--results", default="results", help="results directory (default results/)")
    run.add_argument(
        "--workers",
        type=int,
        help="worker processes (default 1); with --ray and no ADDRESS, the CPUs of the local "
        "Ray instance (default all cores)",
    )
    run.add_argument(
        "--ray",
        nargs="?",
        const="",
        metavar="ADDRESS",
        help="play the episodes as Ray tasks: on a new local Ray instance, or on the running "
        "cluster at ADDRESS (HEAD:6379); results are written on this machine (needs the ray extra)",
    )
    run.add_argument(
        "--param",
        action="append",
        default=[],
        metavar="KEY=VALUE",
        help="controller constructor argument; numbers and true/false are parsed (repeatable)",
    )
    run.add_argument(
        "--limit", type=int, help="stop after this many new episodes (a rerun continues)"
    )
    run.add_argument(
        "--observation",
        help="observation of the episodes: vector (default), dict, or package.module:Name",
    )
    run.add_argument(
        "--reward", help="reward of the episodes: herding (default) or package.module:Name"
    )
    run.add_argument(
        "--decision-steps",
        type=int,
        help="control steps each action is held (default: each scenario's episode.decision_steps)",
    )
    run.set_defaults(handler=_cmd_run)

    board = sub.add_parser(
        "board",
        help="score a suite's result files into a leaderboard",
        description="Score every result file of a suite (episode score IQM with a 95 % "
        "stratified bootstrap CI), print the table and write <results>/<suite>/leaderboard.md "
        "and leaderboard.png. Files run on another version of the suite are skipped.",
    )
    board.add_argument("--suite", default="standard", help="shipped suite name")
    board.add_argument("--results", default="results", help="results directory")
    board.add_argument(
        "--format", choices=("markdown", "csv", "json"), default="markdown", help="table format"
    )
    board.set_defaults(handler=_cmd_board)

    train = sub.add_parser(
        "train",
        help="train a Stable-Baselines3 policy from a config",
        description="Train PPO or SAC on the native batched environment from a TOML config "
        "(configs/train/). Writes logs, checkpoints, model.zip and training_curve.png.",
        epilog=CAUTION,
    )
    train.add_argument("--config", required=True, help="training config TOML")
    train.add_argument("--out", help="run directory (default runs/<config name>)")
    train.add_argument("--resume", action="store_true", help="continue from the last checkpoint")
    train.add_argument("--quiet", action="store_true", help="no progress bar")
    train.set_defaults(handler=_cmd_train)
    verify = sub.add_parser(
        "verify",
        help="check the simulator against published results and the field's claims",
        description="Run the published checks (order parameter, alignment invariants, integrator "
        "order, step convergence, overlap, the field's herding claims), print one row per check "
        "with the measured value, its bound and the bound's source, and write a Markdown report "
        "with figures. Exit status 0 only when no check fails, 1 otherwise.",
    )
    verify.add_argument(
        "--quick", action="store_true", help="fewer seeds and shorter runs (CI, a few minutes)"
    )
    verify.add_argument(
        "--out", default="results/verify", help="report directory (default results/verify)"
    )
    verify.add_argument(
        "--check",
        action="append",
        default=[],
        metavar="NAME",
        help="run only this check (repeatable)",
    )
    verify.set_defaults(handler=_cmd_verify)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``flockward`` console script; returns the exit status."""
    args = build_parser().parse_args(argv)
    return int(args.handler(args))


if __name__ == "__main__":
    raise SystemExit(main())

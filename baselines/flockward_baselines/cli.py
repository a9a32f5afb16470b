"""The ``flockward`` command line: one subcommand per ``_cmd_NAME`` function.

To add a subcommand, write ``_cmd_NAME(args) -> int`` and register its parser in
:func:`build_parser`; ``main`` dispatches on ``args.handler``.
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import sys
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager, redirect_stdout
from pathlib import Path
from typing import TYPE_CHECKING, Any

from flockward.config.atomic import write_atomic
from flockward.config.checking import file_errors
from flockward.config.files import read_toml
from flockward.config.scenarios import (
    CONFIG_KINDS,
    ConfigError,
    config_kind,
    load_flock,
    load_pursuer,
    load_scenario,
    load_sensor,
)
from flockward.sim.types import Randomisation, Scenario

if TYPE_CHECKING:
    from flockward.bench.evaluation import Backend
    from flockward.controller import Controller

CAUTION = (
    "Caution: flockward is a simulation for research and teaching. Its controllers are not "
    "flight-certified and must not be flown as they are. Flying drones near an airfield and "
    "hazing birds, many of which are legally protected, need authorisations; defer to local "
    "regulations, the airfield's wildlife hazard management plan and licensed wildlife-control "
    "practitioners."
)

SMOKE_NOTE = (
    "This is the smoke suite: 8 shortened episodes that check every controller runs end to "
    "end. Its scores say nothing about a controller's quality; for that see the standard "
    "suite's leaderboard (results/standard/leaderboard.md, or `flockward board --suite "
    "standard`)."
)
SMOKE_CHART_NOTE = "smoke suite: checks that controllers run; says nothing about quality"

EXIT_OK = 0
EXIT_INVALID = 2  # a config is invalid (argparse also uses 2 for a bad command line)
EXIT_BROKEN_PIPE = 141  # the reader of stdout closed it (128 + SIGPIPE, as shells report)
EXIT_EPISODE_ERRORS = 3  # flockward run: at least one episode ended in a controller error


def _summary(path: Path, kind: str) -> str:
    """A one-line summary of a valid scenario, flock or pursuer file."""
    if kind == "pursuer":
        p = load_pursuer(path)
        return (
            f"pursuer '{path.stem}': max speed {p.max_speed:g} m/s, max accel {p.max_accel:g} m/s^2"
        )
    if kind == "sensor":
        c = load_sensor(path)
        reach = "unlimited" if c.detection_range is None else f"{c.detection_range:g} m"
        return (
            f"sensor '{c.name}': {c.position}, range {reach}, noise {c.range_noise:g} m and "
            f"{c.bearing_noise_deg:g} deg, update every {c.update_period:g} s"
        )
    if kind == "scenario":
        s = load_scenario(path)
        f, rnd = s.flock, s.randomise
        birds = f"{rnd.count[0]}-{rnd.count[1]}" if rnd.count else str(f.count)
        drawn = ", randomised" if rnd != Randomisation() else ""
        kinds = [type(z).__name__.lower() for z in s.site.protected_zones]
        zone = f"{kinds[0]} zone" if len(kinds) == 1 else f"{len(kinds)} zones ({', '.join(kinds)})"
        return (
            f"scenario '{s.name}': {birds} {f.name} ({f.formation}{drawn}), {zone}, "
            f"{s.episode.max_steps} steps of {s.episode.dt:g} s, a decision every "
            f"{s.episode.decision_steps} ({round(s.episode.decision_period, 6):g} s)"
        )
    f = load_flock(path)
    return (
        f"flock '{f.name}': {f.count} birds ({f.formation}), cruise {f.cruise_speed:g} m/s "
        f"in [{f.min_speed:g}, {f.max_speed:g}]"
    )


def _cmd_check(args: argparse.Namespace) -> int:
    """Validate scenario, flock and pursuer files: every error of each file, one line each."""
    status = EXIT_OK
    for name in args.files:
        path = Path(name)
        try:
            kind = args.kind or _suite_or_config_kind(path)
            if kind == "suite":
                errors, line = [], _suite_summary(path)
            else:
                errors = file_errors(path, kind)
                line = "" if errors else _summary(path, kind)
        except (ConfigError, OSError) as exc:
            errors = [str(exc) if isinstance(exc, ConfigError) else f"{name}: {exc}"]
        if errors:
            for message in errors:
                print(" ".join(message.split()), file=sys.stderr)
            status = EXIT_INVALID
        elif not args.quiet:
            print(f"ok  {name}  ({line})")
    return status


def _suite_or_config_kind(path: Path) -> str:
    """'suite' for a file under a suites/ directory or one listing [[entry]] tables, else what
    ``config_kind`` says."""
    if path.resolve().parent.name == "suites":
        return "suite"
    kind = config_kind(path)  # reads the file: a missing or empty one is its error
    return "suite" if "entry" in read_toml(path) else kind


def _suite_summary(path: Path) -> str:
    """A suite validated as `flockward run` loads it (every entry's scenario and overrides), in
    one line; a bad suite raises the loader's one-line ConfigError."""
    from flockward.bench.suites import load_suite

    suite = load_suite(path)
    episodes = sum(entry.count for entry in suite.entries)
    return (
        f"suite {suite.name!r} version {suite.version}: {len(suite.entries)} families, "
        f"{episodes} episodes"
    )


def _cmd_schema(args: argparse.Namespace) -> int:
    """Print every scenario key with what it allows, its default and its meaning."""
    from flockward.config.reference import reference_table

    print(reference_table(markdown=args.markdown))
    return EXIT_OK


def _cmd_bench(args: argparse.Namespace) -> int:
    """Print simulator, environment and PPO throughput with ratios, all measured in one run."""
    from flockward_baselines.bench import run_bench, to_json

    if args.json:
        print(to_json(run_bench(quick=args.quick, emit=lambda line: None)))
    else:
        run_bench(quick=args.quick)
    return EXIT_OK


def _show_source(args: argparse.Namespace) -> tuple[Scenario, Controller, str]:
    """The scenario, controller and its label that ``flockward show`` plays: a scenario by
    name or path, or the exact episode of a suite's family; a controller or a saved model."""
    params: dict[str, Any] = dict(_controller_param(item) for item in args.param)
    if args.model is not None:
        from flockward_baselines.policy import PolicyController

        controller: Controller = PolicyController(args.model, **params)
        name = f"model-{Path(args.model).stem}"
    else:
        from flockward_baselines.controllers import make_controller

        name = args.controller
        controller = make_controller(args.controller, **params)
    if args.suite is None:
        if args.family is not None:
            raise ValueError("--family needs --suite (the suite the family belongs to)")
        return load_scenario(args.scenario), controller, name
    from flockward.bench.suites import load_suite

    suite = load_suite(args.suite)
    families = sorted({entry.family for entry in suite.entries})
    for entry in suite.entries:
        if entry.family == args.family and entry.seeds[0] <= args.seed <= entry.seeds[1]:
            return entry.scenario, controller, name
    raise ValueError(
        f"--suite {args.suite} --family {args.family} --seed {args.seed}: no such episode; "
        f"families: {', '.join(families)} (each with its seed range)"
    )


def _cmd_show(args: argparse.Namespace) -> int:
    """Render one episode as a GIF animation or a PNG still."""
    from flockward.bench.episode import play_episode
    from flockward.render import episode_animation, episode_still

    out = Path(args.out)
    if out.suffix.lower() not in (".gif", ".png", ".svg", ".pdf"):
        print(f"--out {out}: must end in .gif (animation) or .png, .svg or .pdf (still)",
              file=sys.stderr)  # fmt: skip
        return EXIT_INVALID
    if args.controller is not None and args.model is not None:
        print("give one of --controller NAME and --model FILE.zip, not both", file=sys.stderr)
        return EXIT_INVALID
    if args.model is None and args.controller is None:
        args.controller = "boundary-arc"
    try:
        scenario, controller, name = _show_source(args)
        record, frames = play_episode(scenario, controller, args.seed, True)
    except (ConfigError, ValueError, ImportError, TypeError) as exc:
        print(" ".join(str(exc).split()), file=sys.stderr)
        return EXIT_INVALID
    out.parent.mkdir(parents=True, exist_ok=True)
    label = f"{name}, seed {args.seed}"
    print(f"drawing {out} ({len(frames)} frames)...", file=sys.stderr, flush=True)
    if out.suffix.lower() == ".gif":
        # Frames are recorded once per decision: keep every one when a decision spans several
        # control steps, so the animation does not run faster than needed.
        stride = 1 if scenario.episode.decision_steps > 1 else 2
        episode_animation(scenario, frames, out, label=label, stride=stride, inset=args.inset)
    else:
        episode_still(scenario, frames, out, label=label, inset=args.inset)
    print(
        f"{name} on {scenario.name}, seed {args.seed}: {record.outcome} after "
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
    print(SMOKE_NOTE, "\n")
    suite = load_suite("smoke")
    for name in BUILTIN:
        run_suite(suite, partial(make_controller, name), name, args.results, progress=False)
        print(_run_summary(Path(args.results) / suite.name / f"{name}.json", len(suite.episodes())))
    board = build_leaderboard(
        args.results, suite.name, preface=SMOKE_NOTE, chart_note=SMOKE_CHART_NOTE
    )
    print()
    print(board.render("markdown"), end="")
    board.write(args.results)
    print(f"\n{SMOKE_NOTE}")
    ns = argparse.Namespace(
        scenario="headon", controller="boundary-arc", model=None, param=[], suite=None,
        family=None, seed=0, out=args.gif, inset="auto",
    )  # fmt: skip
    return _cmd_show(ns)


def _cmd_sweep(args: argparse.Namespace) -> int:
    """Play a controller over a grid of parameters; write the sweep file, table and figure."""
    from functools import partial

    from flockward.bench.results import read_json
    from flockward.bench.sweep import SweepPlan, parse_axis, run_sweep, summarise
    from flockward.bench.sweep_report import (
        render_csv,
        render_json,
        render_markdown,
        write_figure,
    )
    from flockward_baselines.controllers import make_controller

    try:
        axes = tuple(parse_axis(text) for text in args.axis)
        params = dict(_controller_param(item) for item in args.param)
        name = args.name or "-".join(a.key.replace(".", "_") for a in axes)
        plan = SweepPlan(
            name=_file_stem(name),
            scenario=args.scenario,
            controller=args.controller,
            parameters=params,
            axes=axes,
            seeds=(args.first_seed, args.first_seed + args.seeds - 1),
        )
        out = Path(args.results) / f"{plan.name}.json"
        with _backend(args) as (workers, backend):
            run_sweep(
                plan,
                lambda cell_params: partial(make_controller, args.controller, **cell_params),
                out,
                workers,
                backend,
                refine=args.refine,
            )
        data = read_json(out)
        summaries = summarise(data)
        scenario = load_scenario(args.scenario)
    except KeyboardInterrupt:
        print("interrupted: finished episodes are saved; rerun the command to resume",
              file=sys.stderr)  # fmt: skip
        return 130
    except (ConfigError, ValueError, ImportError, TypeError, OSError) as exc:
        print(" ".join(str(exc).split()), file=sys.stderr)
        return EXIT_INVALID
    table = {
        "markdown": lambda: render_markdown(data, summaries),
        "csv": lambda: render_csv(data, summaries),
        "json": lambda: render_json(summaries),
    }[args.format]()
    print(table, end="")
    write_atomic(out.with_suffix(".md"), render_markdown(data, summaries))
    figures = args.figure or ["png"]
    for suffix in figures:
        write_figure(data, summaries, scenario, out.with_suffix(f".{suffix}"))
    print(f"-> {out} (+ .md, {', '.join('.' + s for s in figures)})", file=sys.stderr)
    return _report_episode_errors_in(data, out)


def _file_stem(name: str) -> str:
    """A sweep name as a file stem: lower-case letters, digits and '-'."""
    from flockward.bench.evaluation import controller_slug

    return controller_slug(name)


EXIT_AUDIT_MISMATCH = 1  # flockward audit: a replayed episode differs from its record
AUDIT_SHOWN = 10  # mismatches printed per file


def _cmd_audit(args: argparse.Namespace) -> int:
    """Replay a sample of each result file's episodes and report any that differ."""
    from flockward.bench.audit import audit_results
    from flockward.bench.evaluation import read_results
    from flockward.bench.suites import load_suite
    from flockward_baselines.replay import factory_from_results

    status = EXIT_OK
    for name in args.files:
        try:
            data = read_results(name)
            suite = load_suite(args.suite) if args.suite else None
            factory = factory_from_results(data, args.models)
            report = audit_results(name, factory, suite, args.sample, args.seed)
        except (ConfigError, ValueError, ImportError, TypeError, OSError, KeyError) as exc:
            print(f"{name}: cannot audit: {' '.join(str(exc).split())}", file=sys.stderr)
            status = EXIT_INVALID
            continue
        if report.ok:
            print(
                f"ok  {name}: {len(report.audited)} of {report.total} episodes replayed, all equal"
            )
            continue
        bad = sorted({m.index for m in report.mismatches})
        print(f"MISMATCH  {name}: {len(bad)} of {len(report.audited)} replayed episodes differ",
              file=sys.stderr)  # fmt: skip
        for mismatch in report.mismatches[:AUDIT_SHOWN]:
            print(f"  {mismatch.text()}", file=sys.stderr)
        status = max(status, EXIT_AUDIT_MISMATCH)  # a file that cannot be audited (2) wins
    return status


def _cmd_board(args: argparse.Namespace) -> int:
    """Score a suite's result files; print the pooled and per-family tables, write
    leaderboard.md and the charts (and performance profiles with --profiles)."""
    from flockward.bench.charts import write_profiles
    from flockward.bench.leaderboard import LeaderboardError, build_leaderboard, row_name

    try:
        board = build_leaderboard(args.results, args.suite)
    except LeaderboardError as exc:
        print(exc, file=sys.stderr)
        return EXIT_INVALID
    if args.audit is not None:
        status = _audit_board(args, board.suite)
        if status != EXIT_OK:
            return status
    print(board.render(args.format, families=args.families), end="")
    written = board.write(args.results, args.figure or ["png"])
    if args.profiles:
        names = [r["controller"] for r in board.rows]
        by_name = {row_name(r): r for r in board.results}
        written += (write_profiles([by_name[n] for n in names], names, args.profiles),)
    print(f"wrote {', '.join(str(p) for p in written)}", file=sys.stderr)
    return EXIT_OK


def _audit_board(args: argparse.Namespace, suite_name: str) -> int:
    """``board --audit K``: replay K episodes of every result file before ranking them."""
    from flockward.bench.leaderboard import OUTPUT_STEM

    files = sorted(
        str(p)
        for p in (Path(args.results) / suite_name).glob("*.json")
        if not p.name.startswith(OUTPUT_STEM)
    )
    audit_args = argparse.Namespace(
        files=files, sample=args.audit, seed=0, suite=args.suite, models=args.models
    )
    with redirect_stdout(sys.stderr):  # stdout carries the table alone
        status = _cmd_audit(audit_args)
    if status != EXIT_OK:
        print("board: not ranked, an audit failed (see above)", file=sys.stderr)
    return status


def _cmd_compare(args: argparse.Namespace) -> int:
    """Compare two controllers' result files on the same suite, paired by episode."""
    from flockward.bench.charts import write_profiles
    from flockward.bench.compare import compare_results, render_comparison
    from flockward.bench.leaderboard import LeaderboardError, load_suite_results, row_name

    try:
        if args.a == args.b:
            raise LeaderboardError(f"compare {args.a} with another controller, not itself")
        if args.reps < 1:
            raise LeaderboardError(f"--reps {args.reps}: must be an integer >= 1")
        name, results = load_suite_results(args.results, args.suite)
        by_name = {row_name(r): r for r in results}
        missing = [c for c in (args.a, args.b) if c not in by_name]
        if missing:
            raise LeaderboardError(
                f"no valid result file for {', '.join(missing)} in {Path(args.results) / name}; "
                f"available: {', '.join(by_name)}"
            )
        comparison = compare_results(by_name[args.a], by_name[args.b], reps=args.reps)
    except LeaderboardError as exc:
        print(exc, file=sys.stderr)
        return EXIT_INVALID
    print(render_comparison(comparison), end="")
    if args.profiles:
        pair = [by_name[args.a], by_name[args.b]]
        out = write_profiles(pair, [args.a, args.b], args.profiles)
        print(f"wrote {out}", file=sys.stderr)
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
        defaults: dict[str, Any] | None
        if (args.controller is None) == (args.model is None):
            raise ValueError("give exactly one of --controller NAME and --model FILE.zip")
        if args.model is not None:
            from flockward_baselines.policy import DEFAULT_ALGORITHM, PolicyController

            name = f"model-{Path(args.model).stem}"
            factory = partial(PolicyController, args.model, **params)
            played = PolicyController(args.model, **params)  # fail here, not in a worker
            defaults = {**played.parameters(), "algorithm": DEFAULT_ALGORITHM}
        else:
            from flockward_baselines.controllers import make_controller

            name = args.controller
            factory = partial(make_controller, args.controller, **params)
            factory()  # a controller that breaks its contract fails here, not in a worker
            defaults = _parameters(make_controller(args.controller))
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
                slug=controller_slug(args.label if args.label is not None else name),
                backend=backend,
                env_options=env_options,
                label=args.label,
                default_parameters=defaults,
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
    return _report_episode_errors(path)


def _report_episode_errors(path: Path) -> int:
    """Print the first episode error of a result file and how many there were; the exit status
    (EXIT_EPISODE_ERRORS if any episode errored, else EXIT_OK)."""
    from flockward.bench.evaluation import read_results

    return _report_episode_errors_in(read_results(path), path)


def _report_episode_errors_in(data: dict[str, Any], path: Path) -> int:
    """As _report_episode_errors, for the already read content ``data`` of the file ``path``."""
    errored = [r for r in data["episodes"] if r["outcome"] == "error"]
    if not errored:
        return EXIT_OK
    first = errored[0]
    where = first.get("family", f"cell {first.get('cell')}")
    print(
        f"error: {len(errored)} episode(s) of {path} ended in a controller error; the first, "
        f"{where} seed {first['seed']}: {' '.join(str(first['error']).split())[:300]}. "
        "Errors are not results: fix the controller and rerun to play them again.",
        file=sys.stderr,
    )
    return EXIT_EPISODE_ERRORS


def _parameters(controller: Controller) -> dict[str, Any] | None:
    """A controller's parameters() (its defaults when built without overrides), or None."""
    method = getattr(controller, "parameters", None)
    return dict(method()) if callable(method) else None


def _cmd_train(args: argparse.Namespace) -> int:
    """Train an SB3 policy from a TOML config; --resume continues from the last checkpoint."""
    from flockward_baselines.train import load_train_config, train

    try:
        config = load_train_config(args.config)
        name = config.name
        if args.seed is not None:
            if args.seed < 0:
                raise ValueError(f"--seed {args.seed}: must be an integer >= 0")
            config = dataclasses.replace(config, seed=args.seed)
            name = f"{config.name}-s{args.seed}"
        out = Path(args.out) if args.out else Path("runs") / name
        final = train(config, out, resume=args.resume, progress=not args.quiet)
    except (ConfigError, ValueError) as exc:
        print(" ".join(str(exc).split()), file=sys.stderr)
        return EXIT_INVALID
    print(f"model written to {final}; curve and logs in {final.parent}")
    return EXIT_OK


def _cmd_curves(args: argparse.Namespace) -> int:
    """Summarise the learning curves of several training runs: mean and 95 % interval."""
    from flockward.config.atomic import atomic_path
    from flockward_baselines.curves import (
        reach_table,
        read_curve,
        summarise_seeds,
        write_seed_summary,
    )

    runs = []
    for folder in args.runs:
        points = read_curve(Path(folder) / "curve.csv")
        if not points:
            print(f"{folder}: no curve.csv (a training run directory?)", file=sys.stderr)
            return EXIT_INVALID
        runs.append(points)
    if not 0.0 < args.target <= 1.0:
        print(f"--target {args.target}: must be a success rate in (0, 1]", file=sys.stderr)
        return EXIT_INVALID
    rows = summarise_seeds(runs)
    if not rows:
        print("the runs share no curve point (different curve_every?)", file=sys.stderr)
        return EXIT_INVALID
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    csv_path, png_path = out.with_suffix(".csv"), out.with_suffix(".png")
    write_seed_summary(csv_path, png_path, rows, args.title or out.stem)
    md_path = out.with_suffix(".md")
    names = [Path(folder).resolve().name for folder in args.runs]
    with atomic_path(md_path) as tmp:
        tmp.write_text(reach_table(dict(zip(names, runs, strict=True)), args.target))
    last = rows[-1]
    print(
        f"{len(runs)} runs, {len(rows)} shared points; at {last['simulator_steps']:,.0f} "
        f"simulator steps: success {last['success_mean']:.2f} [{last['success_low']:.2f}, "
        f"{last['success_high']:.2f}], breach-free {last['breach_free_mean']:.2f} -> "
        f"{csv_path}, {png_path}, {md_path}"
    )
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
    sub = parser.add_subparsers(title="commands", metavar="COMMAND", required=True, dest="command")

    check = sub.add_parser(
        "check",
        help="validate scenario, flock, pursuer, sensor and suite files",
        description="Validate scenario, flock, drone-preset, sensor-preset and suite TOML files "
        "and report every "
        "error of each, one line each with its line number where the file shows it. A file is "
        "checked as --kind says, else as its directory says (scenarios/, flocks/, pursuers/, "
        "sensors/, suites/), else as a suite if it lists [[entry]] tables, "
        "else as its keys suggest. An empty file is an error. Exit status 0 if all are valid, "
        "2 if any is not.",
        epilog=CAUTION,
    )
    check.add_argument(
        "files", nargs="+", metavar="FILE", help="scenario, flock, drone, sensor or suite TOML file"
    )
    check.add_argument(
        "--kind",
        choices=(*CONFIG_KINDS, "suite"),
        help="check every FILE as this kind of config",
    )
    check.add_argument("-q", "--quiet", action="store_true", help="print only the errors")
    check.set_defaults(handler=_cmd_check)

    schema = sub.add_parser(
        "schema",
        help="print every config key: allowed values, default, meaning",
        description="Print every key a scenario file may set (flock and drone-preset files set "
        "the [flock] and [pursuer] keys at top level): what it allows (type, range, unit), its "
        "default and its meaning, generated from the parameter records.",
    )
    schema.add_argument("--markdown", action="store_true", help="as a Markdown table")
    schema.set_defaults(handler=_cmd_schema)

    bench = sub.add_parser(
        "bench",
        help="measure simulator and environment throughput",
        description="Simulator bird-steps/s, environment world-steps/s and PPO steps/s, with "
        "ratios between figures of the same run (medians of repeats).",
    )
    bench.add_argument("--quick", action="store_true", help="fewer repeats, no PPO (seconds)")
    bench.add_argument("--json", action="store_true", help="print the figures as one JSON object")
    bench.set_defaults(handler=_cmd_bench)

    show = sub.add_parser(
        "show",
        help="render one episode as a GIF or PNG",
        description="Play one episode and write an animation (.gif) or a still (.png).",
        epilog=CAUTION,
    )
    show.add_argument("--scenario", default="headon", help="shipped scenario name or TOML path")
    show.add_argument(
        "--suite", help="replay the exact episode of this suite's --family and --seed instead"
    )
    show.add_argument("--family", help="the suite family the episode belongs to")
    show.add_argument(
        "--controller",
        help="controller name or module:Name (default boundary-arc, unless --model)",
    )
    show.add_argument("--model", help="a Stable-Baselines3 model .zip to play instead")
    _add_param_option(show, "controller constructor argument (repeatable)")
    show.add_argument("--seed", type=int, default=0, help="episode seed")
    show.add_argument(
        "--out", default="episode.gif", help="output file: .gif, or a still as .png, .svg, .pdf"
    )
    show.add_argument(
        "--inset",
        choices=("auto", "on", "off"),
        default="auto",
        help="a zoomed view of the flock drawing each bird (a .gif's follows the flock, a still's "
        "shows the final flock): auto (default) adds it when the flock's median span is at most "
        "a tenth of the map's width",
    )
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
        "the missing ones are played, and so are episodes that ended in a controller error; a "
        "file from another suite version or other controller parameters is refused, never "
        "overwritten. Exit status: 0 when every episode played, 2 for bad input, 3 when any "
        "episode ended in a controller error (the first is printed), 1 when a worker died.",
        epilog=CAUTION,
    )
    run.add_argument("--suite", default="standard", help="shipped suite name or TOML path")
    run.add_argument(
        "--controller",
        help="built-in controller name or an import path package.module:Name (the working "
        "directory is importable)",
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
    _add_param_option(
        run, "controller constructor argument; numbers and true/false are parsed (repeatable)"
    )
    run.add_argument(
        "--label",
        help="name of this run on the leaderboard and of its result file (e.g. a controller "
        "with other --param values), so variants sit side by side",
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

    sweep = sub.add_parser(
        "sweep",
        help="map a controller's outcomes over a grid of parameters",
        description="Play one controller on one scenario over a grid of one or two axes, each "
        "a controller parameter (push_distance) or a dotted scenario key (flock.count), the "
        "same seeds in every cell. Writes RESULTS/NAME.json (resumable, like run), a per-cell "
        "table NAME.md (success, split, spill and collision rates with Wilson 95 % intervals, "
        "median time, clearance) and a figure. Exit status as for run.",
        epilog=CAUTION,
    )
    sweep.add_argument(
        "--axis",
        action="append",
        required=True,
        metavar="KEY=VALUES",
        help="an axis: KEY=a,b,c or KEY=lo:hi:n (n values, ends included); once or twice",
    )
    sweep.add_argument("--scenario", default="headon", help="shipped scenario name or TOML path")
    sweep.add_argument(
        "--controller", default="boundary-arc", help="controller name or module:Name"
    )
    _add_param_option(sweep, "a fixed controller argument (repeatable)")
    sweep.add_argument("--seeds", type=int, default=20, help="episodes per cell (default 20)")
    sweep.add_argument("--first-seed", type=int, default=5000, help="first seed (default 5000)")
    sweep.add_argument(
        "--refine",
        type=int,
        default=0,
        metavar="R",
        help="after the grid, R rounds adding midpoint cells and seeds only where neighbouring "
        "cells disagree (default 0)",
    )
    sweep.add_argument("--name", help="file stem (default: from the axes)")
    sweep.add_argument(
        "--results", default="results/sweeps", help="directory (default %(default)s)"
    )
    sweep.add_argument("--workers", type=int, help="worker processes (default 1)")
    sweep.add_argument("--ray", nargs="?", const="", default=None, help=argparse.SUPPRESS)
    sweep.add_argument(
        "--format", choices=("markdown", "csv", "json"), default="markdown", help="table format"
    )
    _add_figure_option(sweep, "figure formats")
    sweep.set_defaults(handler=_cmd_sweep)

    curves = sub.add_parser(
        "curves",
        help="mean learning curve over training seeds, with a 95 %% interval",
        description="Read curve.csv of several training runs (one per seed), average each "
        "run's success and breach-free rates over its scenarios, and write their mean over the "
        "runs with a Student-t 95 % interval against simulator steps as OUT.csv and OUT.png; "
        "OUT.md tables when each run first reached the --target success rate.",
    )
    curves.add_argument("runs", nargs="+", metavar="RUN_DIR", help="training run directory")
    curves.add_argument("--out", required=True, help="output path without suffix")
    curves.add_argument("--title", help="figure title (default: the file name)")
    curves.add_argument(
        "--target", type=float, default=0.9, help="success rate each run is timed to (OUT.md)"
    )
    curves.set_defaults(handler=_cmd_curves)

    audit = sub.add_parser(
        "audit",
        help="replay a sample of a result file's episodes and compare",
        description="Replay episodes of result files from their stored provenance (suite hash, "
        "controller and its settings, environment arguments) and compare every stored field "
        "exactly. A difference means a file edited by hand, another package version or a "
        "nondeterminism bug. Exit status 0 when all match, 1 when any episode differs, 2 when "
        "a file cannot be audited.",
    )
    audit.add_argument("files", nargs="+", metavar="FILE", help="result file (.json)")
    audit.add_argument(
        "--sample", type=int, help="episodes drawn per file (default: every episode)"
    )
    audit.add_argument("--seed", type=int, default=0, help="seed of the draw (default 0)")
    audit.add_argument("--suite", help="suite name or TOML path the files were run on")
    audit.add_argument(
        "--models", default="results/models", help="directory of saved models (default %(default)s)"
    )
    audit.set_defaults(handler=_cmd_audit)

    board = sub.add_parser(
        "board",
        help="score a suite's result files into a leaderboard",
        description="Score every result file of a suite (episode score IQM with a 95 % "
        "stratified bootstrap CI), print the pooled table and the per-family table, and write "
        "<results>/<suite>/leaderboard.md, leaderboard.png and leaderboard-families.png. Files "
        "run on another version of the suite are skipped.",
    )
    board.add_argument("--suite", default="standard", help="shipped suite name or TOML path")
    board.add_argument("--results", default="results", help="results directory")
    board.add_argument(
        "--format", choices=("markdown", "csv", "json"), default="markdown", help="table format"
    )
    board.add_argument(
        "--families", action="store_true", help="csv/json: print the per-family rows instead"
    )
    board.add_argument(
        "--profiles", metavar="PNG", help="also draw every row's performance profile to PNG"
    )
    _add_figure_option(board, "chart formats")
    board.add_argument(
        "--audit",
        type=int,
        metavar="K",
        help="first replay K episodes of every result file (as flockward audit) and rank only "
        "if all match",
    )
    board.add_argument(
        "--models", default="results/models", help="saved models for --audit (default %(default)s)"
    )
    board.set_defaults(handler=_cmd_board)

    compare = sub.add_parser(
        "compare",
        help="compare two controllers on the same episodes",
        description="Pair two result files of a suite by (family, seed) and report, pooled and "
        "per family, the mean score difference with a 95 % stratified bootstrap CI, the "
        "probability of improvement, McNemar's exact test on success and Wilcoxon's "
        "signed-rank test on time to success, with a one-line verdict.",
    )
    compare.add_argument("a", metavar="A", help="controller name or run label (A)")
    compare.add_argument("b", metavar="B", help="controller name or run label (B)")
    compare.add_argument("--suite", default="standard", help="shipped suite name or TOML path")
    compare.add_argument("--results", default="results", help="results directory")
    compare.add_argument(
        "--reps", type=int, default=2000, help="bootstrap replicates (default 2000)"
    )
    compare.add_argument(
        "--profiles", metavar="PNG", help="also draw both performance profiles to PNG"
    )
    compare.set_defaults(handler=_cmd_compare)

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
    train.add_argument(
        "--seed", type=int, help="training seed in place of the config's (default out dir gets -sN)"
    )
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


# Commands that step the simulator, and so compile its kernels on a first run.
SIMULATING = frozenset({"run", "show", "demo", "train", "bench", "verify", "audit"})


def kernels_cached() -> bool:
    """Whether numba's on-disk cache holds a compiled step kernel (numba itself decides whether
    it is still fresh; this only tells a first run from the others)."""
    from importlib.util import find_spec

    spec = find_spec("flockward.sim.dynamics")
    if spec is None or spec.origin is None:
        return False
    cache = Path(spec.origin).parent / "__pycache__"
    return any(cache.glob("dynamics._step_worlds-*.nbi"))


def _add_param_option(parser: argparse.ArgumentParser, help_text: str) -> None:
    """The repeatable ``--param KEY=VALUE`` (controller constructor arguments)."""
    parser.add_argument("--param", action="append", default=[], metavar="KEY=VALUE", help=help_text)


def _add_figure_option(parser: argparse.ArgumentParser, what: str) -> None:
    """The repeatable ``--figure png|svg|pdf`` (figure formats, PNG when none is given)."""
    parser.add_argument(
        "--figure",
        action="append",
        choices=("png", "svg", "pdf"),
        default=None,
        help=f"{what} (default png; repeatable)",
    )


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``flockward`` console script; returns the exit status."""
    args = build_parser().parse_args(argv)
    if args.command in SIMULATING and not kernels_cached():
        print("compiling the simulator's kernels on first use (about half a minute; cached "
              "afterwards)...", file=sys.stderr, flush=True)  # fmt: skip
    try:
        return int(args.handler(args))
    except BrokenPipeError:
        # The reader went away (`flockward schema | head`): stop quietly, as Python's docs advise
        # (point stdout at devnull so the interpreter's final flush cannot fail again).
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return EXIT_BROKEN_PIPE


if __name__ == "__main__":
    raise SystemExit(main())

"""Play every episode of a suite with one controller and keep the results in a resumable file.

The result file ``RESULTS_DIR/<suite>/<controller-slug>.json`` (layout in
``flockward.bench.results``) holds episodes sorted by index. It is rewritten atomically (temp
file in the same directory, fsync, rename) every few episodes and at the end, so an interrupted
run keeps what it finished and a rerun plays only the missing episodes. Strict JSON: a non-finite
number (the closest approach of an episode whose controller failed before the first step) is
written as null. A run that sets environment arguments (observation, reward, or the drone count
a controller declares) records them under ``"environment"``; the defaults are not written.

Each episode gets a fresh controller from ``controller_factory`` reset with the episode's seed,
so a result depends only on (scenario, seed, controller settings): never on the order, the
worker, or what ran before. This module imports nothing from flockward_baselines.
"""

from __future__ import annotations

import json
import math
import multiprocessing
import platform
import re
import subprocess
import sys
import time
from collections.abc import Callable, Iterable
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from dataclasses import fields
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, Protocol

import gymnasium
import numpy as np

import flockward
from flockward.bench.episode import controller_env_kwargs, play_episode
from flockward.bench.results import (
    RESULTS_FORMAT,
    ResultsBusy,
    UnreadableResults,
    format_problem,
    read_json,
    write_results,
    writer_lock,
)
from flockward.bench.suites import EpisodeSpec, Suite, suite_hash
from flockward.config.hashing import scenario_hash
from flockward.controller import INFORMATION_LEVELS, Controller, public_settings
from flockward.sim.types import Scenario
from flockward.task.env_config import EnvConfig
from flockward.task.outcome import Outcome

__all__ = [
    "RESULTS_FORMAT",
    "Backend",
    "ControllerFactory",
    "ResultsBusy",
    "ResultsConflict",
    "collect_rows",
    "controller_slug",
    "play_row",
    "play_rows",
    "progress_bar",
    "provenance",
    "read_results",
    "result_path",
    "run_suite",
]

SAVE_EVERY = 8  # episodes between saves
SAVE_INTERVAL = 30.0  # s, longest wait between saves while episodes keep finishing

ControllerFactory = Callable[[], Controller]
# Runs play(*call) for every call, wherever it likes, and yields the returned rows as they finish
# (any order). The driver alone orders, saves and resumes.
# flockward.bench.ray_backend.ray_rows is one.
Backend = Callable[[Callable[..., dict[str, Any]], list[tuple[Any, ...]]], Iterable[dict[str, Any]]]


class ResultsConflict(ValueError):
    """An existing result file belongs to another run; it is left untouched."""


def controller_slug(name: str) -> str:
    """File-name form of a controller name: lower case, runs of other characters become '-'."""
    slug = re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-")
    if not slug:
        raise ValueError(f"controller name {name!r} has no letters or digits to name a file by")
    return slug


def result_path(results_dir: str | Path, suite_name: str, slug: str) -> Path:
    """Where the results of controller ``slug`` on suite ``suite_name`` are kept."""
    return Path(results_dir) / suite_name / f"{slug}.json"


def read_results(path: str | Path) -> dict[str, Any]:
    """A result file's content; ResultsConflict if it is not a readable flockward result file."""
    path = Path(path)
    try:
        data = read_json(path)
    except UnreadableResults as error:
        raise ResultsConflict(
            f"{path}: cannot read the existing result file ({error}); move or delete it, or "
            "write elsewhere with --results DIR"
        ) from None
    if not isinstance(data, dict) or format_problem(data) is not None:
        found = data.get("format") if isinstance(data, dict) else type(data).__name__
        raise ResultsConflict(
            f"{path}: not a {RESULTS_FORMAT} file (format {found!r}); move or delete it, or "
            "write elsewhere with --results DIR"
        )
    return data


def _git_commit() -> str | None:
    """The commit of the source tree flockward runs from, or None outside a git checkout."""
    try:
        out = subprocess.run(
            ["git", "rev-parse", "HEAD"],
            cwd=Path(flockward.__file__).resolve().parent,
            capture_output=True,
            text=True,
            timeout=10,
            check=False,
        )
    except (OSError, subprocess.SubprocessError):
        return None
    commit = out.stdout.strip()
    return commit if out.returncode == 0 and re.fullmatch(r"[0-9a-f]{40}", commit) else None


def provenance(suite: Suite | None = None) -> dict[str, Any]:
    """Where and with what a result file was made: versions, commit, time, and the scenario
    hashes of ``suite`` when given."""
    made: dict[str, Any] = {
        "flockward_version": flockward.__version__,
        "git_commit": _git_commit(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "gymnasium": gymnasium.__version__,
        "created": datetime.now(UTC).isoformat(timespec="seconds"),
    }
    if suite is not None:
        made["scenario_hashes"] = {name: scenario_hash(s) for name, s in suite.scenarios.items()}
    return made


def _finite(value: object) -> object:
    """JSON-safe copy: non-finite floats become None (strict JSON has no Infinity)."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite(v) for v in value]
    return value


def play_row(
    factory: ControllerFactory,
    scenario: Scenario,
    spec: EpisodeSpec,
    env_options: dict[str, Any] | None = None,
) -> dict[str, Any]:
    """One suite episode as a result row, exactly as a result file stores it; top-level so
    worker processes can run it."""
    try:
        controller = factory()
    except Exception as error:  # a user's constructor may raise anything
        raise RuntimeError(
            f"the controller factory raised {type(error).__name__}: {error}"
        ) from None
    record, _ = play_episode(scenario, controller, spec.seed, env_kwargs=env_options)
    row = {
        "family": spec.family,
        "scenario": spec.scenario_name,
        "seed": spec.seed,
        "index": spec.index,
        **record.as_dict(),
    }
    return {key: _finite(value) for key, value in row.items()}


def _environment(env_options: dict[str, Any] | None) -> dict[str, Any] | None:
    """The episodes' environment arguments, checked, as JSON data; None for the defaults."""
    defaults = {f.name: f.default for f in fields(EnvConfig)}
    env_options = {k: v for k, v in (env_options or {}).items() if defaults.get(k, v) != v}
    if not env_options:
        return None
    fixed = sorted(set(env_options) & {"scenario", "overrides", "render_mode"})
    if fixed:
        raise ValueError(
            f"environment argument(s) {', '.join(fixed)}: set by the suite, not by the run"
        )
    EnvConfig.from_options(**env_options)
    try:
        environment: dict[str, Any] = json.loads(json.dumps(env_options, allow_nan=False))
    except (TypeError, ValueError):
        raise ValueError(
            f"environment arguments {env_options!r}: give observation and reward by name or "
            "import path 'package.module:Name', so the result file can record them"
        ) from None
    return environment


def _header(suite: Suite, controller_name: str, controller: Controller) -> dict[str, Any]:
    """The identity of a run: suite, its hash, controller, information level and parameters."""
    level = getattr(controller, "information_level", None)
    if level not in INFORMATION_LEVELS:
        raise ValueError(
            f"controller {controller_name!r}: information_level {level!r} must be one of "
            f"{', '.join(INFORMATION_LEVELS)}"
        )
    # A class without parameters() is described by its public attributes, so a rerun with other
    # settings cannot silently resume its file.
    method = getattr(controller, "parameters", None)
    params = method() if callable(method) else public_settings(controller)
    return {
        "format": RESULTS_FORMAT,
        "suite": suite.name,
        "suite_version": suite.version,
        "suite_hash": suite_hash(suite),
        "controller": controller_name,
        "information_level": level,
        "controller_parameters": _json_data(params, controller_name, "parameters()"),
    }


def _json_data(value: Any, controller_name: str, what: str = "arguments") -> Any:
    """``value`` as plain JSON data, or a one-line error saying whose ``what`` it was."""
    try:
        return json.loads(json.dumps(value, allow_nan=False))
    except (TypeError, ValueError) as error:
        raise ValueError(
            f"controller {controller_name!r}: {what} must be JSON data ({error})"
        ) from None


def _variant(label: str | None, default_parameters: dict[str, Any] | None) -> dict[str, Any]:
    """Header entries naming a run variant: its label and the controller's default parameters."""
    entries: dict[str, Any] = {}
    if label is not None:
        if not label.strip():
            raise ValueError(f"label {label!r}: must contain letters or digits")
        entries["label"] = label
    if default_parameters is not None:
        entries["default_parameters"] = json.loads(json.dumps(default_parameters, allow_nan=False))
    return entries


def _resume(path: Path, header: dict[str, Any], specs: list[EpisodeSpec]) -> dict[str, Any]:
    """The existing file's content if it continues this exact run; ResultsConflict otherwise."""
    data = read_results(path)
    advice = f"delete {path} to start over, or write elsewhere with --results DIR"
    for key, what in (
        ("suite", "suite"),
        ("suite_hash", "suite content (hash)"),
        ("controller", "controller"),
        ("information_level", "information level"),
        ("controller_parameters", "controller parameters"),
        ("controller_arguments", "controller arguments (--param)"),
        ("environment", "environment arguments"),
        ("label", "label"),
    ):
        if data.get(key) != header.get(key):
            raise ResultsConflict(
                f"{path}: holds results of a different {what} ({data.get(key)!r}, this run "
                f"{header.get(key)!r}); {advice}"
            )
    episodes = data.get("episodes")
    if not isinstance(episodes, list) or not isinstance(data.get("provenance"), dict):
        raise ResultsConflict(f"{path}: has no valid 'episodes' list or 'provenance'; {advice}")
    by_index = {spec.index: spec for spec in specs}
    seen: set[int] = set()
    for row in episodes:
        index = row.get("index") if isinstance(row, dict) else None
        spec = by_index.get(index) if isinstance(index, int) else None
        if (
            spec is None
            or index in seen
            or (row.get("family"), row.get("scenario"), row.get("seed"))
            != (spec.family, spec.scenario_name, spec.seed)
        ):
            raise ResultsConflict(
                f"{path}: episode entry {row!r:.80} does not match the suite; {advice}"
            )
        seen.add(spec.index)
    # Errors are not results: an episode that ended in an error is played again.
    data["episodes"] = [row for row in episodes if row.get("outcome") != Outcome.ERROR]
    data["replayed_errors"] = len(episodes) - len(data["episodes"])
    return data


def _open_results(
    path: Path,
    suite: Suite,
    controller_factory: ControllerFactory,
    probe: Controller,
    controller_name: str,
    env_options: dict[str, Any] | None,
    progress: bool,
    variant: dict[str, Any],
) -> tuple[dict[str, Any], dict[str, Any] | None]:
    """The run's content so far (a new header, or the file at ``path`` it resumes, less its
    errored episodes) and the episodes' environment arguments. ``probe`` is one controller
    from ``controller_factory``, read for its settings; ``variant`` names a labelled run."""
    header = _header(suite, controller_name, probe)
    arguments = getattr(controller_factory, "keywords", None)  # a functools.partial's arguments
    if arguments:
        header["controller_arguments"] = _json_data(dict(arguments), controller_name)
    environment = _environment(controller_env_kwargs(probe, env_options))
    if environment is not None:
        header["environment"] = environment
    header.update(variant)
    specs = suite.episodes()
    if path.exists():
        data = _resume(path, header, specs)
        replayed = data.pop("replayed_errors")
        if replayed and progress:
            print(f"{path}: playing again {replayed} episode(s) that ended in an error",
                  file=sys.stderr)  # fmt: skip
    else:
        data = {**header, "provenance": provenance(suite), "episodes": []}
    return data, environment


def run_suite(
    suite: Suite,
    controller_factory: ControllerFactory,
    controller_name: str,
    results_dir: str | Path = "results",
    workers: int = 1,
    progress: bool = True,
    limit: int | None = None,
    slug: str | None = None,
    backend: Backend | None = None,
    env_options: dict[str, Any] | None = None,
    label: str | None = None,
    default_parameters: dict[str, Any] | None = None,
) -> Path:
    """Play the suite's missing episodes with fresh controllers and return the result file.

    ``controller_factory`` is a picklable zero-argument callable (a module-level class or a
    functools.partial) returning a new Controller. ``workers`` > 1 plays episodes in that many
    spawned processes; the file is the same as with one worker. ``limit`` stops after that many
    newly played episodes (a rerun continues). ``slug`` names the file; by default it is
    derived from ``controller_name``. ``backend`` plays the episodes instead of local workers
    (see Backend); the file is again the same. Raises ResultsConflict, leaving the file
    untouched, if the file holds another suite version, controller or parameter set. A resumed
    file keeps the provenance of the session that created it. ``env_options`` are environment
    arguments for every episode (EnvConfig fields other than scenario, overrides and
    render_mode, e.g. ``{"observation": "pkg.mod:MyObs"}``), recorded in the file's header
    under "environment" when given. ``label`` names the run on the leaderboard (a variant of a
    controller, e.g. other parameters) and by default the file; ``default_parameters``, the
    controller's parameters() without overrides, lets the leaderboard show what was changed.
    """
    if workers < 1:
        raise ValueError(f"workers = {workers}: must be an integer >= 1")
    if backend is not None and workers != 1:
        raise ValueError(f"workers = {workers} with a backend: the backend sets the parallelism")
    if limit is not None and limit < 0:
        raise ValueError(f"limit = {limit}: must be an integer >= 0")
    probe = controller_factory()  # a broken controller fails here, before any file is touched
    default_slug = controller_slug(label if label is not None else controller_name)
    path = result_path(results_dir, suite.name, slug or default_slug)
    variant = _variant(label, default_parameters)
    with writer_lock(path):
        data, environment = _open_results(
            path, suite, controller_factory, probe, controller_name, env_options, progress, variant
        )
        _play_pending(path, data, suite, controller_factory, environment, workers, limit, backend,
                      progress)  # fmt: skip
    return path


def _play_pending(
    path: Path,
    data: dict[str, Any],
    suite: Suite,
    controller_factory: ControllerFactory,
    environment: dict[str, Any] | None,
    workers: int,
    limit: int | None,
    backend: Backend | None,
    progress: bool,
) -> None:
    """Play the suite's episodes missing from ``data`` (at most ``limit``), saving as they come."""
    specs = suite.episodes()
    done = {row["index"] for row in data["episodes"]}
    pending = [spec for spec in specs if spec.index not in done]
    if limit is not None:
        pending = pending[:limit]

    scenarios = suite.scenarios
    calls = [
        (controller_factory, scenarios[spec.scenario_name], spec, environment) for spec in pending
    ]
    bar = progress_bar(len(specs), len(done), f"{suite.name}/{path.stem}", progress)
    collect_rows(calls, data, path, workers, backend, bar)


def collect_rows(
    calls: list[tuple[Any, ...]],
    data: dict[str, Any],
    path: Path,
    workers: int,
    backend: Backend | None,
    bar: _ProgressBar,
    shape: Callable[[dict[str, Any]], dict[str, Any]] = lambda row: row,
) -> None:
    """Play ``calls`` and add each finished row, through ``shape``, to ``data["episodes"]``,
    rewriting the file at ``path`` every few rows and at the end (sorted by index), so an
    interrupted run keeps what it finished. Shared by suites and sweeps."""

    def save() -> None:
        data["episodes"].sort(key=lambda row: row["index"])
        write_results(path, data)

    rows = play_rows(calls, workers) if backend is None else backend(play_row, calls)
    unsaved, last_save = 0, time.monotonic()
    try:
        for row in rows:
            data["episodes"].append(shape(row))
            unsaved += 1
            bar.update(1)
            if unsaved >= SAVE_EVERY or time.monotonic() - last_save > SAVE_INTERVAL:
                save()
                unsaved, last_save = 0, time.monotonic()
    finally:
        bar.close()
        if unsaved or not path.exists():
            save()
        close = getattr(rows, "close", None)
        if callable(close):
            close()  # stop the workers now, not whenever the generator is collected


def play_rows(calls: list[tuple[Any, ...]], workers: int) -> Iterable[dict[str, Any]]:
    """Rows of ``play_row(*call)`` as they finish: in order with one worker, any order with more."""
    if workers == 1 or len(calls) <= 1:
        for call in calls:
            yield play_row(*call)
        return
    context = multiprocessing.get_context("spawn")
    pool = ProcessPoolExecutor(max_workers=min(workers, len(calls)), mp_context=context)
    futures: set[Future[dict[str, Any]]] = set()
    try:
        for call in calls:
            futures.add(pool.submit(play_row, *call))
        while futures:
            finished, futures = wait(futures, return_when=FIRST_COMPLETED)
            for future in finished:
                yield future.result()
    finally:
        for future in futures:
            future.cancel()
        pool.shutdown(wait=True, cancel_futures=True)


class _ProgressBar(Protocol):
    """What the runner needs of a progress bar (tqdm's, or the silent stand-in)."""

    def update(self, n: int) -> object:
        """Count ``n`` more finished episodes."""

    def close(self) -> None:
        """Stop drawing."""


class _NoBar:
    """The progress bar when none is shown."""

    def update(self, n: int) -> None:
        """Nothing to draw."""

    def close(self) -> None:
        """Nothing to close."""


def progress_bar(total: int, initial: int, label: str, enabled: bool) -> _ProgressBar:
    """A tqdm bar on stderr when it is a terminal and progress is wanted, else a silent stand-in."""
    if not (enabled and sys.stderr.isatty()):
        return _NoBar()
    from tqdm import tqdm

    bar: _ProgressBar = tqdm(
        total=total, initial=initial, desc=label, unit="ep", dynamic_ncols=True
    )
    return bar

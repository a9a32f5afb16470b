"""Parameter sweeps: where a strategy works over its own parameters and the flock's.

A sweep plays one controller on one scenario over a grid of one or two axes, each a controller
parameter (``push_distance``) or a dotted scenario key (``flock.count``), with the same seeds in
every cell. Episodes are played by the runner's machinery (workers or a backend, fresh controller
per episode) and kept in one resumable result file, rewritten atomically, with one writer at a
time. Each cell is then summarised: rates of success, split, spill (breach) and collision with
Wilson 95 % intervals, median time to success and, where records carry it, the clearance.

Refinement (``refine`` rounds) spends episodes only where the map has an edge: after the
coarse grid, each round compares every played cell with its nearest played neighbour along each
axis; where the two disagree (their regions differ, or one is 'undecided'), a numeric axis gets a
new cell at the midpoint, and an undecided cell (or a pair on a non-numeric axis) gets another
block of seeds. A round is decided from the complete rounds before it only, so a rerun decides
the same episodes and an interrupted refinement resumes like the coarse grid.

File layout (format "flockward-sweep/1")::

    {"format", "name", "scenario", "controller", "controller_parameters", "axes": [{"key",
     "values"}], "seeds": [first, last], "provenance": {...}, "refine": R (when refined),
     "episodes": [{"cell": [i, j], "seed", "index", **EpisodeRecord.as_dict()}, ...
                  {"values": [x, y], "round": r, "seed", "index", ...} (refinement), ...]}
"""

from __future__ import annotations

import itertools
import json
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from flockward.bench.evaluation import (
    Backend,
    ControllerFactory,
    collect_rows,
    progress_bar,
    provenance,
)
from flockward.bench.results import read_json, writer_lock
from flockward.bench.statistics import wilson_interval
from flockward.bench.suites import EpisodeSpec
from flockward.config.files import ConfigError
from flockward.config.hashing import scenario_hash
from flockward.config.scenarios import load_scenario, parse_override
from flockward.config.schema import SECTIONS
from flockward.sim.types import Scenario

__all__ = [
    "SWEEP_FORMAT",
    "Axis",
    "CellSummary",
    "SweepConflict",
    "SweepPlan",
    "grid_values",
    "parse_axis",
    "refinement",
    "run_sweep",
    "summarise",
]

SWEEP_FORMAT = "flockward-sweep/1"
MAX_CELLS = 400  # a grid larger than this is almost certainly a typo in a range
WHOLE_FRACTION = 0.9  # a flock counts as split once its largest group held less than this share
UNDECIDED_WIDTH = 0.5  # a cell whose leading rate's interval is wider than this is not called

# Makes a zero-argument controller factory from one cell's controller parameters.
FactoryMaker = Callable[[dict[str, Any]], ControllerFactory]


class SweepConflict(ValueError):
    """An existing sweep file belongs to another sweep; it is left untouched."""


@dataclass(frozen=True)
class Axis:
    """One axis of the grid: a controller parameter or a dotted scenario key, and its values."""

    key: str
    values: tuple[Any, ...]

    @property
    def is_scenario_key(self) -> bool:
        """True for a scenario key (``flock.count``), False for a controller parameter."""
        section, dot, _ = self.key.partition(".")
        return bool(dot) and (section in SECTIONS)


def _number_list(key: str, text: str) -> tuple[Any, ...]:
    """Values written ``a,b,c`` or ``lo:hi:n`` (n evenly spaced values, both ends included)."""
    if text.count(":") == 2:
        lo_text, hi_text, n_text = text.split(":")
        try:
            lo, hi, n = float(lo_text), float(hi_text), int(n_text)
        except ValueError:
            n = 0
        if n < 2 or not (math.isfinite(lo) and math.isfinite(hi)):
            raise ValueError(f"axis {key}={text}: a range is lo:hi:n with n >= 2 finite numbers")
        return tuple(float(v) for v in np.linspace(lo, hi, n))
    values = tuple(parse_override(f"{key}={item}")[1] for item in text.split(",") if item)
    if not values:
        raise ValueError(f"axis {key}={text}: give values a,b,c or a range lo:hi:n")
    return values


def parse_axis(text: str) -> Axis:
    """An axis from ``KEY=a,b,c`` or ``KEY=lo:hi:n`` (numbers and TOML values are parsed)."""
    key, sep, rest = text.partition("=")
    if not sep or not key.strip():
        raise ValueError(f"axis {text!r}: expected KEY=a,b,c or KEY=lo:hi:n")
    return Axis(key.strip(), _number_list(key.strip(), rest.strip()))


@dataclass(frozen=True)
class SweepPlan:
    """What a sweep plays: one controller on one scenario over the grid, the same seeds in
    every cell."""

    name: str
    scenario: str  # shipped name or path
    controller: str
    parameters: Mapping[str, Any]  # the controller's fixed arguments, under the axes
    axes: tuple[Axis, ...]
    seeds: tuple[int, int]  # first, last (inclusive)

    def __post_init__(self) -> None:
        if not 1 <= len(self.axes) <= 2:
            raise ValueError(f"a sweep has one or two axes, not {len(self.axes)}")
        if len({a.key for a in self.axes}) != len(self.axes):
            raise ValueError(f"axis {self.axes[0].key} given twice")
        if not 0 <= self.seeds[0] <= self.seeds[1]:
            raise ValueError(f"seeds {list(self.seeds)}: need 0 <= first <= last")
        if len(self.cells()) > MAX_CELLS:
            raise ValueError(f"{len(self.cells())} cells: at most {MAX_CELLS} per sweep")

    def cells(self) -> list[tuple[int, ...]]:
        """Every cell as its index along each axis, first axis slowest."""
        grid = np.indices([len(a.values) for a in self.axes]).reshape(len(self.axes), -1).T
        return [tuple(int(i) for i in cell) for cell in grid]

    def values(self, cell: Sequence[int]) -> dict[str, Any]:
        """The axis values of a cell, by key."""
        return {axis.key: axis.values[i] for axis, i in zip(self.axes, cell, strict=True)}

    def scenario_of(self, cell: Sequence[int]) -> Scenario:
        """The cell's scenario: the base with the cell's scenario keys set (named by cell)."""
        return self._scenario(self.values(cell), f"c{'-'.join(map(str, cell))}", list(cell))

    def scenario_at(self, values: Sequence[Any]) -> Scenario:
        """The scenario at axis values off the coarse grid (a refinement's cell), named by them."""
        text = "-".join(f"{v:g}" if isinstance(v, float) else str(v) for v in values)
        tag = "v" + text.lower().replace(".", "p").replace("+", "")
        keyed = {a.key: v for a, v in zip(self.axes, values, strict=True)}
        return self._scenario(keyed, tag, list(values))

    def _scenario(self, values: dict[str, Any], tag: str, where: list[Any]) -> Scenario:
        overrides = {k: v for k, v in values.items() if Axis(k, ()).is_scenario_key}
        base = load_scenario(self.scenario)
        name = f"{base.name}-{tag}"[:40] if overrides else base.name
        try:
            return load_scenario(self.scenario, {**overrides, "name": name})
        except ConfigError as error:
            raise ValueError(f"cell {where}: {error}") from None

    def parameters_of(self, cell: Sequence[int]) -> dict[str, Any]:
        """The controller's arguments in a cell: the fixed ones, then the cell's."""
        return self.parameters_at([a.values[i] for a, i in zip(self.axes, cell, strict=True)])

    def parameters_at(self, values: Sequence[Any]) -> dict[str, Any]:
        """The controller's arguments at these axis values: the fixed ones, then the axes'."""
        own = {a.key: v for a, v in zip(self.axes, values, strict=True) if not a.is_scenario_key}
        return {**self.parameters, **own}

    def header(self) -> dict[str, Any]:
        """What identifies the sweep in its file (a rerun must match it to resume)."""
        return {
            "format": SWEEP_FORMAT,
            "name": self.name,
            "scenario": self.scenario,
            "scenario_hash": scenario_hash(load_scenario(self.scenario)),
            "controller": self.controller,
            "controller_parameters": json.loads(json.dumps(dict(self.parameters))),
            "axes": [{"key": a.key, "values": list(a.values)} for a in self.axes],
            "seeds": list(self.seeds),
        }


def _resume(path: Path, header: dict[str, Any]) -> dict[str, Any]:
    """The sweep file's content if it continues this sweep; SweepConflict otherwise."""
    data = read_json(path)
    if not isinstance(data, dict):
        raise SweepConflict(f"{path}: not a sweep file; delete it or choose another --name")
    for key, value in header.items():
        if data.get(key) != value:
            raise SweepConflict(
                f"{path}: holds another sweep ({key} = {data.get(key)!r:.80}, this sweep "
                f"{value!r:.80}); delete it or choose another --name"
            )
    episodes = data.get("episodes")
    if not isinstance(episodes, list):
        raise SweepConflict(f"{path}: has no 'episodes' list; delete it or choose another --name")
    data["episodes"] = [row for row in episodes if row.get("outcome") != "error"]
    return data


def run_sweep(
    plan: SweepPlan,
    make_factory: FactoryMaker,
    path: str | Path,
    workers: int = 1,
    backend: Backend | None = None,
    progress: bool = True,
    refine: int = 0,
) -> Path:
    """Play every missing episode of the sweep into the file at ``path`` and return it.

    ``make_factory(parameters)`` returns a picklable zero-argument factory of the controller
    with those arguments. Episodes that ended in an error are played again on a rerun. With
    ``refine`` R > 0, R rounds of refinement follow the coarse grid (see the module docstring);
    a file refined before keeps its rounds, and a larger R adds rounds to it.
    """
    if refine < 0:
        raise ValueError(f"refine = {refine}: a number of rounds >= 0")
    path = Path(path)
    header = plan.header()
    seeds = range(plan.seeds[0], plan.seeds[1] + 1)
    calls: list[tuple[Any, ...]] = []
    tags: dict[int, dict[str, Any]] = {}
    with writer_lock(path):
        data = (
            _resume(path, header)
            if path.exists()
            else {**header, "provenance": provenance(), "episodes": []}
        )
        done = {row["index"] for row in data["episodes"]}
        for c, cell in enumerate(plan.cells()):
            scenario = plan.scenario_of(cell)
            factory = make_factory(plan.parameters_of(cell))
            factory()  # bad parameters fail here, not in a worker
            for k, seed in enumerate(seeds):
                index = c * len(seeds) + k
                tags[index] = {"cell": list(cell)}
                if index not in done:
                    spec = EpisodeSpec(f"c{c}", scenario.name, seed, index)
                    calls.append((factory, scenario, spec, None))
        _play(calls, data, tags, path, workers, backend, progress)
        rounds = max(refine, int(data.get("refine", 0)))
        for r in range(1, rounds + 1):
            if any(row["outcome"] == "error" for row in data["episodes"]):
                break  # a round is decided from complete rounds only: rerun to replay errors
            if refine > 0:
                data["refine"] = rounds
            if not _refine_round(plan, make_factory, data, r, path, workers, backend, progress):
                break
    return path


def _refine_round(
    plan: SweepPlan,
    make_factory: FactoryMaker,
    data: dict[str, Any],
    round_: int,
    path: Path,
    workers: int,
    backend: Backend | None,
    progress: bool,
) -> bool:
    """Play refinement round ``round_`` (decided from the rounds before it); False when the
    round adds nothing."""
    before = {**data, "episodes": [r for r in data["episodes"] if r.get("round", 0) < round_]}
    additions = refinement(before)
    if not additions:
        return False
    done = {row["index"] for row in data["episodes"]}
    first = 1 + max(row["index"] for row in before["episodes"])
    calls: list[tuple[Any, ...]] = []
    tags: dict[int, dict[str, Any]] = {}
    index = first
    for values, cell_seeds in additions:
        scenario = plan.scenario_at(values)
        factory = make_factory(plan.parameters_at(values))
        factory()
        for seed in cell_seeds:
            tags[index] = {"values": list(values), "round": round_}
            if index not in done:
                spec = EpisodeSpec(f"r{round_}", scenario.name, seed, index)
                calls.append((factory, scenario, spec, None))
            index += 1
    _play(calls, data, tags, path, workers, backend, progress)
    return True


def _play(
    calls: list[tuple[Any, ...]],
    data: dict[str, Any],
    tags: dict[int, dict[str, Any]],
    path: Path,
    workers: int,
    backend: Backend | None,
    progress: bool,
) -> None:
    """Play ``calls``, adding each row (with its cell, or its values and refinement round, in
    place of the family) to ``data``."""

    def with_cell(row: dict[str, Any]) -> dict[str, Any]:
        row.pop("family", None)
        return {**tags[row["index"]], **row}

    bar = progress_bar(len(calls), 0, f"sweep {path.stem}", progress)
    collect_rows(calls, data, path, workers, backend, bar, with_cell)


# ---------------------------------------------------------------------------------------------
# Refinement: where neighbouring cells disagree.

CellKey = tuple[Any, ...]  # a cell's axis values, in axis order


def _row_values(axes: Sequence[Axis], row: Mapping[str, Any]) -> CellKey:
    """The axis values a row was played at (coarse rows name their cell by index)."""
    if "values" in row:
        return tuple(row["values"])
    return tuple(axis.values[i] for axis, i in zip(axes, row["cell"], strict=True))


def _numeric(values: Sequence[Any]) -> bool:
    return all(isinstance(v, int | float) and not isinstance(v, bool) for v in values)


def grid_values(data: Mapping[str, Any]) -> list[list[Any]]:
    """Per axis, every value some row was played at: the coarse values in their order, or,
    once refinement added values to a numeric axis, all of them ascending."""
    axes = [Axis(a["key"], tuple(a["values"])) for a in data["axes"]]
    out = []
    for k, axis in enumerate(axes):
        extra = {row["values"][k] for row in data["episodes"] if "values" in row}
        extra -= set(axis.values)
        merged = [*axis.values, *extra]
        out.append(sorted(merged) if extra and _numeric(merged) else list(axis.values))
    return out


def _midpoint(a: Any, b: Any) -> Any | None:
    """The value halfway between two numeric axis values, None if none lies strictly between
    (two neighbouring integers)."""
    if isinstance(a, int) and isinstance(b, int):
        mid: Any = (a + b) // 2
    else:
        mid = round((float(a) + float(b)) / 2.0, 9)
    return mid if min(a, b) < mid < max(a, b) else None


def refinement(data: Mapping[str, Any]) -> list[tuple[CellKey, list[int]]]:
    """The next refinement round of a sweep file's content: (cell values, seeds to play) pairs.

    Every played cell is compared with its nearest played neighbour along each axis. Where they
    disagree, an undecided cell gets the next block of seeds (as many as the coarse grid's), and
    two decided cells of different regions get a cell at the midpoint of a numeric axis (playing
    the coarse seeds), or the next block of seeds each on a non-numeric axis. Nothing is added
    beyond MAX_CELLS cells.
    """
    axes = [Axis(a["key"], tuple(a["values"])) for a in data["axes"]]
    first, last = data["seeds"]
    block = last - first + 1
    summaries = {tuple(s.values.values()): s for s in summarise(data)}
    seen: dict[CellKey, set[int]] = {}
    for row in data["episodes"]:
        seen.setdefault(_row_values(axes, row), set()).add(int(row["seed"]))
    grid = grid_values(data)
    new_cells: dict[CellKey, None] = {}
    more_seeds: dict[CellKey, None] = {}
    for k in range(len(axes)):
        lines: dict[CellKey, list[CellKey]] = {}
        for key in summaries:
            lines.setdefault(key[:k] + key[k + 1 :], []).append(key)
        numeric = _numeric(grid[k])
        for line in lines.values():
            line.sort(key=lambda key: grid[k].index(key[k]))
            for a, b in itertools.pairwise(line):
                sa, sb = summaries[a], summaries[b]
                undecided = [c for c, s in ((a, sa), (b, sb)) if s.region == "undecided"]
                if undecided:
                    more_seeds.update(dict.fromkeys(undecided))
                elif sa.region != sb.region:
                    mid = _midpoint(a[k], b[k]) if numeric else None
                    if mid is None:
                        more_seeds.update(dict.fromkeys((a, b)))
                    else:
                        new_cells[a[:k] + (mid,) + a[k + 1 :]] = None
    room = MAX_CELLS - len(summaries)
    out = [(key, list(range(first, last + 1))) for key in list(new_cells)[: max(room, 0)]]
    for key in more_seeds:
        start = max(seen[key]) + 1
        out.append((key, list(range(start, start + block))))
    return out


# ---------------------------------------------------------------------------------------------
# Per-cell summaries.


@dataclass(frozen=True)
class Rate:
    """k of n with its Wilson 95 % interval."""

    k: int
    n: int
    low: float
    high: float

    @classmethod
    def of(cls, k: int, n: int) -> Rate:
        """The rate and interval of k successes in n trials (n = 0 gives [0, 1])."""
        if n == 0:
            return cls(0, 0, 0.0, 1.0)
        low, high = wilson_interval(k, n)
        return cls(k, n, low, high)

    @property
    def value(self) -> float:
        """k / n (NaN for no trials)."""
        return self.k / self.n if self.n else math.nan


@dataclass(frozen=True)
class CellSummary:
    """The outcomes of one cell's episodes."""

    cell: tuple[int, ...]
    values: dict[str, Any]
    episodes: int
    success: Rate
    split: Rate
    spill: Rate  # at least one bird entered the protected zone
    collision: Rate  # at least one step with the drone inside its safety radius of a bird
    median_time: float  # s, to success, over the successful episodes (NaN if none)
    clearance: float  # m, median smallest bird distance to the zone (NaN if not recorded)
    # what refinement did here: "" nothing, "cell" added the cell, "seeds" added seeds to it
    refined: str = ""

    @property
    def region(self) -> str:
        """'split', 'spilled', 'diverted' or 'mixed' by the majority outcome; 'undecided' when
        the leading rate's interval is wider than UNDECIDED_WIDTH."""
        rates = {"split": self.split, "spilled": self.spill, "diverted": self.success}
        name, rate = max(rates.items(), key=lambda item: item[1].value)
        if rate.high - rate.low > UNDECIDED_WIDTH:
            return "undecided"
        return name if rate.value > 0.5 else "mixed"


def summarise(data: Mapping[str, Any]) -> list[CellSummary]:
    """One summary per played cell of a sweep file's content, in cell order; a cell is its
    index along each axis of ``grid_values`` (the coarse grid's, unless refinement added
    values)."""
    axes = [Axis(a["key"], tuple(a["values"])) for a in data["axes"]]
    grid = grid_values(data)
    by_cell: dict[tuple[int, ...], list[Mapping[str, Any]]] = {}
    for row in data["episodes"]:
        values = _row_values(axes, row)
        cell = tuple(g.index(v) for g, v in zip(grid, values, strict=True))
        by_cell.setdefault(cell, []).append(row)
    out = []
    for cell in sorted(by_cell):
        rows = [r for r in by_cell[cell] if r["outcome"] != "error"]
        refined = ""
        if any("round" in r for r in by_cell[cell]):
            refined = "seeds" if any("cell" in r for r in by_cell[cell]) else "cell"
        n = len(rows)
        times = [r["time_to_success"] for r in rows if r["success"]]
        clear = [r["min_zone_clearance"] for r in rows if r.get("min_zone_clearance") is not None]
        out.append(
            CellSummary(
                cell=cell,
                values={a.key: g[i] for a, g, i in zip(axes, grid, cell, strict=True)},
                episodes=n,
                success=Rate.of(sum(bool(r["success"]) for r in rows), n),
                split=Rate.of(sum(r["min_largest_fraction"] < WHOLE_FRACTION for r in rows), n),
                spill=Rate.of(sum(r["breached_birds"] > 0 for r in rows), n),
                collision=Rate.of(sum(r["collision_steps"] > 0 for r in rows), n),
                median_time=float(np.median(times)) if times else math.nan,
                clearance=float(np.median(clear)) if clear else math.nan,
                refined=refined,
            )
        )
    return out

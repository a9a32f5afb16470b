"""A sweep's tables (Markdown, CSV, JSON) and its figure.

The figure of a two-axis sweep is a heat map of the success rate with the split and spill
regions drawn as contours (rate 0.5) and undecided cells marked; a one-axis sweep is a plot of
the four rates with their Wilson bands. Where an axis is a distance from the flock, the birds'
dodge and alarm radii are drawn on it. Cells that refinement added, or added seeds to, are
ringed in the figure and named in a 'refined' column of the tables (only a refined sweep has it).
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from flockward.bench.sweep import CellSummary, grid_values
from flockward.config.atomic import atomic_path
from flockward.config.schema import SCHEMA
from flockward.sim.types import Scenario

__all__ = [
    "BAND_HEADER",
    "RADIUS_AXES",
    "axis_label",
    "band_rows",
    "render_csv",
    "render_json",
    "render_markdown",
    "write_figure",
]

# Controller parameters measured as a distance from the flock, in metres.
RADIUS_AXES = ("push_distance", "standoff")
COLUMNS = ("episodes", "success", "split", "spill", "collision", "median time (s)",
           "clearance (m)", "region")  # fmt: skip


def _rate(rate: Any) -> str:
    return f"{rate.k}/{rate.n} [{rate.low:.2f}, {rate.high:.2f}]"


def _num(x: float) -> str:
    return "-" if math.isnan(x) else f"{x:.1f}"


def _refined(summaries: Sequence[CellSummary]) -> bool:
    return any(s.refined for s in summaries)


def _columns(data: Mapping[str, Any], summaries: Sequence[CellSummary]) -> list[str]:
    keys = [a["key"] for a in data["axes"]]
    return [*keys, *COLUMNS, *(["refined"] if _refined(summaries) else [])]


def _rows(summaries: Sequence[CellSummary]) -> list[list[str]]:
    rows = []
    extra = _refined(summaries)
    for s in summaries:
        values = [f"{v:g}" if isinstance(v, float) else str(v) for v in s.values.values()]
        rows.append(
            [*values, str(s.episodes), _rate(s.success), _rate(s.split), _rate(s.spill),
             _rate(s.collision), _num(s.median_time), _num(s.clearance), s.region,
             *([s.refined or "-"] if extra else [])]
        )  # fmt: skip
    return rows


# The header of the push-band table (scripts/envelope_bands.py, copied into the README).
BAND_HEADER = ("sweep", "where", "diverted at push (m)", "in dodge radii",
               "in alarm radii", "closer", "farther")  # fmt: skip


def _span(a: float, b: float, unit: float) -> str:
    """a..b in units of ``unit``, two decimals ('1.00-1.25', or '1.25' when a == b)."""
    return f"{a / unit:.2f}-{b / unit:.2f}" if a != b else f"{a / unit:.2f}"


def band_rows(
    data: Mapping[str, Any], summaries: Sequence[CellSummary], dodge: float, alarm: float
) -> list[list[str]]:
    """Per value of a two-axis sweep's second axis, the push distances (first axis, m) whose
    cells are 'diverted', in metres and in the flock's dodge and alarm radii, and the regions of
    the cells just closer and just farther than them ('-' for none diverted or no such cell)."""
    first, second = (a["key"] for a in data["axes"])
    by_value: dict[Any, list[CellSummary]] = {}
    for s in summaries:
        by_value.setdefault(s.values[second], []).append(s)
    rows = []
    for value, cells in by_value.items():
        cells = sorted(cells, key=lambda c: float(c.values[first]))
        hits = [k for k, c in enumerate(cells) if c.region == "diverted"]
        label = f"{second} = {value:g}" if isinstance(value, float) else f"{second} = {value}"
        if not hits:
            rows.append([data["name"], label, "none", "-", "-", "-", "-"])
            continue
        lo, hi = hits[0], hits[-1]
        a, b = float(cells[lo].values[first]), float(cells[hi].values[first])
        gaps = [c.values[first] for c in cells[lo : hi + 1] if c.region != "diverted"]
        where = f"{a:g}-{b:g}" if a != b else f"{a:g}"
        where += f" (not {', '.join(f'{g:g}' for g in gaps)})" if gaps else ""
        rows.append([
            data["name"], label, where, _span(a, b, dodge), _span(a, b, alarm),
            cells[lo - 1].region if lo > 0 else "-",
            cells[hi + 1].region if hi + 1 < len(cells) else "-",
        ])  # fmt: skip
    return rows


def render_markdown(data: Mapping[str, Any], summaries: Sequence[CellSummary]) -> str:
    """The per-cell table with a heading naming the sweep."""
    head = _columns(data, summaries)
    lines = [
        f"# Sweep `{data['name']}`: {data['controller']} on {data['scenario']}",
        "",
        f"Seeds {data['seeds'][0]}-{data['seeds'][1]} in every cell. Rates are k/n with "
        "Wilson 95 % intervals; split: the largest group fell below 90 % of the flock; spill: a "
        "bird entered the protected zone; region: the majority outcome ('undecided' when its "
        "interval is wider than 0.5)."
        + (
            f" Refined in {data.get('refine', 0)} round(s): 'cell' marks a cell added between "
            "neighbours that disagreed, 'seeds' a cell given more seeds (not the same seeds as "
            "the others)."
            if _refined(summaries)
            else ""
        ),
        "",
        "| " + " | ".join(head) + " |",
        "|" + "|".join("---" for _ in head) + "|",
    ]
    lines += ["| " + " | ".join(row) + " |" for row in _rows(summaries)]
    return "\n".join(lines) + "\n"


def render_csv(data: Mapping[str, Any], summaries: Sequence[CellSummary]) -> str:
    """The per-cell table as CSV (rates as k/n [low, high])."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(_columns(data, summaries))
    writer.writerows(_rows(summaries))
    return out.getvalue()


def render_json(summaries: Sequence[CellSummary]) -> str:
    """The per-cell summaries as JSON (rates as {k, n, low, high}; NaN as null)."""

    def rate(r: Any) -> dict[str, Any]:
        return {"k": r.k, "n": r.n, "low": r.low, "high": r.high}

    def finite(x: float) -> float | None:
        return None if math.isnan(x) else x

    cells = [
        {
            "cell": list(s.cell),
            "values": s.values,
            "episodes": s.episodes,
            "success": rate(s.success),
            "split": rate(s.split),
            "spill": rate(s.spill),
            "collision": rate(s.collision),
            "median_time": finite(s.median_time),
            "clearance": finite(s.clearance),
            "region": s.region,
            **({"refined": s.refined} if s.refined else {}),
        }
        for s in summaries
    ]
    return json.dumps(cells, indent=1) + "\n"


def _radii(ax: Any, scenario: Scenario, vertical: bool, values: Sequence[float] | None) -> None:
    """The flock's dodge and alarm radii as lines across a distance axis; ``values`` maps the
    axis's values to cell positions 0, 1, ... (None: the axis is in metres already)."""
    for radius, label, style in (
        (scenario.flock.dodge_radius, "dodge radius", ":"),
        (scenario.flock.alarm_radius, "alarm radius", "--"),
    ):
        where = radius if values is None else _position(values, radius)
        line = ax.axvline if vertical else ax.axhline
        line(where, color="tab:blue", linestyle=style, linewidth=1.6, label=label, zorder=5)


def _position(values: Sequence[float], x: float) -> float:
    """Where ``x`` falls among cells at positions 0..n-1 holding ``values`` (ascending),
    linearly between neighbouring cells and beyond the ends."""
    v = np.asarray(values, dtype=float)
    if len(v) == 1:
        return 0.0
    if x <= v[0]:
        return float((x - v[0]) / (v[1] - v[0]))
    if x >= v[-1]:
        return float(len(v) - 1 + (x - v[-1]) / (v[-1] - v[-2]))
    return float(np.interp(x, v, np.arange(len(v))))


def axis_label(key: str) -> str:
    """An axis title: the key and its unit where one is known."""
    section, _, field = key.partition(".")
    spec = SCHEMA.get(section, {}).get(field) if field else None
    unit = "m" if key in RADIUS_AXES else (spec.unit if spec is not None else "")
    return f"{key} ({unit})" if unit else key


def write_figure(
    data: Mapping[str, Any],
    summaries: Sequence[CellSummary],
    scenario: Scenario,
    out_path: str | os.PathLike[str],
) -> Path:
    """The sweep's figure as PNG, SVG or PDF (by the file's suffix)."""
    axes = data["axes"]
    played = grid_values(data)  # every value of each axis some cell was played at
    refined = [s for s in summaries if s.refined]
    fig = Figure(figsize=(7.5, 5.0), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    title = f"{data['controller']} on {data['scenario']}: sweep '{data['name']}'"
    if len(axes) == 1:
        xs = np.array([float(s.values[axes[0]["key"]]) for s in summaries])
        for name, colour in (("success", "tab:green"), ("split", "tab:purple"),
                             ("spill", "tab:orange"), ("collision", "tab:red")):  # fmt: skip
            rates = [getattr(s, name) for s in summaries]
            ax.plot(xs, [r.value for r in rates], "o-", color=colour, label=name)
            ax.fill_between(xs, [r.low for r in rates], [r.high for r in rates], color=colour,
                            alpha=0.15, linewidth=0)  # fmt: skip
        if refined:
            ax.scatter([float(s.values[axes[0]["key"]]) for s in refined],
                       [s.success.value for s in refined], s=140, facecolors="none",
                       edgecolors="0.2", zorder=6, label="refined")  # fmt: skip
        ax.set_xlabel(axis_label(axes[0]["key"]))
        ax.set_ylabel("share of episodes (Wilson 95 % band)")
        ax.set_ylim(-0.02, 1.02)
        if axes[0]["key"] in RADIUS_AXES:
            _radii(ax, scenario, vertical=True, values=None)
    else:
        # Cells at positions 0..n-1 whatever the spacing of the values, labelled with them.
        x_values = [float(v) for v in played[0]]
        y_values = [float(v) for v in played[1]]
        xs, ys = np.arange(len(x_values), dtype=float), np.arange(len(y_values), dtype=float)
        grids = {
            name: np.full((len(ys), len(xs)), np.nan) for name in ("success", "split", "spill")
        }
        undecided = np.zeros((len(ys), len(xs)), dtype=bool)
        for s in summaries:
            i, j = s.cell
            for name, grid in grids.items():
                grid[j, i] = getattr(s, name).value
            undecided[j, i] = s.region == "undecided"
        # A refined grid has holes (cells never played): left blank, not drawn as zero.
        mesh = ax.pcolormesh(xs, ys, np.ma.masked_invalid(grids["success"]), vmin=0.0,
                             vmax=1.0, cmap="Greens", shading="nearest")  # fmt: skip
        fig.colorbar(mesh, ax=ax, label="success rate")
        if len(xs) > 1 and len(ys) > 1:
            for name, colour in (("split", "tab:purple"), ("spill", "tab:orange")):
                ax.contour(xs, ys, np.ma.masked_invalid(grids[name]), levels=[0.5],
                           colors=colour, linewidths=1.5)  # fmt: skip
                ax.plot([], [], color=colour, label=f"{name} rate 0.5")
        jj, ii = np.nonzero(undecided)
        ax.scatter(xs[ii], ys[jj], marker="x", color="0.3", label="undecided")
        if refined:
            ax.scatter([xs[s.cell[0]] for s in refined], [ys[s.cell[1]] for s in refined],
                       s=160, facecolors="none", edgecolors="0.1", linewidths=1.2,
                       label="refined")  # fmt: skip
        ax.set_xticks(xs, [f"{v:g}" for v in x_values])
        ax.set_yticks(ys, [f"{v:g}" for v in y_values])
        ax.set_xlabel(axis_label(axes[0]["key"]))
        ax.set_ylabel(axis_label(axes[1]["key"]))
        if axes[0]["key"] in RADIUS_AXES:
            _radii(ax, scenario, vertical=True, values=x_values)
        if axes[1]["key"] in RADIUS_AXES:
            _radii(ax, scenario, vertical=False, values=y_values)
    ax.set_title(title, fontsize=10)
    ax.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=3)
    ax.grid(True, alpha=0.3)
    fig.tight_layout()
    out = Path(out_path)
    with atomic_path(out) as tmp:
        fig.savefig(tmp, format=out.suffix.lstrip(".").lower() or "png")
    return out

"""Charts of benchmark results beyond the headline: success per family, performance profiles.

Both are written as PNG files atomically; matplotlib is imported only when a chart is drawn.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from flockward.bench.leaderboard import save_figure, scores_by_family
from flockward.bench.statistics import performance_profile

PALETTE = ("#1b7f79", "#c8553d", "#3d5a98", "#d4a017", "#7a4e9c", "#555555", "#8c564b")
# After the palette runs out, the next controllers take the next marker and line style, so every
# (colour, marker) pair up to len(PALETTE) * len(MARKERS) controllers is distinct.
MARKERS = ("o", "s", "^", "D")
LINESTYLES = ("-", "--", ":", "-.")
THRESHOLDS = np.linspace(0.0, 1.0, 101)  # score thresholds of a performance profile


def style(index: int) -> tuple[str, str, str]:
    """The colour, marker and line style of the ``index``-th controller of a chart."""
    cycle = index // len(PALETTE)
    return (
        PALETTE[index % len(PALETTE)],
        MARKERS[cycle % len(MARKERS)],
        LINESTYLES[cycle % len(LINESTYLES)],
    )


def write_family_chart(
    family_rows: Sequence[Mapping[str, Any]],
    path: str | os.PathLike[str],
    suite: str,
    note: str = "",
) -> Path:
    """Success rate per family and controller with Wilson 95 % whiskers, one panel row per
    family, controllers in the order of the rows."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    families = list(dict.fromkeys(r["family"] for r in family_rows))
    names = list(dict.fromkeys(r["controller"] for r in family_rows))
    fig = Figure(figsize=(7.5, 1.0 + 0.22 * max(1, len(families) * (len(names) + 1))), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    step = len(names) + 1
    for r in family_rows:
        f, c = families.index(r["family"]), names.index(r["controller"])
        y = (len(families) - 1 - f) * step + (len(names) - 1 - c)
        mid = r["success_rate"]
        # Clamped at 0: at 0 % and 100 % rounding may put the bound a hair inside the rate.
        err = [[max(0.0, mid - r["success_ci_low"])], [max(0.0, r["success_ci_high"] - mid)]]
        colour, marker, _ = style(c)
        ax.errorbar([mid], [y], xerr=err, fmt=marker, ms=5, color=colour, elinewidth=2,
                    capsize=3)  # fmt: skip
    centres = [(len(families) - 1 - f) * step + (len(names) - 1) / 2 for f in range(len(families))]
    ax.set_yticks(centres, families)
    for f in range(1, len(families)):
        ax.axhline((len(families) - f) * step - 1, color="#cccccc", lw=0.8)
    ax.set_xlim(-0.03, 1.03)
    ax.set_ylim(-1, len(families) * step - 1)
    ax.set_xlabel("success rate with Wilson 95 % interval")
    ax.set_title(f"suite {suite}: success per family", fontsize=10)
    if note:
        fig.suptitle(note, fontsize=9, color="#aa0000")
    ax.grid(axis="x", color="#eeeeee", lw=0.8)
    for c, name in enumerate(names):
        colour, marker, _ = style(c)
        ax.plot([], [], marker, color=colour, label=name)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.12), ncol=min(3, max(1, len(names))),
              fontsize=8, frameon=False)  # fmt: skip
    fig.tight_layout()
    return save_figure(fig, Path(path))


def write_profiles(
    results: Sequence[Mapping[str, Any]],
    names: Sequence[str],
    path: str | os.PathLike[str],
    reps: int = 500,
    seed: int = 0,
) -> Path:
    """Performance profiles: for each result file, the share of episodes scoring above each
    threshold in [0, 1], with a 95 % stratified bootstrap band (Agarwal et al. 2021)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.5, 4.2), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    for i, (result, name) in enumerate(zip(results, names, strict=True)):
        tasks = list(scores_by_family(result).values())
        profile, low, high = performance_profile(tasks, THRESHOLDS, reps=reps, seed=seed)
        colour, _, line = style(i)
        ax.fill_between(THRESHOLDS, low, high, color=colour, alpha=0.25, lw=0)
        ax.plot(THRESHOLDS, profile, color=colour, ls=line, lw=2, label=name)
    ax.set_xlim(0.0, 1.0)
    ax.set_ylim(0.0, 1.02)
    ax.set_xlabel("episode score threshold")
    ax.set_ylabel("share of episodes scoring above it")
    ax.set_title("performance profiles with 95 % stratified bootstrap bands", fontsize=10)
    ax.grid(color="#eeeeee", lw=0.8)
    ax.legend(fontsize=8, frameon=False)
    fig.tight_layout()
    return save_figure(fig, Path(path))

"""Pictures of episodes: live frames, a whole-episode still (PNG) and an animation (GIF).

Everything headless draws on ``matplotlib.figure.Figure`` with an Agg canvas, so rendering works
without a display and never changes the global matplotlib backend. Only ``interactive=True`` (the
environment's "human" mode) imports ``matplotlib.pyplot`` and opens a window.

All coordinates are world metres; one frame shows one world of a batched ``WorldState`` with all
its drones. Drone tracks are (T, P, 2): T time samples of P drones; a (T, 2) track is one drone.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from types import ModuleType
from typing import Any

import numpy as np
from matplotlib import patches
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import LineCollection
from matplotlib.colors import to_rgb, to_rgba
from matplotlib.figure import Figure
from matplotlib.gridspec import GridSpec
from matplotlib.ticker import MaxNLocator

from flockward.config.atomic import atomic_path
from flockward.sim.types import Circle, Polygon, Scenario, WorldState, Zone

# Palette (hex RGB): light colours for areas, dark ones for things that move.
SLATE = "#d5dbe1"  # map background
INK = "#1f262d"  # text, axes
AMBER = "#d9962b"  # protected zone
TEAL = "#2f9c95"  # goal region
PLUM = "#6b4f8a"  # the flock's destination
CHARCOAL = "#33373b"  # birds
SMOKE = "#5d6b78"  # bird trails in the still
CRIMSON = "#b8283f"  # the drones and their tracks
PAPER = "#f4f5f2"  # figure background of the still

ZONE_FILL_ALPHA = 0.28  # translucency of zone interiors
TICK_SECONDS = 0.6  # s, a velocity tick shows where a bird would be after this time
TRACK_MIN_ALPHA = 0.08  # opacity of the oldest visible part of a fading line
SITE_MARGIN_FRACTION = 0.08  # share of the site's span added as margin on each side
SITE_MARGIN_MIN = 40.0  # m, smallest margin, so a tiny site still shows the flock around it
STILL_MAX_TRAIL_POINTS = 400  # time samples per bird trail in the still (longer ones are thinned)
ANIMATION_TRACK_STEPS = 200  # steps of drone track shown per animation frame
GIF_BLEND_LEVELS = 12  # opacity steps per colour pair in the animation's fixed palette
# info entries printed on a frame, with their labels ("" prints the value alone)
INFO_LABELS = {"outcome": "", "n_components": "clusters", "breached_birds": "breached"}

# The zoomed inset that follows the flock (FrameRenderer's ``inset``).
INSET_MODES = ("auto", "on", "off")
INSET_AUTO_SHARE = 0.1  # auto: an inset when the flock spans at most this share of the map's width
INSET_SIDE_SHARE = 0.4  # the inset's side as a share of the frame's shorter side
INSET_FLOCK_SHARE = 0.4  # the flock's span fills at most this share of the inset's width
INSET_MIN_WIDTH = 50.0  # m, narrowest inset, so a drone pushing from close by shows in it
INSET_HEADING_SHARE = 0.035  # a heading tick's length as a share of the inset's width
INSET_EDGE_SHARE = 0.015  # gap between the inset and the frame's edge, share of the frame side
INSET_EDGE_MARK_SHARE = 0.04  # an out-of-view drone's mark: this share of the width inside the edge
INSET_MIN_SIDE_PX = 40.0  # a frame with no room for an inset this large gets none
STATUS_FONT_PT = 8.0  # the status text's size; its two lines sit above an upper inset

Extent = tuple[float, float, float, float]  # (x_min, x_max, y_min, y_max) m


def zone_extent(zone: Zone) -> Extent:
    """Axis-aligned bounding box of a zone."""
    if isinstance(zone, Circle):
        (cx, cy), r = zone.center, zone.radius
        return cx - r, cx + r, cy - r, cy + r
    if isinstance(zone, Polygon):
        v = np.asarray(zone.vertices, dtype=np.float64)
        return (
            float(v[:, 0].min()),
            float(v[:, 0].max()),
            float(v[:, 1].min()),
            float(v[:, 1].max()),
        )
    raise TypeError(f"expected a Circle or Polygon zone, got {type(zone).__name__}")


def site_extent(scenario: Scenario, points: np.ndarray | None = None) -> Extent:
    """A view holding both zones, the destination, both start points (and ``points``), plus margin.

    Computed from the scenario alone, so every frame of an episode shares one view.
    """
    site = scenario.site
    boxes = [*(zone_extent(z) for z in site.protected_zones), zone_extent(site.goal)]
    xy = [site.destination, site.flock_start, scenario.pursuer.start]
    if site.second_start is not None:
        xy.append(site.second_start)
    xs = [b[0] for b in boxes] + [b[1] for b in boxes] + [p[0] for p in xy]
    ys = [b[2] for b in boxes] + [b[3] for b in boxes] + [p[1] for p in xy]
    if points is not None:
        finite = np.asarray(points, dtype=np.float64).reshape(-1, 2)
        finite = finite[np.all(np.isfinite(finite), axis=1)]
        if len(finite):
            xs += [float(finite[:, 0].min()), float(finite[:, 0].max())]
            ys += [float(finite[:, 1].min()), float(finite[:, 1].max())]
    x0, x1, y0, y1 = min(xs), max(xs), min(ys), max(ys)
    margin = max(SITE_MARGIN_FRACTION * max(x1 - x0, y1 - y0), SITE_MARGIN_MIN)
    return x0 - margin, x1 + margin, y0 - margin, y1 + margin


def fit_aspect(extent: Extent, width_over_height: float) -> Extent:
    """Grow the shorter side of ``extent`` about its centre so it has the given aspect ratio."""
    x0, x1, y0, y1 = extent
    w, h = x1 - x0, y1 - y0
    if w / h < width_over_height:
        grow = (h * width_over_height - w) / 2.0
        return x0 - grow, x1 + grow, y0, y1
    grow = (w / width_over_height - h) / 2.0
    return x0, x1, y0 - grow, y1 + grow


def zone_patch(zone: Zone, colour: str, zorder: float) -> patches.Patch:
    """A translucent filled patch of the zone with an opaque outline."""
    style = dict(
        facecolor=to_rgba(colour, ZONE_FILL_ALPHA),
        edgecolor=to_rgba(colour, 1.0),
        linewidth=1.5,
        zorder=zorder,
    )
    if isinstance(zone, Circle):
        return patches.Circle(zone.center, zone.radius, **style)
    return patches.Polygon(np.asarray(zone.vertices, dtype=np.float64), closed=True, **style)


def draw_site(ax: Axes, scenario: Scenario) -> None:
    """Protected zones, goal region and the flock's destination: the static part of every view."""
    for zone in scenario.site.protected_zones:
        ax.add_patch(zone_patch(zone, AMBER, zorder=1))
    ax.add_patch(zone_patch(scenario.site.goal, TEAL, zorder=1))
    dx, dy = scenario.site.destination
    ax.plot([dx], [dy], marker="X", markersize=8, color=PLUM, linestyle="none", zorder=2)


def fading_colours(colour: str, n: int, max_alpha: float = 1.0) -> np.ndarray:
    """(n, 4) RGBA rows of one colour, opacity rising from faint (first) to ``max_alpha`` (last)."""
    out = np.empty((n, 4))
    out[:, :3] = to_rgb(colour)
    out[:, 3] = np.linspace(TRACK_MIN_ALPHA, max_alpha, n) if n > 1 else max_alpha
    return out


def path_segments(path: np.ndarray) -> np.ndarray:
    """Consecutive point pairs of a (T, 2) path as (T - 1, 2, 2) line segments."""
    path = np.asarray(path, dtype=np.float64).reshape(-1, 2)
    if len(path) < 2:
        return np.empty((0, 2, 2))
    return np.stack([path[:-1], path[1:]], axis=1)


def drone_tracks(track: np.ndarray) -> np.ndarray:
    """A drone track as (T, P, 2) float64; a (T, 2) track is one drone's."""
    track = np.asarray(track, dtype=np.float64)
    return track[:, None, :] if track.ndim == 2 else track


def track_segments(
    track: np.ndarray, colour: str, max_alpha: float
) -> tuple[np.ndarray, np.ndarray]:
    """Line segments (S, 2, 2) of every drone's path in a (T, P, 2) track, drone after drone, and
    their (S, 4) colours, each drone's fading from its oldest segment to its newest."""
    track = drone_tracks(track)
    segments = [path_segments(track[:, q]) for q in range(track.shape[1])]
    colours = [fading_colours(colour, len(s), max_alpha) for s in segments]
    if not segments:
        return np.empty((0, 2, 2)), np.empty((0, 4))
    return np.concatenate(segments), np.concatenate(colours)


def velocity_ticks(pos: np.ndarray, vel: np.ndarray) -> np.ndarray:
    """(n, 2, 2) segments from each bird along its velocity for TICK_SECONDS."""
    return np.stack([pos, pos + TICK_SECONDS * vel], axis=1)


def scale_length(span: float) -> float:
    """A round length (1, 2 or 5 times a power of ten metres) near a fifth of ``span``."""
    target = max(span / 5.0, 1e-9)
    power = 10.0 ** np.floor(np.log10(target))
    return float(max(m * power for m in (1.0, 2.0, 5.0) if m * power <= target))


def round_up_length(length: float) -> float:
    """The smallest round length (1, 2 or 5 times a power of ten metres) at least ``length``."""
    power = 10.0 ** np.floor(np.log10(max(length, 1e-9)))
    return float(min(m * power for m in (1.0, 2.0, 5.0, 10.0) if m * power >= length))


def flock_span(pos: np.ndarray) -> float:
    """The larger side (m) of the bounding box of (n, 2) bird positions; 0 for fewer than 2."""
    return float(np.ptp(pos, axis=0).max()) if len(pos) > 1 else 0.0


def inset_width(span: float) -> float:
    """Width (m) of the inset's view of a flock spanning ``span`` m: a round length that leaves
    the flock at most INSET_FLOCK_SHARE of it, and at least INSET_MIN_WIDTH."""
    return round_up_length(max(span / INSET_FLOCK_SHARE, INSET_MIN_WIDTH))


def wants_inset(mode: str, span: float, map_width: float) -> bool:
    """Whether a frame gets the inset: always ("on"), never ("off"), or ("auto") when the flock
    spans at most INSET_AUTO_SHARE of the map's width, where its birds merge into one blob."""
    if mode not in INSET_MODES:
        raise ValueError(f"inset = {mode!r}: choose one of {', '.join(INSET_MODES)}")
    return mode == "on" or (mode == "auto" and span <= INSET_AUTO_SHARE * map_width)


def draw_scale_bar(ax: Axes, extent: Extent) -> None:
    """A labelled bar of a round length in the lower-left corner of a map without axes."""
    x0, x1, y0, y1 = extent
    length = scale_length(x1 - x0)
    left, base = x0 + 0.04 * (x1 - x0), y0 + 0.05 * (y1 - y0)
    ax.plot([left, left + length], [base, base], color=INK, linewidth=2.0, zorder=7)
    ax.text(left + length / 2, base + 0.015 * (y1 - y0), f"{length:g} m", ha="center",
            va="bottom", fontsize=7, color=INK, zorder=7)  # fmt: skip


def draw_wind(ax: Axes, scenario: Scenario, extent: Extent, corner: str = "upper") -> None:
    """An arrow in the right-hand ``corner`` ("upper" or "lower") along the steady wind (pointing
    where it blows to), labelled with its speed, origin and turbulence; nothing in still air."""
    wind = scenario.wind
    if wind.calm:
        return
    x0, x1, y0, y1 = extent
    length = 0.07 * (x1 - x0)
    cx, cy = x1 - 0.12 * (x1 - x0), y1 - 0.1 * (y1 - y0)
    if corner == "lower":  # room below the arrow for three lines of text
        cy = y0 + 0.22 * (y1 - y0)
    wx, wy = wind.velocity
    speed = math.hypot(wx, wy)
    if speed > 0.0:
        dx, dy = 0.5 * length * wx / speed, 0.5 * length * wy / speed
        ax.annotate("", xy=(cx + dx, cy + dy), xytext=(cx - dx, cy - dy), zorder=7,
                    arrowprops=dict(arrowstyle="-|>", color=INK, linewidth=1.5))  # fmt: skip
    text = f"wind {wind.speed:g} m/s\nfrom {wind.from_deg:g} deg"
    if wind.turbulence != "none":
        text += f"\n{wind.turbulence} gusts"
    ax.text(cx, cy - 0.06 * (y1 - y0), text, ha="center", va="top", fontsize=7, color=INK,
            zorder=7)  # fmt: skip


def inset_box(
    size_px: tuple[float, float], corner: str, top_clear_px: float = 0.0
) -> tuple[float, float, float, float] | None:
    """The inset's (left, bottom, width, height) in figure fractions: a square of pixels in the
    frame's right-hand ``corner`` ("upper" or "lower"), an upper one starting ``top_clear_px``
    below the top (under the status text); None when the frame has no room for one."""
    width, height = size_px
    gap = INSET_EDGE_SHARE * min(width, height)
    side = min(INSET_SIDE_SHARE * min(width, height), height - 2 * gap - top_clear_px)
    if side < INSET_MIN_SIDE_PX:
        return None
    w, h = side / width, side / height
    bottom = 1.0 - (gap + top_clear_px + side) / height if corner == "upper" else gap / height
    return 1.0 - (gap + side) / width, bottom, w, h


def inset_corner(
    scenario: Scenario,
    extent: Extent,
    size_px: tuple[float, float],
    points: np.ndarray | None = None,
) -> str:
    """The right-hand corner ("upper" or "lower") where the inset hides less of a map of
    ``extent`` filling the frame: counted are the share of each zone's bounding box it covers,
    the destination and start points under it, and the share of ``points`` (such as an episode's
    flock centres and drone positions) under it. Upper wins a tie; the left-hand corners hold
    the status text and the scale bar."""
    x0, x1, y0, y1 = extent
    site = scenario.site
    marks = np.array([site.destination, site.flock_start, scenario.pursuer.start])
    extra = np.empty((0, 2)) if points is None else np.asarray(points, dtype=np.float64)

    def hidden(corner: str) -> float:
        box = inset_box(size_px, corner)
        if box is None:
            return 0.0
        left, bottom, w, h = box
        rx0, ry0 = x0 + left * (x1 - x0), y0 + bottom * (y1 - y0)
        rx1, ry1 = rx0 + w * (x1 - x0), ry0 + h * (y1 - y0)
        score = 0.0
        for zone in (*site.protected_zones, site.goal):
            zx0, zx1, zy0, zy1 = zone_extent(zone)
            overlap = max(0.0, min(zx1, rx1) - max(zx0, rx0)) * max(
                0.0, min(zy1, ry1) - max(zy0, ry0)
            )
            score += overlap / max((zx1 - zx0) * (zy1 - zy0), 1e-9)

        def under(xy: np.ndarray) -> np.ndarray:
            return (rx0 <= xy[:, 0]) & (xy[:, 0] <= rx1) & (ry0 <= xy[:, 1]) & (xy[:, 1] <= ry1)

        score += float(under(marks).sum())
        if len(extra):
            score += float(under(extra).mean())
        return score

    return min(("upper", "lower"), key=hidden)


class FlockInset:
    """A zoomed view in a corner of a frame that follows the flock: every bird with a tick along
    its heading, the site and the drones (a drone out of view as a hollow diamond at the edge,
    towards it), its own scale bar. An outline on the map marks the area it shows.

    The view is centred on the birds' bounding box and is ``inset_width`` wide, a round length, so
    its scale changes only in steps as the flock spreads or gathers.
    """

    def __init__(
        self, fig: Figure, map_ax: Axes, scenario: Scenario, box: tuple[float, float, float, float]
    ):
        ax = fig.add_axes(box)
        ax.set_facecolor(SLATE)
        ax.set_xticks([])
        ax.set_yticks([])
        for spine in ax.spines.values():
            spine.set_edgecolor(INK)
            spine.set_linewidth(1.0)
        ax.set_autoscale_on(False)
        draw_site(ax, scenario)
        self.ax = ax
        self.track = LineCollection([], linewidths=1.2, zorder=3)
        ax.add_collection(self.track)
        self.headings = LineCollection([], colors=CHARCOAL, linewidths=0.9, zorder=4)
        ax.add_collection(self.headings)
        self.birds = ax.scatter(
            np.empty(0), np.empty(0), s=6.0, color=CHARCOAL, linewidths=0.0, zorder=5
        )
        (self.drones,) = ax.plot([], [], marker="D", markersize=7, markerfacecolor=CRIMSON,
                                 markeredgecolor=INK, markeredgewidth=0.8, linestyle="none",
                                 zorder=6)  # fmt: skip
        (self.beyond,) = ax.plot([], [], marker="D", markersize=5, markerfacecolor="none",
                                 markeredgecolor=CRIMSON, markeredgewidth=1.2, linestyle="none",
                                 zorder=6)  # fmt: skip
        (self.bar,) = ax.plot([], [], color=INK, linewidth=2.0, zorder=7)
        self.bar_label = ax.text(0.0, 0.0, "", ha="center", va="bottom", fontsize=7, color=INK,
                                 zorder=7)  # fmt: skip
        self.outline = patches.Rectangle(
            (0.0, 0.0), 0.0, 0.0, fill=False, edgecolor=INK, linewidth=1.0, zorder=6
        )
        map_ax.add_patch(self.outline)
        self.show(False)

    def show(self, visible: bool) -> None:
        """Show or hide the inset and its outline on the map."""
        self.ax.set_visible(visible)
        self.outline.set_visible(visible)

    def update(
        self,
        pos: np.ndarray,
        vel: np.ndarray,
        drones: np.ndarray,
        segments: np.ndarray,
        colours: np.ndarray,
    ) -> Extent:
        """Centre the view on the (n >= 1, 2) birds, redraw them, the drones (P, 2) and their
        track segments; return the view's extent."""
        cx, cy = (pos.min(axis=0) + pos.max(axis=0)) / 2.0
        width = inset_width(flock_span(pos))
        x0, x1, y0, y1 = cx - width / 2, cx + width / 2, cy - width / 2, cy + width / 2
        self.ax.set_xlim(x0, x1)
        self.ax.set_ylim(y0, y1)
        self.outline.set_bounds(x0, y0, width, width)
        self.birds.set_offsets(pos)
        speed = np.hypot(vel[:, 0], vel[:, 1])[:, None]
        heading = np.divide(vel, speed, out=np.zeros_like(vel), where=speed > 0.0)
        tip = pos + INSET_HEADING_SHARE * width * heading
        self.headings.set_segments(list(np.stack([pos, tip], axis=1)))
        self.track.set_segments(list(segments))
        self.track.set_color(colours)  # type: ignore[arg-type]  # (S, 4) RGBA, as on the map
        self.drones.set_data(drones[:, 0], drones[:, 1])
        # A drone out of view: a hollow diamond just inside the edge, on the line from the
        # view's centre towards it.
        reach = (0.5 - INSET_EDGE_MARK_SHARE) * width
        offset = drones - (cx, cy)  # (P, 2)
        far = np.abs(offset).max(axis=1) > width / 2
        edge = (cx, cy) + offset[far] * (reach / np.abs(offset[far]).max(axis=1))[:, None]
        self.beyond.set_data(edge[:, 0], edge[:, 1])
        length = scale_length(width)
        left, base = x0 + 0.06 * width, y0 + 0.06 * width
        self.bar.set_data([left, left + length], [base, base])
        self.bar_label.set_position((left + length / 2, base + 0.02 * width))
        self.bar_label.set_text(f"{length:g} m")
        return x0, x1, y0, y1


def status_line(scenario: Scenario, info: Mapping[str, Any], label: str = "") -> str:
    """The text printed on a frame: scenario and ``label`` (such as the controller and seed) on
    one line, the step and the INFO_LABELS entries in ``info`` on the next."""
    head = "   ".join([scenario.name, *([label] if label else [])])
    parts = [f"step {info.get('steps', 0)}"]
    parts += [f"{label_} {info[key]}".strip() for key, label_ in INFO_LABELS.items() if key in info]
    return head + "\n" + "   ".join(parts)


class FrameRenderer:
    """Draws frames of one world, reusing one figure whose artists only change their data.

    ``interactive=False`` renders off-screen (Agg) and is safe headless; ``interactive=True`` also
    shows the figure in a pyplot window, pausing ``1 / fps`` s per frame.

    ``inset`` adds a ``FlockInset`` in a right-hand corner: "on" in every frame, "auto" in the
    frames where the flock spans at most INSET_AUTO_SHARE of the map's width (``wants_inset``),
    "off" never (the frame is then exactly what it was before insets existed). The corner is the
    one hiding less of the site and of ``avoid`` (M, 2) points, such as the episode's flock
    centres and drone positions; the wind label moves to the other right-hand corner.
    """

    def __init__(
        self,
        scenario: Scenario,
        interactive: bool = False,
        size_px: tuple[int, int] = (640, 640),
        fps: float = 20.0,
        dpi: int = 100,
        label: str = "",
        inset: str = "auto",
        avoid: np.ndarray | None = None,
    ):
        width, height = size_px
        self.label = label  # printed after the scenario name on every frame
        if width < 16 or height < 16:
            raise ValueError(f"size_px = {size_px}: give (width, height) of at least 16 pixels")
        wants_inset(inset, 0.0, 1.0)  # refuses an unknown mode before any figure exists
        self.inset_mode = inset
        self.scenario = scenario
        self.interactive = interactive
        self.pause = 1.0 / fps
        figsize = (width / dpi, height / dpi)
        self._plt: ModuleType | None  # matplotlib.pyplot, only while a window is open
        if interactive:
            import matplotlib.pyplot as plt

            self._plt = plt
            self.fig = plt.figure(figsize=figsize, dpi=dpi)
        else:
            self._plt = None
            self.fig = Figure(figsize=figsize, dpi=dpi)
            FigureCanvasAgg(self.fig)
        self.fig.patch.set_facecolor(SLATE)
        ax = self.fig.add_axes((0.0, 0.0, 1.0, 1.0))
        ax.set_facecolor(SLATE)
        ax.set_axis_off()
        x0, x1, y0, y1 = fit_aspect(site_extent(scenario), width / height)
        ax.set_xlim(x0, x1)
        ax.set_ylim(y0, y1)
        ax.set_aspect("equal", adjustable="box")
        ax.set_autoscale_on(False)
        draw_site(ax, scenario)
        draw_scale_bar(ax, (x0, x1, y0, y1))
        self.map_width = x1 - x0  # m
        corner, box = "upper", None
        if inset != "off":
            corner = inset_corner(scenario, (x0, x1, y0, y1), size_px, avoid)
            status_px = 2 * 1.25 * STATUS_FONT_PT * dpi / 72.0  # two lines of text, in pixels
            box = inset_box(size_px, corner, status_px if corner == "upper" else 0.0)
        wind_corner = "lower" if box is not None and corner == "upper" else "upper"
        draw_wind(ax, scenario, (x0, x1, y0, y1), wind_corner)
        self.ax = ax
        self.track = LineCollection([], linewidths=1.2, zorder=3)
        ax.add_collection(self.track)
        self.ticks = LineCollection([], colors=CHARCOAL, linewidths=0.8, zorder=4)
        ax.add_collection(self.ticks)
        self.birds = ax.scatter(
            np.empty(0), np.empty(0), s=9.0, color=CHARCOAL, linewidths=0.0, zorder=5
        )
        (self.pursuer,) = ax.plot(
            [],
            [],
            marker="D",
            markersize=7,
            markerfacecolor=CRIMSON,
            markeredgecolor=INK,
            markeredgewidth=0.8,
            linestyle="none",
            zorder=6,
        )
        self.text = ax.text(
            0.015,
            0.985,
            "",
            transform=ax.transAxes,
            ha="left",
            va="top",
            fontsize=STATUS_FONT_PT,
            family="monospace",
            color=INK,
            zorder=7,
        )
        self.inset: FlockInset | None = None
        if box is not None:
            self.inset = FlockInset(self.fig, ax, scenario, box)

    def draw(
        self, state: WorldState, index: int, track: np.ndarray, info: Mapping[str, Any]
    ) -> np.ndarray:
        """An (H, W, 3) uint8 RGB frame of world ``index`` with every drone; ``track`` (T, P, 2)
        is the drones' recent path."""
        n = int(state.count[index])
        pos = np.asarray(state.bird_pos[index, :n], dtype=np.float64)
        vel = np.asarray(state.bird_vel[index, :n], dtype=np.float64)
        self.birds.set_offsets(pos)
        self.ticks.set_segments(list(velocity_ticks(pos, vel)))
        segments, colours = track_segments(track, CRIMSON, max_alpha=0.9)
        self.track.set_segments(list(segments))
        # matplotlib's stubs leave out the (S, 4) RGBA array that set_color documents and accepts
        self.track.set_color(colours)  # type: ignore[arg-type]
        drones = np.asarray(state.pursuer_pos[index], dtype=np.float64)  # (P, 2)
        self.pursuer.set_data(drones[:, 0], drones[:, 1])
        self.text.set_text(status_line(self.scenario, info, self.label))
        if self.inset is not None:
            shown = n > 0 and wants_inset(self.inset_mode, flock_span(pos), self.map_width)
            self.inset.show(shown)
            if shown:
                self.inset.update(pos, vel, drones, segments, colours)
        canvas = self.fig.canvas
        canvas.draw()
        if not isinstance(canvas, FigureCanvasAgg):
            raise TypeError(
                f"matplotlib canvas {type(canvas).__name__} cannot return pixels; use an "
                "Agg-based backend (Agg, TkAgg, QtAgg, MacOSX)"
            )
        # matplotlib's Agg backend module carries no annotations
        frame = np.asarray(canvas.buffer_rgba())[..., :3].copy()  # type: ignore[no-untyped-call]
        if self._plt is not None:
            self._plt.pause(self.pause)
        return frame

    def close(self) -> None:
        """Release the figure (and its window, if interactive). Safe to call twice."""
        if self._plt is not None:
            self._plt.close(self.fig)
            self._plt = None
        self.fig.clear()


def _stack_birds(frames: Sequence[Mapping[str, Any]]) -> np.ndarray:
    """Bird positions of all frames as (T, n, 2); the flock size must not change in an episode."""
    sizes = {np.shape(f["bird_pos"]) for f in frames}
    if len(sizes) != 1:
        raise ValueError(
            f"frames hold bird_pos of shapes {sorted(sizes)}; record the same (n, 2) active birds "
            "in every frame of an episode"
        )
    return np.stack([np.asarray(f["bird_pos"], dtype=np.float64) for f in frames])


def _stack_drones(frames: Sequence[Mapping[str, Any]]) -> np.ndarray:
    """Drone positions of all frames as (T, P, 2); a frame's (2,) position is one drone's."""
    return np.stack([np.asarray(f["pursuer_pos"], dtype=np.float64).reshape(-1, 2) for f in frames])


def _check_frames(frames: Sequence[Mapping[str, Any]]) -> None:
    """Refuse an empty episode: every picture needs at least the reset state."""
    if len(frames) == 0:
        raise ValueError("frames is empty; record at least the reset state of the episode")


def first_event_times(frames: Sequence[Mapping[str, Any]], dt: float) -> dict[str, float]:
    """When the flock first split (more than one cluster) and when a bird first entered the
    protected zone (``breached_birds`` > 0), in seconds; absent events are left out."""
    events: dict[str, float] = {}
    for frame in frames:
        t = float(frame["step"]) * dt
        if "split" not in events and int(frame.get("n_components", 1)) > 1:
            events["split"] = t
        if "breach" not in events and int(frame.get("breached_birds", 0)) > 0:
            events["breach"] = t
    return events


STILL_FORMATS = ("png", "svg", "pdf")


def _still_format(out_path: str | os.PathLike[str]) -> str:
    """The still's file format from its suffix (PNG when there is none)."""
    fmt = Path(out_path).suffix.lstrip(".").lower() or "png"
    if fmt not in STILL_FORMATS:
        raise ValueError(f"{out_path}: a still ends in .png, .svg or .pdf")
    return fmt


def still_inset_box(
    scenario: Scenario,
    fig: Figure,
    map_ax: Axes,
    extent: Extent,
    avoid: np.ndarray,
) -> tuple[str, tuple[float, float, float, float] | None]:
    """The right-hand corner and the (left, bottom, width, height) figure fractions of a still's
    inset: ``inset_box`` and ``inset_corner`` applied to the map panel ``map_ax`` of ``extent`` as
    if it were a frame of its own (the still prints no status text over the map); no box when the
    panel has no room for one."""
    panel = map_ax.get_position()
    panel_px = (panel.width * fig.get_figwidth() * fig.dpi,
                panel.height * fig.get_figheight() * fig.dpi)  # fmt: skip
    corner = inset_corner(scenario, extent, panel_px, avoid)
    inner = inset_box(panel_px, corner)
    if inner is None:
        return corner, None
    left, bottom, width, height = inner
    return corner, (
        panel.x0 + left * panel.width,
        panel.y0 + bottom * panel.height,
        width * panel.width,
        height * panel.height,
    )


def episode_still(
    scenario: Scenario,
    frames: Sequence[Mapping[str, Any]],
    out_path: str | os.PathLike[str],
    label: str = "",
    inset: str = "auto",
) -> Path:
    """Write a summary of one episode (PNG, SVG or PDF by the suffix of ``out_path``): a map of
    trails and three metrics over time.

    ``frames`` holds one dict per recorded step with ``bird_pos`` (n, 2), ``bird_vel`` (n, 2),
    ``pursuer_pos`` (P, 2) (or (2,) for one drone), ``step``, ``goal_distance`` (m), ``diameter``
    (m) and ``n_components``; optional ``breached_birds`` and ``outcome``. ``label`` (such as
    the controller and seed) joins the title; the first split and first breach are marked on
    the time plots. ``inset`` is the animation's (``episode_inset`` on the still's map): a
    ``FlockInset`` of the final flock, the drones and their whole tracks, in the right-hand corner
    hiding less of the map; the wind label takes the other right-hand corner and the legend the
    lower-left one. With "off" (or "auto" deciding against it) the still is the one drawn before
    stills had insets.
    """
    _check_frames(frames)
    birds = _stack_birds(frames)  # (T, n, 2)
    drones = _stack_drones(frames)  # (T, P, 2)
    seconds = np.array([f["step"] for f in frames], dtype=np.float64) * scenario.episode.dt

    fig = Figure(figsize=(12.0, 7.0), dpi=100, facecolor=PAPER)
    FigureCanvasAgg(fig)
    grid = GridSpec(3, 2, figure=fig, width_ratios=(2.1, 1.0), wspace=0.18, hspace=0.45)
    grid.update(left=0.06, right=0.98, top=0.93, bottom=0.08)
    ax = fig.add_subplot(grid[:, 0])
    ax.set_facecolor(SLATE)
    box = ax.get_position()
    panel_aspect = (box.width * fig.get_figwidth()) / (box.height * fig.get_figheight())
    everything = site_extent(
        scenario, np.concatenate([birds.reshape(-1, 2), drones.reshape(-1, 2)])
    )
    x0, x1, y0, y1 = fit_aspect(everything, panel_aspect)
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_aspect("equal", adjustable="box")
    ax.set_autoscale_on(False)
    ax.tick_params(labelsize=8, colors=INK)
    ax.set_xlabel("x (m)", fontsize=9, color=INK)
    ax.set_ylabel("y (m)", fontsize=9, color=INK)
    draw_site(ax, scenario)
    corner, view_box = "upper", None
    if episode_inset(inset, list(birds), x1 - x0) == "on" and birds.shape[1] > 0:
        centres = (birds.min(axis=1) + birds.max(axis=1)) / 2.0  # (T, 2)
        avoid = np.concatenate([centres, drones.reshape(-1, 2)])
        corner, view_box = still_inset_box(scenario, fig, ax, (x0, x1, y0, y1), avoid)
    wind_corner = "lower" if view_box is not None and corner == "upper" else "upper"
    draw_wind(ax, scenario, (x0, x1, y0, y1), wind_corner)

    thin = max(1, -(-len(frames) // STILL_MAX_TRAIL_POINTS))  # ceil: keep at most the cap
    keep = np.unique(np.r_[np.arange(0, len(frames), thin), len(frames) - 1])
    trail = birds[keep]  # (T', n, 2)
    if len(keep) > 1 and trail.shape[1] > 0:
        pairs = np.stack([trail[:-1], trail[1:]], axis=2)  # (T'-1, n, 2, 2)
        colours = np.repeat(fading_colours(SMOKE, len(keep) - 1, 0.55), trail.shape[1], axis=0)
        ax.add_collection(
            LineCollection(list(pairs.reshape(-1, 2, 2)), colors=colours, linewidths=0.5, zorder=2)
        )
    drone_segments, drone_colours = track_segments(drones, CRIMSON, 0.95)
    ax.add_collection(
        LineCollection(list(drone_segments), colors=drone_colours, linewidths=1.3, zorder=3)
    )
    last = frames[-1]
    final_pos = birds[-1]
    final_vel = np.asarray(last["bird_vel"], dtype=np.float64).reshape(-1, 2)
    ax.add_collection(
        LineCollection(
            list(velocity_ticks(final_pos, final_vel)), colors=CHARCOAL, linewidths=0.8, zorder=4
        )
    )
    ax.scatter(final_pos[:, 0], final_pos[:, 1], s=10.0, color=CHARCOAL, linewidths=0, zorder=5)
    start, end = drones[0], drones[-1]  # (P, 2) each
    ax.plot(*start.T, "o", markersize=6, color="none", markeredgecolor=CRIMSON, zorder=6)
    ax.plot(*end.T, "D", markersize=7, color=CRIMSON, markeredgecolor=INK, zorder=6)
    if view_box is not None:
        view = FlockInset(fig, ax, scenario, view_box)
        view.show(True)
        view.update(final_pos, final_vel, end, drone_segments, drone_colours)
    handles = [
        patches.Patch(
            facecolor=to_rgba(AMBER, ZONE_FILL_ALPHA), edgecolor=AMBER, label="protected"
        ),
        patches.Patch(facecolor=to_rgba(TEAL, ZONE_FILL_ALPHA), edgecolor=TEAL, label="goal"),
        ax.plot([], [], "X", color=PLUM, label="destination")[0],
        ax.plot([], [], "o", color=CHARCOAL, markersize=4, label="final flock")[0],
        ax.plot([], [], "-D", color=CRIMSON, markersize=5, label="drone")[0],
    ]
    ax.legend(
        handles=handles,
        loc="lower right" if view_box is None else "lower left",
        fontsize=8,
        framealpha=0.85,
    )
    outcome = str(last.get("outcome", ""))
    heading = " | ".join(
        part
        for part in (scenario.name, label, f"{int(last['step'])} steps ({seconds[-1]:.1f} s)")
        if part
    )
    fig.suptitle(
        f"{heading}{': ' + outcome if outcome and outcome != 'running' else ''}",
        fontsize=12,
        color=INK,
    )
    events = first_event_times(frames, scenario.episode.dt)

    series = (
        ("goal_distance", "distance to goal (m)", False),
        ("diameter", "flock diameter (m)", False),
        ("n_components", "clusters", True),
    )
    for row, (key, title, steps) in enumerate(series):
        panel = fig.add_subplot(grid[row, 1])
        values = np.array([f[key] for f in frames], dtype=np.float64)
        if steps:
            panel.step(seconds, values, where="post", color=INK, linewidth=1.2)
            panel.yaxis.set_major_locator(MaxNLocator(integer=True))
            panel.set_ylim(0, np.nanmax(values, initial=1.0) + 1)
        else:
            panel.plot(seconds, values, color=INK, linewidth=1.2)
        for (event, when), colour in zip(events.items(), (PLUM, AMBER), strict=False):
            panel.axvline(when, color=colour, linestyle="--", linewidth=1.0, label=event)
        if events and row == 0:
            panel.legend(loc="upper right", fontsize=7, framealpha=0.85)
        panel.set_title(title, fontsize=9, color=INK, loc="left")
        panel.tick_params(labelsize=8, colors=INK)
        panel.grid(True, color=SLATE, linewidth=0.6)
        panel.set_facecolor("white")
        if row == len(series) - 1:
            panel.set_xlabel("time (s)", fontsize=9, color=INK)

    with atomic_path(out_path) as tmp:
        fig.savefig(tmp, format=_still_format(out_path), facecolor=PAPER)
    return Path(out_path)


def blend_palette() -> np.ndarray:
    """(K, 3) uint8 colours a frame can contain: each drawing colour blended over each area colour.

    Anti-aliased edges and fading tracks are such blends, so one palette fits every frame of any
    episode, unlike a palette fitted to the first frame (which has no track yet).
    """
    slate = np.array(to_rgb(SLATE))
    areas = [slate] + [
        (1 - ZONE_FILL_ALPHA) * slate + ZONE_FILL_ALPHA * np.array(to_rgb(c)) for c in (AMBER, TEAL)
    ]
    inks = [np.array(to_rgb(c)) for c in (INK, AMBER, TEAL, PLUM, CHARCOAL, CRIMSON)]
    alpha = np.linspace(0.0, 1.0, GIF_BLEND_LEVELS)[:, None]
    rows = [(1 - alpha) * area + alpha * ink for area in areas for ink in inks]
    colours = np.unique(np.round(np.concatenate(rows) * 255).astype(np.uint8), axis=0)
    return colours[:256]


def episode_inset(inset: str, flocks: Sequence[np.ndarray], map_width: float) -> str:
    """The inset mode for a whole episode whose frames hold the (n, 2) bird positions ``flocks``,
    drawn on a map ``map_width`` m wide: "auto" becomes "on" when the flock's median span over
    the frames with birds is at most INSET_AUTO_SHARE of the map's width (``wants_inset``), else
    "off"; "on" and "off" stay as they are. Deciding once keeps an animation's inset from
    blinking on and off, and gives a still the same rule."""
    wants_inset(inset, 0.0, 1.0)
    if inset != "auto":
        return inset
    spans = [flock_span(pos) for pos in flocks if len(pos)]
    if not spans:
        return "off"
    return "on" if wants_inset("auto", float(np.median(spans)), map_width) else "off"


def animation_inset(
    scenario: Scenario,
    frames: Sequence[Mapping[str, Any]],
    size_px: tuple[int, int],
    inset: str,
) -> tuple[str, np.ndarray]:
    """The inset mode for a whole animation (``episode_inset`` on the animation's map) and the
    flock's (T', 2) centres in the frames with birds."""
    wants_inset(inset, 0.0, 1.0)
    flocks = [np.asarray(f["bird_pos"], dtype=np.float64).reshape(-1, 2) for f in frames]
    flocks = [pos for pos in flocks if len(pos)]
    centres = np.array([(pos.min(axis=0) + pos.max(axis=0)) / 2.0 for pos in flocks])
    centres = centres.reshape(-1, 2)
    x0, x1, _, _ = fit_aspect(site_extent(scenario), size_px[0] / size_px[1])
    return episode_inset(inset, flocks, x1 - x0), centres


def episode_animation(
    scenario: Scenario,
    frames: Sequence[Mapping[str, Any]],
    out_path: str | os.PathLike[str],
    fps: float = 20.0,
    stride: int = 2,
    size_px: tuple[int, int] = (480, 480),
    label: str = "",
    inset: str = "auto",
) -> Path:
    """Write a looping GIF of every ``stride``-th recorded frame, played at ``fps``.

    ``frames`` is as for ``episode_still``; optional ``outcome`` and ``breached_birds``
    entries are printed too, after ``label`` (such as the controller and seed). Frames share
    one fixed palette (``blend_palette``) to keep the file small. ``inset`` is
    ``FrameRenderer``'s, except that "auto" decides once for the whole animation (see
    ``animation_inset``), so the inset does not blink on and off.
    """
    from PIL import Image

    _check_frames(frames)
    if stride < 1 or fps <= 0:
        raise ValueError(f"stride = {stride}, fps = {fps}: need stride >= 1 and fps > 0")
    drones = _stack_drones(frames)  # (T, P, 2)
    mode, centres = animation_inset(scenario, frames, size_px, inset)
    avoid = np.concatenate([centres, drones.reshape(-1, 2)])
    palette = Image.new("P", (1, 1))
    palette.putpalette(blend_palette().ravel().tolist())
    renderer = FrameRenderer(scenario, size_px=size_px, label=label, inset=mode, avoid=avoid)
    images: list[Image.Image] = []
    try:
        for t in range(0, len(frames), stride):
            frame = frames[t]
            pos = np.asarray(frame["bird_pos"], dtype=np.float64).reshape(-1, 2)
            state = WorldState(
                bird_pos=pos[None],
                bird_vel=np.asarray(frame["bird_vel"], dtype=np.float64).reshape(1, -1, 2),
                pursuer_pos=drones[t][None],
                pursuer_vel=np.zeros((1,) + drones.shape[1:]),
                count=np.array([len(pos)], dtype=np.int64),
            )
            info = {key: frame[key] for key in INFO_LABELS if key in frame}
            info["steps"] = int(frame["step"])
            track = drones[max(0, t - ANIMATION_TRACK_STEPS) : t + 1]
            rgb = Image.fromarray(renderer.draw(state, 0, track, info))
            images.append(rgb.quantize(palette=palette, dither=Image.Dither.NONE))
    finally:
        renderer.close()

    with atomic_path(out_path) as tmp:
        images[0].save(
            tmp,
            format="GIF",
            save_all=True,
            append_images=images[1:],
            duration=round(1000.0 / fps),
            loop=0,
        )
    return Path(out_path)

"""Frames, stills and animations from hand-built scenarios and states, drawn headless (Agg)."""

from __future__ import annotations

import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from matplotlib.colors import to_rgb
from PIL import Image

from flockward.render import (
    CHARCOAL,
    CRIMSON,
    INK,
    SLATE,
    FrameRenderer,
    animation_inset,
    episode_animation,
    episode_still,
    fit_aspect,
    inset_corner,
    inset_width,
    site_extent,
)
from flockward.sim.types import (
    Circle,
    Polygon,
    PursuerParams,
    Scenario,
    SiteParams,
    WindParams,
    WorldState,
)

SQUARE = Polygon(((-120.0, -120.0), (120.0, -120.0), (120.0, 120.0), (-120.0, 120.0)))
SITE = dict(goal=Circle((0.0, 400.0), 100.0), destination=(500.0, 0.0), flock_start=(-400.0, 0.0))
CIRCLE_SCENARIO = Scenario(name="t", site=SiteParams(protected=Circle((0.0, 0.0), 120.0), **SITE))
POLYGON_SCENARIO = Scenario(
    name="t", site=SiteParams(protected=SQUARE, **SITE), pursuer=PursuerParams(start=(0.0, -300.0))
)
SIZE = (320, 240)  # (width, height) px, not square so a swapped shape would show


def flock_state(pursuer: tuple[float, float] = (-200.0, 150.0)) -> WorldState:
    """Two worlds of room for 6 birds; world 1 has 4 active birds in a row flying +x."""
    state = WorldState.zeros(2, 6)
    state.bird_pos[1, :4] = [(-300.0, 0.0), (-290.0, 5.0), (-280.0, -5.0), (-270.0, 0.0)]
    state.bird_vel[1, :4] = (12.0, 0.0)
    state.pursuer_pos[1] = pursuer
    state.count[1] = 4
    return state


def track() -> np.ndarray:
    return np.array([(-250.0, 250.0), (-230.0, 200.0), (-200.0, 150.0)])


def changed_pixels(a: np.ndarray, b: np.ndarray) -> int:
    return int(np.any(a != b, axis=-1).sum())


@pytest.fixture
def renderer():
    r = FrameRenderer(CIRCLE_SCENARIO, size_px=SIZE)
    yield r
    r.close()


def test_frame_is_an_rgb_image_with_several_colours(renderer):
    frame = renderer.draw(flock_state(), 1, track(), {"outcome": "running", "n_components": 1})
    assert frame.shape == (SIZE[1], SIZE[0], 3)
    assert frame.dtype == np.uint8
    assert len(np.unique(frame.reshape(-1, 3), axis=0)) >= 6


def test_circle_and_polygon_zones_give_different_frames():
    frames = []
    for scenario in (CIRCLE_SCENARIO, POLYGON_SCENARIO):
        r = FrameRenderer(scenario, size_px=SIZE)
        frames.append(r.draw(flock_state(), 1, track(), {}))
        r.close()
    assert changed_pixels(*frames) > 100


def test_moving_the_pursuer_changes_the_frame_and_moving_back_restores_it(renderer):
    before = renderer.draw(flock_state(), 1, track(), {})
    moved = renderer.draw(flock_state(pursuer=(250.0, -250.0)), 1, track(), {})
    again = renderer.draw(flock_state(), 1, track(), {})
    assert changed_pixels(before, moved) > 20
    np.testing.assert_array_equal(before, again)  # artists are updated, not piled up


def test_padding_birds_beyond_count_are_not_drawn(renderer):
    state = flock_state()
    plain = renderer.draw(state, 1, track(), {})
    state.bird_pos[1, 4:] = (200.0, 200.0)  # padding slots, far from everything drawn
    state.bird_vel[1, 4:] = (5.0, 5.0)
    np.testing.assert_array_equal(renderer.draw(state, 1, track(), {}), plain)
    state.count[1] = 6
    assert changed_pixels(renderer.draw(state, 1, track(), {}), plain) > 0


def test_info_entries_change_the_status_text(renderer):
    quiet = renderer.draw(flock_state(), 1, track(), {})
    loud = renderer.draw(flock_state(), 1, track(), {"outcome": "breach", "breached_birds": 3})
    assert changed_pixels(quiet, loud) > 20


def two_drone_state(second: tuple[float, float]) -> WorldState:
    """flock_state's world 1 with a second drone at ``second``."""
    one = flock_state()
    state = WorldState.zeros(2, 6, drones=2)
    for name in ("bird_pos", "bird_vel", "count"):
        getattr(state, name)[:] = getattr(one, name)
    state.pursuer_pos[1] = (one.pursuer_pos[1, 0], second)
    return state


def test_every_drone_and_its_track_is_drawn(renderer):
    first = flock_state().pursuer_pos[1, 0]
    on_top = renderer.draw(two_drone_state(tuple(first)), 1, track(), {})
    apart = renderer.draw(two_drone_state((250.0, -250.0)), 1, track(), {})
    assert changed_pixels(on_top, apart) > 20  # the second drone shows
    # A (T, 2) track is one drone's: the same picture as the (T, 1, 2) track.
    single = renderer.draw(flock_state(), 1, track(), {})
    np.testing.assert_array_equal(renderer.draw(flock_state(), 1, track()[:, None], {}), single)
    second_path = track() + (300.0, -300.0)
    both = np.stack([track(), second_path], axis=1)  # (T, P, 2)
    assert changed_pixels(renderer.draw(two_drone_state(tuple(first)), 1, both, {}), on_top) > 20


def episode_frames(steps: int) -> list[dict]:
    """A made-up episode: the flock drifts +x while the drone circles the flock start."""
    frames = []
    base = np.array([(-400.0, 0.0), (-395.0, 4.0), (-392.0, -3.0)])
    for step in range(steps):
        angle = 0.2 * step
        frames.append(
            {
                "bird_pos": base + np.array((3.0 * step, 0.5 * step)),
                "bird_vel": np.tile((12.0, 2.0), (3, 1)),
                "pursuer_pos": np.array((-400.0 + 60.0 * math.cos(angle), 60.0 * math.sin(angle))),
                "step": step,
                "goal_distance": 500.0 - 2.0 * step,
                "diameter": 10.0 + 0.1 * step,
                "n_components": 1 + step // 10,
            }
        )
    return frames


def test_episode_still_writes_a_png_and_leaves_no_temporary(tmp_path):
    out = tmp_path / "sub" / "still.png"
    episode_still(POLYGON_SCENARIO, episode_frames(30), out)
    with Image.open(out) as image:
        assert image.format == "PNG"
        width, height = image.size
    assert 800 <= width <= 2000 and 400 <= height <= 1400
    assert width > height  # map on the left, plots on the right
    assert sorted(p.name for p in out.parent.iterdir()) == ["still.png"]


def test_still_and_animation_take_frames_of_several_drones(tmp_path):
    frames = episode_frames(12)
    for frame in frames:
        frame["pursuer_pos"] = np.stack([frame["pursuer_pos"], frame["pursuer_pos"] + 40.0])
    episode_still(POLYGON_SCENARIO, frames, tmp_path / "still.png")
    episode_animation(CIRCLE_SCENARIO, frames, tmp_path / "run.gif", stride=3)
    with Image.open(tmp_path / "run.gif") as image:
        assert image.n_frames == 4
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.gif", "still.png"]


def test_episode_still_rejects_a_changing_flock_size(tmp_path):
    frames = episode_frames(5)
    frames[3]["bird_pos"] = frames[3]["bird_pos"][:2]
    with pytest.raises(ValueError, match="same"):
        episode_still(POLYGON_SCENARIO, frames, tmp_path / "still.png")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize(("steps", "stride"), [(21, 2), (7, 1), (10, 4)])
def test_episode_animation_writes_one_gif_frame_per_stride(tmp_path, steps, stride):
    out = tmp_path / "run.gif"
    episode_animation(CIRCLE_SCENARIO, episode_frames(steps), out, fps=10, stride=stride)
    with Image.open(out) as image:
        assert image.format == "GIF"
        assert image.size == (480, 480)
        assert image.n_frames == math.ceil(steps / stride)
        assert image.info["duration"] == 100  # ms at 10 fps
    assert [p.name for p in tmp_path.iterdir()] == ["run.gif"]


def test_rendering_needs_no_display_and_leaves_pyplot_unloaded(tmp_path):
    script = (
        "import sys, numpy as np\n"
        "from flockward.render import FrameRenderer\n"
        "from flockward.sim.types import Scenario, WorldState\n"
        "state = WorldState.zeros(1, 3); state.count[0] = 3\n"
        "r = FrameRenderer(Scenario(name='t'), size_px=(64, 48))\n"
        "frame = r.draw(state, 0, np.zeros((1, 2)), {})\n"
        "r.close()\n"
        "assert frame.shape == (48, 64, 3), frame.shape\n"
        "assert 'matplotlib.pyplot' not in sys.modules, 'pyplot was imported'\n"
    )
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY")}
    env.pop("MPLBACKEND", None)
    env["PYTHONPATH"] = os.pathsep.join(
        [str(Path(__file__).resolve().parents[1] / "envs"), env.get("PYTHONPATH", "")]
    )
    done = subprocess.run(
        [sys.executable, "-c", script], env=env, cwd=tmp_path, capture_output=True, text=True
    )
    assert done.returncode == 0, done.stderr


def test_first_event_times_mark_the_first_split_and_breach() -> None:
    from flockward.render import first_event_times

    frames = [
        {"step": 0, "n_components": 1, "breached_birds": 0},
        {"step": 5, "n_components": 2, "breached_birds": 0},
        {"step": 6, "n_components": 1, "breached_birds": 0},
        {"step": 9, "n_components": 3, "breached_birds": 2},
    ]
    assert first_event_times(frames, 0.1) == pytest.approx({"split": 0.5, "breach": 0.9})
    assert first_event_times(frames[:1], 0.1) == {}


@pytest.mark.parametrize(("suffix", "magic"), [(".svg", b"<?xml"), (".pdf", b"%PDF")])
def test_episode_still_writes_vector_formats_for_papers(tmp_path, suffix, magic):
    out = tmp_path / f"still{suffix}"
    episode_still(POLYGON_SCENARIO, episode_frames(20), out, label="idle, seed 3")
    assert out.read_bytes().startswith(magic)
    with pytest.raises(ValueError, match=r"a still ends in .png, .svg or .pdf"):
        episode_still(POLYGON_SCENARIO, episode_frames(5), tmp_path / "still.bmp")


def test_scale_bar_lengths_are_round() -> None:
    from flockward.render import scale_length

    # A fifth of the span rounded down to 1, 2 or 5 times a power of ten (common practice).
    assert [scale_length(s) for s in (1000.0, 480.0, 2000.0, 7.0)] == [200.0, 50.0, 200.0, 1.0]


# The zoomed inset that follows the flock.

FIXTURES = Path(__file__).resolve().parent / "fixtures"
WINDY_SCENARIO = Scenario(
    name="t",
    site=SiteParams(protected=Circle((0.0, 0.0), 120.0), **SITE),
    wind=WindParams(speed=6.0, from_deg=250.0),
)


def frame_of(scenario: Scenario, state: WorldState, size=SIZE, **kwargs) -> np.ndarray:
    """One frame of world 1 with the fixture's track and a fixed status."""
    r = FrameRenderer(scenario, size_px=size, label="idle, seed 7", **kwargs)
    try:
        info = {"outcome": "running", "n_components": 1, "steps": 42}
        return r.draw(state, 1, track(), info)
    finally:
        r.close()


# frame_without_inset.png's pixels depend on the rasteriser and fonts of the matplotlib that
# drew it; under another version the exact comparison is skipped, saying so.
FIXTURE_MATPLOTLIB = "3.11.2"


def test_inset_off_reproduces_the_frame_drawn_before_insets_existed():
    # Regression test: frame_without_inset.png was drawn by this same call with the renderer as
    # it was before the inset existed (commit 6d838a3), with a wind label that the inset would
    # move.
    import matplotlib

    if matplotlib.__version__ != FIXTURE_MATPLOTLIB:
        pytest.skip(f"the fixture was drawn with matplotlib {FIXTURE_MATPLOTLIB}, this is "
                    f"{matplotlib.__version__}: pixels may differ")  # fmt: skip
    with Image.open(FIXTURES / "frame_without_inset.png") as image:
        before = np.asarray(image.convert("RGB"))
    np.testing.assert_array_equal(frame_of(WINDY_SCENARIO, flock_state(), inset="off"), before)
    assert changed_pixels(frame_of(WINDY_SCENARIO, flock_state(), inset="on"), before) > 500


def spread_state(birds: list[tuple[float, float]], drone: tuple[float, float]) -> WorldState:
    """World 1 holds ``birds`` flying +x at 10 m/s and one drone at ``drone``."""
    state = WorldState.zeros(2, len(birds))
    state.bird_pos[1] = birds
    state.bird_vel[1] = (10.0, 0.0)
    state.pursuer_pos[1] = drone
    state.count[1] = len(birds)
    return state


def near(pixel: np.ndarray, colour: str, tolerance: float = 40.0) -> bool:
    """Whether an RGB pixel is within ``tolerance`` (Euclidean, 0-255 scale) of ``colour``."""
    target = np.array(to_rgb(colour)) * 255.0
    return float(np.linalg.norm(pixel.astype(float) - target)) < tolerance


def test_inset_draws_each_bird_and_the_drone_at_their_mapped_places():
    # Regression test of the inset's geometry against its documented rule: a view 50 m wide
    # (INSET_MIN_WIDTH, the flock spanning 16 m < 0.4 of it) centred on the birds' bounding box,
    # a square of 0.4 x 240 = 96 px in the upper-right corner, 3.6 px from the right edge and
    # 3.6 px plus the status text's two 8 pt lines (27.8 px at 100 dpi) from the top.
    birds = [(-400.0, -8.0), (-384.0, -8.0), (-392.0, 0.0), (-400.0, 8.0), (-384.0, 8.0)]
    drone = (-380.0, -18.0)  # inside the view: 12 m right of and 18 m below its centre
    frame = frame_of(CIRCLE_SCENARIO, spread_state(birds, drone), inset="on")
    width_px = SIZE[0]
    side, gap = 0.4 * 240, 0.015 * 240
    left, top = width_px - gap - side, gap + 2 * 1.25 * 8 * 100 / 72
    cx, cy = -392.0, 0.0

    def around(x: float, y: float) -> np.ndarray:
        """The 3 x 3 pixels around the place of (x, y) m: axes snap to whole pixels."""
        col = int(left + (x - (cx - 25.0)) / 50.0 * side)
        row = int(top + ((cy + 25.0) - y) / 50.0 * side)
        return frame[row - 1 : row + 2, col - 1 : col + 2].reshape(-1, 3)

    def has(x: float, y: float, colour: str, tolerance: float = 40.0) -> bool:
        return any(near(p, colour, tolerance) for p in around(x, y))

    for x, y in birds:
        assert has(x, y, CHARCOAL), (x, y, around(x, y))
    # Heading ticks point forward (+x, 1.75 m = 3.4 px long), never backward.
    assert has(-392.0 + 1.5, 0.0, CHARCOAL)
    assert not has(-392.0 - 1.5, 0.0, CHARCOAL, tolerance=100.0)
    assert has(*drone, CRIMSON, tolerance=60.0)
    # Empty places of the view stay background.
    for x, y in [(-392.0, -8.0), (-400.0, 0.0), (-372.0, 15.0)]:
        assert all(near(p, SLATE) for p in around(x, y)), (x, y, around(x, y))


def test_the_map_outlines_the_area_the_inset_shows():
    # Regression test: the outline is the inset's 50 m square, drawn on the map where the
    # map's own extent (fit to the frame, as the renderer does) puts it.
    birds = [(-400.0, -8.0), (-384.0, 8.0)]
    state = spread_state(birds, (200.0, 200.0))
    on = frame_of(CIRCLE_SCENARIO, state, inset="on")
    off = frame_of(CIRCLE_SCENARIO, state, inset="off")
    x0, x1, y0, y1 = fit_aspect(site_extent(CIRCLE_SCENARIO), SIZE[0] / SIZE[1])
    col = int((-392.0 - 25.0 - x0) / (x1 - x0) * SIZE[0])  # the outline's left side
    row = int((y1 - 0.0) / (y1 - y0) * SIZE[1])  # at the flock's height
    # The 1 px line falls across two columns, axes snapping to whole pixels.
    assert any(near(p, INK, tolerance=90.0) for p in on[row, col - 1 : col + 2])
    assert all(near(p, SLATE) for p in off[row, col - 1 : col + 2])


def test_auto_inset_is_drawn_only_while_the_flock_is_small_against_the_map():
    small = spread_state([(-300.0, 0.0), (-290.0, 5.0)], (-200.0, 150.0))
    assert changed_pixels(frame_of(CIRCLE_SCENARIO, small, inset="auto"),
                          frame_of(CIRCLE_SCENARIO, small, inset="off")) > 500  # fmt: skip
    # A flock wider than a tenth of the map: no inset, the frame is the plain one.
    wide = spread_state([(-300.0, 0.0), (-100.0, 5.0)], (-200.0, 150.0))
    x0, x1, _, _ = fit_aspect(site_extent(CIRCLE_SCENARIO), SIZE[0] / SIZE[1])
    assert 10.0 < 0.1 * (x1 - x0) < 200.0  # the small flock spans 10 m, the wide one 200 m
    np.testing.assert_array_equal(
        frame_of(CIRCLE_SCENARIO, wide, inset="auto"), frame_of(CIRCLE_SCENARIO, wide, inset="off")
    )


def test_an_animation_decides_auto_once_from_the_median_flock_span():
    frames = episode_frames(9)  # the flock spans about 7 m: small against the map
    assert animation_inset(CIRCLE_SCENARIO, frames, (480, 480), "auto")[0] == "on"
    for frame in frames[:5]:  # the median frame now spans 400 m
        frame["bird_pos"] = frame["bird_pos"] * np.array([[1.0], [1.0], [-60.0]])
    assert animation_inset(CIRCLE_SCENARIO, frames, (480, 480), "auto")[0] == "off"
    assert animation_inset(CIRCLE_SCENARIO, frames, (480, 480), "on")[0] == "on"
    with pytest.raises(ValueError, match="inset = 'zoom': choose one of auto, on, off"):
        animation_inset(CIRCLE_SCENARIO, frames, (480, 480), "zoom")


def test_still_inset_off_reproduces_the_still_drawn_before_stills_had_insets(tmp_path):
    # Regression test: still_without_inset.png was written by this same call with episode_still
    # as it was before stills had an inset (commit cd480db); "off" keeps the file byte for byte.
    import matplotlib

    if matplotlib.__version__ != FIXTURE_MATPLOTLIB:
        pytest.skip(f"the fixture was drawn with matplotlib {FIXTURE_MATPLOTLIB}, this is "
                    f"{matplotlib.__version__}: pixels may differ")  # fmt: skip
    before = FIXTURES / "still_without_inset.png"
    for mode in ("off", "auto", "on"):
        episode_still(WINDY_SCENARIO, episode_frames(30), tmp_path / f"{mode}.png",
                      label="idle, seed 7", inset=mode)  # fmt: skip
    assert (tmp_path / "off.png").read_bytes() == before.read_bytes()
    # The flock spans about 8 m on a map over 1000 m wide: "auto" draws the inset, as "on" does.
    assert (tmp_path / "auto.png").read_bytes() == (tmp_path / "on.png").read_bytes()
    with Image.open(before) as old, Image.open(tmp_path / "on.png") as new:
        assert old.size == new.size
        assert changed_pixels(np.asarray(new.convert("RGB")), np.asarray(old.convert("RGB"))) > 500
    with pytest.raises(ValueError, match="inset = 'zoom': choose one of auto, on, off"):
        episode_still(WINDY_SCENARIO, episode_frames(5), tmp_path / "zoom.png", inset="zoom")
    assert not (tmp_path / "zoom.png").exists()


def map_panel(image: np.ndarray) -> tuple[int, int, int, int]:
    """(top, bottom, left, right) pixel bounds of a still's map panel: the columns and rows that
    are mostly its SLATE background (the time plots' thin grid lines are SLATE too), grown by the
    pixel its frame line covers on each side."""
    slate = np.all(image == np.round(np.array(to_rgb(SLATE)) * 255), axis=-1)
    cols = np.nonzero(slate.mean(axis=0) > 0.5)[0]
    rows = np.nonzero(slate[:, cols].mean(axis=1) > 0.5)[0]
    return int(rows.min()) - 1, int(rows.max()) + 2, int(cols.min()) - 1, int(cols.max()) + 2


def test_still_inset_draws_the_final_flock_at_its_mapped_places(tmp_path):
    # Regression test of the still's inset against its documented rule: a view 50 m wide
    # (INSET_MIN_WIDTH, the final flock spanning 8 m) centred on the final birds' bounding box, a
    # square of 0.4 of the map panel's shorter side in the panel's upper-right corner (the
    # destination lies under the lower one), 0.015 of that side from its edges; the legend
    # leaves the lower-right corner (the wind label's place now) for the lower-left one.
    frames = episode_frames(30)
    images = {}
    for mode in ("on", "off"):
        episode_still(WINDY_SCENARIO, frames, tmp_path / f"{mode}.png", inset=mode)
        with Image.open(tmp_path / f"{mode}.png") as image:
            images[mode] = np.asarray(image.convert("RGB"))
    on = images["on"]
    top, bottom, left, right = map_panel(images["off"])
    shorter = min(bottom - top, right - left)
    side, gap = 0.4 * shorter, 0.015 * shorter
    view_left, view_top = right - gap - side, top + gap
    final = np.asarray(frames[-1]["bird_pos"])
    cx, cy = (final.min(axis=0) + final.max(axis=0)) / 2.0

    def around(x: float, y: float) -> np.ndarray:
        """The 3 x 3 pixels around the place of (x, y) m in the inset."""
        col = int(view_left + (x - (cx - 25.0)) / 50.0 * side)
        row = int(view_top + ((cy + 25.0) - y) / 50.0 * side)
        return on[row - 1 : row + 2, col - 1 : col + 2].reshape(-1, 3)

    for x, y in final:
        assert any(near(p, CHARCOAL) for p in around(x, y)), (x, y, around(x, y))
    # Empty places of the view stay background.
    for x, y in [(cx - 15.0, cy + 15.0), (cx + 15.0, cy + 15.0)]:
        assert all(near(p, SLATE) for p in around(x, y)), (x, y, around(x, y))

    def legend_pixels(image: np.ndarray, lower_left: bool) -> int:
        """Near-white pixels (the legend's box) in a lower corner, a quarter of the panel."""
        rows = slice(bottom - (bottom - top) // 4, bottom)
        quarter = (right - left) // 4
        cols = slice(left, left + quarter) if lower_left else slice(right - quarter, right)
        return int(np.all(image[rows, cols] > 240, axis=-1).sum())

    assert legend_pixels(images["off"], lower_left=False) > 2000
    assert legend_pixels(images["off"], lower_left=True) < 100
    assert legend_pixels(on, lower_left=True) > 2000
    assert legend_pixels(on, lower_left=False) < 100


def test_inset_view_widths_are_round_and_hold_the_flock() -> None:
    # Widths are 1, 2 or 5 times a power of ten metres (common practice for map scales).
    assert [inset_width(s) for s in (0.0, 12.0, 20.1, 45.0, 300.0)] == [50.0, 50.0, 100.0,
                                                                        200.0, 1000.0]  # fmt: skip


def test_the_inset_takes_the_right_hand_corner_hiding_less_of_the_site() -> None:
    # The destination under the lower-right corner of the map sends the inset up, and a goal
    # region in the upper right sends it down.
    extent = fit_aspect(site_extent(CIRCLE_SCENARIO), 1.0)
    assert inset_corner(CIRCLE_SCENARIO, extent, (480, 480)) == "upper"
    north_east = Scenario(
        name="t",
        site=SiteParams(protected=Circle((0.0, 0.0), 120.0), goal=Circle((450.0, 450.0), 100.0),
                        destination=(-500.0, 0.0), flock_start=(-400.0, -300.0)),
    )  # fmt: skip
    extent = fit_aspect(site_extent(north_east), 1.0)
    assert inset_corner(north_east, extent, (480, 480)) == "lower"


def test_show_draws_the_inset_on_request(tmp_path: Path, capsys: pytest.CaptureFixture[str]):
    from flockward_baselines.cli import main

    scenario = tmp_path / "short.toml"
    shipped = Path(__file__).resolve().parents[1] / "configs" / "scenarios" / "trio.toml"
    scenario.write_text(shipped.read_text().replace("max_steps = 1200", "max_steps = 20"))
    gifs = {}
    for mode in ("on", "off"):
        gifs[mode] = tmp_path / f"{mode}.gif"
        args = ["show", "--scenario", str(scenario), "--controller", "idle", "--inset", mode]
        assert main([*args, "--out", str(gifs[mode])]) == 0
    with Image.open(gifs["on"]) as on, Image.open(gifs["off"]) as off:
        assert on.n_frames == off.n_frames and on.size == off.size
        assert changed_pixels(np.asarray(on.convert("RGB")), np.asarray(off.convert("RGB"))) > 500
    stills = {}
    for mode in ("on", "off"):  # a still honours --inset too
        stills[mode] = tmp_path / f"{mode}.png"
        args = ["show", "--scenario", str(scenario), "--controller", "idle", "--inset", mode]
        assert main([*args, "--out", str(stills[mode])]) == 0
    with Image.open(stills["on"]) as on, Image.open(stills["off"]) as off:
        assert on.size == off.size
        assert changed_pixels(np.asarray(on.convert("RGB")), np.asarray(off.convert("RGB"))) > 500
    with pytest.raises(SystemExit):
        main(["show", "--inset", "zoom"])
    assert "invalid choice: 'zoom'" in capsys.readouterr().err

"""Frames, stills and animations from hand-built scenarios and states, drawn headless (Agg)."""

from __future__ import annotations

import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from flockward.render import FrameRenderer, episode_animation, episode_still
from flockward.sim.types import Circle, Polygon, PursuerParams, Scenario, SiteParams, WorldState

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

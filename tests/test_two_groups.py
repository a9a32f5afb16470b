"""A flock that starts as two groups (site.second_start, site.second_share): group sizes, where
each group starts, its heading, validation, and the default of one group left as it was."""

from __future__ import annotations

import math

import numpy as np
import pytest

from flockward.config.scenarios import ConfigError, load_scenario, sample_reset
from flockward.sim.formations import formation_offsets
from flockward.sim.types import SiteParams

TWO = {"site.second_start": [-600.0, -300.0], "site.second_share": 0.4, "flock.count": 50}


@pytest.mark.parametrize(
    ("count", "share", "expected"),
    # Hand-worked: round(0.4 * 50) = 20; round(0.5 * 61) = round(30.5) = 30 (Python rounds half
    # to even); round(0.01 * 10) = 0 -> at least 1; round(0.99 * 10) = 10 -> at most count - 1.
    [
        (50, 0.4, (30, 20)),
        (61, 0.5, (31, 30)),
        (10, 0.01, (9, 1)),
        (10, 0.99, (1, 9)),
        (1, 0.5, (1, 0)),
    ],
)
def test_group_counts(count: int, share: float, expected: tuple[int, int]) -> None:
    site = SiteParams(second_start=(-600.0, -300.0), second_share=share)
    assert site.group_counts(count) == expected
    assert SiteParams().group_counts(count) == (count, 0)


def test_two_groups_start_where_configured_and_apart() -> None:
    fixed = {"randomise.offset_x": None, "randomise.offset_y": None, "randomise.heading_deg": None}
    scenario = load_scenario("headon", TWO | fixed)
    sample = sample_reset(scenario, np.random.default_rng(7))
    assert sample.bird_pos.shape == (50, 2) and sample.bird_vel.shape == (50, 2)
    first, second = sample.bird_pos[:30], sample.bird_pos[30:]
    # Every formation is centred on its start (formations' contract), so the centroids sit at the
    # two starts, 300 m apart (hand-worked: (-600, 0) to (-600, -300)).
    np.testing.assert_allclose(first.mean(axis=0), (-600.0, 0.0), atol=1e-9)
    np.testing.assert_allclose(second.mean(axis=0), (-600.0, -300.0), atol=1e-9)
    # No bird of one group is within 250 m of the other: a 30-bird disc has a radius of ~10 m.
    gaps = np.hypot(*(first[:, None, :] - second[None, :, :]).transpose(2, 0, 1))
    assert gaps.min() > 250.0
    # Each group heads for the destination (800, 0) from its own start.
    h1 = math.atan2(0.0 - 0.0, 800.0 + 600.0)
    h2 = math.atan2(0.0 + 300.0, 800.0 + 600.0)
    np.testing.assert_allclose(sample.bird_vel[0], 12.5 * np.array((math.cos(h1), math.sin(h1))))
    np.testing.assert_allclose(sample.bird_vel[-1], 12.5 * np.array((math.cos(h2), math.sin(h2))))
    # Each group is the flock's formation of its own size (disc: deterministic), rotated.
    c, s = math.cos(h2), math.sin(h2)
    offsets = formation_offsets("disc", 20, 3.0, np.random.default_rng(0))
    expected = np.array((-600.0, -300.0)) + offsets @ np.array(((c, -s), (s, c))).T
    np.testing.assert_allclose(second, expected, atol=1e-9)


def test_second_group_moves_with_the_start_offset() -> None:
    scenario = load_scenario("headon", TWO)
    sample = sample_reset(scenario, np.random.default_rng(3))
    offset = sample.start - np.array((-600.0, 0.0))
    assert np.any(offset != 0.0)  # headon jitters the start
    np.testing.assert_allclose(sample.bird_pos[30:].mean(axis=0), (-600.0, -300.0) + offset,
                               atol=1e-9)  # fmt: skip


def test_one_group_reset_unchanged_regression() -> None:
    """Regression: without a second start the reset is the one-group formula, bit for bit."""
    scenario = load_scenario("headon")
    sample = sample_reset(scenario, np.random.default_rng(11))
    c, s = math.cos(sample.heading), math.sin(sample.heading)
    offsets = formation_offsets("disc", 50, 3.0, np.random.default_rng(0))
    # The rotation written out (x c - y s, x s + y c), not BLAS's matrix product: see
    # flockward.sim.portable for why an episode never calls BLAS.
    expected = sample.start + (offsets[:, :1] * (c, s) + offsets[:, 1:] * (-s, c))
    assert np.array_equal(sample.bird_pos, expected)


@pytest.mark.parametrize(
    ("override", "message"),
    [
        ({"site.second_share": 0.4}, "second_share' = 0.4: must lie in (0, 1) with"),
        ({"site.second_start": [-600.0, -300.0]}, "needs site.second_share in (0, 1)"),
        ({"site.second_start": [10.0, 10.0], "site.second_share": 0.5}, "must lie outside"),
        ({"site.second_start": [800.0, 0.0], "site.second_share": 0.5}, "must differ"),
        ({"site.second_start": [-600.0, -300.0], "site.second_share": 1.0}, "(0, 1)"),
        ({"site.second_start": [-600.0], "site.second_share": 0.5}, "must be [x, y]"),
    ],
)
def test_bad_second_group_is_one_line_error(override: dict, message: str) -> None:
    with pytest.raises(ConfigError) as err:
        load_scenario("headon", override)
    text = str(err.value)
    assert message in text and "\n" not in text and "headon.toml" in text

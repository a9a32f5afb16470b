"""The curriculum over the ladder suite: promotion, review draws, batched worlds, configs.

The promotion rule is our own (the module docstring states it); these are checks of that rule
against hand-worked sequences, not of a published method. The equivalence tests compare the
curriculum's masked, batched worlds with the same worlds stepped alone.
"""

from __future__ import annotations

import dataclasses
import functools
import json
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import binomtest, chisquare

from flockward.bench.suites import load_suite
from flockward.config.scenarios import ConfigError
from flockward.task.batched import DivertTask
from flockward_baselines.cli import main
from flockward_baselines.curriculum import CurriculumSettings, Ladder, family_configs
from flockward_baselines.sb3 import CurriculumVecEnv
from flockward_baselines.train import (
    CURRICULUM_FILE,
    load_train_config,
    make_training_env,
    train,
)

TWO_TIERS = """
name = "two-tiers"
version = 1
description = "two tiers for the curriculum tests"

[[entry]]
tier = 1
family = "easy-trio"
scenario = "trio"
overrides = { name = "trio-close", "pursuer.start" = [-600.0, -60.0], "episode.max_steps" = 80 }
seeds = [0, 1]

[[entry]]
tier = 1
family = "easy-trio-b"
scenario = "trio"
overrides = { name = "trio-b", "episode.max_steps" = 60 }
seeds = [0, 1]

[[entry]]
tier = 2
family = "hard-headon"
scenario = "headon"
overrides = { "episode.max_steps" = 70 }
seeds = [0, 1]
"""


@functools.cache
def _ladder_suite():
    return load_suite("ladder")


def _two_tiers(tmp_path: Path) -> Path:
    path = tmp_path / "two_tiers.toml"
    path.write_text(TWO_TIERS)
    return path


def _settings(**kw) -> CurriculumSettings:
    return CurriculumSettings(**{"window": 4, "promote_at": 0.75, "review": 0.0, **kw})


def test_a_slot_moves_up_after_three_successes_in_its_last_four():
    ladder = Ladder(_ladder_suite(), _settings(), slots=2, seed=0)
    # Hand-worked: window 4, promote at 0.75, so 3 successes of the last 4 at the slot's tier.
    for success, tier_after in [(True, 0), (False, 0), (True, 0), (False, 0), (True, 0)]:
        ladder.finish(0, success)
        assert ladder.slots[0].tier == tier_after  # last four: T F T F, then F T F T: 2 of 4
    ladder.finish(0, True)  # last four: T F T T
    assert ladder.slots[0].tier == 1 and len(ladder.slots[0].recent) == 0
    assert ladder.slots[1].tier == 0  # slots climb on their own
    assert ladder.tier_counts() == [1, 1, 0, 0, 0]


def test_a_slot_never_moves_down_and_stops_at_the_top():
    ladder = Ladder(_ladder_suite(), _settings(), slots=1, seed=1)
    for _ in range(4 * 10):
        ladder.finish(0, True)
    assert ladder.slots[0].tier == 4  # five tiers: indices 0..4
    for _ in range(20):
        ladder.finish(0, False)
    assert ladder.slots[0].tier == 4
    top = {f for f, t in enumerate(ladder.family_tier) if t == 4}
    assert ladder.slots[0].family in top


def test_review_episodes_come_from_lower_tiers_at_the_review_rate():
    ladder = Ladder(_ladder_suite(), _settings(review=0.2), slots=1, seed=2)
    ladder.slots[0].tier = 2
    draws = [ladder.draw_family(2) for _ in range(4000)]
    tiers = [ladder.family_tier[f] for f in draws]
    lower = sum(t < 2 for t in tiers)
    assert set(tiers) == {0, 1, 2}
    # Exact binomial test (scipy): the lower-tier share is the review rate, 0.2.
    assert binomtest(lower, len(tiers), 0.2).pvalue > 1e-4
    # A review episode does not count toward promotion.
    ladder.slots[0].family = next(f for f, t in enumerate(ladder.family_tier) if t == 0)
    ladder.finish(0, True)
    assert len(ladder.slots[0].recent) == 0


def test_uniform_mode_draws_every_family_and_never_promotes():
    ladder = Ladder(_ladder_suite(), _settings(mode="uniform"), slots=1, seed=3)
    draws = [ladder.finish(0, True) for _ in range(2000)]
    counts = np.bincount(draws, minlength=len(ladder.families))
    assert counts.min() > 0
    # Chi-square goodness of fit to equal shares (scipy).
    assert chisquare(counts).pvalue > 1e-4
    assert ladder.slots[0].tier == 4 and len(ladder.slots[0].recent) == 0


def test_a_saved_climb_is_restored_slot_by_slot():
    ladder = Ladder(_ladder_suite(), _settings(), slots=3, seed=4)
    for _ in range(4):
        ladder.finish(0, True)  # slot 0: 4 of 4, up to tier index 1
    ladder.finish(0, True)
    ladder.finish(2, False)
    saved = ladder.state()
    assert [s["tier"] for s in saved] == [1, 0, 0]
    again = Ladder(_ladder_suite(), _settings(), slots=3, seed=4, resumed_at=512)
    again.restore(saved)
    assert again.state() == saved and again.tier_counts() == [2, 1, 0, 0, 0]
    assert all(again.family_tier[s.family] <= s.tier for s in again.slots)
    with pytest.raises(ValueError, match="state of 2 worlds, this run has 3"):
        again.restore(saved[:2])
    with pytest.raises(ValueError, match=r"tier index 7 outside 0\.\.4"):
        again.restore([{"tier": 7, "recent": []}] * 3)


def test_a_resumed_env_starts_on_the_saved_tiers_with_fresh_streams(tmp_path):
    suite = load_suite(_two_tiers(tmp_path))
    fresh = CurriculumVecEnv(suite, _settings(review=0.0), 4, 9, {}, {})
    resumed = CurriculumVecEnv(suite, _settings(review=0.0), 4, 9, {}, {})
    resumed.resume([{"tier": 1, "recent": []}] * 4, decisions=512)
    start, restart = fresh.reset(), resumed.reset()
    assert fresh.ladder.tier_counts() == [4, 0] and resumed.ladder.tier_counts() == [0, 4]
    assert {resumed.ladder.family_tier[s.family] for s in resumed.ladder.slots} == {1}
    assert not np.array_equal(start, restart)  # other families, other world streams
    resumed.reset()  # a later reset (not a resume) starts the climb over
    assert resumed.ladder.tier_counts() == [4, 0]


def _play(env: CurriculumVecEnv, steps: int, seed: int):
    rng = np.random.default_rng(seed)
    frames = [env.reset()]
    rewards, dones = [], []
    for _ in range(steps):
        obs, r, d, _ = env.step(rng.uniform(-1, 1, (env.num_envs, 2)).astype(np.float32))
        frames.append(obs)
        rewards.append(r)
        dones.append(d)
    return np.array(frames), np.array(rewards), np.array(dones)


def test_same_seed_same_stream_other_seed_another(tmp_path):
    suite = load_suite(_two_tiers(tmp_path))

    def make(seed: int) -> CurriculumVecEnv:
        return CurriculumVecEnv(suite, _settings(window=2, promote_at=0.5), 3, seed,
                                {}, {})  # fmt: skip

    a, b, c = make(7), make(7), make(8)
    first, second, other = _play(a, 60, 0), _play(b, 60, 0), _play(c, 60, 0)
    for x, y in zip(first, second, strict=True):
        np.testing.assert_array_equal(x, y)
    assert first[2].any()  # episodes ended within the run (short max_steps)
    assert not np.array_equal(first[0], other[0])
    assert a.ladder.tier_counts() == b.ladder.tier_counts()


def test_a_masked_world_plays_as_it_would_alone(tmp_path):
    # Slot 1's first episode, batched with other families' worlds masked in and out, equals
    # the same family's world stepped alone from the same generator.
    suite = load_suite(_two_tiers(tmp_path))
    env = CurriculumVecEnv(suite, _settings(mode="uniform"), 4, 11, {}, {})
    first = env.reset()
    f = env.ladder.slots[1].family
    alone = DivertTask(family_configs(suite, {}, {})[f], 1)
    obs = alone.reset([0], [np.random.default_rng([11, f, 1])])
    np.testing.assert_array_equal(first[1], np.asarray(obs)[0])
    rng = np.random.default_rng(5)
    for _ in range(40):
        actions = rng.uniform(-1, 1, (4, 2)).astype(np.float32)
        batched, reward, done, _ = env.step(actions)
        step = alone.step(actions[1:2, None, :].astype(np.float64))
        if done[1]:
            assert step.terminated[0] or step.truncated[0]
            break
        np.testing.assert_array_equal(batched[1], np.asarray(step.observation)[0])
        assert reward[1] == np.float32(step.reward[0])


def test_curriculum_training_writes_tier_counts(tmp_path):
    suite = _two_tiers(tmp_path)
    cfg = tmp_path / "cur.toml"
    cfg.write_text(
        f"""
name = "cur"
algorithm = "ppo"
total_timesteps = 512
num_envs = 4
eval_suite = "{suite}"
eval_every = 0
checkpoint_every = 512
curve_every = 256
curve_episodes = 1
[curriculum]
suite = "{suite}"
window = 1
promote_at = 1.0
[ppo]
n_steps = 64
batch_size = 64
n_epochs = 1
"""
    )
    run = tmp_path / "run"
    assert main(["train", "--config", str(cfg), "--out", str(run), "--quiet"]) == 0
    rows = (run / CURRICULUM_FILE).read_text().split()
    assert rows[0] == "timesteps,tier_1,tier_2"
    counts = [list(map(int, r.split(","))) for r in rows[1:]]
    assert [c[0] for c in counts] == [256, 512] and all(sum(c[1:]) == 4 for c in counts)
    curve = (run / "curve.csv").read_text()
    assert {"trio-close", "trio-b", "headon"} <= {line.split(",")[3] for line in curve.split()[1:]}
    saved = json.loads((run / "checkpoints" / "step_512.json").read_text())
    assert len(saved["ladder"]) == 4 and saved["simulator_steps"] > 0
    train(dataclasses.replace(load_train_config(cfg), total_timesteps=768), run, resume=True,
          progress=False)  # fmt: skip
    assert len((run / CURRICULUM_FILE).read_text().split()) == 4  # resumed rows appended
    # The curve's simulator steps go on from the checkpoint's count, not from zero.
    steps = {int(t): int(s) for t, s, *_ in (r.split(",") for r in curve.split()[1:])}
    after = [r.split(",") for r in (run / "curve.csv").read_text().split()[1:]]
    resumed = {int(r[1]) for r in after if int(r[0]) == 768}
    assert len(resumed) == 1 and resumed.pop() > steps[512] == saved["simulator_steps"]


@pytest.mark.parametrize(
    ("extra", "needle"),
    [
        ('scenarios = ["trio"]\n[curriculum]\nsuite = "ladder"\n', "replaces key 'scenarios'"),
        ('[curriculum]\nsuite = "ladder"\nmode = "fast"\n', "'curriculum.mode' = \"fast\""),
        ('[curriculum]\nsuite = "ladder"\nwindows = 3\n', "unknown key 'curriculum.windows'"),
        ('[curriculum]\nsuite = "ladder"\npromote_at = 1.5\n', "'curriculum.promote_at' = 1.5"),
        ('[curriculum]\nsuite = "nowhere"\n', "key 'curriculum.suite'"),
        ('[curriculum]\nsuite = "smoke"\n', "at least two tiers"),
        ('[curriculum]\nsuite = "ladder"\n[pretrain]\nexpert = "idle"\n', "[pretrain]"),
    ],
)
def test_bad_curriculum_is_one_clear_line(tmp_path, extra, needle):
    path = tmp_path / "bad.toml"
    path.write_text('algorithm = "ppo"\n' + extra)
    with pytest.raises(ConfigError) as caught:
        load_train_config(path)
    message = str(caught.value)
    assert needle in message and str(path) in message and "\n" not in message


def test_shipped_ladder_configs_build_their_worlds():
    root = Path(__file__).resolve().parents[1] / "configs" / "train"
    promote = load_train_config(root / "ppo-ladder.toml")
    uniform = load_train_config(root / "ppo-ladder-uniform.toml")
    assert promote.curriculum is not None and uniform.curriculum is not None
    assert promote.curriculum.mode == "promote" and uniform.curriculum.mode == "uniform"
    assert len(promote.worlds()) == len(_ladder_suite().entries)
    env = make_training_env(dataclasses.replace(promote, num_envs=2))
    assert isinstance(env, CurriculumVecEnv) and env.reset().shape[0] == 2

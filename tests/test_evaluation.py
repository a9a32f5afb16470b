"""The suite runner and `flockward run`: file format, workers, resume, conflicts, failures."""

from __future__ import annotations

import importlib
import json
import os
import sys
from functools import partial
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from flockward.bench.audit import choose_episodes
from flockward.bench.evaluation import (
    RESULTS_FORMAT,
    ResultsConflict,
    controller_slug,
    read_results,
    run_suite,
)
from flockward.bench.results import writer_lock
from flockward.bench.suites import load_suite, suite_hash
from flockward.config.scenarios import scenario_hash
from flockward.controller import Controller
from flockward_baselines.cli import main
from flockward_baselines.controllers import make_controller

TINY = """
name = "tiny"
version = 1
[[entry]]
scenario = "trio"
overrides = { "episode.max_steps" = 60 }
seeds = [3, 5]
[[entry]]
scenario = "headon"
family = "gulls"
overrides = { "episode.max_steps" = 40, "flock.count" = 12 }
seeds = [0, 2]
"""


@pytest.fixture
def tiny(tmp_path: Path) -> Path:
    path = tmp_path / "tiny.toml"
    path.write_text(TINY, encoding="utf-8")
    return path


IDLE = partial(make_controller, "idle")


def _episodes(path: Path) -> str:
    """The episode list as canonical text, for byte-equal comparisons."""
    return json.dumps(read_results(path)["episodes"], sort_keys=True)


class Flaky(Controller):
    """Direct chase, but a non-finite action on odd seeds and an exception on seed 4."""

    name = "flaky"
    information_level = "state"

    def reset(self, scenario: Any, seed: int | None = None) -> None:
        self.seed = seed

    def act(self, observation: Any, state: Any) -> np.ndarray:
        if self.seed == 4:
            raise RuntimeError("boom")
        if self.seed is not None and self.seed % 2:
            return np.array([np.nan, 0.0])
        return np.array([1.0, 0.0])


class InterruptAfter:
    """A factory that builds 'idle' controllers and stops the run like Ctrl-C at call ``n``."""

    def __init__(self, n: int) -> None:
        self.n, self.calls = n, 0

    def __call__(self) -> Controller:
        self.calls += 1
        if self.calls > self.n:
            raise KeyboardInterrupt
        return make_controller("idle")


def test_result_file_format(tiny: Path, tmp_path: Path) -> None:
    suite = load_suite(tiny)
    out = run_suite(
        suite, partial(make_controller, "idle"), "idle", tmp_path / "res", progress=False
    )
    assert out == tmp_path / "res" / "tiny" / "idle.json"
    data = json.loads(out.read_text(), parse_constant=lambda c: pytest.fail(f"non-JSON {c}"))
    assert list(data) == [
        "format", "suite", "suite_version", "suite_hash", "controller", "information_level",
        "controller_parameters", "provenance", "episodes",
    ]  # fmt: skip
    assert data["format"] == RESULTS_FORMAT
    assert (data["suite"], data["suite_version"]) == ("tiny", 1)
    assert data["suite_hash"] == suite_hash(suite)
    assert data["controller"] == "idle"
    assert data["information_level"] == "state"
    provenance = data["provenance"]
    assert set(provenance) == {
        "flockward_version", "git_commit", "python", "numpy", "gymnasium", "scenario_hashes",
        "created",
    }  # fmt: skip
    assert provenance["scenario_hashes"] == {
        name: scenario_hash(s) for name, s in suite.scenarios.items()
    }
    rows = data["episodes"]
    assert [r["index"] for r in rows] == list(range(6))
    assert [(r["family"], r["scenario"], r["seed"]) for r in rows] == [
        ("trio", "trio", 3), ("trio", "trio", 4), ("trio", "trio", 5),
        ("gulls", "headon", 0), ("gulls", "headon", 1), ("gulls", "headon", 2),
    ]  # fmt: skip
    assert all(r["steps"] <= (60 if r["scenario"] == "trio" else 40) for r in rows)
    assert {r["birds"] for r in rows if r["scenario"] == "headon"} == {12}
    assert list(tmp_path.joinpath("res", "tiny").iterdir()) == [out]  # no temp files left over


def test_workers_give_the_same_episodes(tiny: Path, tmp_path: Path) -> None:
    suite = load_suite(tiny)
    factory = partial(make_controller, "direct-pursuit")
    one = run_suite(suite, factory, "direct-pursuit", tmp_path / "one", progress=False)
    two = run_suite(suite, factory, "direct-pursuit", tmp_path / "two", workers=2, progress=False)
    assert _episodes(one) == _episodes(two)


def test_partial_run_then_resume_equals_one_run(tiny: Path, tmp_path: Path) -> None:
    suite = load_suite(tiny)
    factory = partial(make_controller, "direct-pursuit")
    whole = run_suite(suite, factory, "direct-pursuit", tmp_path / "whole", progress=False)
    parts = tmp_path / "parts"
    path = run_suite(suite, factory, "direct-pursuit", parts, limit=2, progress=False)
    assert [r["index"] for r in read_results(path)["episodes"]] == [0, 1]
    run_suite(suite, factory, "direct-pursuit", parts, workers=2, limit=3, progress=False)
    assert len(read_results(path)["episodes"]) == 5
    run_suite(suite, factory, "direct-pursuit", parts, progress=False)
    assert _episodes(path) == _episodes(whole)


def test_interrupted_run_keeps_finished_episodes(tiny: Path, tmp_path: Path) -> None:
    suite = load_suite(tiny)
    whole = run_suite(
        suite, partial(make_controller, "idle"), "idle", tmp_path / "a", progress=False
    )
    # Call 1 reads the header; calls 2-4 play episodes 0-2; call 5 is "Ctrl-C".
    with pytest.raises(KeyboardInterrupt):
        run_suite(suite, InterruptAfter(4), "idle", tmp_path / "b", progress=False)
    path = tmp_path / "b" / "tiny" / "idle.json"
    assert [r["index"] for r in read_results(path)["episodes"]] == [0, 1, 2]
    run_suite(suite, partial(make_controller, "idle"), "idle", tmp_path / "b", progress=False)
    assert _episodes(path) == _episodes(whole)


def test_complete_file_is_left_as_it_is(tiny: Path, tmp_path: Path) -> None:
    suite = load_suite(tiny)
    path = run_suite(suite, partial(make_controller, "idle"), "idle", tmp_path, progress=False)
    before = path.read_bytes()
    run_suite(suite, partial(make_controller, "idle"), "idle", tmp_path, progress=False)
    assert path.read_bytes() == before


def test_conflicting_results_are_refused_untouched(tiny: Path, tmp_path: Path) -> None:
    suite = load_suite(tiny)
    factory = partial(make_controller, "boundary-arc")
    path = run_suite(suite, factory, "boundary-arc", tmp_path, limit=1, progress=False)
    before = path.read_bytes()
    other = partial(make_controller, "boundary-arc", push_fraction=0.45)
    with pytest.raises(ResultsConflict, match=r"controller parameters.*--results DIR"):
        run_suite(suite, other, "boundary-arc", tmp_path, progress=False)
    changed = Path(tiny).read_text().replace("seeds = [0, 2]", "seeds = [0, 3]")
    Path(tiny).write_text(changed)
    with pytest.raises(ResultsConflict, match=r"suite content \(hash\)"):
        run_suite(load_suite(tiny), factory, "boundary-arc", tmp_path, progress=False)
    assert path.read_bytes() == before
    path.write_text("{ not json")
    with pytest.raises(ResultsConflict, match="cannot read the existing result file"):
        run_suite(suite, factory, "boundary-arc", tmp_path, progress=False)
    assert path.read_text() == "{ not json"


def test_a_failing_controller_fails_only_its_episodes(tiny: Path, tmp_path: Path) -> None:
    path = run_suite(load_suite(tiny), Flaky, "flaky", tmp_path, progress=False)
    rows = {(r["scenario"], r["seed"]): r for r in read_results(path)["episodes"]}
    assert len(rows) == 6
    assert (
        rows["trio", 4]["outcome"] == "error"
        and "act raised RuntimeError: boom" in rows["trio", 4]["error"]
    )
    for key in (("trio", 3), ("trio", 5), ("headon", 1)):
        assert rows[key]["outcome"] == "error" and "not finite" in rows[key]["error"]
        assert rows[key]["steps"] == 0
        assert rows[key]["closest_approach"] is None  # infinite: written as JSON null
    for key in (("headon", 0), ("headon", 2)):
        assert rows[key]["outcome"] != "error" and rows[key]["steps"] > 0
        assert rows[key]["error"] is None


@pytest.mark.parametrize(
    ("name", "slug"),
    [("boundary-arc", "boundary-arc"), ("my_pkg.ctl:MyCtl", "my-pkg-ctl-myctl"), ("A  B", "a-b")],
)
def test_controller_slug(name: str, slug: str) -> None:
    assert controller_slug(name) == slug


def test_controller_slug_needs_a_letter() -> None:
    with pytest.raises(ValueError, match="no letters or digits"):
        controller_slug("::")


# ----------------------------------------------------------------------------------------------
# Through the command line.


def test_cli_run_and_resume(tiny: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    res = tmp_path / "res"
    args = ["run", "--suite", str(tiny), "--controller", "idle", "--results", str(res)]
    assert main([*args, "--limit", "2"]) == 0
    out = capsys.readouterr().out
    assert "2/6 episodes (4 left: rerun to continue)" in out
    assert main(args) == 0
    line = capsys.readouterr().out.strip()
    rows = read_results(res / "tiny" / "idle.json")["episodes"]
    assert len(rows) == 6
    clean = sum(r["breached_birds"] == 0 for r in rows)
    assert line.startswith("idle on tiny v1: 6/6 episodes, success ")
    assert f"breach-free {clean / 6:.1%}" in line
    assert line.endswith(str(res / "tiny" / "idle.json"))


def test_cli_params_are_parsed_and_recorded(
    tiny: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    base = ["run", "--suite", str(tiny), "--controller", "boundary-arc", "--results", str(tmp_path)]
    assert main([*base, "--param", "push_fraction=0.4", "--limit", "1"]) == 0
    data = read_results(tmp_path / "tiny" / "boundary-arc.json")
    assert data["controller_parameters"]["push_fraction"] == 0.4
    capsys.readouterr()
    assert main([*base, "--param", "push_fraction=0.5"]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1
    assert "controller parameters" in err and "--results DIR" in err and "Traceback" not in err


@pytest.mark.parametrize(
    ("extra", "expected"),
    [
        (["--suite", "nosuch", "--controller", "idle"], "unknown suite name; shipped: "),
        (["--controller", "wander"], "unknown controller 'wander'; built-in names: boundary-arc"),
        (["--controller", "idle", "--param", "x"], "--param 'x': expected KEY=VALUE"),
        (["--controller", "idle", "--param", "colour=3"], "bad parameters"),
        (["--controller", "no_such_mod:X"], "cannot import module"),
        ([], "give exactly one of --controller NAME and --model FILE.zip"),
        (["--controller", "idle", "--model", "m.zip"], "give exactly one of"),
        (["--model", "missing.zip"], "--model missing.zip: needs an existing .zip"),
        (["--controller", "idle", "--workers", "0"], "workers = 0: must be an integer >= 1"),
    ],
)
def test_cli_run_errors_are_one_line(
    tiny: Path, tmp_path: Path, extra: list[str], expected: str, capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["run", "--suite", str(tiny), "--results", str(tmp_path), *extra]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1, err
    assert expected in err
    assert "Traceback" not in err


def test_cli_unknown_scenario_in_suite(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    suite = tmp_path / "s.toml"
    suite.write_text('name = "s"\nversion = 1\n[[entry]]\nscenario = "hedon"\nseeds = [0, 0]\n')
    assert main(["run", "--suite", str(suite), "--controller", "idle"]) == 2
    err = capsys.readouterr().err
    assert "s.toml: entry 1: key 'scenario' = \"hedon\": unknown scenario; shipped: " in err
    assert "headon" in err and len(err.strip().splitlines()) == 1


def test_cli_runs_a_saved_model(tiny: Path, tmp_path: Path) -> None:
    pytest.importorskip("stable_baselines3")
    from stable_baselines3 import PPO

    from flockward.task.env import DivertEnv

    zip_path = tmp_path / "Tiny Policy.zip"
    PPO("MlpPolicy", DivertEnv("trio"), n_steps=64, seed=0, device="cpu").save(zip_path)
    args = ["run", "--suite", str(tiny), "--model", str(zip_path), "--results", str(tmp_path)]
    assert main([*args, "--workers", "2"]) == 0
    path = tmp_path / "tiny" / "model-tiny-policy.json"
    data = read_results(path)
    assert data["controller"] == "model-Tiny Policy"
    assert data["information_level"] == "observation"
    assert data["controller_parameters"]["model"] == "Tiny Policy.zip"
    assert len(data["controller_parameters"]["model_sha256"]) == 64
    rows = data["episodes"]
    assert len(rows) == 6 and all(r["outcome"] != "error" for r in rows), rows
    again = tmp_path / "again"
    assert main([*args[:-1], str(again)]) == 0
    assert _episodes(again / "tiny" / "model-tiny-policy.json") == _episodes(path)


def test_a_model_played_as_another_algorithm_is_refused_in_one_line(
    tiny: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # Stable-Baselines3's PPO.load of a SAC zip fails deep inside the policy's constructor
    # (a TypeError about use_sde); the run names the algorithm the zip was saved by instead.
    pytest.importorskip("stable_baselines3")
    from stable_baselines3 import SAC

    from flockward.task.env import DivertEnv

    zip_path = tmp_path / "soft.zip"
    SAC("MlpPolicy", DivertEnv("trio"), policy_kwargs={"net_arch": [8]}, device="cpu").save(
        zip_path
    )
    args = ["run", "--suite", str(tiny), "--model", str(zip_path), "--results", str(tmp_path)]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1, err
    assert "saved by SAC, played as PPO: add --param algorithm=sac" in err
    assert main([*args, "--param", "algorithm=sac"]) == 0


# ---------------------------------------------------------------------------------------------
# Runs never hide a failure.

BARE_CONTROLLER = """
import numpy as np


class Bare:
    information_level = "observation"

    def __init__(self, gain=1.0):
        self.gain = gain

    def act(self, observation, state):
        return np.zeros(2)
{reset}
"""
RESET = """
    def reset(self, scenario, seed=None):
        pass
"""
BROKEN = """
    def reset(self, scenario, seed=None):
        raise RuntimeError("not ready")
"""


def _module(folder: Path, body: str) -> None:
    """Write the user's module mine.py and forget any earlier import of it."""
    folder.mkdir(exist_ok=True)
    (folder / "mine.py").write_text(BARE_CONTROLLER.format(reset=body), encoding="utf-8")
    sys.modules.pop("mine", None)
    importlib.invalidate_caches()


@pytest.fixture(autouse=True)
def _forget_mine(monkeypatch: pytest.MonkeyPatch) -> None:
    """Each test imports its own mine.py; sys.path and sys.modules are restored afterwards."""
    monkeypatch.delitem(sys.modules, "mine", raising=False)
    monkeypatch.syspath_prepend(str(Path(__file__).parent))


def test_a_controller_missing_reset_is_refused_at_load(
    tiny: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    # The working directory is importable, as with `python -m`: no PYTHONPATH needed.
    _module(tmp_path / "work", "")
    monkeypatch.chdir(tmp_path / "work")
    code = main(["run", "--suite", str(tiny), "--controller", "mine:Bare", "--results", "r"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1
    assert "'mine:Bare': needs a reset(scenario, seed) method" in err
    assert not (tmp_path / "work" / "r").exists()


def test_episode_errors_exit_non_zero_and_are_played_again(
    tiny: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    work = tmp_path / "work"
    _module(work, BROKEN)
    monkeypatch.chdir(work)
    args = ["run", "--suite", str(tiny), "--controller", "mine:Bare", "--results", "r"]
    assert main(args) == 3
    err = capsys.readouterr().err
    assert "6 episode(s) of r/tiny/mine-bare.json ended in a controller error" in err
    assert "trio seed 3: reset raised RuntimeError: not ready" in err
    # Fixed: the rerun plays every errored episode again and exits 0.
    _module(work, RESET)
    assert main(args) == 0
    rows = read_results(work / "r" / "tiny" / "mine-bare.json")["episodes"]
    assert len(rows) == 6 and all(r["outcome"] != "error" for r in rows)
    assert "playing again 6 episode(s)" in capsys.readouterr().err


def test_a_param_change_never_reuses_a_file(
    tiny: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    # Bare has no parameters(): its public attributes stand in, and --param is recorded too.
    _module(tmp_path / "work", RESET)
    monkeypatch.chdir(tmp_path / "work")
    base = ["run", "--suite", str(tiny), "--controller", "mine:Bare", "--results", "r"]
    assert main([*base, "--limit", "1"]) == 0
    data = read_results(tmp_path / "work" / "r" / "tiny" / "mine-bare.json")
    assert data["controller_parameters"] == {"gain": 1.0}
    capsys.readouterr()
    assert main([*base, "--param", "gain=2.0"]) == 2
    assert "holds results of a different controller parameters" in capsys.readouterr().err


# ---------------------------------------------------------------------------------------------
# Audits: replaying a result file's episodes from its stored provenance.


def test_audit_catches_an_edited_record(
    tiny: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["run", "--suite", str(tiny), "--controller", "direct-pursuit", "--results"]
    assert main([*args, str(tmp_path), "--param", "target=nearest"]) == 0
    path = tmp_path / "tiny" / "direct-pursuit.json"
    assert main(["audit", str(path), "--suite", str(tiny)]) == 0
    assert "6 of 6 episodes replayed, all equal" in capsys.readouterr().out
    data = json.loads(path.read_text())
    data["episodes"][4]["steps"] += 1
    path.write_text(json.dumps(data))
    assert main(["audit", str(path), "--suite", str(tiny)]) == 1
    err = capsys.readouterr().err
    assert "1 of 6 replayed episodes differ" in err
    assert "episode 4 (gulls seed 1): steps stored" in err
    # A sample finds the edit only if it draws episode 4; without the suite file it cannot run.
    sample = ["audit", str(path), "--suite", str(tiny), "--sample", "2"]
    for seed in range(4):
        drawn = choose_episodes(range(6), 2, seed)
        assert len(drawn) == 2 and drawn == sorted(set(drawn)) and set(drawn) <= set(range(6))
        assert main([*sample, "--seed", str(seed)]) == (1 if 4 in drawn else 0)
    assert main(["audit", str(path)]) == 2
    assert "cannot audit" in capsys.readouterr().err


def test_a_second_writer_is_refused_and_nothing_is_lost(
    tiny: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["run", "--suite", str(tiny), "--controller", "idle", "--results", str(tmp_path)]
    path = tmp_path / "tiny" / "idle.json"
    assert main([*args, "--limit", "2"]) == 0
    with writer_lock(path):  # another run holds the file
        assert main(args) == 2
        assert "another run is writing this result file" in capsys.readouterr().err
        assert len(read_results(path)["episodes"]) == 2  # untouched
    assert main(args) == 0
    rows = read_results(path)["episodes"]
    assert sorted(r["index"] for r in rows) == list(range(6))


def test_two_concurrent_runs_on_one_file_lose_nothing(tiny: Path, tmp_path: Path) -> None:
    # Two real processes at once: each either plays episodes or is refused; a final run then
    # completes the file with every episode exactly once.
    import subprocess

    root = Path(__file__).resolve().parents[1]
    env = {**os.environ, "PYTHONPATH": f"{root / 'envs'}{os.pathsep}{root / 'baselines'}"}
    command = [sys.executable, "-m", "flockward_baselines.cli", "run", "--suite", str(tiny),
               "--controller", "direct-pursuit", "--results", str(tmp_path)]  # fmt: skip
    runs = [subprocess.Popen(command, env=env, stderr=subprocess.PIPE, text=True) for _ in "ab"]
    outcomes = [(run.wait(timeout=300), run.stderr.read() if run.stderr else "") for run in runs]
    for code, err in outcomes:
        assert code == 0 or (code == 2 and "another run is writing" in err), (code, err)
    assert main(["run", "--suite", str(tiny), "--controller", "direct-pursuit", "--results",
                 str(tmp_path)]) == 0  # fmt: skip
    rows = read_results(tmp_path / "tiny" / "direct-pursuit.json")["episodes"]
    assert sorted(r["index"] for r in rows) == list(range(6))


def test_show_replays_the_stored_suite_episode(
    tiny: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["run", "--suite", str(tiny), "--controller", "direct-pursuit", "--results"]
    assert main([*args, str(tmp_path), "--param", "target=nearest"]) == 0
    row = next(
        r
        for r in read_results(tmp_path / "tiny" / "direct-pursuit.json")["episodes"]
        if (r["family"], r["seed"]) == ("gulls", 1)
    )
    capsys.readouterr()
    out = tmp_path / "replay.png"
    show = ["show", "--suite", str(tiny), "--family", "gulls", "--seed", "1"]
    assert main([*show, "--controller", "direct-pursuit", "--param", "target=nearest",
                 "--out", str(out)]) == 0  # fmt: skip
    line = capsys.readouterr().out
    assert out.stat().st_size > 0
    assert f"on {row['scenario']}, seed 1: {row['outcome']} after {row['steps']} steps, " in line
    assert f"{row['breached_birds']} birds breached, {row['peak_components']} fragment" in line
    # An episode the suite does not hold, or two controllers at once, is a one-line error.
    assert main(["show", "--suite", str(tiny), "--family", "gulls", "--seed", "9"]) == 2
    assert "no such episode; families: gulls, trio" in capsys.readouterr().err
    assert main(["show", "--controller", "idle", "--model", "m.zip", "--out", str(out)]) == 2
    assert "not both" in capsys.readouterr().err


def test_label_gives_a_variant_its_own_file_and_row(
    tiny: Path, tmp_path: Path, capsys: Any
) -> None:
    base = ["run", "--suite", str(tiny), "--controller", "boundary-arc", "--results", str(tmp_path)]
    assert main(base) == 0
    assert main([*base, "--param", "arc_span_deg=90", "--label", "arc 90"]) == 0
    variant = read_results(tmp_path / "tiny" / "arc-90.json")
    assert variant["label"] == "arc 90" and variant["controller"] == "boundary-arc"
    assert variant["default_parameters"]["arc_span_deg"] == 60.0
    assert variant["controller_parameters"]["arc_span_deg"] == 90.0
    # Resuming under another label is refused, never mixed into the file.
    assert main([*base, "--param", "arc_span_deg=90", "--label", "arc-90"]) == 2
    capsys.readouterr()
    assert main(["board", "--suite", str(tiny), "--results", str(tmp_path)]) == 0
    table = capsys.readouterr().out
    assert "| arc 90 | state | arc_span_deg=90 |" in table
    assert "| boundary-arc | state | defaults |" in table


def test_records_carry_zone_clearance_and_time_limit(tiny: Path, tmp_path: Path) -> None:
    path = run_suite(load_suite(tiny), IDLE, "idle", tmp_path, progress=False)
    for ep in read_results(path)["episodes"]:
        assert ep["time_limit"] == pytest.approx({"trio": 6.0, "headon": 4.0}[ep["scenario"]])
        assert ep["duration"] == pytest.approx(ep["steps"] * 0.1) and ep["duration"] <= 6.0 + 1e-9
        # headon starts the flock 600 m west of a 150 m circle, +-40 m jitter, a 12-bird disc
        # some tens of metres wide, and 4 s of flight cannot close the gap: clearance < 450 m but
        # far from the zone.
        if ep["scenario"] == "headon":
            assert 250.0 < ep["min_zone_clearance"] < 450.0
        if ep["breached_birds"] > 0:
            assert ep["min_zone_clearance"] < 0.0


def test_board_audits_before_ranking(
    tiny: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    run = ["run", "--suite", str(tiny), "--controller", "idle", "--results", str(tmp_path)]
    assert main(run) == 0
    board = ["board", "--suite", str(tiny), "--results", str(tmp_path), "--audit", "6"]
    capsys.readouterr()
    assert main(board) == 0
    out, err = capsys.readouterr()
    assert out.startswith("# flockward leaderboard") and "6 of 6 episodes replayed" in err
    path = tmp_path / "tiny" / "idle.json"
    data = json.loads(path.read_text())
    data["episodes"][0]["breached_birds"] += 1
    path.write_text(json.dumps(data))
    assert main(board) == 1
    out, err = capsys.readouterr()
    assert out == "" and "not ranked, an audit failed" in err

"""The Ray backend and `flockward run --ray`: the pool's episodes, resume, one-line errors."""

from __future__ import annotations

import json
import logging
import sys
from functools import partial
from pathlib import Path
from typing import Any

import pytest

from flockward.bench.evaluation import play_row, read_results, run_suite
from flockward.bench.ray_backend import ray_rows, ray_session
from flockward.bench.suites import load_suite
from flockward_baselines.cli import main
from flockward_baselines.controllers import make_controller

CONTROLLERS = ("idle", "boundary-arc")


def _episodes(path: Path) -> str:
    """The episode list as canonical text, for byte-equal comparisons."""
    return json.dumps(read_results(path)["episodes"], sort_keys=True)


@pytest.fixture(scope="module")
def local_ray() -> Any:
    """A quiet local Ray instance with 2 CPUs for the module (or the one already running)."""
    ray = pytest.importorskip("ray")
    started = not ray.is_initialized()
    if started:
        ray.init(
            num_cpus=2, include_dashboard=False, logging_level=logging.ERROR, log_to_driver=False
        )
    yield ray
    if started:
        ray.shutdown()


@pytest.fixture(scope="module")
def pool_runs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """The smoke suite played by the process pool (2 workers), one result file per controller."""
    out = tmp_path_factory.mktemp("pool")
    suite = load_suite("smoke")
    return {
        name: run_suite(suite, partial(make_controller, name), name, out, 2, progress=False)
        for name in CONTROLLERS
    }


@pytest.mark.parametrize("name", CONTROLLERS)
def test_ray_tasks_give_the_pool_episodes_and_resume(
    name: str, local_ray: Any, pool_runs: dict[str, Path], tmp_path: Path
) -> None:
    suite, factory = load_suite("smoke"), partial(make_controller, name)
    path = run_suite(suite, factory, name, tmp_path, progress=False, limit=3, backend=ray_rows)
    assert [row["index"] for row in read_results(path)["episodes"]] == [0, 1, 2]
    run_suite(suite, factory, name, tmp_path, progress=False, backend=ray_rows)
    assert _episodes(path) == _episodes(pool_runs[name])
    assert list(path.parent.iterdir()) == [path]  # the atomic writes left no temp file
    assert local_ray.is_initialized()  # run_suite never closes a connection it did not open


def test_cli_run_with_ray(
    local_ray: Any, pool_runs: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["run", "--suite", "smoke", "--controller", "idle", "--results", str(tmp_path)]
    assert main([*args, "--ray"]) == 0
    version = load_suite("smoke").version
    assert capsys.readouterr().out.startswith(f"idle on smoke v{version}: 8/8 episodes")
    assert _episodes(tmp_path / "smoke" / "idle.json") == _episodes(pool_runs["idle"])
    assert local_ray.is_initialized()  # Ray was already running, so the command left it so


def test_a_failing_task_raises_its_own_error(local_ray: Any) -> None:
    suite = load_suite("smoke")
    broken = partial(make_controller, "no-such-controller")
    calls = [(broken, suite.scenarios[spec.scenario_name], spec) for spec in suite.episodes()[:2]]
    with pytest.raises(RuntimeError) as local:
        play_row(*calls[0])
    with pytest.raises(RuntimeError) as remote:
        list(ray_rows(play_row, calls))
    assert str(remote.value) == str(local.value)
    assert "the controller factory raised ValueError" in str(remote.value)


class FakeRay:
    """Records what ray_session asks of Ray."""

    def __init__(self, initialized: bool) -> None:
        self.initialized, self.calls = initialized, []

    def is_initialized(self) -> bool:
        return self.initialized

    def init(self, **kwargs: Any) -> None:
        self.calls.append(("init", kwargs["address"], kwargs["num_cpus"]))
        self.initialized = True

    def shutdown(self) -> None:
        self.calls.append(("shutdown",))
        self.initialized = False


@pytest.mark.parametrize(
    ("extra", "expected"),
    [
        (["--ray", "127.0.0.1:1"], "Ray address 127.0.0.1:1: no Ray head answers there"),
        (["--ray", "head:6379", "--workers", "2"], "--workers applies to a local Ray instance"),
        (["--ray", "--workers", "0"], "workers = 0: must be an integer >= 1"),
    ],
)
def test_cli_ray_errors_are_one_line(
    extra: list[str],
    expected: str,
    monkeypatch: pytest.MonkeyPatch,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    fake = FakeRay(initialized=False)
    monkeypatch.setitem(sys.modules, "ray", fake)  # the checks come before Ray is started
    args = ["run", "--suite", "smoke", "--controller", "idle", "--results", str(tmp_path)]
    assert main([*args, *extra]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1, err
    assert expected in err and "Traceback" not in err
    assert fake.calls == [] and not (tmp_path / "smoke").exists()


def test_without_ray_the_option_says_what_to_install(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    monkeypatch.setitem(sys.modules, "ray", None)  # `import ray` now fails as if not installed
    args = ["run", "--suite", "smoke", "--controller", "idle", "--results", str(tmp_path)]
    assert main([*args, "--ray"]) == 2
    assert capsys.readouterr().err == "--ray needs Ray: pip install 'flockward[ray]'\n"
    assert not (tmp_path / "smoke").exists()


def test_ray_session_closes_only_the_connection_it_opened(monkeypatch: pytest.MonkeyPatch) -> None:
    fresh = FakeRay(initialized=False)
    monkeypatch.setitem(sys.modules, "ray", fresh)
    with pytest.raises(KeyboardInterrupt), ray_session("", num_cpus=2):
        assert fresh.calls == [("init", "local", 2)]
        raise KeyboardInterrupt
    assert fresh.calls == [("init", "local", 2), ("shutdown",)]
    running = FakeRay(initialized=True)
    monkeypatch.setitem(sys.modules, "ray", running)
    with ray_session(""):
        pass
    assert running.calls == [] and running.initialized
    with pytest.raises(ValueError, match="local Ray instance only"), ray_session("h:6379", 2):
        pass

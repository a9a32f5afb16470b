"""The same bits on every CPU: the BLAS-free numerics of ``flockward.sim.portable`` against
reference libraries, and whole episodes replayed under other CPU dispatch choices.

Outside checks: numpy's matrix product, scipy.linalg.expm, scipy.linalg.solve_discrete_lyapunov
and numpy.linalg.cholesky as references for the small linear algebra; numpy's sin, cos and
arctan2 for the trigonometry. The cross-dispatch test replays episodes in a fresh process told by
environment variables to take other kernels (OpenBLAS's Sandy Bridge kernels, NumPy without its
AVX2 paths, torch's default CPU capability, MKL's compatible code path; the variables are the
libraries' own documented settings) and needs the result rows to equal this process's bit for
bit: one machine standing in for another.
"""

from __future__ import annotations

import ast
import json
import os
import platform
import subprocess
import sys
from pathlib import Path

import numba
import numpy as np
import pytest
from scipy.linalg import expm, solve_discrete_lyapunov

from flockward.sim.jit import COMPILE_TARGET
from flockward.sim.portable import bearings, cholesky2, dot2, expm_series, matmul, polar_points
from flockward.sim.wind import _lateral_filter

ROOT = Path(__file__).resolve().parents[1]


def test_dot2_and_matmul_agree_with_numpy() -> None:
    rng = np.random.default_rng(3)
    a, b = rng.normal(size=(40, 2)), rng.normal(size=(40, 2))
    assert np.allclose(dot2(a, b), np.einsum("ij,ij->i", a, b), rtol=1e-14, atol=1e-15)
    m, n = rng.normal(size=(7, 3)), rng.normal(size=(3, 5))
    assert np.allclose(matmul(m, n), m @ n, rtol=1e-14, atol=1e-14)
    stack = rng.normal(size=(4, 7, 3))
    assert np.allclose(matmul(stack, n), stack @ n, rtol=1e-14, atol=1e-14)


@pytest.mark.parametrize("scale", [0.01, 0.4, 3.0, 40.0])
def test_series_exponential_agrees_with_scipy_expm(scale: float) -> None:
    rng = np.random.default_rng(int(scale * 100))
    m = rng.normal(size=(4, 4)) * scale
    reference = expm(m)
    assert np.max(np.abs(expm_series(m) - reference)) <= 1e-12 * np.max(np.abs(reference))


@pytest.mark.parametrize(
    ("sigma", "length", "speed", "h"), [(1.6, 202.3, 15.0, 0.0125), (3.0, 50.0, 8.0, 0.1)]
)
def test_wind_filter_stationary_covariance_solves_the_discrete_lyapunov_equation(
    sigma: float, length: float, speed: float, h: float
) -> None:
    # P = diag(t/4, t^3/4) in closed form (the filter's double pole); scipy solves
    # P = A_d P A_d^T + Q_d numerically from the same A_d and Q_d.
    a_d, chol_q, _, p = _lateral_filter(sigma, length, speed, h)
    q_d = chol_q @ chol_q.T
    reference = solve_discrete_lyapunov(a_d, q_d)
    assert np.max(np.abs(p - reference)) <= 1e-9 * np.max(np.abs(reference))


def test_closed_form_cholesky_agrees_with_numpy() -> None:
    q = np.array([[4.0, 1.2], [1.2, 2.5]])
    assert np.allclose(cholesky2(q), np.linalg.cholesky(q), rtol=1e-15, atol=0.0)


def test_trigonometry_agrees_with_numpy() -> None:
    rng = np.random.default_rng(5)
    points = rng.normal(size=(50, 2)) * 30.0
    assert np.allclose(bearings(points), np.arctan2(points[:, 1], points[:, 0]), rtol=1e-15, atol=0)
    r, theta = rng.uniform(0, 100, 50), rng.uniform(-7, 7, 50)
    expected = np.column_stack((r * np.cos(theta), r * np.sin(theta)))
    assert np.allclose(polar_points(r, theta), expected, rtol=1e-14, atol=1e-12)


@pytest.mark.skipif(platform.machine() != "x86_64", reason="the pinned target is x86-64's")
def test_kernels_are_compiled_for_the_named_target_not_this_cpu() -> None:
    if "NUMBA_CPU_NAME" in os.environ:
        pytest.skip("NUMBA_CPU_NAME set: the environment chose the target")
    assert numba.config.CPU_NAME == COMPILE_TARGET  # type: ignore[attr-defined]
    assert numba.config.CPU_FEATURES == ""  # type: ignore[attr-defined]


# A scripted baseline through the chaotic standard mix, a two-drone team in gusts with a radar,
# and the two learned kinds (PPO's clipped Gaussian mean, SAC's squashed actor).
EPISODES = [
    ("results/standard/boundary-arc.json", 270),
    ("results/field/sector-arc.json", 40),
    ("results/field/boundary-arc-sensed.json", 24),
    ("results/standard/model-ppo-standard-s0.json", 0),
    ("results/field/model-sac-standard-s0.json", 40),
]

_PLAY = """
import json, sys
from pathlib import Path
from flockward.bench.evaluation import play_row
from flockward.bench.suites import load_suite
from flockward_baselines.replay import factory_from_results
root = Path(sys.argv[1])
rows = []
for name, index in json.loads(sys.argv[2]):
    data = json.loads((root / name).read_text())
    models = root / "results" / "models" / ("ladder" if data["suite"] == "ladder" else "")
    suite = load_suite(data["suite"])
    spec = next(s for s in suite.episodes() if s.index == index)
    factory = factory_from_results(data, models)
    scenario = suite.scenarios[spec.scenario_name]
    rows.append(play_row(factory, scenario, spec, data.get("environment")))
print(json.dumps(rows))
"""


def _start(env: dict[str, str]) -> subprocess.Popen[str]:
    return subprocess.Popen(
        [sys.executable, "-c", _PLAY, str(ROOT), json.dumps(EPISODES)],
        env={**os.environ, **env},
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )


def _rows(process: subprocess.Popen[str]) -> list[dict[str, object]]:
    out, err = process.communicate(timeout=900)
    assert process.returncode == 0, err[-2000:]
    rows: list[dict[str, object]] = json.loads(out.splitlines()[-1])
    return rows


@pytest.mark.skipif(platform.machine() != "x86_64", reason="the dispatch settings are x86-64's")
def test_episodes_are_the_same_bits_under_other_cpu_kernels() -> None:
    from numpy._core._multiarray_umath import __cpu_dispatch__, __cpu_features__

    # NumPy refuses to disable a feature this CPU lacks, so only the ones it would use go.
    numpy_paths = " ".join(f for f in __cpu_dispatch__ if __cpu_features__.get(f))
    other = {
        "OPENBLAS_CORETYPE": "Sandybridge",
        "ATEN_CPU_CAPABILITY": "default",
        "MKL_CBWR": "COMPATIBLE",
    }
    if numpy_paths:
        other["NPY_DISABLE_CPU_FEATURES"] = numpy_paths
    # Both processes at once (one per core). Before results were made portable,
    # OPENBLAS_CORETYPE=Sandybridge alone changed a scripted, a PPO and a SAC episode on an AMD
    # Zen 1 machine (the three measured).
    native_run, elsewhere_run = _start({}), _start(other)
    native, elsewhere = _rows(native_run), _rows(elsewhere_run)
    assert len(native) == len(EPISODES)
    assert elsewhere == native


# NumPy calls that reach BLAS or LAPACK, or array maths with CPU-chosen vector paths.
DISPATCHED = {"dot", "matmul", "inner", "vdot", "tensordot", "einsum", "linalg", "sin", "cos"}
DISPATCHED |= {"tan", "arctan", "arctan2", "arcsin", "arccos", "exp", "expm1", "log", "log1p"}
DISPATCHED |= {"tanh", "sinh", "cosh", "power", "cbrt", "expm", "solve_discrete_lyapunov"}
EPISODE_CODE = [
    *sorted((ROOT / "envs" / "flockward" / "sim").glob("*.py")),
    *sorted((ROOT / "envs" / "flockward" / "task").glob("*.py")),
    ROOT / "envs" / "flockward" / "bench" / "episode.py",
    ROOT / "envs" / "flockward" / "bench" / "evaluation.py",
    *sorted((ROOT / "baselines" / "flockward_baselines" / "controllers").glob("*.py")),
    ROOT / "baselines" / "flockward_baselines" / "policy.py",
    ROOT / "baselines" / "flockward_baselines" / "fixed_forward.py",
]
# Functions of that code no episode calls: the wind spectra the tests compare gusts with.
NOT_PLAYED = {"dryden_spectrum", "dryden_psd_hz"}


def _dispatched_uses(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    skipped = {
        id(node)
        for fn in ast.walk(tree)
        if isinstance(fn, ast.FunctionDef) and fn.name in NOT_PLAYED
        for node in ast.walk(fn)
    }
    found = []
    for node in ast.walk(tree):
        if id(node) in skipped:
            continue
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.MatMult):
            found.append(f"{path.name}:{node.lineno} @")
        if (
            isinstance(node, ast.Attribute)
            and node.attr in DISPATCHED
            and isinstance(node.value, ast.Name)
            and node.value.id in {"np", "numpy", "scipy", "linalg"}
        ):
            found.append(f"{path.name}:{node.lineno} {node.value.id}.{node.attr}")
    return found


def test_episode_code_calls_no_blas_and_no_dispatched_array_maths() -> None:
    # Regression guard for the rule above: a new `a @ b` or `np.sin(x)` in an episode's code
    # would make results depend on the CPU again (flockward.sim.portable has the replacements).
    found = [use for path in EPISODE_CODE for use in _dispatched_uses(path)]
    assert found == []

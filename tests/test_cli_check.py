"""The ``flockward check`` command, through main() and through a real subprocess."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from flockward_baselines.cli import CAUTION, main

ROOT = Path(__file__).resolve().parent.parent
SHIPPED = sorted(str(p) for p in (ROOT / "configs").glob("*/*.toml") if p.parent.name in
                 ("flocks", "pursuers", "scenarios"))  # fmt: skip
BAD = Path(__file__).resolve().parent / "fixtures" / "bad"


def test_check_shipped_configs(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", *SHIPPED]) == 0
    out, err = capsys.readouterr()
    lines = out.splitlines()
    assert err == ""
    assert len(lines) == len(SHIPPED)
    for path, line in zip(SHIPPED, lines, strict=True):
        assert line.startswith(f"ok  {path}  (")
    assert any("scenario 'crosswind-mix': 20-80 gulls" in line for line in lines)
    assert any("flock 'geese': 30 birds" in line for line in lines)
    assert any("pursuer 'fixed-wing': max speed 28 m/s, max accel 6 m/s^2" in ln for ln in lines)


def test_check_quiet(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", "--quiet", *SHIPPED]) == 0
    assert capsys.readouterr().out == ""


@pytest.mark.parametrize("fixture", sorted(p.name for p in BAD.glob("*.toml")))
def test_check_bad_fixture(fixture: str, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", str(BAD / fixture)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert len(err.splitlines()) == 1
    assert fixture in err


def test_check_mixed_and_missing(capsys: pytest.CaptureFixture[str]) -> None:
    good = SHIPPED[0]
    assert main(["check", good, str(BAD / "nope.toml"), str(ROOT / "configs")]) == 2
    out, err = capsys.readouterr()
    assert out.startswith(f"ok  {good}")
    assert len(err.splitlines()) == 2
    assert "nope.toml: file not found" in err
    assert "Traceback" not in err


def test_help_carries_caution(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as info:
        main(["--help"])
    assert info.value.code == 0
    text = " ".join(capsys.readouterr().out.split())
    assert "not flight-certified" in text
    assert "wildlife hazard management plan" in text
    assert " ".join(CAUTION.split()) in text


def _run(*args: str) -> subprocess.CompletedProcess[str]:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(
        [str(ROOT / "envs"), str(ROOT / "baselines"), env.get("PYTHONPATH", "")]
    )
    return subprocess.run(
        [sys.executable, "-m", "flockward_baselines.cli", *args],
        capture_output=True,
        text=True,
        env=env,
        cwd=ROOT,
        timeout=120,
        check=False,
    )


def test_subprocess_shipped_ok() -> None:
    result = _run("check", *SHIPPED)
    assert result.returncode == 0, result.stderr
    assert result.stdout.count("\nok  ") + result.stdout.startswith("ok  ") == len(SHIPPED)


def test_subprocess_bad_fixture_one_line() -> None:
    result = _run("check", str(BAD / "self_intersecting.toml"))
    assert result.returncode == 2
    assert "Traceback" not in result.stderr
    lines = result.stderr.splitlines()
    assert len(lines) == 1
    assert "'site.protected.polygon'" in lines[0]
    assert "no crossing edges" in lines[0]


def test_subprocess_no_command_is_usage_error() -> None:
    result = _run()
    assert result.returncode == 2
    assert "usage: flockward" in result.stderr
    assert "Traceback" not in result.stderr

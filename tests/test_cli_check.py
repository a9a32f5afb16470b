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


def test_empty_file_defines_nothing(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    empty = tmp_path / "empty.toml"
    empty.write_text("# nothing here\n")
    assert main(["check", str(empty)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err.strip() == f"{empty}: defines nothing; a scenario, flock or drone preset needs keys"


def test_every_error_of_a_file_in_one_pass_with_lines(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bad = tmp_path / "several.toml"
    bad.write_text(
        'name = "several"\n[flock]\nfile = "gulls"\ncount = -3\ncolour = 2\n'
        "[episode]\ndt = 9\nmax_steps = 0\n"
    )
    assert main(["check", str(bad)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert sorted(err) == sorted(
        [
            f"{bad}:5: unknown key 'flock.colour'; allowed: " + err[0].split("allowed: ")[1],
            f"{bad}:4: key 'flock.count' = -3: must be an integer in [1, 5000] birds",
            f"{bad}:7: key 'episode.dt' = 9: must be a finite number in (0, 1] s",
            f"{bad}:8: key 'episode.max_steps' = 0: must be an integer in [1, 1000000] steps",
        ]
    )


def test_location_and_kind_flag_decide_the_kind(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # Drone keys only: read as a drone preset by its keys, as a flock inside a flocks/ directory.
    text = "max_speed = 20.0\nmax_accel = 8.0\n"
    loose = tmp_path / "preset.toml"
    loose.write_text(text)
    (tmp_path / "flocks").mkdir()
    placed = tmp_path / "flocks" / "preset.toml"
    placed.write_text(text)
    assert main(["check", str(loose)]) == 0
    assert "pursuer 'preset'" in capsys.readouterr().out
    assert main(["check", str(placed)]) == 0
    assert "(flock 'gulls': 50 birds" in capsys.readouterr().out  # a flock with two keys set
    assert main(["check", "--kind", "scenario", str(loose)]) == 2
    assert "unknown key 'max_speed'" in capsys.readouterr().err


def test_first_run_announces_the_kernel_compile(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    import flockward_baselines.cli as cli

    monkeypatch.setattr(cli, "kernels_cached", lambda: False)
    assert (
        main(["show", "--scenario", "trio", "--seed", "1", "--out", str(tmp_path / "a.png")]) == 0
    )
    assert "compiling the simulator's kernels on first use" in capsys.readouterr().err
    assert main(["check", SHIPPED[0]]) == 0  # a command that simulates nothing stays quiet
    assert capsys.readouterr().err == ""


def test_error_in_an_array_of_zone_tables_names_its_header_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bad = tmp_path / "zones.toml"
    bad.write_text(
        'name = "zones"\n[site]\nflock_start = [-600.0, 0.0]\n'
        "[[site.protected]]\ncircle = { center = [0.0, 0.0], radius = 150.0 }\n"
        "[[site.protected]]  # two vertices only\npolygon = [[1.0, 1.0], [2.0, 2.0]]\n"
    )
    assert main(["check", str(bad)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err == [
        f"{bad}:6: key 'site.protected.2.polygon' = [[1, 1], [2, 2]]: must list 3 to 256 "
        "vertices [x, y]"
    ]


def test_suites_are_checked_as_suites(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A file under suites/ (or one listing [[entry]] tables) is loaded as `flockward run` loads
    a suite, not read as a flock; a bad entry is one line naming the key and value."""
    shipped = sorted((ROOT / "configs" / "suites").glob("*.toml"))
    assert main(["check", *map(str, shipped)]) == 0
    out = capsys.readouterr().out
    assert out.count("ok  ") == len(shipped) and "suite 'standard'" in out
    bad = tmp_path / "mine.toml"
    bad.write_text('name = "mine"\nversion = 1\n[[entry]]\nscenario = "nowhere"\nseeds = [1, 2]\n')
    assert main(["check", str(bad)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "'scenario'" in err[0] and "nowhere" in err[0]
    assert main(["check", "--kind", "suite", str(bad)]) == 2

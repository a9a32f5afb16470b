"""Files are replaced whole or not at all, with the permissions any new file would get."""

from __future__ import annotations

import os
import stat
from pathlib import Path

import pytest

from flockward.config.atomic import atomic_path, write_atomic


def _mode(path: Path) -> int:
    return stat.S_IMODE(path.stat().st_mode)


def test_write_replaces_the_file(tmp_path: Path) -> None:
    target = tmp_path / "sub" / "out.json"
    write_atomic(target, "old")
    write_atomic(target, b"new \xc3\xa9")
    assert target.read_text(encoding="utf-8") == "new é"
    assert sorted(p.name for p in target.parent.iterdir()) == ["out.json"]


def test_failure_mid_write_leaves_the_old_file(tmp_path: Path) -> None:
    target = tmp_path / "out.json"
    write_atomic(target, "old content")
    with pytest.raises(RuntimeError, match="disk gone"), atomic_path(target) as tmp:
        tmp.write_text("half of the new")
        raise RuntimeError("disk gone")
    assert target.read_text() == "old content"
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]  # no temporary left behind


def test_failure_before_the_first_write_leaves_no_file(tmp_path: Path) -> None:
    target = tmp_path / "never.png"
    with pytest.raises(KeyboardInterrupt), atomic_path(target):
        raise KeyboardInterrupt
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("umask", [0o022, 0o077, 0o002])
def test_permissions_follow_the_umask(tmp_path: Path, umask: int) -> None:
    # Reference: POSIX open(2) creates a file with mode 0666 & ~umask; a plain open() shows it.
    old = os.umask(umask)
    try:
        plain = tmp_path / "plain.txt"
        plain.write_text("x")
        written = write_atomic(tmp_path / "atomic.txt", "x")
        with atomic_path(tmp_path / "by-writer.png", suffix=".tmp.png") as tmp:
            tmp.write_bytes(b"x")
    finally:
        os.umask(old)
    assert _mode(plain) == 0o666 & ~umask
    assert _mode(written) == _mode(plain)
    assert _mode(tmp_path / "by-writer.png") == _mode(plain)


def test_temporary_name_keeps_the_requested_suffix(tmp_path: Path) -> None:
    with atomic_path(tmp_path / "model.zip", suffix=".partial.zip") as tmp:
        assert tmp.parent == tmp_path and tmp.name.endswith(".partial.zip")
        assert tmp.name.startswith(".model.zip.")  # hidden, so globs like step_*.zip skip it
        tmp.write_bytes(b"zip")
    assert (tmp_path / "model.zip").read_bytes() == b"zip"

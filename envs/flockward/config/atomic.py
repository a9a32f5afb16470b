"""Writing a file whole or not at all: a reader sees the old file or the new one, never half.

Used for every file flockward writes (result files, leaderboards, frames and animations,
training logs and checkpoints). It lives in the lowest layer that writes files.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

__all__ = ["atomic_path", "write_atomic"]


def _fresh(out: Path, suffix: str) -> Path:
    """Create an empty file beside ``out`` with an unused name ending in ``suffix``.

    Opened with mode 0o666 like any new file, so the umask sets its permissions (not 0600, as
    ``tempfile.mkstemp`` would).
    """
    while True:
        tmp = out.with_name(f".{out.name}.{secrets.token_hex(4)}{suffix}")
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except FileExistsError:
            continue
        os.close(fd)
        return tmp


@contextmanager
def atomic_path(path: str | os.PathLike[str], suffix: str = ".tmp") -> Iterator[Path]:
    """A new empty temporary file beside ``path`` for the block to write; when the block ends it
    replaces ``path``, and when the block raises it is removed and ``path`` is left as it was.

    ``suffix`` ends the temporary name: keep it ``.tmp`` unless a writer infers the format from
    the name (e.g. ``.tmp.zip`` for a library that appends ``.zip`` otherwise).
    """
    out = Path(path)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = _fresh(out, suffix)
    try:
        yield tmp
        os.replace(tmp, out)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def write_atomic(path: str | os.PathLike[str], data: str | bytes) -> Path:
    """Replace ``path`` by ``data`` (text is written as UTF-8), synced to disk before the rename."""
    with atomic_path(path) as tmp, tmp.open("wb") as handle:
        handle.write(data.encode("utf-8") if isinstance(data, str) else data)
        handle.flush()
        os.fsync(handle.fileno())
    return Path(path)

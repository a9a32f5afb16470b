"""The documentation site builds from the docstrings with warnings as errors (MkDocs --strict)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_site_builds_strict_with_the_api_reference(tmp_path: Path) -> None:
    site = tmp_path / "site"
    result = subprocess.run(
        [sys.executable, "-m", "mkdocs", "build", "--strict", "--site-dir", str(site)],
        cwd=ROOT, capture_output=True, text=True, timeout=300, check=False,
    )  # fmt: skip
    assert result.returncode == 0, result.stderr[-3000:]
    sim = (site / "api" / "sim" / "index.html").read_text(encoding="utf-8")
    assert 'id="flockward.sim.dynamics.flock_acceleration"' in sim
    bench = (site / "api" / "bench" / "index.html").read_text(encoding="utf-8")
    assert 'id="flockward.bench.sweep.run_sweep"' in bench

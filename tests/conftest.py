"""Test session setup: numba may start 4 threads even on a 2-core machine, so the thread-count
checks run the 4-thread path (set before numba is imported; an explicit setting wins)."""

from __future__ import annotations

import os

os.environ.setdefault("NUMBA_NUM_THREADS", "4")

"""A read-only snapshot of one world's state, for users of the environments.

The environments' ``state`` gives bird and drone positions and velocities without exposing the
simulator's buffers: arrays are copies marked read-only, so writing to them raises ValueError
instead of silently changing (or failing to change) the episode.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from flockward.sim.types import WorldState


def _read_only(array: np.ndarray) -> np.ndarray:
    out = np.array(array, dtype=np.float64)
    out.flags.writeable = False
    return out


@dataclass(frozen=True)
class WorldView:
    """One world after the latest reset or step (world frame: x east, y north)."""

    bird_pos: np.ndarray  # (count, 2) m, active birds only, read-only
    bird_vel: np.ndarray  # (count, 2) m/s, read-only
    drone_pos: np.ndarray  # (P, 2) m, every drone, read-only
    drone_vel: np.ndarray  # (P, 2) m/s, read-only
    count: int  # active birds

    @classmethod
    def of(cls, state: WorldState, index: int) -> WorldView:
        """World ``index`` of a batched state, as read-only copies of its active slots."""
        n = int(state.count[index])
        return cls(
            bird_pos=_read_only(state.bird_pos[index, :n]),
            bird_vel=_read_only(state.bird_vel[index, :n]),
            drone_pos=_read_only(state.pursuer_pos[index]),
            drone_vel=_read_only(state.pursuer_vel[index]),
            count=n,
        )

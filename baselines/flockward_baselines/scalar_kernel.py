"""The scalar flock kernel as it was before the vectorised pair loop: a frozen reference.

Used only by ``flockward bench`` (the speed ratio of today's kernel to this one on the same state)
and by the tests (one force evaluation of both agree to rounding). Nothing in the environments
calls it; do not change its physics. The per-bird parts both kernels share (fear, budget,
destination, heading) are imported from the live kernel, so the comparison isolates the pair loop.
"""

from __future__ import annotations

import math

import numpy as np

from flockward.sim.dynamics import (
    _C_ADGE,
    _C_AFLEE,
    _C_AMAX,
    _C_AMODEL,
    _C_BETA,
    _C_BURST,
    _C_CRUISE,
    _C_DFRAME,
    _C_INF,
    _C_KALI,
    _C_KCOH,
    _C_KDST,
    _C_KSEP,
    _C_KV,
    _C_RALI,
    _C_RALM,
    _C_RCOH,
    _C_RDGE,
    _C_RSEP,
    _C_SIG,
    _C_THRUST,
    _C_TOPC,
    _C_TOPK,
    BUMP_PLATEAU,
    SEPARATION_FLOOR,
    _allocate,
    _cell_keys,
    _destination_request,
    _drone_substep,
    _fear_requests,
    _heading,
    _noise_and_clamp,
    _topological_radius,
)
from flockward.sim.jit import compiled, compiled_fastmath, compiled_inline
from flockward.sim.types import MAX_NEIGHBOURS

_TINY = 1e-12
_FAST = {"contract", "afn"}  # the flags the scalar kernel was compiled with


@compiled_inline
def _bump(z: float, h: float) -> float:
    if z < h:
        return 1.0
    if z >= 1.0:
        return 0.0
    t = (z - h) / (1.0 - h)
    return 1.0 - t * t * (3.0 - 2.0 * t)


@compiled_inline
def _candidate_range(
    use_grid: bool, keys: np.ndarray, sorted_keys: np.ndarray, i: int, r: int, n: int
) -> tuple[int, int]:
    if not use_grid:
        return 0, n
    kx = (keys[i] >> 32) + r - 1
    ky = keys[i] & 0xFFFFFFFF
    start = np.searchsorted(sorted_keys, (kx << 32) | (ky - 1), "left")
    stop = np.searchsorted(sorted_keys, (kx << 32) | (ky + 1), "right")
    return start, stop


@compiled
def _visit_order(
    x: np.ndarray, n: int, cut: float, use_grid: bool, keys: np.ndarray, order: np.ndarray
) -> tuple[np.ndarray, int]:
    if use_grid:
        _cell_keys(x, n, cut, keys)
        order[:n] = np.argsort(keys[:n], kind="mergesort")
        return keys[:n][order[:n]], 3
    for i in range(n):
        order[i] = i
    return keys[:0], 1


@compiled_inline
def _kth_nearest_sq(
    x: np.ndarray,
    i: int,
    k: int,
    limit2: float,
    use_grid: bool,
    keys: np.ndarray,
    sorted_keys: np.ndarray,
    order: np.ndarray,
    n_ranges: int,
    n: int,
    nearest: np.ndarray,
) -> float:
    for m in range(k):
        nearest[m] = limit2
    xi = x[i, 0]
    yi = x[i, 1]
    for r in range(n_ranges):
        start, stop = _candidate_range(use_grid, keys, sorted_keys, i, r, n)
        for s in range(start, stop):
            j = order[s]
            if j == i:
                continue
            dx = x[j, 0] - xi
            dy = x[j, 1] - yi
            d2 = dx * dx + dy * dy
            if d2 < nearest[k - 1]:
                m = k - 1
                while m > 0 and nearest[m - 1] > d2:
                    nearest[m] = nearest[m - 1]
                    m -= 1
                nearest[m] = d2
    return float(nearest[k - 1])


@compiled_fastmath(_FAST)
def scalar_flock_acceleration(
    x: np.ndarray,
    v: np.ndarray,
    n: int,
    prm: np.ndarray,
    destination: np.ndarray,
    drones: np.ndarray,
    drone_vel: np.ndarray,
    use_grid: bool,
    keys: np.ndarray,
    order: np.ndarray,
    out: np.ndarray,
) -> None:
    """Every bird's acceleration (N, 2) into ``out``, by the scalar pair loop."""
    r_sep = prm[_C_RSEP]
    r_ali = prm[_C_RALI]
    r_coh = prm[_C_RCOH]
    cut = max(r_sep, r_ali, r_coh)
    cut2 = cut * cut
    k_sep = prm[_C_KSEP]
    cucker_smale = prm[_C_AMODEL] == 1.0
    inv_sig2 = 1.0 / (prm[_C_SIG] * prm[_C_SIG])
    beta = prm[_C_BETA]
    d_floor = SEPARATION_FLOOR * r_sep
    k_ali = prm[_C_KALI]
    k_coh = prm[_C_KCOH]
    k_dst = prm[_C_KDST]
    informed = prm[_C_INF]
    cruise = prm[_C_CRUISE]
    burst = prm[_C_BURST]
    k_v = prm[_C_KV]
    a_max = prm[_C_AMAX]
    r_alarm = prm[_C_RALM]
    r_dodge = prm[_C_RDGE]
    a_flee = prm[_C_AFLEE]
    a_dodge = prm[_C_ADGE]
    relative = prm[_C_DFRAME] == 0.0
    power_limited = prm[_C_THRUST] == 1.0
    k_top = int(prm[_C_TOPK])
    reach = prm[_C_TOPC]
    limit2 = (r_coh / reach) * (r_coh / reach)
    nearest = np.empty(MAX_NEIGHBOURS)
    sorted_keys, n_ranges = _visit_order(x, n, cut, use_grid, keys, order)
    for i in range(n):
        xi = x[i, 0]
        yi = x[i, 1]
        vxi = v[i, 0]
        vyi = v[i, 1]
        r_a = r_ali
        r_c = r_coh
        plateau = BUMP_PLATEAU
        if k_top > 0:
            dk2 = _kth_nearest_sq(
                x, i, k_top, limit2, use_grid, keys, sorted_keys, order, n_ranges, n, nearest
            )
            r_a = r_c = _topological_radius(dk2, limit2, reach, r_coh)
            plateau = 1.0 / reach
        sx = sy = alx = aly = aw = cx = cy = cw = 0.0
        for r in range(n_ranges):
            start, stop = _candidate_range(use_grid, keys, sorted_keys, i, r, n)
            for s in range(start, stop):
                j = order[s]
                if j == i:
                    continue
                dx = x[j, 0] - xi
                dy = x[j, 1] - yi
                d2 = dx * dx + dy * dy
                if d2 >= cut2:
                    continue
                d = math.sqrt(d2)
                if d < r_sep:
                    q = r_sep / max(d, d_floor) - 1.0
                    f = k_sep * q * q * _bump(d / r_sep, 0.0) / max(d, _TINY)
                    sx -= f * dx
                    sy -= f * dy
                if d < r_a:
                    w = _bump(d / r_a, plateau)
                    if cucker_smale:
                        w *= math.pow(1.0 + d2 * inv_sig2, -beta)
                    alx += w * (v[j, 0] - vxi)
                    aly += w * (v[j, 1] - vyi)
                    aw += w
                if d < r_c:
                    w = _bump(d / r_c, plateau)
                    cx += w * dx
                    cy += w * dy
                    cw += w
        if cucker_smale:
            scale = k_ali / n
        else:
            scale = k_ali / (1.0 + aw)
        alx *= scale
        aly *= scale
        cx *= k_coh / (1.0 + cw)
        cy *= k_coh / (1.0 + cw)
        speed, ux, uy = _heading(vxi, vyi)
        tx, ty = _destination_request(i, informed, destination, xi, yi, ux, uy, k_dst, cruise)
        fx, fy, ox, oy, fear = _fear_requests(
            xi, yi, vxi, vyi, drones, drone_vel, r_alarm, r_dodge, a_flee, a_dodge, relative,
            cruise, burst, power_limited,
        )  # fmt: skip
        ax, ay = _allocate(sx, sy, ox, oy, fx, fy, alx, aly, cx, cy, tx, ty, a_max)
        preferred = cruise + (burst - cruise) * fear
        out[i, 0] = ax + k_v * (preferred - speed) * ux
        out[i, 1] = ay + k_v * (preferred - speed) * uy


@compiled
def scalar_step_worlds(
    bird_pos: np.ndarray,
    bird_vel: np.ndarray,
    pursuer_pos: np.ndarray,
    pursuer_vel: np.ndarray,
    count: np.ndarray,
    destination: np.ndarray,
    params: np.ndarray,
    pursuer_limits: np.ndarray,
    action: np.ndarray,
    noise: np.ndarray,
    noise_row: np.ndarray,
    dt: float,
    substeps: int,
    use_grid: bool,
    clamps: np.ndarray,
) -> None:
    """Every world by one control step with the scalar kernel (the old step, for timing)."""
    has_noise = noise.shape[1] > 0
    h = dt / substeps
    half = 0.5 * h
    sqrt_h = math.sqrt(h)
    slots = max(bird_pos.shape[1], 1)
    a = np.empty((slots, 2))
    vp = np.empty((slots, 2))
    keys = np.empty(slots, dtype=np.int64)
    order = np.empty(slots, dtype=np.int64)
    for b in range(bird_pos.shape[0]):
        n = count[b]
        x = bird_pos[b]
        v = bird_vel[b]
        prm = params[b]
        p = pursuer_pos[b]
        pv = pursuer_vel[b]
        scalar_flock_acceleration(x, v, n, prm, destination[b], p, pv, use_grid, keys, order, a)
        for k in range(substeps):
            _drone_substep(p, pv, action[b], pursuer_limits[b], h, 0.0, 0.0)  # still air only
            for i in range(n):
                for c in range(2):
                    v_half = v[i, c] + half * a[i, c]
                    x[i, c] += h * v_half
                    vp[i, c] = v_half + half * a[i, c]
                    v[i, c] = v_half
            scalar_flock_acceleration(
                x, vp, n, prm, destination[b], p, pv, use_grid, keys, order, a
            )
            for i in range(n):
                for c in range(2):
                    v[i, c] += half * a[i, c]
            row = noise_row[b] + k
            clamps[b] += _noise_and_clamp(v, n, prm, noise[b], row, sqrt_h, has_noise)

"""The step kernel: birds and drones of B independent worlds advanced by one time step.

Written once, batch-first, compiled with numba. Birds are double integrators steered by the sum of
published terms:

- separation: inverse-distance repulsion from flockmates closer than ``separation_radius``
  (Reynolds 1987, SIGGRAPH);
- alignment: Cucker-Smale coupling (K/N) * sum_j psi(r_ij) (v_j - v_i), with
  psi(r) = (1 + r^2/sigma^2)^-beta, among flockmates within ``alignment_radius``
  (Cucker & Smale 2007, IEEE TAC);
- cohesion: toward the centroid of flockmates within ``cohesion_radius`` (Reynolds 1987);
- destination: steering toward the cruise velocity aimed at the flock's roost, a normalised form of
  the navigational feedback of Olfati-Saber 2006 (IEEE TAC);
- fear of the nearest drone (pursuer): radial flight inside ``alarm_radius`` and, inside the
  smaller ``dodge_radius``, a sideways dodge perpendicular to that drone's line of approach;
- optional Gaussian acceleration noise.

The summed acceleration is capped at ``max_accel`` and the airspeed is clamped to
[min_speed, max_speed] (birds in flapping flight cannot hover).

Integration: each step holds the acceleration constant (zero-order hold) and applies the exact
discretisation of the double integrator, v' = v + a dt and x' = x + (v + v') dt / 2, which equals
x + v dt + a dt^2 / 2 and so is exact for constant acceleration, unlike explicit or semi-implicit
Euler, at the cost of one force evaluation per step. After the speed clamp the position still
advances by the mean of the old and the clamped new velocity. Each drone uses the same scheme, with
its own command and limits.

No drone (P = 0): nothing to fear, the flock flies unherded.

Several drones: a bird fears only the nearest one (the lowest index on a tie), not the sum of all.
A bird reacts to the most pressing threat, and the fear law's gains describe one threat: summing
would make two drones at the same spot twice as frightening as one. With one drone this is the
single-drone law, operation for operation. Birds see every drone where it was at the start of the
step; the drones move after the birds.

Neighbour search: all pairs (each pair visited once, contributions applied to both birds) for small
flocks; for large flocks a cell grid with cell size equal to the interaction cut-off (birds sorted
by cell key, neighbouring cells found by binary search, so memory stays O(N) however far birds
spread). Both traversals run the same pair arithmetic, so they agree to rounding.
"""

from __future__ import annotations

import math

import numpy as np

from flockward.sim.jit import compiled, compiled_fastmath
from flockward.sim.types import K

# Above this many birds the cell grid beats all pairs (measured by `flockward bench`).
GRID_MIN_BIRDS = 350
NEIGHBOUR_SEARCH = ("auto", "all-pairs", "grid")

_SEP_MIN_D2 = 1e-2  # m^2: separation distance floor, so very close birds push apart finitely
_TINY = 1e-12
# Exact IEEE semantics except fused multiply-add and fast transcendental approximations: the same
# compiled code runs for single and vector envs, so results stay bit-identical between them.
_FAST: set[str] = {"contract", "afn"}

_C_CRUISE = K["cruise_speed"]
_C_VMIN = K["min_speed"]
_C_VMAX = K["max_speed"]
_C_AMAX = K["max_accel"]
_C_RSEP = K["separation_radius"]
_C_KSEP = K["separation_gain"]
_C_RALI = K["alignment_radius"]
_C_KALI = K["alignment_gain"]
_C_SIG = K["alignment_sigma"]
_C_RCOH = K["cohesion_radius"]
_C_KCOH = K["cohesion_gain"]
_C_KDST = K["destination_gain"]
_C_RALM = K["alarm_radius"]
_C_KFLE = K["flee_gain"]
_C_RDGE = K["dodge_radius"]
_C_KDGE = K["dodge_gain"]
_C_NOISE = K["noise_std"]

# Per-world work space: bird coordinates copied to struct-of-arrays rows (contiguous loads in the
# pair loop) and, in a separate array so the compiler sees no aliasing, the pair accumulators.
_X, _Y, _VX, _VY = range(4)
_SX, _SY, _AX, _AY, _CX, _CY, _CN = range(7)

# The Cucker-Smale weight (1 + u)^-beta, u = r^2 / sigma^2, is read from a table over
# z = u / (1 + u) in [0, 1), where it equals (1 - z)^beta: one division and a linear interpolation
# per pair instead of a libm pow (about 30 ns, five times the rest of the pair's work).
ALIGN_TABLE_SIZE = 2048


def alignment_table(beta: float) -> np.ndarray:
    """Tabulated Cucker-Smale weight (1 - z)^beta on a uniform grid of z, padded by one entry."""
    z = np.linspace(0.0, 1.0, ALIGN_TABLE_SIZE + 1)
    table = np.empty(ALIGN_TABLE_SIZE + 2)
    table[:-1] = (1.0 - z) ** beta
    table[-1] = 0.0
    return table


@compiled
def _cell_keys(w: np.ndarray, n: int, cell: float, keys: np.ndarray) -> None:
    """Each bird's grid-cell key into ``keys``: cell column in the high 32 bits, row in the low."""
    for i in range(n):
        cx = np.int64(math.floor(w[_X, i] / cell)) + 2**30
        cy = np.int64(math.floor(w[_Y, i] / cell)) + 2**30
        keys[i] = (cx << 32) | cy


@compiled_fastmath(_FAST)
def _accumulate(
    w: np.ndarray,  # (4, N) bird coordinates, struct of arrays
    acc: np.ndarray,  # (7, N) pair sums, zeroed by the caller
    n: int,
    prm: np.ndarray,  # (len(KERNEL_FIELDS),) the world's bird parameters
    table: np.ndarray,  # (ALIGN_TABLE_SIZE + 2,) alignment_table(beta)
    use_grid: bool,
    keys: np.ndarray,  # (N,) int64 work space
    order: np.ndarray,  # (N,) int64 work space
) -> None:
    """Sum every neighbour pair's separation, alignment and cohesion terms into ``acc``.

    Each unordered pair within the cut-off is visited once (j > i) and applied to both birds: all
    terms are antisymmetric in (i, j) except the neighbour count. Candidates are all later birds
    (all pairs) or the birds of the 3 x 3 surrounding grid cells (grid); the pair arithmetic is
    the same code for both.
    """
    r_sep2 = prm[_C_RSEP] ** 2
    r_ali2 = prm[_C_RALI] ** 2
    r_coh2 = prm[_C_RCOH] ** 2
    cut2 = max(r_sep2, r_ali2, r_coh2)
    inv_sig2 = 1.0 / prm[_C_SIG] ** 2
    X = w[_X]
    Y = w[_Y]
    VX = w[_VX]
    VY = w[_VY]
    if use_grid:
        _cell_keys(w, n, math.sqrt(cut2), keys)
        order[:n] = np.argsort(keys[:n], kind="mergesort")
        sorted_keys = keys[:n][order[:n]]
    else:
        for i in range(n):
            order[i] = i
        sorted_keys = keys[:0]
    for i in range(n):
        xi = X[i]
        yi = Y[i]
        vxi = VX[i]
        vyi = VY[i]
        sxi = syi = axi = ayi = cxi = cyi = cni = 0.0
        n_ranges = 3 if use_grid else 1
        for r in range(n_ranges):
            if use_grid:
                kx = (keys[i] >> 32) + r - 1
                ky = keys[i] & 0xFFFFFFFF
                start = np.searchsorted(sorted_keys, (kx << 32) | (ky - 1), "left")
                stop = np.searchsorted(sorted_keys, (kx << 32) | (ky + 1), "right")
            else:
                start = i + 1
                stop = n
            for s in range(start, stop):
                j = order[s]
                if j <= i:
                    continue
                dx = X[j] - xi
                dy = Y[j] - yi
                d2 = dx * dx + dy * dy
                if d2 >= cut2:
                    continue
                sx = sy = ax = ay = cx = cy = cn = 0.0
                if d2 < r_sep2:
                    inv = 1.0 / max(d2, _SEP_MIN_D2)
                    sx = -dx * inv
                    sy = -dy * inv
                if d2 < r_ali2:
                    u = d2 * inv_sig2
                    t = ALIGN_TABLE_SIZE * u / (1.0 + u)
                    k = int(t)
                    wt = table[k] + (t - k) * (table[k + 1] - table[k])
                    ax = wt * (VX[j] - vxi)
                    ay = wt * (VY[j] - vyi)
                if d2 < r_coh2:
                    cx = dx
                    cy = dy
                    cn = 1.0
                sxi += sx
                syi += sy
                axi += ax
                ayi += ay
                cxi += cx
                cyi += cy
                cni += cn
                acc[_SX, j] -= sx
                acc[_SY, j] -= sy
                acc[_AX, j] -= ax
                acc[_AY, j] -= ay
                acc[_CX, j] -= cx
                acc[_CY, j] -= cy
                acc[_CN, j] += cn
        acc[_SX, i] += sxi
        acc[_SY, i] += syi
        acc[_AX, i] += axi
        acc[_AY, i] += ayi
        acc[_CX, i] += cxi
        acc[_CY, i] += cyi
        acc[_CN, i] += cni


@compiled
def _advance(
    x: float,
    y: float,
    vx: float,
    vy: float,
    ax: float,
    ay: float,
    vmin: float,
    vmax: float,
    dt: float,
) -> tuple[float, float, float, float]:
    """Exact zero-order-hold double-integrator step, then the airspeed clamp."""
    nvx = vx + ax * dt
    nvy = vy + ay * dt
    speed = math.sqrt(nvx * nvx + nvy * nvy)
    if speed > vmax:
        nvx *= vmax / speed
        nvy *= vmax / speed
    elif speed < vmin:
        if speed > _TINY:
            nvx *= vmin / speed
            nvy *= vmin / speed
        else:
            # Stalled exactly: keep the old heading (or +x if there is none) at minimum speed.
            old = math.sqrt(vx * vx + vy * vy)
            if old > _TINY:
                nvx = vx * vmin / old
                nvy = vy * vmin / old
            else:
                nvx = vmin
                nvy = 0.0
    return x + 0.5 * (vx + nvx) * dt, y + 0.5 * (vy + nvy) * dt, nvx, nvy


@compiled
def _fear(
    x: float,
    y: float,
    ax: float,
    ay: float,
    drones: np.ndarray,  # (P, 2) m, drone positions at the start of the step
    drone_vel: np.ndarray,  # (P, 2) m/s
    r_alarm: float,
    r_dodge: float,
    k_flee: float,
    k_dodge: float,
) -> tuple[float, float]:
    """The bird's acceleration (ax, ay) plus its flight from the nearest drone."""
    if drones.shape[0] == 0:
        return ax, ay  # no drone in the world (the unherded control): nothing to fear
    # The nearest drone (first on a tie) is the one this bird fears.
    near = 0
    rx = x - drones[0, 0]
    ry = y - drones[0, 1]
    d2 = rx * rx + ry * ry
    for q in range(1, drones.shape[0]):
        qx = x - drones[q, 0]
        qy = y - drones[q, 1]
        q2 = qx * qx + qy * qy
        if q2 < d2:
            near, rx, ry, d2 = q, qx, qy, q2
    d = math.sqrt(d2)
    if d < r_alarm and d > _TINY:
        f = k_flee * (1.0 - d / r_alarm) / d
        ax += f * rx
        ay += f * ry
        if d < r_dodge:
            # Line of approach: the drone's velocity if it moves, else the bird-drone line.
            pvx = drone_vel[near, 0]
            pvy = drone_vel[near, 1]
            pspeed = math.sqrt(pvx * pvx + pvy * pvy)
            if pspeed > _TINY:
                ux = pvx / pspeed
                uy = pvy / pspeed
            else:
                ux = -rx / d
                uy = -ry / d
            # Perpendicular to the approach line, on the side the bird already is.
            nx = -uy
            ny = ux
            side = 1.0 if rx * nx + ry * ny >= 0.0 else -1.0
            f = k_dodge * (1.0 - d / r_dodge) * side
            ax += f * nx
            ay += f * ny
    return ax, ay


@compiled
def _move_drones(
    drones: np.ndarray,  # (P, 2) m, updated in place
    drone_vel: np.ndarray,  # (P, 2) m/s, updated in place
    action: np.ndarray,  # (P, 2) normalised command per drone
    limits: np.ndarray,  # (P, 2) per drone: max speed m/s, max acceleration m/s^2
    dt: float,
) -> None:
    """Advance one world's drones under their commands, in place."""
    # Each drone: its command is clipped to the unit box, then its norm capped at 1.
    for q in range(drones.shape[0]):
        ux = min(max(action[q, 0], -1.0), 1.0)
        uy = min(max(action[q, 1], -1.0), 1.0)
        u = math.sqrt(ux * ux + uy * uy)
        if u > 1.0:
            ux /= u
            uy /= u
        amax_p = limits[q, 1]
        nx_, ny_, nvx, nvy = _advance(
            drones[q, 0],
            drones[q, 1],
            drone_vel[q, 0],
            drone_vel[q, 1],
            ux * amax_p,
            uy * amax_p,
            0.0,
            limits[q, 0],
            dt,
        )
        drones[q, 0] = nx_
        drones[q, 1] = ny_
        drone_vel[q, 0] = nvx
        drone_vel[q, 1] = nvy


@compiled
def step_worlds(
    bird_pos: np.ndarray,  # (B, N, 2) m, updated in place
    bird_vel: np.ndarray,  # (B, N, 2) m/s, updated in place
    pursuer_pos: np.ndarray,  # (B, P, 2) m, drone positions, updated in place
    pursuer_vel: np.ndarray,  # (B, P, 2) m/s, drone velocities, updated in place
    count: np.ndarray,  # (B,) active birds
    destination: np.ndarray,  # (B, 2) m
    params: np.ndarray,  # (B, len(KERNEL_FIELDS)) per-world bird parameters
    align_tables: np.ndarray,  # (B, ALIGN_TABLE_SIZE + 2) per-world alignment_table(beta)
    pursuer_limits: np.ndarray,  # (B, P, 2) per drone: max speed m/s, max acceleration m/s^2
    action: np.ndarray,  # (B, P, 2) normalised command per drone, already finite
    noise: np.ndarray,  # (B, T, N, 2) standard normals, or shape (B, 0, 0, 2) for none
    noise_row: np.ndarray,  # (B,) which of the T rows this step uses
    dt: float,  # s
    use_grid: bool,  # bool: cell grid instead of all pairs
    live: np.ndarray,  # (B,) bool: worlds to advance; the others are left untouched
    work: np.ndarray,  # (4, N) float64 work space for coordinates
    acc: np.ndarray,  # (7, N) float64 work space for pair sums
    index_work: np.ndarray,  # (2, N) int64 work space: cell keys, visit order
) -> None:
    """Advance every world by one step, in place."""
    n_worlds = bird_pos.shape[0]
    has_noise = noise.shape[1] > 0
    for b in range(n_worlds):
        if not live[b]:
            continue
        n = count[b]
        prm = params[b]
        pos = bird_pos[b]
        vel = bird_vel[b]
        drones = pursuer_pos[b]
        drone_vel = pursuer_vel[b]
        for i in range(n):
            work[_X, i] = pos[i, 0]
            work[_Y, i] = pos[i, 1]
            work[_VX, i] = vel[i, 0]
            work[_VY, i] = vel[i, 1]
        acc[:, :n] = 0.0
        _accumulate(work, acc, n, prm, align_tables[b], use_grid, index_work[0], index_work[1])
        k_sep = prm[_C_KSEP]
        k_ali = prm[_C_KALI] / max(n, 1)
        k_coh = prm[_C_KCOH]
        k_dst = prm[_C_KDST]
        cruise = prm[_C_CRUISE]
        r_alarm = prm[_C_RALM]
        r_dodge = prm[_C_RDGE]
        k_flee = prm[_C_KFLE]
        k_dodge = prm[_C_KDGE]
        a_max = prm[_C_AMAX]
        sigma = prm[_C_NOISE]
        dest_x = destination[b, 0]
        dest_y = destination[b, 1]
        row = noise_row[b]
        for i in range(n):
            x = pos[i, 0]
            y = pos[i, 1]
            vx = vel[i, 0]
            vy = vel[i, 1]
            ax = k_sep * acc[_SX, i] + k_ali * acc[_AX, i]
            ay = k_sep * acc[_SY, i] + k_ali * acc[_AY, i]
            if acc[_CN, i] > 0.0:
                ax += k_coh * acc[_CX, i] / acc[_CN, i]
                ay += k_coh * acc[_CY, i] / acc[_CN, i]
            gx = dest_x - x
            gy = dest_y - y
            g = math.sqrt(gx * gx + gy * gy)
            if g > _TINY:
                ax += k_dst * (cruise * gx / g - vx)
                ay += k_dst * (cruise * gy / g - vy)
            ax, ay = _fear(x, y, ax, ay, drones, drone_vel, r_alarm, r_dodge, k_flee, k_dodge)
            if has_noise and sigma > 0.0:
                ax += sigma * noise[b, row, i, 0]
                ay += sigma * noise[b, row, i, 1]
            a = math.sqrt(ax * ax + ay * ay)
            if a > a_max:
                ax *= a_max / a
                ay *= a_max / a
            nx_, ny_, nvx, nvy = _advance(x, y, vx, vy, ax, ay, prm[_C_VMIN], prm[_C_VMAX], dt)
            pos[i, 0] = nx_
            pos[i, 1] = ny_
            vel[i, 0] = nvx
            vel[i, 1] = nvy
        _move_drones(drones, drone_vel, action[b], pursuer_limits[b], dt)


def choose_grid(max_birds: int, interaction_radius: float, neighbour_search: str = "auto") -> bool:
    """Whether the cell grid should be used for flocks of up to ``max_birds``."""
    if neighbour_search not in NEIGHBOUR_SEARCH:
        raise ValueError(
            f"neighbour_search = {neighbour_search!r}: allowed {', '.join(NEIGHBOUR_SEARCH)}"
        )
    if neighbour_search == "grid":
        if not math.isfinite(interaction_radius):
            raise ValueError("neighbour_search = 'grid' needs a finite interaction radius")
        return True
    if neighbour_search == "all-pairs":
        return False
    return max_birds >= GRID_MIN_BIRDS and math.isfinite(interaction_radius)

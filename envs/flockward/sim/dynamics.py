"""The step kernel: birds and drones of B independent worlds advanced by one control step.

Written once, batch-first, compiled with numba. Each control step of length ``dt`` is split into
``substeps`` physics substeps of length h = dt / substeps.

Birds are double integrators. Each bird's acceleration is a set of steering requests, every one
continuous in distance (the cut-offs are the C1 bump rho_h of Olfati-Saber 2006, IEEE TAC, with
the polynomial 1 - 3t^2 + 2t^3 on its ramp in place of the cosine: same end values and zero end
slopes, no libm call in the pair loop):

- separation: k_sep ((r_sep/d) - 1)^2 rho_0(d/r_sep) away from each neighbour, d floored at
  ``SEPARATION_FLOOR`` r_sep: zero with zero slope at r_sep, growing like 1/d^2 near contact, so
  with first call on the budget it acts as a hard core;
- alignment, Motsch & Tadmor 2011 (J. Stat. Phys.) by default: k_ali sum_j w_ij (v_j - v_i) /
  (1 + sum_j w_ij) with w_ij = rho(d/r_ali) and the bird itself as the 1, so the rate depends on
  local density, not on N; or Cucker & Smale 2007 (IEEE TAC): (k_ali/N) sum_j psi(d) w_ij
  (v_j - v_i), psi = (1 + d^2/sigma^2)^-beta. A large ``alignment_radius`` makes it global;
- cohesion: k_coh sum_j w_ij (x_j - x_i) / (1 + sum_j w_ij), a locally normalised centroid pull;
- topological neighbours (option, ``neighbours`` = k >= 1; 0, the default, keeps the metric
  radii): starlings interact with about 6-7 nearest neighbours whatever their distance
  (Ballerini et al. 2008, PNAS 105:1232, from memory). Each bird's alignment and cohesion radius
  becomes R_i = min(c d_k(i), r_coh), d_k(i) its distance to its k-th nearest flockmate and
  c = ``topological_reach``, and both weights become rho_{1/c}(d/R_i): the k nearest weigh 1,
  those out to R_i fade to 0. d_k is continuous in positions, so the forces stay continuous;
  r_coh caps the reach (a bird perceives no farther), so beyond r_coh / c a sparse flock's
  birds lose their neighbours as in the metric model. Separation stays metric. d_k(i) comes from
  a first pass over the bird's candidates (the k smallest squared distances kept sorted), the
  sums from a second;
- destination: only the informed share of the flock (Couzin et al. 2005, Nature) turns toward
  the roost, k_dst c (g - (g.u) u) with g, u the unit vectors to the roost and along the bird's
  velocity; it turns the bird and leaves its speed alone;
- fear of the nearest drone: flight A_flee f(d) away from it, f = rho_{r_dodge/r_alarm}(d/r_alarm)
  (flat inside ``dodge_radius``, zero at ``alarm_radius``), and inside ``dodge_radius`` a dodge
  A_dodge rho(d/r_dodge) along n = unit(r - lam (r.e) e): r the drone-to-bird offset, e the
  drone's line of approach (its velocity relative to the bird, or over the ground), lam grows
  with the approach speed from 0 to ``DODGE_LAMBDA_MAX``. Each bird dodges to its own side of the
  drone's path; a hovering drone sends each bird along its own bearing. With ``escape_thrust``
  = "power-limited" (the default; "free" is the option) the forward part of both (along the
  bird's velocity) is scaled by clip((v_burst - s)/(v_burst - cruise), 0, 1), as the power margin
  for speeding up vanishes at the top speed (Pennycuick's power curve, from memory); with "free"
  a closely chased bird reaches the max_speed safety net.

The requests share the steering budget ``max_accel`` in priority order (separation, dodge, flee,
alignment, cohesion, destination; Reynolds 1987 allocates by priority too). Each request of
magnitude m is granted m / (1 + (m/B)^p)^(1/p), p = ``BUDGET_POWER``, along its own direction,
and B shrinks by the granted magnitude: small requests pass almost unchanged, large ones saturate
at what is left, and the result is smooth in the requests. Speed is regulated outside the budget,
k_v (v_pref - s) along the velocity, v_pref rising from cruise to burst speed with fear. The hard
airspeed clamp [min_speed, max_speed] is a counted safety net, not part of the model.

Noise: heading noise (rotation of v by sigma sqrt(h) xi per substep, rotational diffusion in
rad/s^0.5) or white-noise acceleration (v += sigma sqrt(h) xi, Euler-Maruyama, m/s^1.5). Either
way the variance it injects per second does not depend on h.

Integration (``verlet_heun_substep``): velocity Verlet with a Heun-predicted velocity for the
velocity-dependent terms. For forces of position only it is velocity Verlet (symplectic, second
order); with velocity-dependent forces its velocity update is Heun's method, second order too.
One force evaluation per substep: the acceleration at the end of a substep is reused at the
start of the next (first same as last); each control step starts from a fresh evaluation, so a
state written between steps is honoured exactly.

Drones: the commanded acceleration held over the control step, integrated exactly (velocity
Verlet) and kept within the autopilot's airspeed limit. A bird fears only the nearest drone (the
lowest index on a tie); a world with no drone has no fear at all. Nearest, not a sum over drones:
a bird flees the most immediate threat, while summed fears would let two drones on opposite sides
of a bird cancel and leave it unafraid between them; and with one drone the rule is the
one-drone model exactly, bit for bit (tests/test_multi_drone.py checks the property).

Wind (``step_worlds``' ``wind``, one vector per world per substep, the same over the site;
made by ``flockward.sim.wind``): velocities are through the air, positions over the ground.
Birds hold airspeed, so every term above reads air velocities: alignment (a uniform wind
cancels in v_j - v_i anyway), speed regulation, the destination turn (the heading), the
airspeed clamp and the noise; a bird's position moves by its air velocity plus the wind. The
drone's command accelerates it through the air, its speed limit is an airspeed limit, and its
position moves by its air velocity plus the wind, so a headwind slows its ground track. The
dodge's "relative" frame (drone minus bird) is the same in air and over the ground; the
"ground" frame uses the drone's velocity through the air, the frame of the air mass the bird
flies in (with wind this is a modelling choice). Zero wind adds exact zeros: still air is
the still-air path bit for bit.

Neighbour search: all pairs for small flocks; for large flocks a cell grid with cell size equal
to the interaction cut-off (birds sorted by cell key, neighbouring cells found by binary search,
memory O(N)). Each force evaluation first copies the birds into visiting order as
struct-of-arrays slots (x, y, vx, vy), so a bird's candidates are one contiguous run of slots (all
pairs) or three (the grid's cell columns). One function, ``_pair_sums``, sums a bird's terms over
a run of slots for both searches, as ordered pairs (each bird sums over its own candidates), so
they agree to rounding. The loop has no branch: cut-offs are selects, the bird itself is summed
too (it adds exactly its weight 1, the 1 of the local normalisation), distances are floored
before division. Compiled with ``error_model="numpy"`` (no exception exit in the loop) and the
fast-math flags of ``_FAST``, LLVM vectorises it (AVX2: 4 pairs per instruction). The sums are
then taken in another order than one pair after the other: results agree with the scalar loop to
about 1e-15 relative per force evaluation, not bit for bit, and diverge over an episode as
chaotic dynamics do; they are the same on every run, in single and vector envs, and on every
x86-64 CPU, because the order LLVM picks depends on the target and ``sim.jit`` compiles for one
named target, not the host.

Precision: float64 throughout. The pair sums can be compiled for float32 slots as well (the same
functions specialised by numba on float32 arrays, every literal typed by ``jit.like``; state, each
bird's own terms and the integration stay float64), which `flockward bench` times and
scripts/float32_check.py compares over whole episodes; no environment uses it (DEVELOPERS.md,
"Precision", says why).

Threads (opt-in, ``threads`` of ``step_worlds``): worlds are split over numba's threads, or, with
fewer worlds than threads, one large world's birds in blocks of ``BIRD_BLOCK``. Every world has
its own work space and every bird's sums are the same code on the same slots, so the result is
the serial one bit for bit for any thread count.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable

import numba
import numpy as np

from flockward.sim.jit import (
    compiled,
    compiled_inline,
    compiled_kernel,
    compiled_parallel,
    compiled_uncached,
    is_single,
    like,
)
from flockward.sim.types import MAX_NEIGHBOURS, K

# One world's surroundings as flock_acceleration reads them: parameter row, destination (2,),
# drone positions (P, 2), drone velocities (P, 2), use_grid, index work (2, N) int64 (sorted cell
# keys, bird per slot), slot work (4, N) float64 (x, y, vx, vy per slot).
ForceContext = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, bool, np.ndarray, np.ndarray]
# force(x, v, n, ctx, out): every bird's acceleration into out.
Force = Callable[[np.ndarray, np.ndarray, int, ForceContext, np.ndarray], None]

# From this many birds on the cell grid beats all pairs: measured with the vectorised kernel, the
# murmuration flock (340 neighbours per bird) crosses near N = 405, the headon disc near 230; at
# 400 neither choice loses more than 6 % (`flockward bench` re-checks it).
GRID_MIN_BIRDS = 400
NEIGHBOUR_SEARCH = ("auto", "all-pairs", "grid")

# Model constants (modelling choices, see the module docstring).
SEPARATION_FLOOR = 0.05  # of r_sep: closer pairs push apart as if at this distance
BUMP_PLATEAU = 0.3  # alignment, cohesion and dodge weights are 1 below this share of the radius
DODGE_LAMBDA_MAX = 0.9  # < 1 keeps the dodge direction defined on the drone's line of approach
DODGE_SPEED_SCALE = 2.0  # m/s: approach speed at which the dodge is half lateral
BUDGET_POWER = 4.0  # sharpness of the smooth budget allocation (only 4 is compiled: two sqrt)

_TINY = 1e-12
# LLVM fast-math flags of the force kernel. reassoc lets the pair sums be split over vector lanes
# (the summation order changes, deterministically for a given flock); contract allows fused
# multiply-add; nsz ignores the sign of zero; arcp turns divisions by a loop invariant into
# multiplications. Left out on purpose: nnan and ninf (they would make a NaN or inf state
# undefined behaviour instead of a NaN the environment's checks see) and afn (approximate libm
# and sqrt). The same compiled code runs for single and vector envs and for any thread count, so
# results stay bit-identical between them.
_FAST = {"reassoc", "contract", "nsz", "arcp"}

# Threads split a world's birds in blocks of this many (one block is one task).
BIRD_BLOCK = 64
# With fewer worlds than threads, a world's birds are split over the threads from this many birds.
# Measured on 2 busy cores (one headon world, 2 threads against 1): slower at N = 150 to 1000
# (x0.15 to x0.95), about even at 1500, x0.96 to x1.46 at 2000 over several runs.
THREADED_MIN_BIRDS = 1500

_C_CRUISE = K["cruise_speed"]
_C_BURST = K["burst_speed"]
_C_VMIN = K["min_speed"]
_C_VMAX = K["max_speed"]
_C_AMAX = K["max_accel"]
_C_KV = K["speed_gain"]
_C_RSEP = K["separation_radius"]
_C_KSEP = K["separation_gain"]
_C_AMODEL = K["alignment_model"]
_C_RALI = K["alignment_radius"]
_C_KALI = K["alignment_gain"]
_C_SIG = K["alignment_sigma"]
_C_BETA = K["alignment_beta"]
_C_RCOH = K["cohesion_radius"]
_C_KCOH = K["cohesion_gain"]
_C_KDST = K["destination_gain"]
_C_INF = K["informed_fraction"]
_C_RALM = K["alarm_radius"]
_C_AFLEE = K["flee_accel"]
_C_RDGE = K["dodge_radius"]
_C_ADGE = K["dodge_accel"]
_C_DFRAME = K["dodge_frame"]
_C_THRUST = K["escape_thrust"]
_C_NMODEL = K["noise_model"]
_C_NOISE = K["noise_std"]
_C_TOPK = K["neighbours"]
_C_TOPC = K["topological_reach"]


@compiled_inline
def bump(z: float, h: float) -> float:
    """C1 cut-off: 1 on [0, h), 1 - 3t^2 + 2t^3 with t = (z - h)/(1 - h) on [h, 1), 0 beyond."""
    if z < h:
        return 1.0
    if z >= 1.0:
        return 0.0
    t = (z - h) / (1.0 - h)
    return 1.0 - t * t * (3.0 - 2.0 * t)


@compiled_inline
def _grant(qx: float, qy: float, budget: float) -> tuple[float, float, float]:
    """Share of the remaining budget for one request: its vector and granted magnitude."""
    m = math.sqrt(qx * qx + qy * qy)
    if m == 0.0 or budget <= 0.0:
        return 0.0, 0.0, 0.0
    r = m / budget
    r2 = r * r
    f = 1.0 / math.sqrt(math.sqrt(1.0 + r2 * r2))
    return qx * f, qy * f, m * f


@compiled
def is_informed(i: int, fraction: float) -> bool:
    """Whether bird ``i`` knows the roost: ``fraction`` of the birds, spread evenly by index."""
    return math.floor((i + 1) * fraction) > math.floor(i * fraction)


@compiled
def _cell_keys(x: np.ndarray, n: int, cell: float, keys: np.ndarray) -> None:
    """Each bird's cell of side ``cell``, packed into one int64 (x cell high, y cell low)."""
    for i in range(n):
        cx = np.int64(math.floor(x[i, 0] / cell)) + 2**30
        cy = np.int64(math.floor(x[i, 1] / cell)) + 2**30
        keys[i] = (cx << 32) | cy


@compiled_inline
def _fear_requests(
    xi: float,
    yi: float,
    vxi: float,
    vyi: float,
    drones: np.ndarray,
    drone_vel: np.ndarray,
    r_alarm: float,
    r_dodge: float,
    a_flee: float,
    a_dodge: float,
    relative: bool,
    cruise: float,
    burst: float,
    power_limited: bool,
) -> tuple[float, float, float, float, float]:
    """One bird's flight and dodge requests from the nearest drone (the first on a tie), and its
    fear level in [0, 1]; all zero without drones. ``power_limited``: their forward parts fade
    with airspeed from full at ``cruise`` to none at ``burst`` (``_power_limited``)."""
    fx = fy = ox = oy = fear = 0.0
    n_drones = drones.shape[0]
    if n_drones == 0:
        return fx, fy, ox, oy, fear
    near = 0
    rx = xi - drones[0, 0]
    ry = yi - drones[0, 1]
    dd2 = rx * rx + ry * ry
    for q in range(1, n_drones):
        qx = xi - drones[q, 0]
        qy = yi - drones[q, 1]
        q2 = qx * qx + qy * qy
        if q2 < dd2:
            near, rx, ry, dd2 = q, qx, qy, q2
    d = math.sqrt(dd2)
    if d >= r_alarm or d <= _TINY:
        return fx, fy, ox, oy, fear
    fear = bump(d / r_alarm, r_dodge / r_alarm)
    fx = a_flee * fear * rx / d
    fy = a_flee * fear * ry / d
    if d < r_dodge:
        ex = drone_vel[near, 0]
        ey = drone_vel[near, 1]
        if relative:
            ex -= vxi
            ey -= vyi
        e2 = ex * ex + ey * ey
        lam = DODGE_LAMBDA_MAX * e2 / (e2 + DODGE_SPEED_SCALE * DODGE_SPEED_SCALE)
        along = (rx * ex + ry * ey) / e2 if e2 > 0.0 else 0.0
        nx = rx - lam * along * ex
        ny = ry - lam * along * ey
        nn = math.sqrt(nx * nx + ny * ny)
        if nn > _TINY:
            m = a_dodge * bump(d / r_dodge, BUMP_PLATEAU) / nn
            ox = m * nx
            oy = m * ny
    if power_limited:
        fx, fy = _power_limited(fx, fy, vxi, vyi, cruise, burst)
        ox, oy = _power_limited(ox, oy, vxi, vyi, cruise, burst)
    return fx, fy, ox, oy, fear


@compiled_inline
def _power_limited(
    qx: float, qy: float, vx: float, vy: float, cruise: float, burst: float
) -> tuple[float, float]:
    """A fear request whose forward part (along the velocity, speeding up) is scaled by
    w = clip((burst - s) / (burst - cruise), 0, 1): the power margin above what flight at speed s
    needs shrinks to nothing at the top speed, so fright can turn a bird at any speed but cannot
    drive it past burst speed. The sideways and braking parts pass unchanged."""
    s = math.sqrt(vx * vx + vy * vy)
    if s <= _TINY:
        return qx, qy
    ux = vx / s
    uy = vy / s
    ahead = qx * ux + qy * uy
    if ahead <= 0.0:
        return qx, qy
    w = min(1.0, max(0.0, (burst - s) / (burst - cruise))) if burst > cruise else 0.0
    cut = (1.0 - w) * ahead
    return qx - cut * ux, qy - cut * uy


@compiled_inline
def _allocate(
    sx: float,
    sy: float,
    ox: float,
    oy: float,
    fx: float,
    fy: float,
    alx: float,
    aly: float,
    cx: float,
    cy: float,
    tx: float,
    ty: float,
    a_max: float,
) -> tuple[float, float]:
    """The steering requests granted in priority order (separation, dodge, flight, alignment,
    cohesion, destination) from the budget ``a_max``; their sum."""
    budget = a_max
    ax, ay, used = _grant(sx, sy, budget)
    budget -= used
    gx, gy, used = _grant(ox, oy, budget)
    ax += gx
    ay += gy
    budget -= used
    gx, gy, used = _grant(fx, fy, budget)
    ax += gx
    ay += gy
    budget -= used
    gx, gy, used = _grant(alx, aly, budget)
    ax += gx
    ay += gy
    budget -= used
    gx, gy, used = _grant(cx, cy, budget)
    ax += gx
    ay += gy
    budget -= used
    gx, gy, used = _grant(tx, ty, budget)
    return ax + gx, ay + gy


@compiled_inline
def _destination_request(
    i: int,
    informed: float,
    destination: np.ndarray,
    xi: float,
    yi: float,
    ux: float,
    uy: float,
    k_dst: float,
    cruise: float,
) -> tuple[float, float]:
    """An informed bird's turn toward the roost, perpendicular to its velocity; zero for others."""
    if not is_informed(i, informed):
        return 0.0, 0.0
    gx = destination[0] - xi
    gy = destination[1] - yi
    g = math.sqrt(gx * gx + gy * gy)
    if g <= _TINY:
        return 0.0, 0.0
    gx /= g
    gy /= g
    gu = gx * ux + gy * uy
    return k_dst * cruise * (gx - gu * ux), k_dst * cruise * (gy - gu * uy)


@compiled
def _sort_into_slots(
    x: np.ndarray,
    v: np.ndarray,
    n: int,
    cut: float,
    use_grid: bool,
    index: np.ndarray,
    soa: np.ndarray,
) -> int:
    """Copy the birds into visiting order as struct-of-arrays ``soa`` (4, N): x, y, vx, vy per
    slot, with ``index`` (2, N) = sorted cell keys and the bird in each slot. On the grid the slots
    go by cell key, so each column of a bird's 3 x 3 cells is one contiguous run of slots; with
    all pairs by index, one run of all birds. Returns the number of runs per bird (3 or 1).

    Float32 slots (the single-precision measurement, see ``StepWork``) hold positions relative to
    the first slot's bird, so that their rounding is that of the flock's extent, not of the
    site's; float64 slots hold the positions as they are (the origin is 0.0 and x - 0.0 is x)."""
    keys = index[0]
    order = index[1]
    if use_grid:
        _cell_keys(x, n, cut, keys)
        order[:n] = np.argsort(keys[:n], kind="mergesort")
        keys[:n] = keys[:n][order[:n]]
    else:
        for i in range(n):
            order[i] = i
    ox = oy = 0.0
    if is_single(soa) and n > 0:
        ox = x[order[0], 0]
        oy = x[order[0], 1]
    for a in range(n):
        i = order[a]
        soa[0, a] = x[i, 0] - ox
        soa[1, a] = x[i, 1] - oy
        soa[2, a] = v[i, 0]
        soa[3, a] = v[i, 1]
    return 3 if use_grid else 1


@compiled_inline
def _slot_run(use_grid: bool, keys: np.ndarray, a: int, r: int, n: int) -> tuple[int, int]:
    """The slots holding slot ``a``'s candidate neighbours in column r - 1 of its 3 x 3 cells (the
    grid; ``keys`` sorted), or every slot (all pairs)."""
    if not use_grid:
        return 0, n
    kx = (keys[a] >> 32) + r - 1
    ky = keys[a] & 0xFFFFFFFF
    start = np.searchsorted(keys[:n], (kx << 32) | (ky - 1), "left")
    stop = np.searchsorted(keys[:n], (kx << 32) | (ky + 1), "right")
    return start, stop


@compiled_inline
def _kth_nearest_sq(
    soa: np.ndarray,
    a: int,
    k: int,
    limit2: float,
    use_grid: bool,
    keys: np.ndarray,
    runs: int,
    n: int,
    nearest: np.ndarray,
) -> float:
    """Squared distance from the bird in slot ``a`` to its k-th nearest flockmate, or ``limit2``
    when fewer than k lie closer than that. ``nearest`` (>= k) holds the k smallest, sorted by
    insertion. (A scalar pass: the insertion does not vectorise, and it runs only for the
    topological option.)"""
    for m in range(k):
        nearest[m] = limit2
    xi = soa[0, a]
    yi = soa[1, a]
    for r in range(runs):
        start, stop = _slot_run(use_grid, keys, a, r, n)
        for s in range(start, stop):
            if s == a:
                continue
            dx = soa[0, s] - xi
            dy = soa[1, s] - yi
            d2 = dx * dx + dy * dy
            if d2 < nearest[k - 1]:
                m = k - 1
                while m > 0 and nearest[m - 1] > d2:
                    nearest[m] = nearest[m - 1]
                    m -= 1
                nearest[m] = d2
    return float(nearest[k - 1])


@compiled_inline
def _topological_radius(dk2: float, limit2: float, reach: float, r_coh: float) -> float:
    """R_i = min(c d_k(i), r_coh) from the squared k-th neighbour distance (``limit2`` or more
    means beyond r_coh / c)."""
    if dk2 >= limit2:
        return r_coh
    return min(reach * math.sqrt(dk2), r_coh)


@compiled_inline
def _ramp(z: float, h: float, inv_width: float) -> float:
    """``bump(z, h)`` without branches (``inv_width`` = 1 / (1 - h)): t clipped to [0, 1] by
    selects, so for z < h it is exactly 1 and for z >= 1 exactly 0, as ``bump``. Computed in
    the floating type of ``z`` (``like``)."""
    zero = like(0.0, z)
    one = like(1.0, z)
    t = (z - h) * inv_width
    t = t if t > zero else zero
    t = t if t < one else one
    return one - t * t * (like(3.0, z) - like(2.0, z) * t)


@compiled_inline
def _pair_sums(
    px: np.ndarray,
    py: np.ndarray,
    pvx: np.ndarray,
    pvy: np.ndarray,
    xi: float,
    yi: float,
    vxi: float,
    vyi: float,
    r_sep: float,
    k_sep: float,
    d_floor: float,
    inv_ra: float,
    inv_rc: float,
    plateau: float,
    inv_width: float,
    cucker_smale: bool,
    inv_sig2: float,
    beta: float,
) -> tuple[float, float, float, float, float, float, float, float]:
    """One bird's pair sums over a contiguous run of candidates (struct-of-arrays slices):
    separation (sx, sy), alignment (alx, aly, aw) and cohesion (cx, cy, cw).

    Branch-free, so LLVM vectorises it: every candidate is summed, and the cut-offs do the
    masking, since each weight is exactly 0 beyond its radius (``_ramp``). The bird itself may be
    in the run: its offset and velocity difference are 0, so it adds only its weight 1 to aw and
    cw, which is the 1 of the local normalisation 1 + sum_j w_ij (the caller does not add it).
    Distances are floored before every division (d_floor, _TINY), so no inf or NaN arises from
    finite positions. Computed in the slots' floating type: the scalars come in that type and
    every literal goes through ``like``, so float32 slots give a float32 loop.
    """
    zero = like(0.0, xi)
    one = like(1.0, xi)
    tiny = like(_TINY, xi)
    inv_rsep = one / r_sep
    sx = sy = alx = aly = aw = cx = cy = cw = zero
    for s in range(px.shape[0]):
        dx = px[s] - xi
        dy = py[s] - yi
        d2 = dx * dx + dy * dy
        d = math.sqrt(d2)
        dc = d if d > d_floor else d_floor
        de = d if d > tiny else tiny
        # k_sep (r_sep/dc - 1)^2 ramp / d with one division: (r_sep - dc)^2 / (dc^2 d).
        q = r_sep - dc
        f = k_sep * q * q * _ramp(d * inv_rsep, zero, one) / (dc * dc * de)
        sx -= f * dx
        sy -= f * dy
        w = _ramp(d * inv_ra, plateau, inv_width)
        if cucker_smale:
            w *= math.pow(one + d2 * inv_sig2, -beta)
        alx += w * (pvx[s] - vxi)
        aly += w * (pvy[s] - vyi)
        aw += w
        w = _ramp(d * inv_rc, plateau, inv_width)
        cx += w * dx
        cy += w * dy
        cw += w
    return sx, sy, alx, aly, aw, cx, cy, cw


@compiled_kernel(_FAST)
def _flock_slots(
    lo: int,
    hi: int,
    x: np.ndarray,
    v: np.ndarray,
    n: int,
    ctx: ForceContext,
    runs: int,
    nearest: np.ndarray,
    out: np.ndarray,
) -> None:
    """The acceleration of the birds in slots [lo, hi) into ``out`` (by bird index); the slots
    were filled by ``_sort_into_slots`` from ``x`` and ``v``. Compiled once and called by both the
    serial and the threaded force (not inlined), so both run the same machine code: the same sums
    bit for bit. The pair sums run in the slots' floating type; each bird's own terms (speed,
    destination, fear) read its float64 state, which float64 slots hold unchanged."""
    prm, destination, drones, drone_vel, use_grid, index, soa = ctx
    keys = index[0]
    order = index[1]
    r_sep = prm[_C_RSEP]
    r_ali = prm[_C_RALI]
    r_coh = prm[_C_RCOH]
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
    # The pair sums' scalars in the slots' floating type (unchanged for float64 slots).
    s_rsep = like(r_sep, soa[0, 0])
    s_ksep = like(k_sep, soa[0, 0])
    s_floor = like(d_floor, soa[0, 0])
    s_sig2 = like(inv_sig2, soa[0, 0])
    s_beta = like(beta, soa[0, 0])
    for a in range(lo, hi):
        i = order[a]
        xi = soa[0, a]
        yi = soa[1, a]
        vxi = soa[2, a]
        vyi = soa[3, a]
        r_a = r_ali
        r_c = r_coh
        plateau = BUMP_PLATEAU
        if k_top > 0:
            # First pass: the k-th neighbour distance sets this bird's own radius for both terms
            # (floored so that 1 / R stays finite for coincident birds).
            dk2 = _kth_nearest_sq(soa, a, k_top, limit2, use_grid, keys, runs, n, nearest)
            r_a = r_c = max(_topological_radius(dk2, limit2, reach, r_coh), _TINY)
            plateau = 1.0 / reach
        inv_width = 1.0 / (1.0 - plateau)
        sx = sy = alx = aly = aw = cx = cy = cw = 0.0
        for r in range(runs):
            start, stop = _slot_run(use_grid, keys, a, r, n)
            px = soa[0, start:stop]
            py = soa[1, start:stop]
            pvx = soa[2, start:stop]
            pvy = soa[3, start:stop]
            # Two call sites with a constant model flag: the Motsch-Tadmor loop has no pow call.
            inv_ra = like(1.0 / r_a, xi)
            inv_rc = like(1.0 / r_c, xi)
            s_plateau = like(plateau, xi)
            s_width = like(inv_width, xi)
            if cucker_smale:
                sums = _pair_sums(
                    px, py, pvx, pvy, xi, yi, vxi, vyi, s_rsep, s_ksep, s_floor,
                    inv_ra, inv_rc, s_plateau, s_width, True, s_sig2, s_beta,
                )  # fmt: skip
            else:
                sums = _pair_sums(
                    px, py, pvx, pvy, xi, yi, vxi, vyi, s_rsep, s_ksep, s_floor,
                    inv_ra, inv_rc, s_plateau, s_width, False, s_sig2, s_beta,
                )  # fmt: skip
            sx += sums[0]
            sy += sums[1]
            alx += sums[2]
            aly += sums[3]
            aw += sums[4]
            cx += sums[5]
            cy += sums[6]
            cw += sums[7]
        # aw and cw include the bird itself (weight 1): they are the 1 + sum_j w_ij of the model.
        if cucker_smale:
            scale = k_ali / n
        else:
            scale = k_ali / aw
        alx *= scale
        aly *= scale
        cx *= k_coh / cw
        cy *= k_coh / cw
        # The bird's own terms from its float64 state (the slots' values, for float64 slots).
        bx, by, bvx, bvy = x[i, 0], x[i, 1], v[i, 0], v[i, 1]
        speed, ux, uy = _heading(bvx, bvy)
        tx, ty = _destination_request(i, informed, destination, bx, by, ux, uy, k_dst, cruise)
        fx, fy, ox, oy, fear = _fear_requests(
            bx, by, bvx, bvy, drones, drone_vel, r_alarm, r_dodge, a_flee, a_dodge, relative,
            cruise, burst, power_limited,
        )  # fmt: skip
        ax, ay = _allocate(sx, sy, ox, oy, fx, fy, alx, aly, cx, cy, tx, ty, a_max)
        preferred = cruise + (burst - cruise) * fear
        out[i, 0] = ax + k_v * (preferred - speed) * ux
        out[i, 1] = ay + k_v * (preferred - speed) * uy


@compiled
def neighbour_radii(x: np.ndarray, n: int, ctx: ForceContext, out: np.ndarray) -> None:
    """Every bird's alignment and cohesion radius (N, 2) into ``out``, as ``flock_acceleration``
    uses them: the metric radii, or with topological neighbours each bird's own R_i (twice)."""
    prm, _, _, _, use_grid, index, soa = ctx
    r_ali = prm[_C_RALI]
    r_coh = prm[_C_RCOH]
    k = int(prm[_C_TOPK])
    reach = prm[_C_TOPC]
    limit = r_coh / reach
    cut = max(prm[_C_RSEP], r_ali, r_coh)
    runs = _sort_into_slots(x, x, n, cut, use_grid, index, soa)
    nearest = np.empty(MAX_NEIGHBOURS)
    for a in range(n):
        i = index[1, a]
        if k == 0:
            out[i, 0] = r_ali
            out[i, 1] = r_coh
            continue
        dk2 = _kth_nearest_sq(soa, a, k, limit * limit, use_grid, index[0], runs, n, nearest)
        out[i, 0] = out[i, 1] = _topological_radius(dk2, limit * limit, reach, r_coh)


@compiled
def candidate_counts(x: np.ndarray, n: int, ctx: ForceContext, out: np.ndarray) -> None:
    """Every bird's number of candidate slots (N,) into ``out``: the slots its pair sums scan,
    itself included (all N with all pairs; its 3 x 3 cells on the grid). For measurements: the
    pair loop's cost is about proportional to the total."""
    prm, _, _, _, use_grid, index, soa = ctx
    cut = max(prm[_C_RSEP], prm[_C_RALI], prm[_C_RCOH])
    runs = _sort_into_slots(x, x, n, cut, use_grid, index, soa)
    for a in range(n):
        total = 0
        for r in range(runs):
            start, stop = _slot_run(use_grid, index[0], a, r, n)
            total += stop - start
        out[index[1, a]] = total


@compiled_inline
def _heading(vx: float, vy: float) -> tuple[float, float, float]:
    """Speed and unit velocity; a bird at rest heads east (any fixed choice keeps it defined)."""
    speed = math.sqrt(vx * vx + vy * vy)
    if speed > _TINY:
        return speed, vx / speed, vy / speed
    return speed, 1.0, 0.0


@compiled_kernel(_FAST)
def flock_acceleration(
    x: np.ndarray, v: np.ndarray, n: int, ctx: ForceContext, out: np.ndarray
) -> None:
    """Every bird's acceleration (N, 2) into ``out`` for positions ``x`` and velocities ``v``.

    ``ctx`` = (params row, destination (2,), drone positions (P, 2), drone velocities (P, 2),
    use_grid, index work (2, N) int64, slot work (4, N) float64): one world's surroundings.
    """
    prm = ctx[0]
    cut = max(prm[_C_RSEP], prm[_C_RALI], prm[_C_RCOH])
    runs = _sort_into_slots(x, v, n, cut, ctx[4], ctx[5], ctx[6])
    _flock_slots(0, n, x, v, n, ctx, runs, np.empty(MAX_NEIGHBOURS), out)


@compiled_parallel(_FAST)
def flock_acceleration_threaded(
    x: np.ndarray, v: np.ndarray, n: int, ctx: ForceContext, out: np.ndarray
) -> None:
    """``flock_acceleration`` with the birds split over numba's threads in blocks of
    ``BIRD_BLOCK``; each bird's sums are the same code in the same order, so the result is the
    same bit for bit whatever the thread count."""
    prm = ctx[0]
    cut = max(prm[_C_RSEP], prm[_C_RALI], prm[_C_RCOH])
    runs = _sort_into_slots(x, v, n, cut, ctx[4], ctx[5], ctx[6])
    for block in numba.prange((n + BIRD_BLOCK - 1) // BIRD_BLOCK):
        lo = block * BIRD_BLOCK
        hi = min(lo + BIRD_BLOCK, n)
        _flock_slots(lo, hi, x, v, n, ctx, runs, np.empty(MAX_NEIGHBOURS), out)


# One substep of the integrator for a given force function: x, v, a, v_pred, n, h, ctx, wx, wy.
Substep = Callable[
    [np.ndarray, np.ndarray, np.ndarray, np.ndarray, int, float, ForceContext, float, float], None
]


@functools.cache
def verlet_heun_substep(force: Force) -> Substep:
    """The integrator's substep for ``force``, compiled for it: velocity Verlet with a
    Heun-predicted velocity, in place. ``v`` is the velocity through the air; the positions
    move over the ground, by the air velocity plus the wind (wx, wy) held over the substep.

    ``a`` holds force(x, v~) from the previous substep on entry and the new one on return (first
    same as last). ``force(x, v, n, ctx, out)`` writes accelerations; ``v_pred`` is work space.
    The force is bound at compile time, not passed in, so the kernel that calls the flock's
    substep can be cached on disk (numba cannot cache a function taking another as argument).
    """

    @compiled_uncached
    def substep(
        x: np.ndarray,
        v: np.ndarray,
        a: np.ndarray,
        v_pred: np.ndarray,
        n: int,
        h: float,
        ctx: ForceContext,
        wx: float,
        wy: float,
    ) -> None:
        half = 0.5 * h
        for i in range(n):
            for c in range(2):
                v_half = v[i, c] + half * a[i, c]
                # v_half + 0.0 is v_half exactly: still air keeps the still-air path bit for bit.
                x[i, c] += h * (v_half + (wx if c == 0 else wy))
                v_pred[i, c] = v_half + half * a[i, c]
                v[i, c] = v_half
        force(x, v_pred, n, ctx, a)
        for i in range(n):
            for c in range(2):
                v[i, c] += half * a[i, c]

    return substep


def integrate(
    x: np.ndarray, v: np.ndarray, h: float, steps: int, force: Force, ctx: ForceContext
) -> None:
    """``steps`` substeps of the integrator under ``force`` from a fresh evaluation, in place."""
    n = x.shape[0]
    a = np.empty_like(x)
    v_pred = np.empty_like(v)
    force(x, v, n, ctx, a)
    substep = verlet_heun_substep(force)
    for _ in range(steps):
        substep(x, v, a, v_pred, n, h, ctx, 0.0, 0.0)


@compiled
def _drone_substep(
    drones: np.ndarray,
    drone_vel: np.ndarray,
    action: np.ndarray,
    limits: np.ndarray,
    h: float,
    wx: float,
    wy: float,
) -> None:
    """Every drone: its held command over one substep, within its speed limit.

    The command accelerates the drone through the air, and the autopilot never flies past its
    airspeed limit: the new air velocity v' = v + h a is scaled back onto the limit when it
    would exceed it, and the position advances over the ground by h ((v + v') / 2 + w) in the
    wind (wx, wy), which is exact for a constant command (velocity Verlet) and for flight at
    the limit.
    """
    for q in range(drones.shape[0]):
        ux = min(max(action[q, 0], -1.0), 1.0)
        uy = min(max(action[q, 1], -1.0), 1.0)
        u = math.sqrt(ux * ux + uy * uy)
        if u > 1.0:
            ux /= u
            uy /= u
        amax = limits[q, 1]
        vmax = limits[q, 0]
        nvx = drone_vel[q, 0] + h * ux * amax
        nvy = drone_vel[q, 1] + h * uy * amax
        speed = math.sqrt(nvx * nvx + nvy * nvy)
        if speed > vmax:
            nvx *= vmax / speed
            nvy *= vmax / speed
        drones[q, 0] += 0.5 * h * (drone_vel[q, 0] + nvx) + h * wx
        drones[q, 1] += 0.5 * h * (drone_vel[q, 1] + nvy) + h * wy
        drone_vel[q, 0] = nvx
        drone_vel[q, 1] = nvy


@compiled
def _noise_and_clamp(
    v: np.ndarray,
    n: int,
    prm: np.ndarray,
    noise: np.ndarray,
    row: int,
    sqrt_h: float,
    has_noise: bool,
) -> int:
    """Apply one substep's noise increment, then the airspeed safety net; count its activations."""
    sigma = prm[_C_NOISE] if has_noise else 0.0
    heading = prm[_C_NMODEL] == 0.0
    lo = prm[_C_VMIN]
    hi = prm[_C_VMAX]
    clamped = 0
    for i in range(n):
        if sigma > 0.0:
            if heading:
                th = sigma * sqrt_h * noise[row, i, 0]
                cs = math.cos(th)
                sn = math.sin(th)
                vx = v[i, 0]
                v[i, 0] = cs * vx - sn * v[i, 1]
                v[i, 1] = sn * vx + cs * v[i, 1]
            else:
                v[i, 0] += sigma * sqrt_h * noise[row, i, 0]
                v[i, 1] += sigma * sqrt_h * noise[row, i, 1]
        s = math.sqrt(v[i, 0] * v[i, 0] + v[i, 1] * v[i, 1])
        if s > hi:
            v[i, 0] *= hi / s
            v[i, 1] *= hi / s
            clamped += 1
        elif s < lo:
            clamped += 1
            if s > _TINY:
                v[i, 0] *= lo / s
                v[i, 1] *= lo / s
            else:
                v[i, 0] = lo
                v[i, 1] = 0.0
    return clamped


_flock_substep = verlet_heun_substep(flock_acceleration)
_flock_substep_threaded = verlet_heun_substep(flock_acceleration_threaded)

# One world's control step: b, then the arguments of _step_worlds from bird_pos on.
WorldStep = Callable[..., None]


@functools.cache
def _world_stepper(force: Force, substep: Substep) -> WorldStep:
    """One world's control step under ``force`` (``substep`` its integrator), compiled for it."""

    @compiled_uncached
    def step_world(
        b: int,
        bird_pos: np.ndarray,
        bird_vel: np.ndarray,
        pursuer_pos: np.ndarray,
        pursuer_vel: np.ndarray,
        count: np.ndarray,
        destination: np.ndarray,
        params: np.ndarray,
        pursuer_limits: np.ndarray,
        action: np.ndarray,
        wind: np.ndarray,
        noise: np.ndarray,
        noise_row: np.ndarray,
        dt: float,
        substeps: int,
        use_grid: bool,
        vec_work: np.ndarray,
        slot_work: np.ndarray,
        index_work: np.ndarray,
        clamps: np.ndarray,
    ) -> None:
        has_noise = noise.shape[1] > 0
        h = dt / substeps
        sqrt_h = math.sqrt(h)
        n = count[b]
        pos = bird_pos[b]
        vel = bird_vel[b]
        accel = vec_work[b, 0]
        v_pred = vec_work[b, 1]
        ctx = (
            params[b],
            destination[b],
            pursuer_pos[b],
            pursuer_vel[b],
            use_grid,
            index_work[b],
            slot_work[b],
        )
        force(pos, vel, n, ctx, accel)
        for k in range(substeps):
            # The drones move first: the birds' force evaluation sees them at the substep's end.
            wx = wind[b, k, 0]
            wy = wind[b, k, 1]
            _drone_substep(pursuer_pos[b], pursuer_vel[b], action[b], pursuer_limits[b], h, wx, wy)
            substep(pos, vel, accel, v_pred, n, h, ctx, wx, wy)
            row = noise_row[b] + k
            clamps[b] += _noise_and_clamp(vel, n, params[b], noise[b], row, sqrt_h, has_noise)

    return step_world


_step_world = _world_stepper(flock_acceleration, _flock_substep)
_step_world_threaded = _world_stepper(flock_acceleration_threaded, _flock_substep_threaded)


@compiled
def _step_worlds(
    bird_pos: np.ndarray,
    bird_vel: np.ndarray,
    pursuer_pos: np.ndarray,
    pursuer_vel: np.ndarray,
    count: np.ndarray,
    destination: np.ndarray,
    params: np.ndarray,
    pursuer_limits: np.ndarray,
    action: np.ndarray,
    wind: np.ndarray,
    noise: np.ndarray,
    noise_row: np.ndarray,
    dt: float,
    substeps: int,
    use_grid: bool,
    live: np.ndarray,
    vec_work: np.ndarray,
    slot_work: np.ndarray,
    index_work: np.ndarray,
    clamps: np.ndarray,
) -> None:
    """The compiled body of ``step_worlds`` on one thread."""
    for b in range(bird_pos.shape[0]):
        if live[b]:
            _step_world(b, bird_pos, bird_vel, pursuer_pos, pursuer_vel, count, destination,
                        params, pursuer_limits, action, wind, noise, noise_row, dt, substeps,
                        use_grid, vec_work, slot_work, index_work, clamps)  # fmt: skip


@compiled_parallel(set())
def _step_worlds_by_world(
    bird_pos: np.ndarray,
    bird_vel: np.ndarray,
    pursuer_pos: np.ndarray,
    pursuer_vel: np.ndarray,
    count: np.ndarray,
    destination: np.ndarray,
    params: np.ndarray,
    pursuer_limits: np.ndarray,
    action: np.ndarray,
    wind: np.ndarray,
    noise: np.ndarray,
    noise_row: np.ndarray,
    dt: float,
    substeps: int,
    use_grid: bool,
    live: np.ndarray,
    vec_work: np.ndarray,
    slot_work: np.ndarray,
    index_work: np.ndarray,
    clamps: np.ndarray,
) -> None:
    """The compiled body of ``step_worlds`` with the worlds split over numba's threads; each
    world has its own work space, so the worlds are independent and the result is the serial
    one bit for bit."""
    for b in numba.prange(bird_pos.shape[0]):
        if live[b]:
            _step_world(b, bird_pos, bird_vel, pursuer_pos, pursuer_vel, count, destination,
                        params, pursuer_limits, action, wind, noise, noise_row, dt, substeps,
                        use_grid, vec_work, slot_work, index_work, clamps)  # fmt: skip


@compiled
def _step_worlds_by_bird(
    bird_pos: np.ndarray,
    bird_vel: np.ndarray,
    pursuer_pos: np.ndarray,
    pursuer_vel: np.ndarray,
    count: np.ndarray,
    destination: np.ndarray,
    params: np.ndarray,
    pursuer_limits: np.ndarray,
    action: np.ndarray,
    wind: np.ndarray,
    noise: np.ndarray,
    noise_row: np.ndarray,
    dt: float,
    substeps: int,
    use_grid: bool,
    live: np.ndarray,
    vec_work: np.ndarray,
    slot_work: np.ndarray,
    index_work: np.ndarray,
    clamps: np.ndarray,
) -> None:
    """The compiled body of ``step_worlds`` with each world's birds split over numba's threads
    (for few large worlds)."""
    for b in range(bird_pos.shape[0]):
        if live[b]:
            _step_world_threaded(b, bird_pos, bird_vel, pursuer_pos, pursuer_vel, count,
                                 destination, params, pursuer_limits, action, wind, noise,
                                 noise_row,
                                 dt, substeps, use_grid, vec_work, slot_work, index_work,
                                 clamps)  # fmt: skip


class StepWork:
    """Work space of ``step_worlds`` for B worlds of up to N birds, one set per world so that
    worlds can run on different threads."""

    def __init__(self, worlds: int, birds: int, slot_dtype: type = np.float64):
        m = max(birds, 1)
        self.vectors = np.zeros((worlds, 2, m, 2))  # accelerations, predicted velocities
        # x, y, vx, vy in visiting order; float32 slots (a measurement, not an env setting) run
        # the pair sums in single precision, the state and every per-bird term stay float64
        self.slots: np.ndarray = np.zeros((worlds, 4, m), dtype=slot_dtype)
        self.index = np.zeros((worlds, 2, m), dtype=np.int64)  # cell keys, bird per slot


def max_threads() -> int:
    """The most threads numba may use: NUMBA_NUM_THREADS (default: the machine's cores)."""
    from numba.core import config

    return int(config.NUMBA_NUM_THREADS)  # type: ignore[attr-defined]


def step_worlds(
    bird_pos: np.ndarray,  # (B, N, 2) m, updated in place
    bird_vel: np.ndarray,  # (B, N, 2) m/s, updated in place
    pursuer_pos: np.ndarray,  # (B, P, 2) m, drone positions, updated in place
    pursuer_vel: np.ndarray,  # (B, P, 2) m/s, drone velocities, updated in place
    count: np.ndarray,  # (B,) active birds
    destination: np.ndarray,  # (B, 2) m
    params: np.ndarray,  # (B, len(KERNEL_FIELDS)) per-world bird parameters
    pursuer_limits: np.ndarray,  # (B, P, 2) per drone: max speed m/s, max acceleration m/s^2
    action: np.ndarray,  # (B, P, 2) normalised command per drone, already finite
    noise: np.ndarray,  # (B, T, N, 2) standard normals, T >= substeps, or (B, 0, 0, 2) for none
    noise_row: np.ndarray,  # (B,) first of the ``substeps`` rows this step uses
    dt: float,  # s, the control step
    substeps: int,  # physics substeps per control step
    use_grid: bool,  # cell grid instead of all pairs
    live: np.ndarray,  # (B,) bool: worlds to advance; the others are left untouched
    work: StepWork,  # work space for B worlds of N birds
    clamps: np.ndarray,  # (B,) int64: airspeed safety-net activations, incremented
    threads: int = 1,  # worker threads (1: serial); the result does not depend on it
    wind: np.ndarray | None = None,  # (B, substeps, 2) m/s per substep; None: still air
) -> None:
    """Advance every live world by one control step, in place.

    With ``threads`` > 1 the worlds are split over numba's threads, or, when there are fewer
    worlds than threads and at least ``THREADED_MIN_BIRDS`` birds, each world's birds are.
    """
    body = _step_worlds
    if threads > 1:
        if bird_pos.shape[0] >= threads:
            body = _step_worlds_by_world
        elif bird_pos.shape[1] >= THREADED_MIN_BIRDS:
            body = _step_worlds_by_bird
        elif bird_pos.shape[0] > 1:
            body = _step_worlds_by_world
        if body is not _step_worlds:
            numba.set_num_threads(min(threads, max_threads()))
    if wind is None:
        wind = np.zeros((bird_pos.shape[0], substeps, 2))
    body(
        bird_pos,
        bird_vel,
        pursuer_pos,
        pursuer_vel,
        count,
        destination,
        params,
        pursuer_limits,
        action,
        wind,
        noise,
        noise_row,
        dt,
        substeps,
        use_grid,
        live,
        work.vectors,
        work.slots,
        work.index,
        clamps,
    )


def flock_context(
    params: np.ndarray,
    destination: np.ndarray,
    drones: np.ndarray,
    drone_vel: np.ndarray,
    birds: int,
    use_grid: bool = False,
    slot_dtype: type = np.float64,
) -> ForceContext:
    """The ``ctx`` tuple ``flock_acceleration`` reads for one world, with fresh work space
    (``slot_dtype``: the floating type of the pair sums, see ``StepWork``)."""
    m = max(birds, 1)
    return (
        np.ascontiguousarray(params, dtype=np.float64),
        np.ascontiguousarray(destination, dtype=np.float64),
        np.ascontiguousarray(drones, dtype=np.float64).reshape(-1, 2),
        np.ascontiguousarray(drone_vel, dtype=np.float64).reshape(-1, 2),
        bool(use_grid),
        np.zeros((2, m), dtype=np.int64),
        np.zeros((4, m), dtype=slot_dtype),
    )


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

"""Wind over the site: a steady wind plus Dryden turbulence, one vector per world per substep.

Turbulence follows the Dryden model of MIL-F-8785C at low altitude (below 1000 ft): with h the
height in feet (floored at 10 ft, from memory) and W20 the wind speed at 20 ft,

    L_u = L_v = h / (0.177 + 0.000823 h)^1.2
    sigma_u = sigma_v = 0.1 W20 / (0.177 + 0.000823 h)^0.4

and the one-sided spatial spectra (Omega in rad/m, integral over [0, inf) = sigma^2)

    Phi_u = sigma_u^2 (2 L_u / pi) / (1 + (L_u Omega)^2)
    Phi_v = sigma_v^2 (L_v / pi) (1 + 3 (L_v Omega)^2) / (1 + (L_v Omega)^2)^2.

Sources: the spectra as given on Wikipedia's "Dryden Wind Turbulence Model" and the Modelica
example DrydenContinuousTurbulence; the low-altitude scales and the W20 presets (light 15 kt,
moderate 30 kt, severe 45 kt) from the MathWorks Aerospace Blockset Dryden help.

The field is frozen and convected at speed V (Taylor's hypothesis), so in time omega = V Omega.
The birds fly through it at their cruise airspeed and the wind sweeps it past the site, so V is
the larger of the two (a modelling choice; the model is unfit for hovering, Wikipedia
"Continuous gusts"). Gusts are shaped from unit white noise by the spec's filters and
discretised exactly for the substep h: u is the Ornstein-Uhlenbeck step u' = a u + sigma
sqrt(1 - a^2) n with a = exp(-V h / L_u); v is the second-order filter through Van Loan's
matrix exponential. Both start from their stationary distribution, so every substep has
variance sigma^2. u lies along the mean wind (toward where it blows), v to its left; the
vertical gust does not enter a plane model.

Limits: one gust vector per world, the same over the whole site (no spatial variation inside
the flock), and the horizontal components only.
"""

from __future__ import annotations

import math

import numpy as np

from flockward.sim.jit import compiled
from flockward.sim.portable import cholesky2, expm_series, matmul
from flockward.sim.types import TURBULENCE_W20_KT, WindParams

FOOT = 0.3048  # m
KNOT = 1852.0 / 3600.0  # m/s
MIN_ALTITUDE_FT = 10.0  # the low-altitude formulas' floor (from memory)
GUST_BLOCK = 256  # substeps of gusts made per call of the compiled filter


def dryden_scales(altitude: float, w20: float) -> tuple[float, float]:
    """Length scale L_u = L_v (m) and intensity sigma_u = sigma_v (units of ``w20``) at
    ``altitude`` metres, from MIL-F-8785C's low-altitude model (module docstring)."""
    h = max(altitude / FOOT, MIN_ALTITUDE_FT)
    f = 0.177 + 0.000823 * h
    return h / f**1.2 * FOOT, 0.1 * w20 / f**0.4


def dryden_spectrum(omega: np.ndarray, sigma: float, length: float, axis: str) -> np.ndarray:
    """One-sided spatial spectrum Phi (m^3/s^2 per rad/m) of the longitudinal ("u") or lateral
    ("v") gust at spatial frequencies ``omega`` (rad/m)."""
    x = (length * np.asarray(omega, dtype=np.float64)) ** 2
    if axis == "u":
        return sigma**2 * (2.0 * length / math.pi) / (1.0 + x)
    if axis == "v":
        return sigma**2 * (length / math.pi) * (1.0 + 3.0 * x) / (1.0 + x) ** 2
    raise ValueError(f"axis = {axis!r}: allowed u, v")


def dryden_psd_hz(
    freq: np.ndarray, sigma: float, length: float, speed: float, axis: str
) -> np.ndarray:
    """One-sided temporal PSD S(f) ((m/s)^2/Hz) of a gust component seen at convection speed
    ``speed``: S(f) = (2 pi / V) Phi(2 pi f / V), the quantity ``scipy.signal.welch`` estimates."""
    omega = 2.0 * math.pi * np.asarray(freq, dtype=np.float64) / speed
    return (2.0 * math.pi / speed) * dryden_spectrum(omega, sigma, length, axis)


def _lateral_filter(sigma: float, length: float, speed: float, h: float) -> tuple[np.ndarray, ...]:
    """The lateral filter sqrt(pi) H_v for unit white noise, discretised exactly over ``h``:
    transition A_d (2, 2), noise factor chol(Q_d) (2, 2), output row C (2,), stationary
    covariance P (2, 2).

    A_d and Q_d come from Van Loan's matrix exponential, P in closed form: the filter's double
    pole at -1/t makes A P + P A^T + b b^T = 0 solve to P = diag(t/4, t^3/4), and exact
    discretisation keeps the continuous stationary covariance. Computed without BLAS or LAPACK
    (``flockward.sim.portable``), so the coefficients are the same bits on every CPU."""
    t = length / speed
    gain = sigma * math.sqrt(length / speed)
    # (gain sqrt(3) t s + gain) / (t^2 s^2 + 2 t s + 1) in controllable canonical form.
    a = np.array([[-2.0 / t, -1.0 / t**2], [1.0, 0.0]])
    c = np.array([gain * math.sqrt(3.0) / t, gain / t**2])
    m = np.zeros((4, 4))
    m[:2, :2] = -a
    m[0, 2] = 1.0  # b b^T with b = (1, 0)
    m[2:, 2:] = a.T
    e = expm_series(m * h)
    a_d = e[2:, 2:].T
    q_d = matmul(a_d, e[:2, 2:])
    q_d = 0.5 * (q_d + q_d.T)
    p = np.array([[t / 4.0, 0.0], [0.0, t**3 / 4.0]])
    return a_d, cholesky2(q_d), c, p


@compiled
def _filter_steps(
    a_u: float,
    sd_u: float,
    a_v: np.ndarray,
    chol_v: np.ndarray,
    c_v: np.ndarray,
    state: np.ndarray,
    noise: np.ndarray,
    out: np.ndarray,
) -> None:
    """Advance the filters by one step per row of ``noise`` (k, 3), writing (u, v) rows of
    ``out`` (k, 2); ``state`` (u, z1, z2) is updated in place."""
    for j in range(noise.shape[0]):
        state[0] = a_u * state[0] + sd_u * noise[j, 0]
        n1 = noise[j, 1]
        n2 = noise[j, 2]
        z1 = a_v[0, 0] * state[1] + a_v[0, 1] * state[2] + chol_v[0, 0] * n1 + chol_v[0, 1] * n2
        z2 = a_v[1, 0] * state[1] + a_v[1, 1] * state[2] + chol_v[1, 0] * n1 + chol_v[1, 1] * n2
        state[1] = z1
        state[2] = z2
        out[j, 0] = state[0]
        out[j, 1] = c_v[0] * z1 + c_v[1] * z2


class DrydenGusts:
    """One world's gust generator: (u, v) gust velocities (m/s) per substep of ``h`` seconds,
    from its own generator ``rng``."""

    def __init__(
        self, sigma: float, length: float, speed: float, h: float, rng: np.random.Generator
    ):
        self.sigma, self.length, self.speed = sigma, length, speed
        self.rng = rng
        self.a_u = math.exp(-speed * h / length)
        self.sd_u = sigma * math.sqrt(1.0 - self.a_u**2)
        self.a_v, self.chol_v, self.c_v, p = _lateral_filter(sigma, length, speed, h)
        # (u, z1, z2): the longitudinal gust and the lateral filter's state, stationary at start
        self.state = np.empty(3)
        self.state[0] = sigma * float(rng.standard_normal())
        start = matmul(cholesky2(p), rng.standard_normal(2)[:, None])
        self.state[1:] = start[:, 0]
        self._block = np.empty((0, 2))  # gusts made but not yet handed out
        self._row = 0

    def next(self, k: int) -> np.ndarray:
        """The next ``k`` substeps' gusts, (k, 2): longitudinal u, lateral v. Made in blocks of
        at least ``GUST_BLOCK`` rows; the noise is drawn in order, so the series does not
        depend on how it is asked for."""
        if self._row + k > self._block.shape[0]:
            rows = max(k, GUST_BLOCK)
            noise = self.rng.standard_normal((rows, 3))
            fresh = np.empty((rows, 2))
            _filter_steps(
                self.a_u, self.sd_u, self.a_v, self.chol_v, self.c_v, self.state, noise, fresh
            )
            self._block = np.concatenate([self._block[self._row :], fresh])
            self._row = 0
        out = self._block[self._row : self._row + k]
        self._row += k
        return out


def convection_speed(wind: WindParams, cruise_speed: float) -> float:
    """V (m/s): the speed the frozen field passes the birds, the larger of their cruise airspeed
    and the wind speed (a modelling choice, see the module docstring)."""
    return max(wind.speed, cruise_speed)


def gust_generator(
    wind: WindParams, cruise_speed: float, h: float, rng: np.random.Generator
) -> DrydenGusts | None:
    """A world's gust generator for ``wind`` and substep ``h``, or None without turbulence."""
    w20 = TURBULENCE_W20_KT[wind.turbulence] * KNOT
    if w20 == 0.0:
        return None
    length, sigma = dryden_scales(wind.altitude, w20)
    return DrydenGusts(sigma, length, convection_speed(wind, cruise_speed), h, rng)


def wind_axes(wind: WindParams) -> np.ndarray:
    """(2, 2) columns: the unit vector the wind blows toward (u) and the one to its left (v)."""
    a = math.radians(wind.from_deg) + math.pi
    c, s = math.cos(a), math.sin(a)
    return np.array([[c, -s], [s, c]])

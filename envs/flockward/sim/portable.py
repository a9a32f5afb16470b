"""Small linear algebra and trigonometry that give the same bits on every x86-64 CPU.

NumPy hands ``a @ b``, ``np.dot`` and ``np.linalg`` to its BLAS, which picks kernels by the CPU
it runs on (OpenBLAS's AVX-512, AVX2 or SSE kernels sum and fuse in different orders), and its
array ``sin``, ``cos``, ``arctan2`` take a vector path chosen by the CPU too. Measured on one
machine with OPENBLAS_CORETYPE set to another kernel family, the committed episodes changed in the
last digits and then, as chaotic dynamics do, macroscopically. Everything an episode computes
therefore goes through plain elementwise arithmetic (exactly rounded by IEEE 754, the same on
every CPU) or through the compiled functions below, which call the C library's scalar functions
one value at a time. The shapes involved are tiny (2-vectors, 2 x 2 and 4 x 4 matrices, a
flock's bearings), so nothing is lost by not using BLAS.
"""

from __future__ import annotations

import math

import numpy as np

from flockward.sim.jit import compiled


def dot2(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Dot products of 2-vectors along the last axis (broadcasting): a_x b_x + a_y b_y."""
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    out: np.ndarray = a[..., 0] * b[..., 0] + a[..., 1] * b[..., 1]
    return out


def matmul(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The matrix product of a (..., n, k) and b (k, m), summed over k in index order."""
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    out: np.ndarray = a[..., :, 0, None] * b[0]
    for j in range(1, b.shape[0]):
        out = out + a[..., :, j, None] * b[j]
    return out


def expm_series(m: np.ndarray) -> np.ndarray:
    """exp(m) of a small square matrix by scaling and squaring of its Taylor series, in index
    order: a norm below 1/2 after scaling and 30 terms put the truncation below 1e-40 relative."""
    m = np.asarray(m, dtype=np.float64)
    norm = float(np.abs(m).sum(axis=1).max())
    squarings = max(0, math.ceil(math.log2(norm / 0.5))) if norm > 0.5 else 0
    scaled = m / 2.0**squarings
    term = np.eye(len(m))
    total = np.eye(len(m))
    for k in range(1, 31):
        term = matmul(term, scaled) / k
        total = total + term
    for _ in range(squarings):
        total = matmul(total, total)
    return total


def cholesky2(q: np.ndarray) -> np.ndarray:
    """The lower Cholesky factor of a symmetric positive definite 2 x 2 matrix, in closed form."""
    l11 = math.sqrt(q[0, 0])
    l21 = q[1, 0] / l11
    return np.array([[l11, 0.0], [l21, math.sqrt(q[1, 1] - l21 * l21)]])


@compiled
def _polar_points(r: np.ndarray, theta: np.ndarray, out: np.ndarray) -> None:
    for i in range(r.shape[0]):
        out[i, 0] = r[i] * math.cos(theta[i])
        out[i, 1] = r[i] * math.sin(theta[i])


def polar_points(r: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """Points (n, 2) at distances ``r`` (n,) and angles ``theta`` (n,) rad from the origin."""
    r = np.ascontiguousarray(r, dtype=np.float64).reshape(-1)
    theta = np.ascontiguousarray(np.broadcast_to(theta, r.shape), dtype=np.float64)
    out = np.empty((r.shape[0], 2))
    _polar_points(r, theta, out)
    return out


@compiled
def _bearings(y: np.ndarray, x: np.ndarray, out: np.ndarray) -> None:
    for i in range(x.shape[0]):
        out[i] = math.atan2(y[i], x[i])


def bearings(points: np.ndarray) -> np.ndarray:
    """atan2(y, x) (rad) of points (n, 2), one C library call per point."""
    p = np.asarray(points, dtype=np.float64).reshape(-1, 2)
    out = np.empty(p.shape[0])
    _bearings(np.ascontiguousarray(p[:, 1]), np.ascontiguousarray(p[:, 0]), out)
    return out

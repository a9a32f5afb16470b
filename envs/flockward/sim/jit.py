"""The one place the core compiles functions with numba, typed so the type checker sees through it.

``compiled`` keeps a function's signature for the type checker: numba's dispatcher is a callable
whose type numba's own stubs give only in recent releases. Every compiled function of the core
uses the same options: nopython mode and an on-disk cache (in ``__pycache__``), so a fresh process
loads the machine code instead of compiling it again.

The force kernel (``compiled_kernel``) adds numba's ``error_model="numpy"``: with the default
"python" model every division carries a ZeroDivisionError exit, and LLVM does not vectorise a
loop with an early exit. Its fast-math flags are listed, with the reasons, beside ``_FAST`` in
``flockward.sim.dynamics``: reassociation, contraction, no signed zeros, reciprocals; never
nnan/ninf (no assumption that values are finite) or afn.

``like`` gives a literal the floating type of a value beside it, so that a function numba
specialises on float32 arrays computes in float32 (a bare Python float is float64 to numba and
promotes everything it touches); beside float64 it is the literal itself, the same machine code.

Parallel code (``compiled_parallel``) runs on numba's workqueue threading layer unless
NUMBA_THREADING_LAYER names another: measured on 2 cores with another process busy, numba's
OpenMP layer ran 2 threads 2.7 to 3 times slower than one (its threads spin while waiting), the
workqueue layer no slower than one thread.

Every function is compiled for one named CPU, ``COMPILE_TARGET`` (x86-64 machines only), not for
the machine it runs on: with the kernel's reassociation flags LLVM picks vector widths and fused
multiply-adds by its cost model for the target, so the same seed gave other bits on an AVX-512
server than on an AVX2 one. Haswell's instruction set (AVX2 and FMA, x86-64-v3) runs on most
x86-64 machines, not all (some low-power CPUs and virtual machines hide AVX2); a machine without
it fails on the first compiled call (illegal instruction). NUMBA_CPU_NAME set in the
environment wins (then results are only reproducible on that target). Intel's vector maths
library (SVML), if installed, is kept out for the same reason, by NUMBA_DISABLE_INTEL_SVML set
before numba is first imported (numba reads it on import, so this holds when flockward imports
numba first).
"""

from __future__ import annotations

import os
import platform
from collections.abc import Callable
from typing import Any, ParamSpec, TypeVar, cast

os.environ.setdefault("NUMBA_DISABLE_INTEL_SVML", "1")  # before numba's import reads it

import numba
import numpy as np
from numba.core import types
from numba.extending import overload

# numba's threading layer for parallel code, unless NUMBA_THREADING_LAYER says otherwise: chosen
# by measurement with another process holding a core (see `flockward bench` and the speed notes).
THREADING_LAYER = "workqueue"
if "NUMBA_THREADING_LAYER" not in os.environ:
    numba.config.THREADING_LAYER = THREADING_LAYER  # type: ignore[attr-defined]

# The CPU every function is compiled for, so results do not depend on the machine (see above).
COMPILE_TARGET = "haswell"
if platform.machine() in ("x86_64", "AMD64") and "NUMBA_CPU_NAME" not in os.environ:
    numba.config.CPU_NAME = COMPILE_TARGET  # type: ignore[attr-defined]
    numba.config.CPU_FEATURES = ""  # type: ignore[attr-defined]  # the target's own features only

P = ParamSpec("P")
R = TypeVar("R")


def compiled(fn: Callable[P, R]) -> Callable[P, R]:
    """``fn`` compiled in nopython mode with an on-disk cache; exact IEEE arithmetic."""
    return cast("Callable[P, R]", numba.njit(cache=True)(fn))


def compiled_fastmath(flags: set[str]) -> Callable[[Callable[P, R]], Callable[P, R]]:
    """Like ``compiled``, with the named LLVM fast-math ``flags`` (e.g. ``{"contract"}``)."""

    def decorate(fn: Callable[P, R]) -> Callable[P, R]:
        return cast("Callable[P, R]", numba.njit(cache=True, fastmath=flags)(fn))

    return decorate


def compiled_kernel(flags: set[str]) -> Callable[[Callable[P, R]], Callable[P, R]]:
    """Like ``compiled_fastmath``, with numba's ``error_model="numpy"``: a division by zero gives
    inf or NaN instead of raising, so no exception exit sits in a loop and LLVM can vectorise it."""

    def decorate(fn: Callable[P, R]) -> Callable[P, R]:
        return cast(
            "Callable[P, R]", numba.njit(cache=True, fastmath=flags, error_model="numpy")(fn)
        )

    return decorate


def compiled_parallel(flags: set[str]) -> Callable[[Callable[P, R]], Callable[P, R]]:
    """Like ``compiled_kernel``, with numba's ``parallel=True``: its ``prange`` loops run on
    numba's worker threads (``numba.set_num_threads`` sets how many)."""

    def decorate(fn: Callable[P, R]) -> Callable[P, R]:
        jit = numba.njit(cache=True, parallel=True, fastmath=flags, error_model="numpy")
        return cast("Callable[P, R]", jit(fn))

    return decorate


def compiled_inline(fn: Callable[P, R]) -> Callable[P, R]:
    """Like ``compiled``, inlined into its callers by numba (a small helper of a hot loop)."""
    return cast("Callable[P, R]", numba.njit(cache=True, inline="always")(fn))


def compiled_uncached(fn: Callable[P, R]) -> Callable[P, R]:
    """Like ``compiled`` without the on-disk cache: for functions that take another compiled
    function as an argument, which numba's cache cannot tell apart."""
    return cast("Callable[P, R]", numba.njit(fn))


@numba.njit(parallel=True)
def _touch_threads(out: np.ndarray) -> None:
    for k in numba.prange(out.shape[0]):
        out[k] = k


def start_threads() -> None:
    """Start numba's thread pool (a tiny parallel loop), so its threading layer can be read."""
    _touch_threads(np.zeros(4))


def like(value: float, x: float) -> float:
    """``value`` in the floating type of ``x``: a float64 literal stays float64 beside a float64
    ``x`` (the same constant, the same machine code) and becomes float32 beside a float32 one,
    so a kernel specialised on float32 arrays does not silently compute in float64 (numba types
    every Python float literal as float64, and float32 op float64 gives float64)."""
    return value


@overload(like, inline="always")
def _like(value: Any, x: Any) -> Callable[[Any, Any], Any]:
    # numba compares the typing and implementation signatures, annotations included: both say Any.
    if isinstance(x, types.Float) and x.bitwidth == 32:

        def single(value: Any, x: Any) -> Any:
            return np.float32(value)

        return single

    def unchanged(value: Any, x: Any) -> Any:
        return value

    return unchanged


def is_single(a: np.ndarray) -> bool:
    """Whether array ``a`` holds float32 (a constant where compiled: the branch is removed)."""
    return bool(a.dtype == np.float32)


@overload(is_single, inline="always")
def _is_single(a: Any) -> Callable[[Any], Any]:
    flag = isinstance(a, types.Array) and a.dtype == types.float32

    def constant(a: Any) -> Any:
        return flag

    return constant

"""Play a suite's episodes as Ray tasks, on this machine or on a cluster (the ``ray`` extra).

:func:`ray_rows` is a :data:`flockward.bench.evaluation.Backend`: every call becomes one Ray task
running the runner's own per-episode function, and the rows come back to the driver as the tasks
finish. The driver alone orders, saves and resumes, exactly as with local workers, so the result
file does not depend on where the episodes ran. :func:`ray_session` connects for one run::

    with ray_session(address) as backend:
        run_suite(suite, factory, name, backend=backend)

Ray is imported only when one of these functions is called.
"""

from __future__ import annotations

import logging
import socket
from collections import Counter
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from types import ModuleType
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from flockward.bench.evaluation import Backend

__all__ = ["INSTALL_HINT", "import_ray", "ray_rows", "ray_session"]

INSTALL_HINT = "pip install 'flockward[ray]'"
CANCEL_WAIT = 2.0  # s, how long a stopping run waits for its cancelled tasks to settle


def import_ray(feature: str = "the Ray backend") -> ModuleType:
    """The ``ray`` module; ImportError naming ``feature`` and the extra to install if missing."""
    try:
        import ray
    except ImportError:
        raise ImportError(f"{feature} needs Ray: {INSTALL_HINT}") from None
    return ray


def ray_rows(
    play: Callable[..., dict[str, Any]], calls: list[tuple[Any, ...]]
) -> Iterator[dict[str, Any]]:
    """``play(*call)`` for every call as Ray tasks on the connected cluster; rows as they finish.

    An argument shared by several calls (the controller factory, a scenario) is put in the object
    store once. A task that raises re-raises its own exception here (no remote traceback); a task
    lost with its worker becomes a RuntimeError. Closing the iterator cancels the tasks not yet
    finished.
    """
    ray = import_ray()
    if not calls:
        return
    if not ray.is_initialized():
        raise RuntimeError(
            "ray_rows needs a Ray connection: use ray_session() or call ray.init() first"
        )
    uses = Counter(id(arg) for call in calls for arg in call)
    refs: dict[int, Any] = {}

    def shipped(arg: Any) -> Any:
        if uses[id(arg)] < 2:
            return arg
        if id(arg) not in refs:
            refs[id(arg)] = ray.put(arg)
        return refs[id(arg)]

    task = ray.remote(num_cpus=1)(play)
    pending = [task.remote(*map(shipped, call)) for call in calls]
    try:
        while pending:
            finished, pending = ray.wait(pending, num_returns=1)
            yield _result(ray, finished[0])
    finally:
        _drop(ray, pending)


def _drop(ray: ModuleType, refs: list[Any]) -> None:
    """Cancel the unfinished tasks and collect what settles soon, so Ray logs no remote errors
    (as 'unhandled') for a run that has already stopped on its first one."""
    if not refs:
        return
    for ref in refs:
        ray.cancel(ref)
    settled, _ = ray.wait(refs, num_returns=len(refs), timeout=CANCEL_WAIT)
    for ref in settled:
        try:
            ray.get(ref)
        except Exception:  # cancelled or failed: the driver is already reporting why it stops
            continue


def _result(ray: ModuleType, ref: Any) -> dict[str, Any]:
    """The task's row, or its own exception raised in the driver."""
    try:
        row: dict[str, Any] = ray.get(ref)
    except ray.exceptions.RayTaskError as error:
        cause = error.cause
        if isinstance(cause, Exception) and not isinstance(cause, ray.exceptions.RayError):
            raise cause from None
        raise RuntimeError(f"a Ray task failed: {_first_line(cause)}") from None
    except ray.exceptions.RayError as error:  # worker or node lost, retries used up
        raise RuntimeError(f"a Ray task was lost: {_first_line(error)}") from None
    return row


def _first_line(error: BaseException) -> str:
    text = str(error).strip()
    return f"{type(error).__name__}: {text.splitlines()[0] if text else ''}"


def _check_reachable(address: str, timeout: float = 5.0) -> None:
    """Fail fast on a HOST:PORT nobody listens at (ray.init would retry for minutes)."""
    host, sep, port = address.removeprefix("ray://").rpartition(":")
    if not sep or not port.isdigit():
        return  # "auto" and other forms Ray resolves itself
    try:
        socket.create_connection((host.strip("[]"), int(port)), timeout=timeout).close()
    except OSError as error:
        raise ConnectionError(
            f"Ray address {address}: no Ray head answers there ({error.strerror or error}); "
            "start one with `ray start --head` and pass its HEAD:6379 address"
        ) from None


@contextmanager
def ray_session(address: str = "", num_cpus: int | None = None) -> Iterator[Backend]:
    """Connect to the cluster at ``address``, or start a local instance if it is empty.

    ``num_cpus`` caps a local instance (default: every core); a cluster's size is set where it
    was started, so giving both is refused. If Ray is already initialised in this process, that
    connection is used and left open; otherwise the connection made here is closed on exit (a
    local instance stops, a cluster keeps running). Yields :func:`ray_rows`.
    """
    if num_cpus is not None and num_cpus < 1:
        raise ValueError(f"num_cpus = {num_cpus}: must be an integer >= 1")
    if address and num_cpus is not None:
        raise ValueError(
            f"num_cpus = {num_cpus} applies to a local Ray instance only; the CPUs of the cluster "
            f"at {address} are set by `ray start --num-cpus` on its nodes"
        )
    ray = import_ray()
    started = not ray.is_initialized()
    if started:
        if address:
            _check_reachable(address)
        try:
            ray.init(
                # "local" always starts a fresh instance; None would join any cluster it finds.
                address=address or "local",
                num_cpus=num_cpus,
                include_dashboard=False,
                logging_level=logging.ERROR,
                log_to_driver=False,
            )
        except ConnectionError as error:
            raise ConnectionError(
                f"Ray address {address}: cannot join the Ray cluster ({_first_line(error)}); if "
                "it uses token authentication, set RAY_AUTH_MODE=token and copy the head's "
                "~/.ray/auth_token here"
            ) from None
    try:
        yield ray_rows
    finally:
        if started:
            ray.shutdown()

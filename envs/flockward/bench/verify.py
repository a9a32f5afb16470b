"""The model's published checks: their records, the registry and running them.

A check is a function of ``VerifySettings`` returning a ``CheckResult``: the measured value, the
bound it must meet, whether it did, and the source of the bound (a paper, a textbook value or a
claim of the field). Checks use only the public faces of the simulator (World, the metrics,
scenarios with overrides, episodes of controllers), so they judge whichever model is installed.
A check whose premise the installed model lacks (a parameter it cannot switch off, a controller
that is not given) reports "not applicable" instead of passing or failing.

The checks themselves live in ``flockward.bench.physics_checks`` (the simulator against
published results) and ``flockward.bench.claim_checks`` (the field's claims about herding,
played as episodes); ``flockward.bench.verify_report`` writes the report.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

from flockward.controller import Controller

PASS, FAIL, NOT_APPLICABLE = "pass", "fail", "n/a"


@dataclass(frozen=True)
class Series:
    """One line of a figure: y against x, with its legend label."""

    label: str
    x: tuple[float, ...]
    y: tuple[float, ...]


@dataclass(frozen=True)
class Figure:
    """A figure of the report, drawn as ``<stem>.png``."""

    stem: str
    title: str
    xlabel: str
    ylabel: str
    series: tuple[Series, ...]
    log_x: bool = False
    log_y: bool = False


@dataclass(frozen=True)
class CheckResult:
    """The outcome of one check. ``measured`` is None when the check is not applicable."""

    name: str
    measured: float | None
    bound: str  # the rule the measured value must meet, e.g. ">= 0.95"
    status: str  # PASS, FAIL or NOT_APPLICABLE
    source: str  # where the bound comes from
    detail: str = ""  # the numbers behind the measured value, for people
    figures: tuple[Figure, ...] = field(default=(), compare=False)

    @property
    def holds(self) -> bool:
        """Whether the check does not fail (a check that does not apply does not fail)."""
        return self.status != FAIL


def judged(
    name: str,
    measured: float,
    bound: str,
    passed: bool,
    source: str,
    detail: str = "",
    figures: Sequence[Figure] = (),
) -> CheckResult:
    """A result that passes when ``passed`` and the measured value is a finite number."""
    ok = bool(passed) and math.isfinite(measured)
    return CheckResult(name, measured, bound, PASS if ok else FAIL, source, detail, tuple(figures))


def not_applicable(name: str, bound: str, source: str, reason: str) -> CheckResult:
    """A result for a check whose premise the installed model or the run lacks."""
    return CheckResult(name, None, bound, NOT_APPLICABLE, source, f"not applicable: {reason}")


ControllerFactory = Callable[..., Controller]


@dataclass(frozen=True)
class VerifySettings:
    """How much to run. ``quick`` is the CI budget; the counts below are the published ones.

    ``make_controller(name, **params)`` builds the controllers the field's claims are played
    with (the core ships none); without it those checks are not applicable.
    """

    quick: bool = False
    make_controller: ControllerFactory | None = None

    @property
    def episode_seeds(self) -> tuple[int, ...]:
        """Seeds of every claim's episodes (20 for the published counts)."""
        return tuple(range(1000, 1005 if self.quick else 1020))

    @property
    def flock_seeds(self) -> tuple[int, ...]:
        """Seeds of the unherded-flock runs (each a batch of worlds)."""
        return tuple(range(2 if self.quick else 4))

    @property
    def flock_duration(self) -> float:
        """Seconds of flight of each unherded-flock run."""
        return 10.0 if self.quick else 30.0

    @property
    def push_fractions(self) -> tuple[float, ...]:
        """Push distances swept, as fractions of the way from the dodge to the alarm radius."""
        return (0.2, 0.5, 0.8) if self.quick else (0.1, 0.25, 0.4, 0.55, 0.7, 0.85)


Check = Callable[[VerifySettings], CheckResult]


def registry() -> dict[str, Check]:
    """Every published check by name, in report order."""
    from flockward.bench import claim_checks, physics_checks

    return {**physics_checks.CHECKS, **claim_checks.CHECKS}


def run_checks(
    settings: VerifySettings,
    names: Sequence[str] | None = None,
    checks: dict[str, Check] | None = None,
    on_result: Callable[[CheckResult], Any] | None = None,
) -> list[CheckResult]:
    """Run the named checks (default all of ``checks``, default the registry), in order.

    ``on_result`` sees each result as soon as it is known (to print rows while the rest run).
    """
    checks = registry() if checks is None else checks
    chosen = list(checks) if not names else list(names)
    unknown = [name for name in chosen if name not in checks]
    if unknown:
        raise ValueError(f"unknown check(s) {', '.join(unknown)}; allowed: {', '.join(checks)}")
    results = []
    for name in chosen:
        try:
            result = checks[name](settings)
        except Exception as error:  # a check that cannot run fails, and says why, in its row
            result = CheckResult(
                name, None, "runs", FAIL, "-", f"raised {type(error).__name__}: {error}"
            )
        results.append(result)
        if on_result is not None:
            on_result(result)
    return results


def all_hold(results: Sequence[CheckResult]) -> bool:
    """Whether no check failed."""
    return all(result.holds for result in results)


def format_value(value: float | None) -> str:
    """A measured value in a table cell: four significant digits, '-' when not applicable."""
    return "-" if value is None else f"{value:.4g}"


def table_rows(results: Sequence[CheckResult]) -> list[tuple[str, str, str, str, str]]:
    """(check, measured, bound, status, source) per result, as text."""
    return [
        (r.name, format_value(r.measured), r.bound, r.status.upper(), r.source) for r in results
    ]

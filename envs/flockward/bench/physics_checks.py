"""Checks of the simulator against published results: order parameter, alignment, integrator.

Every check drives the installed model through its public faces only: scenarios loaded with
overrides, ``World`` (with no drone, so the flock is unherded) and ``flockward.sim.metrics``.
Where a check needs a term isolated, it sets every other ``*_gain`` field of the flock record to
zero and opens the speed and acceleration limits to the top of their declared ranges, so it
applies to any model whose terms are gains; a model without the term the check is about gets
"not applicable". Each check splits into a measurement and a judgement (a pure function of the
measured numbers), so the judgement can be tested on constructed inputs.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import fields
from functools import lru_cache
from itertools import pairwise
from typing import Any

import numpy as np
from scipy.spatial import cKDTree

from flockward.bench.verify import (
    CheckResult,
    Figure,
    Series,
    VerifySettings,
    judged,
    not_applicable,
)
from flockward.config.files import list_flocks
from flockward.config.scenarios import load_flock, load_scenario
from flockward.sim.metrics import polarisation
from flockward.sim.spec import spec_of
from flockward.sim.types import EpisodeParams, FlockParams, Scenario
from flockward.sim.world import World

BASE_SCENARIO = "headon"  # the site every flock below flies on (destination 1400 m ahead)
VICSEK_SIZES = (10, 50, 200, 400)  # birds per random-heading sample
VICSEK_TOLERANCE = 0.05  # relative, DOMAIN.md section 3
ALIGNMENT_SIZES = (50, 200)  # flock sizes of the alignment-rate comparison
ALIGNMENT_WINDOW = 1.0  # s over which the velocity spread's decay rate is measured
ALIGNMENT_RATE_RATIO = 0.8  # the larger flock aligns at least this fraction as fast
VELOCITY_SPREAD = 3.0  # m/s, standard deviation of the velocity perturbation per component
MOMENTUM_TOLERANCE = 1e-9  # drift of the mean velocity / initial rms spread
SPREAD_TOLERANCE = 1e-12  # largest one-step growth of the velocity variance / initial variance
SMOOTH_TIME = 6.4  # s, a whole number of steps at every refined step size
SMOOTH_STEPS = (0.2, 0.1, 0.05, 0.025, 0.0125)  # s, physics steps of the convergence study
MIN_ORDER = 1.8  # observed order of a second-order scheme, allowing for rounding
DT_TOLERANCE = 0.05  # relative change of a flock statistic when the step is halved
OVERLAP_FRACTION = 0.3  # smallest nearest-neighbour distance / separation radius
# Nearest-neighbour distance r1 measured in wild starling flocks, m (Ballerini et al. 2008).
STARLING_SPACING = (0.68, 1.51)
SAMPLE_EVERY = 0.5  # s between samples of the flock statistics
# noise_std swept over the schema's range of heading noise (rad/s^0.5, flockward.sim.types)
NOISE_LEVELS = (0.0, 0.25, 0.5, 1.0, 2.0, 3.0)
NOISE_FRAYED = 0.5  # polarisation the noisiest flock must fall below
NOISE_SLACK = 0.02  # polarisation may rise this much between noise levels (sampling error)

SOURCE_VICSEK = "Vicsek et al. 1995, PRL 75:1226; E[v_a] = sqrt(pi/(4N)) (DOMAIN.md s. 3)"
SOURCE_CS = "Cucker & Smale 2007, IEEE TAC 52:852: symmetric weights (DOMAIN.md s. 2)"
SOURCE_MT = "Motsch & Tadmor 2011, J Stat Phys 144:923: rate independent of N (DOMAIN.md 9.2)"
SOURCE_ORDER = "Hairer, Lubich & Wanner 2006: velocity Verlet is order 2 (DOMAIN.md 9.3)"
SOURCE_DT = "numerical convergence: statistics independent of the step (model requirement)"
SOURCE_OVERLAP = "birds keep a hard core: no overlap (model requirement)"
SOURCE_SPACING = (
    "Ballerini et al. 2008, PNAS 105:1232: starling r1 0.68-1.51 m across flocks (from memory)"
)
SOURCE_NOISE = "Vicsek et al. 1995, PRL 75:1226: v_a falls with noise toward 0"


# ---------------------------------------------------------------- model discovery


def flock_fields() -> dict[str, Any]:
    """The installed flock record's fields by name."""
    return {f.name: f for f in fields(FlockParams)}


def isolating_overrides(keep: Sequence[str], law: str | None = None) -> dict[str, object] | None:
    """Overrides that leave only the ``keep`` gains acting: every other ``*_gain`` and the noise
    set to 0, the speed limits and acceleration cap opened to their declared range. ``law``
    selects a choice (e.g. an alignment law) by a substring of its name. None when a kept gain
    or the law does not exist in the installed model."""
    found = flock_fields()
    if any(name not in found for name in keep):
        return None
    out: dict[str, object] = {}
    for name, f in found.items():
        spec = spec_of(f)
        if name.endswith("_gain") and name not in keep:
            out[name] = 0.0
        elif name.startswith("noise") and spec is not None and spec.kind == "float":
            out[name] = 0.0
        elif name == "min_speed":
            out[name] = 0.0
        elif name in ("max_speed", "max_accel") and spec is not None and spec.hi is not None:
            out[name] = spec.hi
    if law is not None:
        choices = [
            (name, choice)
            for name, f in found.items()
            if (spec := spec_of(f)) is not None and spec.kind == "choice"
            for choice in spec.choices
            if law in choice
        ]
        if choices:
            out[choices[0][0]] = choices[0][1]
        elif law != "cucker":
            return None
    return {f"flock.{name}": value for name, value in out.items()}


def step_refinements(levels: int) -> list[dict[str, object]]:
    """Overrides halving the physics step ``levels - 1`` times from the episode's default.

    A model with a substep count (an integer episode field named ``*substep*``) refines by
    doubling it at a fixed control step; otherwise the episode step ``dt`` is halved.
    """
    defaults = EpisodeParams()
    substeps = [f.name for f in fields(defaults) if "substep" in f.name]
    if substeps:
        name = substeps[0]
        base = int(getattr(defaults, name))
        return [{f"episode.{name}": base * 2**k} for k in range(levels)]
    base_dt = float(defaults.dt)
    return [{"episode.dt": base_dt / 2**k} for k in range(levels)]


def physics_step(scenario: Scenario) -> float:
    """The physics step of a scenario, s: dt divided by the substep count if there is one."""
    episode = scenario.episode
    for f in fields(episode):
        if "substep" in f.name:
            return float(episode.dt) / int(getattr(episode, f.name))
    return float(episode.dt)


def unherded_world(scenario: Scenario, seeds: Sequence[int]) -> World:
    """One world per seed, reset, with no drone: nothing frightens the flock."""
    world = World(scenario, len(seeds), drones=0)
    for b, seed in enumerate(seeds):
        world.reset(b, np.random.default_rng(seed))
    return world


def advance(world: World, steps: int) -> None:
    """Step every world ``steps`` times (a world without drones takes no command)."""
    action = np.zeros((world.n_worlds, 0, 2))
    for _ in range(steps):
        world.step(action)


# ---------------------------------------------------------------- measurements


def random_heading_polarisation(birds: int, samples: int, rng: np.random.Generator) -> float:
    """Mean order parameter of ``samples`` flocks of uniformly random headings and random
    speeds, measured by ``flockward.sim.metrics.polarisation``."""
    angle = rng.uniform(0.0, 2.0 * math.pi, (samples, birds))
    speed = rng.uniform(1.0, 20.0, (samples, birds))
    vel = np.stack([speed * np.cos(angle), speed * np.sin(angle)], axis=-1)
    return float(polarisation(vel, np.full(samples, birds)).mean())


def velocity_statistics(vel: np.ndarray, count: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean velocity (B, 2) and velocity variance about it, mean over birds (B,)."""
    mean = np.stack([vel[b, : count[b]].mean(axis=0) for b in range(len(count))])
    var = np.array(
        [((vel[b, : count[b]] - mean[b]) ** 2).sum(axis=1).mean() for b in range(len(count))]
    )
    return mean, var


def alignment_run(
    birds: int, seeds: Sequence[int], overrides: Mapping[str, object], duration: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Times (T,), mean velocities (T, B, 2) and velocity variances (T, B) of flocks whose
    velocities start perturbed by VELOCITY_SPREAD about the cruise velocity."""
    scenario = load_scenario(BASE_SCENARIO, {**overrides, "flock.count": birds})
    world = unherded_world(scenario, seeds)
    cruise = scenario.flock.cruise_speed
    for b, seed in enumerate(seeds):
        rng = np.random.default_rng(10_000 + seed)
        world.state.bird_vel[b, :birds] = (cruise, 0.0) + rng.normal(0, VELOCITY_SPREAD, (birds, 2))
    steps = round(duration / scenario.episode.dt)
    means, variances = [], []
    for _ in range(steps + 1):
        mean, var = velocity_statistics(world.state.bird_vel, world.state.count)
        means.append(mean)
        variances.append(var)
        advance(world, 1)
    times = np.arange(steps + 1) * scenario.episode.dt
    return times, np.array(means), np.array(variances)


def smooth_endpoint(refinement: Mapping[str, object]) -> np.ndarray:
    """Where a lone bird steering only toward its destination is after SMOOTH_TIME, (2,) m.

    It starts flying north with the destination due east, so it turns along a smooth arc; no
    cut-off, cap or clamp is reached, so the scheme's own order shows.
    """
    overrides = isolating_overrides(["destination_gain"])
    assert overrides is not None
    if "informed_fraction" in flock_fields():
        overrides["flock.informed_fraction"] = 1.0  # the lone bird knows its roost
    scenario = load_scenario(BASE_SCENARIO, {**overrides, **refinement, "flock.count": 1})
    world = unherded_world(scenario, [0])
    cruise = scenario.flock.cruise_speed
    world.state.bird_pos[0, 0] = scenario.site.flock_start
    world.state.bird_vel[0, 0] = (0.0, cruise)
    advance(world, round(SMOOTH_TIME / scenario.episode.dt))
    return np.array(world.state.bird_pos[0, 0], dtype=np.float64)


def observed_orders(endpoints: Sequence[np.ndarray]) -> tuple[list[float], list[float]]:
    """Errors |x(h) - x(h/2)| between successive halvings and the orders log2 of their ratios
    (Richardson's self-convergence estimate: needs no exact solution)."""
    errors = [float(np.linalg.norm(a - b)) for a, b in pairwise(endpoints)]
    orders = [math.log2(a / b) if a > 0 and b > 0 else math.nan for a, b in pairwise(errors)]
    return errors, orders


def nearest_neighbour_distances(pos: np.ndarray) -> np.ndarray:
    """Each bird's distance to its nearest flockmate, (n,) m (scipy's k-d tree)."""
    if len(pos) < 2:
        return np.full(len(pos), math.inf)
    return np.asarray(cKDTree(pos).query(pos, k=2)[0][:, 1], dtype=np.float64)


@lru_cache(maxsize=64)
def flock_statistics(
    species: str,
    refinement: tuple[tuple[str, object], ...],
    seeds: tuple[int, ...],
    duration: float,
) -> dict[str, Any]:
    """An unherded flock of a shipped species (its file's count and formation) flown for
    ``duration``: rms internal speed, median nearest-neighbour distance and polarisation, each a
    time series sampled every SAMPLE_EVERY seconds (mean over seeds) and averaged over the
    second half, and the smallest nearest-neighbour distance of any step."""
    count = load_flock(species).count
    overrides = {"flock.file": species, "flock.count": count, **dict(refinement)}
    scenario = load_scenario(BASE_SCENARIO, overrides)
    world = unherded_world(scenario, seeds)
    dt = scenario.episode.dt
    every = max(1, round(SAMPLE_EVERY / dt))
    steps = round(duration / dt)
    times, rms, median_nn, polar = [], [], [], []
    closest = math.inf
    for step in range(steps + 1):
        pos, vel, n = world.state.bird_pos, world.state.bird_vel, world.state.count
        nn = [nearest_neighbour_distances(pos[b, : n[b]]) for b in range(len(seeds))]
        closest = min(closest, min(float(d.min()) for d in nn))
        if step % every == 0:
            _, var = velocity_statistics(vel, n)
            times.append(step * dt)
            rms.append(float(np.sqrt(var).mean()))
            median_nn.append(float(np.mean([np.median(d) for d in nn])))
            polar.append(float(polarisation(vel, n).mean()))
        if step < steps:
            advance(world, 1)
    half = len(times) // 2
    return {
        "times": tuple(times),
        "rms_speed": tuple(rms),
        "summary": {
            "rms internal speed": float(np.mean(rms[half:])),
            "median NN distance": float(np.mean(median_nn[half:])),
            "polarisation": float(np.mean(polar[half:])),
        },
        "closest": closest,
        "separation_radius": scenario.flock.separation_radius,
    }


def final_polarisation(noise: float, seeds: Sequence[int], duration: float) -> tuple[float, float]:
    """Polarisation of an unherded 50-gull flock at noise level ``noise``: its mean over the
    second half of ``duration`` (sampled each second) and over the seeds, and the standard error
    of that mean across seeds (0 for one seed)."""
    scenario = load_scenario(BASE_SCENARIO, {"flock.noise_std": noise})
    world = unherded_world(scenario, seeds)
    every = max(1, round(1.0 / scenario.episode.dt))
    steps = round(duration / scenario.episode.dt)
    samples = []
    for step in range(1, steps + 1):
        advance(world, 1)
        if step >= steps // 2 and step % every == 0:
            samples.append(polarisation(world.state.bird_vel, world.state.count))
    per_seed = np.mean(samples, axis=0)
    error = float(per_seed.std(ddof=1) / math.sqrt(len(per_seed))) if len(per_seed) > 1 else 0.0
    return float(per_seed.mean()), error


# ---------------------------------------------------------------- judgements


def relative_change(a: float, b: float) -> float:
    """|a - b| / |b|; 0 when both are 0 and inf when only b is."""
    if b == 0.0:
        return 0.0 if a == 0.0 else math.inf
    return abs(a - b) / abs(b)


def vicsek_errors(sizes: Sequence[int], measured: Sequence[float]) -> list[float]:
    """Relative error of each measured mean order parameter against sqrt(pi / (4 N))."""
    return [
        relative_change(m, math.sqrt(math.pi / (4 * n)))
        for n, m in zip(sizes, measured, strict=True)
    ]


def momentum_drift(means: np.ndarray, variances: np.ndarray) -> float:
    """Largest drift of the mean velocity from its start, over the initial rms spread."""
    drift = np.linalg.norm(means - means[0], axis=-1).max(axis=0)  # (B,)
    return float((drift / np.sqrt(variances[0])).max())


def spread_growth(variances: np.ndarray) -> float:
    """Largest one-step growth of the velocity variance over its initial value (<= 0 when the
    spread never grows)."""
    return float((np.diff(variances, axis=0) / variances[0]).max())


def decay_rate(times: np.ndarray, variances: np.ndarray, window: float) -> float:
    """Exponential decay rate of the rms velocity spread over the first ``window`` s, 1/s
    (mean over worlds): ln(var(0) / var(window)) / (2 window)."""
    k = int(np.searchsorted(times, window - 1e-9))
    return float(np.mean(np.log(variances[0] / variances[k]) / (2.0 * times[k])))


def frays_monotonically(
    levels: Sequence[float], polar: Sequence[float], errors: Sequence[float] | None = None
) -> tuple[bool, float]:
    """Whether polarisation never rises as noise grows by more than its sampling error (two
    standard errors of the difference, at least NOISE_SLACK), and the polarisation at the
    highest noise level. Near full disorder the values sit at the floor sqrt(pi / (4 N)) and
    differ only by sampling error."""
    order = np.argsort(levels)
    values = np.asarray(polar, dtype=float)[order]
    se = np.zeros(len(values)) if errors is None else np.asarray(errors, dtype=float)[order]
    slack = np.maximum(NOISE_SLACK, 2.0 * np.hypot(se[1:], se[:-1]))
    return bool(np.all(np.diff(values) <= slack)), float(values[-1])


# ---------------------------------------------------------------- checks


def check_vicsek_random(settings: VerifySettings) -> CheckResult:
    """Random headings: mean order parameter against its large-N limit, within 5 %."""
    samples = 4000 if settings.quick else 20000
    rng = np.random.default_rng(0)
    measured = [random_heading_polarisation(n, samples, rng) for n in VICSEK_SIZES]
    errors = vicsek_errors(VICSEK_SIZES, measured)
    figure = Figure(
        "vicsek-random",
        "Order parameter of random headings",
        "birds N",
        "mean v_a",
        (
            Series("measured (metrics.polarisation)", VICSEK_SIZES, tuple(measured)),
            Series(
                "sqrt(pi / 4N)",
                VICSEK_SIZES,
                tuple(math.sqrt(math.pi / (4 * n)) for n in VICSEK_SIZES),
            ),
        ),
        log_x=True,
        log_y=True,
    )
    detail = ", ".join(
        f"N={n}: {m:.4f} ({e:.1%})" for n, m, e in zip(VICSEK_SIZES, measured, errors, strict=True)
    )
    return judged(
        "vicsek-random-headings",
        max(errors),
        f"relative error <= {VICSEK_TOLERANCE}",
        max(errors) <= VICSEK_TOLERANCE,
        SOURCE_VICSEK,
        f"{samples} samples per N; {detail}",
        [figure],
    )


def check_vicsek_aligned(settings: VerifySettings) -> CheckResult:
    """Equal headings at random speeds: the order parameter is exactly 1."""
    rng = np.random.default_rng(1)
    angle = rng.uniform(0.0, 2.0 * math.pi, (64, 1))
    speed = rng.uniform(1.0, 20.0, (64, 50))
    vel = np.stack([speed * np.cos(angle), speed * np.sin(angle)], axis=-1)
    error = float(np.abs(1.0 - polarisation(vel, np.full(64, 50))).max())
    return judged(
        "vicsek-aligned",
        error,
        "abs(1 - v_a) <= 1e-12",
        error <= 1e-12,
        "Vicsek et al. 1995: v_a = 1 for a fully aligned flock",
        "64 flocks of 50 birds, one heading each, speeds 1-20 m/s",
    )


@lru_cache(maxsize=4)
def _cucker_smale_run(quick: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    overrides = isolating_overrides(["alignment_gain"], law="cucker")
    if overrides is None:
        return None
    return alignment_run(50, (0, 1, 2), overrides, 5.0 if quick else 20.0)


def check_cs_momentum(settings: VerifySettings) -> CheckResult:
    """Alignment alone (Cucker-Smale law) conserves the flock's mean velocity."""
    name, bound = "cucker-smale-momentum", f"drift / rms spread <= {MOMENTUM_TOLERANCE:g}"
    run = _cucker_smale_run(settings.quick)
    if run is None:
        return not_applicable(name, bound, SOURCE_CS, "the model has no alignment_gain")
    times, means, variances = run
    drift = momentum_drift(means, variances)
    return judged(
        name,
        drift,
        bound,
        drift <= MOMENTUM_TOLERANCE,
        SOURCE_CS,
        f"50 birds, 3 seeds, {times[-1]:g} s, every other gain 0, limits opened",
    )


def check_cs_spread(settings: VerifySettings) -> CheckResult:
    """Alignment alone (Cucker-Smale law) never widens the velocity spread."""
    name, bound = "cucker-smale-spread", f"step growth / initial variance <= {SPREAD_TOLERANCE:g}"
    run = _cucker_smale_run(settings.quick)
    if run is None:
        return not_applicable(name, bound, SOURCE_CS, "the model has no alignment_gain")
    times, _, variances = run
    growth = spread_growth(variances)
    figure = Figure(
        "cucker-smale-spread",
        "Velocity variance under alignment alone",
        "time (s)",
        "variance about the mean (m^2/s^2)",
        tuple(
            Series(f"seed {b}", tuple(times), tuple(variances[:, b]))
            for b in range(variances.shape[1])
        ),
        log_y=True,
    )
    return judged(
        name,
        growth,
        bound,
        growth <= SPREAD_TOLERANCE,
        SOURCE_CS,
        f"variance {variances[0].mean():.3g} -> {variances[-1].mean():.3g} m^2/s^2 "
        f"over {times[-1]:g} s",
        [figure],
    )


def check_alignment_rate(settings: VerifySettings) -> CheckResult:
    """The default alignment aligns a 200-bird flock about as fast as a 50-bird one."""
    name, bound = "alignment-rate-vs-n", f"rate(200) / rate(50) >= {ALIGNMENT_RATE_RATIO}"
    overrides = isolating_overrides(["alignment_gain"])
    if overrides is None:
        return not_applicable(name, bound, SOURCE_MT, "the model has no alignment_gain")
    seeds = (0, 1) if settings.quick else (0, 1, 2, 3)
    rates, series = [], []
    for n in ALIGNMENT_SIZES:
        times, _, variances = alignment_run(n, seeds, overrides, ALIGNMENT_WINDOW)
        rates.append(decay_rate(times, variances, ALIGNMENT_WINDOW))
        series.append(Series(f"N = {n}", tuple(times), tuple(variances.mean(axis=1))))
    ratio = rates[1] / rates[0] if rates[0] > 0 else math.nan
    figure = Figure(
        "alignment-rate",
        "Velocity variance, alignment alone",
        "time (s)",
        "variance (m^2/s^2)",
        tuple(series),
        log_y=True,
    )
    return judged(
        name,
        ratio,
        bound,
        ratio >= ALIGNMENT_RATE_RATIO,
        SOURCE_MT,
        f"rms spread decay rate {rates[0]:.3f}/s at N=50, {rates[1]:.3f}/s at N=200 "
        f"(default alignment law, {len(seeds)} seeds, first {ALIGNMENT_WINDOW:g} s)",
        [figure],
    )


def check_integrator_order(settings: VerifySettings) -> CheckResult:
    """Observed order of the physics step on a smooth problem, by successive halving."""
    name, bound = "integrator-order", f"observed order >= {MIN_ORDER}"
    if isolating_overrides(["destination_gain"]) is None:
        return not_applicable(name, bound, SOURCE_ORDER, "the model has no destination_gain")
    levels = 4 if settings.quick else 5
    refinements = step_refinements(levels)
    if "episode.dt" in refinements[0]:
        # No substeps: the study starts at twice the default step, so the finest level is cheap.
        refinements = [{"episode.dt": h} for h in SMOOTH_STEPS[:levels]]
    steps = [physics_step(load_scenario(BASE_SCENARIO, r)) for r in refinements]
    endpoints = [smooth_endpoint(r) for r in refinements]
    errors, orders = observed_orders(endpoints)
    figure = Figure(
        "integrator-order",
        "Self-convergence on a smooth turn",
        "physics step (s)",
        "|x(h) - x(h/2)| (m)",
        (Series("error", tuple(steps[:-1]), tuple(errors)),),
        log_x=True,
        log_y=True,
    )
    final = orders[-1]
    return judged(
        name,
        final,
        bound,
        final >= MIN_ORDER,
        SOURCE_ORDER,
        "errors "
        + ", ".join(f"{e:.3g}" for e in errors)
        + " m; orders "
        + ", ".join(f"{p:.2f}" for p in orders)
        + f" (steps {steps[0]:g} s to {steps[-1]:g} s)",
        [figure],
    )


def _species_runs(species: str, settings: VerifySettings) -> tuple[dict[str, Any], dict[str, Any]]:
    default, half = step_refinements(2)
    seeds, duration = settings.flock_seeds, settings.flock_duration
    return (
        flock_statistics(species, tuple(default.items()), seeds, duration),
        flock_statistics(species, tuple(half.items()), seeds, duration),
    )


def dt_convergence_check(species: str) -> Any:
    """The check that a species' unherded flock statistics agree between the default physics
    step and half of it."""

    def check(settings: VerifySettings) -> CheckResult:
        coarse, fine = _species_runs(species, settings)
        changes = {
            key: relative_change(coarse["summary"][key], fine["summary"][key])
            for key in coarse["summary"]
        }
        worst = max(changes.values())
        figure = Figure(
            f"dt-convergence-{species}",
            f"{species}: rms internal speed, unherded",
            "time (s)",
            "rms speed about the flock mean (m/s)",
            (
                Series("default step", coarse["times"], coarse["rms_speed"]),
                Series("half step", fine["times"], fine["rms_speed"]),
            ),
        )
        detail = "; ".join(
            f"{key} {coarse['summary'][key]:.3g} vs {fine['summary'][key]:.3g} ({changes[key]:.1%})"
            for key in changes
        )
        return judged(
            f"dt-convergence-{species}",
            worst,
            f"relative change <= {DT_TOLERANCE}",
            worst <= DT_TOLERANCE,
            SOURCE_DT,
            f"{detail}; {len(settings.flock_seeds)} seeds, {settings.flock_duration:g} s",
            [figure],
        )

    check.__doc__ = f"dt convergence of the unherded {species} flock."
    return check


def overlap_check(species: str) -> Any:
    """The check that a species' birds never come closer than a fraction of their separation
    radius in an unherded flight at the default step."""

    def check(settings: VerifySettings) -> CheckResult:
        coarse, _ = _species_runs(species, settings)
        ratio = coarse["closest"] / coarse["separation_radius"]
        return judged(
            f"overlap-{species}",
            ratio,
            f"min NN / separation radius >= {OVERLAP_FRACTION}",
            ratio >= OVERLAP_FRACTION,
            SOURCE_OVERLAP,
            f"closest pair {coarse['closest']:.3g} m, separation radius "
            f"{coarse['separation_radius']:g} m",
        )

    check.__doc__ = f"No overlap in the unherded {species} flock."
    return check


def check_starling_spacing(settings: VerifySettings) -> CheckResult:
    """The unherded starling flock's median nearest-neighbour distance lies in the range
    measured in wild starling flocks."""
    name = "spacing-starlings"
    lo, hi = STARLING_SPACING
    bound = f"{lo:g} m <= median NN <= {hi:g} m"
    if "starlings" not in list_flocks():
        return not_applicable(name, bound, SOURCE_SPACING, "no starling flock file")
    coarse, _ = _species_runs("starlings", settings)
    median = coarse["summary"]["median NN distance"]
    return judged(
        name,
        median,
        bound,
        lo <= median <= hi,
        SOURCE_SPACING,
        f"median NN distance {median:.3g} m (separation radius "
        f"{coarse['separation_radius']:g} m; mean of the second half of "
        f"{settings.flock_duration:g} s, {len(settings.flock_seeds)} seeds)",
    )


def check_noise_frays(settings: VerifySettings) -> CheckResult:
    """Polarisation of an unherded flock falls as the noise grows, and noise can fray it."""
    name, bound = "noise-frays-flock", f"monotone and v_a(max noise) <= {NOISE_FRAYED}"
    if "noise_std" not in flock_fields():
        return not_applicable(name, bound, SOURCE_NOISE, "the model has no noise_std")
    seeds = (0, 1) if settings.quick else (0, 1, 2, 3)
    duration = settings.flock_duration
    measured = [final_polarisation(level, seeds, duration) for level in NOISE_LEVELS]
    polar = [mean for mean, _ in measured]
    monotone, noisiest = frays_monotonically(NOISE_LEVELS, polar, [se for _, se in measured])
    figure = Figure(
        "polarisation-vs-noise",
        "Polarisation of 50 unherded gulls",
        "noise_std",
        "polarisation v_a",
        (Series("after flight", NOISE_LEVELS, tuple(polar)),),
    )
    return judged(
        name,
        noisiest,
        bound,
        monotone and noisiest <= NOISE_FRAYED,
        SOURCE_NOISE,
        ", ".join(
            f"noise {n:g}: {p:.3f} +- {e:.3f}"
            for n, (p, e) in zip(NOISE_LEVELS, measured, strict=True)
        )
        + f" ({'monotone within sampling error' if monotone else 'not monotone'}; mean of the "
        f"second half of {duration:g} s, {len(seeds)} seeds, standard errors)",
        [figure],
    )


def _species_checks() -> dict[str, Any]:
    out: dict[str, Any] = {}
    for species in list_flocks():
        out[f"dt-convergence-{species}"] = dt_convergence_check(species)
    for species in list_flocks():
        out[f"overlap-{species}"] = overlap_check(species)
    return out


CHECKS = {
    "vicsek-random-headings": check_vicsek_random,
    "vicsek-aligned": check_vicsek_aligned,
    "cucker-smale-momentum": check_cs_momentum,
    "cucker-smale-spread": check_cs_spread,
    "alignment-rate-vs-n": check_alignment_rate,
    "integrator-order": check_integrator_order,
    **_species_checks(),
    "spacing-starlings": check_starling_spacing,
    "noise-frays-flock": check_noise_frays,
}

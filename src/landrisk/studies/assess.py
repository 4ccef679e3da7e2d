"""The overrun-risk assessment: Monte Carlo over the uncertain inputs of a scenario.

Joins the model (the vectorised solver, bound to the scenario's keys) and the generic uncertainty layer
(sampling, Monte Carlo, interval statistics). It reports percentiles of the landing distance and of each
phase with order-statistic intervals, the probability of an overrun and of stopping beyond the runway-end
safety area with binomial intervals, the ground speed of the overruns at the runway end, and comparison
lines: the deterministic distance at nominal inputs and that distance with regulatory factors.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import LandriskError
from landrisk.model import Scenario, solve_one
from landrisk.studies.binding import landing_model
from landrisk.uq import (
    EventProbability,
    Percentile,
    Problem,
    convergence,
    event_probability,
    mean_interval,
    percentiles,
    run_monte_carlo,
)

__all__ = [
    "COMPARISON_FACTORS",
    "PERCENTILES",
    "PHASES",
    "AssessSettings",
    "Assessment",
    "ComparisonLine",
    "assess",
]

#: Percentiles reported (in percent), where the sample supports them.
PERCENTILES = (1.0, 5.0, 50.0, 90.0, 95.0, 99.0, 99.9, 99.99)
#: Output name -> label of the distances analysed.
PHASES = {"total_m": "total", "air_distance_m": "air distance", "free_roll_m": "free roll",
          "braking_m": "braking roll"}

#: Comparison lines: name, factor on the deterministic distance, source. These are comparison lines
#: for the probabilistic answer, not part of the model.
COMPARISON_FACTORS: tuple[tuple[str, float, str], ...] = (
    ("deterministic, nominal inputs", 1.0, "this model at the scenario's nominal values"),
    ("dry-runway factor 1/0.6", 1.0 / 0.6,
     "14 CFR 121.195(b): full stop within 60 % of the effective runway length"),
    ("wet-runway factor 1.15/0.6", 1.15 / 0.6,
     "14 CFR 121.195(d): 115 % of the dry requirement (paragraph letter from memory)"),
    ("time-of-arrival margin x1.15", 1.15,
     "FAA SAFO 06012 (2006): at least 15 % over the actual landing distance"),
)

@dataclass(frozen=True)
class AssessSettings:
    """How the Monte Carlo assessment is run."""

    samples: int = 100_000
    seed: int = 1
    sampler: str = "random"
    chunk: int = 1 << 16
    confidence: float = 0.95
    keep_samples: bool = False


@dataclass(frozen=True)
class ComparisonLine:
    """A reference distance and the probability that the Monte Carlo distance exceeds it."""

    name: str
    factor: float
    source: str
    distance_m: float
    p_exceed: EventProbability


@dataclass(frozen=True)
class Assessment:
    """The result of :func:`assess`. Distances in metres, speeds in m/s."""

    scenario: Scenario
    problem: Problem
    settings: AssessSettings
    outputs: dict[str, NDArray] = field(repr=False)
    inputs: NDArray[np.float64] | None = field(repr=False)
    percentiles: dict[str, list[Percentile]]
    moments: dict[str, tuple[float, float, float, float]]  # mean, sd, mean CI low, mean CI high
    p_overrun: EventProbability
    p_beyond_resa: EventProbability
    resa_length_m: float
    overrun_speed: list[Percentile]  # percentiles of the ground speed at the runway end, of the overruns
    overrun_speed_min: float | None
    overrun_speed_max: float | None
    comparisons: list[ComparisonLine]
    nominal_total_m: float
    flags: dict[str, int]
    convergence: dict[str, NDArray[np.float64]]
    record: Mapping[str, Any] = field(default_factory=dict)  # how the inputs were specified

    @property
    def n(self) -> int:
        """Number of samples."""
        return self.settings.samples

    @property
    def lda_m(self) -> float:
        """Landing distance available at nominal inputs [m]."""
        return float(self.scenario.values["runway.lda"])

    def sorted_total(self) -> NDArray[np.float64]:
        """The total distances in ascending order."""
        return np.sort(self.outputs["total_m"])


def assess(
    scenario: Scenario,
    problem: Problem,
    settings: AssessSettings | None = None,
    progress: Callable[[int, int], None] | None = None,
    record: Mapping[str, Any] | None = None,
) -> Assessment:
    """Monte Carlo assessment of the overrun risk of ``scenario`` over the uncertain inputs ``problem``.

    Parameters
    ----------
    scenario : Scenario
        The nominal scenario (the keys of ``problem`` are replaced by samples).
    problem : Problem
        The uncertain inputs, named by dotted scenario keys.
    settings : AssessSettings
        Sample count, seed, sampler, chunk size, confidence level.
    progress : callable, optional
        progress(done, total) after each chunk.
    record : mapping, optional
        How the uncertain inputs were specified (kept with the result for output files).
    """
    s = settings or AssessSettings()
    if problem.dimension == 0:
        raise LandriskError(f"{scenario.source}: the scenario has no uncertain inputs; add "
                            '[uncertain."<key>"] tables (see the README)')
    if s.samples < 1:
        raise LandriskError(f"--samples must be at least 1 (got {s.samples})")
    nominal = solve_one(scenario.case())
    run = run_monte_carlo(problem, landing_model(scenario, problem.names), s.samples, sampler=s.sampler,
                          seed=s.seed, chunk=s.chunk, keep_inputs=s.keep_samples, progress=progress)
    out = run.outputs
    conf = s.confidence
    pct = {}
    moments = {}
    sorted_total = np.sort(out["total_m"])
    for name in PHASES:
        xs = sorted_total if name == "total_m" else np.sort(out[name])
        pct[name] = percentiles(xs, PERCENTILES, conf, presorted=True)
        moments[name] = mean_interval(xs, conf)
    n = s.samples
    overrun = out["margin_m"] < 0
    resa = float(scenario.values["runway.resa_length"])
    beyond = out["margin_m"] < -resa
    speeds = np.sort(out["runway_end_ground_speed"][overrun & ~out["cannot_stop"]])
    comparisons = []
    for name, factor, source in COMPARISON_FACTORS:
        line = float(nominal.total_m[0]) * factor
        k = int(n - np.searchsorted(sorted_total, line, side="right"))
        comparisons.append(ComparisonLine(name, factor, source, line, event_probability(k, n, conf)))
    return Assessment(
        scenario=scenario,
        problem=problem,
        settings=s,
        outputs=out,
        inputs=run.inputs,
        percentiles=pct,
        moments=moments,
        p_overrun=event_probability(int(overrun.sum()), n, conf),
        p_beyond_resa=event_probability(int(beyond.sum()), n, conf),
        resa_length_m=resa,
        overrun_speed=percentiles(speeds, (50.0, 90.0, 99.0), conf, presorted=True) if speeds.size else [],
        overrun_speed_min=float(speeds[0]) if speeds.size else None,
        overrun_speed_max=float(speeds[-1]) if speeds.size else None,
        comparisons=comparisons,
        nominal_total_m=float(nominal.total_m[0]),
        flags={"lift_exceeds_weight": int(out["lift_exceeds_weight"].sum()),
               "cannot_stop": int(out["cannot_stop"].sum())},
        convergence=convergence(out["total_m"], overrun, 0.99),
        record=dict(record or {}),
    )

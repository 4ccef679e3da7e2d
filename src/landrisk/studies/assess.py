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

from landrisk.errors import LandriskError, SolveError
from landrisk.model import KEYS, Scenario, solve_landings, solve_one
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
    "landing_model",
    "samples_frame_columns",
    "summary_record",
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

_OUTPUTS = ("total_m", "air_distance_m", "free_roll_m", "braking_m", "margin_m",
            "runway_end_ground_speed", "overrun", "lift_exceeds_weight", "cannot_stop")


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


def landing_model(
    scenario: Scenario, keys: tuple[str, ...]
) -> Callable[[NDArray[np.float64]], dict[str, NDArray]]:
    """The vectorised model f(X[n, d]) of the scenario, X's columns being the dotted ``keys``.

    Columns of whole-valued keys are rounded (condition code) or compared with 1/2 (true/false keys).
    """
    specs = [KEYS[k] for k in keys]

    def f(x: NDArray[np.float64]) -> dict[str, NDArray]:
        values = {spec.name: spec.cast_array(x[:, j]) for j, spec in enumerate(specs)}
        try:
            r = solve_landings(scenario.case(values))
        except ValueError as exc:
            raise SolveError(f"{scenario.source}: samples the model cannot evaluate ({exc}); "
                             "truncate the distributions involved (for a headwind: its upper bound "
                             "below the touchdown speed)") from None
        return {name: getattr(r, name) for name in _OUTPUTS}

    return f


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


def summary_record(a: Assessment) -> dict[str, Any]:
    """The JSON-ready figures of an assessment (no provenance; the caller adds it)."""

    def pct(items: list[Percentile]) -> dict[str, Any]:
        return {f"{p.p:g}": p.as_dict() for p in items}

    tot = a.percentiles["total_m"]
    return {
        "samples": a.n,
        "seed": a.settings.seed,
        "sampler": a.settings.sampler,
        "confidence": a.settings.confidence,
        "lda_m": a.lda_m,
        "mean_m": a.moments["total_m"][0],
        "sd_m": a.moments["total_m"][1],
        "mean_ci95_m": [a.moments["total_m"][2], a.moments["total_m"][3]],
        "percentiles_m": {f"{p.p:g}": p.value for p in tot if p.supported},
        "percentiles_ci95_m": {f"{p.p:g}": [p.lo, p.hi] for p in tot if p.supported},
        "unsupported_percentiles": [f"{p.p:g}" for p in tot if not p.supported],
        "p_overrun": a.p_overrun.estimate,
        "p_overrun_ci95": [a.p_overrun.lo, a.p_overrun.hi],
        "p_overrun_upper_bound_only": a.p_overrun.upper_bound_only,
        "overruns": a.p_overrun.events,
        "resa_length_m": a.resa_length_m,
        "p_beyond_resa": a.p_beyond_resa.as_dict(),
        "overrun_ground_speed_ms": pct(a.overrun_speed),
        "overrun_ground_speed_min_ms": a.overrun_speed_min,
        "overrun_ground_speed_max_ms": a.overrun_speed_max,
        "phases": {name: {"mean_m": a.moments[name][0], "sd_m": a.moments[name][1],
                          "percentiles": pct(a.percentiles[name])} for name in PHASES},
        "comparison_lines": [{"name": c.name, "factor": c.factor, "source": c.source,
                              "distance_m": c.distance_m, "p_exceed": c.p_exceed.as_dict()}
                             for c in a.comparisons],
        "nominal_total_m": a.nominal_total_m,
        "flags": a.flags,
    }


def samples_frame_columns(a: Assessment) -> Mapping[str, NDArray]:
    """Columns of the per-sample table: every uncertain input, then the phases and the outcome."""
    cols: dict[str, NDArray] = {}
    if a.inputs is not None:
        for j, k in enumerate(a.problem.names):
            cols[k] = a.inputs[:, j]
    for k in ("air_distance_m", "free_roll_m", "braking_m", "total_m", "margin_m",
              "runway_end_ground_speed", "overrun"):
        cols[k] = a.outputs[k]
    cols["lda_m"] = a.outputs["total_m"] + a.outputs["margin_m"]
    return cols

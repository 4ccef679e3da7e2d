"""The overrun-risk assessment: Monte Carlo over the uncertain inputs of a scenario.

Joins the model (the vectorised solver, bound to the scenario's keys) and the generic uncertainty layer
(sampling, Monte Carlo, interval statistics). It reports percentiles of the landing distance and of each
phase with order-statistic intervals, the probability of an overrun and of stopping beyond the runway-end
safety area with binomial intervals, the ground speed of the overruns at the runway end, and comparison
lines: the deterministic distance at nominal inputs and that distance with regulatory factors.

A landing that cannot stop (thrust and slope outweigh the braking) has an infinite distance: it counts
as an overrun, is left out of the means and standard deviations (which are those of the landings that
stop, with the count left out given), and a percentile above the share of such landings is infinite
("beyond any runway"), never a number.

The deterministic comparison line is solved with the same touchdown model as the samples: an uncertain
input with no nominal value in the scenario (typically ``procedure.touchdown_distance``, sampled while
the nominal landing uses the flare model) is taken at the median of its distribution. The regulatory
factors apply to a dry-runway distance: when the scenario's friction is not dry (a runway condition code
below 6, or a braking coefficient below :data:`DRY_BRAKING_MU`), the factored lines are computed from the
same landing on a dry runway (condition code 6 of the documented table) and say so.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import LandriskError, SolveError
from landrisk.model import KEYS, Scenario, solve_landings
from landrisk.physics import CONDITION_CODE_TABLE
from landrisk.studies import shown
from landrisk.studies.binding import landing_model
from landrisk.uq import (
    EventProbability,
    Moments,
    Percentile,
    Problem,
    RunningMoments,
    convergence,
    event_probability,
    exceedance_curve,
    mean_interval,
    percentiles,
    run_monte_carlo,
    wilson_interval,
    zero_event_bound,
)

__all__ = [
    "COMPARISON_FACTORS",
    "DRY_BRAKING_MU",
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
#: Comparison lines whose factor applies to a dry-runway distance.
_DRY_BASED = ("dry-runway factor 1/0.6", "wet-runway factor 1.15/0.6")
#: A braking coefficient below this is not a dry runway's: Raymer 2018, Table 17.1 gives brakes-on
#: 0.3-0.5 dry and 0.15-0.3 wet.
DRY_BRAKING_MU = 0.3
#: A streamed assessment (see :class:`AssessSettings`) counts the distances in bins of this width [m]
#: from 0 to STREAM_RANGE_M: its percentiles are within one bin of the sample's.
STREAM_BIN_M = 1.0
STREAM_RANGE_M = 100_000.0


@dataclass(frozen=True)
class AssessSettings:
    """How the Monte Carlo assessment is run.

    Up to ``stream_above`` samples (or with ``keep_samples``) every output is kept, and percentiles are
    exact order statistics. Beyond it the assessment is *streamed*: each chunk's outputs are counted and
    dropped, so that memory does not grow with the sample count; probabilities, counts, means and
    standard deviations are the same numbers (to rounding), percentiles come from the counts in bins of
    STREAM_BIN_M (within one bin of the sample's, which the results say).
    """

    samples: int = 100_000
    seed: int = 1
    sampler: str = "random"
    chunk: int = 1 << 16
    confidence: float = 0.95
    keep_samples: bool = False
    stream_above: int = 1 << 22

    @property
    def streamed(self) -> bool:
        """Whether the outputs are counted chunk by chunk instead of kept."""
        return self.samples > self.stream_above and not self.keep_samples


@dataclass(frozen=True)
class ComparisonLine:
    """A reference distance and the probability that the Monte Carlo distance exceeds it."""

    name: str
    factor: float
    source: str
    distance_m: float
    p_exceed: EventProbability
    basis: str = "the deterministic distance"  #: the distance the factor multiplies
    lda_m: float = float("nan")  #: the landing distance available it is compared with

    @property
    def meets(self) -> bool:
        """Whether the landing distance available is at least this line's distance."""
        return bool(self.lda_m >= self.distance_m)


@dataclass(frozen=True)
class Assessment:
    """The result of :func:`assess`. Distances in metres, speeds in m/s."""

    scenario: Scenario
    problem: Problem
    settings: AssessSettings
    outputs: dict[str, NDArray] = field(repr=False)
    inputs: NDArray[np.float64] | None = field(repr=False)
    percentiles: dict[str, list[Percentile]]
    moments: dict[str, Moments]  # mean, sd, mean CI low, mean CI high (None: cannot be estimated)
    p_overrun: EventProbability
    p_beyond_resa: EventProbability
    resa_length_m: float
    overrun_speed: list[Percentile]  # percentiles of the ground speed at the runway end, of the overruns
    overrun_speed_min: float | None
    overrun_speed_max: float | None
    comparisons: list[ComparisonLine]
    nominal_total_m: float  # inf when the nominal landing cannot stop
    flags: dict[str, int]
    convergence: dict[str, NDArray[np.float64]]
    record: Mapping[str, Any] = field(default_factory=dict)  # how the inputs were specified
    nominal_note: str = ""  # how the deterministic line's inputs differ from the scenario's nominal ones
    dry_basis_note: str = ""  # how the dry-runway distance of the factored lines was obtained
    dry_total_m: float = float("nan")  # the dry-runway distance the regulatory factors multiply
    #: A streamed assessment's counts of each phase's distance (uq.chunked.Histogram; empty if not
    #: streamed), and the bound on its percentiles' error [m] (0: exact order statistics).
    histograms: dict[str, Any] = field(default_factory=dict, repr=False)
    percentile_error_m: float = 0.0

    @property
    def streamed(self) -> bool:
        """Whether the outputs were counted in bins instead of kept (see :class:`AssessSettings`)."""
        return bool(self.histograms)

    @property
    def cannot_stop(self) -> int:
        """Number of sampled landings that cannot stop (infinite distance, counted as overruns)."""
        return int(self.flags.get("cannot_stop", 0))

    @property
    def n(self) -> int:
        """Number of samples."""
        return self.settings.samples

    @property
    def lda_m(self) -> float:
        """Landing distance available at nominal inputs [m]."""
        return float(self.scenario.values["runway.lda"])

    def sorted_total(self) -> NDArray[np.float64]:
        """The total distances in ascending order (not kept by a streamed assessment)."""
        if self.streamed:
            raise LandriskError(f"the assessment of {self.n:,} samples was streamed and kept no sample; "
                                "read its histograms, or raise AssessSettings.stream_above")
        return np.sort(self.outputs["total_m"])

    def exceedance(self, grid: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64],
                                                              NDArray[np.float64], NDArray[np.float64]]:
        """P(total distance > x) with its interval (Wilson; Clopper-Pearson with no exceedance) at the
        distances x of ``grid`` [m]: (x, p, lo, hi). A streamed assessment gives them at the bin edges
        nearest above the grid's distances (x then holds those)."""
        conf = self.settings.confidence
        if not self.streamed:
            p, lo, hi = exceedance_curve(self.sorted_total(), grid, conf)
            return np.asarray(grid, dtype=float), p, lo, hi
        x, k = self.histograms["total_m"].exceedance(grid)
        lo, hi = wilson_interval(k, self.n, conf)
        return x, k / self.n, lo, np.where(k == 0, zero_event_bound(self.n, conf), hi)

    def finite_total_range(self) -> tuple[float, float] | None:
        """The least and largest finite total distance [m] (bin edges if streamed); None if none stops."""
        if not self.streamed:
            xs = self.outputs["total_m"]
            finite = xs[np.isfinite(xs)]
            return (float(finite.min()), float(finite.max())) if finite.size else None
        h = self.histograms["total_m"]
        full = np.flatnonzero(h.counts)
        return (float(full[0] * h.width), float((full[-1] + 1) * h.width)) if full.size else None

    def total_density(self, bins: int = 120) -> tuple[NDArray[np.float64], NDArray[np.float64], int]:
        """A histogram of the finite total distances: bin edges [m], density [1/m] and the count."""
        if not self.streamed:
            xs = self.outputs["total_m"]
            stops = xs[np.isfinite(xs)]
            if not stops.size:
                return np.zeros(0), np.zeros(0), 0
            dens, edges = np.histogram(stops, bins=bins, density=True)
            return edges, dens, int(stops.size)
        h = self.histograms["total_m"]
        full = np.flatnonzero(h.counts)
        if not full.size:
            return np.zeros(0), np.zeros(0), 0
        per = max(1, int(np.ceil((full[-1] + 1 - full[0]) / bins)))  # whole bins of the counts per bar
        counts = h.counts[full[0]:full[-1] + 1]
        counts = np.pad(counts, (0, -counts.size % per)).reshape(-1, per).sum(axis=1)
        edges = (full[0] + per * np.arange(counts.size + 1)) * h.width
        used = int(counts.sum())
        return edges, counts / (used * per * h.width), used

    def __repr__(self) -> str:
        return shown.repr_of("Assessment", shown.assessment_lines(self))

    def _repr_html_(self) -> str:
        return shown.html_of("Assessment", shown.assessment_lines(self))


def assess(
    scenario: Scenario,
    problem: Problem,
    settings: AssessSettings | None = None,
    progress: Callable[[int, int], None] | None = None,
    record: Mapping[str, Any] | None = None,
    sink: Callable[[NDArray[np.float64], Mapping[str, NDArray]], None] | None = None,
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
    sink : callable, optional
        sink(x, outputs) with each chunk's inputs x[m, d] and outputs as they are made (to write the
        samples without keeping them).
    """
    s = settings or AssessSettings()
    if problem.dimension == 0:
        raise LandriskError(f"{scenario.source}: the scenario has no uncertain inputs; add "
                            '[uncertain."<key>"] tables (see the README)')
    if s.samples < 1:
        raise LandriskError(f"--samples must be at least 1 (got {s.samples})")
    nominal, nominal_note = _nominal_values(scenario, problem)
    nominal_total = _deterministic(scenario, nominal)
    dry_total, dry_note = _dry_distance(scenario, nominal, nominal_total)
    model = landing_model(scenario, problem.names)
    if s.streamed:
        return _assess_streamed(scenario, problem, s, model, progress, record, sink,
                                (nominal, nominal_note, nominal_total, dry_total, dry_note))
    if sink is not None:
        def model_and_sink(x: NDArray[np.float64]) -> Mapping[str, NDArray]:
            y = model(x)
            sink(x, y)
            return y
    run = run_monte_carlo(problem, model if sink is None else model_and_sink, s.samples,
                          sampler=s.sampler, seed=s.seed, chunk=s.chunk, keep_inputs=s.keep_samples,
                          progress=progress)
    out = run.outputs
    conf = s.confidence
    n = s.samples
    # A landing that cannot stop is an overrun whatever its (infinite) margin.
    overrun = (out["margin_m"] < 0) | out["cannot_stop"]
    resa = float(scenario.values["runway.resa_length"])
    beyond = (out["margin_m"] < -resa) | out["cannot_stop"]
    speeds = np.sort(out["runway_end_ground_speed"][overrun & ~out["cannot_stop"]])
    lda = float(scenario.values["runway.lda"])
    # One sorted copy of n distances at a time: the total's serves its percentiles, the comparison lines
    # and the running P99, then each phase's in turn.
    sorted_total = np.sort(out["total_m"])
    pct = {"total_m": percentiles(sorted_total, PERCENTILES, conf, presorted=True)}
    moments = {"total_m": mean_interval(sorted_total, conf)}
    lines = _comparison_lines(nominal_total, dry_total, dry_note)
    comparisons = _comparisons(lines, [int(n - np.searchsorted(sorted_total, line[3], side="right"))
                                       for line in lines], n, conf, lda)
    running = convergence(out["total_m"], overrun, 0.99, conf=conf, sorted_x=sorted_total)
    del sorted_total
    for name in PHASES:
        if name != "total_m":
            xs = np.sort(out[name])
            pct[name] = percentiles(xs, PERCENTILES, conf, presorted=True)
            moments[name] = mean_interval(xs, conf)
            del xs
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
        **_speed_fields(speeds, conf),
        comparisons=comparisons,
        nominal_total_m=nominal_total,
        flags={"lift_exceeds_weight": int(out["lift_exceeds_weight"].sum()),
               "cannot_stop": int(out["cannot_stop"].sum())},
        convergence=running,
        record=dict(record or {}),
        nominal_note=nominal_note,
        dry_basis_note=dry_note,
        dry_total_m=dry_total,
    )


def _comparison_lines(nominal_total: float, dry_total: float,
                      dry_note: str) -> list[tuple[str, float, str, float, str]]:
    """(name, factor, source, distance [m], basis) of each comparison line that has a finite distance."""
    lines = []
    if np.isfinite(nominal_total):
        for name, factor, source in COMPARISON_FACTORS:
            dry = name in _DRY_BASED
            base = dry_total if dry else nominal_total
            if np.isfinite(base):
                basis = "the dry-runway distance" if dry and dry_note else "the deterministic distance"
                lines.append((name, factor, source, base * factor, basis))
    return lines


def _comparisons(lines: list[tuple[str, float, str, float, str]], exceed: list[int], n: int, conf: float,
                 lda: float) -> list[ComparisonLine]:
    """The comparison lines of :func:`_comparison_lines`, each with the probability that the Monte Carlo
    distance exceeds it (``exceed`` of the ``n`` samples did)."""
    return [ComparisonLine(name, factor, source, line, event_probability(k, n, conf), basis=basis, lda_m=lda)
            for (name, factor, source, line, basis), k in zip(lines, exceed, strict=True)]


def _speed_fields(speeds: NDArray[np.float64], conf: float) -> dict[str, Any]:
    """The overruns' ground speeds at the runway end (ascending) as the result's three fields."""
    return {"overrun_speed": percentiles(speeds, (50.0, 90.0, 99.0), conf, presorted=True) if speeds.size
            else [],
            "overrun_speed_min": float(speeds[0]) if speeds.size else None,
            "overrun_speed_max": float(speeds[-1]) if speeds.size else None}


class _Counts:
    """What a streamed assessment keeps of each chunk: counts, histograms, sums and the overruns' speeds."""

    def __init__(self, resa: float, lines: list[float], n: int, chunk: int, conf: float) -> None:
        from landrisk.uq.chunked import Histogram  # only a streamed run needs it

        bins = round(STREAM_RANGE_M / STREAM_BIN_M)
        empty = Histogram(STREAM_BIN_M, np.zeros(bins, dtype=np.int64))
        self.of = lambda x: Histogram.of(x, STREAM_BIN_M, bins)
        self.hist = {name: empty for name in PHASES}
        self.moments = {name: RunningMoments() for name in PHASES}
        self.resa, self.lines, self.conf = resa, lines, conf
        self.done = self.overruns = self.beyond = self.lifted = self.cannot = 0
        self.exceed = [0] * len(lines)
        self.speeds: list[NDArray[np.float64]] = []
        # Running P(overrun) and P99: the first chunk's prefixes exactly, then at log-spaced chunk ends.
        self.targets = list(np.geomspace(chunk, n, 20)[1:]) if n > chunk else []
        self.running: dict[str, list[float]] = {k: [] for k in ("n", "p_event", "quantile", "quantile_lo",
                                                                 "quantile_hi")}

    def add(self, y: Mapping[str, NDArray]) -> None:
        total, margin, cannot = y["total_m"], y["margin_m"], y["cannot_stop"]
        overrun = (margin < 0) | cannot
        first = self.done == 0
        self.done += int(total.size)
        self.overruns += int(np.count_nonzero(overrun))
        self.beyond += int(np.count_nonzero((margin < -self.resa) | cannot))
        self.lifted += int(np.count_nonzero(y["lift_exceeds_weight"]))
        self.cannot += int(np.count_nonzero(cannot))
        for j, line in enumerate(self.lines):
            self.exceed[j] += int(np.count_nonzero(total > line))
        for name in PHASES:
            self.hist[name] = self.hist[name].merge(self.of(y[name]))
            self.moments[name].add(y[name])
        self.speeds.append(np.asarray(y["runway_end_ground_speed"][overrun & ~cannot], dtype=float))
        if first:
            for k, v in convergence(np.asarray(total, dtype=float), overrun, 0.99, conf=self.conf).items():
                self.running[k].extend(float(x) for x in v)
        elif self.targets and self.done >= self.targets[0]:
            while self.targets and self.done >= self.targets[0]:
                self.targets.pop(0)
            p99 = self.hist["total_m"].percentiles([99.0], self.conf)[0]
            point: dict[str, float | None] = {
                "n": self.done, "p_event": self.overruns / self.done,
                "quantile": np.inf if p99.infinite else p99.value, "quantile_lo": p99.lo,
                "quantile_hi": np.inf if p99.hi_infinite else p99.hi}
            for key, value in point.items():
                self.running[key].append(np.nan if value is None else float(value))


def _assess_streamed(
    scenario: Scenario, problem: Problem, s: AssessSettings, model: Callable[[NDArray[np.float64]], Any],
    progress: Callable[[int, int], None] | None, record: Mapping[str, Any] | None,
    sink: Callable[[NDArray[np.float64], Mapping[str, NDArray]], None] | None,
    nominal: tuple[dict[str, float], str, float, float, str],
) -> Assessment:
    """:func:`assess` with every chunk's outputs counted and dropped (:class:`AssessSettings`)."""
    _, nominal_note, nominal_total, dry_total, dry_note = nominal
    conf, n = s.confidence, s.samples
    resa = float(scenario.values["runway.resa_length"])
    lda = float(scenario.values["runway.lda"])
    lines = _comparison_lines(nominal_total, dry_total, dry_note)
    counts = _Counts(resa, [line[3] for line in lines], n, s.chunk, conf)

    def model_and_count(x: NDArray[np.float64]) -> Mapping[str, NDArray]:
        y = model(x)
        if sink is not None:
            sink(x, y)
        counts.add(y)
        return y

    run_monte_carlo(problem, model_and_count, n, sampler=s.sampler, seed=s.seed, chunk=s.chunk, keep=(),
                    progress=progress)
    speeds = np.sort(np.concatenate(counts.speeds)) if counts.speeds else np.zeros(0)
    return Assessment(
        scenario=scenario,
        problem=problem,
        settings=s,
        outputs={},
        inputs=None,
        percentiles={name: counts.hist[name].percentiles(PERCENTILES, conf) for name in PHASES},
        moments={name: counts.moments[name].moments(conf) for name in PHASES},
        p_overrun=event_probability(counts.overruns, n, conf),
        p_beyond_resa=event_probability(counts.beyond, n, conf),
        resa_length_m=resa,
        **_speed_fields(speeds, conf),
        comparisons=_comparisons(lines, counts.exceed, n, conf, lda),
        nominal_total_m=nominal_total,
        flags={"lift_exceeds_weight": counts.lifted, "cannot_stop": counts.cannot},
        convergence={k: np.asarray(v, dtype=float) for k, v in counts.running.items()},
        record=dict(record or {}),
        nominal_note=nominal_note,
        dry_basis_note=dry_note,
        dry_total_m=dry_total,
        histograms=dict(counts.hist),
        percentile_error_m=STREAM_BIN_M,
    )


def _nominal_values(scenario: Scenario, problem: Problem) -> tuple[dict[str, float], str]:
    """Values for the deterministic line: an uncertain input with no nominal value at its median."""
    values: dict[str, float] = {}
    notes = []
    for name, m in zip(problem.names, problem.marginals, strict=True):
        if scenario.values.get(name) is None and not m.discrete:
            values[name] = float(np.asarray(m.ppf(np.array([0.5])))[0])
            unit = KEYS[name].unit if name in KEYS else ""
            notes.append(f"{name} at the median of its distribution, {values[name]:.4g} {unit}".rstrip())
    return values, "; ".join(notes)


def _deterministic(scenario: Scenario, values: Mapping[str, float]) -> float:
    """The total distance of the nominal landing (inf if it cannot stop); refuses lift above weight."""
    res = solve_landings(scenario.case(values))
    if res.lift_exceeds_weight[0]:
        raise SolveError(f"{scenario.source}: lift exceeds weight at touchdown at the nominal inputs "
                         "(lower aircraft.cl_ground or procedure.touchdown_speed_ratio)")
    return float(np.inf) if res.cannot_stop[0] else float(res.total_m[0])


def _dry_distance(scenario: Scenario, values: Mapping[str, float], total: float) -> tuple[float, str]:
    """The dry-runway distance the regulatory factors multiply, and a note if it is not ``total``."""
    code = scenario.values.get("runway.condition_code")
    mu = scenario.values.get("runway.braking_mu")
    if code is not None and int(code) < 6:
        why = f"runway.condition_code {int(code)} is below 6 (dry)"
    elif code is None and mu is not None and float(mu) < DRY_BRAKING_MU:
        why = f"runway.braking_mu {float(mu):g} is below the dry threshold {DRY_BRAKING_MU:g}"
    else:
        return total, ""
    dry = _deterministic(scenario, {**values, "runway.condition_code": 6})
    return dry, (f"{why}: the regulatory factors multiply the same landing on a dry runway (condition "
                 f"code 6, braking mu {CONDITION_CODE_TABLE[6][2]:.2f} from the documented table), "
                 f"{dry:.0f} m")

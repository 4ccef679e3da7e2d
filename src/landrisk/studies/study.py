"""A study: many cases of one scenario, comparisons with common random numbers, and the yearly risk.

Each case is assessed by Monte Carlo (:func:`landrisk.studies.assess`, the same seed for every case, so
that all cases see the same uniform samples). With ``method = "auto"`` a case whose Monte Carlo run sees
fewer than ``min_events`` overruns (default 50: a coefficient of variation of about 1/sqrt(50) = 0.14) is
then assessed by subset simulation (:func:`landrisk.studies.rare_assess`); its percentiles stay those of
the Monte Carlo run. The method used is recorded with each case.

A case of more than ``split`` samples is cut into chunks seeded by ``SeedSequence(seed).spawn``; the
chunks return counts and a histogram of the landing distance in 1 m bins, which add exactly, so the
result does not depend on the number of workers; its percentiles are then within one bin width (1 m)
of the sample percentiles (stated with the case). A case of at most ``split`` samples is exactly the
result of :func:`assess` with the same seed.

A comparison evaluates baseline and alternative on the same uniform samples (common random numbers):
the paired difference and ratio of P(overrun) come with intervals from the paired indicators
(:func:`landrisk.uq.chunked.paired_comparison`).

Yearly risk: with N landings a year and a per-landing probability p, the yearly number of overruns is
taken as Poisson with mean lambda = N p, so P(at least one a year) = 1 - exp(-lambda) and the mean time
between overruns is 1 / lambda years (common practice, no source). Intervals are those of p carried
through these monotone functions.
"""

from __future__ import annotations

import concurrent.futures as cf
import hashlib
import json
import math
import os
import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, Protocol

import numpy as np
from scipy import stats

from landrisk import __version__
from landrisk.errors import LandriskError
from landrisk.model import Scenario
from landrisk.studies.assess import PERCENTILES, AssessSettings, assess
from landrisk.studies.binding import landing_model
from landrisk.studies.rare import RareSettings, rare_assess
from landrisk.uq import EventProbability, Percentile, Problem, event_probability, uniform_chunks
from landrisk.uq.chunked import (
    Histogram,
    PairedComparison,
    PairedCounts,
    chunk_seeds,
    chunk_sizes,
    paired_comparison,
)

__all__ = ["CaseResult", "ComparisonResult", "Exposure", "ExposureResult", "StudyCase", "StudyResult",
           "StudySettings", "YearlyRisk", "case_key", "exposure_risk", "run_study", "yearly_risk"]

STUDY_METHODS = ("auto", "mc", "subset")


class Cache(Protocol):
    """Where finished results are kept between runs (see :class:`landrisk.io.study.CaseCache`)."""

    def get(self, key: str) -> Any | None: ...

    def put(self, key: str, value: Any) -> None: ...


@dataclass(frozen=True)
class StudyCase:
    """One case: its name, its overrides as written, the resolved scenario and uncertain inputs."""

    name: str
    overrides: Mapping[str, Any]
    scenario: Scenario
    problem: Problem
    record: Mapping[str, Any] = field(default_factory=dict)  # how the uncertain inputs were specified


@dataclass(frozen=True)
class StudySettings:
    """How every case of a study is run."""

    samples: int = 20_000
    seed: int = 1
    method: str = "auto"
    min_events: int = 50
    split: int = 1 << 20  # cases of more samples are cut into seeded chunks of this size
    subset_samples: int = 1000
    subset_replicates: int = 4
    confidence: float = 0.95
    bin_width_m: float = 1.0
    bins: int = 40_000  # histogram of chunked cases: 0 .. 40 km
    chunk: int = 1 << 16  # samples per solver call


@dataclass(frozen=True)
class CaseResult:
    """The assessment of one case (probabilities per landing, distances in metres)."""

    name: str
    overrides: dict[str, Any]
    method: str  # "mc" or "subset"
    p_overrun: float
    ci: tuple[float, float]
    cov: float | None  # None: no overrun seen (the interval is then an upper bound)
    upper_bound_only: bool
    mc: EventProbability  # the Monte Carlo count of overruns
    p_beyond_resa: EventProbability
    rare_calls: int
    percentiles: tuple[Percentile, ...]
    percentile_error_m: float  # 0: exact sample percentiles; else the histogram's bound
    lda_m: float
    chunks: int
    key: str
    messages: tuple[str, ...] = ()
    cached: bool = False

    @property
    def sd(self) -> float:
        """Standard error of p_overrun from its interval's half-width."""
        z = stats.norm.ppf(0.5 + self.mc.conf / 2)
        return (self.ci[1] - self.ci[0]) / (2 * z)


@dataclass(frozen=True)
class ComparisonResult:
    """Alternative against baseline on common random numbers."""

    baseline: str
    alternative: str
    paired: PairedComparison
    shared_inputs: bool  # both cases have the same uncertain inputs (in the same order)
    key: str
    cached: bool = False


@dataclass(frozen=True)
class Exposure:
    """Landings per year, the share of each case (None: each case alone) and a target level of safety."""

    landings_per_year: float
    mix: Mapping[str, float] | None = None
    target_per_year: float | None = None
    target_per_landing: float | None = None


@dataclass(frozen=True)
class YearlyRisk:
    """Expected overruns per year, P(at least one a year), mean years between overruns, with intervals
    (None for an infinite bound)."""

    overruns_per_year: float
    overruns_per_year_ci: tuple[float, float]
    p_at_least_one: float
    p_at_least_one_ci: tuple[float, float]
    mean_years_between: float | None
    mean_years_between_ci: tuple[float | None, float | None]


@dataclass(frozen=True)
class ExposureResult:
    exposure: Exposure
    basis: str  # "mix" or "worst case: <name>"
    p_per_landing: float
    p_per_landing_ci: tuple[float, float]
    yearly: YearlyRisk
    per_case: dict[str, YearlyRisk]
    target_per_year: float | None
    target_status: str | None  # "met", "not met", "undecided: the interval contains the target"
    notes: tuple[str, ...]


@dataclass(frozen=True)
class StudyResult:
    name: str
    settings: StudySettings
    cases: tuple[CaseResult, ...]
    comparisons: tuple[ComparisonResult, ...]
    exposure: ExposureResult | None
    engine: str
    workers: int
    computed: int  # cases and comparisons computed in this run
    reused: int  # taken from the cache
    seconds: float
    source: str = ""  # the study file
    text: str = ""  # the study file as read
    base: Scenario | None = None  # the base scenario, without the cases' overrides
    base_uncertain: Mapping[str, Any] = field(default_factory=dict)  # how its uncertain inputs were given


# ---------------------------------------------------------------------------------------- units of work


@dataclass(frozen=True)
class _MCSummary:
    overruns: int
    beyond_resa: int
    n: int
    percentiles: tuple[Percentile, ...]
    exact: bool
    chunks: int


@dataclass(frozen=True)
class _Chunk:
    overruns: int
    beyond_resa: int
    hist: Histogram


def _mc_case(scenario: Scenario, problem: Problem, s: StudySettings) -> _MCSummary:
    """A whole case by :func:`assess` (identical to a single assessment with the same seed, its outputs
    kept whatever their number: ``split`` bounds the memory)."""
    a = assess(scenario, problem, AssessSettings(samples=s.samples, seed=s.seed, chunk=s.chunk,
                                                 confidence=s.confidence, stream_above=s.samples))
    return _MCSummary(a.p_overrun.events, a.p_beyond_resa.events, s.samples,
                      tuple(a.percentiles["total_m"]), True, 1)


def _mc_chunk(scenario: Scenario, problem: Problem, n: int, seed: np.random.SeedSequence,
              s: StudySettings) -> _Chunk:
    """One seeded chunk of a large case: counts and a histogram, memory bounded by ``s.chunk``."""
    model = landing_model(scenario, problem.names)
    resa = float(scenario.values["runway.resa_length"])
    over = beyond = 0
    hist = Histogram(s.bin_width_m, np.zeros(s.bins, dtype=np.int64))
    for u in uniform_chunks(n, problem.dimension, seed=np.random.default_rng(seed), chunk=s.chunk):
        y = model(problem.transform(u))
        over += int(np.count_nonzero(y["margin_m"] < 0))
        beyond += int(np.count_nonzero(y["margin_m"] < -resa))
        hist = hist.merge(Histogram.of(y["total_m"], s.bin_width_m, s.bins))
    return _Chunk(over, beyond, hist)


def _rare_case(scenario: Scenario, problem: Problem, s: StudySettings
               ) -> tuple[float, float, tuple[float, float], int, tuple[str, ...]]:
    """P(overrun) by subset simulation. Switch to method "auto" when studies.rare offers it."""
    r = rare_assess(scenario, problem, RareSettings(method="subset", seed=s.seed,
                                                    subset_samples=s.subset_samples,
                                                    subset_replicates=s.subset_replicates,
                                                    cross_check=False, risk_curve=False,
                                                    confidence=s.confidence))
    msgs = tuple(r.messages) + (() if r.converged else ("subset simulation did not converge",))
    return r.probability, r.cov, r.ci, r.calls, msgs


def _paired_chunk(base: tuple[Scenario, Problem], alt: tuple[Scenario, Problem], cols: tuple[list[int],
                  list[int]], n: int, seed: int | np.random.SeedSequence, chunk: int) -> PairedCounts:
    """Both cases on the same uniforms u: baseline columns cols[0], alternative columns cols[1]."""
    fb = landing_model(base[0], base[1].names)
    fa = landing_model(alt[0], alt[1].names)
    d = max(max(cols[0], default=-1), max(cols[1], default=-1)) + 1
    rng = np.random.default_rng(seed)
    total = PairedCounts(0, 0, 0, 0)
    for u in uniform_chunks(n, d, seed=rng, chunk=chunk):
        ib = fb(base[1].transform(u[:, cols[0]]))["margin_m"] < 0
        ia = fa(alt[1].transform(u[:, cols[1]]))["margin_m"] < 0
        total = total.merge(PairedCounts.of(ib, ia))
    return total


# ----------------------------------------------------------------------------------------------- engine


class _Lazy:
    """A unit of work run when its result is asked for (the serial engine)."""

    def __init__(self, fn: Callable[..., Any], args: tuple[Any, ...]) -> None:
        self.fn, self.args, self.done, self.value = fn, args, False, None

    def result(self) -> Any:
        if not self.done:
            self.value, self.done = self.fn(*self.args), True
        return self.value


class _Engine:
    """Serial, a local process pool, or a dask.distributed cluster (local or at an address)."""

    def __init__(self, workers: int, use_dask: bool, scheduler: str | None) -> None:
        self.workers = workers
        self.kind = "dask" if (use_dask or scheduler) else ("serial" if workers <= 1 else "processes")
        self.scheduler = scheduler
        self._pool: Any = None
        self._client: Any = None
        self._cluster: Any = None

    def __enter__(self) -> _Engine:
        if self.kind == "processes":
            self._pool = cf.ProcessPoolExecutor(max_workers=self.workers)
        elif self.kind == "dask":
            try:
                from dask.distributed import Client, LocalCluster
            except ImportError:  # pragma: no cover - a dependency
                raise LandriskError("--dask and --scheduler need dask[distributed] installed") from None
            try:
                if self.scheduler:
                    self._client = Client(self.scheduler, timeout=30)
                else:
                    self._cluster = LocalCluster(n_workers=self.workers, threads_per_worker=1,
                                                 processes=True, dashboard_address=None)
                    self._client = Client(self._cluster)
            except (OSError, TimeoutError) as exc:
                raise LandriskError(f"cannot reach the dask scheduler {self.scheduler!r} ({exc})") from None
        return self

    def __exit__(self, *exc: object) -> None:
        if self._pool is not None:
            self._pool.shutdown(cancel_futures=True)
        if self._client is not None:
            self._client.close()
        if self._cluster is not None:
            self._cluster.close()

    def submit(self, fn: Callable[..., Any], *args: Any) -> Any:
        if self.kind == "processes":
            return self._pool.submit(fn, *args)
        if self.kind == "dask":
            return self._client.submit(fn, *args, pure=False)
        return _Lazy(fn, args)

    def as_completed(self, futures: Sequence[Any]) -> Iterator[Any]:
        if self.kind == "processes":
            yield from cf.as_completed(futures)
        elif self.kind == "dask":
            from dask.distributed import as_completed

            yield from as_completed(list(futures))
        else:
            for f in futures:
                f.result()
                yield f


# ------------------------------------------------------------------------------------------------ study


#: Part of every cache key: raise it when the way a cached case or comparison is computed changes, so
#: that a rerun does not reuse results of the earlier computation (2: Newcombe's paired interval).
CACHE_FORMAT = 2


def case_key(case: StudyCase, s: StudySettings) -> str:
    """Hash of the case's resolved inputs, uncertain inputs, the settings (seed, method...) and version."""
    payload = {
        "values": {k: case.scenario.values[k] for k in sorted(case.scenario.values)},
        "names": list(case.problem.names),
        "marginals": [m.describe() for m in case.problem.marginals],
        "spearman": None if case.problem.spearman is None else np.asarray(case.problem.spearman).tolist(),
        "record": case.record,
        "settings": s.__dict__,
        "version": __version__,
        "cache_format": CACHE_FORMAT,
    }
    text = json.dumps(payload, sort_keys=True, default=repr)
    return hashlib.sha256(text.encode()).hexdigest()[:32]


def _needs_rare(s: StudySettings, overruns: int) -> bool:
    return s.method == "subset" or (s.method == "auto" and overruns < s.min_events)


def _case_result(case: StudyCase, key: str, mc: _MCSummary, rare: Any, s: StudySettings) -> CaseResult:
    p_mc = event_probability(mc.overruns, mc.n, s.confidence)
    resa = event_probability(mc.beyond_resa, mc.n, s.confidence)
    err = 0.0 if mc.exact else s.bin_width_m
    lda = float(case.scenario.values["runway.lda"])
    if rare is None:
        p = p_mc.estimate
        cov = math.sqrt((1 - p) / (mc.n * p)) if p > 0 else None
        return CaseResult(case.name, dict(case.overrides), "mc", p, (p_mc.lo, p_mc.hi), cov,
                          p_mc.upper_bound_only, p_mc, resa, 0, mc.percentiles, err, lda, mc.chunks, key)
    prob, rcov, ci, calls, msgs = rare
    note = (f"Monte Carlo saw {mc.overruns} overrun(s) in {mc.n:,} samples (< {s.min_events}): "
            "subset simulation" if s.method == "auto" else "subset simulation (method = subset)")
    return CaseResult(case.name, dict(case.overrides), "subset", float(prob), (float(ci[0]), float(ci[1])),
                      float(rcov) if math.isfinite(rcov) else None, False, p_mc, resa, int(calls),
                      mc.percentiles, err, lda, mc.chunks, key, (note, *msgs))


def _merge_chunks(chunks: list[_Chunk], s: StudySettings) -> _MCSummary:
    hist = chunks[0].hist
    for c in chunks[1:]:
        hist = hist.merge(c.hist)
    return _MCSummary(sum(c.overruns for c in chunks), sum(c.beyond_resa for c in chunks), hist.n,
                      tuple(hist.percentiles(PERCENTILES, s.confidence)), False, len(chunks))


def _comparison_key(kb: str, ka: str, s: StudySettings) -> str:
    text = f"paired|{kb}|{ka}|{s.samples}|{s.seed}|{s.split}|{__version__}|{CACHE_FORMAT}"
    return hashlib.sha256(text.encode()).hexdigest()[:32]


def run_study(
    cases: Sequence[StudyCase],
    comparisons: Sequence[tuple[str, str]] = (),
    settings: StudySettings | None = None,
    *,
    workers: int | None = None,
    use_dask: bool = False,
    scheduler: str | None = None,
    cache: Cache | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> StudyResult:
    """Assess every case and comparison (see the module doc); ``cache`` keeps finished ones.

    Parameters
    ----------
    cases : sequence of StudyCase
    comparisons : sequence of (baseline name, alternative name)
    settings : StudySettings
    workers : int, optional
        Processes (default: the number of cores); 1 runs everything in this process.
    use_dask, scheduler : bool, str
        Run on a dask.distributed LocalCluster of ``workers`` processes, or on the scheduler at that
        address.
    cache : object with get(key) and put(key, value), optional
    progress : callable, optional
        progress(done, total) over cases and comparisons.
    """
    s = settings or StudySettings()
    if s.method not in STUDY_METHODS:
        raise LandriskError(f"study method must be one of {', '.join(STUDY_METHODS)}, not {s.method!r}")
    names = [c.name for c in cases]
    if len(set(names)) != len(names):
        raise LandriskError("the case names of a study must differ")
    for c in cases:
        if c.problem.dimension == 0:
            raise LandriskError(f"case {c.name!r}: no uncertain inputs; add [uncertain.\"<key>\"] tables "
                                "to the base scenario")
    by_name = {c.name: c for c in cases}
    for b, a in comparisons:
        if b not in by_name or a not in by_name:
            raise LandriskError(f"comparison {b!r} / {a!r}: not the names of cases")
    n_workers = max(1, workers if workers is not None else (os.cpu_count() or 1))
    t0 = time.perf_counter()
    keys = {c.name: case_key(c, s) for c in cases}
    total = len(cases) + len(comparisons)
    done: dict[str, CaseResult] = {}
    comp_done: dict[tuple[str, str], ComparisonResult] = {}
    reused = 0
    for c in cases:
        hit = cache.get(keys[c.name]) if cache is not None else None
        if isinstance(hit, CaseResult):
            done[c.name] = replace(hit, name=c.name, overrides=dict(c.overrides), cached=True)
            reused += 1
    comp_keys = {(b, a): _comparison_key(keys[b], keys[a], s) for b, a in comparisons}
    for pair, k in comp_keys.items():
        hit = cache.get(k) if cache is not None else None
        if isinstance(hit, ComparisonResult):
            comp_done[pair] = replace(hit, cached=True)
            reused += 1
    count = [len(done) + len(comp_done)]

    def tick() -> None:
        count[0] += 1
        if progress is not None:
            progress(count[0], total)

    if progress is not None:
        progress(count[0], total)
    with _Engine(n_workers, use_dask, scheduler) as engine:
        _run_cases(engine, [c for c in cases if c.name not in done], keys, s, done, cache, tick)
        _run_comparisons(engine, [p for p in comparisons if p not in comp_done], by_name, comp_keys, s,
                         comp_done, cache, tick)
    return StudyResult(
        name="", settings=s, cases=tuple(done[n] for n in names),
        comparisons=tuple(comp_done[p] for p in comparisons), exposure=None, engine=engine.kind,
        workers=n_workers, computed=total - reused, reused=reused, seconds=time.perf_counter() - t0)


def _run_cases(engine: _Engine, todo: list[StudyCase], keys: dict[str, str], s: StudySettings,
               done: dict[str, CaseResult], cache: Cache | None, tick: Callable[[], None]) -> None:
    futures: dict[Any, tuple[StudyCase, int | None]] = {}
    sizes = chunk_sizes(s.samples, s.split)
    for c in todo:
        if len(sizes) == 1:
            futures[engine.submit(_mc_case, c.scenario, c.problem, s)] = (c, None)
        else:
            for k, (m, ss) in enumerate(zip(sizes, chunk_seeds(s.seed, len(sizes)), strict=True)):
                futures[engine.submit(_mc_chunk, c.scenario, c.problem, m, ss, s)] = (c, k)
    parts: dict[str, list[_Chunk]] = {}
    rare: dict[Any, tuple[StudyCase, _MCSummary]] = {}

    def finish(c: StudyCase, mc: _MCSummary, r: Any) -> None:
        res = _case_result(c, keys[c.name], mc, r, s)
        if cache is not None:
            cache.put(res.key, res)
        done[c.name] = res
        tick()

    for f in engine.as_completed(list(futures)):
        c, i = futures[f]
        mc: _MCSummary
        if i is None:
            mc = f.result()
        else:
            parts.setdefault(c.name, []).append(f.result())
            if len(parts[c.name]) < len(sizes):
                continue
            mc = _merge_chunks(parts.pop(c.name), s)
        if _needs_rare(s, mc.overruns):
            rare[engine.submit(_rare_case, c.scenario, c.problem, s)] = (c, mc)
        else:
            finish(c, mc, None)
    for f in engine.as_completed(list(rare)):
        c, mc = rare[f]
        finish(c, mc, f.result())


def _run_comparisons(engine: _Engine, todo: list[tuple[str, str]], by_name: dict[str, StudyCase],
                     keys: dict[tuple[str, str], str], s: StudySettings,
                     done: dict[tuple[str, str], ComparisonResult], cache: Cache | None,
                     tick: Callable[[], None]) -> None:
    futures: dict[Any, tuple[str, str]] = {}
    sizes = chunk_sizes(s.samples, s.split)
    shared: dict[tuple[str, str], bool] = {}
    for pair in todo:
        cb, ca = by_name[pair[0]], by_name[pair[1]]
        names = list(cb.problem.names) + [k for k in ca.problem.names if k not in cb.problem.names]
        cols = ([names.index(k) for k in cb.problem.names], [names.index(k) for k in ca.problem.names])
        shared[pair] = cb.problem.names == ca.problem.names
        args = ((cb.scenario, cb.problem), (ca.scenario, ca.problem), cols)
        if len(sizes) == 1:
            futures[engine.submit(_paired_chunk, *args, s.samples, s.seed, s.chunk)] = pair
        else:
            for m, ss in zip(sizes, chunk_seeds(s.seed, len(sizes)), strict=True):
                futures[engine.submit(_paired_chunk, *args, m, ss, s.chunk)] = pair
    parts: dict[tuple[str, str], list[PairedCounts]] = {}
    for f in engine.as_completed(list(futures)):
        pair = futures[f]
        parts.setdefault(pair, []).append(f.result())
        if len(parts[pair]) < len(sizes):
            continue
        counts = parts.pop(pair)
        merged = counts[0]
        for c in counts[1:]:
            merged = merged.merge(c)
        res = ComparisonResult(pair[0], pair[1], paired_comparison(merged, s.confidence), shared[pair],
                               keys[pair])
        if cache is not None:
            cache.put(res.key, res)
        done[pair] = res
        tick()


# ---------------------------------------------------------------------------------------------- yearly


def yearly_risk(p: float, ci: tuple[float, float], landings_per_year: float) -> YearlyRisk:
    """Poisson yearly figures of a per-landing probability p (interval ci) over N landings a year."""
    lam, lo, hi = (landings_per_year * x for x in (p, ci[0], ci[1]))

    def at_least_one(x: float) -> float:
        return float(-math.expm1(-x))

    def between(x: float) -> float | None:
        return 1.0 / x if x > 0 else None

    return YearlyRisk(lam, (lo, hi), at_least_one(lam), (at_least_one(lo), at_least_one(hi)),
                      between(lam), (between(hi), between(lo)))


def exposure_risk(cases: Sequence[CaseResult], exposure: Exposure, conf: float = 0.95) -> ExposureResult:
    """The yearly risk of the mix of cases (or of the worst case without a mix) against the target.

    With a mix, p = sum_c w_c p_c and its interval is the normal interval with sd^2 = sum_c w_c^2 sd_c^2,
    sd_c from each case's interval half-width (lower bound floored at 0, said in the notes).
    """
    per_case = {c.name: yearly_risk(c.p_overrun, c.ci, exposure.landings_per_year) for c in cases}
    notes = []
    if exposure.mix:
        by_name = {c.name: c for c in cases}
        p = sum(w * by_name[k].p_overrun for k, w in exposure.mix.items())
        sd = math.sqrt(sum((w * by_name[k].sd) ** 2 for k, w in exposure.mix.items()))
        z = float(stats.norm.ppf(0.5 + conf / 2))
        lo = p - z * sd
        if lo < 0:
            notes.append("the lower bound of the mixed interval is floored at 0 (normal approximation)")
        ci = (max(lo, 0.0), p + z * sd)
        basis = "mix"
    else:
        worst = max(cases, key=lambda c: c.p_overrun)
        p, ci = worst.p_overrun, worst.ci
        basis = f"worst case: {worst.name}"
        notes.append("no [exposure.mix]: the yearly figures are those of the worst case, as if every "
                     "landing were made in it")
    yearly = yearly_risk(p, ci, exposure.landings_per_year)
    target = exposure.target_per_year
    if target is None and exposure.target_per_landing is not None:
        target = exposure.target_per_landing * exposure.landings_per_year
    status = None
    if target is not None:
        lo_y, hi_y = yearly.overruns_per_year_ci
        status = "met" if hi_y <= target else "not met" if lo_y > target else \
            "undecided: the interval contains the target"
    return ExposureResult(exposure, basis, p, ci, yearly, per_case, target, status, tuple(notes))

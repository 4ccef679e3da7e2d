"""Which uncertain inputs drive the landing distance and the overrun risk.

Two methods give the Sobol indices of the total landing distance:

- ``pce``: a polynomial-chaos surrogate per branch of the discrete inputs (runway condition, reverser used
  or not), fitted on a scrambled Sobol design and validated on hold-out points; indices from its
  coefficients, mixed exactly over the branches. The surrogate also gives the mean, sd, percentiles and
  P(overrun) by sampling it (10^6 points). Because a surrogate tends to miss the tail of a distance, the
  real solver is run on surrogate samples in the tail and near the runway end, and that check is
  reported beside the tail figures; a Monte Carlo run of the real solver is compared too.
- ``mc``: the pick-freeze Monte Carlo estimators (Saltelli 2010, Jansen 1999) on the real solver, with
  bootstrap intervals, for users to verify the surrogate on their own scenario.

Both report one-at-a-time swings (each input at its 5th and 95th percentile, a discrete input at its
least and greatest value, the others nominal) for the total distance and the margin; every input, discrete
ones included, has its own row.

The influence on the overrun itself comes from failure samples of the real solver
(:mod:`landrisk.uq.reliability_sensitivity`): importance samples around the FORM design point of each
branch of the discrete inputs (weighted by their likelihood ratios and the branch probabilities), or a
plain Monte Carlo run where it holds more overruns. From them, with no further solver call: the first-order
Sobol index of the overrun indicator by Bayes' rule, the overrun profile (each input's median given an
overrun beside its prior median) and dP(overrun)/dtheta for the distribution parameters by the score
function. With correlated inputs, Shapley effects of the total distance (on the surrogate) stand beside the
Sobol indices, which then depend on the order of the inputs.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import special
from scipy.linalg import solve_triangular

from landrisk.errors import LandriskError
from landrisk.model import KEYS, Scenario, solve_landings
from landrisk.studies import shown
from landrisk.studies.binding import Branch, discrete_branches, landing_model, limit_state, split_discrete
from landrisk.uq import (
    ChaosFit,
    ChaosSpace,
    EventProbability,
    MonteCarloSobol,
    Percentile,
    Problem,
    SobolIndices,
    event_probability,
    fit_chaos,
    normalize_seed,
    percentiles,
    sobol_indices,
    sobol_monte_carlo,
)
from landrisk.uq.distributions import normal_correlation_from_spearman
from landrisk.uq.rare import DesignPoint, form
from landrisk.uq.reliability_sensitivity import (
    FailureSamples,
    ParameterSensitivity,
    indicator_first_order,
    parameter_sensitivity,
    weighted_quantile,
)
from landrisk.uq.shapley import ShapleyEffects, shapley_effects

__all__ = ["ChaosSummary", "InputRank", "MonteCarloCheck", "OverrunIndex", "OverrunInfluence", "ProfileRow",
           "RankSettings", "Ranking", "SurrogateSample", "TailCheck", "rank"]

_OUTPUTS = ("total_m", "air_distance_m", "free_roll_m", "braking_m", "margin_m")
_PHASES = ("total_m", "air_distance_m", "free_roll_m", "braking_m")
SURROGATE_PERCENTILES = (1.0, 5.0, 50.0, 90.0, 95.0, 99.0, 99.9)

Array = NDArray[np.float64]


@dataclass(frozen=True)
class RankSettings:
    """How the ranking is run."""

    method: str = "pce"
    calls: int | None = None  # pce: training + hold-out calls (default 1000); mc: n (d + 2) calls
    order: int | None = None  # None: chosen by leave-one-out error
    max_order: int = 6
    seed: int = 1
    holdout_fraction: float = 0.2
    max_holdout_error: float = 0.05  # RMS hold-out error over the sd of the distance
    surrogate_samples: int = 1_000_000
    tail_checks: int = 200
    max_tail_error: float = 0.01  # the surrogate's error band near the runway end, over the LDA, at most
    mc_check: int = 100_000
    risk_samples: int = 1 << 16  # Monte Carlo overrun samples when there is no Monte Carlo check
    importance_samples: int = 20_000  # around the FORM design points, for the overrun samples
    form_iterations: int = 30  # HL-RF iterations per branch (one without convergence: sampled plainly)
    shapley_outer: int = 500  # Shapley effects on the surrogate: outer samples per subset of inputs
    confidence: float = 0.95


@dataclass(frozen=True)
class InputRank:
    """One input's importance for the total landing distance."""

    name: str
    first: float
    total: float
    first_ci: tuple[float, float] | None
    total_ci: tuple[float, float] | None
    p5: float
    p95: float
    swing_total_m: float  # total at P95 minus total at P5, others nominal
    swing_margin_m: float
    discrete: bool
    levels: tuple[str, ...] = ()  # a discrete input's values with their probabilities, e.g. "True (97 %)"


@dataclass(frozen=True)
class ChaosSummary:
    """The fitted surrogate: its truncation and its hold-out validation (the total distance)."""

    order: int
    q_norm: float
    terms: int
    branches: int
    training_calls: int  # per branch
    holdout_calls: int  # per branch
    loo_error: float  # relative leave-one-out error of the most probable branch
    holdout_rel_error: float  # RMS hold-out error over the sd of the distance, pooled over branches
    holdout_max_error_m: float
    holdout_max_rel_error: float


@dataclass(frozen=True)
class TailCheck:
    """The surrogate judged by what it is used for: its P99 and P(overrun) against the real solver's.

    P99 passes when the surrogate's interval meets the Monte Carlo check's, P(overrun) likewise (their
    intervals overlap). The real solver is also run on surrogate samples in the tail and nearest the runway
    end: the surrogate's error band there is twice its RMS error (metres), and samples put on the wrong
    side of the runway end count only where the true margin lies outside the band (more than a tenth of
    the samples near the runway end fails the check). Without a Monte Carlo check, the band must stay
    within ``max_tail_error`` of the LDA instead.
    """

    calls: int
    rel_rms: float
    max_rel: float
    bias_rel: float
    near_runway_end: int
    misclassified_overruns: int  # outside the error band
    passed: bool
    band_m: float = 0.0
    misclassified_within_band: int = 0
    p99_surrogate: tuple[float, float, float] | None = None  # value, lo, hi
    p99_mc: tuple[float, float, float] | None = None
    p99_passed: bool | None = None
    p_overrun_surrogate: tuple[float, float, float] | None = None  # value, lo, hi
    p_overrun_mc: tuple[float, float, float] | None = None
    p_overrun_passed: bool | None = None
    note: str = ""
    p_overrun_band: tuple[float, float] | None = None  # P(total > LDA + band) .. P(total > LDA - band)


@dataclass(frozen=True)
class OverrunIndex:
    """First-order Sobol index of the overrun indicator for one input, or None with a note."""

    name: str
    first_order: float | None
    ci: tuple[float, float] | None
    note: str = ""


@dataclass(frozen=True)
class ProfileRow:
    """One input's distribution given an overrun beside its prior (SI units of the key)."""

    name: str
    unit: str
    prior_median: float
    overrun_median: float | None
    discrete: bool
    levels: tuple[tuple[float, float, float], ...] = ()  # (value, prior probability, given an overrun)

    @property
    def shift(self) -> float | None:
        return None if self.overrun_median is None else self.overrun_median - self.prior_median


@dataclass(frozen=True)
class OverrunInfluence:
    """Which inputs drive the overrun, from weighted failure samples of the real solver."""

    source: str
    samples: int
    calls: int
    events: int
    effective_events: float
    p_overrun: float
    indices: list[OverrunIndex]
    profile: list[ProfileRow]
    sensitivity: list[ParameterSensitivity]
    prior_x: Array = field(repr=False)  # (m, d) prior samples, for the figure
    overrun_x: Array = field(repr=False)  # (k, d) failure samples
    overrun_w: Array = field(repr=False)  # their weights


@dataclass(frozen=True)
class SurrogateSample:
    """Figures from sampling the surrogate. Distances in metres."""

    samples: int
    mean_m: float
    sd_m: float
    percentiles: list[Percentile]
    p_overrun: EventProbability
    sorted_total_m: Array = field(repr=False)


@dataclass(frozen=True)
class MonteCarloCheck:
    """A Monte Carlo run of the real solver beside the surrogate. Distances in metres."""

    samples: int
    mean_m: float
    sd_m: float
    p50_m: float
    p99_m: float
    p_overrun: EventProbability
    sorted_total_m: Array = field(repr=False)
    rel_diff: dict[str, float] = field(default_factory=dict)  # surrogate / Monte Carlo - 1
    p99_ci: tuple[float | None, float | None] = (None, None)


@dataclass(frozen=True)
class Ranking:
    """The result of :func:`rank`."""

    scenario: Scenario
    problem: Problem
    settings: RankSettings
    method: str
    calls: int  # solver evaluations behind the indices (training and hold-out, or the MC design)
    calls_breakdown: dict[str, int]
    inputs: list[InputRank]  # by decreasing total index
    second_order: list[tuple[str, str, float]]
    phase_indices: dict[str, dict[str, tuple[float, float]]]
    risk: MonteCarloSobol | None
    risk_events: int
    overrun: OverrunInfluence | None = None
    overrun_mc: OverrunInfluence | None = None  # the Monte Carlo samples' answer beside importance sampling
    shapley: ShapleyEffects | None = None
    chaos: ChaosSummary | None = None
    tail: TailCheck | None = None
    surrogate: SurrogateSample | None = None
    mc_check: MonteCarloCheck | None = None
    warnings: list[str] = field(default_factory=list)
    form_importance: dict[str, float] = field(default_factory=dict)  # alpha^2 at the design point
    form_beta: float | None = None
    record: Mapping[str, Any] = field(default_factory=dict)  # how the inputs were specified

    def __repr__(self) -> str:
        return shown.repr_of("Ranking", shown.ranking_lines(self))

    def _repr_html_(self) -> str:
        return shown.html_of("Ranking", shown.ranking_lines(self))

    @property
    def reliable(self) -> bool:
        """False when the surrogate failed its hold-out or tail check (PCE only)."""
        if self.method == "mc":
            return True
        return bool(self.chaos is not None and self.tail is not None and self.tail.passed
                    and self.chaos.holdout_rel_error <= self.settings.max_holdout_error)


def _matrix_model(scenario: Scenario, keys: tuple[str, ...]) -> Callable[[Array], Array]:
    """The landing model with the outputs of :data:`_OUTPUTS` as the columns of one matrix."""
    f = landing_model(scenario, keys)

    def g(x: Array) -> Array:
        r = f(x)
        return np.column_stack([r[k] for k in _OUTPUTS])

    return g


def _swings(scenario: Scenario, problem: Problem) -> list[tuple[float, float, float, float]]:
    """(low, high, total swing, margin swing) of each input, the others at their nominal values."""
    out = []
    for name, m in zip(problem.names, problem.marginals, strict=True):
        # P5 and P95; a discrete input between its least and greatest value (a rare value may lie
        # beyond both percentiles, e.g. a reverser unavailable on 3 % of landings).
        lo, hi = (m.lower, m.upper) if m.discrete else (float(v) for v in m.ppf(np.array([0.05, 0.95])))
        spec = KEYS[name]
        res = solve_landings(scenario.case({name: np.array([spec.cast(lo), spec.cast(hi)])}))
        out.append((lo, hi, float(res.total_m[1] - res.total_m[0]), float(res.margin_m[1] - res.margin_m[0])))
    return out


def _form_importance(
    scenario: Scenario, problem: Problem, rng: np.random.Generator, max_iter: int = 30
) -> tuple[dict[str, float], float | None, int, dict[int, DesignPoint]]:
    """FORM importance factors alpha^2 of the continuous inputs at the design point of the branch that
    contributes most to P(overrun) (Hasofer & Lind 1974; see landrisk.uq.rare); every branch's converged
    design point, by branch index."""
    disc, _, cont = split_discrete(problem)
    if cont.dimension == 0:
        return {}, None, 0, {}
    best, calls = None, 0
    points: dict[int, DesignPoint] = {}
    for k, b in enumerate(discrete_branches(problem, disc)):
        g, _ = limit_state(scenario, cont, b.values)
        dps, c = form(g, cont.dimension, seed=rng, max_iter=max_iter)
        calls += c
        if dps[0].converged:
            points[k] = dps[0]
            if best is None or b.probability * dps[0].probability > best[0]:
                best = (b.probability * dps[0].probability, dps[0])
    if best is None:
        return {}, None, calls, points
    dp = best[1]
    return {n: float(a) for n, a in zip(cont.names, dp.importance, strict=True)}, dp.beta, calls, points


def _levels(problem: Problem) -> list[Array | None]:
    """Prior probabilities of each discrete input's levels (None for a continuous input)."""
    return [m.choices()[1] if m.discrete else None for m in problem.marginals]


def _scores(problem: Problem, z_corr: Array, x: Array) -> Array:
    """Normal scores of the continuous inputs, level indices (0, 1, ...) of the discrete ones."""
    out = z_corr.copy()
    for j, m in enumerate(problem.marginals):
        if m.discrete:
            out[:, j] = np.searchsorted(m.choices()[0], x[:, j])
    return out


@dataclass(frozen=True)
class _Run:
    """Samples of the real solver: inputs, scores, total distance and margin (Monte Carlo)."""

    x: Array
    scores: Array
    total: Array
    margin: Array


def _monte_carlo_run(scenario: Scenario, problem: Problem, n: int, rng: np.random.Generator) -> _Run:
    z = rng.normal(size=(n, problem.dimension))
    x = problem.from_standard_normal(z)
    r = landing_model(scenario, problem.names)(x)
    return _Run(x, _scores(problem, problem.correlate(z), x), r["total_m"], r["margin_m"])


def _importance_run(scenario: Scenario, problem: Problem, points: dict[int, DesignPoint], n: int,
                    rng: np.random.Generator) -> tuple[FailureSamples, Array, int]:
    """Weighted overrun samples: per branch of the discrete inputs, a unit normal around its FORM design
    point in the continuous inputs' standard normal space (the origin without one); weight
    P(branch) phi(u) / q(u) n / n_branch, so that sum(weights) / n estimates P(overrun)."""
    disc, cont, cont_problem = split_discrete(problem)
    branches = discrete_branches(problem, disc)
    contrib = np.array([b.probability * (points[k].probability if k in points else 1.0)
                        for k, b in enumerate(branches)])
    share = contrib / contrib.sum() if contrib.sum() > 0 else np.full(len(branches), 1 / len(branches))
    xs, zs, ws, calls = [], [], [], 0
    for k, b in enumerate(branches):
        n_b = max(200, round(n * share[k]))
        centre = points[k].u if k in points else np.zeros(cont_problem.dimension)
        u = centre + rng.normal(size=(n_b, cont_problem.dimension))
        g, _ = limit_state(scenario, cont_problem, b.values)
        fail = g(u) < 0
        calls += n_b
        u = u[fail]
        w = np.exp(-u @ centre + 0.5 * centre @ centre) * b.probability * n / n_b
        x = np.empty((u.shape[0], problem.dimension))
        x[:, cont] = cont_problem.from_standard_normal(u)
        z = np.zeros_like(x)
        z[:, cont] = cont_problem.correlate(u)
        for i in disc:
            x[:, i] = float(b.values[problem.names[i]])
        xs.append(x)
        zs.append(_scores(problem, z, x))
        ws.append(w)
    x_all = np.concatenate(xs)
    return FailureSamples(np.concatenate(zs), np.concatenate(ws), n), x_all, calls


def _influence(problem: Problem, source: str, fs: FailureSamples, x_fail: Array, prior_x: Array,
               calls: int, s: RankSettings, rng: np.random.Generator) -> OverrunInfluence:
    """Indices, profile and parameter sensitivities from the failure samples (no solver call)."""
    idx = indicator_first_order(fs, _levels(problem), conf=s.confidence, seed=rng, bootstrap=100)
    indices = [OverrunIndex(n, r.first_order, r.ci, r.note) for n, r in zip(problem.names, idx, strict=True)]
    enough = fs.effective >= 30
    profile = []
    for j, (name, m) in enumerate(zip(problem.names, problem.marginals, strict=True)):
        unit = KEYS[name].unit if name in KEYS else ""
        prior = float(m.ppf(np.array([0.5]))[0])
        med = float(weighted_quantile(x_fail[:, j], fs.weights, 0.5)[0]) if enough else None
        levels: tuple[tuple[float, float, float], ...] = ()
        if m.discrete:
            values, probs = m.choices()
            q = np.bincount(fs.scores[:, j].astype(np.intp), weights=fs.weights, minlength=values.size)
            q = q / q.sum() if q.sum() > 0 else q
            levels = tuple((float(v), float(p), float(c)) for v, p, c in zip(values, probs, q, strict=True))
        profile.append(ProfileRow(name, unit, prior, med, m.discrete, levels))
    sens = parameter_sensitivity(problem, x_fail, fs.weights, fs.n, conf=s.confidence) if enough else []
    return OverrunInfluence(source, fs.n, calls, int(fs.weights.size), fs.effective, fs.p_failure, indices,
                            profile, sens, prior_x, x_fail, fs.weights)


def _overrun_influence(scenario: Scenario, problem: Problem, s: RankSettings, rng: np.random.Generator,
                       run: _Run, points: dict[int, DesignPoint], breakdown: dict[str, int],
                       warnings: list[str]) -> tuple[OverrunInfluence, OverrunInfluence | None]:
    """The influence on the overrun from the Monte Carlo run and, where FORM found design points, from
    importance samples around them; the one with more effective overruns first."""
    fail = run.margin < 0
    prior_x = run.x[: min(run.x.shape[0], 20_000)]
    mc_fs = FailureSamples(run.scores[fail], np.ones(int(fail.sum())), run.x.shape[0])
    mc = _influence(problem, f"Monte Carlo ({run.x.shape[0]:,} samples)", mc_fs, run.x[fail], prior_x, 0, s,
                    rng)
    if not points or s.importance_samples <= 0 or mc.effective_events >= 2000:
        if mc.effective_events < 30:
            warnings.append(f"only {mc.events} overruns among {run.x.shape[0]:,} Monte Carlo samples and no "
                            "design point to sample around: no influence on the overrun is given")
        return mc, None
    fs, x_fail, calls = _importance_run(scenario, problem, points, s.importance_samples, rng)
    breakdown["overrun importance samples"] = calls
    imp = _influence(problem, f"importance sampling around the FORM design points ({calls:,} solver calls)",
                     fs, x_fail, prior_x, calls, s, rng)
    return (imp, mc) if imp.effective_events >= mc.effective_events else (mc, imp)


def _monte_carlo_check(run: _Run, s: RankSettings, surrogate: SurrogateSample) -> MonteCarloCheck:
    """The Monte Carlo run of the real solver, and the surrogate's relative differences from it."""
    sorted_total = np.sort(run.total)
    mc_pct = {p.p: p for p in percentiles(sorted_total, (50.0, 99.0), s.confidence, presorted=True)}
    sur_pct = {p.p: p for p in surrogate.percentiles}
    mean, sd = float(np.mean(run.total)), float(np.std(run.total, ddof=1))
    p50, p99 = mc_pct[50.0].value, mc_pct[99.0].value
    assert p50 is not None and p99 is not None and sur_pct[50.0].value is not None
    assert sur_pct[99.0].value is not None
    rel = {"mean": surrogate.mean_m / mean - 1, "sd": surrogate.sd_m / sd - 1,
           "p50": sur_pct[50.0].value / p50 - 1, "p99": sur_pct[99.0].value / p99 - 1}
    p = event_probability(int(np.sum(run.margin < 0)), run.total.size, s.confidence)
    return MonteCarloCheck(run.total.size, mean, sd, p50, p99, p, sorted_total, rel,
                           p99_ci=(mc_pct[99.0].lo, mc_pct[99.0].hi))


def rank(scenario: Scenario, problem: Problem, settings: RankSettings | None = None) -> Ranking:
    """Rank the uncertain inputs of ``scenario`` by their Sobol indices (see the module docstring)."""
    s = settings or RankSettings()
    if problem.dimension == 0:
        raise LandriskError(f"{scenario.source}: the scenario has no uncertain inputs to rank")
    if s.method not in ("pce", "mc"):
        raise LandriskError(f"--method must be pce or mc, not {s.method!r}")
    rng = normalize_seed(s.seed)
    swings = _swings(scenario, problem)
    breakdown = {"one-at-a-time swings": 2 * problem.dimension}
    form_importance, form_beta, form_calls, points = _form_importance(scenario, problem, rng,
                                                                      s.form_iterations)
    breakdown["FORM importance factors"] = form_calls
    n_mc = s.mc_check if s.method == "pce" and s.mc_check > 0 else s.risk_samples
    run = _monte_carlo_run(scenario, problem, n_mc, rng)
    breakdown["Monte Carlo run (check and overrun samples)"] = n_mc
    warnings: list[str] = []
    overrun, overrun_mc = _overrun_influence(scenario, problem, s, rng, run, points, breakdown, warnings)
    common = {"risk": None, "risk_events": int(np.sum(run.margin < 0)), "form_importance": form_importance,
              "form_beta": form_beta, "warnings": warnings, "overrun": overrun, "overrun_mc": overrun_mc}
    if s.method == "mc":
        return _rank_monte_carlo(scenario, problem, s, rng, swings, breakdown, common)
    return _rank_chaos(scenario, problem, s, rng, swings, breakdown, common, run)


def _level_names(problem: Problem, i: int) -> tuple[str, ...]:
    """A discrete input's values in its key's type with their probabilities, e.g. ``True (97 %)``."""
    m, name = problem.marginals[i], problem.names[i]
    if not m.discrete:
        return ()
    values, probs = m.choices()
    cast = KEYS[name].cast if name in KEYS else (lambda v: v)
    return tuple(f"{cast(float(v))} ({100 * p:.3g} %)" for v, p in zip(values, probs, strict=True) if p > 0)


def _refuse_landings_that_cannot_stop(total_m: Array, scenario: Scenario, where: str) -> None:
    """Variance-based indices of the distance need a finite distance: landings that cannot stop (an
    infinite distance) are refused with a one-line error instead of being fitted or averaged."""
    bad = int(np.count_nonzero(~np.isfinite(total_m)))
    if bad:
        raise LandriskError(
            f"{scenario.source}: {bad} of {total_m.size} landings in {where} cannot stop (thrust and slope "
            "outweigh braking): the distance's Sobol indices are not defined; `landrisk assess` counts them "
            "as overruns")


def _rank_monte_carlo(scenario: Scenario, problem: Problem, s: RankSettings, rng: np.random.Generator,
                      swings: list[tuple[float, float, float, float]], breakdown: dict[str, int],
                      common: dict) -> Ranking:
    """Sobol indices of the total distance by the pick-freeze estimators on the real solver."""
    d = problem.dimension
    n = max((s.calls or 8192 * (d + 2)) // (d + 2), 64)
    total_model = _matrix_model(scenario, problem.names)
    def total(x: Array) -> Array:
        y = total_model(x)[:, 0]
        _refuse_landings_that_cannot_stop(y, scenario, "the Monte Carlo Sobol design")
        return y

    mc = sobol_monte_carlo(problem, total, n, seed=rng, conf=s.confidence)
    inputs = [InputRank(name, float(mc.first[i]), float(mc.total[i]),
                        (float(mc.first_ci[i, 0]), float(mc.first_ci[i, 1])),
                        (float(mc.total_ci[i, 0]), float(mc.total_ci[i, 1])), *swings[i],
                        problem.marginals[i].discrete, _level_names(problem, i))
              for i, name in enumerate(problem.names)]
    breakdown["Sobol design"] = mc.calls
    return Ranking(scenario, problem, s, "mc", mc.calls, breakdown, sorted(inputs, key=lambda r: -r.total),
                   [], {}, **common)


@dataclass
class _Fits:
    """The surrogate of every branch, with what was used to fit and validate it."""

    space: ChaosSpace
    branches: list[Branch]
    order_of: list[int]  # branch indices, most probable first
    fits: dict[int, ChaosFit]
    models: dict[int, Callable[[Array], Array]]
    holdout: dict[int, tuple[Array, Array]]  # (true, predicted) total distances
    per_branch: int
    n_train: int
    n_hold: int

    @property
    def first(self) -> ChaosFit:
        return self.fits[self.order_of[0]]


def _fit_branches(scenario: Scenario, problem: Problem, s: RankSettings,
                  rng: np.random.Generator) -> tuple[_Fits, list[int], Problem]:
    """One chaos expansion per discrete branch on a shared basis, chosen on the most probable branch."""
    disc, cont, cont_problem = split_discrete(problem)
    if not cont:
        raise LandriskError("`rank --method pce` needs at least one continuous uncertain input")
    space = ChaosSpace(cont_problem)
    branches = discrete_branches(problem, disc)
    calls = s.calls or 1000
    per_branch = calls // len(branches)
    n_hold = max(10, round(s.holdout_fraction * per_branch))
    n_train = per_branch - n_hold
    if n_train < 2 * (cont_problem.dimension + 1):
        raise LandriskError(f"--calls {calls} is too few: each of the {len(branches)} branches needs at "
                            f"least {2 * (cont_problem.dimension + 1) + n_hold} calls")
    order_of = sorted(range(len(branches)), key=lambda b: -branches[b].probability)
    fits: dict[int, ChaosFit] = {}
    hold: dict[int, tuple[Array, Array]] = {}
    models = {}
    seeds = rng.spawn(len(branches))
    for b in order_of:  # the most probable branch first: it chooses the basis for all
        values = branches[b].values
        models[b] = _matrix_model(scenario.with_values(**values) if values else scenario, cont_problem.names)
        xi = space.design(per_branch, seeds[b])
        y = models[b](space.to_inputs(xi))
        _refuse_landings_that_cannot_stop(y[:, 0], scenario, "the polynomial-chaos surrogate's design")
        basis = None if not fits else (fits[order_of[0]].order, fits[order_of[0]].q_norm)
        fits[b] = fit_chaos(space, xi[:n_train], y[:n_train], _OUTPUTS, max_order=s.max_order,
                            order=s.order, basis=basis)
        hold[b] = (y[n_train:, 0], fits[b].predict(xi[n_train:])[:, 0])
    fitted = _Fits(space, branches, order_of, fits, models, hold, per_branch, n_train, n_hold)
    return fitted, disc, cont_problem


def _phase_indices(f: _Fits, names: list[str], disc_name: str | None
                   ) -> tuple[dict[str, dict[str, tuple[float, float]]], SobolIndices]:
    """Sobol indices of every phase from the branch coefficients; those of the total distance."""
    probs = [b.probability for b in f.branches]
    out = {}
    total_si = None
    for k, name in enumerate(_PHASES):
        coefs = [f.fits[b].coefficients[:, k] for b in range(len(f.branches))]
        si = sobol_indices(f.first.index, coefs, probs, names, disc_name if len(f.branches) > 1 else None)
        out[name] = {n: (float(a), float(t)) for n, a, t in zip(si.names, si.first, si.total, strict=True)}
        if name == "total_m":
            total_si = si
    assert total_si is not None
    return out, total_si


def _chaos_summary(f: _Fits, total_si: SobolIndices) -> ChaosSummary:
    """Hold-out validation of the total distance, pooled over the branches by probability."""
    probs = [b.probability for b in f.branches]
    mse = sum(p * np.mean((t - e) ** 2) for (t, e), p in zip((f.holdout[b] for b in range(len(f.branches))),
                                                               probs, strict=True))
    rel_rms = float(np.sqrt(mse / total_si.variance)) if total_si.variance > 0 else 0.0
    all_true = np.concatenate([f.holdout[b][0] for b in f.holdout])
    all_err = np.concatenate([f.holdout[b][1] - f.holdout[b][0] for b in f.holdout])
    first = f.first
    return ChaosSummary(first.order, first.q_norm, first.terms, len(f.branches), f.n_train, f.n_hold,
                        float(first.loo_error[0]), rel_rms, float(np.max(np.abs(all_err))),
                        float(np.max(np.abs(all_err) / np.abs(all_true))))


def _sample_surrogate(f: _Fits, s: RankSettings, rng: np.random.Generator
                      ) -> tuple[Array, Array, Array]:
    """Germ samples, surrogate predictions and branch labels, the branches drawn by probability."""
    counts = rng.multinomial(s.surrogate_samples, np.array([b.probability for b in f.branches]))
    xis, preds, labels = [], [], []
    for b, m in enumerate(counts):
        xi = f.space.random(int(m), rng)
        xis.append(xi)
        preds.append(f.fits[b].predict(xi))
        labels.append(np.full(int(m), b))
    return np.concatenate(xis), np.concatenate(preds), np.concatenate(labels)


def _overlap(a: tuple[float, float], b: tuple[float, float]) -> bool:
    return a[0] <= b[1] and b[0] <= a[1]


def _tail_check(f: _Fits, s: RankSettings, rng: np.random.Generator, xi_all: Array, pred: Array,
                lab: Array, surrogate_pct: list[Percentile], lda: float, mc: MonteCarloCheck | None
                ) -> TailCheck:
    """The real solver on surrogate samples in the tail (above the surrogate's P99) and nearest the
    runway end; the surrogate's P99 and P(overrun), within its error band, against the Monte Carlo
    check's (see :class:`TailCheck`)."""
    total, margin = pred[:, 0], pred[:, 4]
    p99 = next(p for p in surrogate_pct if p.p == 99.0)
    assert p99.value is not None and p99.lo is not None and p99.hi is not None
    tail = np.flatnonzero(total >= p99.value)
    pick_tail = rng.choice(tail, size=min(s.tail_checks // 2, tail.size), replace=False)
    pick_edge = np.argsort(np.abs(margin))[: s.tail_checks - pick_tail.size]
    picks = np.unique(np.concatenate([pick_tail, pick_edge]))
    truth = np.empty((picks.size, len(_OUTPUTS)))
    for b in range(len(f.branches)):
        sel = lab[picks] == b
        if sel.any():
            truth[sel] = f.models[b](f.space.to_inputs(xi_all[picks[sel]]))
    rel = (total[picks] - truth[:, 0]) / truth[:, 0]
    edge = np.isin(picks, pick_edge)
    err_edge = total[picks][edge] - truth[edge, 0]
    band = 2.0 * float(np.sqrt(np.mean(err_edge**2))) if err_edge.size else 0.0
    wrong = (margin[picks] < 0) != (truth[:, 4] < 0)
    outside = wrong & (np.abs(truth[:, 4]) > band)
    rms = float(np.sqrt(np.mean(rel**2)))
    band_ok = band <= s.max_tail_error * lda
    class_ok = int(outside.sum()) <= 0.1 * max(int(edge.sum()), 1)
    n = total.size
    hi_p = event_probability(int(np.sum(total > lda - band)), n, s.confidence)
    lo_p = event_probability(int(np.sum(total > lda + band)), n, s.confidence)
    own_p = event_probability(int(np.sum(margin < 0)), n, s.confidence)
    sur_p = (own_p.estimate, own_p.lo, own_p.hi)
    band_p = (lo_p.lo, hi_p.hi)  # P(total > LDA + band) .. P(total > LDA - band): the band's reach
    sur_99 = (p99.value, p99.lo, p99.hi)
    p99_ok = p_ok = None
    mc_99 = mc_p = None
    note = ""
    if mc is not None and mc.p99_ci[0] is not None and mc.p99_ci[1] is not None:
        mc_99 = (mc.p99_m, float(mc.p99_ci[0]), float(mc.p99_ci[1]))
        mc_p = (mc.p_overrun.estimate, mc.p_overrun.lo, mc.p_overrun.hi)
        p99_ok = _overlap(sur_99[1:], mc_99[1:])
        p_ok = _overlap(sur_p[1:], mc_p[1:])
        passed = bool(p99_ok and p_ok and class_ok)
    else:
        note = ("no Monte Carlo check: the surrogate's P99 and P(overrun) are not compared with the real "
                "solver's; the error band is held to " f"{100 * s.max_tail_error:g} % of the LDA instead")
        passed = bool(band_ok and class_ok)
    return TailCheck(int(picks.size), rms, float(np.max(np.abs(rel))), float(np.mean(rel)), int(edge.sum()),
                     int(outside.sum()), passed, band, int(wrong.sum() - outside.sum()), sur_99, mc_99,
                     p99_ok, sur_p, mc_p, p_ok, note, band_p)


def _discrete_indices(f: _Fits, problem: Problem, disc: list[int], variance: float
                      ) -> dict[str, tuple[float, float]]:
    """First-order and total Sobol indices of the total distance for each discrete input on its own,
    exactly from the branch expansions on their shared orthonormal basis: with Y_b = sum_k c_bk psi_k,
    S_D = Var(E[Y | D]) / V and ST_D = E[Var(Y | all but D)] / V = sum over the other inputs' branches r
    of p(r) sum_k sum_l p(l) (c_(l,r)k - mean_l c_(l,r)k)^2 / V (Sobol 1993; Sudret 2008, eq. 41)."""
    probs = np.array([b.probability for b in f.branches])
    coef = np.array([f.fits[b].coefficients[:, 0] for b in range(len(f.branches))])  # (branches, terms)
    const = int(np.flatnonzero(np.all(f.first.index == 0, axis=1))[0])
    means = coef[:, const]
    grand = float(probs @ means)
    out = {}
    for i in disc:
        name = problem.names[i]
        key = [b.values[name] for b in f.branches]
        rest = [tuple(v for k, v in b.values.items() if k != name) for b in f.branches]
        first = 0.0
        for level in set(key):
            sel = np.array([k == level for k in key])
            p_l = probs[sel].sum()
            first += p_l * (probs[sel] @ means[sel] / p_l - grand) ** 2
        total = 0.0
        for r in set(rest):
            sel = np.array([x == r for x in rest])
            p_r = probs[sel].sum()
            w = probs[sel] / p_r  # the levels' probabilities given r (independent inputs)
            c = coef[sel]
            total += p_r * float(np.sum(w[:, None] * (c - w @ c) ** 2))
        out[name] = (first / variance, total / variance) if variance > 0 else (0.0, 0.0)
    return out


def _shapley_on_surrogate(f: _Fits, problem: Problem, disc: list[int], s: RankSettings,
                          rng: np.random.Generator) -> ShapleyEffects | None:
    """Shapley effects of the total distance over every input, on the surrogate (no solver call)."""
    if problem.correlated.size == 0 or s.shapley_outer <= 0 or problem.dimension > 10:
        return None
    d = problem.dimension
    r = np.eye(d) if problem.spearman is None else normal_correlation_from_spearman(problem.spearman)
    cont = [j for j in range(d) if j not in disc]
    space = f.space
    c_local = space.problem.correlated
    chol = space.problem._cholesky
    lower = None if chol is None else chol[np.ix_(c_local, c_local)]
    branch_of = {tuple(float(v) for v in b.values.values()): k for k, b in enumerate(f.branches)}

    def model(z: Array) -> Array:
        zc = z[:, cont]
        xi = zc.copy()
        for j, kind in enumerate(space.kinds):
            if kind == "uniform":
                xi[:, j] = special.ndtr(zc[:, j])
        if lower is not None and c_local.size:
            xi[:, c_local] = solve_triangular(lower, zc[:, c_local].T, lower=True).T
        out = np.empty(z.shape[0])
        if disc:
            levels = np.column_stack([problem.marginals[i].ppf(special.ndtr(z[:, i])) for i in disc])
            keys = [tuple(row) for row in levels.tolist()]
            lab = np.array([branch_of[k] for k in keys])
        else:
            lab = np.zeros(z.shape[0], dtype=int)
        for b in np.unique(lab):
            sel = lab == b
            out[sel] = f.fits[int(b)].predict(xi[sel])[:, 0]
        return out

    return shapley_effects(model, r, problem.names, n_outer=s.shapley_outer, n_inner=3, seed=rng)


def _rank_chaos(scenario: Scenario, problem: Problem, s: RankSettings, rng: np.random.Generator,
                swings: list[tuple[float, float, float, float]], breakdown: dict[str, int],
                common: dict, run: _Run) -> Ranking:
    """Sobol indices of every phase from a polynomial-chaos surrogate per discrete branch."""
    f, disc, cont_problem = _fit_branches(scenario, problem, s, rng)
    names = list(cont_problem.names)
    disc_name = " & ".join(problem.names[i] for i in disc) if disc else None
    phase_idx, total_si = _phase_indices(f, names, disc_name)
    chaos = _chaos_summary(f, total_si)
    warnings = common["warnings"]
    breakdown["surrogate training and hold-out"] = f.per_branch * len(f.branches)
    if chaos.holdout_rel_error > s.max_holdout_error:
        warnings.append(f"the surrogate's hold-out error ({100 * chaos.holdout_rel_error:.1f} % of the sd) "
                        f"exceeds {100 * s.max_holdout_error:g} %: its figures are not reliable; raise "
                        "--calls or use --method mc")

    xi_all, pred, lab = _sample_surrogate(f, s, rng)
    total, margin = pred[:, 0], pred[:, 4]
    sorted_total = np.sort(total)
    surrogate_pct = percentiles(sorted_total, SURROGATE_PERCENTILES, s.confidence, presorted=True)
    surrogate = SurrogateSample(int(total.size), float(total_si.mean), float(np.sqrt(total_si.variance)),
                                surrogate_pct,
                                event_probability(int(np.sum(margin < 0)), total.size, s.confidence),
                                sorted_total)
    mc_check = _monte_carlo_check(run, s, surrogate) if s.mc_check > 0 else None
    lda = float(scenario.values["runway.lda"])
    tail = _tail_check(f, s, rng, xi_all, pred, lab, surrogate_pct, lda, mc_check)
    breakdown["tail check"] = tail.calls
    if not tail.passed:
        why = []
        if tail.p99_passed is False:
            why.append("its P99 disagrees with the Monte Carlo check's beyond their intervals")
        if tail.p_overrun_passed is False:
            why.append("its P(overrun) disagrees with the Monte Carlo check's beyond their intervals")
        if tail.p99_passed is None and tail.band_m > s.max_tail_error * lda:
            why.append(f"its error band near the runway end ({tail.band_m:.1f} m) exceeds "
                       f"{100 * s.max_tail_error:g} % of the LDA")
        if tail.misclassified_overruns > 0.1 * max(tail.near_runway_end, 1):
            why.append(f"it puts {tail.misclassified_overruns} samples on the wrong side of the runway end "
                       f"by more than its error band ({tail.band_m:.1f} m)")
        warnings.append("tail check failed: " + "; ".join(why) + "; the surrogate's P99 and P(overrun) are "
                        "not reliable (use landrisk assess)")

    by_name = dict(zip(problem.names, swings, strict=True))
    disc_idx = _discrete_indices(f, problem, disc, total_si.variance)
    inputs = []
    for n_, f1, ft in zip(total_si.names, total_si.first, total_si.total, strict=True):
        if n_ in by_name and n_ not in disc_idx:
            inputs.append(InputRank(n_, float(f1), float(ft), None, None, *by_name[n_], False))
    for i in disc:
        n_ = problem.names[i]
        f1, ft = disc_idx[n_]
        inputs.append(InputRank(n_, f1, ft, None, None, *by_name[n_], True, _level_names(problem, i)))
    second = sorted(((a, b, v) for (a, b), v in total_si.second.items() if a in by_name and b in by_name),
                    key=lambda t: -t[2])[:3]
    shapley = _shapley_on_surrogate(f, problem, disc, s, rng)
    return Ranking(scenario, problem, s, "pce", f.per_branch * len(f.branches), breakdown,
                   sorted(inputs, key=lambda r: -r.total), second, phase_idx, chaos=chaos, tail=tail,
                   surrogate=surrogate, mc_check=mc_check, shapley=shapley, **common)

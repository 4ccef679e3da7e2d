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

Both report one-at-a-time swings (each input at its 5th and 95th percentile, the others nominal) for the
total distance and the margin, and rank the inputs by their influence on the overrun itself: Sobol
indices of the overrun indicator 1{total > LDA} by Monte Carlo on the real solver.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import LandriskError
from landrisk.model import KEYS, Scenario, solve_landings
from landrisk.studies.assess import AssessSettings, assess
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
from landrisk.uq.rare import form

__all__ = ["ChaosSummary", "InputRank", "MonteCarloCheck", "RankSettings", "Ranking", "SurrogateSample",
           "TailCheck", "rank"]

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
    max_tail_error: float = 0.01  # RMS relative error of the surrogate on the tail samples
    mc_check: int = 100_000
    risk_samples: int = 1 << 16
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
    """The surrogate against the real solver on samples in its tail and near the runway end."""

    calls: int
    rel_rms: float
    max_rel: float
    bias_rel: float
    near_runway_end: int
    misclassified_overruns: int
    passed: bool


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
    chaos: ChaosSummary | None = None
    tail: TailCheck | None = None
    surrogate: SurrogateSample | None = None
    mc_check: MonteCarloCheck | None = None
    warnings: list[str] = field(default_factory=list)
    form_importance: dict[str, float] = field(default_factory=dict)  # alpha^2 at the design point
    form_beta: float | None = None
    record: Mapping[str, Any] = field(default_factory=dict)  # how the inputs were specified

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
    scenario: Scenario, problem: Problem, rng: np.random.Generator
) -> tuple[dict[str, float], float | None, int]:
    """FORM importance factors alpha^2 of the continuous inputs at the design point of the branch that
    contributes most to P(overrun) (Hasofer & Lind 1974; see landrisk.uq.rare)."""
    disc, _, cont = split_discrete(problem)
    if cont.dimension == 0:
        return {}, None, 0
    best, calls = None, 0
    for b in discrete_branches(problem, disc):
        g, _ = limit_state(scenario, cont, b.values)
        dps, c = form(g, cont.dimension, seed=rng)
        calls += c
        if dps[0].converged and (best is None or b.probability * dps[0].probability > best[0]):
            best = (b.probability * dps[0].probability, dps[0])
    if best is None:
        return {}, None, calls
    dp = best[1]
    return {n: float(a) for n, a in zip(cont.names, dp.importance, strict=True)}, dp.beta, calls


def _overrun_indicator_indices(
    scenario: Scenario, problem: Problem, s: RankSettings, rng: np.random.Generator
) -> tuple[MonteCarloSobol, int, list[str]]:
    """Sobol indices of the overrun indicator by Monte Carlo on the solver, the events behind them."""
    indicator = _matrix_model(scenario, problem.names)
    risk = sobol_monte_carlo(problem, lambda x: (indicator(x)[:, 4] < 0).astype(float), s.risk_samples,
                             seed=rng, conf=s.confidence, bootstrap=100)
    events = round(risk.mean * 2 * s.risk_samples)
    notes = []
    if events < 30:
        notes.append(f"only {events} overruns among the {2 * s.risk_samples:,} samples behind the "
                     "overrun-indicator indices: they are rough (see their intervals)")
    return risk, events, notes


def rank(scenario: Scenario, problem: Problem, settings: RankSettings | None = None) -> Ranking:
    """Rank the uncertain inputs of ``scenario`` by their Sobol indices (see the module docstring)."""
    s = settings or RankSettings()
    if problem.dimension == 0:
        raise LandriskError(f"{scenario.source}: the scenario has no uncertain inputs to rank")
    if s.method not in ("pce", "mc"):
        raise LandriskError(f"--method must be pce or mc, not {s.method!r}")
    rng = normalize_seed(s.seed)
    swings = _swings(scenario, problem)
    risk, risk_events, warnings = _overrun_indicator_indices(scenario, problem, s, rng)
    breakdown = {"one-at-a-time swings": 2 * problem.dimension, "overrun-indicator indices": risk.calls}
    form_importance, form_beta, form_calls = _form_importance(scenario, problem, rng)
    breakdown["FORM importance factors"] = form_calls
    common = {"risk": risk, "risk_events": risk_events, "form_importance": form_importance,
              "form_beta": form_beta, "warnings": warnings}
    if s.method == "mc":
        return _rank_monte_carlo(scenario, problem, s, rng, swings, breakdown, common)
    return _rank_chaos(scenario, problem, s, rng, swings, breakdown, common)


def _rank_monte_carlo(scenario: Scenario, problem: Problem, s: RankSettings, rng: np.random.Generator,
                      swings: list[tuple[float, float, float, float]], breakdown: dict[str, int],
                      common: dict) -> Ranking:
    """Sobol indices of the total distance by the pick-freeze estimators on the real solver."""
    d = problem.dimension
    n = max((s.calls or 8192 * (d + 2)) // (d + 2), 64)
    total_model = _matrix_model(scenario, problem.names)
    mc = sobol_monte_carlo(problem, lambda x: total_model(x)[:, 0], n, seed=rng, conf=s.confidence)
    inputs = [InputRank(name, float(mc.first[i]), float(mc.total[i]),
                        (float(mc.first_ci[i, 0]), float(mc.first_ci[i, 1])),
                        (float(mc.total_ci[i, 0]), float(mc.total_ci[i, 1])), *swings[i],
                        problem.marginals[i].discrete)
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


def _tail_check(f: _Fits, s: RankSettings, rng: np.random.Generator, xi_all: Array, pred: Array,
                lab: Array, p99: float) -> TailCheck:
    """The real solver on surrogate samples in the tail (above the surrogate's P99) and nearest the
    runway end."""
    total, margin = pred[:, 0], pred[:, 4]
    tail = np.flatnonzero(total >= p99)
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
    wrong = int(np.sum((margin[picks] < 0) != (truth[:, 4] < 0)))
    rms = float(np.sqrt(np.mean(rel**2)))
    passed = rms <= s.max_tail_error and wrong <= 0.1 * max(int(edge.sum()), 1)
    return TailCheck(int(picks.size), rms, float(np.max(np.abs(rel))), float(np.mean(rel)), int(edge.sum()),
                     wrong, bool(passed))


def _monte_carlo_check(scenario: Scenario, problem: Problem, s: RankSettings,
                       surrogate: SurrogateSample) -> MonteCarloCheck:
    """A Monte Carlo run of the real solver, and the surrogate's relative differences from it."""
    a = assess(scenario, problem, AssessSettings(samples=s.mc_check, seed=s.seed, sampler="sobol"))
    mc_pct = {p.p: p for p in a.percentiles["total_m"]}
    sur_pct = {p.p: p for p in surrogate.percentiles}
    mean, sd = a.moments["total_m"][0], a.moments["total_m"][1]
    p50, p99 = mc_pct[50.0].value, mc_pct[99.0].value
    assert p50 is not None and p99 is not None and sur_pct[50.0].value is not None
    assert sur_pct[99.0].value is not None
    rel = {"mean": surrogate.mean_m / mean - 1, "sd": surrogate.sd_m / sd - 1,
           "p50": sur_pct[50.0].value / p50 - 1, "p99": sur_pct[99.0].value / p99 - 1}
    return MonteCarloCheck(s.mc_check, mean, sd, p50, p99, a.p_overrun, a.sorted_total(), rel)


def _rank_chaos(scenario: Scenario, problem: Problem, s: RankSettings, rng: np.random.Generator,
                swings: list[tuple[float, float, float, float]], breakdown: dict[str, int],
                common: dict) -> Ranking:
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
    p99 = next(p.value for p in surrogate_pct if p.p == 99.0)
    assert p99 is not None
    tail = _tail_check(f, s, rng, xi_all, pred, lab, p99)
    breakdown["tail check"] = tail.calls
    if not tail.passed:
        warnings.append(f"tail check failed: the surrogate is off by {100 * tail.rel_rms:.1f} % (RMS) on "
                        f"{tail.calls} tail samples and misclassifies {tail.misclassified_overruns} near the "
                        "runway end; its P99 and P(overrun) are not reliable (use landrisk assess)")
    surrogate = SurrogateSample(int(total.size), float(total_si.mean), float(np.sqrt(total_si.variance)),
                                surrogate_pct,
                                event_probability(int(np.sum(margin < 0)), total.size, s.confidence),
                                sorted_total)
    mc_check = None
    if s.mc_check > 0:
        mc_check = _monte_carlo_check(scenario, problem, s, surrogate)
        breakdown["Monte Carlo check"] = s.mc_check

    by_name = dict(zip(problem.names, swings, strict=True))
    inputs = []
    for n_, f1, ft in zip(total_si.names, total_si.first, total_si.total, strict=True):
        keys = [n_] if n_ in by_name else [problem.names[i] for i in disc]
        sw = by_name[keys[0]] if len(keys) == 1 else (float("nan"),) * 4
        inputs.append(InputRank(n_, float(f1), float(ft), None, None, *sw, n_ not in names))
    second = sorted(((a, b, v) for (a, b), v in total_si.second.items()), key=lambda t: -t[2])[:3]
    return Ranking(scenario, problem, s, "pce", f.per_branch * len(f.branches), breakdown,
                   sorted(inputs, key=lambda r: -r.total), second, phase_idx, chaos=chaos, tail=tail,
                   surrogate=surrogate, mc_check=mc_check, **common)

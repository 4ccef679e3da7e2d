"""Rare overrun probabilities: FORM, importance sampling and subset simulation on the landing model.

The limit state is the margin g = LDA - total landing distance [m], as a function of independent standard
normal variables u (see :func:`landrisk.studies.binding.limit_state`). Discrete inputs (reverser used,
runway condition code) are handled by conditioning on each combination of their values and mixing by its
probability: P = sum_b p_b P_b, Var = sum_b p_b^2 Var_b.

FORM and importance sampling rely on design points; with several failure regions they can give a tight
interval around a wrong answer. The study therefore searches from several starts and, for those two
methods, cross-checks with a modest subset simulation (which needs no design point): when the two
intervals do not overlap it warns.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import stats

from landrisk.errors import LandriskError
from landrisk.model import Scenario, solve_landings
from landrisk.studies.assess import AssessSettings, assess
from landrisk.studies.binding import Branch, discrete_branches, limit_state, split_discrete
from landrisk.uq import Problem, normalize_seed
from landrisk.uq.rare import (
    DesignPoint,
    RareEstimate,
    exceedance_by_subsets,
    form,
    importance_sampling,
    intervals_disagree,
    subset_simulation,
)

__all__ = ["RARE_METHODS", "BranchResult", "CrossCheck", "RareAssessment", "RareSettings", "RiskCurve",
           "rare_assess", "solve_check"]

RARE_METHODS = ("form", "importance", "subset")
#: With subset simulation, a discrete branch whose pilot contribution is below this share of the total
#: keeps its pilot estimate instead of a full run.
PILOT_SHARE = 0.01

Array = NDArray[np.float64]


@dataclass(frozen=True)
class RareSettings:
    """How the rare-event assessment is run."""

    method: str = "importance"
    seed: int = 1
    starts: int = 6  # design-point searches (the origin and random starts)
    target_cov: float = 0.1
    max_calls: int = 10_000  # importance sampling, per branch
    subset_samples: int = 1000  # per level and replicate
    subset_replicates: int = 4
    cross_check: bool = True
    risk_curve: bool = True
    confidence: float = 0.95


@dataclass(frozen=True)
class BranchResult:
    """One discrete branch: its values, its probability and the estimate of P(overrun | branch)."""

    values: dict[str, Any]
    probability: float
    estimate: RareEstimate


@dataclass(frozen=True)
class CrossCheck:
    """The subset-simulation estimate beside FORM or importance sampling, mixed over the branches."""

    probability: float
    ci: tuple[float, float]
    calls: int


@dataclass(frozen=True)
class RiskCurve:
    """P(total > LDA) against the LDA [m]: subset simulation mixed over the branches, FORM points and a
    crude Monte Carlo where it has at least 10 events (NaN elsewhere)."""

    lda_m: Array
    p_subset: Array
    subset_calls: int
    p_mc: Array
    mc_samples: int
    form_points: list[tuple[float, float]]  # (LDA [m], P by FORM)
    form_calls: int


@dataclass(frozen=True)
class RareAssessment:
    """The result of :func:`rare_assess`."""

    scenario: Scenario
    problem: Problem
    settings: RareSettings
    method: str
    probability: float
    cov: float
    ci: tuple[float, float]
    calls: int
    converged: bool
    branches: list[BranchResult]
    design_point: dict[str, float]  # input -> value (the key's unit), from the dominant branch
    importance: dict[str, float]  # input -> alpha^2
    beta: float | None
    messages: list[str] = field(default_factory=list)
    cross_check: CrossCheck | None = None
    risk_curve: RiskCurve | None = None
    record: Mapping[str, Any] = field(default_factory=dict)  # how the inputs were specified


def rare_assess(scenario: Scenario, problem: Problem, settings: RareSettings | None = None) -> RareAssessment:
    """P(overrun) of ``scenario`` by FORM, importance sampling or subset simulation (see module doc)."""
    s = settings or RareSettings()
    if s.method not in RARE_METHODS:
        raise LandriskError(f"--method must be one of mc, {', '.join(RARE_METHODS)}; not {s.method!r}")
    if problem.dimension == 0:
        raise LandriskError(f"{scenario.source}: the scenario has no uncertain inputs")
    disc, _, cont = split_discrete(problem)
    if cont.dimension == 0:
        raise LandriskError("the rare-event methods need at least one continuous uncertain input")
    rng = normalize_seed(s.seed)
    branches = discrete_branches(problem, disc)
    messages: list[str] = []
    checks: list[tuple[float, RareEstimate]] = []
    pilots, pilot_total = _pilots(scenario, cont, branches, s, rng)
    results = []
    for k, b in enumerate(branches):
        g, _ = limit_state(scenario, cont, b.values)
        if s.method == "subset":
            est = _subset_branch(g, cont.dimension, b, pilots.get(k), pilot_total, s, rng, messages)
        else:
            est = _design_point_branch(g, cont.dimension, b, s, rng, messages)
            if s.cross_check:
                checks.append((b.probability, subset_simulation(g, cont.dimension, n=500, seed=rng,
                                                                replicates=2, conf=s.confidence)))
        if not est.converged:
            messages.append(f"{b.label}: {s.method} did not converge: {est.message}")
        results.append(BranchResult(b.values, b.probability, est))
    prob, cov, ci = _mix(results, s)
    converged = all(r.estimate.converged for r in results)
    calls = sum(r.estimate.calls for r in results)
    design, importance, beta = _design_point(cont, results, prob)
    cross = _cross_check(checks, s, prob, cov, ci, calls, converged, messages) if checks else None
    curve = _risk_curve(scenario, problem, cont, branches, s, rng) if s.risk_curve else None
    return RareAssessment(scenario, problem, s, s.method, prob, cov, ci, calls, converged, results, design,
                          importance, beta, messages, cross, curve)


def _pilots(scenario: Scenario, cont: Problem, branches: list[Branch], s: RareSettings,
            rng: np.random.Generator) -> tuple[dict[int, RareEstimate], float]:
    """With subset simulation and several branches, a short pilot run per branch and their mixed total;
    the full run then goes only where the contribution p_b P_b matters."""
    if s.method != "subset" or len(branches) <= 1:
        return {}, 0.0
    pilots = {}
    for k, b in enumerate(branches):
        g, _ = limit_state(scenario, cont, b.values)
        pilots[k] = subset_simulation(g, cont.dimension, n=max(200, s.subset_samples // 4), seed=rng,
                                      replicates=1, conf=s.confidence)
    total = sum(b.probability * pilots[k].probability for k, b in enumerate(branches) if pilots[k].converged)
    return pilots, total


def _subset_branch(g: Any, d: int, b: Branch, pilot: RareEstimate | None, pilot_total: float,
                   s: RareSettings, rng: np.random.Generator, messages: list[str]) -> RareEstimate:
    """Subset simulation on one branch, or its pilot estimate where the branch hardly contributes."""
    small = pilot is not None and b.probability * pilot.probability < PILOT_SHARE * pilot_total
    if pilot is not None and pilot.converged and small:
        messages.append(f"{b.label}: contributes under {100 * PILOT_SHARE:g} % of P(overrun); its "
                        f"pilot estimate ({pilot.calls:,} calls) is kept")
        return pilot
    est = subset_simulation(g, d, n=s.subset_samples, seed=rng, replicates=s.subset_replicates,
                            conf=s.confidence)
    if pilot is not None:
        est = RareEstimate(est.method, est.probability, est.cov, est.ci, est.calls + pilot.calls,
                           est.converged, est.message)
    return est


def _design_point_branch(g: Any, d: int, b: Branch, s: RareSettings, rng: np.random.Generator,
                         messages: list[str]) -> RareEstimate:
    """FORM, or importance sampling around the design points, on one branch."""
    dps, calls = form(g, d, starts=s.starts, seed=rng)
    if len([q for q in dps if q.converged]) > 1:
        messages.append(f"{b.label}: {len(dps)} design points found; importance sampling uses them "
                        "all, FORM only the nearest")
    if s.method == "form":
        dp = dps[0]
        return RareEstimate("form", dp.probability, 0.0, (dp.probability, dp.probability), calls,
                            dp.converged, "" if dp.converged else "the design-point search did not "
                            f"converge in {dp.iterations} iterations", dps)
    return importance_sampling(g, [q for q in dps if q.converged] or dps[:1], seed=rng,
                               target_cov=s.target_cov, max_calls=s.max_calls, conf=s.confidence,
                               calls_before=calls)


def _mix(results: list[BranchResult], s: RareSettings) -> tuple[float, float, tuple[float, float]]:
    """The mixture over branches: P = sum p_b P_b, Var = sum (p_b sd_b)^2, and a normal interval."""
    prob = sum(b.probability * b.estimate.probability for b in results)
    var = sum((b.probability * b.estimate.cov * b.estimate.probability) ** 2 for b in results
              if math.isfinite(b.estimate.cov))
    cov = math.sqrt(var) / prob if prob > 0 else math.inf
    z = stats.norm.ppf(0.5 + s.confidence / 2)
    half = z * math.sqrt(var)
    ci = (max(prob - half, 0.0), prob + half) if s.method != "form" else (prob, prob)
    return prob, cov, ci


def _design_point(cont: Problem, results: list[BranchResult], prob: float
                  ) -> tuple[dict[str, Any], dict[str, float], float | None]:
    """The design point of the branch that contributes most, in physical units, its importance factors
    alpha^2 and the generalised reliability index -Phi^-1(P) of the mixture."""
    dominant = max(results, key=lambda b: b.probability * b.estimate.probability)
    if not dominant.estimate.design_points:
        return {}, {}, None
    dp: DesignPoint = dominant.estimate.design_points[0]
    x = cont.from_standard_normal(dp.u[None, :])[0]
    design = {**{k: float(v) for k, v in zip(cont.names, x, strict=True)}, **dict(dominant.values)}
    importance = {k: float(a) for k, a in zip(cont.names, dp.importance, strict=True)}
    beta = float(-stats.norm.ppf(prob)) if prob > 0 else math.inf
    return design, importance, beta


def _cross_check(checks: list[tuple[float, RareEstimate]], s: RareSettings, prob: float, cov: float,
                 ci: tuple[float, float], calls: int, converged: bool, messages: list[str]) -> CrossCheck:
    """The subset cross-check mixed over the branches; a warning when its interval and the method's do
    not overlap."""
    c_prob = sum(p * c.probability for p, c in checks)
    c_var = sum((p * c.cov * c.probability) ** 2 for p, c in checks if math.isfinite(c.cov))
    t = stats.norm.ppf(0.5 + s.confidence / 2)
    c_ci = (max(c_prob - t * math.sqrt(c_var), 0.0), c_prob + t * math.sqrt(c_var))
    cross = CrossCheck(c_prob, c_ci, sum(c.calls for _, c in checks))
    mixed = RareEstimate(s.method, prob, cov, ci, calls, converged)
    if intervals_disagree(mixed, RareEstimate("subset", c_prob, 0.0, c_ci, cross.calls, True)):
        messages.append(f"WARNING: {s.method} gives {prob:.3e} but subset simulation, which needs no "
                        f"design point, gives {c_prob:.3e} [{c_ci[0]:.2e}, {c_ci[1]:.2e}]: the intervals "
                        "do not overlap (several failure regions, or a design point that is not the most "
                        "probable); trust the subset estimate or use --method subset")
    return cross


def _risk_curve(scenario: Scenario, problem: Problem, cont: Problem, branches: list[Branch],
                s: RareSettings, rng: np.random.Generator) -> RiskCurve:
    """P(total > LDA) against LDA, from 1e-1 down to 1e-9: subset simulation per branch, mixed; FORM too."""
    grid_p = np.logspace(-1, -9, 33)
    curves, calls = [], 0
    for b in branches:
        _, model = limit_state(scenario, cont, b.values)

        def total(u: Array, model: Any = model) -> Array:
            return model(cont.from_standard_normal(u))["total_m"]

        y, py, c = exceedance_by_subsets(total, cont.dimension, p_min=1e-9, n=s.subset_samples, seed=rng)
        calls += c
        curves.append((b.probability, y, py))
    lo = min(y.min() for _, y, _ in curves)
    hi = max(y.max() for _, y, _ in curves)
    lda = np.linspace(lo, hi, 400)
    mixed = np.zeros_like(lda)
    for p, y, py in curves:  # P_b(total > L), stepwise from the sorted levels
        order = np.argsort(y)
        ys, ps = y[order], py[order]
        idx = np.searchsorted(ys, lda, side="right")
        mixed += p * np.where(idx < ys.size, ps[np.minimum(idx, ys.size - 1)], 0.0)
    form_pts, form_calls = _form_points(scenario, cont, branches, lda, mixed, rng)
    keep = mixed >= grid_p[-1]
    # Crude Monte Carlo for the upper part of the curve, where it has at least 10 events.
    n_mc = 100_000
    a = assess(scenario, problem, AssessSettings(samples=n_mc, seed=int(rng.integers(2**31))))
    xs = a.sorted_total()
    p_mc = (n_mc - np.searchsorted(xs, lda[keep], side="right")) / n_mc
    p_mc = np.where(p_mc * n_mc >= 10, p_mc, np.nan)
    return RiskCurve(lda[keep], mixed[keep], calls, p_mc, n_mc, form_pts, form_calls)


def _form_points(scenario: Scenario, cont: Problem, branches: list[Branch], lda: Array, mixed: Array,
                 rng: np.random.Generator) -> tuple[list[tuple[float, float]], int]:
    """FORM at the runway lengths where the subset curve is near 1e-2, 1e-4, 1e-6 and 1e-8."""
    points, calls = [], 0
    for target in (1e-2, 1e-4, 1e-6, 1e-8):
        i = int(np.argmin(np.abs(np.log(np.maximum(mixed, 1e-300)) - np.log(target))))
        length = float(lda[i])
        pf = 0.0
        for b in branches:
            g, _ = limit_state(scenario.with_values(**{"runway.lda": length}), cont, b.values)
            dps, c = form(g, cont.dimension, starts=1, seed=rng)
            calls += c
            pf += b.probability * dps[0].probability
        points.append((length, pf))
    return points, calls


def solve_check(scenario: Scenario, design_point: dict[str, float]) -> float:
    """The margin of the deterministic landing at the design point (about 0 m if the search converged)."""
    res = solve_landings(scenario.case({k: np.array([v]) for k, v in design_point.items()}))
    return float(res.margin_m[0])

"""Rare overrun probabilities: FORM, importance sampling and subset simulation on the landing model.

The limit state is the margin g = LDA - total landing distance [m], as a function of independent standard
normal variables u (u -> Phi(u) -> the scenario's Gaussian copula and marginals -> inputs). Discrete
inputs (reverser used, runway condition code) are handled by conditioning on each combination of their
values and mixing by its probability: P = sum_b p_b P_b, Var = sum_b p_b^2 Var_b.

FORM and importance sampling rely on design points; with several failure regions they can give a tight
interval around a wrong answer. The study therefore searches from several starts and, for those two
methods, cross-checks with a modest subset simulation (which needs no design point): when the two
intervals do not overlap it warns.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import special, stats

from landrisk.errors import LandriskError
from landrisk.model import Scenario, solve_landings
from landrisk.studies.assess import AssessSettings, assess, landing_model
from landrisk.studies.branches import discrete_branches as _branches
from landrisk.studies.branches import split_discrete as _split
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

__all__ = ["RARE_METHODS", "RareAssessment", "RareSettings", "limit_state", "rare_assess"]

RARE_METHODS = ("form", "importance", "subset")
#: With subset simulation, a discrete branch whose pilot contribution is below this share of the total
#: keeps its pilot estimate instead of a full run.
PILOT_SHARE = 0.01


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
    values: dict[str, Any]
    probability: float
    estimate: RareEstimate


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
    cross_check_probability: tuple[float, tuple[float, float], int] | None = None
    risk_curve: dict[str, Any] = field(default_factory=dict)


def limit_state(scenario: Scenario, problem: Problem, values: dict[str, Any]):
    """g(u) = margin [m] in the standard normal space of ``problem`` (the continuous inputs), with the
    discrete inputs fixed at ``values``; and the underlying landing model."""
    model = landing_model(scenario.with_values(**values) if values else scenario, problem.names)

    def g(u: NDArray[np.float64]) -> NDArray[np.float64]:
        x = problem.transform(np.clip(special.ndtr(u), 1e-300, 1 - 2.0**-53))
        return model(x)["margin_m"]

    return g, model


def rare_assess(scenario: Scenario, problem: Problem, settings: RareSettings | None = None) -> RareAssessment:
    """P(overrun) of ``scenario`` by FORM, importance sampling or subset simulation (see module doc)."""
    s = settings or RareSettings()
    if s.method not in RARE_METHODS:
        raise LandriskError(f"--method must be one of mc, {', '.join(RARE_METHODS)}; not {s.method!r}")
    if problem.dimension == 0:
        raise LandriskError(f"{scenario.source}: the scenario has no uncertain inputs")
    disc, _, cont = _split(problem)
    if cont.dimension == 0:
        raise LandriskError("the rare-event methods need at least one continuous uncertain input")
    rng = normalize_seed(s.seed)
    d = cont.dimension
    results: list[BranchResult] = []
    checks: list[tuple[float, RareEstimate]] = []
    messages: list[str] = []
    branches = _branches(problem, disc)
    pilots: dict[int, RareEstimate] = {}
    if s.method == "subset" and len(branches) > 1:
        # A short pilot run per branch; the full run goes only where the contribution p_b P_b matters.
        for k, (values, _) in enumerate(branches):
            g, _ = limit_state(scenario, cont, values)
            pilots[k] = subset_simulation(g, d, n=max(200, s.subset_samples // 4), seed=rng, replicates=1,
                                          conf=s.confidence)
        total = sum(p * pilots[k].probability for k, (_, p) in enumerate(branches) if pilots[k].converged)
    for k, (values, p) in enumerate(branches):
        g, _ = limit_state(scenario, cont, values)
        label = ", ".join(f"{k} = {v}" for k, v in values.items()) or "all landings"
        if s.method == "subset":
            pilot = pilots.get(k)
            if pilot is not None and pilot.converged and p * pilot.probability < PILOT_SHARE * total:
                est = pilot
                messages.append(f"{label}: contributes under {100 * PILOT_SHARE:g} % of P(overrun); its "
                                f"pilot estimate ({pilot.calls:,} calls) is kept")
            else:
                est = subset_simulation(g, d, n=s.subset_samples, seed=rng, replicates=s.subset_replicates,
                                        conf=s.confidence)
                if pilot is not None:
                    est = RareEstimate(est.method, est.probability, est.cov, est.ci, est.calls + pilot.calls,
                                       est.converged, est.message)
        else:
            dps, calls = form(g, d, starts=s.starts, seed=rng)
            if len([q for q in dps if q.converged]) > 1:
                messages.append(f"{label}: {len(dps)} design points found; importance sampling uses them "
                                "all, FORM only the nearest")
            if s.method == "form":
                dp = dps[0]
                est = RareEstimate("form", dp.probability, 0.0, (dp.probability, dp.probability), calls,
                                   dp.converged, "" if dp.converged else "the design-point search did not "
                                   f"converge in {dp.iterations} iterations", dps)
            else:
                est = importance_sampling(g, [q for q in dps if q.converged] or dps[:1], seed=rng,
                                          target_cov=s.target_cov, max_calls=s.max_calls,
                                          conf=s.confidence, calls_before=calls)
            if s.cross_check:
                checks.append((p, subset_simulation(g, d, n=500, seed=rng, replicates=2, conf=s.confidence)))
        if not est.converged:
            messages.append(f"{label}: {s.method} did not converge: {est.message}")
        results.append(BranchResult(values, p, est))
    prob = sum(b.probability * b.estimate.probability for b in results)
    var = sum((b.probability * b.estimate.cov * b.estimate.probability) ** 2 for b in results
              if math.isfinite(b.estimate.cov))
    cov = math.sqrt(var) / prob if prob > 0 else math.inf
    z = stats.norm.ppf(0.5 + s.confidence / 2)
    half = z * math.sqrt(var)
    ci = (max(prob - half, 0.0), prob + half) if s.method != "form" else (prob, prob)
    converged = all(b.estimate.converged for b in results)
    calls = sum(b.estimate.calls for b in results)
    dominant = max(results, key=lambda b: b.probability * b.estimate.probability)
    design, importance, beta = {}, {}, None
    if dominant.estimate.design_points:
        dp: DesignPoint = dominant.estimate.design_points[0]
        x = cont.transform(special.ndtr(dp.u)[None, :])[0]
        design = {**{k: float(v) for k, v in zip(cont.names, x, strict=True)},
                  **{k: v for k, v in dominant.values.items()}}
        importance = {k: float(a) for k, a in zip(cont.names, dp.importance, strict=True)}
        beta = float(-stats.norm.ppf(prob)) if prob > 0 else math.inf
    cross = None
    if checks:
        c_prob = sum(p * c.probability for p, c in checks)
        c_var = sum((p * c.cov * c.probability) ** 2 for p, c in checks if math.isfinite(c.cov))
        t = stats.norm.ppf(0.5 + s.confidence / 2)
        c_ci = (max(c_prob - t * math.sqrt(c_var), 0.0), c_prob + t * math.sqrt(c_var))
        cross = (c_prob, c_ci, sum(c.calls for _, c in checks))
        mixed = RareEstimate(s.method, prob, cov, ci, calls, converged)
        if intervals_disagree(mixed, RareEstimate("subset", c_prob, 0.0, c_ci, cross[2], True)):
            messages.append(f"WARNING: {s.method} gives {prob:.3e} but subset simulation, which needs no "
                            f"design point, gives {c_prob:.3e} [{c_ci[0]:.2e}, {c_ci[1]:.2e}]: the intervals "
                            "do not overlap (several failure regions, or a design point that is not the most "
                            "probable); trust the subset estimate or use --method subset")
    curve = _risk_curve(scenario, problem, cont, disc, s, rng) if s.risk_curve else {}
    return RareAssessment(scenario, problem, s, s.method, prob, cov, ci, calls, converged, results, design,
                          importance, beta, messages, cross, curve)


def _risk_curve(scenario: Scenario, problem: Problem, cont: Problem, disc: list[int], s: RareSettings,
                rng: np.random.Generator) -> dict[str, Any]:
    """P(total > LDA) against LDA, from 1e-1 down to 1e-9: subset simulation per branch, mixed; FORM too."""
    grid_p = np.logspace(-1, -9, 33)
    curves, form_pts, calls = [], [], 0
    branches = _branches(problem, disc)
    for values, p in branches:
        _, model = limit_state(scenario, cont, values)

        def total(u: NDArray, model=model) -> NDArray:
            return model(cont.transform(np.clip(special.ndtr(u), 1e-300, 1 - 2.0**-53)))["total_m"]

        y, py, c = exceedance_by_subsets(total, cont.dimension, p_min=1e-9, n=s.subset_samples, seed=rng)
        calls += c
        curves.append((p, y, py))
    lo = min(y.min() for _, y, _ in curves)
    hi = max(y.max() for _, y, _ in curves)
    lda = np.linspace(lo, hi, 400)
    mixed = np.zeros_like(lda)
    for p, y, py in curves:  # P_b(total > L), stepwise from the sorted levels
        order = np.argsort(y)
        ys, ps = y[order], py[order]
        idx = np.searchsorted(ys, lda, side="right")
        mixed += p * np.where(idx < ys.size, ps[np.minimum(idx, ys.size - 1)], 0.0)
    # FORM at a few runway lengths (the nominal scenario with the LDA changed)
    form_calls = 0
    for target in (1e-2, 1e-4, 1e-6, 1e-8):
        i = int(np.argmin(np.abs(np.log(np.maximum(mixed, 1e-300)) - np.log(target))))
        length = float(lda[i])
        pf = 0.0
        for values, p in branches:
            g, _ = limit_state(scenario.with_values(**{"runway.lda": length}), cont, values)
            dps, c = form(g, cont.dimension, starts=1, seed=rng)
            form_calls += c
            pf += p * dps[0].probability
        form_pts.append((length, pf))
    keep = mixed >= grid_p[-1]
    # Crude Monte Carlo for the upper part of the curve, where it has at least 10 events.
    n_mc = 100_000
    a = assess(scenario, problem, AssessSettings(samples=n_mc, seed=int(rng.integers(2**31))))
    xs = a.sorted_total()
    p_mc = (n_mc - np.searchsorted(xs, lda[keep], side="right")) / n_mc
    p_mc = np.where(p_mc * n_mc >= 10, p_mc, np.nan)
    return {"lda_m": lda[keep], "p_subset": mixed[keep], "subset_calls": calls,
            "p_mc": p_mc, "mc_samples": n_mc, "form_points": form_pts, "form_calls": form_calls}


def rare_record(r: RareAssessment) -> dict[str, Any]:
    """JSON-ready figures of a rare-event assessment (no provenance; the caller adds it)."""
    out = {
        "method": r.method,
        # A method that did not converge gives no estimate; its last value is kept apart.
        "p_overrun": r.probability if r.converged else None,
        "p_overrun_ci95": list(r.ci) if r.converged else None,
        "last_value_not_converged": None if r.converged else r.probability,
        "cov": r.cov,
        "model_calls": r.calls,
        "converged": r.converged,
        "beta": r.beta,
        "lda_m": float(r.scenario.values["runway.lda"]),
        "seed": r.settings.seed,
        "design_point": r.design_point,
        "importance_alpha2": r.importance,
        "branches": [{"values": b.values, "probability": b.probability, "p_overrun": b.estimate.probability,
                      "cov": b.estimate.cov, "ci95": list(b.estimate.ci), "calls": b.estimate.calls,
                      "converged": b.estimate.converged, "message": b.estimate.message,
                      "effective_samples": b.estimate.effective_samples} for b in r.branches],
        "messages": r.messages,
    }
    if r.cross_check_probability:
        p, ci, calls = r.cross_check_probability
        out["cross_check_subset"] = {"p_overrun": p, "ci95": list(ci), "calls": calls}
    if r.risk_curve:
        rc = r.risk_curve
        out["risk_curve"] = {"lda_m": rc["lda_m"].tolist(), "p_subset": rc["p_subset"].tolist(),
                             "subset_calls": rc["subset_calls"], "mc_samples": rc["mc_samples"],
                             "p_mc": [None if np.isnan(v) else float(v) for v in rc["p_mc"]],
                             "form_points": [{"lda_m": a, "p_form": b} for a, b in rc["form_points"]],
                             "form_calls": rc["form_calls"]}
    return out


def solve_check(scenario: Scenario, design_point: dict[str, float]) -> float:
    """The margin of the deterministic landing at the design point (about 0 m if the search converged)."""
    res = solve_landings(scenario.case({k: np.array([v]) for k, v in design_point.items()}))
    return float(res.margin_m[0])

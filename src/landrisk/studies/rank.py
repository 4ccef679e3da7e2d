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

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import LandriskError
from landrisk.model import Scenario, solve_landings
from landrisk.studies.assess import AssessSettings, assess, landing_model
from landrisk.studies.branches import cast_value as _cast
from landrisk.studies.branches import discrete_branches as _branches
from landrisk.studies.branches import split_discrete as _split
from landrisk.uq import (
    ChaosSpace,
    EventProbability,
    MonteCarloSobol,
    Percentile,
    Problem,
    event_probability,
    fit_chaos,
    normalize_seed,
    percentiles,
    sobol_indices,
    sobol_monte_carlo,
)

__all__ = ["InputRank", "RankSettings", "Ranking", "rank"]

_OUTPUTS = ("total_m", "air_distance_m", "free_roll_m", "braking_m", "margin_m")
_PHASES = ("total_m", "air_distance_m", "free_roll_m", "braking_m")
SURROGATE_PERCENTILES = (1.0, 5.0, 50.0, 90.0, 95.0, 99.0, 99.9)


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
    chaos: dict[str, Any] = field(default_factory=dict)  # order, q, terms, hold-out and tail checks
    surrogate: dict[str, Any] = field(default_factory=dict)
    mc_check: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    form_importance: dict[str, float] = field(default_factory=dict)  # alpha^2 at the design point
    form_beta: float | None = None

    @property
    def reliable(self) -> bool:
        """False when the surrogate failed its hold-out or tail check (PCE only)."""
        return self.method == "mc" or bool(self.chaos.get("reliable"))


def _model(scenario: Scenario, keys: tuple[str, ...]) -> Callable[[NDArray], NDArray]:
    f = landing_model(scenario, keys)

    def g(x: NDArray) -> NDArray:
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
        res = solve_landings(scenario.case({name: np.array([_cast(name, lo), _cast(name, hi)])}))
        out.append((lo, hi, float(res.total_m[1] - res.total_m[0]), float(res.margin_m[1] - res.margin_m[0])))
    return out


def _form_importance(
    scenario: Scenario, problem: Problem, rng: np.random.Generator
) -> tuple[dict[str, float], float | None, int]:
    """FORM importance factors alpha^2 of the continuous inputs at the design point of the branch that
    contributes most to P(overrun) (Hasofer & Lind 1974; see landrisk.uq.rare)."""
    from landrisk.studies.rare import limit_state
    from landrisk.uq.rare import form

    disc, _, cont = _split(problem)
    if cont.dimension == 0:
        return {}, None, 0
    best, calls = None, 0
    for values, p in _branches(problem, disc):
        g, _ = limit_state(scenario, cont, values)
        dps, c = form(g, cont.dimension, seed=rng)
        calls += c
        if dps[0].converged and (best is None or p * dps[0].probability > best[0]):
            best = (p * dps[0].probability, dps[0])
    if best is None:
        return {}, None, calls
    dp = best[1]
    return {n: float(a) for n, a in zip(cont.names, dp.importance, strict=True)}, dp.beta, calls


def rank(
    scenario: Scenario, problem: Problem, settings: RankSettings | None = None
) -> Ranking:
    """Rank the uncertain inputs of ``scenario`` by their Sobol indices (see the module docstring)."""
    s = settings or RankSettings()
    if problem.dimension == 0:
        raise LandriskError(f"{scenario.source}: the scenario has no uncertain inputs to rank")
    if s.method not in ("pce", "mc"):
        raise LandriskError(f"--method must be pce or mc, not {s.method!r}")
    rng = normalize_seed(s.seed)
    swings = _swings(scenario, problem)
    warnings: list[str] = []

    # Influence on the overrun itself: Sobol indices of the indicator, by Monte Carlo on the solver.
    indicator = _model(scenario, problem.names)
    risk = sobol_monte_carlo(problem, lambda x: (indicator(x)[:, 4] < 0).astype(float), s.risk_samples,
                             seed=rng, conf=s.confidence, bootstrap=100)
    risk_events = round(risk.mean * 2 * s.risk_samples)
    if risk_events < 30:
        warnings.append(f"only {risk_events} overruns among the {2 * s.risk_samples:,} samples behind the "
                        "overrun-indicator indices: they are rough (see their intervals)")
    breakdown = {"one-at-a-time swings": 2 * problem.dimension, "overrun-indicator indices": risk.calls}
    form_importance, form_beta, form_calls = _form_importance(scenario, problem, rng)
    breakdown["FORM importance factors"] = form_calls

    if s.method == "mc":
        d = problem.dimension
        n = max((s.calls or 8192 * (d + 2)) // (d + 2), 64)
        total_model = _model(scenario, problem.names)
        mc = sobol_monte_carlo(problem, lambda x: total_model(x)[:, 0], n, seed=rng, conf=s.confidence)
        inputs = [InputRank(name, float(mc.first[i]), float(mc.total[i]), tuple(mc.first_ci[i]),
                            tuple(mc.total_ci[i]), *swings[i], problem.marginals[i].discrete)
                  for i, name in enumerate(problem.names)]
        breakdown["Sobol design"] = mc.calls
        return Ranking(scenario, problem, s, "mc", mc.calls, breakdown,
                       sorted(inputs, key=lambda r: -r.total), [], {}, risk, risk_events, warnings=warnings,
                       form_importance=form_importance, form_beta=form_beta)

    disc, cont, cont_problem = _split(problem)
    if not cont:
        raise LandriskError("`rank --method pce` needs at least one continuous uncertain input")
    space = ChaosSpace(cont_problem)
    branches = _branches(problem, disc)
    calls = s.calls or 1000
    per_branch = calls // len(branches)
    n_hold = max(10, round(s.holdout_fraction * per_branch))
    n_train = per_branch - n_hold
    if n_train < 2 * (cont_problem.dimension + 1):
        raise LandriskError(f"--calls {calls} is too few: each of the {len(branches)} branches needs at "
                            f"least {2 * (cont_problem.dimension + 1) + n_hold} calls")
    order_of = sorted(range(len(branches)), key=lambda b: -branches[b][1])
    fits: dict[int, Any] = {}
    hold: dict[int, tuple[NDArray, NDArray]] = {}
    models = {}
    seeds = rng.spawn(len(branches))
    for b in order_of:  # the most probable branch first: it chooses the basis for all
        values, _ = branches[b]
        models[b] = _model(scenario.with_values(**values) if values else scenario, cont_problem.names)
        xi = space.design(per_branch, seeds[b])
        y = models[b](space.to_inputs(xi))
        basis = None if not fits else (fits[order_of[0]].order, fits[order_of[0]].q_norm)
        fits[b] = fit_chaos(space, xi[:n_train], y[:n_train], _OUTPUTS, max_order=s.max_order,
                            order=s.order, basis=basis)
        hold[b] = (y[n_train:, 0], fits[b].predict(xi[n_train:])[:, 0])
    probs = np.array([p for _, p in branches])
    names = list(cont_problem.names)
    disc_name = " & ".join(problem.names[i] for i in disc) if disc else None
    phase_idx = {}
    for k, out in enumerate(_PHASES):
        coefs = [fits[b].coefficients[:, k] for b in range(len(branches))]
        si = sobol_indices(fits[order_of[0]].index, coefs, probs, names,
                           disc_name if len(branches) > 1 else None)
        phase_idx[out] = {n: (float(f), float(t))
                          for n, f, t in zip(si.names, si.first, si.total, strict=True)}
        if out == "total_m":
            total_si = si
    # Hold-out validation, pooled over the branches by probability.
    mse = sum(p * np.mean((t - e) ** 2) for (t, e), p in zip((hold[b] for b in range(len(branches))), probs,
                                                               strict=True))
    rel_rms = float(np.sqrt(mse / total_si.variance)) if total_si.variance > 0 else 0.0
    all_true = np.concatenate([hold[b][0] for b in hold])
    all_err = np.concatenate([hold[b][1] - hold[b][0] for b in hold])
    chaos = {"order": fits[order_of[0]].order, "q_norm": fits[order_of[0]].q_norm,
             "terms": fits[order_of[0]].terms, "branches": len(branches), "training_calls": n_train,
             "holdout_calls": n_hold, "loo_error": float(fits[order_of[0]].loo_error[0]),
             "holdout_rel_error": rel_rms, "holdout_max_error_m": float(np.max(np.abs(all_err))),
             "holdout_max_rel_error": float(np.max(np.abs(all_err) / np.abs(all_true)))}
    breakdown["surrogate training and hold-out"] = per_branch * len(branches)
    if rel_rms > s.max_holdout_error:
        warnings.append(f"the surrogate's hold-out error ({100 * rel_rms:.1f} % of the sd) exceeds "
                        f"{100 * s.max_holdout_error:g} %: its figures are not reliable; raise --calls or "
                        "use --method mc")

    # Sample the surrogate; check its tail against the real solver.
    counts = rng.multinomial(s.surrogate_samples, probs)
    xis, preds, labels = [], [], []
    for b, m in enumerate(counts):
        xi = space.random(int(m), rng)
        xis.append(xi)
        preds.append(fits[b].predict(xi))
        labels.append(np.full(int(m), b))
    xi_all, pred, lab = np.concatenate(xis), np.concatenate(preds), np.concatenate(labels)
    total, margin = pred[:, 0], pred[:, 4]
    sorted_total = np.sort(total)
    surrogate_pct = percentiles(sorted_total, SURROGATE_PERCENTILES, s.confidence, presorted=True)
    p99 = next(p.value for p in surrogate_pct if p.p == 99.0)
    tail = np.flatnonzero(total >= p99)
    pick_tail = rng.choice(tail, size=min(s.tail_checks // 2, tail.size), replace=False)
    pick_edge = np.argsort(np.abs(margin))[: s.tail_checks - pick_tail.size]
    picks = np.unique(np.concatenate([pick_tail, pick_edge]))
    truth = np.empty((picks.size, len(_OUTPUTS)))
    for b in range(len(branches)):
        sel = lab[picks] == b
        if sel.any():
            truth[sel] = models[b](space.to_inputs(xi_all[picks[sel]]))
    rel = (total[picks] - truth[:, 0]) / truth[:, 0]
    edge = np.isin(picks, pick_edge)
    wrong = int(np.sum((margin[picks] < 0) != (truth[:, 4] < 0)))
    tail_rms = float(np.sqrt(np.mean(rel**2)))
    tail_ok = tail_rms <= s.max_tail_error and wrong <= 0.1 * max(int(edge.sum()), 1)
    chaos.update({"tail_check_calls": int(picks.size), "tail_rel_rms": tail_rms,
                  "tail_max_rel": float(np.max(np.abs(rel))), "tail_bias_rel": float(np.mean(rel)),
                  "near_runway_end": int(edge.sum()), "misclassified_overruns": wrong, "tail_ok": tail_ok})
    chaos["reliable"] = bool(rel_rms <= s.max_holdout_error and tail_ok)
    breakdown["tail check"] = int(picks.size)
    if not tail_ok:
        warnings.append(f"tail check failed: the surrogate is off by {100 * tail_rms:.1f} % (RMS) on "
                        f"{picks.size} tail samples and misclassifies {wrong} near the runway end; its P99 "
                        "and P(overrun) are not reliable (use landrisk assess)")
    p_over: EventProbability = event_probability(int(np.sum(margin < 0)), total.size, s.confidence)
    surrogate = {"samples": int(total.size), "mean_m": float(total_si.mean),
                 "sd_m": float(np.sqrt(total_si.variance)), "percentiles": surrogate_pct, "p_overrun": p_over,
                 "sorted_total_m": sorted_total}

    mc_check: dict[str, Any] = {}
    if s.mc_check > 0:
        a = assess(scenario, problem, AssessSettings(samples=s.mc_check, seed=s.seed, sampler="sobol"))
        mc_pct = {p.p: p for p in a.percentiles["total_m"]}
        sur_pct = {p.p: p for p in surrogate_pct}
        mc_check = {"samples": s.mc_check, "mean_m": a.moments["total_m"][0], "sd_m": a.moments["total_m"][1],
                    "p50_m": mc_pct[50.0].value, "p99_m": mc_pct[99.0].value, "p_overrun": a.p_overrun,
                    "sorted_total_m": a.sorted_total()}
        mc_check["rel_diff"] = {
            "mean": surrogate["mean_m"] / mc_check["mean_m"] - 1,
            "sd": surrogate["sd_m"] / mc_check["sd_m"] - 1,
            "p50": sur_pct[50.0].value / mc_check["p50_m"] - 1,
            "p99": sur_pct[99.0].value / mc_check["p99_m"] - 1}
        breakdown["Monte Carlo check"] = s.mc_check

    by_name = dict(zip(problem.names, swings, strict=True))
    inputs = []
    for n_, f1, ft in zip(total_si.names, total_si.first, total_si.total, strict=True):
        keys = [n_] if n_ in by_name else [problem.names[i] for i in disc]
        sw = by_name[keys[0]] if len(keys) == 1 else (float("nan"),) * 4
        inputs.append(InputRank(n_, float(f1), float(ft), None, None, *sw, n_ not in names))
    second = sorted(((a, b, v) for (a, b), v in total_si.second.items()), key=lambda t: -t[2])[:3]
    return Ranking(scenario, problem, s, "pce", per_branch * len(branches), breakdown,
                   sorted(inputs, key=lambda r: -r.total), second, phase_idx, risk, risk_events, chaos,
                   surrogate, mc_check, warnings, form_importance, form_beta)


def ranking_record(r: Ranking) -> dict[str, Any]:
    """JSON-ready figures of a ranking (no provenance; the caller adds it)."""

    def pct(items: list[Percentile]) -> dict[str, Any]:
        return {f"{p.p:g}": p.as_dict() for p in items}

    out: dict[str, Any] = {
        "method": r.method,
        "calls": r.calls,
        "calls_breakdown": r.calls_breakdown,
        "seed": r.settings.seed,
        "reliable": r.reliable,
        "warnings": r.warnings,
        "inputs": [{"name": i.name, "first_order": i.first, "total": i.total,
                    "first_order_ci95": list(i.first_ci) if i.first_ci else None,
                    "total_ci95": list(i.total_ci) if i.total_ci else None,
                    "p5": None if i.discrete and np.isnan(i.p5) else i.p5,
                    "p95": None if i.discrete and np.isnan(i.p95) else i.p95,
                    "swing_total_m": None if np.isnan(i.swing_total_m) else i.swing_total_m,
                    "swing_margin_m": None if np.isnan(i.swing_margin_m) else i.swing_margin_m,
                    "discrete": i.discrete} for i in r.inputs],
        "second_order": [{"pair": [a, b], "index": v} for a, b, v in r.second_order],
        "phase_indices": {ph: {n: {"first_order": f, "total": t} for n, (f, t) in d.items()}
                          for ph, d in r.phase_indices.items()},
    }
    if r.form_importance:
        out["form_importance_alpha2"] = r.form_importance
        out["form_beta"] = r.form_beta
    if r.risk is not None:
        out["overrun_indicator_indices"] = {
            "events": r.risk_events, "samples": 2 * r.settings.risk_samples, "calls": r.risk.calls,
            "inputs": [{"name": n, "first_order": float(f), "total": float(t), "first_order_ci95": list(fc),
                        "total_ci95": list(tc)} for n, f, t, fc, tc in
                       zip(r.risk.names, r.risk.first, r.risk.total, r.risk.first_ci.tolist(),
                           r.risk.total_ci.tolist(), strict=True)]}
    if r.method == "pce":
        out.update({"order": r.chaos["order"], "q_norm": r.chaos["q_norm"],
                    "holdout_rel_error": r.chaos["holdout_rel_error"], "chaos": r.chaos})
        sur = r.surrogate
        out["surrogate"] = {"samples": sur["samples"], "mean_m": sur["mean_m"], "sd_m": sur["sd_m"],
                            "percentiles": pct(sur["percentiles"]), "p_overrun": sur["p_overrun"].as_dict()}
        if r.mc_check:
            m = r.mc_check
            out["mc_check"] = {"samples": m["samples"], "mean_m": m["mean_m"], "sd_m": m["sd_m"],
                               "p50_m": m["p50_m"], "p99_m": m["p99_m"],
                               "p_overrun": m["p_overrun"].as_dict(), "rel_diff": m["rel_diff"]}
    return out

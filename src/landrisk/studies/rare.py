"""Rare overrun probabilities: subset simulation, FORM, SORM and importance sampling on the landing model.

The limit state is the margin g = LDA - total landing distance [m], as a function of independent standard
normal variables u (see :func:`landrisk.studies.binding.limit_state`); a landing that cannot stop has
g = -inf, an overrun. Discrete inputs (reverser used, runway condition code) are handled by conditioning
on each combination of their values and mixing by its probability: P = sum_b p_b P_b, the interval's
half-widths combined as sqrt(sum_b (p_b h_b)^2) on each side (one branch: its own interval).

Every branch is handled:

- first the worst corner of the inputs' bounds (:func:`landrisk.uq.rare.worst_corner_task`): a branch
  whose margin stays positive there cannot overrun and contributes 0 (or, with unbounded inputs, at most
  the probability of leaving the box), said in a plain line naming the inputs at their bounds;
- subset simulation whose levels stall above g = 0 gives an upper bound only;
- a branch whose share of the risk is below :data:`PILOT_SHARE` keeps its first estimate; the others get
  the calls their share calls for: target CoV_b = target / sqrt(s_b), so that the mixture meets the
  target with each branch's cost proportionate to its share s_b.

``auto`` (the default) takes subset simulation as the estimate, which needs no design point and so does
not miss failure regions; FORM gives the design point and importance factors, and importance sampling
around the design points runs beside it as a cross-check: when the two intervals do not overlap it warns
(a missed failure region, or a design point that is not the most probable).

Runs of every branch go side by side (:func:`landrisk.uq.rare.run_tasks`): each step is one call of the
solver with the points of all branches, the discrete inputs as columns.
"""

from __future__ import annotations

import math
from collections.abc import Hashable, Mapping
from dataclasses import dataclass, field
from typing import Any, cast

import numpy as np
from numpy.typing import NDArray
from scipy import stats

from landrisk.errors import LandriskError
from landrisk.model import KEYS, Scenario, solve_landings
from landrisk.studies import shown
from landrisk.studies.assess import AssessSettings, assess
from landrisk.studies.binding import Branch, discrete_branches, landing_model, split_discrete
from landrisk.uq import Problem, normalize_seed
from landrisk.uq.rare import (
    DesignPoint,
    RareEstimate,
    WorstCorner,
    exceedance_task,
    form_task,
    importance_task,
    intervals_disagree,
    pool_replicates,
    run_tasks,
    sorm_task,
    subset_task,
    worst_corner_task,
)

__all__ = ["RARE_METHODS", "BranchResult", "CrossCheck", "RareAssessment", "RareSettings", "RiskCurve",
           "rare_assess", "solve_check"]

RARE_METHODS = ("auto", "subset", "importance", "form", "sorm")
#: A discrete branch whose first estimate is below this share of the total keeps that estimate.
PILOT_SHARE = 0.01
#: The loosest target CoV given to a branch that carries little of the risk.
LOOSEST_COV = 0.5

Array = NDArray[np.float64]


@dataclass(frozen=True)
class RareSettings:
    """How the rare-event assessment is run."""

    method: str = "auto"
    seed: int = 1
    starts: int = 6  # design-point searches (the origin and random starts)
    target_cov: float = 0.1
    max_calls: int = 100_000  # per branch (importance sampling; subset replicates beyond the first)
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
    """The second method beside the estimate, mixed over the branches."""

    method: str
    probability: float
    ci: tuple[float, float]
    calls: int


@dataclass(frozen=True)
class RiskCurve:
    """P(total > LDA) against the LDA [m]: subset simulation mixed over the branches with a Student-t
    interval over its replicates at every point (``converged`` False where no replicate reached it), FORM
    points and a crude Monte Carlo where it has at least 10 events (NaN elsewhere)."""

    lda_m: Array
    p_subset: Array
    ci_lo: Array
    ci_hi: Array
    converged: NDArray[np.bool_]
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
    bound_limited: list[str] = field(default_factory=list)  # inputs whose bound sets the probability
    record: Mapping[str, Any] = field(default_factory=dict)  # how the inputs were specified

    def __repr__(self) -> str:
        return shown.repr_of("RareAssessment", shown.rare_lines(self))

    def _repr_html_(self) -> str:
        return shown.html_of("RareAssessment", shown.rare_lines(self))


class _Evaluator:
    """The margin of every branch in one solver call: the discrete inputs' values as columns.

    Keys are (branch index, LDA shift [m]); g = margin + shift, the margin of a runway ``shift`` longer,
    or ("total", branch) for the landing distance itself. Counts the points per branch.
    """

    def __init__(self, scenario: Scenario, cont: Problem, branches: list[Branch]) -> None:
        self.cont = cont
        self.disc_names = tuple(branches[0].values)
        self.model = landing_model(scenario, cont.names + self.disc_names)
        self.columns = [np.array([float(b.values[k]) for k in self.disc_names]) for b in branches]
        self.calls = [0] * len(branches)
        self.lda = float(scenario.values["runway.lda"])
        self.curve_calls = 0
        self.form_point_calls = 0

    def __call__(self, requests: list[tuple[Hashable, Array]]) -> list[Array]:
        u = np.concatenate([r for _, r in requests])
        x = self.cont.from_standard_normal(u)
        disc = np.concatenate([np.repeat(self.columns[cast(tuple[str, int, float], k)[1]][None, :],
                                         r.shape[0], axis=0) for k, r in requests])
        out = self.model(np.column_stack([x, disc]))
        cuts = np.cumsum([r.shape[0] for _, r in requests])[:-1]
        margins = np.split(np.asarray(out["margin_m"], dtype=float), cuts)
        totals = np.split(np.asarray(out["total_m"], dtype=float), cuts)
        res = []
        for (k, r), m, t in zip(requests, margins, totals, strict=True):
            kind, b, shift = cast(tuple[str, int, float], k)
            if kind == "total":
                self.curve_calls += r.shape[0]
            elif shift != 0:
                self.form_point_calls += r.shape[0]
            else:
                self.calls[b] += r.shape[0]
            res.append(t if kind == "total" else m + shift)
        return res


def _key(b: int, shift: float = 0.0) -> tuple[str, int, float]:
    return ("margin", b, shift)


class _Batch:
    """Tasks of several stages collected and run side by side; ``add`` returns the task's slot."""

    def __init__(self) -> None:
        self.tasks: list[tuple[Hashable, Any]] = []
        self.results: list[Any] = []

    def add(self, key: Hashable, task: Any) -> int:
        self.tasks.append((key, task))
        return len(self.tasks) - 1

    def run(self, ev: _Evaluator) -> None:
        self.results = run_tasks(self.tasks, ev) if self.tasks else []


def rare_assess(scenario: Scenario, problem: Problem, settings: RareSettings | None = None) -> RareAssessment:
    """P(overrun) of ``scenario`` by the chosen method (see the module doc)."""
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
    ev = _Evaluator(scenario, cont, branches)
    messages: list[str] = []
    d = cont.dimension
    estimates: dict[int, RareEstimate] = {}
    for k, wc in _corners(cont, branches, ev).items():
        if wc.g > 0:
            estimates[k] = _unreachable(cont, branches[k], wc, messages)
    live = [k for k in range(len(branches)) if k not in estimates]
    subset_like = s.method in ("auto", "subset")
    # First stage, side by side: design points, the first subset replicates, the risk curve's levels.
    first = _Batch()
    dp_slots = _add_design_points(first, live, d, s, rng) if s.method != "subset" else {}
    reps = {k: max(s.subset_replicates, 2) for k in live}
    sub_slots = _add_subsets(first, reps, d, s.subset_samples, rng) if subset_like else {}
    curve_slots = _add_curve(first, len(branches), d, s, rng) if s.risk_curve else []
    first.run(ev)
    dps = _collect_design_points(first, dp_slots)
    runs = {k: [first.results[i] for i in sub_slots[k]] for k in sub_slots}
    # Second stage: more replicates where a branch's share calls for them, importance sampling, SORM,
    # the cross-check, FORM on the risk curve.
    second = _Batch()
    extra_slots: dict[int, list[int]] = {}
    shares: dict[int, float] = {}
    if subset_like:
        pooled = {k: pool_replicates(runs[k], s.confidence) for k in live}
        shares = _shares(live, branches, {k: pooled[k].probability if pooled[k].converged else 0.0
                                          for k in live})
        more = _extra_replicates(live, branches, pooled, runs, shares, s, messages)
        extra_slots = _add_subsets(second, more,
                                   d, s.subset_samples, rng)
    is_slots = {}
    if s.method == "importance" or (s.method == "auto" and s.cross_check):
        probs = ({k: pooled[k].probability for k in live} if subset_like
                 else {k: dps[k][0].probability for k in live})
        is_slots = _add_importance(second, live, branches, dps, probs, s, rng)
    sorm_slots = ({k: second.add(_key(k), sorm_task(dps[k][0])) for k in live if dps[k][0].converged}
                  if s.method == "sorm" else {})
    check_slots = (_add_subsets(second, {k: 3 for k in live}, d, 500, rng)
                   if s.method in ("importance", "form", "sorm") and s.cross_check else {})
    curve_part = _curve_levels(first, curve_slots, branches, s) if s.risk_curve else None
    form_slots = _add_form_points(second, curve_part, len(branches), d, ev.lda) if curve_part else []
    second.run(ev)
    cross = _collect_second(second, live, branches, estimates, runs, extra_slots, shares, is_slots,
                            sorm_slots, check_slots, dps, s, messages)
    for k in live:
        if len([q for q in dps.get(k, []) if q.converged]) > 1:
            messages.append(f"{branches[k].label}: {len(dps[k])} design points found")
    results = []
    for k, b in enumerate(branches):
        est = estimates[k]
        est = RareEstimate(est.method, est.probability, est.cov, est.ci, ev.calls[k], est.converged,
                           est.message, dps.get(k, est.design_points), est.effective_samples, est.kind,
                           est.replicates, est.failure_u)
        if not est.converged and est.kind == "estimate":
            messages.append(f"{b.label}: {s.method} did not converge: {est.message}")
        results.append(BranchResult(b.values, b.probability, est))
    prob, cov, ci = _mix([(r.probability, r.estimate) for r in results], s.method)
    converged = all(r.estimate.converged or r.estimate.kind != "estimate" for r in results)
    design, importance, beta = _design_point(cont, results, prob)
    check = _cross_check(cross, results, s, prob, ci, messages) if cross else None
    bound = _bound_limited(cont, results, prob, messages)
    curve = (_finish_curve(scenario, problem, curve_part, [second.results[i] for i in form_slots], branches,
                           ev, rng) if curve_part else None)
    return RareAssessment(scenario, problem, s, s.method, prob, cov, ci, sum(ev.calls), converged, results,
                          design, importance, beta, messages, check, curve, bound)


def _collect_second(second: _Batch, live: list[int], branches: list[Branch],
                    estimates: dict[int, RareEstimate],
                    runs: dict[int, list[RareEstimate]], extra_slots: dict[int, list[int]],
                    shares: dict[int, float], is_slots: dict[int, int], sorm_slots: dict[int, int],
                    check_slots: dict[int, list[int]], dps: dict[int, list[DesignPoint]], s: RareSettings,
                    messages: list[str]) -> dict[int, RareEstimate]:
    """The second stage's results into ``estimates``; returns the cross-check's per-branch estimates."""
    cross: dict[int, RareEstimate] = {}
    if s.method in ("auto", "subset"):
        for k in live:
            runs[k] += [second.results[i] for i in extra_slots.get(k, [])]
            estimates[k] = pool_replicates(runs[k], s.confidence)
            _note_target(branches[k], estimates[k], shares[k], len(live), s, messages)
    if is_slots:
        found = {k: second.results[i] for k, i in is_slots.items()}
        if s.method == "importance":
            estimates.update(found)
        else:
            cross = found
    if s.method in ("form", "sorm"):
        estimates.update(_form_estimates(live, dps, {k: second.results[i] for k, i in sorm_slots.items()}))
    if check_slots:
        cross = {k: pool_replicates([second.results[i] for i in check_slots[k]], s.confidence) for k in live}
    return cross


def _corners(cont: Problem, branches: list[Branch], ev: _Evaluator) -> dict[int, WorstCorner]:
    """The worst corner of the inputs' bounds, every branch in one call."""
    lo = np.array([math.isfinite(m.lower) for m in cont.marginals])
    hi = np.array([math.isfinite(m.upper) for m in cont.marginals])
    found = run_tasks([(_key(k), worst_corner_task(lo, hi)) for k in range(len(branches))], ev)
    return dict(enumerate(found))


def _unreachable(cont: Problem, b: Branch, wc: WorstCorner, messages: list[str]) -> RareEstimate:
    """A branch that cannot overrun inside the inputs' bounds: 0, or at most the probability outside."""
    x = cont.from_standard_normal(wc.u[None, :])[0]
    parts = []
    for name, m, ui, xi in zip(cont.names, cont.marginals, wc.u, x, strict=True):
        side = "largest" if ui > 0 else "smallest"
        if math.isfinite(m.upper if ui > 0 else m.lower):
            what = "value" if m.family == "empirical" else "bound"
            unit = KEYS[name].unit if name in KEYS else ""
            parts.append(f"{name} at its {side} {what} {xi:.4g} {unit}".rstrip())
    at = "; ".join(parts)
    if wc.outside == 0:
        messages.append(f"{b.label}: cannot overrun: at the worst corner of the inputs' bounds ({at}) "
                        f"the margin is still {wc.g:.0f} m; contributes 0 (taking the margin as monotone "
                        "in each input)")
        return RareEstimate("corner", 0.0, 0.0, (0.0, 0.0), 0, True, "cannot overrun inside the bounds",
                            kind="zero")
    messages.append(f"{b.label}: no overrun inside the box of the bounds ({at}) and +-8 standard "
                    f"deviations of the unbounded inputs, margin at least {wc.g:.0f} m there; contributes "
                    f"at most {wc.outside:.1e} (the probability of leaving the box)")
    return RareEstimate("corner", 0.0, 0.0, (0.0, wc.outside), 0, True, "upper bound only",
                        kind="upper bound")


def _add_design_points(batch: _Batch, live: list[int], d: int, s: RareSettings,
                       rng: np.random.Generator) -> dict[int, list[int]]:
    """FORM from the origin on every live branch (strict tolerance) and from ``starts - 1`` random starts
    on random directions at radius 3 (looser tolerance, fewer iterations: they only look for other
    failure regions)."""
    slots: dict[int, list[int]] = {}
    for k in live:
        slots[k] = [batch.add(_key(k), form_task(np.zeros(d)))]
        slots[k] += [batch.add(_key(k), form_task(3.0 * v / np.linalg.norm(v), tol=1e-3, max_iter=40))
                     for v in rng.normal(size=(s.starts - 1, d))]
    return slots


def _collect_design_points(batch: _Batch, slots: dict[int, list[int]]) -> dict[int, list[DesignPoint]]:
    """Each branch's distinct design points (0.2 apart in u), the most probable first."""
    out: dict[int, list[DesignPoint]] = {}
    for k, idx in slots.items():
        ordered = sorted((batch.results[i] for i in idx), key=lambda p: (not p.converged, p.beta))
        distinct: list[DesignPoint] = []
        for p in ordered:
            if not distinct or (p.converged and all(np.linalg.norm(p.u - q.u) > 0.2 for q in distinct)):
                distinct.append(p)
        out[k] = distinct
    return out


def _add_subsets(batch: _Batch, counts: dict[int, int], d: int, n: int,
                 rng: np.random.Generator) -> dict[int, list[int]]:
    """``counts[k]`` independent subset simulations of n samples per level on branch k."""
    return {k: [batch.add(_key(k), subset_task(d, rng, n=n)) for _ in range(c)] for k, c in counts.items()}


def _extra_replicates(live: list[int], branches: list[Branch], pooled: dict[int, RareEstimate],
                      runs: dict[int, list[RareEstimate]], shares: dict[int, float], s: RareSettings,
                      messages: list[str]) -> dict[int, int]:
    """How many more replicates each branch needs for its target CoV, within ``max_calls``."""
    more = {}
    for k in live:
        est = pooled[k]
        if not est.converged or not math.isfinite(est.cov):
            continue
        if shares[k] < PILOT_SHARE and len(live) > 1:
            messages.append(f"{branches[k].label}: contributes {100 * shares[k]:.2g} % of P(overrun), under "
                            f"{100 * PILOT_SHARE:g} %: its first estimate is kept (proportionate effort)")
            continue
        target = _branch_target(shares[k], s.target_cov)
        per_run = est.calls / len(runs[k])
        need = math.ceil(len(runs[k]) * (est.cov / target) ** 2) - len(runs[k])
        budget = int(max(s.max_calls - est.calls, 0) // max(per_run, 1))
        if min(need, budget) > 0:
            more[k] = min(need, budget)
    return more


def _note_target(b: Branch, est: RareEstimate, share: float, n_live: int, s: RareSettings,
                 messages: list[str]) -> None:
    target = _branch_target(share, s.target_cov)
    if est.converged and est.cov > 1.05 * target and (share >= PILOT_SHARE or n_live == 1):
        messages.append(f"{b.label}: CoV {100 * est.cov:.0f} % after {est.calls:,} calls, above its target "
                        f"{100 * target:.0f} % (--max-calls {s.max_calls:,} per branch)")


def _add_importance(batch: _Batch, live: list[int], branches: list[Branch], dps: dict[int, list[DesignPoint]],
                    probs: dict[int, float], s: RareSettings, rng: np.random.Generator) -> dict[int, int]:
    """Importance sampling around each live branch's converged design points, each branch's target CoV
    from its share (by ``probs``)."""
    shares = _shares(live, branches, probs)
    slots = {}
    for k in live:
        pts = [q for q in dps[k] if q.converged] or dps[k][:1]
        target = _branch_target(shares[k], s.target_cov)
        slots[k] = batch.add(_key(k), importance_task(pts, rng, target_cov=target, max_calls=s.max_calls,
                                                      conf=s.confidence))
    return slots


def _form_estimates(live: list[int], dps: dict[int, list[DesignPoint]],
                    sorm: dict[int, tuple[float, Array, str]]) -> dict[int, RareEstimate]:
    """FORM (the nearest design point), or SORM (Breitung 1984) where ``sorm`` holds its result."""
    out = {}
    for k in live:
        dp = dps[k][0]
        msg = "" if dp.converged else f"no design point after {dp.iterations} iterations"
        out[k] = RareEstimate("form", dp.probability, 0.0, (dp.probability, dp.probability), 0,
                              dp.converged, msg, dps[k])
        if k in sorm:
            p, _, why = sorm[k]
            out[k] = (RareEstimate("sorm", p, 0.0, (p, p), 0, True, "", dps[k]) if math.isfinite(p) else
                      RareEstimate("sorm", dp.probability, 0.0, out[k].ci, 0, True,
                                   f"{why}; FORM's value kept", dps[k]))
    return out


def _shares(live: list[int], branches: list[Branch], first: dict[int, float]) -> dict[int, float]:
    total = sum(branches[k].probability * first[k] for k in live)
    return {k: branches[k].probability * first[k] / total if total > 0 else 1.0 for k in live}


def _branch_target(share: float, target: float) -> float:
    """The CoV a branch needs for the mixture to meet ``target``: target / sqrt(share), capped at
    :data:`LOOSEST_COV`. Then sum_b share_b^2 CoV_b^2 = target^2 sum_b share_b = target^2, and a branch's
    cost, about 1 / CoV_b^2, is proportionate to its share."""
    return min(LOOSEST_COV, target / math.sqrt(max(share, 1e-12)))


def _mix(parts: list[tuple[float, RareEstimate]], method: str) -> tuple[float, float, tuple[float, float]]:
    """The mixture over branches: P = sum p_b P_b, CoV from sum (p_b cov_b P_b)^2, and each side of the
    interval sqrt(sum (p_b h_b)^2) with h_b the branch's own half-width on that side (so one branch keeps
    its interval: Student-t for subset simulation). Upper bounds add to the upper end only."""
    prob = sum(p * e.probability for p, e in parts)
    var = sum((p * e.cov * e.probability) ** 2 for p, e in parts if math.isfinite(e.cov))
    cov = math.sqrt(var) / prob if prob > 0 else math.inf
    if method in ("form", "sorm"):
        return prob, cov if prob > 0 else 0.0, (prob, prob)
    lo = math.sqrt(sum((p * (e.probability - e.ci[0])) ** 2 for p, e in parts))
    hi = math.sqrt(sum((p * (e.ci[1] - e.probability)) ** 2 for p, e in parts))
    return prob, cov, (max(prob - lo, 0.0), prob + hi)


def _design_point(cont: Problem, results: list[BranchResult], prob: float
                  ) -> tuple[dict[str, Any], dict[str, float], float | None]:
    """The design point of the branch that contributes most, in physical units, its importance factors
    alpha^2 and the generalised reliability index -Phi^-1(P) of the mixture."""
    beta = float(-stats.norm.ppf(prob)) if prob > 0 else math.inf
    dominant = max(results, key=lambda b: b.probability * b.estimate.probability)
    if not dominant.estimate.design_points:
        return {}, {}, beta
    dp: DesignPoint = dominant.estimate.design_points[0]
    x = cont.from_standard_normal(dp.u[None, :])[0]
    design = {**{k: float(v) for k, v in zip(cont.names, x, strict=True)}, **dict(dominant.values)}
    importance = {k: float(a) for k, a in zip(cont.names, dp.importance, strict=True)}
    return design, importance, beta


def _at_bound(cont: Problem, x: Array) -> NDArray[np.bool_]:
    """x[n, d] on a bound: within 1 % of the range from a finite truncation bound, or for an empirical
    input beyond its second largest (smallest) value, where the last interpolated stretch up to the
    largest (smallest) observation sets the tail (common practice, no source)."""
    out = np.zeros(x.shape, dtype=bool)
    for j, m in enumerate(cont.marginals):
        if m.family == "empirical":
            data = np.sort(np.asarray(m.params["data"], dtype=float))
            top = (x[:, j] >= data[-2]) if "pareto_threshold" not in m.params else np.zeros(len(x), bool)
            out[:, j] = top | (x[:, j] <= data[1])  # a fitted Pareto tail replaces the largest value
            continue
        if not (math.isfinite(m.lower) or math.isfinite(m.upper)):
            continue
        finite = m.upper if math.isfinite(m.upper) else m.lower
        span = (m.upper - m.lower) if math.isfinite(m.upper - m.lower) else abs(finite)
        tol = 0.01 * max(span, 1e-12)
        out[:, j] = (x[:, j] >= m.upper - tol) | (x[:, j] <= m.lower + tol)
    return out


def _bound_limited(cont: Problem, results: list[BranchResult], prob: float, messages: list[str]) -> list[str]:
    """Inputs whose bound sets the probability: at the design point, or for at least half of the failure
    samples, of a branch carrying at least 10 % of P(overrun)."""
    names: list[str] = []
    for r in results:
        e = r.estimate
        if prob <= 0 or r.probability * e.probability < 0.1 * prob:
            continue
        flags = np.zeros(cont.dimension, dtype=bool)
        if e.design_points and e.design_points[0].converged:
            flags |= _at_bound(cont, cont.from_standard_normal(e.design_points[0].u[None, :]))[0]
        if e.failure_u is not None and e.failure_u.size:
            flags |= _at_bound(cont, cont.from_standard_normal(e.failure_u)).mean(axis=0) >= 0.5
        names += [n for n, f in zip(cont.names, flags, strict=True) if f and n not in names]
    if names:
        messages.append(f"SET BY A BOUND: the overruns sit at the bound of {', '.join(names)}; the "
                        "probability "
                        "is set by that assumption (the truncation, or the extreme values of the sample)")
    return names


def _cross_check(cross: dict[int, RareEstimate], results: list[BranchResult], s: RareSettings, prob: float,
                 ci: tuple[float, float], messages: list[str]) -> CrossCheck:
    """The second method mixed over the branches (the unreachable branches as in the estimate); a warning
    when its interval and the estimate's do not overlap."""
    parts = [(r.probability, cross.get(k, r.estimate)) for k, r in enumerate(results)]
    c_prob, _, c_ci = _mix(parts, "subset")
    method = next(iter(cross.values())).method
    calls = sum(c.calls for c in cross.values())
    check = CrossCheck(method, c_prob, c_ci, calls)
    if not all(c.converged for c in cross.values()):
        return check
    a = RareEstimate(s.method, prob, 0.0, ci, 0, True)
    if intervals_disagree(a, RareEstimate(method, c_prob, 0.0, c_ci, calls, True)):
        if s.method == "auto":
            messages.append(f"WARNING: importance sampling around the design points gives {c_prob:.3e} "
                            f"[{c_ci[0]:.2e}, {c_ci[1]:.2e}], outside the subset estimate's interval: the "
                            "design-point search missed a failure region (the subset estimate stands)")
        else:
            messages.append(f"WARNING: {s.method} gives {prob:.3e} but subset simulation, which needs no "
                            f"design point, gives {c_prob:.3e} [{c_ci[0]:.2e}, {c_ci[1]:.2e}]: the intervals "
                            "do not overlap (several failure regions, or a design point that is not the most "
                            "probable); trust the subset estimate or use --method auto")
    return check


@dataclass(frozen=True)
class _CurveLevels:
    lda: Array
    per: Array  # [replicate, LDA]: each replicate's mixture
    calls: int


def _add_curve(batch: _Batch, n_branches: int, d: int, s: RareSettings,
               rng: np.random.Generator) -> list[int]:
    """The levels of P(total > LDA) down to 1e-9: ``subset_replicates`` subset simulations per branch, of
    half the estimate's samples per level (the curve is a picture with an interval, not the estimate)."""
    reps = max(s.subset_replicates, 2)
    n = max(200, s.subset_samples // 2)
    return [batch.add(("total", k, 0.0), exceedance_task(d, rng, p_min=1e-9, n=n))
            for k in range(n_branches) for _ in range(reps)]


def _curve_levels(batch: _Batch, slots: list[int], branches: list[Branch], s: RareSettings) -> _CurveLevels:
    reps = max(s.subset_replicates, 2)
    curves = [batch.results[i] for i in slots]
    lo = min(float(y.min()) for y, _ in curves)
    hi = max(float(y.max()) for y, _ in curves)
    lda = np.linspace(lo, hi, 400)
    per = np.zeros((reps, lda.size))
    for i, (y, py) in enumerate(curves):
        k, r = divmod(i, reps)
        order = np.argsort(y)
        ys, ps = y[order], py[order]
        idx = np.searchsorted(ys, lda, side="right")
        per[r] += branches[k].probability * np.where(idx < ys.size, ps[np.minimum(idx, ys.size - 1)], 0.0)
    return _CurveLevels(lda, per, 0)


def _curve_targets(part: _CurveLevels) -> list[float]:
    mixed = part.per.mean(axis=0)
    out = []
    for target in (1e-2, 1e-4, 1e-6, 1e-8):
        i = int(np.argmin(np.abs(np.log(np.maximum(mixed, 1e-300)) - np.log(target))))
        out.append(float(part.lda[i]))
    return out


def _add_form_points(batch: _Batch, part: _CurveLevels, n_branches: int, d: int, lda0: float) -> list[int]:
    """FORM at the runway lengths where the subset curve is near 1e-2, 1e-4, 1e-6 and 1e-8, on every
    branch (g = the scenario's margin + the difference in length)."""
    return [batch.add(_key(k, length - lda0), form_task(np.zeros(d), tol=1e-3, max_iter=40))
            for length in _curve_targets(part) for k in range(n_branches)]


def _finish_curve(scenario: Scenario, problem: Problem, part: _CurveLevels, form_found: list[DesignPoint],
                  branches: list[Branch], ev: _Evaluator, rng: np.random.Generator) -> RiskCurve:
    """The risk curve with a Student-t interval over the replicates at every LDA; a crude Monte Carlo for
    its upper part (where it has at least 10 events)."""
    reps = part.per.shape[0]
    mixed = part.per.mean(axis=0)
    t = float(stats.t.ppf(0.975, reps - 1))
    half = t * part.per.std(axis=0, ddof=1) / math.sqrt(reps)
    reached = np.asarray((part.per > 0).all(axis=0), dtype=bool)
    keep = mixed >= 1e-9
    nb = len(branches)
    points = [(length, sum(b.probability * form_found[j * nb + k].probability
                           for k, b in enumerate(branches))) for j, length in enumerate(_curve_targets(part))]
    n_mc = 20_000  # the curve's top, where 10 events need P >= 5e-4
    a = assess(scenario, problem, AssessSettings(samples=n_mc, seed=int(rng.integers(2**31))))
    xs = a.sorted_total()
    p_mc = (n_mc - np.searchsorted(xs, part.lda[keep], side="right")) / n_mc
    p_mc = np.where(p_mc * n_mc >= 10, p_mc, np.nan)
    return RiskCurve(part.lda[keep], mixed[keep], np.maximum(mixed - half, 0.0)[keep], (mixed + half)[keep],
                     reached[keep], ev.curve_calls, p_mc, n_mc, points, ev.form_point_calls)


def solve_check(scenario: Scenario, design_point: dict[str, float]) -> float:
    """The margin of the deterministic landing at the design point (about 0 m if the search converged)."""
    res = solve_landings(scenario.case({k: np.array([v]) for k, v in design_point.items()}))
    return float(res.margin_m[0])

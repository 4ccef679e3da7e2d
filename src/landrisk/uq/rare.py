"""Rare-event probabilities P(g(U) <= 0), U standard normal in d dimensions.

- **FORM** (Hasofer & Lind 1974; Rackwitz & Fiessler 1978): the design point u* = argmin |u| subject to
  g(u) = 0, found by the HL-RF iteration with a line search on the merit function |u|^2/2 + c|g|
  (Zhang & Der Kiureghian 1995), from several starts; beta = |u*| (signed), P ~ Phi(-beta), importance
  factors alpha_i^2 with alpha = -grad g / |grad g| at u*. Each iteration costs two vectorised calls:
  the d + 1 points of the forward-difference gradient, and all trial steps of the line search; the
  starts of the multi-start search run side by side and share those calls.
- **SORM** (Breitung 1984, J. Eng. Mech. 110:357): P ~ Phi(-beta) prod_i (1 + beta kappa_i)^(-1/2), the
  kappa_i the principal curvatures of the limit state at the design point, the eigenvalues of
  Q^T H Q / |grad g| (H the Hessian of g by central differences, in one vectorised call; Q an orthonormal
  basis of the plane normal to alpha). Two step sizes must agree, else no SORM value (a kinked limit state).
- **Importance sampling** around the design points: a mixture of unit normals centred on them, weighted by
  Phi(-beta_k); P = mean(1{g <= 0} phi(u) / q(u)), drawn in batches until the coefficient of variation
  reaches the target or the call budget is spent; the Kish effective sample size (sum w)^2 / sum w^2.
- **Subset simulation** (Au & Beck 2001, Probabilistic Engineering Mechanics 16:263): intermediate
  thresholds at the p0 quantile of g, conditional samples by Markov chains, P = p0^(m-1) P_m; the chains
  use conditional sampling in standard normal space with an adaptive spread (Papaioannou, Betz, Zwirglmaier
  & Straub 2015, "MCMC algorithms for subset simulation", Probabilistic Engineering Mechanics 41:89).
  Independent replicates run side by side; the interval is a Student-t interval over the replicates
  (the spread of their mean is the larger of the replicates' scatter and Au & Beck's eq. 29 value).
  It needs no design point and gives the whole curve P(g <= b) on the way. Levels that stall above
  g = 0 show a failure region out of reach: the method then gives an upper bound only.
- **The worst corner** of the inputs' bounds: where every input is bounded, the smallest g over the
  corners of the box shows whether failure can happen at all (exactly so when g is monotone in each
  input).

Every method is written as a *task*: a generator that yields the points u[m, d] it needs and receives
g(u). :func:`run_tasks` drives many tasks together and evaluates all their points in one call per step,
so that the cost per call of the model (not the number of points) sets the wall time.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Generator, Hashable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import special, stats

from landrisk.uq.sampling import Seed, normalize_seed

__all__ = [
    "DesignPoint",
    "RareEstimate",
    "WorstCorner",
    "auto",
    "exceedance_by_subsets",
    "form",
    "form_task",
    "importance_sampling",
    "importance_task",
    "intervals_disagree",
    "run_tasks",
    "sorm",
    "sorm_task",
    "subset_simulation",
    "subset_task",
    "worst_corner",
]

Array = NDArray[np.float64]
LimitState = Callable[[Array], Array]  # g(u[n, d]) -> values[n]; failure where g <= 0
Task = Generator[Array, Array, Any]
#: evaluates a list of (key, u) requests and returns the g values of each
Evaluator = Callable[[list[tuple[Hashable, Array]]], list[Array]]


def _clean(y: Array) -> Array:
    """NaN (a landing the model cannot evaluate as a margin) counts as a failure, -inf."""
    y = np.asarray(y, dtype=float)
    return np.where(np.isnan(y), -np.inf, y)


class _Counter:
    """g with a count of the points evaluated (NaN read as -inf)."""

    def __init__(self, g: LimitState) -> None:
        self.g = g
        self.calls = 0

    def __call__(self, u: Array) -> Array:
        u = np.atleast_2d(u)
        self.calls += u.shape[0]
        return _clean(self.g(u))

    def evaluator(self) -> Evaluator:
        """All requests in one call of g."""
        def ev(requests: list[tuple[Hashable, Array]]) -> list[Array]:
            u = np.concatenate([r for _, r in requests])
            y = self(u)
            return np.split(y, np.cumsum([r.shape[0] for _, r in requests])[:-1])
        return ev


def run_tasks(tasks: Sequence[tuple[Hashable, Task]], evaluate: Evaluator) -> list[Any]:
    """Drive the tasks side by side: each step, all their pending points go to ``evaluate`` at once.

    ``tasks`` are (key, generator) pairs; the key tells the evaluator which limit state the points belong
    to. Returns each task's return value, in order.
    """
    results: list[Any] = [None] * len(tasks)
    pending: dict[int, Array] = {}
    for i, (_, t) in enumerate(tasks):
        try:
            pending[i] = np.atleast_2d(next(t))
        except StopIteration as stop:
            results[i] = stop.value
    while pending:
        idx = list(pending)
        answers = evaluate([(tasks[i][0], pending[i]) for i in idx])
        nxt: dict[int, Array] = {}
        for i, y in zip(idx, answers, strict=True):
            try:
                nxt[i] = np.atleast_2d(tasks[i][1].send(_clean(y)))
            except StopIteration as stop:
                results[i] = stop.value
        pending = nxt
    return results


@dataclass(frozen=True)
class DesignPoint:
    """A most probable failure point in standard normal space."""

    u: Array
    beta: float
    alpha: Array  # unit vector from the origin towards failure: u* = beta alpha
    converged: bool
    iterations: int
    grad_norm: float = math.nan  # |grad g| at u*

    @property
    def probability(self) -> float:
        """The FORM estimate Phi(-beta)."""
        return float(special.ndtr(-self.beta))

    @property
    def importance(self) -> Array:
        """Importance factors alpha_i^2 (they sum to 1)."""
        return self.alpha**2


@dataclass(frozen=True)
class RareEstimate:
    """A rare-event probability with its uncertainty and cost.

    ``kind`` is ``estimate``, ``zero`` (failure out of reach: the probability is 0 and ``ci`` its
    bounds) or ``upper bound`` (only ``ci[1]`` is known; ``probability`` is then 0).
    """

    method: str
    probability: float
    cov: float  # coefficient of variation of the estimate (0 for FORM, which has none)
    ci: tuple[float, float]
    calls: int
    converged: bool
    message: str = ""
    design_points: list[DesignPoint] = field(default_factory=list)
    effective_samples: float | None = None
    kind: str = "estimate"
    replicates: tuple[float, ...] = ()
    failure_u: Array | None = None  # some failure samples (subset simulation), for the bound check


# ---------------------------------------------------------------------------------------------------
# FORM and SORM


def _grad_points(u: Array, h: float) -> Array:
    return np.vstack([u[None, :], u[None, :] + h * np.eye(u.size)])


def form_task(u0: Array, *, tol: float = 1e-4, max_iter: int = 100, h: float = 1e-4) -> Task:
    """HL-RF from u0 with a vectorised Armijo line search; returns a DesignPoint."""
    u = np.asarray(u0, dtype=float).copy()
    d = u.size
    y = yield _grad_points(u, h)
    gu, grad = float(y[0]), (y[1:] - y[0]) / h
    g_scale = abs(gu) if abs(gu) > 0 and np.isfinite(gu) else 1.0
    g0 = gu if not u.any() else None
    converged = False
    k = 0
    trials = 0.5 ** np.arange(12)
    for k in range(1, max_iter + 1):  # noqa: B007
        norm = float(np.linalg.norm(grad))
        if not np.isfinite(gu) or norm == 0 or not np.isfinite(norm):
            break
        step = (grad @ u - gu) / norm**2 * grad - u  # towards the HL-RF point
        c = float(2.0 * np.linalg.norm(u) / norm + 10.0)  # merit weight (Zhang & Der Kiureghian 1995)
        m0 = 0.5 * float(u @ u) + c * abs(gu)
        cands = u[None, :] + trials[:, None] * step[None, :]
        yc = yield cands
        merit = 0.5 * (cands**2).sum(axis=1) + c * np.abs(yc)
        ok = np.isfinite(yc) & (merit <= m0 - 1e-4 * trials * float(step @ step))
        j = int(np.argmax(ok)) if ok.any() else trials.size - 1
        moved = float(np.linalg.norm(cands[j] - u))
        u = cands[j]
        y = yield _grad_points(u, h)
        gu, grad = float(y[0]), (y[1:] - y[0]) / h
        if moved <= tol * max(1.0, float(np.linalg.norm(u))) and abs(gu) <= 1e-3 * g_scale:
            converged = True
            break
    norm = float(np.linalg.norm(grad))
    alpha = -grad / norm if norm > 0 and np.isfinite(norm) else np.zeros(d)
    if g0 is None:
        g0 = float((yield np.zeros((1, d)))[0])
    beta = float(np.linalg.norm(u)) * (1.0 if g0 > 0 else -1.0)
    return DesignPoint(u, beta, alpha, converged and bool(np.isfinite(gu)), k, norm)


def _form_starts(d: int, starts: int, rng: np.random.Generator, radius: float) -> list[Array]:
    out = [np.zeros(d)]
    for _ in range(starts - 1):
        direction = rng.normal(size=d)
        out.append(radius * direction / np.linalg.norm(direction))
    return out


def _distinct(points: list[DesignPoint]) -> list[DesignPoint]:
    """Converged design points more than 0.2 apart (in u), the most probable first; else the first."""
    ordered = sorted(points, key=lambda p: (not p.converged, p.beta))
    out: list[DesignPoint] = []
    for p in ordered:
        if not out or (p.converged and all(np.linalg.norm(p.u - q.u) > 0.2 for q in out)):
            out.append(p)
    return out


def form(
    g: LimitState, d: int, *, starts: int = 1, seed: Seed = None, tol: float = 1e-4, max_iter: int = 100,
    h: float = 1e-4,
) -> tuple[list[DesignPoint], int]:
    """Design points of g in d standard normal dimensions, from the origin and ``starts - 1`` more starts.

    The extra starts lie on random directions at the distance of the first design point, so that other
    failure regions at a similar distance are found; design points within 0.2 (in u) of another are
    merged. Returns the distinct design points (the most probable first) and the number of calls.
    """
    gc = _Counter(g)
    rng = normalize_seed(seed)
    (first,) = run_tasks([(0, form_task(np.zeros(d), tol=tol, max_iter=max_iter, h=h))], gc.evaluator())
    points = [first]
    if starts > 1:
        radius = max(abs(first.beta), 1.0) if math.isfinite(first.beta) else 3.0
        tasks = [(0, form_task(u0, tol=tol, max_iter=max_iter, h=h))
                 for u0 in _form_starts(d, starts, rng, radius)[1:]]
        points += run_tasks(tasks, gc.evaluator())
    return _distinct(points), gc.calls


def _curvatures(y: Array, dp: DesignPoint, h: float) -> tuple[Array, Array]:
    """Hessian by central differences from the 4 d^2 values y, and the principal curvatures."""
    d = dp.u.size
    y = y.reshape(4, d, d)
    hess = (y[0] - y[1] - y[2] + y[3]) / (4 * h * h)
    hess = 0.5 * (hess + hess.T)
    q, _ = np.linalg.qr(np.column_stack([dp.alpha, np.eye(d)]))  # q[:, 1:d]: the plane normal to alpha
    basis = q[:, 1:d]
    if d == 1 or not np.all(np.isfinite(hess)):
        return hess, np.empty(0) if d == 1 else np.full(d - 1, np.nan)
    return hess, np.linalg.eigvalsh(basis.T @ hess @ basis / dp.grad_norm)


def sorm_task(dp: DesignPoint, *, h: float = 0.05) -> Task:
    """Breitung's (1984) SORM probability at a design point; returns (probability, curvatures, message).

    The Hessian by central differences, H_ij = [g(u+h e_i+h e_j) - g(u+h e_i-h e_j) - g(u-h e_i+h e_j)
    + g(u-h e_i-h e_j)] / 4h^2, with steps h and 2h, all 8 d^2 points in one call; the gradient norm from
    FORM. Where the two steps' correction factors prod (1 + beta kappa_i)^(-1/2) differ by more than 5 %
    the limit state has no well-defined curvature there (a kink, as an empirical input's piecewise-linear
    quantile function makes) and no SORM value is given (NaN, with the reason).
    """
    u, d = dp.u, dp.u.size
    pts = []
    for step in (h, 2 * h):
        e = step * np.eye(d)
        pts += [u + e[i] * si + e[j] * sj for si, sj in ((1, 1), (1, -1), (-1, 1), (-1, -1))
                for i in range(d) for j in range(d)]
    y = yield np.array(pts)
    half = y.size // 2
    _, kappa = _curvatures(y[:half], dp, h)
    _, kappa2 = _curvatures(y[half:], dp, 2 * h)
    factor, factor2 = 1.0 + dp.beta * kappa, 1.0 + dp.beta * kappa2
    if not (np.all(np.isfinite(factor)) and np.all(factor > 0) and np.all(factor2 > 0)):
        return math.nan, kappa, "Breitung's formula does not apply (1 + beta kappa <= 0, or no curvature)"
    c1, c2 = float(np.prod(factor ** -0.5)), float(np.prod(factor2 ** -0.5))
    if abs(math.log(c1 / c2)) > 0.05:
        return math.nan, kappa, ("the limit state has no well-defined curvature at the design point "
                                 f"(SORM factor {c1:.3f} with step {h:g}, {c2:.3f} with {2 * h:g}: a kink)")
    return float(dp.probability * c1), kappa, ""


def sorm(g: LimitState, dp: DesignPoint, *, h: float = 0.05) -> tuple[float, Array, int]:
    """SORM probability (Breitung 1984), the principal curvatures and the calls, at design point dp."""
    gc = _Counter(g)
    ((p, kappa, _),) = run_tasks([(0, sorm_task(dp, h=h))], gc.evaluator())
    return p, kappa, gc.calls


# ---------------------------------------------------------------------------------------------------
# Importance sampling


def importance_task(
    design_points: list[DesignPoint], rng: np.random.Generator, *, target_cov: float = 0.05,
    batch: int = 500, max_calls: int = 10_000, conf: float = 0.95, calls_before: int = 0,
) -> Task:
    """Importance sampling on a mixture of unit normals centred on the design points (a task)."""
    centres = np.array([p.u for p in design_points])
    weights = np.array([max(p.probability, 1e-300) for p in design_points])
    weights /= weights.sum()
    d = centres.shape[1]
    terms: list[Array] = []
    p_hat, cov, calls = 0.0, math.inf, 0
    while calls + batch <= max_calls or not terms:
        k = rng.choice(len(centres), size=batch, p=weights)
        u = centres[k] + rng.normal(size=(batch, d))
        # log phi(u) - log q(u), q the mixture density (log-sum-exp for stability)
        log_q = special.logsumexp(-0.5 * ((u[:, None, :] - centres[None]) ** 2).sum(axis=2)
                                  + np.log(weights)[None], axis=1)
        w = np.exp(-0.5 * (u**2).sum(axis=1) - log_q)
        y = yield u
        calls += batch
        terms.append(np.where(y <= 0, w, 0.0))
        t = np.concatenate(terms)
        p_hat = float(t.mean())
        cov = float(t.std(ddof=1) / (p_hat * math.sqrt(t.size))) if p_hat > 0 else math.inf
        if cov <= target_cov:
            break
    t = np.concatenate(terms)
    z = stats.norm.ppf(0.5 + conf / 2)
    half = z * (cov * p_hat if math.isfinite(cov) else 1.0)
    ess = float(t.sum() ** 2 / (t**2).sum()) if p_hat > 0 else 0.0
    ok = math.isfinite(cov) and cov <= target_cov
    msg = "" if ok else (f"the coefficient of variation is {cov:.2f} after {calls} calls, above the "
                         f"target {target_cov:g}" if p_hat > 0 else f"no failure in {calls} samples")
    return RareEstimate("importance", p_hat, cov, (max(p_hat - half, 0.0), p_hat + half),
                        calls_before + calls, ok, msg, design_points, ess)


def importance_sampling(
    g: LimitState,
    design_points: list[DesignPoint],
    *,
    seed: Seed = None,
    target_cov: float = 0.05,
    batch: int = 500,
    max_calls: int = 10_000,
    conf: float = 0.95,
    calls_before: int = 0,
) -> RareEstimate:
    """P(g <= 0) by importance sampling on a mixture of unit normals centred on the design points."""
    if not design_points:
        return RareEstimate("importance", math.nan, math.inf, (0.0, 1.0), calls_before, False,
                            "no design point to sample around")
    gc = _Counter(g)
    task = importance_task(design_points, normalize_seed(seed), target_cov=target_cov, batch=batch,
                           max_calls=max_calls, conf=conf, calls_before=calls_before)
    return run_tasks([(0, task)], gc.evaluator())[0]


# ---------------------------------------------------------------------------------------------------
# Subset simulation


def _correlation_factor(ind: NDArray[np.bool_], p: float) -> float:
    """Au & Beck 2001, eq. 29: gamma = 2 sum_k (1 - k/Ns) rho(k) from chains ind[chain, step]."""
    nc, ns = ind.shape
    n = nc * ns
    r0 = p * (1 - p)
    if r0 <= 0 or ns < 2:
        return 0.0
    gamma = 0.0
    x = ind.astype(float)
    for k in range(1, ns):
        rk = float(np.sum(x[:, : ns - k] * x[:, k:])) / (n - k * nc) - p * p
        gamma += 2.0 * (1 - k / ns) * rk / r0
    return max(gamma, 0.0)


def subset_task(
    d: int, rng: np.random.Generator, *, n: int = 2000, p0: float = 0.1, max_levels: int = 20,
    spread: float = 0.6, keep_levels: list | None = None, stop_at_failure: bool = True,
) -> Task:
    """One subset simulation (Au & Beck 2001) with conditional sampling (Papaioannou et al. 2015), a task.

    Returns a RareEstimate whose ``cov`` is Au & Beck's (eq. 29) and ``ci`` a lognormal interval; with
    levels that stall above 0 (three levels without progress) an upper bound (kind ``upper bound``).

    Parameters
    ----------
    n : int
        Samples per level (n p0 chains of 1/p0 states each).
    p0 : float
        Conditional probability of each intermediate level.
    spread : float
        Initial spread sigma of the conditional-sampling proposal (adapted level by level).
    """
    n_seeds = round(n * p0)
    steps = n // n_seeds
    u = rng.normal(size=(n, d))
    y = yield u
    calls = n
    prob, delta2 = 1.0, 0.0
    gamma = 0.0
    sigma = spread
    thresholds: list[float] = []
    for level in range(max_levels):
        if keep_levels is not None:  # (probability of the level, its samples' g values)
            keep_levels.append((prob, y.copy()))
        order = np.argsort(y)
        b = float(y[order[n_seeds - 1]])
        thresholds.append(b)
        if not stop_at_failure and level == max_levels - 1:
            return RareEstimate("subset", prob, math.nan, (0.0, 1.0), calls, True, "levels traced")
        stalled = len(thresholds) > 3 and b > 0 and thresholds[-4] - b <= 1e-9 * max(abs(b), 1e-300)
        if stop_at_failure and (stalled or (b > 0 and level == max_levels - 1)):
            bound = prob * float(np.mean(y <= b))
            why = (f"the levels stall at g = {b:.4g} > 0" if stalled
                   else f"the failure region was not reached in {max_levels} levels (g = {b:.4g})")
            return RareEstimate("subset", 0.0, math.inf, (0.0, bound), calls, False,
                                f"{why}: only an upper bound {bound:.2e}", kind="upper bound")
        if (b <= 0 and stop_at_failure) or level == max_levels - 1:
            pf = float(np.mean(y <= 0))
            delta2 += (1 - pf) / (pf * n) * (1 + (gamma if level else 0.0)) if pf > 0 else math.inf
            prob *= pf
            break
        prob *= p0
        delta2 += (1 - p0) / (p0 * n) * (1 + (gamma if level else 0.0))
        # Conditional sampling (Papaioannou et al. 2015): chains from the n p0 samples below b, each of
        # `steps` states; a candidate rho u + sqrt(1 - rho^2) xi keeps the standard normal invariant and is
        # accepted when it stays below b. The spread sqrt(1 - rho^2) adapts towards acceptance 0.44.
        cur_u, cur_y = u[order[:n_seeds]].copy(), y[order[:n_seeds]].copy()
        chain_u = np.empty((n_seeds, steps, d))
        chain_y = np.empty((n_seeds, steps))
        chain_u[:, 0], chain_y[:, 0] = cur_u, cur_y
        accepted = 0
        for s in range(1, steps):
            rho = math.sqrt(1.0 - sigma**2)
            cand = rho * cur_u + sigma * rng.normal(size=cur_u.shape)
            yc = yield cand
            calls += cand.shape[0]
            ok = yc <= b
            accepted += int(ok.sum())
            cur_u = np.where(ok[:, None], cand, cur_u)
            cur_y = np.where(ok, yc, cur_y)
            chain_u[:, s], chain_y[:, s] = cur_u, cur_y
        rate = accepted / max(n_seeds * (steps - 1), 1)
        sigma = float(np.clip(sigma * math.exp(rate - 0.44), 0.05, 1.0))
        u = chain_u.reshape(-1, d)
        y = chain_y.reshape(-1)
        # correlation of the next level's indicator along the chains (Au & Beck eq. 29)
        nxt = float(np.sort(y)[n_seeds - 1])
        gamma = _correlation_factor(chain_y <= max(nxt, 0.0), max(float(np.mean(y <= max(nxt, 0.0))), 1e-12))
    cov = math.sqrt(delta2) if math.isfinite(delta2) else math.inf
    z = stats.norm.ppf(0.975)
    s_log = math.sqrt(math.log1p(cov**2)) if math.isfinite(cov) else math.inf
    ci = ((prob * math.exp(-z * s_log), prob * math.exp(z * s_log)) if math.isfinite(s_log) and prob > 0
          else (0.0, 1.0))
    fail = u[y <= 0][:200]
    return RareEstimate("subset", prob, cov, ci, calls, prob > 0 and math.isfinite(cov),
                        "" if prob > 0 else "no failure sample at the last level", failure_u=fail)


def pool_replicates(runs: list[RareEstimate], conf: float = 0.95) -> RareEstimate:
    """Independent subset simulations pooled: their mean, and a Student-t interval over the replicates.

    The standard error of the mean is the larger of the replicates' scatter s / sqrt(R) and the pooled
    Au & Beck value sqrt(sum (cov_r p_r)^2) / R (Au & Beck ignore the correlation between levels and
    tend to understate the scatter, and R replicates may agree by chance); the interval is
    mean +- t_{R-1} se, t the Student-t quantile with R - 1 degrees of freedom (Student 1908).
    """
    calls = sum(r.calls for r in runs)
    reps = len(runs)
    fails = [r.failure_u for r in runs if r.failure_u is not None and r.failure_u.size]
    failure_u = np.concatenate(fails) if fails else None
    if any(r.kind == "upper bound" for r in runs):
        bound = max(r.ci[1] for r in runs if r.kind == "upper bound")
        msg = next(r.message for r in runs if r.kind == "upper bound")
        if all(r.kind == "upper bound" for r in runs):
            return RareEstimate("subset", 0.0, math.inf, (0.0, bound), calls, False, msg,
                                kind="upper bound", failure_u=failure_u)
    if not all(r.converged for r in runs):
        bad = next(r for r in runs if not r.converged)
        return RareEstimate("subset", float(np.mean([r.probability for r in runs])), math.inf, (0.0, 1.0),
                            calls, False, bad.message, failure_u=failure_u)
    p = np.array([r.probability for r in runs])
    mean = float(p.mean())
    se_au_beck = math.sqrt(sum((r.cov * r.probability) ** 2 for r in runs)) / reps
    se_rep = float(p.std(ddof=1) / math.sqrt(reps)) if reps > 1 else 0.0
    se = max(se_au_beck, se_rep)
    cov = se / mean if mean > 0 else math.inf
    t = float(stats.t.ppf(0.5 + conf / 2, max(reps - 1, 1)))
    ci = (max(mean - t * se, 0.0), mean + t * se)
    return RareEstimate("subset", mean, cov, ci, calls, True, "", replicates=tuple(p.tolist()),
                        failure_u=failure_u)


def subset_simulation(
    g: LimitState,
    d: int,
    *,
    n: int = 2000,
    p0: float = 0.1,
    seed: Seed = None,
    replicates: int = 4,
    max_levels: int = 20,
    conf: float = 0.95,
    spread: float = 0.6,
) -> RareEstimate:
    """P(g <= 0) by ``replicates`` independent subset simulations of n samples per level, run side by side
    and pooled by :func:`pool_replicates` (a Student-t interval over the replicates)."""
    rng = normalize_seed(seed)
    gc = _Counter(g)
    tasks = [(0, subset_task(d, rng, n=n, p0=p0, max_levels=max_levels, spread=spread))
             for _ in range(replicates)]
    return pool_replicates(run_tasks(tasks, gc.evaluator()), conf)


def exceedance_task(d: int, rng: np.random.Generator, *, p_min: float = 1e-9, n: int = 1000,
                    p0: float = 0.1) -> Task:
    """The curve P(Y > y) of a response Y, down to ``p_min``, by one subset simulation (a task that is
    sent the responses Y, not g). Returns ascending y and their exceedance probabilities.

    Level i holds n samples conditional on Y above its threshold, with probability P_i; between two
    thresholds P(Y > y) = P_i x (share of level i's samples above y) (Au & Beck 2001, §5).
    """
    levels: list = []
    levels_needed = math.ceil(math.log(p_min) / math.log(p0)) + 1
    inner = subset_task(d, rng, n=n, p0=p0, max_levels=levels_needed, keep_levels=levels,
                        stop_at_failure=False)
    try:
        u = next(inner)
        while True:
            y = yield u
            u = inner.send(-y)
    except StopIteration:
        pass
    ys, ps = [], []
    for i, (p_level, g_values) in enumerate(levels):
        y = np.sort(-g_values)
        upper = -np.sort(levels[i + 1][1])[-1] if i + 1 < len(levels) else np.inf  # next threshold
        above = 1.0 - np.arange(1, y.size + 1) / y.size
        keep = y < upper
        ys.append(y[keep])
        ps.append(p_level * above[keep])
    return np.concatenate(ys), np.concatenate(ps)


def exceedance_by_subsets(
    response: Callable[[Array], Array], d: int, *, p_min: float = 1e-9, n: int = 1000, p0: float = 0.1,
    seed: Seed = None,
) -> tuple[Array, Array, int]:
    """The curve P(Y > y) of a response Y = response(U), down to ``p_min``, by one subset simulation.

    Returns ascending values y, their exceedance probabilities, and the number of calls.
    """
    gc = _Counter(response)
    ys, ps = run_tasks([(0, exceedance_task(d, normalize_seed(seed), p_min=p_min, n=n, p0=p0))],
                       gc.evaluator())[0]
    return ys, ps, gc.calls


# ---------------------------------------------------------------------------------------------------
# The worst corner of bounded inputs


@dataclass(frozen=True)
class WorstCorner:
    """The smallest g over the corners of the box of the inputs' bounds."""

    u: Array  # the corner, in standard normal space
    g: float
    outside: float  # probability outside the box: an upper bound of P(failure) when g > 0


def worst_corner_task(lower_bounded: NDArray[np.bool_], upper_bounded: NDArray[np.bool_], *,
                      far: float = 40.0, open_radius: float = 8.0) -> Task:
    """The corners of the box in u: a bounded side at +-``far`` (its bound: Phi(-40) underflows), an
    unbounded side at +-``open_radius``. All 2^d corners for d <= 12 (one call), else the corner along
    -grad g at the origin. Returns a :class:`WorstCorner`; its ``outside`` is the union bound
    sum over unbounded sides of Phi(-open_radius)."""
    d = lower_bounded.size
    hi = np.where(upper_bounded, far, open_radius)
    lo = np.where(lower_bounded, -far, -open_radius)
    if d <= 12:
        signs = ((np.arange(2**d)[:, None] >> np.arange(d)[None, :]) & 1).astype(bool)
        corners = np.where(signs, hi[None, :], lo[None, :])
    else:
        y = yield _grad_points(np.zeros(d), 1e-3)
        corners = np.where((y[1:] - y[0]) < 0, hi, lo)[None, :]
    y = yield corners
    k = int(np.argmin(y))
    n_open = int((~lower_bounded).sum() + (~upper_bounded).sum())
    return WorstCorner(corners[k], float(y[k]), float(n_open * special.ndtr(-open_radius)))


def worst_corner(g: LimitState, lower_bounded: NDArray[np.bool_], upper_bounded: NDArray[np.bool_]
                 ) -> tuple[WorstCorner, int]:
    """:func:`worst_corner_task` on one limit state; the corner and the calls."""
    gc = _Counter(g)
    (wc,) = run_tasks([(0, worst_corner_task(np.asarray(lower_bounded), np.asarray(upper_bounded)))],
                      gc.evaluator())
    return wc, gc.calls


def intervals_disagree(a: RareEstimate, b: RareEstimate) -> bool:
    """True when the two estimates' confidence intervals do not overlap (FORM: its point value)."""
    return a.ci[1] < b.ci[0] or b.ci[1] < a.ci[0]


def auto(
    g: LimitState, d: int, *, seed: Seed = None, target_cov: float = 0.1, n: int = 1000, replicates: int = 4,
    max_calls: int = 100_000, starts: int = 6, conf: float = 0.95,
) -> tuple[RareEstimate, RareEstimate | None]:
    """The default for a rare P(g <= 0): subset simulation as the estimate (it needs no design point, so
    does not miss failure regions), replicates added until the CoV meets ``target_cov`` or ``max_calls``
    is spent; FORM's design points from ``starts`` starts and importance sampling around them beside it,
    run at the same time. Returns (estimate, importance-sampling cross-check); where the two intervals do
    not overlap, the estimate's message says so (WARNING: a missed failure region).
    """
    rng = normalize_seed(seed)
    gc = _Counter(g)
    tasks: list[tuple[Hashable, Task]] = [(0, subset_task(d, rng, n=n)) for _ in range(replicates)]
    tasks += [(0, form_task(np.zeros(d)))]
    tasks += [(0, form_task(3.0 * v / np.linalg.norm(v), tol=1e-3, max_iter=40))
              for v in rng.normal(size=(starts - 1, d))]
    done = run_tasks(tasks, gc.evaluator())
    runs, points = done[:replicates], _distinct(done[replicates:])
    est = pool_replicates(runs, conf)
    more = 0
    if est.converged and est.cov > target_cov:
        per_run = est.calls / replicates
        more = min(math.ceil(replicates * (est.cov / target_cov) ** 2) - replicates,
                   int(max(max_calls - est.calls, 0) // max(per_run, 1)))
    conv = [p for p in points if p.converged] or points[:1]
    second: list[tuple[Hashable, Task]] = [(0, subset_task(d, rng, n=n)) for _ in range(max(more, 0))]
    second.append((0, importance_task(conv, rng, target_cov=target_cov, max_calls=max_calls, conf=conf)))
    done = run_tasks(second, gc.evaluator())
    runs += done[:-1]
    check: RareEstimate = done[-1]
    est = pool_replicates(runs, conf)
    msg = est.message
    if est.converged and check.converged and intervals_disagree(est, check):
        msg = (f"WARNING: importance sampling around the design points gives {check.probability:.3e}, "
               f"outside the subset interval [{est.ci[0]:.2e}, {est.ci[1]:.2e}]: a failure region missed "
               "by the design-point search (the subset estimate stands)")
    elif est.converged and est.cov > 1.05 * target_cov:
        msg = f"CoV {est.cov:.2f} above the target {target_cov:g} after {gc.calls:,} calls"
    out = RareEstimate("auto", est.probability, est.cov, est.ci, gc.calls, est.converged, msg, points,
                       None, est.kind, est.replicates, est.failure_u)
    return out, check

"""Rare-event probabilities P(g(U) <= 0), U standard normal in d dimensions.

- **FORM** (Hasofer & Lind 1974; Rackwitz & Fiessler 1978): the design point u* = argmin |u| subject to
  g(u) = 0, found by the HL-RF iteration with a line search on the merit function |u|^2/2 + c|g|
  (Zhang & Der Kiureghian 1995), from several starts; beta = |u*| (signed), P ~ Phi(-beta), importance
  factors alpha_i^2 with alpha = -grad g / |grad g| at u*. Gradients by forward differences, one
  vectorised call of d + 1 points per iteration.
- **Importance sampling** around the design points: a mixture of unit normals centred on them, weighted by
  Phi(-beta_k); P = mean(1{g <= 0} phi(u) / q(u)), drawn in batches until the coefficient of variation
  reaches the target or the call budget is spent; the Kish effective sample size (sum w)^2 / sum w^2.
- **Subset simulation** (Au & Beck 2001, Probabilistic Engineering Mechanics 16:263): intermediate
  thresholds at the p0 quantile of g, conditional samples by Markov chains, P = p0^(m-1) P_m; the chains
  use conditional sampling in standard normal space with an adaptive spread (Papaioannou, Betz, Zwirglmaier
  & Straub 2015, "MCMC algorithms for subset simulation", Probabilistic Engineering Mechanics 41:89),
  which mixes better than component-wise Metropolis in many dimensions; coefficient of variation from
  Au & Beck eq. 29 with the chains' correlation factors. It needs no design point and gives the whole
  curve P(g <= b) on the way.

Intervals: normal for importance sampling, lognormal for subset simulation (its estimate is a product).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray
from scipy import special, stats

from landrisk.uq.sampling import Seed, normalize_seed

__all__ = [
    "DesignPoint",
    "RareEstimate",
    "exceedance_by_subsets",
    "form",
    "importance_sampling",
    "intervals_disagree",
    "subset_simulation",
]

Array = NDArray[np.float64]
LimitState = Callable[[Array], Array]  # g(u[n, d]) -> values[n]; failure where g <= 0


class _Counter:
    def __init__(self, g: LimitState) -> None:
        self.g = g
        self.calls = 0

    def __call__(self, u: Array) -> Array:
        u = np.atleast_2d(u)
        self.calls += u.shape[0]
        y = np.asarray(self.g(u), dtype=float)
        return np.where(np.isnan(y), -np.inf, y)


@dataclass(frozen=True)
class DesignPoint:
    """A most probable failure point in standard normal space."""

    u: Array
    beta: float
    alpha: Array  # unit vector from the origin towards failure: u* = beta alpha
    converged: bool
    iterations: int

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
    """A rare-event probability with its uncertainty and cost."""

    method: str
    probability: float
    cov: float  # coefficient of variation of the estimate (0 for FORM, which has none)
    ci: tuple[float, float]
    calls: int
    converged: bool
    message: str = ""
    design_points: list[DesignPoint] = field(default_factory=list)
    effective_samples: float | None = None


def _grad(g: _Counter, u: Array, gu: float, h: float) -> Array:
    pts = u[None, :] + h * np.eye(u.size)
    return (g(pts) - gu) / h


def _hlrf(g: _Counter, u0: Array, tol: float, max_iter: int, h: float) -> DesignPoint:
    u = u0.astype(float).copy()
    gu = float(g(u)[0])
    g_scale = abs(gu) if abs(gu) > 0 else 1.0
    converged = False
    k = 0
    for k in range(1, max_iter + 1):  # noqa: B007
        grad = _grad(g, u, gu, h)
        norm = float(np.linalg.norm(grad))
        if not np.isfinite(gu) or norm == 0 or not np.isfinite(norm):
            break
        target = (grad @ u - gu) / norm**2 * grad  # the HL-RF point
        step = target - u
        c = float(2.0 * np.linalg.norm(u) / norm + 10.0)  # merit weight (Zhang & Der Kiureghian 1995)

        def merit(v: Array, gv: float, c: float = c) -> float:
            return 0.5 * float(v @ v) + c * abs(gv)

        m0 = merit(u, gu)
        t, accepted = 1.0, False
        for _ in range(12):  # Armijo backtracking on the merit function
            cand = u + t * step
            gc = float(g(cand)[0])
            if np.isfinite(gc) and merit(cand, gc) <= m0 - 1e-4 * t * float(step @ step):
                accepted = True
                break
            t *= 0.5
        if not accepted:
            cand, gc = u + t * step, float(g(u + t * step)[0])
        moved = float(np.linalg.norm(cand - u))
        u, gu = cand, gc
        if moved <= tol * max(1.0, float(np.linalg.norm(u))) and abs(gu) <= 1e-3 * g_scale:
            converged = True
            break
    grad = _grad(g, u, gu, h)
    norm = float(np.linalg.norm(grad))
    alpha = -grad / norm if norm > 0 and np.isfinite(norm) else np.zeros_like(u)
    beta = float(np.linalg.norm(u)) * (1.0 if float(g(np.zeros_like(u))[0]) > 0 else -1.0)
    return DesignPoint(u, beta, alpha, converged and np.isfinite(gu), k)


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
    first = _hlrf(gc, np.zeros(d), tol, max_iter, h)
    points = [first]
    radius = max(abs(first.beta), 1.0)
    for _ in range(starts - 1):
        direction = rng.normal(size=d)
        direction /= np.linalg.norm(direction)
        dp = _hlrf(gc, radius * direction, tol, max_iter, h)
        if dp.converged and all(np.linalg.norm(dp.u - p.u) > 0.2 for p in points):
            points.append(dp)
    points.sort(key=lambda p: (not p.converged, p.beta))
    return points, gc.calls


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
    rng = normalize_seed(seed)
    centres = np.array([p.u for p in design_points])
    weights = np.array([max(p.probability, 1e-300) for p in design_points])
    weights /= weights.sum()
    d = centres.shape[1]
    terms: list[Array] = []
    p_hat, cov = 0.0, math.inf
    while gc.calls + batch <= max_calls or not terms:
        k = rng.choice(len(centres), size=batch, p=weights)
        u = centres[k] + rng.normal(size=(batch, d))
        # log phi(u) - log q(u), q the mixture density (log-sum-exp for stability)
        log_q = special.logsumexp(-0.5 * ((u[:, None, :] - centres[None]) ** 2).sum(axis=2)
                                  + np.log(weights)[None], axis=1)
        w = np.exp(-0.5 * (u**2).sum(axis=1) - log_q)
        terms.append(np.where(gc(u) <= 0, w, 0.0))
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
    msg = "" if ok else (f"the coefficient of variation is {cov:.2f} after {gc.calls} calls, above the "
                         f"target {target_cov:g}" if p_hat > 0 else f"no failure in {gc.calls} samples")
    return RareEstimate("importance", p_hat, cov, (max(p_hat - half, 0.0), p_hat + half),
                        calls_before + gc.calls, ok, msg, design_points, ess)


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


def _subset_run(
    g: LimitState,
    d: int,
    *,
    n: int = 2000,
    p0: float = 0.1,
    seed: Seed = None,
    max_levels: int = 20,
    conf: float = 0.95,
    spread: float = 0.6,
    keep_levels: list | None = None,
    stop_at_failure: bool = True,
) -> RareEstimate:
    """P(g <= 0) by subset simulation (Au & Beck 2001) with conditional sampling (Papaioannou et al. 2015).

    Parameters
    ----------
    n : int
        Samples per level (n p0 chains of 1/p0 states each).
    p0 : float
        Conditional probability of each intermediate level.
    spread : float
        Initial spread sigma of the conditional-sampling proposal (adapted level by level).
    """
    gc = _Counter(g)
    rng = normalize_seed(seed)
    n_seeds = round(n * p0)
    steps = n // n_seeds
    u = rng.normal(size=(n, d))
    y = gc(u)
    prob, delta2 = 1.0, 0.0
    gamma = 0.0
    sigma = spread
    for level in range(max_levels):
        if keep_levels is not None:  # (probability of the level, its samples' g values)
            keep_levels.append((prob, y.copy()))
        order = np.argsort(y)
        b = float(y[order[n_seeds - 1]])
        if not stop_at_failure and level == max_levels - 1:
            return RareEstimate("subset", prob, math.nan, (0.0, 1.0), gc.calls, True, "levels traced")
        if (b <= 0 and stop_at_failure) or level == max_levels - 1:
            pf = float(np.mean(y <= 0))
            if b > 0 and level == max_levels - 1:
                return RareEstimate("subset", prob * pf, math.inf, (0.0, 1.0), gc.calls, False,
                                    f"the failure region was not reached in {max_levels} levels")
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
            yc = gc(cand)
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
    z = stats.norm.ppf(0.5 + conf / 2)
    s_log = math.sqrt(math.log1p(cov**2)) if math.isfinite(cov) else math.inf
    ci = ((prob * math.exp(-z * s_log), prob * math.exp(z * s_log)) if math.isfinite(s_log) and prob > 0
          else (0.0, 1.0))
    return RareEstimate("subset", prob, cov, ci, gc.calls, prob > 0 and math.isfinite(cov),
                        "" if prob > 0 else "no failure sample at the last level")


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
    """P(g <= 0) by ``replicates`` independent subset simulations of n samples per level, pooled.

    Au & Beck's coefficient of variation ignores the correlation between levels and tends to understate
    the scatter; the reported one is the larger of the pooled Au-Beck value and the replicates' own
    scatter, and the interval a Student-t interval on the mean of the replicates with that spread.
    """
    rng = normalize_seed(seed)
    runs = [_subset_run(g, d, n=n, p0=p0, seed=rng, max_levels=max_levels, conf=conf, spread=spread)
            for _ in range(replicates)]
    calls = sum(r.calls for r in runs)
    if not all(r.converged for r in runs):
        bad = next(r for r in runs if not r.converged)
        return RareEstimate("subset", float(np.mean([r.probability for r in runs])), math.inf, (0.0, 1.0),
                            calls, False, bad.message)
    p = np.array([r.probability for r in runs])
    mean = float(p.mean())
    # CoV of the mean of the replicates from their Au-Beck values: sqrt(sum (cov_r p_r)^2) / (R mean)
    cov_au_beck = (math.sqrt(sum((r.cov * r.probability) ** 2 for r in runs)) / (replicates * mean)
                   if mean > 0 else math.inf)
    cov_rep = float(p.std(ddof=1) / (mean * math.sqrt(replicates))) if replicates > 1 and mean > 0 else 0.0
    cov = max(cov_au_beck, cov_rep)
    t = stats.t.ppf(0.5 + conf / 2, max(replicates - 1, 1))
    ci = (max(mean * (1 - t * cov), 0.0), mean * (1 + t * cov))
    return RareEstimate("subset", mean, cov, ci, calls, True, "")


def exceedance_by_subsets(
    response: Callable[[Array], Array], d: int, *, p_min: float = 1e-9, n: int = 1000, p0: float = 0.1,
    seed: Seed = None,
) -> tuple[Array, Array, int]:
    """The curve P(Y > y) of a response Y = response(U), down to ``p_min``, by one subset simulation.

    Level i holds n samples conditional on Y above its threshold, with probability P_i; between two
    thresholds P(Y > y) = P_i x (share of level i's samples above y) (Au & Beck 2001, §5). Returns
    ascending values y, their exceedance probabilities, and the number of calls.
    """
    levels: list = []
    levels_needed = math.ceil(math.log(p_min) / math.log(p0)) + 1
    res = _subset_run(lambda u: -np.asarray(response(u), dtype=float), d, n=n, p0=p0, seed=seed,
                      max_levels=levels_needed, keep_levels=levels, stop_at_failure=False)
    ys, ps = [], []
    for i, (p_level, g_values) in enumerate(levels):
        y = np.sort(-g_values)
        upper = -np.sort(levels[i + 1][1])[-1] if i + 1 < len(levels) else np.inf  # next threshold
        above = 1.0 - np.arange(1, y.size + 1) / y.size
        keep = y < upper
        ys.append(y[keep])
        ps.append(p_level * above[keep])
    return np.concatenate(ys), np.concatenate(ps), res.calls


def intervals_disagree(a: RareEstimate, b: RareEstimate) -> bool:
    """True when the two estimates' confidence intervals do not overlap (FORM: its point value)."""
    return a.ci[1] < b.ci[0] or b.ci[1] < a.ci[0]

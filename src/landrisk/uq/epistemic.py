"""Epistemic parameters: the distribution of a failure probability over uncertain distribution parameters.

An input's distribution f(x; theta) has parameters theta (a mode, a median, a spread) that are known only
within a range, themselves given a distribution. The failure probability P(theta) = E_theta[1{g(X) < 0}]
is then uncertain; this module gives its distribution over theta by an outer sample theta_1..theta_m.

Reweighting (likelihood-ratio, or importance-sampling reuse of one inner sample): with inner samples x_i
drawn once from f(x; theta_0) (or from any density q, with weights w_i = f(x_i; theta_0) / q(x_i)),

    P(theta) ~ (1/n) sum_i w_i r_i(theta) 1{g(x_i) < 0},   r_i(theta) = f(x_i; theta) / f(x_i; theta_0),

unbiased wherever the support of f(.; theta) lies inside that of f(.; theta_0) (Beckman, R. J. &
McKay, M. D., "Monte Carlo estimation under different distributions using the same simulation",
*Technometrics* 29:153, 1987; Owen, A. B., *Monte Carlo theory, methods and examples*, 2013, §9.1,
eq. 9.3). Its quality is watched by Kish's effective sample size n_eff = (sum w r)^2 / sum (w r)^2
(Owen 2013, §9.3, eq. 9.13): below a floor (default 10 % of n, common practice, no source), or where
theta moves the support beyond theta_0's, that theta_j is estimated instead by a fresh inner Monte Carlo
run at theta_j (the nested loop). Both report their solver calls.

The joint density is the Gaussian copula of the problem times its marginals; where a parameter belongs
to an input that takes part in the copula, the ratio includes the change of the copula density
c(u) = det(R)^(-1/2) exp(-z^T (R^-1 - I) z / 2), z = Phi^-1(F(x)) (Nelsen, R. B., *An Introduction to
Copulas*, 2nd ed., Springer 2006, §2.3; the Gaussian copula density is eq. 5.3.6 of Joe, H.,
*Dependence Modeling with Copulas*, CRC 2014, from memory).

The drivers of P are ranked by standardised regression coefficients of log10 P on theta, SRC_j^2 =
(b_j sd(theta_j) / sd(log10 P))^2 (Saltelli, A. et al., *Global Sensitivity Analysis: The Primer*,
Wiley 2008, §1.2.5), with their Spearman rank correlations.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import special, stats

from landrisk.uq.distributions import Marginal, Problem, make_marginal, normal_correlation_from_spearman
from landrisk.uq.montecarlo import sample
from landrisk.uq.sampling import Seed, normalize_seed
from landrisk.uq.stats import Percentile, percentiles, wilson_interval

__all__ = [
    "EPISTEMIC_METHODS",
    "EpistemicParameter",
    "EpistemicResult",
    "epistemic_probability",
    "log_density",
    "log_density_ratio",
    "problem_at",
]

EPISTEMIC_METHODS = ("reweight", "nested")

Array = NDArray[np.float64]
Indicator = Callable[[Array], NDArray[np.bool_]]


@dataclass(frozen=True)
class EpistemicParameter:
    """An uncertain parameter of an input's distribution.

    Attributes
    ----------
    input : str
        The input's name in the Problem.
    parameter : str
        The name of the distribution parameter (``mode``, ``median``, ``sd``...).
    distribution : Marginal
        The distribution of the parameter's value.
    source : str
        Where that distribution comes from.
    """

    input: str
    parameter: str
    distribution: Marginal
    source: str = ""

    @property
    def name(self) -> str:
        """``input.parameter``, e.g. ``runway.braking_mu.mode``."""
        return f"{self.input}.{self.parameter}"


def problem_at(problem: Problem, params: Sequence[EpistemicParameter], theta: Sequence[float]) -> Problem:
    """The problem with each epistemic parameter set to its value in ``theta``."""
    marginals = list(problem.marginals)
    for p, value in zip(params, theta, strict=True):
        i = problem.names.index(p.input)
        m = marginals[i]
        marginals[i] = make_marginal(m.family, {**m.params, p.parameter: float(value)})
    return Problem(problem.names, tuple(marginals), problem.spearman)


def _scipy(m: Marginal) -> Any:
    p = m.params
    if m.family in ("normal", "truncnormal"):
        return stats.norm(p["mean"], p["sd"])
    if m.family == "lognormal":
        mu, sd = m._log_params
        return stats.lognorm(s=sd, scale=math.exp(mu))
    if m.family == "uniform":
        return stats.uniform(p["lower"], p["upper"] - p["lower"])
    if m.family == "triangular":
        width = p["upper"] - p["lower"]
        return stats.triang((p["mode"] - p["lower"]) / width, loc=p["lower"], scale=width)
    if m.family == "beta":
        return stats.beta(p["alpha"], p["beta"], loc=p["lower"], scale=p["upper"] - p["lower"])
    if m.family == "weibull":
        return stats.weibull_min(p["shape"], loc=p.get("shift", 0.0), scale=p["scale"])
    raise ValueError(f"a {m.family} distribution has no density to reweight by")


def _normal_params(m: Marginal) -> tuple[float, float, bool]:
    """(mu, sd, in logs) of a normal or lognormal marginal."""
    if m.family == "lognormal":
        mu, sd = m._log_params
        return mu, sd, True
    return float(m.params["mean"]), float(m.params["sd"]), False


def _normal_mass(m: Marginal, mu: float, sd: float, logs: bool) -> tuple[float, float]:
    """Phi at the standardised truncation bounds of a (log)normal marginal."""
    with np.errstate(divide="ignore"):
        lo = math.log(m.lower) if logs and m.lower > 0 else (-math.inf if logs else m.lower)
        hi = math.log(m.upper) if logs and math.isfinite(m.upper) else (math.inf if logs else m.upper)
    return float(special.ndtr((lo - mu) / sd)), float(special.ndtr((hi - mu) / sd))


def log_density(m: Marginal, x: Array) -> Array:
    """log f(x) of a marginal (truncation included; -inf outside its support; a discrete choice's
    log probability). Empirical samples have no density and raise ValueError."""
    x = np.asarray(x, dtype=float)
    inside = (x >= m.lower) & (x <= m.upper)
    if m.family in ("normal", "truncnormal", "lognormal"):  # directly, without scipy's overhead
        mu, sd, logs = _normal_params(m)
        with np.errstate(divide="ignore", invalid="ignore"):
            y = np.log(x) if logs else x
            z = (y - mu) / sd
            out = -0.5 * z * z - math.log(sd) - 0.5 * math.log(2 * math.pi) - (y if logs else 0.0)
        if m.truncated:
            a, b = _normal_mass(m, mu, sd, logs)
            out = out - math.log(b - a)
        return np.where(inside, out, -np.inf)
    if m.discrete:
        values, probs = m.choices()
        idx = np.clip(np.searchsorted(values, x), 0, values.size - 1)
        with np.errstate(divide="ignore"):
            return np.where(values[idx] == x, np.log(probs[idx]), -np.inf)
    dist = _scipy(m)
    out = dist.logpdf(x)
    if m.truncated:
        mass = float(dist.cdf(m.upper) - dist.cdf(m.lower))
        out = out - math.log(mass)
    return np.where(inside, out, -np.inf)


def _cdf(m: Marginal, x: Array) -> Array:
    if m.family in ("normal", "truncnormal", "lognormal"):
        mu, sd, logs = _normal_params(m)
        with np.errstate(divide="ignore"):
            y = np.log(np.maximum(x, 0.0)) if logs else x
        u = special.ndtr((y - mu) / sd)
        if m.truncated:
            a, b = _normal_mass(m, mu, sd, logs)
            u = (u - a) / (b - a)
        return np.clip(u, 0.0, 1.0)
    dist = _scipy(m)
    if not m.truncated:
        return np.asarray(dist.cdf(x), dtype=float)
    lo, hi = float(dist.cdf(m.lower)), float(dist.cdf(m.upper))
    return np.clip((dist.cdf(x) - lo) / (hi - lo), 0.0, 1.0)


class _Density:
    """The part of log f(x; theta) that the ``changed`` marginals enter, for fixed samples x: their log
    densities and, where one of them takes part in the copula, the copula's log density (its
    correlation does not depend on theta, so only the changed inputs' normal scores are recomputed)."""

    def __init__(self, problem: Problem, x: Array, changed: Sequence[int]) -> None:
        self.x = x
        self.changed = list(changed)
        c = problem.correlated
        self.copula = [i for i in self.changed if i in set(c.tolist())]
        self.cols = c
        if self.copula:
            assert problem.spearman is not None
            r = normal_correlation_from_spearman(np.asarray(problem.spearman)[np.ix_(c, c)])
            self.a = np.linalg.inv(r) - np.eye(c.size)
            self.z0 = np.column_stack([self._score(problem.marginals[i], x[:, i]) for i in c])

    @staticmethod
    def _score(m: Marginal, x: Array) -> Array:
        return np.asarray(special.ndtri(np.clip(_cdf(m, x), 1e-300, 1.0 - 1e-16)))

    def __call__(self, problem: Problem) -> Array:
        out = np.zeros(self.x.shape[0])
        for i in self.changed:
            out += log_density(problem.marginals[i], self.x[:, i])
        if self.copula:
            z = self.z0.copy()
            for i in self.copula:
                z[:, int(np.flatnonzero(self.cols == i)[0])] = self._score(problem.marginals[i], self.x[:, i])
            out += -0.5 * np.einsum("ni,ij,nj->n", z, self.a, z)
        return out


def log_density_ratio(problem: Problem, theta_problem: Problem, x: Array, changed: Sequence[int]) -> Array:
    """log f(x; theta) - log f(x; theta_0) over the ``changed`` marginals and the copula."""
    x = np.atleast_2d(np.asarray(x, dtype=float))
    density = _Density(problem, x, changed)
    with np.errstate(invalid="ignore"):
        out = density(theta_problem) - density(problem)
    return np.nan_to_num(out, nan=-np.inf)


@dataclass(frozen=True)
class EpistemicResult:
    """The distribution of P over the epistemic parameters (outer sample), with its sampling errors."""

    parameters: tuple[EpistemicParameter, ...]
    theta: Array  # [m, k] outer draws
    probability: Array  # [m] P(theta_j)
    sampling_lo: Array  # [m] lower end of each P(theta_j)'s sampling interval
    sampling_hi: Array  # [m] upper end
    ess: Array  # [m] effective sample size (the inner sample count for nested draws)
    nested: NDArray[np.bool_]  # [m] True where the draw was estimated by a fresh inner run
    nominal_probability: float  # P(theta_0) from the inner sample
    nominal_interval: tuple[float, float]
    inner_samples: int
    solver_calls: int
    method: str
    upper_level: float
    median: Percentile
    upper: Percentile
    drivers: tuple[tuple[str, float, float], ...]  # (name, SRC^2 on log10 P, Spearman), largest first
    confidence: float = 0.95
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def outer(self) -> int:
        """Number of outer draws."""
        return int(self.probability.size)


def _interval(successes: Array, weights_sum: Array, weights_sq: Array, n: int, conf: float,
              nested: NDArray[np.bool_], p: Array) -> tuple[Array, Array]:
    """Wilson intervals for nested (plain Monte Carlo) draws; normal intervals for reweighted ones,
    from the sample variance of the weighted indicator."""
    zq = float(special.ndtri(0.5 + conf / 2))
    var = np.maximum(weights_sq / n - p**2, 0.0) / n
    lo = np.maximum(p - zq * np.sqrt(var), 0.0)
    hi = p + zq * np.sqrt(var)
    for j in np.flatnonzero(nested):
        lo[j], hi[j] = wilson_interval(int(np.rint(successes[j])), n, conf)
    return lo, hi


def epistemic_probability(
    problem: Problem,
    params: Sequence[EpistemicParameter],
    failed: Indicator,
    *,
    outer: int = 200,
    inner: int = 100_000,
    seed: Seed = None,
    method: str = "reweight",
    min_ess_fraction: float = 0.1,
    upper_level: float = 0.95,
    confidence: float = 0.95,
    inner_samples: tuple[Array, Array] | None = None,
) -> EpistemicResult:
    """The distribution of P(failure) over the epistemic parameters ``params``.

    Parameters
    ----------
    problem : Problem
        The inputs at the nominal parameters theta_0.
    params : sequence of EpistemicParameter
        The uncertain distribution parameters.
    failed : callable
        X[n, d] -> bool[n], True where the sample fails.
    outer, inner : int
        Outer draws of theta; inner samples (per nested run, and of the one reweighted sample).
    method : str
        ``reweight`` (one inner sample reweighted for every theta, nested runs where that fails) or
        ``nested`` (a fresh inner sample for every theta).
    inner_samples : (X, w), optional
        Inner samples drawn from another density q with weights w = f(X; theta_0) / q(X) (importance
        sampling); by default X is drawn from the problem at theta_0 and w = 1.
    """
    if method not in EPISTEMIC_METHODS:
        raise ValueError(f"method must be one of {', '.join(EPISTEMIC_METHODS)}")
    if not params:
        raise ValueError("no epistemic parameters")
    if outer < 2 or inner < 1:
        raise ValueError("outer must be at least 2 and inner at least 1")
    rng = normalize_seed(seed)
    changed = sorted({problem.names.index(p.input) for p in params})
    outer_problem = Problem.independent([p.name for p in params], [p.distribution for p in params])
    theta = sample(outer_problem, outer, seed=rng)
    calls = 0
    if inner_samples is None:
        x0 = sample(problem, inner, seed=rng)
        w0 = np.ones(inner)
    else:
        x0, w0 = np.asarray(inner_samples[0], dtype=float), np.asarray(inner_samples[1], dtype=float)
    n = x0.shape[0]
    fail0 = np.asarray(failed(x0), dtype=bool)
    calls += n
    p0 = float(np.mean(w0 * fail0))
    lo0, hi0 = _interval(np.array([fail0.sum()]), np.array([w0.sum()]), np.array([np.sum((w0 * fail0) ** 2)]),
                         n, confidence, np.array([inner_samples is None]), np.array([p0]))
    prob = np.zeros(outer)
    succ = np.zeros(outer)
    wsq = np.zeros(outer)
    ess = np.zeros(outer)
    nested = np.zeros(outer, dtype=bool)
    lower0 = [problem.marginals[i].lower for i in changed]
    upper0 = [problem.marginals[i].upper for i in changed]
    density = _Density(problem, x0, changed) if method == "reweight" else None
    base = density(problem) if density is not None else None
    for j in range(outer):
        at = problem_at(problem, params, theta[j])
        inside = all(at.marginals[i].lower >= lo and at.marginals[i].upper <= hi
                     for i, lo, hi in zip(changed, lower0, upper0, strict=True))
        if method == "reweight" and inside:
            assert density is not None and base is not None
            with np.errstate(invalid="ignore"):
                w = w0 * np.exp(np.nan_to_num(density(at) - base, nan=-np.inf))
            ess[j] = float(w.sum() ** 2 / max(float(np.sum(w**2)), 1e-300))
            if ess[j] >= min_ess_fraction * n:
                prob[j] = float(np.mean(w * fail0))
                wsq[j] = float(np.sum((w * fail0) ** 2))
                succ[j] = float(fail0.sum())
                continue
        nested[j] = True
        xj = sample(at, inner, seed=rng)
        fj = np.asarray(failed(xj), dtype=bool)
        calls += inner
        prob[j] = float(fj.mean())
        succ[j] = float(fj.sum())
        wsq[j] = succ[j]
        ess[j] = inner
    n_each = np.where(nested, inner, n)
    lo = np.zeros(outer)
    hi = np.zeros(outer)
    for size in np.unique(n_each):
        sel = n_each == size
        lo[sel], hi[sel] = _interval(succ[sel], np.zeros(sel.sum()), wsq[sel], int(size), confidence,
                                     nested[sel], prob[sel])
    ordered = np.sort(prob)
    median, upper = percentiles(ordered, (50.0, 100.0 * upper_level), confidence, presorted=True)
    notes = []
    if nested.any() and method == "reweight":
        notes.append(f"{int(nested.sum())} of {outer} outer draws were estimated by a nested inner run "
                     f"(effective sample size below {min_ess_fraction:.0%} of the inner sample, or a support "
                     "beyond the nominal one)")
    floor = 0.5 / max(int(n_each.min()), 1)
    if np.any(prob <= 0):
        notes.append(f"{int(np.sum(prob <= 0))} outer draws saw no failure; log10 P is floored at "
                     f"{floor:.1e} (half of one failure in the inner sample) to rank the drivers")
    drivers = _drivers(params, theta, np.log10(np.maximum(prob, floor)))
    return EpistemicResult(
        parameters=tuple(params), theta=theta, probability=prob, sampling_lo=lo, sampling_hi=hi, ess=ess,
        nested=nested, nominal_probability=p0, nominal_interval=(float(lo0[0]), float(hi0[0])),
        inner_samples=n, solver_calls=calls, method=method, upper_level=upper_level, median=median,
        upper=upper, drivers=drivers, confidence=confidence, notes=tuple(notes),
    )


def _drivers(
    params: Sequence[EpistemicParameter], theta: Array, y: Array
) -> tuple[tuple[str, float, float], ...]:
    sd_y = float(np.std(y))
    out = []
    if sd_y == 0:
        return tuple((p.name, 0.0, 0.0) for p in params)
    design = np.column_stack([np.ones(theta.shape[0]), theta])
    coef = np.linalg.lstsq(design, y, rcond=None)[0][1:]
    for j, p in enumerate(params):
        src = float(coef[j] * np.std(theta[:, j]) / sd_y)
        rho = float(stats.spearmanr(theta[:, j], y).statistic) if np.std(theta[:, j]) > 0 else 0.0
        out.append((p.name, src**2, rho))
    return tuple(sorted(out, key=lambda t: -t[1]))

"""Which inputs drive a failure event, from samples of the event (no extra model calls).

Given samples of the inputs, each with a failure indicator and a weight (1 for Monte Carlo, the
likelihood ratio phi/q for importance sampling), three answers follow without another model call:

- **First-order Sobol index of the failure indicator** by Bayes' rule (Perrin & Defaux 2019, "Efficient
  estimation of reliability-oriented sensitivity indices", J. Sci. Comput.; from memory):
  P(F | X_i = x) = P_f f(x | F) / f(x), hence

      S_i = Var(P(F | X_i)) / (P_f (1 - P_f)) = P_f / (1 - P_f) (integral f(x|F)^2 / f(x) dx - 1).

  The integral is estimated on a histogram of the input's normal score z_i = Phi^-1(F_i(x_i)) (or its
  levels, for a discrete input): B bins of equal width over the failure samples' range plus the two
  tails, each bin's prior probability p_b exact from Phi, its conditional probability q_b the weighted
  share of the failure samples in it, and sum_b q_b^2 / p_b with the multinomial bias of q_b^2 removed
  ((n q_b^2 - q_b) / (n - 1), n the Kish effective number of failure samples). Binning smooths
  P(F | z) inside a bin, so the estimate errs slightly low; the bins are narrow where the failures are.
  Interval: bootstrap over the samples (Efron & Tibshirani 1993, percentile interval).
- **The failure profile**: each input's weighted median given failure beside its prior median.
- **Sensitivity of P_f to a distribution parameter** by the score function (likelihood ratio)
  estimator (Rubinstein & Kroese, *Simulation and the Monte Carlo Method*, Wiley, ch. 7):
  dP_f / dtheta = E[1_F d ln f(X; theta) / dtheta], the expectation under the sampling weights. It holds
  for parameters that do not move the support (a bound of a uniform or triangular input does).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import special, stats

from landrisk.uq.distributions import Marginal, Problem, _lognormal_log_params, make_marginal
from landrisk.uq.sampling import Seed, normalize_seed

__all__ = [
    "FailureSamples",
    "IndicatorIndex",
    "ParameterSensitivity",
    "indicator_first_order",
    "joint_logpdf",
    "marginal_cdf",
    "marginal_logpdf",
    "parameter_sensitivity",
    "weighted_quantile",
]

Array = NDArray[np.float64]

#: Fewer effective failure samples than this give no index (a note instead).
MIN_EVENTS = 30


@dataclass(frozen=True)
class FailureSamples:
    """Samples of the inputs with a failure indicator and weights.

    ``scores[:, i]`` is the normal score Phi^-1(F_i(x_i)) of a continuous input, the level index
    (0, 1, ...) of a discrete one; ``n`` the number of samples the probability is the mean over (the
    non-failure samples need not be kept: they add nothing but to ``n``).
    """

    scores: Array  # (m, d), failure samples only
    weights: Array  # (m,), likelihood ratios (1 for Monte Carlo)
    n: int  # samples behind the estimate P_f = sum(weights) / n

    @property
    def p_failure(self) -> float:
        return float(np.sum(self.weights) / self.n)

    @property
    def effective(self) -> float:
        """Kish's effective number of failure samples (sum w)^2 / sum w^2."""
        w = self.weights
        return float(w.sum() ** 2 / np.sum(w**2)) if w.size else 0.0


@dataclass(frozen=True)
class IndicatorIndex:
    """The first-order index of the failure indicator for one input, or None with a note."""

    first_order: float | None
    ci: tuple[float, float] | None
    note: str = ""


def _continuous_bins(z: Array, w: Array, bins: int) -> Array:
    """Inner edges: ``bins`` equal-width bins over the failure samples' range (the tails are two more)."""
    lo, hi = weighted_quantile(z, w, [0.005, 0.995])
    if not hi > lo:
        return np.array([lo])
    return np.linspace(lo, hi, bins + 1)


def _prior_bin_probabilities(edges: Array) -> Array:
    """Standard normal probabilities of (-inf, e_0], (e_0, e_1], ..., (e_last, inf), precise in both tails."""
    e = np.concatenate([[-np.inf], edges, [np.inf]])
    # Phi(b) - Phi(a), computed in the tail where it keeps its precision
    upper = special.ndtr(-e[:-1]) - special.ndtr(-e[1:])
    lower = special.ndtr(e[1:]) - special.ndtr(e[:-1])
    return np.where(e[1:] > 0, upper, lower)


def _integral(q: Array, p: Array, n_eff: float) -> float:
    """sum q^2 / p with the multinomial bias of q^2 removed."""
    keep = p > 0
    q, p = q[keep], p[keep]
    if n_eff <= 1:
        return float(np.sum(q**2 / p))
    return float(np.sum((n_eff * q**2 - q) / ((n_eff - 1) * p)))


def _estimate(z: Array, w: Array, n: int, edges: Array | None, prior: Array) -> float:
    total = w.sum()
    pf = total / n
    if total <= 0 or pf >= 1:
        return math.nan
    if edges is None:  # levels of a discrete input
        q = np.bincount(z.astype(np.intp), weights=w, minlength=prior.size) / total
    else:
        q = np.bincount(np.searchsorted(edges, z, side="left"), weights=w, minlength=prior.size) / total
    n_eff = total**2 / np.sum(w**2)
    return pf / (1 - pf) * (_integral(q, prior, n_eff) - 1.0)


def indicator_first_order(
    samples: FailureSamples,
    levels: list[Array | None],
    *,
    bins: int | None = None,
    bootstrap: int = 200,
    conf: float = 0.95,
    seed: Seed = None,
    min_events: int = MIN_EVENTS,
) -> list[IndicatorIndex]:
    """First-order indices of the failure indicator of every input (see the module docstring).

    ``levels[i]`` is None for a continuous input, the prior probabilities of its levels for a discrete
    one. ``bins`` defaults to 2 n_eff^(1/3), at least 6.
    """
    rng = normalize_seed(seed)
    z, w, n = samples.scores, samples.weights, samples.n
    m, d = z.shape
    n_eff = samples.effective
    if n_eff < min_events:
        note = (f"only {n_eff:.0f} effective failure samples (at least {min_events} needed): too few "
                "to resolve the index")
        return [IndicatorIndex(None, None, note) for _ in range(d)]
    b = bins or max(6, round(2 * n_eff ** (1 / 3)))
    setup: list[tuple[Array | None, Array]] = []
    for i in range(d):
        lv = levels[i]
        if lv is None:
            edges = _continuous_bins(z[:, i], w, b)
            setup.append((edges, _prior_bin_probabilities(edges)))
        else:
            setup.append((None, np.asarray(lv, dtype=float)))
    point = [_estimate(z[:, i], w, n, *setup[i]) for i in range(d)]
    # Bootstrap over all n samples: the number of failure rows drawn is binomial, the rows uniform among
    # the failure samples (the non-failure rows carry weight 0 and only count).
    boot = np.empty((bootstrap, d))
    for k in range(bootstrap):
        mk = int(rng.binomial(n, m / n)) if m < n else n
        r = rng.integers(0, m, max(mk, 1))
        for i in range(d):
            boot[k, i] = _estimate(z[r, i], w[r], n, *setup[i])
    a = (1 - conf) / 2
    out = []
    for i in range(d):
        lo, hi = np.nanquantile(boot[:, i], [a, 1 - a])
        ci = (float(max(lo, 0.0)), float(min(hi, 1.0)))
        out.append(IndicatorIndex(float(np.clip(point[i], 0.0, 1.0)), ci))
    return out


def weighted_quantile(x: Array, w: Array, q: Array | list[float] | float) -> Array:
    """Quantiles of the weighted sample (x, w): the inverse of its step distribution function."""
    order = np.argsort(x)
    xs, ws = x[order], w[order]
    cum = np.cumsum(ws)
    cum /= cum[-1]
    idx = np.searchsorted(cum, np.atleast_1d(np.asarray(q, dtype=float)), side="left")
    return xs[np.minimum(idx, xs.size - 1)]


# ---- densities, for the score function --------------------------------------------------------------


def _scipy(m: Marginal) -> stats.rv_continuous | None:
    """The untruncated continuous distribution as a frozen scipy.stats object."""
    p = m.params
    if m.family in ("normal", "truncnormal"):
        return stats.norm(p["mean"], p["sd"])
    if m.family == "lognormal":
        mu, s = _lognormal_log_params(p)
        return stats.lognorm(s, scale=math.exp(mu))
    if m.family == "uniform":
        return stats.uniform(p["lower"], p["upper"] - p["lower"])
    if m.family == "triangular":
        lo, hi = p["lower"], p["upper"]
        return stats.triang((p["mode"] - lo) / (hi - lo), loc=lo, scale=hi - lo)
    if m.family == "beta":
        return stats.beta(p["alpha"], p["beta"], loc=p["lower"], scale=p["upper"] - p["lower"])
    if m.family == "weibull":
        return stats.weibull_min(p["shape"], loc=p.get("shift", 0.0), scale=p["scale"])
    return None


def marginal_logpdf(m: Marginal, x: Array) -> Array:
    """log f(x) of a continuous marginal (truncation included); log P(x) of a discrete one."""
    if m.discrete:
        values, probs = m.choices()
        idx = np.searchsorted(values, x)
        with np.errstate(divide="ignore"):
            return np.log(probs[np.clip(idx, 0, values.size - 1)])
    dist = _scipy(m)
    if dist is None:
        raise ValueError(f"no density for a {m.family} input")
    out = dist.logpdf(x)
    if m.truncated:
        out = out - math.log(dist.cdf(m.upper) - dist.cdf(m.lower))
    return out


def marginal_cdf(m: Marginal, x: Array) -> Array:
    """F(x) of a continuous marginal (truncation included); of an empirical one, the inverse of its
    linear interpolation between order statistics (Hyndman & Fan 1996, definition 7)."""
    if m.family == "empirical":
        data = np.sort(np.asarray(m.params["data"], dtype=float))
        return np.interp(x, data, np.linspace(0.0, 1.0, data.size))
    dist = _scipy(m)
    if dist is None:
        raise ValueError(f"no distribution function for a {m.family} input")
    if not m.truncated:
        return dist.cdf(x)
    fa, fb = dist.cdf(m.lower), dist.cdf(m.upper)
    return (dist.cdf(x) - fa) / (fb - fa)


def joint_logpdf(problem: Problem, x: Array, only: int | None = None) -> Array:
    """log of the joint density of ``problem`` at x[n, d]: the marginals and the Gaussian copula,
    log c = -z^T (R^-1 - I) z / 2 - ln det R / 2 with z the normal scores of the correlated inputs and
    R their normal-space correlation (Nelsen 2006, An Introduction to Copulas, eq. for the Gaussian copula;
    from memory). With ``only = j``, input j's marginal term and the copula term alone (the other
    marginals' terms do not depend on input j's parameters)."""
    out = np.zeros(x.shape[0])
    for j, m in enumerate(problem.marginals):
        if only is None or j == only:
            out += marginal_logpdf(m, x[:, j])
    c = problem.correlated
    if c.size and problem.spearman is not None and (only is None or only in c):
        from landrisk.uq.distributions import normal_correlation_from_spearman

        r = normal_correlation_from_spearman(np.asarray(problem.spearman)[np.ix_(c, c)])
        u = np.column_stack([marginal_cdf(problem.marginals[j], x[:, j]) for j in c])
        z = special.ndtri(np.clip(u, 1e-300, 1 - 2.0**-53))
        a = np.linalg.inv(r) - np.eye(c.size)
        out += -0.5 * np.einsum("ni,ij,nj->n", z, a, z) - 0.5 * np.linalg.slogdet(r)[1]
    return out


@dataclass(frozen=True)
class ParameterSensitivity:
    """dP_f / dtheta of one distribution parameter and the change of P_f for a stated change."""

    input: str
    parameter: str
    value: float
    change: float  # the stated change of the parameter, in its units
    derivative: float  # dP_f / dtheta
    dp: float  # derivative x change (first order)
    ci: tuple[float, float]  # interval of dp
    note: str = ""


#: Parameters a score function can be taken for (they leave the support where it is), by family.
_PARAMETERS = {
    "normal": ("mean", "sd"), "truncnormal": ("mean", "sd"),
    "lognormal": ("median", "sigma_log", "mean", "sd"),
    "triangular": ("mode",), "beta": ("alpha", "beta"), "weibull": ("shape", "scale"),
}
_LOCATION = ("mean", "median", "mode")


def _perturbed(problem: Problem, j: int, name: str, value: float) -> Problem:
    m = problem.marginals[j]
    params = dict(m.params)
    params[name] = value
    marg = list(problem.marginals)
    marg[j] = make_marginal(m.family, params)
    return Problem(problem.names, tuple(marg), problem.spearman)


def _spread(m: Marginal) -> float:
    """A robust spread of the input: half the distance between its 16th and 84th percentiles."""
    lo, hi = m.ppf(np.array([0.158655, 0.841345]))
    return float(hi - lo) / 2


def parameter_sensitivity(
    problem: Problem,
    x: Array,
    weights: Array,
    n: int,
    *,
    location_change: float = 0.1,
    relative_change: float = 0.1,
    conf: float = 0.95,
    score: Callable[..., Array] = joint_logpdf,
) -> list[ParameterSensitivity]:
    """dP_f / dtheta for every parameter that leaves the support in place, by the score function on the
    failure samples x (weights: likelihood ratios; n: samples behind P_f).

    The stated change is ``location_change`` times the input's spread (half its 16-84 % range) for a
    location (mean, median, mode), ``relative_change`` times the value for the others; the score
    d ln f / dtheta by a central difference of the joint log density (copula included). A discrete
    input's probabilities (of two levels, the rarer only): P(level k) raised by 0.01 (capped), the
    others scaled to keep the sum,
    with the exact score 1{x = v_k} / p_k - 1{x != v_k} / (1 - p_k).
    """
    z = stats.norm.ppf(0.5 + conf / 2)
    out: list[ParameterSensitivity] = []

    def add(name: str, par: str, value: float, change: float, s: Array, note: str = "") -> None:
        terms = weights * s
        deriv = float(terms.sum() / n)
        se = float(np.sqrt(max(np.sum(terms**2) / n - deriv**2, 0.0) / n)) if n > 1 else math.inf
        out.append(ParameterSensitivity(name, par, value, change, deriv, deriv * change,
                                        ((deriv - z * se) * change, (deriv + z * se) * change), note))

    for j, (name, m) in enumerate(zip(problem.names, problem.marginals, strict=True)):
        if m.discrete:
            values, probs = m.choices()
            rarest = float(np.min(probs[probs > 0]))
            for v, p in zip(values, probs, strict=True):
                if not 0 < p < 1 or (np.sum(probs > 0) == 2 and p != rarest):
                    continue  # of two levels, the rarer one's probability (the other is its complement)
                hit = np.isclose(x[:, j], v)
                add(name, f"P({_fmt(v)})", float(p), float(min(0.01, 1 - p)),
                    np.where(hit, 1 / p, -1 / (1 - p)))
            continue
        for par in _PARAMETERS.get(m.family, ()):
            if par not in m.params:
                continue
            value = float(m.params[par])
            change = location_change * _spread(m) if par in _LOCATION else relative_change * abs(value)
            h = 1e-4 * (change / max(location_change, relative_change))
            s = (score(_perturbed(problem, j, par, value + h), x, only=j)
                 - score(_perturbed(problem, j, par, value - h), x, only=j)) / (2 * h)
            add(name, par, value, float(change), s)
    return out


def _fmt(v: float) -> str:
    return f"{v:g}"

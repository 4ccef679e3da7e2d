"""Problem.transform written as plain column-by-column numpy expressions, for tests and benchmarks.

:meth:`landrisk.uq.Problem.transform` does the same arithmetic in place on contiguous rows; this version
keeps every expression whole, as the textbook writes it, so that a test can require the two to agree to
the last bit and a benchmark can time one against the other:

- the Gaussian copula u -> Phi(z L^T) with z = Phi^-1(u) on the correlated inputs, each row sum added in
  the order j = 0..i (L the Cholesky factor of the normal-space correlation 2 sin(pi rho_S / 6), Kruskal
  1958, J. Am. Stat. Assoc. 53:814);
- each marginal's inverse x = F^-1(u), a truncated one as F^-1(F(a) + u (F(b) - F(a))).

It covers the families with closed forms here: uniform, triangular, discrete, and the normal and the
lognormal (by median and sigma_log) untruncated or truncated on an interval that holds the mean. Other
families raise ``NotImplementedError``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray
from scipy import special

from landrisk.uq.distributions import Marginal, Problem, normal_correlation_from_spearman

__all__ = ["plain_ppf", "plain_transform"]

Array = NDArray[np.float64]


def plain_ppf(m: Marginal, u: Array) -> Array:
    """x = F^-1(u) of the marginal ``m`` by the plain expressions."""
    p = m.params
    if m.family == "uniform":
        return p["lower"] + u * (p["upper"] - p["lower"])
    if m.family == "triangular":
        a, mode, b = p["lower"], p["mode"], p["upper"]
        with np.errstate(invalid="ignore"):
            return np.where(u < (mode - a) / (b - a), a + np.sqrt(u * (b - a) * (mode - a)),
                            b - np.sqrt((1 - u) * (b - a) * (b - mode)))
    if m.family == "discrete":  # the first value (ascending) whose cumulative probability exceeds u
        order = np.argsort(p["values"])
        values = np.asarray(p["values"], dtype=float)[order]
        cum = np.cumsum(np.asarray(p["probabilities"], dtype=float)[order])
        cum[-1] = 1.0
        return values[np.minimum(np.searchsorted(cum, u, side="right"), values.size - 1)]
    log = m.family == "lognormal"
    if not (m.family in ("normal", "truncnormal") or (log and "median" in p)):
        raise NotImplementedError(f"no plain expression here for {m.describe()}")
    mu, sd = (np.log(p["median"]), p["sigma_log"]) if log else (p["mean"], p["sd"])
    with np.errstate(divide="ignore"):  # log 0 = -inf: a lognormal without a lower bound
        lo, hi = (np.log(m.lower), np.log(m.upper)) if log else (m.lower, m.upper)
    a, b = (lo - mu) / sd, (hi - mu) / sd
    if np.isinf(a) and np.isinf(b):
        y = mu + sd * special.ndtri(u)
    elif a > 0 or b <= 0:
        raise NotImplementedError("a truncation interval wholly in one tail is inverted in log space")
    else:
        pa, pb = special.ndtr(a), special.ndtr(b)
        y = np.clip(mu + sd * special.ndtri(pa + u * (pb - pa)), lo, hi)
    return np.exp(y) if log else y


def plain_transform(problem: Problem, u: Array) -> Array:
    """x[n, d] from uniform points u[n, d]: the copula on the correlated inputs, then each marginal."""
    u = np.array(u, dtype=float)
    if problem.spearman is not None:
        c = problem.correlated
        chol = np.linalg.cholesky(normal_correlation_from_spearman(problem.spearman))[np.ix_(c, c)]
        z = special.ndtri(u[:, c])
        mixed = []
        for i in range(c.size):
            acc = z[:, 0] * chol[i, 0]
            for j in range(1, i + 1):
                acc = acc + z[:, j] * chol[i, j]
            mixed.append(acc)
        u[:, c] = special.ndtr(np.column_stack(mixed))
    return np.column_stack([plain_ppf(m, u[:, j]) for j, m in enumerate(problem.marginals)])

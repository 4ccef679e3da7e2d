"""Shapley effects: order-independent variance shares for correlated inputs.

Owen 2014 ("Sobol' indices and Shapley value", SIAM/ASA J. Uncertainty Quantification 2:245) and
Song, Nelson & Staum 2016 ("Shapley effects for global sensitivity analysis: theory and computation",
SIAM/ASA JUQ 4:1060): with the cost c(u) = E[Var(Y | X_{-u})] of a set u of inputs,

    Sh_i = sum over u not holding i of |u|! (d - |u| - 1)! / d! (c(u + i) - c(u)) / Var(Y),

which sums to 1 and shares a correlated pair's common part between its members whatever their order.
Here every subset is enumerated (d <= 10) and c(u) is estimated by the double loop of Song et al.
(Algorithm 1): n_outer draws of X_{-u}, for each n_inner draws of X_u given X_{-u}, the mean of the inner
sample variances. The inputs are a Gaussian copula: the model takes correlated standard normal scores
z ~ N(0, R) (the caller maps them to its marginals), and X_u | X_{-u} is the conditional normal
N(R_u,-u R_-u^-1 z_-u, R_uu - R_u,-u R_-u^-1 R_-u,u). Shapley effects are unchanged by the monotone
map from the scores to the inputs. Standard errors from the outer loop, propagated through the sum,
and from the sample variance of Y (the denominator).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from landrisk.uq.sampling import Seed, normalize_seed

__all__ = ["ShapleyEffects", "shapley_effects"]

Array = NDArray[np.float64]


@dataclass(frozen=True)
class ShapleyEffects:
    """Shapley effects with their standard errors; ``calls`` model evaluations."""

    names: tuple[str, ...]
    effects: Array
    se: Array
    variance: float
    calls: int


def _conditional(r: Array, u: list[int], rest: list[int]
                 ) -> tuple[NDArray[np.floating], NDArray[np.floating]]:
    """The regression matrix and the Cholesky factor of z_u | z_rest for z ~ N(0, R)."""
    r_uu = r[np.ix_(u, u)]
    if not rest:
        return np.zeros((len(u), 0)), np.linalg.cholesky(r_uu)
    r_ur = r[np.ix_(u, rest)]
    b = np.linalg.solve(r[np.ix_(rest, rest)], r_ur.T).T
    cov = r_uu - b @ r_ur.T
    cov = (cov + cov.T) / 2 + 1e-12 * np.eye(len(u))
    return b, np.linalg.cholesky(cov)


def shapley_effects(
    model: Callable[[Array], Array],
    correlation: Array,
    names: tuple[str, ...] | list[str],
    *,
    n_outer: int = 1000,
    n_inner: int = 3,
    n_variance: int = 20000,
    seed: Seed = None,
) -> ShapleyEffects:
    """Shapley effects of ``model`` (z[n, d] correlated standard normal scores -> y[n]).

    ``correlation`` is the normal-space correlation R of the scores. Cost: n_variance + (2^d - 2)
    n_outer n_inner model calls.
    """
    rng = normalize_seed(seed)
    r = np.asarray(correlation, dtype=float)
    d = r.shape[0]
    if d > 10:
        raise ValueError(f"Shapley effects by subset enumeration take at most 10 inputs, not {d}")
    chol = np.linalg.cholesky(r)
    z_var = rng.normal(size=(n_variance, d)) @ chol.T
    subsets = [u for size in range(1, d) for u in itertools.combinations(range(d), size)]
    blocks = [z_var]
    for u in subsets:  # every subset's conditional samples, evaluated in one model call
        rest = [j for j in range(d) if j not in u]
        b, lc = _conditional(r, list(u), rest)
        z_rest = rng.normal(size=(n_outer, len(rest))) @ np.linalg.cholesky(r[np.ix_(rest, rest)]).T
        z = np.empty((n_outer, n_inner, d))
        z[:, :, rest] = z_rest[:, None, :]
        z[:, :, list(u)] = (z_rest @ b.T)[:, None, :] + rng.normal(size=(n_outer, n_inner, len(u))) @ lc.T
        blocks.append(z.reshape(-1, d))
    y_all = model(np.concatenate(blocks))
    y = y_all[:n_variance]
    var = float(np.var(y, ddof=1))
    var_se = float(np.std((y - y.mean()) ** 2, ddof=1) / math.sqrt(n_variance))
    cost: dict[tuple[int, ...], tuple[float, float]] = {(): (0.0, 0.0), tuple(range(d)): (var, 0.0)}
    per = n_outer * n_inner
    for k, u in enumerate(subsets):
        yi = y_all[n_variance + k * per: n_variance + (k + 1) * per].reshape(n_outer, n_inner)
        v = np.var(yi, axis=1, ddof=1)
        cost[u] = (float(v.mean()), float(v.std(ddof=1) / math.sqrt(n_outer)))
    calls = int(y_all.size)
    eff = np.zeros(d)
    se2 = np.zeros(d)
    for i in range(d):
        # sum over u without i of w(|u|) (c(u + i) - c(u)): each c(v) enters with a known coefficient
        coef: dict[tuple[int, ...], float] = {}
        others = [j for j in range(d) if j != i]
        for size in range(d):
            w = math.factorial(size) * math.factorial(d - size - 1) / math.factorial(d)
            for u in itertools.combinations(others, size):
                with_i = tuple(sorted((*u, i)))
                coef[with_i] = coef.get(with_i, 0.0) + w
                coef[u] = coef.get(u, 0.0) - w
        eff[i] = sum(c * cost[v][0] for v, c in coef.items())
        se2[i] = sum((c * cost[v][1]) ** 2 for v, c in coef.items())
    scale = var if var > 0 else 1.0
    # the ratio's error: the costs' and the variance's (independent samples), to first order
    se = np.sqrt(se2 / scale**2 + (eff / scale * var_se / scale) ** 2)
    return ShapleyEffects(tuple(names), eff / scale, se, var, calls)

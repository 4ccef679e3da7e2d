"""Sobol indices by Monte Carlo: the pick-freeze design with the Saltelli and Jansen estimators.

Two independent sample matrices A and B (n x d) and, for each input i, AB_i = A with column i from B
(Saltelli et al. 2010, "Variance based sensitivity analysis of model output. Design and estimator for the
total sensitivity index", Computer Physics Communications 181:259): n (d + 2) model calls.

    first order  S_i  = mean(f(B) (f(AB_i) - f(A))) / V          (Saltelli et al. 2010, Table 2, b)
    total        ST_i = mean((f(A) - f(AB_i))^2) / (2 V)          (Jansen 1999; Table 2, f)

with V the variance of f over A and B together. Intervals by bootstrap over the n rows (Archer,
Saltelli & Sobol 1997, J. Stat. Comput. Simul. 58:99). The inputs are the independent uniforms of the
Problem; with a Gaussian copula the indices refer to them, in the order given.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.stats import qmc

from landrisk.uq.distributions import Problem
from landrisk.uq.sampling import Seed, normalize_seed

__all__ = ["MonteCarloSobol", "sobol_monte_carlo"]

Array = NDArray[np.float64]
_EPS = 2.0**-53


@dataclass(frozen=True)
class MonteCarloSobol:
    """Sobol indices by Monte Carlo with bootstrap intervals."""

    names: tuple[str, ...]
    first: Array
    total: Array
    first_ci: Array  # (d, 2)
    total_ci: Array  # (d, 2)
    calls: int
    variance: float
    mean: float


def _estimates(fa: Array, fb: Array, fab: Array) -> tuple[Array, Array, float]:
    v = np.var(np.concatenate([fa, fb]), ddof=1)
    if v <= 0:
        z = np.zeros(fab.shape[0])
        return z, z, 0.0
    first = np.mean(fb[None, :] * (fab - fa[None, :]), axis=1) / v
    total = 0.5 * np.mean((fa[None, :] - fab) ** 2, axis=1) / v
    return first, total, float(v)


def sobol_monte_carlo(
    problem: Problem,
    model: Callable[[Array], Array],
    n: int,
    *,
    seed: Seed = None,
    bootstrap: int = 200,
    conf: float = 0.95,
) -> MonteCarloSobol:
    """Sobol indices of ``model`` (x[m, d] -> y[m]) over ``problem`` by the pick-freeze design.

    A and B are the two halves of a 2d-dimensional scrambled Sobol sequence of n points.
    """
    rng = normalize_seed(seed)
    d = problem.dimension
    u = np.clip(qmc.Sobol(2 * d, scramble=True, seed=rng).random(n), _EPS, 1 - _EPS)
    ua, ub = u[:, :d], u[:, d:]
    blocks = [ua, ub]
    for i in range(d):
        ab = ua.copy()
        ab[:, i] = ub[:, i]
        blocks.append(ab)
    y = model(problem.transform(np.concatenate(blocks)))
    fa, fb = y[:n], y[n : 2 * n]
    fab = y[2 * n :].reshape(d, n)
    first, total, v = _estimates(fa, fb, fab)
    boot_first = np.empty((bootstrap, d))
    boot_total = np.empty((bootstrap, d))
    for k in range(bootstrap):
        r = rng.integers(0, n, n)
        boot_first[k], boot_total[k], _ = _estimates(fa[r], fb[r], fab[:, r])
    a = (1 - conf) / 2
    return MonteCarloSobol(
        names=problem.names,
        first=first,
        total=total,
        first_ci=np.quantile(boot_first, [a, 1 - a], axis=0).T,
        total_ci=np.quantile(boot_total, [a, 1 - a], axis=0).T,
        calls=n * (d + 2),
        variance=v,
        mean=float(np.mean(np.concatenate([fa, fb]))),
    )

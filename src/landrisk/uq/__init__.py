"""Generic uncertainty machinery: distributions, sampling, Monte Carlo and interval statistics.

This layer knows only vectorised callables f(X[n, d]) -> {name: y[n]} and distributions; it imports
nothing of landrisk's physics or model.
"""

from landrisk.uq.distributions import (
    FAMILIES,
    Marginal,
    Problem,
    make_marginal,
    normal_correlation_from_spearman,
)
from landrisk.uq.montecarlo import MonteCarloRun, run_monte_carlo, sample
from landrisk.uq.sampling import SAMPLERS, normalize_seed, uniform_chunks
from landrisk.uq.stats import (
    EventProbability,
    Percentile,
    convergence,
    event_probability,
    exceedance_curve,
    mean_interval,
    percentiles,
    wilson_interval,
)

__all__ = [
    "FAMILIES",
    "SAMPLERS",
    "EventProbability",
    "Marginal",
    "MonteCarloRun",
    "Percentile",
    "Problem",
    "convergence",
    "event_probability",
    "exceedance_curve",
    "make_marginal",
    "mean_interval",
    "normal_correlation_from_spearman",
    "normalize_seed",
    "percentiles",
    "run_monte_carlo",
    "sample",
    "uniform_chunks",
    "wilson_interval",
]

"""Generic uncertainty machinery: distributions, sampling, Monte Carlo and interval statistics.

This layer knows only vectorised callables f(X[n, d]) -> {name: y[n]} and distributions; it imports
nothing of landrisk's physics or model.
"""

from landrisk.uq.chaos import ChaosFit, ChaosSpace, SobolIndices, fit_chaos, sobol_indices
from landrisk.uq.distributions import (
    FAMILIES,
    Marginal,
    Problem,
    make_marginal,
    normal_correlation_from_spearman,
)
from landrisk.uq.montecarlo import MonteCarloRun, run_monte_carlo, sample
from landrisk.uq.sampling import SAMPLERS, normalize_seed, uniform_chunks
from landrisk.uq.sensitivity import MonteCarloSobol, sobol_monte_carlo
from landrisk.uq.stats import (
    EventProbability,
    Moments,
    Percentile,
    convergence,
    event_probability,
    exceedance_curve,
    mean_interval,
    percentiles,
    wilson_interval,
    zero_event_bound,
)

__all__ = [
    "FAMILIES",
    "SAMPLERS",
    "ChaosFit",
    "ChaosSpace",
    "EventProbability",
    "Marginal",
    "Moments",
    "MonteCarloRun",
    "MonteCarloSobol",
    "Percentile",
    "Problem",
    "SobolIndices",
    "convergence",
    "event_probability",
    "exceedance_curve",
    "fit_chaos",
    "make_marginal",
    "mean_interval",
    "normal_correlation_from_spearman",
    "normalize_seed",
    "percentiles",
    "run_monte_carlo",
    "sample",
    "sobol_indices",
    "sobol_monte_carlo",
    "uniform_chunks",
    "wilson_interval",
    "zero_event_bound",
]

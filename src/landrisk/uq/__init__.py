"""Generic uncertainty machinery: distributions, sampling, Monte Carlo and interval statistics.

This layer knows only vectorised callables f(X[n, d]) -> {name: y[n]} and distributions; it imports
nothing of landrisk's physics or model. Its modules are imported on first use of one of their names
(``from landrisk.uq import fit_chaos`` imports chaospy; reading a scenario does not).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from landrisk._lazy import lazy_names

if TYPE_CHECKING:
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
        RunningMoments,
        convergence,
        event_probability,
        exceedance_curve,
        mean_interval,
        percentiles,
        wilson_interval,
        zero_event_bound,
    )

_WHERE = {
    "landrisk.uq.chaos": ("ChaosFit", "ChaosSpace", "SobolIndices", "fit_chaos", "sobol_indices"),
    "landrisk.uq.distributions": ("FAMILIES", "Marginal", "Problem", "make_marginal",
                                  "normal_correlation_from_spearman"),
    "landrisk.uq.montecarlo": ("MonteCarloRun", "run_monte_carlo", "sample"),
    "landrisk.uq.sampling": ("SAMPLERS", "normalize_seed", "uniform_chunks"),
    "landrisk.uq.sensitivity": ("MonteCarloSobol", "sobol_monte_carlo"),
    "landrisk.uq.stats": ("EventProbability", "Moments", "Percentile", "RunningMoments", "convergence",
                          "event_probability",
                          "exceedance_curve", "mean_interval", "percentiles", "wilson_interval",
                          "zero_event_bound"),
}
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
    "RunningMoments",
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


__getattr__, __dir__ = lazy_names("landrisk.uq", _WHERE, globals())

"""Test models with exactly known output distributions, for checking the uncertainty machinery.

Constant-deceleration stop: a vehicle braking from speed V at a constant deceleration mu g stops in
d = V^2 / (2 mu g) (kinematics). With V and mu independent lognormal, ln d = 2 ln V - ln mu - ln(2 g) is
normal, so d is lognormal with known parameters (the lognormal is closed under powers and products:
Aitchison & Brown, *The Lognormal Distribution*, Cambridge 1957, §2.3). Its percentiles and exceedance
probabilities are therefore exact, and Monte Carlo estimates must match them within their intervals.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats

from landrisk.uq.distributions import Problem, make_marginal

__all__ = ["STANDARD_GRAVITY", "StoppingDistance"]

STANDARD_GRAVITY = 9.80665  # [m/s^2]


class StoppingDistance:
    """d = V^2 / (2 mu g), V ~ lognormal(median v50, sigma_v), mu ~ lognormal(median mu50, sigma_mu).

    Parameters
    ----------
    v50 : float
        Median speed [m/s].
    sigma_v : float
        Standard deviation of ln V [-].
    mu50 : float
        Median deceleration coefficient [-].
    sigma_mu : float
        Standard deviation of ln mu [-].
    """

    def __init__(self, v50: float = 65.0, sigma_v: float = 0.05, mu50: float = 0.3, sigma_mu: float = 0.25):
        self.v50, self.sigma_v, self.mu50, self.sigma_mu = v50, sigma_v, mu50, sigma_mu
        self.log_median = 2 * math.log(v50) - math.log(mu50) - math.log(2 * STANDARD_GRAVITY)
        self.log_sd = math.hypot(2 * sigma_v, sigma_mu)

    def problem(self) -> Problem:
        """The two independent inputs, named ``speed`` and ``mu``."""
        return Problem.independent(
            ("speed", "mu"),
            (make_marginal("lognormal", {"median": self.v50, "sigma_log": self.sigma_v}),
             make_marginal("lognormal", {"median": self.mu50, "sigma_log": self.sigma_mu})),
        )

    def __call__(self, x: NDArray[np.float64]) -> dict[str, NDArray[np.float64]]:
        """The model f(X[n, 2]) -> {"distance": d}."""
        return {"distance": x[:, 0] ** 2 / (2 * x[:, 1] * STANDARD_GRAVITY)}

    def ppf(self, q: ArrayLike) -> NDArray[np.float64]:
        """Exact quantiles of d."""
        return np.exp(self.log_median + self.log_sd * stats.norm.ppf(q))

    def sf(self, d: ArrayLike) -> NDArray[np.float64]:
        """Exact P(D > d)."""
        return stats.norm.sf((np.log(d) - self.log_median) / self.log_sd)

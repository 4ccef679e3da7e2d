"""Estimates with confidence intervals from Monte Carlo samples.

- Percentiles: the sample quantile with a distribution-free interval between two order statistics
  x_(l) <= Q_p <= x_(u), l and u from the binomial distribution of the count below Q_p (David &
  Nagaraja, *Order Statistics*, 3rd ed., Wiley 2003, §7.1; the interval of ``scipy.stats.quantile_test``).
  A percentile is *supported* when both order statistics exist in the sample.
- Probabilities of an event: k events in n samples, the Wilson score interval (Wilson 1927, J. Am. Stat.
  Assoc. 22:209) or Clopper-Pearson, through ``scipy.stats.binomtest``. With no event the estimate is
  only an upper bound: the one-sided Clopper-Pearson bound 1 - (1 - conf)^(1/n), about 3/n at 95 %
  (the "rule of three").
- For quasi-random (Sobol, Halton) and Latin-hypercube samples, these intervals, derived for independent
  samples, are conservative approximations: such points are more even than random ones.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats

__all__ = [
    "EventProbability",
    "Percentile",
    "convergence",
    "event_probability",
    "exceedance_curve",
    "mean_interval",
    "percentiles",
    "wilson_interval",
]


@dataclass(frozen=True)
class Percentile:
    """A percentile estimate: p in percent, the value and its interval (NaN-free: None if unsupported)."""

    p: float
    value: float | None
    lo: float | None
    hi: float | None
    supported: bool

    def as_dict(self) -> dict[str, float | bool | None]:
        return {"p": self.p, "value": self.value, "ci_lo": self.lo, "ci_hi": self.hi,
                "supported": self.supported}


def _order_statistic_indices(n: int, q: float, conf: float) -> tuple[int, int]:
    """0-based indices (l, u) of the order statistics bounding the q-quantile with confidence ``conf``.

    The construction of ``scipy.stats.quantile_test(...).confidence_interval()`` (two-sided): with K the
    binomial(n, q) count below the quantile, l = F_K^-1(a) - 1 and u = F_K^-1(1 - a), a = (1 - conf)/2.
    """
    a = (1.0 - conf) / 2.0
    dist = stats.binom(n, q)
    return int(dist.ppf(a)) - 1, int(dist.isf(a))


def _linear_quantile(xs: NDArray[np.float64], q: float) -> float:
    """numpy's default ("linear", Hyndman & Fan definition 7) quantile of an ascending array."""
    h = (xs.size - 1) * q
    lo = int(np.floor(h))
    hi = min(lo + 1, xs.size - 1)
    return float(xs[lo] + (h - lo) * (xs[hi] - xs[lo]))


def percentiles(
    x: ArrayLike, ps: ArrayLike, conf: float = 0.95, *, presorted: bool = False
) -> list[Percentile]:
    """Percentiles ``ps`` (in percent) of the sample ``x``, each with a ``conf`` order-statistic interval.

    The point estimate is numpy's linear-interpolation quantile; a percentile whose interval would need
    an order statistic outside the sample is returned as unsupported (value None).
    """
    xs = np.asarray(x, dtype=float) if presorted else np.sort(np.asarray(x, dtype=float))
    n = xs.size
    out = []
    for p in np.atleast_1d(np.asarray(ps, dtype=float)):
        q = p / 100.0
        if n == 0 or not 0 < q < 1:
            out.append(Percentile(float(p), None, None, None, False))
            continue
        lo, hi = _order_statistic_indices(n, q, conf)
        if lo < 0 or hi >= n:
            out.append(Percentile(float(p), None, None, None, False))
            continue
        value = _linear_quantile(xs, q)
        out.append(Percentile(float(p), value, float(xs[lo]), float(xs[hi]), True))
    return out


@dataclass(frozen=True)
class EventProbability:
    """The probability of an event from k events in n samples."""

    events: int
    n: int
    estimate: float
    lo: float
    hi: float
    upper_bound_only: bool
    method: str
    conf: float

    def as_dict(self) -> dict[str, float | int | bool | str]:
        return {"events": self.events, "samples": self.n, "estimate": self.estimate, "ci_lo": self.lo,
                "ci_hi": self.hi, "upper_bound_only": self.upper_bound_only, "method": self.method,
                "confidence": self.conf}

    def text(self) -> str:
        """``'< 3.0e-06 (0 of 1,000,000; 95 % upper bound)'`` or ``'1.2e-03 [1.0e-03, 1.4e-03] ...'``."""
        if self.upper_bound_only:
            return f"< {self.hi:.2e} (0 of {self.n:,}; {100 * self.conf:g} % upper bound)"
        return (f"{self.estimate:.3e} [{self.lo:.2e}, {self.hi:.2e}] ({self.events:,} of {self.n:,}; "
                f"{100 * self.conf:g} % {self.method})")


def event_probability(k: int, n: int, conf: float = 0.95, method: str = "wilson") -> EventProbability:
    """P(event) from ``k`` events in ``n`` samples with a ``conf`` interval (``wilson`` or ``exact``).

    With k = 0 the result is an upper bound only: 1 - (1 - conf)^(1/n) (one-sided Clopper-Pearson).
    """
    if n <= 0 or not 0 <= k <= n:
        raise ValueError("need 0 <= k <= n and n > 0")
    if k == 0:
        upper = 1.0 - (1.0 - conf) ** (1.0 / n)
        return EventProbability(0, n, 0.0, 0.0, upper, True, "clopper-pearson", conf)
    ci = stats.binomtest(int(k), int(n)).proportion_ci(confidence_level=conf, method=method)
    return EventProbability(int(k), int(n), k / n, float(ci.low), float(ci.high), False, method, conf)


def mean_interval(x: ArrayLike, conf: float = 0.95) -> tuple[float, float, float, float]:
    """Mean, standard deviation and the normal-approximation interval of the mean."""
    xs = np.asarray(x, dtype=float)
    mean = float(xs.mean())
    sd = float(xs.std(ddof=1)) if xs.size > 1 else 0.0
    half = float(stats.norm.ppf(0.5 + conf / 2) * sd / np.sqrt(xs.size))
    return mean, sd, mean - half, mean + half


def wilson_interval(
    k: ArrayLike, n: ArrayLike, conf: float = 0.95
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Vectorised Wilson score interval (Wilson 1927) for k events in n trials."""
    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    z = stats.norm.ppf(0.5 + conf / 2)
    p = k / n
    denom = 1.0 + z * z / n
    centre = (p + z * z / (2 * n)) / denom
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / denom
    return np.maximum(centre - half, 0.0), np.minimum(centre + half, 1.0)


def exceedance_curve(
    sorted_x: NDArray[np.float64], grid: ArrayLike, conf: float = 0.95
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """P(X > g) at each grid value g, with pointwise Wilson intervals, from an ascending sample."""
    n = sorted_x.size
    k = n - np.searchsorted(sorted_x, np.asarray(grid, dtype=float), side="right")
    lo, hi = wilson_interval(k, n, conf)
    return k / n, lo, hi


def convergence(
    x: NDArray[np.float64], event: NDArray[np.bool_], q: float, points: int = 20
) -> dict[str, NDArray[np.float64]]:
    """Running estimates over growing prefixes of the sample: P(event) and the q-quantile (q in (0, 1)).

    Returns arrays ``n``, ``p_event``, ``quantile`` at about ``points`` log-spaced prefix sizes.
    """
    total = x.size
    sizes = np.unique(np.geomspace(min(100, total), total, points).astype(int))
    cum_events = np.cumsum(event)
    quant = np.array([np.quantile(x[:m], q) for m in sizes])
    return {"n": sizes.astype(float), "p_event": cum_events[sizes - 1] / sizes, "quantile": quant}

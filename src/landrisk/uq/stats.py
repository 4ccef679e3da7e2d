"""Estimates with confidence intervals from Monte Carlo samples.

- Percentiles: the sample quantile with a distribution-free interval between two order statistics
  x_(l) <= Q_p <= x_(u), l and u from the binomial distribution of the count below Q_p (David &
  Nagaraja, *Order Statistics*, 3rd ed., Wiley 2003, §7.1; the interval of ``scipy.stats.quantile_test``).
  A percentile is *supported* when both order statistics exist in the sample.
- Probabilities of an event: k events in n samples, the Wilson score interval (Wilson 1927, J. Am. Stat.
  Assoc. 22:209) or Clopper-Pearson (the intervals of ``scipy.stats.binomtest``, computed here with
  scipy.special, whose import is far cheaper). With no event the estimate is
  only an upper bound: the one-sided Clopper-Pearson bound 1 - (1 - conf)^(1/n), about 3/n at 95 %
  (the "rule of three").
- Infinite values (an outcome beyond every finite threshold) are kept in percentiles, whose value or
  upper end is then flagged as infinite (``infinite``, ``hi_infinite``; the number is None), and kept out
  of means and standard deviations, which are those of the finite values with the count left out.
- For quasi-random (Sobol, Halton) and Latin-hypercube samples, these intervals, derived for independent
  samples, are conservative approximations: such points are more even than random ones.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

__all__ = [
    "EventProbability",
    "Moments",
    "Percentile",
    "RunningMoments",
    "convergence",
    "event_probability",
    "exceedance_curve",
    "mean_interval",
    "percentiles",
    "wilson_interval",
    "zero_event_bound",
]


@dataclass(frozen=True)
class Percentile:
    """A percentile estimate: p in percent, the value and its interval (NaN-free: None if unsupported).

    ``infinite``: the percentile itself is +inf (value None); ``hi_infinite``: the upper end of its
    interval is +inf (hi None).
    """

    p: float
    value: float | None
    lo: float | None
    hi: float | None
    supported: bool
    infinite: bool = False
    hi_infinite: bool = False

    def as_dict(self) -> dict[str, float | bool | None]:
        return {"p": self.p, "value": self.value, "ci_lo": self.lo, "ci_hi": self.hi,
                "supported": self.supported, "infinite": self.infinite, "ci_hi_infinite": self.hi_infinite}


def _order_statistic_indices(n: int, q: float, conf: float) -> tuple[int, int]:
    """0-based indices (l, u) of the order statistics bounding the q-quantile with confidence ``conf``.

    The construction of ``scipy.stats.quantile_test(...).confidence_interval()`` (two-sided): with K the
    binomial(n, q) count below the quantile, l = F_K^-1(a) - 1 and u = F_K^-1(1 - a), a = (1 - conf)/2.
    """
    a = (1.0 - conf) / 2.0
    return _binom_ppf(a, n, q) - 1, _binom_isf(a, n, q)


def _binom_ppf(y: float, n: int, p: float) -> int:
    """Least k with P(K <= k) >= y, K ~ binomial(n, p): the quantile ``scipy.stats.binom.ppf`` returns
    (its Boost-based ufunc in scipy.special, without importing scipy.stats; where that private ufunc is
    missing, the continuous inverse bdtrik rounded up, one lower if the CDF bdtr there reaches y)."""
    ufunc = getattr(special, "_ufuncs", None)
    if ufunc is not None and hasattr(ufunc, "_binom_ppf"):
        return int(ufunc._binom_ppf(y, n, p))
    k = int(np.ceil(special.bdtrik(y, n, p)))
    below = max(k - 1, 0)
    return below if special.bdtr(below, n, p) >= y else k


def _binom_isf(y: float, n: int, p: float) -> int:
    """Least k with P(K > k) <= y: ``scipy.stats.binom.isf`` (as :func:`_binom_ppf`)."""
    ufunc = getattr(special, "_ufuncs", None)
    if ufunc is not None and hasattr(ufunc, "_binom_isf"):
        return int(ufunc._binom_isf(y, n, p))
    return _binom_ppf(1.0 - y, n, p)


def _linear_quantile(xs: NDArray[np.float64], q: float) -> float:
    """numpy's default ("linear", Hyndman & Fan definition 7) quantile of an ascending array.

    An infinite order statistic with a nonzero weight gives +inf (never inf - inf or 0 * inf).
    """
    h = (xs.size - 1) * q
    lo = int(np.floor(h))
    hi = min(lo + 1, xs.size - 1)
    a, b = float(xs[lo]), float(xs[hi])
    w = h - lo
    if w == 0.0 or a == b:
        return a
    return a + w * (b - a)


def _finite_or_none(x: float) -> float | None:
    return x if np.isfinite(x) else None


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
        out.append(Percentile(float(p), _finite_or_none(value), _finite_or_none(float(xs[lo])),
                              _finite_or_none(float(xs[hi])), True, bool(np.isposinf(value)),
                              bool(np.isposinf(xs[hi]))))
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

    def as_dict(self) -> dict[str, float | int | bool | str | None]:
        """JSON-ready: with no event the estimate is None (not 0, which a sum over cases would add) and
        ``upper_bound`` holds the one-sided bound; otherwise ``upper_bound`` is None."""
        return {"events": self.events, "samples": self.n,
                "estimate": None if self.upper_bound_only else self.estimate, "ci_lo": self.lo,
                "ci_hi": self.hi, "upper_bound_only": self.upper_bound_only,
                "upper_bound": self.hi if self.upper_bound_only else None, "method": self.method,
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
        upper = zero_event_bound(n, conf)
        return EventProbability(0, n, 0.0, 0.0, upper, True, "clopper-pearson", conf)
    if method == "wilson":
        lo, hi = (float(x) for x in wilson_interval(k, n, conf))
    elif method == "exact":  # Clopper & Pearson 1934: quantiles of beta distributions
        a = (1.0 - conf) / 2.0
        lo = float(special.betaincinv(k, n - k + 1, a))
        hi = 1.0 if k == n else float(special.betaincinv(k + 1, n - k, 1.0 - a))
    else:
        raise ValueError(f"unknown interval method {method!r}; choose wilson or exact")
    return EventProbability(int(k), int(n), k / n, lo, hi, False, method, conf)


class Moments(NamedTuple):
    """Mean, standard deviation and the interval of the mean, of the finite values of a sample.

    ``sd``, ``lo`` and ``hi`` are None when fewer than two finite values exist (they cannot be
    estimated), ``mean`` when none does; ``used`` finite values went in, ``excluded`` infinite ones not.
    """

    mean: float | None
    sd: float | None
    lo: float | None
    hi: float | None
    used: int = 0
    excluded: int = 0


def mean_interval(x: ArrayLike, conf: float = 0.95) -> Moments:
    """Mean, standard deviation and the normal-approximation interval of the mean of the finite values.

    Infinite values are left out and counted (``excluded``); with fewer than two finite values the
    standard deviation and the interval cannot be estimated and are None (never 0 or NaN).
    """
    xs = np.asarray(x, dtype=float)
    finite = np.isfinite(xs)
    if np.any(np.isnan(xs)):
        raise ValueError("mean_interval: the sample holds NaN")
    # No copy of a contiguous sample that is finite throughout (the sums then run over the same array).
    used = xs if xs.ndim == 1 and xs.flags.c_contiguous and finite.all() else xs[finite]
    n = int(used.size)
    excluded = int(xs.size - n)
    if n == 0:
        return Moments(None, None, None, None, 0, excluded)
    mean = float(used.mean())
    if n < 2:
        return Moments(mean, None, None, None, n, excluded)
    return _moments(mean, float(used.std(ddof=1)), n, excluded, conf)


def _moments(mean: float, sd: float, n: int, excluded: int, conf: float) -> Moments:
    """Mean, sd and the normal-approximation ``conf`` interval of the mean of n values."""
    half = float(special.ndtri(0.5 + conf / 2) * sd / np.sqrt(n))
    return Moments(mean, sd, mean - half, mean + half, n, excluded)


class RunningMoments:
    """The mean, standard deviation and interval of :func:`mean_interval`, accumulated chunk by chunk.

    Sums of the deviations from a shift (the first chunk's mean of its finite values) keep the variance
    free of the cancellation of sum x^2 - n mean^2 (Chan, Golub & LeVeque, "Algorithms for computing the
    sample variance", The American Statistician 37, 1983). Infinite values are counted and left out, as
    by :func:`mean_interval`; NaN is refused.
    """

    def __init__(self) -> None:
        self.used = 0
        self.excluded = 0
        self.shift = 0.0
        self.s1 = 0.0
        self.s2 = 0.0

    def add(self, x: ArrayLike) -> None:
        """Take the values ``x`` into the sums."""
        xs = np.asarray(x, dtype=float)
        if np.any(np.isnan(xs)):
            raise ValueError("RunningMoments: the sample holds NaN")
        finite = np.isfinite(xs)
        used = xs if finite.all() else xs[finite]
        if used.size == 0:
            self.excluded += xs.size
            return
        if self.used == 0:
            self.shift = float(used.mean())
        d = used - self.shift
        self.s1 += float(d.sum())
        self.s2 += float(np.dot(d, d))
        self.used += int(used.size)
        self.excluded += int(xs.size - used.size)

    def moments(self, conf: float = 0.95) -> Moments:
        """The :class:`Moments` of the values taken so far."""
        n = self.used
        if n == 0:
            return Moments(None, None, None, None, 0, self.excluded)
        mean = self.shift + self.s1 / n
        if n < 2:
            return Moments(mean, None, None, None, n, self.excluded)
        sd = float(np.sqrt(max(self.s2 - self.s1 * self.s1 / n, 0.0) / (n - 1)))
        return _moments(mean, sd, n, self.excluded, conf)


def wilson_interval(
    k: ArrayLike, n: ArrayLike, conf: float = 0.95
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Vectorised Wilson score interval (Wilson 1927) for k events in n trials."""
    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    z = special.ndtri(0.5 + conf / 2)
    p = k / n
    denom = 1.0 + z * z / n
    centre = (p + z * z / (2 * n)) / denom
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / denom
    return np.maximum(centre - half, 0.0), np.minimum(centre + half, 1.0)


def exceedance_curve(
    sorted_x: NDArray[np.float64], grid: ArrayLike, conf: float = 0.95
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """P(X > g) at each grid value g, with pointwise Wilson intervals, from an ascending sample.

    Where no sample exceeds g, the upper end is the one-sided Clopper-Pearson bound 1 - (1 - conf)^(1/n),
    the bound :func:`event_probability` gives for no event (so a figure and a report agree).
    """
    n = sorted_x.size
    k = n - np.searchsorted(sorted_x, np.asarray(grid, dtype=float), side="right")
    lo, hi = wilson_interval(k, n, conf)
    hi = np.where(k == 0, zero_event_bound(n, conf), hi)
    return k / n, lo, hi


def zero_event_bound(n: int, conf: float = 0.95) -> float:
    """The one-sided Clopper-Pearson upper bound on P(event) with no event in ``n`` samples.

    1 - (1 - conf)^(1/n) (Clopper & Pearson 1934, Biometrika 26:404), about 3/n at 95 %.
    """
    return 1.0 - (1.0 - conf) ** (1.0 / n)


def convergence(
    x: NDArray[np.float64], event: NDArray[np.bool_], q: float, points: int = 20, conf: float = 0.95,
    *, sorted_x: NDArray[np.float64] | None = None,
) -> dict[str, NDArray[np.float64]]:
    """Running estimates over growing prefixes of the sample: P(event) and the q-quantile (q in (0, 1)).

    Returns arrays ``n``, ``p_event``, ``quantile`` and the quantile's distribution-free ``conf`` interval
    ``quantile_lo``, ``quantile_hi`` (order statistics, as :func:`percentiles`; NaN where the prefix is
    too short to bound it) at about ``points`` log-spaced prefix sizes. ``sorted_x``, if given, is x in
    ascending order: the whole sample's order statistics are read from it instead of selected again.
    """
    total = x.size
    sizes = np.unique(np.geomspace(min(100, total), total, points).astype(int))
    # Events counted prefix by prefix (the running count at each size, without a cumulative array of n).
    starts = np.concatenate([[0], sizes[:-1]])
    cum_events = np.cumsum([np.count_nonzero(event[a:b]) for a, b in zip(starts, sizes, strict=True)])
    quant = np.empty(sizes.size)
    q_lo = np.full(sizes.size, np.nan)
    q_hi = np.full(sizes.size, np.nan)
    for j, m in enumerate(sizes):
        h = (m - 1) * q
        k = int(np.floor(h))
        lo_i, hi_i = _order_statistic_indices(int(m), q, conf)
        wanted = sorted({k, min(k + 1, m - 1)} | {i for i in (lo_i, hi_i) if 0 <= i < m})
        if m == total and sorted_x is not None:
            part = sorted_x
        else:
            part = np.partition(x[:m], wanted)  # the order statistics needed, without a full sort
        quant[j] = _linear_quantile(part[[k, min(k + 1, m - 1)]] if k + 1 < m else part[[k]], (h - k)
                                    if k + 1 < m else 0.0)
        if 0 <= lo_i and hi_i < m:
            q_lo[j], q_hi[j] = part[lo_i], part[hi_i]
    return {"n": sizes.astype(float), "p_event": cum_events / sizes, "quantile": quant,
            "quantile_lo": q_lo, "quantile_hi": q_hi}

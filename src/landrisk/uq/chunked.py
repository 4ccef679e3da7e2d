"""Monte Carlo statistics that merge exactly across seeded chunks, and paired comparisons.

- `chunk_seeds`: the seeds of the chunks of one large run, from
  ``numpy.random.SeedSequence(seed).spawn(m)``; chunk i always draws the same numbers, whichever worker
  runs it and in whatever order, so merged results do not depend on the number of workers.
- :class:`Histogram`: counts of a non-negative output in bins of fixed width. Counts add, so chunks merge
  exactly; a percentile read from it is within one bin width of the sample percentile (the stated error
  bound), its order-statistic interval widened to the bin edges.
- :class:`PairedCounts` and :func:`paired_comparison`: two events evaluated on the *same* samples
  (common random numbers). The difference of the probabilities is the mean of the paired differences
  D = I_alt - I_base, with the normal interval of a mean (the paired-difference interval, Law,
  *Simulation Modeling and Analysis*, 5th ed., McGraw-Hill 2015, §11.2); the ratio has a delta-method
  interval on the log scale using the covariance of the two estimates (Casella & Berger, *Statistical
  Inference*, 2nd ed. 2002, §5.5.4). The variance of two independent runs of the same size is reported
  beside it: their ratio is the variance reduction the pairing achieved.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from landrisk.uq.stats import Percentile, _order_statistic_indices

__all__ = ["Histogram", "PairedComparison", "PairedCounts", "chunk_seeds", "chunk_sizes",
           "paired_comparison"]


def chunk_sizes(n: int, size: int) -> list[int]:
    """n samples in chunks of ``size`` (the last one shorter)."""
    if n < 1 or size < 1:
        raise ValueError("n and size must be positive")
    return [min(size, n - s) for s in range(0, n, size)]


def chunk_seeds(seed: int, m: int) -> list[np.random.SeedSequence]:
    """One independent seed per chunk, ``SeedSequence(seed).spawn(m)`` (numpy.random.default_rng(s)
    makes chunk i's generator)."""
    return list(np.random.SeedSequence(seed).spawn(m))


@dataclass(frozen=True)
class Histogram:
    """Counts of values in bins [k w, (k + 1) w), k = 0 .. len(counts) - 1; finite values at or above the
    last edge (and NaN values) are counted in ``overflow``, +inf values (outcomes beyond every finite
    threshold, such as a landing that cannot stop) in ``infinite``, negative ones in ``underflow``."""

    width: float
    counts: NDArray[np.int64]
    underflow: int = 0
    overflow: int = 0
    infinite: int = 0

    @classmethod
    def of(cls, x: ArrayLike, width: float, bins: int) -> Histogram:
        """The histogram of the values ``x``."""
        xs = np.asarray(x, dtype=float)
        finite = np.isfinite(xs)
        under = int(np.count_nonzero(finite & (xs < 0)))
        idx = np.floor(xs[finite & (xs >= 0)] / width)
        inside = idx < bins
        counts = np.bincount(idx[inside].astype(np.int64), minlength=bins).astype(np.int64)
        infinite = int(np.count_nonzero(np.isposinf(xs)))
        over = int(np.count_nonzero(~finite) - infinite + np.count_nonzero(~inside))
        return cls(width, counts, under, over, infinite)

    @property
    def n(self) -> int:
        """Number of values counted."""
        return int(self.counts.sum()) + self.underflow + self.overflow + self.infinite

    def merge(self, other: Histogram) -> Histogram:
        """The histogram of both samples (exact: counts add)."""
        if other.width != self.width or other.counts.size != self.counts.size:
            raise ValueError("histograms with different bins cannot be merged")
        return Histogram(self.width, self.counts + other.counts, self.underflow + other.underflow,
                         self.overflow + other.overflow, self.infinite + other.infinite)

    def _value_of_rank(self, r: int, cum: NDArray[np.int64] | None = None) -> float | None:
        """Midpoint of the bin holding the 0-based order statistic r: +inf among the infinite values,
        None below the first bin or among the finite values beyond the last."""
        r -= self.underflow
        if r < 0:
            return None
        cum = np.cumsum(self.counts) if cum is None else cum
        b = int(np.searchsorted(cum, r, side="right"))
        if b < self.counts.size:
            return (b + 0.5) * self.width
        return np.inf if r - int(cum[-1]) >= self.overflow else None

    def percentiles(self, ps: ArrayLike, conf: float = 0.95) -> list[Percentile]:
        """Percentiles (in percent) within one bin width of the sample's, with order-statistic intervals
        widened to the edges of the bins that hold the bounding order statistics. A percentile among the
        infinite values is infinite (flagged, as by :func:`landrisk.uq.percentiles`)."""
        n = self.n
        cum = np.cumsum(self.counts)
        out = []
        for p in np.atleast_1d(np.asarray(ps, dtype=float)):
            q = p / 100.0
            if n == 0 or not 0 < q < 1:
                out.append(Percentile(float(p), None, None, None, False))
                continue
            lo_i, hi_i = _order_statistic_indices(n, q, conf)
            h = (n - 1) * q
            a = math.floor(h)
            b = min(a + 1, n - 1)
            va, vb = self._value_of_rank(a, cum), self._value_of_rank(b, cum)
            lo = self._value_of_rank(lo_i, cum) if lo_i >= 0 else None
            hi = self._value_of_rank(hi_i, cum) if hi_i < n else None
            if va is None or vb is None or lo is None or hi is None:
                out.append(Percentile(float(p), None, None, None, False))
                continue
            value = va if (h == a or va == vb) else va + (h - a) * (vb - va)
            half = self.width / 2
            finite = math.isfinite(value)
            out.append(Percentile(float(p), value if finite else None,
                                  (lo - half) if math.isfinite(lo) else None,
                                  (hi + half) if math.isfinite(hi) else None, True, not finite,
                                  not math.isfinite(hi)))
        return out

    def exceedance(self, x: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.int64]]:
        """The bin edges nearest above ``x`` and the count of values at or above each (the count above
        a value is known only at bin edges)."""
        k = np.clip(np.ceil(np.asarray(x, dtype=float) / self.width), 0, self.counts.size).astype(np.int64)
        tail = np.concatenate([np.cumsum(self.counts[::-1])[::-1], [0]]) + self.overflow + self.infinite
        return (k * self.width).astype(float), tail[k].astype(np.int64)


@dataclass(frozen=True)
class PairedCounts:
    """Two events on the same n samples: how often both, only the baseline, only the alternative."""

    n: int
    both: int
    only_base: int
    only_alt: int

    @classmethod
    def of(cls, base: NDArray[np.bool_], alt: NDArray[np.bool_]) -> PairedCounts:
        b, a = np.asarray(base, dtype=bool), np.asarray(alt, dtype=bool)
        return cls(int(b.size), int(np.count_nonzero(b & a)), int(np.count_nonzero(b & ~a)),
                   int(np.count_nonzero(a & ~b)))

    def merge(self, other: PairedCounts) -> PairedCounts:
        return PairedCounts(self.n + other.n, self.both + other.both, self.only_base + other.only_base,
                            self.only_alt + other.only_alt)

    @property
    def base_events(self) -> int:
        return self.both + self.only_base

    @property
    def alt_events(self) -> int:
        return self.both + self.only_alt


@dataclass(frozen=True)
class PairedComparison:
    """P(alternative) - P(baseline) and P(alternative) / P(baseline) from paired samples.

    ``sd_paired`` and ``sd_independent`` are the standard errors of the difference with the pairing and
    for two independent runs of n samples each; ``variance_reduction`` = (sd_independent / sd_paired)^2.
    The ratio and its interval are None when either event was never seen.
    """

    counts: PairedCounts
    p_base: float
    p_alt: float
    difference: float
    difference_ci: tuple[float, float]
    ratio: float | None
    ratio_ci: tuple[float, float] | None
    sd_paired: float
    sd_independent: float
    variance_reduction: float | None
    conf: float


def paired_difference_interval(c: PairedCounts, conf: float = 0.95) -> tuple[float, float]:
    """``conf`` interval of P(alternative) - P(baseline) from paired counts, by Newcombe's hybrid score
    method (Newcombe, "Improved confidence intervals for the difference between binomial proportions
    based on paired data", Statistics in Medicine 17, 1998, method 10; formula from memory).

    It combines the Wilson intervals of the two proportions through their correlation phi, and unlike the
    Wald interval it keeps a width where few or no samples differ: with no event in either case it is
    [-u, u], u the Wilson upper bound for 0 events in n.
    """
    from landrisk.uq.stats import wilson_interval

    n = c.n
    e, f, g = c.both, c.only_alt, c.only_base
    h = n - e - f - g
    p1, p2 = (e + f) / n, (e + g) / n  # alternative, baseline
    lo, hi = wilson_interval(np.array([e + f, e + g]), n, conf)
    l1, l2, u1, u2 = float(lo[0]), float(lo[1]), float(hi[0]), float(hi[1])
    a = float(e + f) * float(g + h) * float(e + g) * float(f + h)
    phi = (float(e) * h - float(f) * g) / math.sqrt(a) if a > 0 else 0.0
    d1, d2, v1, v2 = p1 - l1, u2 - p2, u1 - p1, p2 - l2
    delta = math.sqrt(max(d1 * d1 - 2.0 * phi * d1 * d2 + d2 * d2, 0.0))
    eps = math.sqrt(max(v1 * v1 - 2.0 * phi * v1 * v2 + v2 * v2, 0.0))
    theta = p1 - p2
    return max(theta - delta, -1.0), min(theta + eps, 1.0)


def paired_comparison(c: PairedCounts, conf: float = 0.95) -> PairedComparison:
    """The paired difference and ratio of the two probabilities, with their ``conf`` intervals.

    The difference's interval is Newcombe's (:func:`paired_difference_interval`); ``sd_paired`` is the
    plain standard error of the mean paired difference, used for the variance reduction against two
    independent runs.
    """
    n = c.n
    if n < 2:
        raise ValueError("a paired comparison needs at least 2 samples")
    from scipy import stats  # only here: scipy.stats is slow to import

    z = float(stats.norm.ppf(0.5 + conf / 2))
    pb, pa = c.base_events / n, c.alt_events / n
    diff = pa - pb
    # sample variance of D in {-1, 0, 1}: (sum D^2 - n mean^2) / (n - 1)
    var_d = max((c.only_alt + c.only_base) - n * diff * diff, 0.0) / (n - 1)
    sd_p = math.sqrt(var_d / n)
    sd_i = math.sqrt((pa * (1 - pa) + pb * (1 - pb)) / n)
    ratio = ratio_ci = None
    if c.base_events > 0 and c.alt_events > 0:
        ratio = pa / pb
        cov = (c.both / n - pa * pb) / n
        var_log = (pa * (1 - pa) / n) / pa**2 + (pb * (1 - pb) / n) / pb**2 - 2 * cov / (pa * pb)
        half = z * math.sqrt(max(var_log, 0.0))
        ratio_ci = (ratio * math.exp(-half), ratio * math.exp(half))
    reduction = (sd_i / sd_p) ** 2 if sd_p > 0 else None
    return PairedComparison(c, pb, pa, diff, paired_difference_interval(c, conf), ratio, ratio_ci, sd_p,
                            sd_i, reduction, conf)

"""Marginal distributions of uncertain inputs, and the joint problem with a Gaussian copula.

Continuous families are chaospy distributions (built on first use, so that reading a scenario does not
import chaospy); every marginal is sampled by its inverse transform
x = F^-1(u), so that any uniform points (pseudo-random, scrambled Sobol, Halton, Latin hypercube) and any
seed give reproducible samples. A continuous family may be truncated to [lower, upper], sampled as
F^-1(F(a) + u (F(b) - F(a))). Discrete choices and empirical samples are small classes with the same
interface.

Correlation: users give rank (Spearman) correlations; the Gaussian copula takes the normal-space
correlation rho_N = 2 sin(pi rho_S / 6) (Pearson's relation for the bivariate normal; Kruskal 1958,
J. Am. Stat. Assoc. 53:814). A Gaussian copula is an assumption: flight data show asymmetric tail
dependence between touchdown variables (Alnasser & Czado 2022, arXiv:2205.04591).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray


class _Special:
    """scipy.special, imported on first use: reading a scenario checks distributions but samples none."""

    def __getattr__(self, name: str) -> Any:
        from scipy import special as module

        return getattr(module, name)


special = _Special()

__all__ = [
    "FAMILIES",
    "Marginal",
    "Problem",
    "make_marginal",
    "normal_correlation_from_spearman",
]

Array = NDArray[np.float64]

#: family -> (required parameters, optional parameters). Quantities are in the unit of the input.
FAMILIES: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "normal": (("mean", "sd"), ("lower", "upper")),
    "truncnormal": (("mean", "sd", "lower", "upper"), ()),
    "lognormal": ((), ("median", "sigma_log", "mean", "sd", "lower", "upper")),
    "uniform": (("lower", "upper"), ()),
    "triangular": (("lower", "mode", "upper"), ()),
    "beta": (("alpha", "beta", "lower", "upper"), ()),
    "weibull": (("shape", "scale"), ("shift", "lower", "upper")),
    "discrete": (("values", "probabilities"), ()),
    "empirical": (("data",), ("pareto_tail_above",)),
}


@dataclass(frozen=True)
class Marginal:
    """One uncertain input's distribution.

    Attributes
    ----------
    family : str
        One of :data:`FAMILIES`.
    params : dict
        The parameters as given (after unit conversion).
    lower, upper : float
        The support (after truncation); infinite where unbounded.
    """

    family: str
    params: Mapping[str, Any]
    lower: float
    upper: float
    _values: Array = field(default_factory=lambda: np.empty(0), repr=False)
    _cum: Array = field(default_factory=lambda: np.empty(0), repr=False)

    @property
    def discrete(self) -> bool:
        """True for a discrete choice."""
        return self.family == "discrete"

    def choices(self) -> tuple[Array, Array]:
        """A discrete choice's values (ascending) and their probabilities."""
        if not self.discrete:
            raise ValueError(f"a {self.family} distribution has no discrete choices")
        return self._values, np.diff(np.concatenate([[0.0], self._cum]))

    @property
    def continuous(self) -> bool:
        """True for a continuous family (not a discrete choice or an empirical sample)."""
        return self.family not in ("discrete", "empirical")

    @cached_property
    def base(self) -> Any:
        """The untruncated continuous distribution as a chaospy object (None for discrete and
        empirical inputs); chaospy is imported here, on first use."""
        if not self.continuous:
            return None
        import chaospy as cp

        p = self.params
        if self.family in ("normal", "truncnormal"):
            return cp.Normal(p["mean"], p["sd"])
        if self.family == "lognormal":
            return cp.LogNormal(*_lognormal_log_params(p))
        if self.family == "uniform":
            return cp.Uniform(p["lower"], p["upper"])
        if self.family == "triangular":
            return cp.Triangle(p["lower"], p["mode"], p["upper"])
        if self.family == "beta":
            return cp.Beta(p["alpha"], p["beta"], p["lower"], p["upper"])
        return cp.Weibull(p["shape"], p["scale"], p.get("shift", 0.0))

    @property
    def truncated(self) -> bool:
        """True where a continuous family is cut to [lower, upper]."""
        return self.continuous and ("lower" in self.params or "upper" in self.params) and \
            self.family not in ("uniform", "triangular", "beta")

    def from_standard_normal(self, z: ArrayLike) -> Array:
        """x = F^-1(Phi(z)) for standard normal z: directly for untruncated normal and lognormal
        inputs (no detour through the uniform, which loses the far tail), by the inverse otherwise."""
        z = np.asarray(z, dtype=float)
        if self.family == "normal" and not self.truncated:
            return self.params["mean"] + self.params["sd"] * z
        if self.family == "lognormal" and not self.truncated:
            mu, sd = self._log_params
            return np.exp(mu + sd * z)
        return self.ppf(np.clip(special.ndtr(z), 2.0**-1074, 1.0 - 2.0**-53))

    def ppf(self, u: ArrayLike) -> Array:
        """Inverse distribution function x = F^-1(u) for u in (0, 1).

        The closed forms work in place on one new array (the arithmetic, and so every bit of the result,
        is that of the plain expressions written beside them).
        """
        u = np.asarray(u, dtype=float)
        if u.ndim == 0:
            return self.ppf(u.reshape(1))[0]
        if self.family == "discrete":
            idx = np.searchsorted(self._cum, u, side="right")
            return np.take(self._values, idx, mode="clip")  # an index past the last value: the last
        if self.family == "empirical":
            # Linear interpolation between order statistics (Hyndman & Fan 1996, definition 7); above
            # the threshold quantile q, if asked for, the fitted generalised Pareto tail (Coles 2001, ch. 4).
            x = np.quantile(self._values, u, method="linear")
            if "pareto_threshold" not in self.params:
                return x
            from scipy import stats

            q = float(self.params["pareto_tail_above"])
            tail = np.clip((u - q) / (1 - q), 0.0, 1.0)
            with np.errstate(invalid="ignore"):
                gp = self.params["pareto_threshold"] + stats.genpareto.ppf(
                    tail, self.params["pareto_shape"], scale=self.params["pareto_scale"])
            return np.where(u > q, gp, x)
        if self.family in ("normal", "truncnormal"):
            return self._normal_ppf(u)
        if self.family == "lognormal":  # exp of a (truncated) normal: the fast normal path
            z = self._normal_ppf(u)
            return np.exp(z, out=z)
        if self.family in ("uniform", "triangular"):  # closed forms, much cheaper than chaospy's inverse
            a, b = float(self.params["lower"]), float(self.params["upper"])
            if self.family == "uniform":
                return a + u * (b - a)
            m = float(self.params["mode"])
            c = (m - a) / (b - a)
            # where(u < c, a + sqrt(u (b - a) (m - a)), b - sqrt((1 - u) (b - a) (b - m)))
            left = u * (b - a)
            left *= m - a
            right = 1 - u
            right *= b - a
            right *= b - m
            with np.errstate(invalid="ignore"):
                np.sqrt(left, out=left)
                np.sqrt(right, out=right)
            left += a
            np.subtract(b, right, out=right)
            np.copyto(right, left, where=u < c)
            return right
        if self.truncated:
            fa, fb = self._base_cdf(self.lower), self._base_cdf(self.upper)
            return np.clip(self.base.inv(fa + u * (fb - fa)), self.lower, self.upper)
        return self.base.inv(u)

    def _base_cdf(self, x: float) -> float:
        if math.isinf(x):
            return 0.0 if x < 0 else 1.0
        return float(self.base.fwd(x))

    def _normal_ppf(self, u: Array) -> Array:
        """Inverse of the (truncated) normal; for the lognormal, of its logarithm."""
        if self.family == "lognormal":
            mu, sd = self._log_params
            with np.errstate(divide="ignore"):
                lower, upper = np.log(self.lower), np.log(self.upper)
        else:
            mu, sd = self.params["mean"], self.params["sd"]
            lower, upper = self.lower, self.upper
        a = (lower - mu) / sd
        b = (upper - mu) / sd
        if math.isinf(a) and math.isinf(b):
            z = special.ndtri(u)
            z *= sd
            z += mu  # mu + sd z
            return z
        # An interval wholly in one tail is mirrored into the lower tail and inverted in log space,
        # x = Phi^-1(Phi(a) + u (Phi(b) - Phi(a))) with log Phi from log_ndtr and Phi^-1(exp(.)) from
        # ndtri_exp, so that it stays exact however far out the interval lies (Phi(-40) underflows).
        if a > 0 or b <= 0:
            sign = -1.0 if a > 0 else 1.0
            lo_z, hi_z = (-b, -a) if a > 0 else (a, b)
            la, lb = special.log_ndtr(lo_z), special.log_ndtr(hi_z)
            r = math.exp(la - lb)  # Phi(lo_z) / Phi(hi_z), in [0, 1)
            # Mirrored, the quantile u of the interval is the quantile 1 - u of its mirror image.
            share = np.log1p(-u * (1.0 - r)) if a > 0 else np.log(r + u * (1.0 - r))
            with np.errstate(divide="ignore"):
                z = sign * np.clip(special.ndtri_exp(lb + share), lo_z, hi_z)
        else:  # the interval holds the mean: Phi keeps its precision on both sides
            pa, pb = special.ndtr(a), special.ndtr(b)
            z = u * (pb - pa)
            z += pa
            special.ndtri(z, out=z)  # ndtri(pa + u (pb - pa))
        z *= sd
        z += mu
        return np.clip(z, lower, upper, out=z)  # clip(mu + sd z, ...)

    @property
    def _log_params(self) -> tuple[float, float]:
        return _lognormal_log_params(self.params)

    def mean(self) -> float:
        """The distribution's mean: exact for untruncated families, by adaptive quadrature of the
        quantile function (``scipy.integrate.quad``) for truncated ones."""
        if self.family == "discrete":
            values, probs = self.choices()
            return float(np.sum(values * probs))
        if self.family == "empirical":
            return float(np.mean(self._values))
        if not self.truncated:
            return float(self.params["mean"]) if self.family == "normal" else float(self.base.mom(1))
        from scipy.integrate import quad

        return float(quad(lambda u: float(self.ppf(np.array([u]))[0]), 0.0, 1.0, limit=200,
                          epsabs=0.0, epsrel=1e-10)[0])

    def describe(self) -> str:
        """Short text such as ``normal(mean=3, sd=1) on [0, 10]``."""
        shown = {k: v for k, v in self.params.items() if k not in ("data",)}
        if self.family == "empirical":
            shown = {"n": len(self.params["data"])}
            if "pareto_threshold" in self.params:
                shown |= {k: self.params[k] for k in ("pareto_threshold", "pareto_shape", "pareto_scale")}
        text = f"{self.family}(" + ", ".join(f"{k}={_fmt(v)}" for k, v in shown.items()) + ")"
        if self.truncated:
            text += f" on [{_fmt(self.lower)}, {_fmt(self.upper)}]"
        return text


def _fmt(v: Any) -> str:
    if isinstance(v, list | tuple):
        return "[" + ", ".join(_fmt(x) for x in v) + "]"
    if isinstance(v, float):
        return f"{v:.6g}"
    return str(v)


def _lognormal_log_params(p: Mapping[str, Any]) -> tuple[float, float]:
    """(mean, sd) of ln X for a lognormal given by median and sigma_log, or by mean and sd."""
    if "median" in p:
        return math.log(p["median"]), p["sigma_log"]
    s = math.sqrt(math.log1p((p["sd"] / p["mean"]) ** 2))
    return math.log(p["mean"]) - 0.5 * s * s, s


def _positive(params: Mapping[str, Any], *names: str) -> None:
    for n in names:
        if not params[n] > 0:
            raise ValueError(f"{n} must be positive (got {params[n]:g})")


def make_marginal(family: str, params: Mapping[str, Any]) -> Marginal:
    """Build and check a marginal distribution.

    Parameters
    ----------
    family : str
        ``normal`` (mean, sd; optional lower, upper), ``truncnormal`` (mean, sd, lower, upper),
        ``lognormal`` (median and sigma_log, or mean and sd, of the variable; optional lower, upper),
        ``uniform`` (lower, upper), ``triangular`` (lower, mode, upper), ``beta`` (alpha, beta on
        [lower, upper]), ``weibull`` (shape, scale, optional shift; optional lower, upper),
        ``discrete`` (values, probabilities summing to 1), ``empirical`` (data: a sample).
    params : mapping
        Parameter values, already in the input's unit.

    Raises
    ------
    ValueError
        With a message naming the parameter, for a bad or missing parameter.
    """
    if family not in FAMILIES:
        raise ValueError(f"unknown distribution {family!r}; choose one of {', '.join(FAMILIES)}")
    required, optional = FAMILIES[family]
    missing = [n for n in required if n not in params]
    unknown = [n for n in params if n not in required + optional]
    if missing:
        raise ValueError(f"{family} needs {', '.join(missing)}")
    if unknown:
        takes = ", ".join(required + optional)
        raise ValueError(f"{family} takes no {', '.join(unknown)} (it takes {takes})")
    p = dict(params)
    lo, hi = p.get("lower", -math.inf), p.get("upper", math.inf)
    if lo >= hi:
        raise ValueError(f"lower ({lo:g}) must be below upper ({hi:g})")

    if family in ("normal", "truncnormal"):
        _positive(p, "sd")
        return Marginal(family, p, lo, hi)
    if family == "lognormal":
        if "median" in p and "sigma_log" in p and not {"mean", "sd"} & set(p):
            _positive(p, "median", "sigma_log")
        elif "mean" in p and "sd" in p and not {"median", "sigma_log"} & set(p):
            _positive(p, "mean", "sd")
        else:
            raise ValueError("lognormal needs either median and sigma_log, or mean and sd")
        return Marginal(family, p, max(lo, 0.0), hi)
    if family == "uniform":
        return Marginal(family, p, lo, hi)
    if family == "triangular":
        if not lo <= p["mode"] <= hi:
            raise ValueError(f"mode ({p['mode']:g}) must lie between lower and upper")
        return Marginal(family, p, lo, hi)
    if family == "beta":
        _positive(p, "alpha", "beta")
        return Marginal(family, p, lo, hi)
    if family == "weibull":
        _positive(p, "shape", "scale")
        shift = p.get("shift", 0.0)
        return Marginal(family, p, max(lo, shift), hi)
    if family == "discrete":
        return _discrete(p)
    return _empirical(p)


def _discrete(p: dict[str, Any]) -> Marginal:
    values = np.asarray(p["values"], dtype=float)
    probs = np.asarray(p["probabilities"], dtype=float)
    if values.ndim != 1 or values.size == 0 or values.shape != probs.shape:
        raise ValueError("values and probabilities must be lists of the same length")
    if np.any(probs < 0) or not math.isclose(float(probs.sum()), 1.0, abs_tol=1e-9):
        raise ValueError(f"probabilities must be >= 0 and sum to 1 (they sum to {probs.sum():.6g})")
    if np.unique(values).size != values.size:
        raise ValueError("values must differ from each other")
    order = np.argsort(values)
    values, probs = values[order], probs[order]
    cum = np.cumsum(probs)
    cum[-1] = 1.0
    return Marginal("discrete", p, float(values[probs > 0].min()), float(values[probs > 0].max()),
                    values, cum)


def _empirical(p: dict[str, Any]) -> Marginal:
    data = np.sort(np.asarray(p["data"], dtype=float))
    if data.ndim != 1 or data.size < 2 or not np.all(np.isfinite(data)):
        raise ValueError("empirical data must hold at least two finite numbers")
    if "pareto_tail_above" not in p:
        return Marginal("empirical", p, float(data[0]), float(data[-1]), data)
    q = float(p["pareto_tail_above"])
    over = data[data > np.quantile(data, q)] if 0 < q < 1 else data[:0]
    if not 0.5 <= q < 1 or over.size < 10:
        raise ValueError(f"pareto_tail_above ({q:g}) must lie in [0.5, 1) and leave at least 10 values above "
                         f"it (it leaves {over.size})")
    from scipy import stats

    # Peaks over threshold (Coles 2001, An Introduction to Statistical Modeling of Extreme Values, ch. 4):
    # the excesses over the sample quantile u are generalised Pareto, fitted by maximum likelihood.
    u = float(np.quantile(data, q))
    xi, _, sigma = stats.genpareto.fit(over - u, floc=0.0)
    upper = u - sigma / xi if xi < 0 else math.inf
    fitted = {**p, "pareto_threshold": u, "pareto_shape": float(xi), "pareto_scale": float(sigma),
              "pareto_source": "generalised Pareto tail above the sample quantile, peaks over threshold by "
                               "maximum likelihood (Coles 2001, ch. 4; scipy.stats.genpareto)"}
    return Marginal("empirical", fitted, float(data[0]), float(upper), data)


def normal_correlation_from_spearman(spearman: ArrayLike) -> Array:
    """Normal-space correlation of a Gaussian copula with the given Spearman correlation.

    rho_N = 2 sin(pi rho_S / 6), Pearson's relation between the rank and the linear correlation of a
    bivariate normal (Kruskal 1958).
    """
    return 2.0 * np.sin(np.pi * np.asarray(spearman, dtype=float) / 6.0)


@dataclass(frozen=True)
class Problem:
    """The uncertain inputs of a study: names, marginals and an optional Gaussian-copula correlation.

    Attributes
    ----------
    names : tuple of str
        Input names (for landrisk, dotted scenario keys).
    marginals : tuple of Marginal
    spearman : numpy.ndarray or None
        Rank correlation matrix as given (None: independent inputs).
    """

    names: tuple[str, ...]
    marginals: tuple[Marginal, ...]
    spearman: Array | None = None
    _cholesky: Array | None = field(default=None, repr=False)

    def __post_init__(self) -> None:
        if len(self.names) != len(self.marginals):
            raise ValueError("one marginal per name")
        if self.spearman is not None:
            r = np.asarray(self.spearman, dtype=float)
            d = len(self.names)
            if r.shape != (d, d) or not np.allclose(r, r.T) or not np.allclose(np.diag(r), 1.0):
                raise ValueError("the correlation matrix must be symmetric with a unit diagonal")
            if np.any(np.abs(r) > 1):
                raise ValueError("correlations must lie in [-1, 1]")
            try:
                chol = np.linalg.cholesky(normal_correlation_from_spearman(r))
            except np.linalg.LinAlgError:
                raise ValueError("the correlation matrix is not positive definite") from None
            object.__setattr__(self, "_cholesky", chol)

    @property
    def correlated(self) -> NDArray[np.intp]:
        """Indices of the inputs that take part in a correlation (empty without one)."""
        if self.spearman is None:
            return np.empty(0, dtype=np.intp)
        r = np.asarray(self.spearman)
        return np.flatnonzero(np.any((r != 0) & ~np.eye(len(r), dtype=bool), axis=1))

    @property
    def dimension(self) -> int:
        """Number of uncertain inputs."""
        return len(self.names)

    def correlate(self, z: ArrayLike) -> Array:
        """The Gaussian copula in normal space: independent standard normals z[n, d] -> normals with the
        copula's correlation (z L^T on the correlated inputs; the others unchanged).

        The product is summed column by column in a fixed order, so that a sample's value does not
        depend on how many samples are transformed with it (a matrix product may change its summation
        order with the matrix size).
        """
        z = np.asarray(z, dtype=float)
        if self._cholesky is None:
            return z
        c = self.correlated
        out = z.copy()
        out[:, c] = self._mix(z[:, c].T).T
        return out

    def _mix(self, zc: Array) -> Array:
        """z L^T for the correlated inputs, given and returned as rows zc[k, n] (k = len(correlated)):
        row i is sum_j zc[j] L[i, j] for j = 0..i, added in that order."""
        if self._cholesky is None:
            return zc
        c = self.correlated
        chol = self._cholesky[np.ix_(c, c)]
        out = np.empty_like(zc)
        term = np.empty_like(zc[0])
        for i in range(c.size):
            acc = out[i]
            np.multiply(zc[0], chol[i, 0], out=acc)
            for j in range(1, i + 1):  # lower triangular
                np.multiply(zc[j], chol[i, j], out=term)
                acc += term
        return out

    def transform(self, u: ArrayLike) -> Array:
        """Map uniform points u[n, d] in (0, 1)^d to input values x[n, d] (copula, then marginals).

        Works on the inputs one at a time, each a contiguous row of u's transpose: only the correlated
        inputs go through the normal space, and each marginal's inverse writes its own row. x is
        returned row-major whatever the layout of u, so that a model summing along a row of x always adds
        in the same order.
        """
        u = np.asarray(u, dtype=float)
        if u.size == 0:
            return np.empty((0, self.dimension))
        if u.ndim != 2 or u.shape[1] != self.dimension:
            raise ValueError(f"u must be a matrix of {self.dimension} columns, not of shape {u.shape}")
        rows = np.array(u.T, order="C")
        if self._cholesky is not None:
            c = self.correlated
            rows[c] = special.ndtr(self._mix(special.ndtri(rows[c])))
        x = np.empty_like(rows)
        for j, m in enumerate(self.marginals):
            x[j] = m.ppf(rows[j])
        return np.ascontiguousarray(x.T)

    def from_standard_normal(self, z: ArrayLike) -> Array:
        """Map independent standard normals z[n, d] to input values x[n, d]: the copula in normal space,
        then each marginal from its normal (the rare-event methods work in this space)."""
        z = self.correlate(np.atleast_2d(np.asarray(z, dtype=float)))
        if z.size == 0:
            return np.empty((0, self.dimension))
        return np.column_stack([m.from_standard_normal(z[:, j]) for j, m in enumerate(self.marginals)])

    @classmethod
    def independent(cls, names: Sequence[str], marginals: Sequence[Marginal]) -> Problem:
        """A problem without correlation."""
        return cls(tuple(names), tuple(marginals))

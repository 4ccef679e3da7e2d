"""Polynomial chaos expansions (chaospy) and Sobol indices from their coefficients.

Method (Sudret 2008, "Global sensitivity analysis using polynomial chaos expansions", Reliability
Engineering & System Safety 93:964; Blatman & Sudret 2011, J. Comput. Phys. 230:2345):

- Each continuous input gets an independent standard *germ* matched to its distribution: a standard
  normal (Hermite polynomials) for normal, lognormal and Weibull inputs and for every input that takes
  part in a correlation, a uniform on (0, 1) (Legendre polynomials) for uniform, triangular, beta and
  empirical inputs. Inputs follow from the germs by the isoprobabilistic transform: u = Phi(xi) or u = xi,
  the Gaussian copula on the correlated normal germs (a Nataf transform: z = L xi), then x = F^-1(u).
  With correlated inputs the indices therefore refer to the independent germs, in the order the inputs
  are listed (the first of a correlated pair carries the shared part).
- The expansion is orthonormal (``chaospy.generate_expansion(..., normed=True)``) with a hyperbolic
  (q-norm) truncation; coefficients by least squares on a scrambled Sobol design. The order and q are
  chosen by the leave-one-out error, computed in closed form from the hat matrix, among the candidates
  whose number of terms leaves an oversampling ratio of at least 2.
- Sobol indices from the coefficients: with an orthonormal basis the variance is the sum of the squared
  coefficients (constant excluded), a first-order index sums the terms in that input alone, a total
  index every term that involves it (Sudret 2008, eqs. 41-43). For a discrete input, one expansion per
  branch on the same basis; the indices of the mixture follow exactly from the branch coefficients and
  probabilities (see :func:`sobol_indices`).
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import chaospy as cp
import numpy as np
from numpy.typing import NDArray
from scipy import special
from scipy.stats import qmc

from landrisk.uq.distributions import Problem
from landrisk.uq.sampling import Seed, normalize_seed

__all__ = ["ChaosFit", "ChaosSpace", "SobolIndices", "fit_chaos", "sobol_indices"]

Array = NDArray[np.float64]
_NORMAL_FAMILIES = ("normal", "truncnormal", "lognormal", "weibull")
_EPS = 2.0**-53


class ChaosSpace:
    """The independent germ space of a Problem of continuous inputs, and the map to the inputs."""

    def __init__(self, problem: Problem) -> None:
        if any(m.discrete for m in problem.marginals):
            raise ValueError("a chaos space takes continuous inputs only; condition on discrete ones")
        self.problem = problem
        correlated = set(problem.correlated.tolist())
        self.kinds = tuple(
            "normal" if (m.family in _NORMAL_FAMILIES or j in correlated) else "uniform"
            for j, m in enumerate(problem.marginals)
        )
        self.germ = cp.J(*[cp.Normal(0, 1) if k == "normal" else cp.Uniform(0, 1) for k in self.kinds])

    @property
    def dimension(self) -> int:
        return self.problem.dimension

    def design(self, n: int, seed: Seed) -> Array:
        """n germ points from a scrambled Sobol sequence (the low-discrepancy design)."""
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            u = qmc.Sobol(self.dimension, scramble=True, seed=normalize_seed(seed)).random(n)
        return self.from_uniform(np.clip(u, _EPS, 1 - _EPS))

    def random(self, n: int, rng: np.random.Generator) -> Array:
        """n independent germ points."""
        return self.from_uniform(np.clip(rng.random((n, self.dimension)), _EPS, 1 - _EPS))

    def from_uniform(self, u: Array) -> Array:
        """Germ values from uniforms: Phi^-1(u) for normal germs, u for uniform ones."""
        xi = u.copy()
        for j, k in enumerate(self.kinds):
            if k == "normal":
                xi[:, j] = special.ndtri(u[:, j])
        return xi

    def to_inputs(self, xi: Array) -> Array:
        """Input values x[n, d] from germ values xi[n, d] (copula on correlated normal germs)."""
        u = np.empty_like(xi)
        for j, k in enumerate(self.kinds):
            u[:, j] = special.ndtr(xi[:, j]) if k == "normal" else xi[:, j]
        c = self.problem.correlated
        if c.size:  # the Gaussian copula acts on the (normal) germs of the correlated inputs
            u[:, c] = special.ndtr(self.problem.correlate(xi)[:, c])
        u = np.clip(u, _EPS, 1 - _EPS)
        return np.column_stack([m.ppf(u[:, j]) for j, m in enumerate(self.problem.marginals)])


@lru_cache(maxsize=32)
def _univariate_matrix(kind: str, degree: int) -> Array:
    """Coefficients C[k, n] of the orthonormal polynomials phi_n(x) = sum_k C[k, n] x^k, n <= degree,
    of a standard normal or a uniform (0, 1) germ (chaospy's three-term recurrence)."""
    polys = cp.generate_expansion(degree, cp.Normal(0, 1) if kind == "normal" else cp.Uniform(0, 1),
                                  normed=True)
    c = np.zeros((degree + 1, degree + 1))
    for n, p in enumerate(polys):
        for (k,), value in zip(np.asarray(p.exponents), np.asarray(p.coefficients), strict=True):
            c[k, n] = value
    return c


def _univariate(space: ChaosSpace, degree: int) -> list[Array]:
    """For each germ, the coefficient matrix of its orthonormal polynomials of degree 0..degree."""
    return [_univariate_matrix(k, degree) for k in space.kinds]


def _values(polys: list[Array], xi: Array, degree: int) -> list[Array]:
    """Values (n, degree + 1) of each germ's polynomials at the points xi."""
    return [np.polynomial.polynomial.polyvander(xi[:, j], degree) @ c[: degree + 1, : degree + 1]
            for j, c in enumerate(polys)]


def _design(index: NDArray[np.int64], values: list[Array]) -> Array:
    """Design matrix psi[n, P] = prod_j phi_{index[k, j]}(xi_j)."""
    psi = values[0][:, index[:, 0]].copy()
    for j in range(1, len(values)):
        psi *= values[j][:, index[:, j]]
    return psi


@dataclass(frozen=True)
class ChaosFit:
    """A fitted expansion: multi-indices, coefficients for each output, selection record."""

    polys: list[Array]  # per germ, coefficient matrix of its orthonormal polynomials (degree <= order)
    index: NDArray[np.int64]  # (P, d) multi-indices, index[0] = 0
    coefficients: Array  # (P, m)
    order: int
    q_norm: float
    loo_error: Array  # (m,) relative leave-one-out error of each output
    outputs: tuple[str, ...]

    @property
    def terms(self) -> int:
        return int(self.index.shape[0])

    def predict(self, xi: Array, chunk: int = 20_000) -> Array:
        """Surrogate values (n, m) at germ points xi (n, d), in chunks."""
        out = np.empty((xi.shape[0], self.coefficients.shape[1]))
        for s in range(0, xi.shape[0], chunk):
            psi = _design(self.index, _values(self.polys, xi[s : s + chunk], self.order))
            out[s : s + chunk] = psi @ self.coefficients
        return out


def _index_set(d: int, order: int, q: float) -> NDArray[np.int64]:
    """Multi-indices with q-norm at most ``order``, constant first (chaospy.glexindex)."""
    idx = np.asarray(cp.glexindex(start=0, stop=order + 1, dimensions=d, cross_truncation=q), dtype=np.int64)
    return idx[np.argsort(idx.sum(axis=1), kind="stable")]


def fit_chaos(
    space: ChaosSpace,
    xi: Array,
    y: Array,
    outputs: Sequence[str],
    *,
    max_order: int = 8,
    q_norms: Sequence[float] = (1.0, 0.75, 0.5),
    order: int | None = None,
    select_on: int = 0,
    basis: tuple[int, float] | None = None,
) -> ChaosFit:
    """Least-squares expansion of the outputs ``y`` (n, m) at germ points ``xi`` (n, d).

    Candidates are (order, q) with at most n/2 terms (oversampling ratio >= 2); the one with the least
    leave-one-out error of output ``select_on`` is kept (closed form: e_i = r_i / (1 - h_ii)).

    Parameters
    ----------
    order : int, optional
        A fixed total order (with q = 1); otherwise chosen by leave-one-out error.
    basis : (order, q), optional
        A fixed truncation (e.g. the one chosen for another branch, so that branches share a basis).
    """
    y = np.asarray(y, dtype=float).reshape(xi.shape[0], -1)
    n, d = xi.shape
    if basis is not None:
        cands = [(basis[0], basis[1], _index_set(d, basis[0], basis[1]))]
    elif order is not None:
        cands = [(order, 1.0, _index_set(d, order, 1.0))]
    else:
        cands = []
        for q in q_norms:
            for o in range(1, max_order + 1):
                idx = _index_set(d, o, q)
                if idx.shape[0] <= n // 2:
                    cands.append((o, q, idx))
        if not cands:
            raise ValueError(f"{n} model calls are too few for even a linear expansion in {d} inputs")
    top = max(o for o, _, _ in cands)
    polys = _univariate(space, top)
    values = _values(polys, xi, top)
    var = np.maximum(y.var(axis=0), 1e-300)
    best: ChaosFit | None = None
    for o, q, idx in cands:
        psi = _design(idx, values)
        qmat, r = np.linalg.qr(psi)
        if np.linalg.matrix_rank(r) < r.shape[0]:
            continue
        coef = np.linalg.solve(r, qmat.T @ y)
        h = np.minimum((qmat**2).sum(axis=1), 1 - 1e-12)
        loo = np.mean(((y - psi @ coef) / (1 - h)[:, None]) ** 2, axis=0) / var
        if best is None or loo[select_on] < best.loo_error[select_on]:
            best = ChaosFit([c[: o + 1, : o + 1] for c in polys], idx, coef, o, q, loo, tuple(outputs))
    if best is None:
        raise ValueError("no candidate expansion could be fitted (singular design)")
    return best


@dataclass(frozen=True)
class SobolIndices:
    """First-order, total and second-order Sobol indices, and the output's mean and variance."""

    names: tuple[str, ...]
    first: Array
    total: Array
    second: dict[tuple[str, str], float]
    mean: float
    variance: float


def sobol_indices(
    index: NDArray[np.int64],
    coefficients: Sequence[Array],
    probabilities: Sequence[float] = (1.0,),
    names: Sequence[str] = (),
    discrete_name: str | None = None,
) -> SobolIndices:
    """Sobol indices of an output from orthonormal-chaos coefficients, mixed over discrete branches.

    With f_b = sum_a c_{b,a} psi_a in branch b of probability p_b and the mixture mean coefficients
    cbar_a = sum_b p_b c_{b,a}: E[Y | X_i] has variance sum_{a in A_i} cbar_a^2 (A_i: terms in X_i only);
    E[Var(Y | X_~i)] = sum_b p_b sum_{a: a_i > 0} c_{b,a}^2; the discrete input's first-order variance is
    sum_b p_b (c_{b,0} - cbar_0)^2 and its total sum_b p_b sum_a (c_{b,a} - cbar_a)^2. The total variance is
    sum_b p_b sum_{a != 0} c_{b,a}^2 + the discrete first-order variance (Sudret 2008, eqs. 41-43, per
    branch; the mixture by the law of total variance).

    Parameters
    ----------
    index : (P, d) multi-indices, row 0 the constant.
    coefficients : one (P,) array per branch.
    probabilities : branch probabilities (sum 1).
    names : the d input names (then the discrete input's name, if any).
    """
    c = np.asarray(coefficients, dtype=float).reshape(len(probabilities), -1)
    p = np.asarray(probabilities, dtype=float)[:, None]
    cbar = (p * c).sum(axis=0)
    const = np.all(index == 0, axis=1)
    v_within = float((p * c[:, ~const] ** 2).sum())
    v_between = float((p[:, 0] * (c[:, const][:, 0] - cbar[const][0]) ** 2).sum())
    v = v_within + v_between
    d = index.shape[1]
    first = np.empty(d)
    total = np.empty(d)
    for i in range(d):
        alone = (index[:, i] > 0) & (index.sum(axis=1) == index[:, i])
        first[i] = (cbar[alone] ** 2).sum()
        total[i] = (p * c[:, index[:, i] > 0] ** 2).sum()
    labels = list(names) if names else [f"x{i + 1}" for i in range(d)]
    second = {}
    for i in range(d):
        for j in range(i + 1, d):
            pair = (index[:, i] > 0) & (index[:, j] > 0) & (index.sum(axis=1) == index[:, i] + index[:, j])
            second[(labels[i], labels[j])] = float((cbar[pair] ** 2).sum() / v) if v > 0 else 0.0
    if discrete_name is not None:
        first = np.append(first, v_between)
        total = np.append(total, float((p * (c - cbar) ** 2).sum()))
        labels.append(discrete_name)
    scale = 1.0 / v if v > 0 else 0.0
    return SobolIndices(tuple(labels), first * scale, total * scale, second, float(cbar[const][0]), v)

"""The default rare-event method (landrisk.uq.rare.auto) on structural-reliability test problems with known
probabilities: several and symmetric failure regions, series and parallel systems, curved limit states and
high dimension. Each reference is computed here, by an exact formula, numerical integration (scipy) or a
large seeded Monte Carlo, and the problem's source is named beside it. Failure is g(u) <= 0, u standard
normal (non-normal variables through x = F^-1(Phi(u))).

Requirement: over >= 5 seeds per problem, the 95 % intervals cover the reference in >= 93 % of the runs,
and no run is off by more than 3x without a warning. The whole set is slow; a few run by default.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pytest
from scipy import integrate, special, stats

from landrisk.uq.rare import auto

SQ2 = math.sqrt(2.0)


@dataclass(frozen=True)
class Problem:
    name: str
    d: int
    g: Callable[[np.ndarray], np.ndarray]
    reference: Callable[[], float]
    source: str

    @cached_property
    def p(self) -> float:
        return self.reference()


def _mc(g: Callable, d: int, n: int, seed: int) -> float:
    """A seeded crude Monte Carlo of P(g <= 0) in batches of 10^6 (used where no closed form is at hand;
    its CoV sqrt((1-P)/(nP)) is stated beside each use)."""
    rng = np.random.default_rng(seed)
    hits = 0
    for _ in range(n // 1_000_000):
        hits += int(np.sum(g(rng.normal(size=(1_000_000, d))) <= 0))
    return hits / n


def four_branch(k: float, c: float) -> Callable:
    def g(u):
        x1, x2 = u[:, 0], u[:, 1]
        return np.minimum.reduce([3 + 0.1 * (x1 - x2) ** 2 - (x1 + x2) / SQ2,
                                  3 + 0.1 * (x1 - x2) ** 2 + (x1 + x2) / SQ2,
                                  (x1 - x2) + k / SQ2, (x2 - x1) + k / SQ2]) * c
    return g


def _paraboloid(beta: float, kappa: float, d: int) -> float:
    return integrate.quad(lambda s: stats.norm.sf(beta + kappa * s / 2) * stats.chi2.pdf(s, d - 1),
                          0, np.inf, epsabs=0, epsrel=1e-10, limit=200)[0]


def _exp(u):  # standard exponential variables from standard normals, accurate in the upper tail
    return -special.log_ndtr(-u)


CORR = np.array([[1.0, 0.5, 0.2], [0.5, 1.0, 0.3], [0.2, 0.3, 1.0]])
CHOL = np.linalg.cholesky(CORR)


PROBLEMS = [
    Problem("linear, 2 variables", 2, lambda u: 3.0 * SQ2 - u.sum(axis=1), lambda: stats.norm.sf(3.0),
            "Hasofer & Lind 1974 (J. Eng. Mech. Div. 100:111): a hyperplane at distance beta, "
            "P = Phi(-beta)"),
    Problem("linear, 100 variables", 100, lambda u: 4.0 * 10.0 - u.sum(axis=1), lambda: stats.norm.sf(4.0),
            "Hasofer & Lind 1974; high dimension as in Rozsas & Slobbe 2019 (black-box reliability "
            "challenge), P = Phi(-4)"),
    Problem("four-branch series system, k = 7", 2, four_branch(7.0, 1.0),
            lambda: _mc(four_branch(7.0, 1.0), 2, 4_000_000, 11),
            "Waarts 2000 (PhD thesis, TU Delft); reference by 4e6-sample Monte Carlo here (CoV 1.3 %)"),
    Problem("four-branch series system, k = 6", 2, four_branch(6.0, 1.0),
            lambda: _mc(four_branch(6.0, 1.0), 2, 4_000_000, 12),
            "Waarts 2000; Schueremans & Van Gemert 2005 (Struct. Safety 27:246) use k = 6 too; "
            "reference by 4e6-sample Monte Carlo here (CoV 1.0 %)"),
    Problem("two symmetric regions |u1| >= 3.5", 2, lambda u: 3.5 - np.abs(u[:, 0]),
            lambda: 2 * stats.norm.sf(3.5), "symmetric failure regions; P = 2 Phi(-3.5) exactly"),
    Problem("series system of two planes", 2, lambda u: np.minimum(3.5 - u[:, 0], 3.5 - u[:, 1]),
            lambda: 1 - stats.norm.cdf(3.5) ** 2, "series system (Ditlevsen & Madsen 1996, Structural "
            "Reliability Methods, ch. 14); independent components: P = 1 - Phi(3.5)^2"),
    Problem("parallel system of two planes", 2, lambda u: np.maximum(2.5 - u[:, 0], 3.0 - u[:, 1]),
            lambda: stats.norm.sf(2.5) * stats.norm.sf(3.0), "parallel system (Ditlevsen & Madsen 1996, "
            "ch. 14); independent components: P = Phi(-2.5) Phi(-3)"),
    Problem("paraboloid, convex", 4, lambda u: 3.5 - u[:, -1] + 0.05 * (u[:, :-1] ** 2).sum(axis=1),
            lambda: _paraboloid(3.5, 0.1, 4), "Breitung 1984 (J. Eng. Mech. 110:357); exact by "
            "scipy.integrate.quad over the chi-square of the other coordinates"),
    Problem("paraboloid, concave", 4, lambda u: 4.5 - u[:, -1] - 0.025 * (u[:, :-1] ** 2).sum(axis=1),
            lambda: _paraboloid(4.5, -0.05, 4), "Breitung 1984; exact by scipy.integrate.quad"),
    Problem("Borri & Speranzini", 2,
            lambda u: 0.1 * (u[:, 0] - u[:, 1]) ** 2 - (u[:, 0] + u[:, 1]) / SQ2 + 2.5,
            lambda: _mc(lambda u: 0.1 * (u[:, 0] - u[:, 1]) ** 2 - (u[:, 0] + u[:, 1]) / SQ2 + 2.5, 2,
                        4_000_000, 13),
            "Borri & Speranzini 1997 (Struct. Safety 19:177), curved limit state, as in Rozsas & Slobbe "
            "2019; reference by 4e6-sample Monte Carlo here (CoV 0.8 %)"),
    Problem("sum of 20 exponentials", 20, lambda u: 50.0 - _exp(u).sum(axis=1),
            lambda: stats.gamma.sf(50.0, 20), "sum of exponentials (Engelund & Rackwitz 1993, Struct. "
            "Safety 12:255, problem 'chi-square / gamma'); exact: the sum is gamma(20), P = Q(20, 50)"),
    Problem("sum of 60 exponentials", 60, lambda u: 110.0 - _exp(u).sum(axis=1),
            lambda: stats.gamma.sf(110.0, 60), "as above in 60 dimensions (high dimension); exact "
            "gamma(60) tail"),
    Problem("outside a hypersphere, 6 variables", 6, lambda u: 36.0 - (u**2).sum(axis=1),
            lambda: stats.chi2.sf(36.0, 6), "failure in every direction (no design point dominates); "
            "exact: |u|^2 is chi-square(6)"),
    Problem("saddle u1 u2 >= 4", 2, lambda u: 4.0 - u[:, 0] * u[:, 1],
            lambda: 2 * integrate.quad(lambda x: stats.norm.pdf(x) * stats.norm.sf(4.0 / x), 0, np.inf,
                                       epsabs=0, epsrel=1e-10, limit=200)[0],
            "two symmetric regions (quadrants ++ and --); exact by scipy.integrate.quad"),
    Problem("correlated series system of three planes", 3,
            lambda u: np.min(3.2 - u @ CHOL.T, axis=1),
            lambda: 1 - stats.multivariate_normal(np.zeros(3), CORR).cdf(np.full(3, 3.2)),
            "series system with correlated components (Ditlevsen & Madsen 1996, ch. 14); exact by "
            "scipy.stats.multivariate_normal.cdf (Genz)"),
    Problem("lognormal resistance and load", 2,
            lambda u: np.exp(1.0 + 0.1 * u[:, 0]) - np.exp(0.3 + 0.12 * u[:, 1]),
            lambda: stats.norm.sf(0.7 / math.hypot(0.1, 0.12)),
            "R - S with lognormal R and S (Melchers 1999, Structural Reliability Analysis and "
            "Prediction, ch. 3): P = Phi(-(mu_lnR - mu_lnS) / sqrt(s_R^2 + s_S^2))"),
]


def _run(problem: Problem, seed: int):
    est, _ = auto(problem.g, problem.d, seed=seed)
    return est


def _check(problem: Problem, seeds: range) -> tuple[int, int, list[str]]:
    covered, runs, bad = 0, 0, []
    for seed in seeds:
        est = _run(problem, seed)
        runs += 1
        assert est.converged, (problem.name, est.message)
        covered += est.ci[0] <= problem.p <= est.ci[1]
        ratio = est.probability / problem.p
        if not (1 / 3 <= ratio <= 3) and "WARNING" not in est.message:
            bad.append(f"{problem.name} seed {seed}: {est.probability:.3e} vs {problem.p:.3e}, no warning")
    return covered, runs, bad


@pytest.mark.slow
def test_the_default_method_on_every_problem() -> None:
    assert len(PROBLEMS) >= 15
    covered = runs = 0
    bad: list[str] = []
    for problem in PROBLEMS:
        c, r, b = _check(problem, range(5))
        covered += c
        runs += r
        bad += b
    assert not bad, bad
    # 16 problems x 5 seeds = 80 runs; with a true coverage of 95 %, P(coverage < 93 %) = P(hits <= 74)
    # = 0.24 (scipy.stats.binom), so this is a requirement of the project, not a statistical test that a
    # correct method passes with probability 1 - 1e-4: seeds are fixed and the count is as recorded.
    assert covered / runs >= 0.93, (covered, runs)


@pytest.mark.parametrize("name", ["four-branch series system, k = 7", "two symmetric regions |u1| >= 3.5",
                                  "saddle u1 u2 >= 4"])
def test_the_default_method_finds_every_failure_region(name) -> None:
    # The problems where importance sampling around one design point returns about half the probability.
    problem = next(p for p in PROBLEMS if p.name == name)
    est = _run(problem, 1)
    assert est.converged
    # Fixed seed; a Student-t interval (3 degrees of freedom or more) at 1e-4 two-sided is at most
    # t_{0.99995, 3} / t_{0.975, 3} = 47.6 / 3.18 = 15 times the 95 % half-width: the interval widened
    # 15-fold around the estimate must hold the reference.
    half = max(est.probability - est.ci[0], est.ci[1] - est.probability)
    assert abs(est.probability - problem.p) <= 15 * half
    assert 0.5 < est.probability / problem.p < 2.0

"""The uncertainty layer against exact results and scipy.stats."""

import numpy as np
import pytest
from scipy import stats

from landrisk.testing.plain import plain_transform
from landrisk.testing.testmodels import StoppingDistance
from landrisk.uq import (
    Problem,
    event_probability,
    exceedance_curve,
    make_marginal,
    percentiles,
    run_monte_carlo,
    sample,
    uniform_chunks,
)

SAMPLERS = ("random", "sobol", "halton", "lhs")


# --- Marginals against scipy.stats ----------------------------------------------------------------
U = np.linspace(0.001, 0.999, 41)


@pytest.mark.parametrize(
    ("family", "params", "reference"),
    [
        ("normal", {"mean": 3.0, "sd": 2.0}, stats.norm(3, 2)),
        ("normal", {"mean": 3.0, "sd": 2.0, "lower": 2.0, "upper": 9.0}, stats.truncnorm(-0.5, 3.0, 3, 2)),
        ("truncnormal", {"mean": 0.0, "sd": 1.0, "lower": 2.0, "upper": 5.0}, stats.truncnorm(2.0, 5.0)),
        ("lognormal", {"median": 1.5, "sigma_log": 0.4}, stats.lognorm(0.4, scale=1.5)),
        ("lognormal", {"mean": 2.0, "sd": 0.5},
         stats.lognorm(np.sqrt(np.log1p(0.0625)), scale=2.0 / np.sqrt(1.0625))),
        ("uniform", {"lower": 0.3, "upper": 0.5}, stats.uniform(0.3, 0.2)),
        ("triangular", {"lower": 0.15, "mode": 0.32, "upper": 0.42}, stats.triang((0.17) / 0.27, 0.15, 0.27)),
        ("beta", {"alpha": 2.0, "beta": 5.0, "lower": 0.1, "upper": 0.6}, stats.beta(2, 5, 0.1, 0.5)),
        ("weibull", {"shape": 2.0, "scale": 6.0}, stats.weibull_min(2.0, scale=6.0)),
    ],
)
def test_marginal_quantiles_match_scipy(family, params, reference) -> None:
    m = make_marginal(family, params)
    np.testing.assert_allclose(m.ppf(U), reference.ppf(U), rtol=1e-7, atol=1e-9)
    assert m.mean() == pytest.approx(reference.mean(), rel=1e-6)


def test_truncated_lognormal_against_scipy() -> None:
    # F^-1(F(a) + u (F(b) - F(a))) of the lognormal, against scipy's truncated construction by hand.
    m = make_marginal("lognormal", {"median": 1.5, "sigma_log": 0.4, "lower": 0.3, "upper": 6.0})
    base = stats.lognorm(0.4, scale=1.5)
    fa, fb = base.cdf(0.3), base.cdf(6.0)
    np.testing.assert_allclose(m.ppf(U), base.ppf(fa + U * (fb - fa)), rtol=1e-7)


def test_far_tail_truncated_normal_keeps_precision() -> None:
    # Truncation 6 to 7 sd above the mean: naive Phi(a) + u(Phi(b) - Phi(a)) loses all digits.
    m = make_marginal("normal", {"mean": 0.0, "sd": 1.0, "lower": 6.0, "upper": 7.0})
    np.testing.assert_allclose(m.ppf(U), stats.truncnorm(6.0, 7.0).ppf(U), rtol=1e-9)


def test_discrete_and_empirical() -> None:
    d = make_marginal("discrete", {"values": [6, 5, 3], "probabilities": [0.9, 0.08, 0.02]})
    assert list(d.ppf([0.01, 0.05, 0.5, 0.95])) == [3, 5, 6, 6]
    assert d.mean() == pytest.approx(0.9 * 6 + 0.08 * 5 + 0.02 * 3)
    data = np.array([3.0, 1.0, 2.0, 10.0])
    e = make_marginal("empirical", {"data": data})
    np.testing.assert_allclose(e.ppf(U), np.quantile(data, U))  # Hyndman & Fan definition 7
    assert (e.lower, e.upper) == (1.0, 10.0)


@pytest.mark.parametrize(
    ("family", "params", "message"),
    [
        ("normal", {"mean": 1.0, "sd": -1.0}, "sd must be positive"),
        ("uniform", {"lower": 2.0, "upper": 1.0}, "must be below upper"),
        ("discrete", {"values": [1, 2], "probabilities": [0.5, 0.6]}, "sum to 1"),
        ("triangular", {"lower": 0.0, "mode": 3.0, "upper": 2.0}, "mode"),
        ("gamma", {"shape": 1.0}, "unknown distribution"),
        ("normal", {"mean": 1.0}, "needs sd"),
        ("normal", {"mean": 1.0, "sd": 1.0, "median": 2.0}, "takes no median"),
        ("lognormal", {"median": 1.0, "sd": 1.0}, "either median and sigma_log"),
    ],
)
def test_bad_marginals(family, params, message) -> None:
    with pytest.raises(ValueError, match=message):
        make_marginal(family, params)


# --- Copula -------------------------------------------------------------------------------------------
def test_gaussian_copula_reaches_the_target_rank_correlation() -> None:
    # Pearson's relation rho_N = 2 sin(pi rho_S / 6) for the bivariate normal (Kruskal 1958): the sample
    # Spearman correlation (scipy.stats.spearmanr) must match the target.
    target = np.array([[1.0, 0.6, -0.3], [0.6, 1.0, 0.0], [-0.3, 0.0, 1.0]])
    marg = (make_marginal("lognormal", {"median": 1.0, "sigma_log": 0.5}),
            make_marginal("uniform", {"lower": 0.0, "upper": 1.0}),
            make_marginal("weibull", {"shape": 2.0, "scale": 5.0}))
    x = sample(Problem(("a", "b", "c"), marg, target), 200_000, seed=5)
    rho = stats.spearmanr(x).statistic
    np.testing.assert_allclose(rho, target, atol=0.01)


def test_transform_is_the_plain_expressions_to_the_last_bit() -> None:
    # The in-place arithmetic of Problem.transform rounds exactly as the plain expressions
    # (landrisk.testing.plain), so that a seed gives the same samples to the last bit whatever the
    # implementation; the marginals themselves are checked against scipy.stats above.
    marg = (make_marginal("normal", {"mean": 1.17, "sd": 0.03, "lower": 1.08, "upper": 1.32}),
            make_marginal("lognormal", {"median": 1.5, "sigma_log": 0.4, "lower": 0.3, "upper": 6.0}),
            make_marginal("normal", {"mean": 3.0, "sd": 2.0}),
            make_marginal("lognormal", {"median": 420.0, "sigma_log": 0.3}),
            make_marginal("triangular", {"lower": 0.15, "mode": 0.32, "upper": 0.42}),
            make_marginal("uniform", {"lower": 56e3, "upper": 66e3}),
            make_marginal("discrete", {"values": [1.0, 0.0, 2.0], "probabilities": [0.6, 0.1, 0.3]}))
    r = np.eye(7)
    for i, j, rho in ((0, 3, 0.3), (0, 5, -0.2), (3, 5, 0.4)):
        r[i, j] = r[j, i] = rho
    edges = np.array([2.0**-53, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0 - 2.0**-53])
    u = np.vstack([np.random.default_rng(11).random((5000, 7)), np.tile(edges[:, None], (1, 7))])
    for spearman in (None, r):
        problem = Problem(tuple("abcdefg"), marg, spearman)
        x = problem.transform(u)
        assert x.flags.c_contiguous and np.array_equal(x, plain_transform(problem, u))
        assert np.array_equal(problem.transform(np.asfortranarray(u)), x)  # whatever u's layout
        assert np.array_equal(problem.transform(u[:1]), x[:1])  # whatever the number of rows
    with pytest.raises(ValueError, match="7 columns"):
        problem.transform(u[:, :6])


def test_correlation_matrix_must_be_valid() -> None:
    m = make_marginal("uniform", {"lower": 0.0, "upper": 1.0})
    with pytest.raises(ValueError, match="positive definite"):
        Problem(("a", "b", "c"), (m, m, m), np.array([[1, 0.9, -0.9], [0.9, 1, 0.9], [-0.9, 0.9, 1]]))


# --- Samplers --------------------------------------------------------------------------------------
@pytest.mark.parametrize("sampler", SAMPLERS)
def test_points_do_not_depend_on_the_chunk_size(sampler) -> None:
    whole = np.concatenate(list(uniform_chunks(1000, 3, sampler=sampler, seed=9, chunk=1000)))
    parts = np.concatenate(list(uniform_chunks(1000, 3, sampler=sampler, seed=9, chunk=64)))
    assert np.array_equal(whole, parts)
    again = np.concatenate(list(uniform_chunks(1000, 3, sampler=sampler, seed=9, chunk=300)))
    assert np.array_equal(whole, again)
    assert whole.min() > 0 and whole.max() < 1


def test_latin_hypercube_stratifies_each_margin() -> None:
    u = np.concatenate(list(uniform_chunks(500, 2, sampler="lhs", seed=1)))
    for j in range(2):
        assert np.array_equal(np.sort(np.floor(u[:, j] * 500)), np.arange(500))


# --- Monte Carlo on the exact model -----------------------------------------------------------------
MODEL = StoppingDistance()


@pytest.mark.parametrize("sampler", SAMPLERS)
def test_percentiles_and_exceedance_match_the_exact_lognormal(sampler) -> None:
    # d = V^2/(2 mu g) with lognormal V and mu is lognormal (Aitchison & Brown 1957): exact percentiles.
    run = run_monte_carlo(MODEL.problem(), MODEL, 2**15, sampler=sampler, seed=3, chunk=5000)
    d = run.outputs["distance"]
    for p in percentiles(d, [5, 50, 90, 99]):
        exact = float(MODEL.ppf(p.p / 100))
        assert p.lo <= exact <= p.hi, (p, exact)
    grid = MODEL.ppf([0.5, 0.9, 0.99])
    _, lo, hi = exceedance_curve(np.sort(d), grid)
    assert np.all((lo <= MODEL.sf(grid)) & (MODEL.sf(grid) <= hi))


def test_percentile_interval_is_scipy_quantile_test() -> None:
    # scipy.stats.quantile_test(...).confidence_interval(0.95): the same order statistics.
    x = np.random.default_rng(0).lognormal(size=3001)
    for p in percentiles(x, [1, 10, 50, 95, 99.5]):
        ci = stats.quantile_test(x, q=np.median(x), p=p.p / 100).confidence_interval(0.95)
        assert (p.lo, p.hi) == (ci.low, ci.high)
    assert not percentiles(x, [99.99])[0].supported  # the sample cannot support it


def test_running_p99_and_its_interval_are_numpy_and_scipy_quantile_test() -> None:
    # At every prefix the running P99 is numpy's quantile and its band the order statistics of
    # scipy.stats.quantile_test(...).confidence_interval(0.95); NaN where the prefix cannot bound it.
    from landrisk.uq.stats import convergence

    x = np.random.default_rng(3).lognormal(size=20_000)
    c = convergence(x, x > 5.0, 0.99)
    supported = 0
    # Given the sorted sample, the whole sample's order statistics are read from it: the same numbers.
    given = convergence(x, x > 5.0, 0.99, sorted_x=np.sort(x))
    assert all(np.array_equal(c[k], given[k], equal_nan=True) for k in c)
    for j, m in enumerate(c["n"].astype(int)):
        assert c["quantile"][j] == np.quantile(x[:m], 0.99)
        assert c["p_event"][j] == np.mean(x[:m] > 5.0)  # the running share of events
        ci = stats.quantile_test(x[:m], p=0.99).confidence_interval(0.95)
        if np.isnan(ci.high):
            assert np.isnan(c["quantile_hi"][j])
        else:
            assert (c["quantile_lo"][j], c["quantile_hi"][j]) == (ci.low, ci.high)
            supported += 1
    assert supported >= 10


def test_zero_events_is_an_upper_bound_by_the_rule_of_three() -> None:
    # With no event in n trials the 95 % upper bound is 1 - 0.05^(1/n), about 3/n (rule of three).
    r = event_probability(0, 1_000_000)
    assert r.upper_bound_only and r.estimate == 0.0
    assert r.hi == pytest.approx(3.0 / 1_000_000, rel=0.01)
    assert r.text().startswith("< 3.00e-06")


def test_wilson_interval_is_scipy_binomtest() -> None:
    r = event_probability(12, 10_000)
    ci = stats.binomtest(12, 10_000).proportion_ci(method="wilson")
    assert (r.lo, r.hi) == (ci.low, ci.high)
    # computed with scipy.special (no scipy.stats import on the Monte Carlo path): the same intervals,
    # Wilson and Clopper-Pearson ("exact"), for a spread of counts
    for k, n in ((1, 10), (3, 7), (43, 100_000), (100, 100), (999, 1000), (5, 2_000_000)):
        for method in ("wilson", "exact"):
            r = event_probability(k, n, 0.95, method)
            ci = stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method=method)
            # (scipy inverts the beta CDF by another routine: agreement to about 1e-9 at small p, not bit
            # for bit; at (5, 2e6) scipy.special.betainc of our bound gives 0.025 exactly, of scipy's
            # 0.0249999998)
            assert r.lo == pytest.approx(ci.low, rel=1e-8, abs=1e-300), (k, n, method)
            assert r.hi == pytest.approx(ci.high, rel=1e-8), (k, n, method)


def test_binomial_quantiles_are_scipy_stats_binom() -> None:
    # The order-statistic indices of every percentile interval rest on these two quantiles.
    from landrisk.uq.stats import _binom_isf, _binom_ppf

    rng = np.random.default_rng(0)
    for _ in range(500):
        n = int(rng.integers(1, 2_000_000))
        p = float(rng.choice([1e-4, 0.01, 0.05, 0.5, 0.9, 0.95, 0.99, 0.999, rng.random()]))
        a = float(rng.choice([0.0005, 0.005, 0.025, 0.05, 0.5]))
        assert _binom_ppf(a, n, p) == stats.binom(n, p).ppf(a), (a, n, p)
        assert _binom_isf(a, n, p) == stats.binom(n, p).isf(a), (a, n, p)


def test_interval_coverage_over_many_seeds() -> None:
    # Over many independent runs the 95 % interval for a known probability covers it about 95 % of the
    # time. Known P(D > d0) = 0.02 exactly (the lognormal above); 400 runs of 2 000 samples.
    d0 = float(MODEL.ppf(0.98))
    covered = 0
    runs = 400
    for seed in range(runs):
        d = run_monte_carlo(MODEL.problem(), MODEL, 2000, seed=seed).outputs["distance"]
        r = event_probability(int(np.sum(d > d0)), d.size)
        covered += r.lo <= 0.02 <= r.hi
    # With a true coverage of 95 %, the count of covering runs is binomial(400, 0.95) (Wilson 1927's
    # interval is close to its nominal level here): P(count < 361) = 3.1e-5 and P(count > 395) = 1.2e-5
    # (scipy.stats.binom), so a correct method fails this check about 4e-5 of the time, under 1 in 10^4.
    assert 361 <= covered <= 395

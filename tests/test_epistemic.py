"""The epistemic layer: densities, reweighting against exact answers, the nested fallback, the demo, CLI."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import special, stats

from landrisk import api
from landrisk.cli import main
from landrisk.errors import ConfigError
from landrisk.io import parse_study
from landrisk.io.epistemic import epistemic_parameters
from landrisk.uq import Problem, make_marginal
from landrisk.uq.epistemic import EpistemicParameter, epistemic_probability, log_density

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "configs" / "demo.toml"
Z95 = 1.959963984540054


@pytest.mark.parametrize(("family", "params", "reference"), [
    ("normal", {"mean": 1.0, "sd": 2.0}, stats.norm(1.0, 2.0)),
    ("normal", {"mean": 1.0, "sd": 2.0, "lower": 0.0, "upper": 4.0}, stats.truncnorm(-0.5, 1.5, 1.0, 2.0)),
    ("lognormal", {"median": 2.0, "sigma_log": 0.4}, stats.lognorm(0.4, scale=2.0)),
    ("uniform", {"lower": 1.0, "upper": 3.0}, stats.uniform(1.0, 2.0)),
    ("triangular", {"lower": 0.0, "mode": 1.0, "upper": 4.0}, stats.triang(0.25, 0.0, 4.0)),
    ("beta", {"alpha": 2.0, "beta": 3.0, "lower": 1.0, "upper": 2.0}, stats.beta(2.0, 3.0, 1.0, 1.0)),
    ("weibull", {"shape": 1.5, "scale": 2.0}, stats.weibull_min(1.5, scale=2.0)),
])
def test_log_density_matches_scipy_stats(family: str, params: dict, reference) -> None:
    # scipy.stats (a general-purpose reference library) for each family; truncation by scipy's truncnorm
    m = make_marginal(family, params)
    x = np.asarray(m.ppf(np.linspace(0.01, 0.99, 25)))
    np.testing.assert_allclose(log_density(m, x), reference.logpdf(x), rtol=1e-10, atol=1e-12)


def test_log_density_of_a_discrete_choice() -> None:
    m = make_marginal("discrete", {"values": [0.0, 1.0], "probabilities": [0.25, 0.75]})
    np.testing.assert_allclose(log_density(m, np.array([0.0, 1.0, 1.0])), np.log([0.25, 0.75, 0.75]))
    assert log_density(m, np.array([0.5]))[0] == -np.inf


def _linear(rho: float = 0.0):
    """g = 3 - X1 - X2, X1 ~ N(theta1, 1), X2 ~ N(0, theta2): the exact failure probability is
    Phi(-beta), beta = (3 - theta1) / sqrt(1 + theta2^2 + 2 rho theta2) (a linear function of jointly
    normal variables: Ditlevsen & Madsen, Structural Reliability Methods, Wiley 1996, §5.2; the Gaussian
    copula with normal marginals is the bivariate normal with correlation rho)."""
    spearman = None if rho == 0 else np.array([[1.0, 6 / np.pi * np.arcsin(rho / 2)],
                                              [6 / np.pi * np.arcsin(rho / 2), 1.0]])
    problem = Problem(("x1", "x2"), (make_marginal("normal", {"mean": 0.0, "sd": 1.0}),
                                     make_marginal("normal", {"mean": 0.0, "sd": 1.0})), spearman)
    params = [EpistemicParameter("x1", "mean", make_marginal("uniform", {"lower": -0.5, "upper": 0.5})),
              EpistemicParameter("x2", "sd", make_marginal("uniform", {"lower": 0.8, "upper": 1.2}))]

    def failed(x):
        return 3.0 - x[:, 0] - x[:, 1] < 0

    def exact(theta):
        return special.ndtr(-(3.0 - theta[:, 0]) / np.sqrt(1 + theta[:, 1] ** 2 + 2 * rho * theta[:, 1]))

    return problem, params, failed, exact


@pytest.mark.parametrize("rho", [0.0, 0.5])
def test_reweighting_matches_the_exact_linear_answer(rho: float) -> None:
    # Each reweighted estimate lies within 4.5 of its standard errors of the exact P: for an
    # asymptotically normal estimator P(|z| > 4.5) = 6.8e-6, 3.4e-5 for the five draws.
    problem, params, failed, exact = _linear(rho)
    r = epistemic_probability(problem, params, failed, outer=5, inner=40_000, seed=3)
    assert not r.nested.any()
    se = (r.sampling_hi - r.sampling_lo) / (2 * Z95)
    truth = exact(r.theta)
    assert np.all(np.abs(r.probability - truth) < 4.5 * se), (r.probability, truth, se)
    assert r.solver_calls == 40_000


@pytest.mark.slow
def test_distribution_of_p_matches_the_exact_one() -> None:
    # Kolmogorov-Smirnov distance between the 2000 estimates and the exact distribution of
    # P = Phi(-beta(theta)) (its CDF from 10^6 exact draws): at most 0.05. For exact values the DKW
    # inequality (Massart 1990) gives P(D > 0.05) <= 2 exp(-2 * 2000 * 0.05^2) = 9e-5; the inner
    # sampling error (about 3 % of P at 50 000 samples) moves D by well under 0.01.
    problem, params, failed, exact = _linear()
    r = epistemic_probability(problem, params, failed, outer=2000, inner=50_000, seed=5)
    rng = np.random.default_rng(0)
    theta = np.column_stack([rng.uniform(-0.5, 0.5, 10**6), rng.uniform(0.8, 1.2, 10**6)])
    ref = np.sort(exact(theta))

    def cdf(p):
        return np.searchsorted(ref, p) / ref.size

    assert stats.kstest(r.probability, cdf).statistic <= 0.05
    # the upper quantile against the exact one, within its order-statistic interval widened by 10 %
    exact_upper = float(np.quantile(ref, 0.95))
    assert r.upper.lo * 0.9 <= exact_upper <= r.upper.hi * 1.1


def test_nested_runs_where_reweighting_fails() -> None:
    # a support beyond the nominal one (uniform bounds that move) cannot be reweighted
    problem = Problem.independent(("x",), (make_marginal("uniform", {"lower": 0.0, "upper": 1.0}),))
    params = [EpistemicParameter("x", "upper", make_marginal("uniform", {"lower": 0.9, "upper": 1.1}))]

    def failed(x):
        return x[:, 0] > 0.8

    r = epistemic_probability(problem, params, failed, outer=20, inner=20_000, seed=2)
    beyond = r.theta[:, 0] > 1.0
    assert np.array_equal(r.nested, beyond) and beyond.any() and (~beyond).any()
    assert r.solver_calls == 20_000 * (1 + int(beyond.sum()))
    # exact P = (upper - 0.8) / upper for a uniform on [0, upper]; within 5 standard errors:
    # P(|z| > 5) = 5.7e-7 per draw, 1.1e-5 over the 20 draws (normal approximation)
    truth = (r.theta[:, 0] - 0.8) / r.theta[:, 0]
    se = np.sqrt(truth * (1 - truth) / 20_000)
    assert np.all(np.abs(r.probability - truth) < 5 * se)
    assert any("nested" in n for n in r.notes)


def test_low_effective_sample_size_falls_back_to_nested() -> None:
    problem = Problem.independent(("x",), (make_marginal("normal", {"mean": 0.0, "sd": 1.0}),))
    params = [EpistemicParameter("x", "mean", make_marginal("uniform", {"lower": 3.0, "upper": 4.0}))]
    r = epistemic_probability(problem, params, lambda x: x[:, 0] > 3.0, outer=4, inner=5_000, seed=1)
    assert r.nested.all()  # a shift of 3-4 sd: the effective sample size is exp(-9) n or less


def test_reweighted_and_nested_agree_on_the_demo() -> None:
    # The same outer draws (same seed) by both methods. D = mean over draws of P_reweighted - P_nested;
    # its variance is at most (mean se_reweighted)^2 + sum se_nested^2 / m^2 (the reweighted errors
    # fully correlated at worst, the nested ones independent). |D| < 4.5 sqrt(that) fails a correct
    # pair with probability below 6.8e-6 (normal approximation).
    scenario, uncertain = api.load_study(None, ['runway.lda="1600 m"'])
    rw = api.epistemic(scenario, uncertain, outer=8, inner=20_000, seed=4).result
    ne = api.epistemic(scenario, uncertain, outer=8, inner=20_000, seed=4, method="nested").result
    np.testing.assert_array_equal(rw.theta, ne.theta)
    assert ne.nested.all() and not rw.nested.any()
    assert ne.solver_calls == 20_000 * 9 and rw.solver_calls == 20_000
    se_rw = (rw.sampling_hi - rw.sampling_lo) / (2 * Z95)
    se_ne = np.sqrt(ne.probability * (1 - ne.probability) / 20_000)
    d = float(np.mean(rw.probability - ne.probability))
    bound = np.sqrt(np.mean(se_rw) ** 2 + np.sum(se_ne**2) / 8**2)
    assert rw.probability.min() > 0.002  # enough overruns for the normal approximation
    assert abs(d) < 4.5 * bound, (d, bound)


def test_epistemic_tables_of_the_demo() -> None:
    scenario, uncertain = api.load_study()
    params = epistemic_parameters(scenario.text, scenario.source, uncertain)
    assert [p.name for p in params] == ["runway.braking_mu.mode", "procedure.reaction_time.median",
                                        "procedure.touchdown_distance.median"]
    assert params[1].distribution.lower == pytest.approx(1.2)


@pytest.mark.parametrize(("table", "expected"), [
    ('[epistemic."runway.lda".mode]\nrange = [1, 2]\n', "not an uncertain input"),
    ('[epistemic."runway.braking_mu".median]\nrange = [0.2, 0.3]\n', "not a parameter"),
    ('[epistemic."runway.braking_mu".mode]\nrange = [0.1, 0.3]\n', "not valid"),
    ('[epistemic."runway.braking_mu".mode]\ndistribution = "gamma"\n', "unknown or missing distribution"),
    ('[epistemic."procedure.reaction_time".median]\nrange = ["1 s", "2 kg"]\n', "units of"),
])
def test_epistemic_table_errors(table: str, expected: str) -> None:
    base = DEMO.read_text().split("[epistemic.", 1)[0]
    text = base + table
    _scenario, uncertain = parse_study(text, "s.toml")
    with pytest.raises(ConfigError, match=expected) as info:
        epistemic_parameters(text, "s.toml", uncertain)
    assert "s.toml" in str(info.value) and "\n" not in str(info.value)


def test_cli_assess_epistemic_json() -> None:
    r = CliRunner().invoke(main, ["assess", "--samples", "5000", "--epistemic", "--outer", "20", "--json"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    ep = data["epistemic"]
    for key in ("median", "upper", "upper_level", "drivers", "solver_calls"):
        assert key in ep
    assert ep["upper_level"] == 0.95 and ep["upper"] >= ep["median"]
    assert {d["name"] for d in ep["drivers"]} == {"runway.braking_mu.mode", "procedure.reaction_time.median",
                                                   "procedure.touchdown_distance.median"}
    json.dumps(ep, allow_nan=False)
    bad = CliRunner().invoke(main, ["assess", "--epistemic", "--method", "form"])
    assert bad.exit_code == 2


def test_truncated_lognormal_density_and_cdf_match_scipy() -> None:
    # log X ~ normal truncated to [log 0.3, log 6]: scipy.stats.truncnorm on log x, with the Jacobian 1/x
    from landrisk.uq.epistemic import _cdf

    m = make_marginal("lognormal", {"median": 1.5, "sigma_log": 0.4, "lower": 0.3, "upper": 6.0})
    mu, sd = np.log(1.5), 0.4
    ref = stats.truncnorm((np.log(0.3) - mu) / sd, (np.log(6.0) - mu) / sd, mu, sd)
    x = np.linspace(0.35, 5.5, 30)
    np.testing.assert_allclose(log_density(m, x), ref.logpdf(np.log(x)) - np.log(x), rtol=1e-10)
    np.testing.assert_allclose(_cdf(m, x), ref.cdf(np.log(x)), rtol=1e-10, atol=1e-14)
    n = make_marginal("normal", {"mean": 1.0, "sd": 2.0, "lower": 0.0, "upper": 4.0})
    np.testing.assert_allclose(_cdf(n, x), stats.truncnorm(-0.5, 1.5, 1.0, 2.0).cdf(x), rtol=1e-10)

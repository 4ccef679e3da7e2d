"""Rare-event methods against exact probabilities, the four-branch benchmark and the demo."""

import json
import math

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from scipy import stats

from landrisk import api
from landrisk.cli import main
from landrisk.report import render_rare
from landrisk.studies import RareSettings, rare_assess
from landrisk.uq.rare import form, importance_sampling, intervals_disagree, subset_simulation

# Linear limit state g = beta sqrt(n) - sum u_i in standard normal space: P_f = Phi(-beta) exactly for any
# n (Hasofer & Lind 1974, J. Eng. Mech. Div. 100:111). beta = 5.2 -> 9.96e-8.
BETA = 5.2
EXACT = stats.norm.cdf(-BETA)


def linear(d):
    return lambda u: BETA * math.sqrt(d) - u.sum(axis=1)


@pytest.mark.parametrize("d", [2, 10])
def test_form_is_exact_on_the_linear_limit_state(d) -> None:
    dps, calls = form(linear(d), d)
    assert dps[0].beta == pytest.approx(BETA, rel=1e-9)
    assert dps[0].probability == pytest.approx(EXACT, rel=1e-8)
    np.testing.assert_allclose(dps[0].importance, np.full(d, 1 / d), rtol=1e-6)  # alpha_i^2 = 1/n
    assert calls < 200


@pytest.mark.parametrize("d", [2, 10])
def test_importance_sampling_reaches_10_percent_within_2000_calls(d) -> None:
    dps, calls = form(linear(d), d)
    est = importance_sampling(linear(d), dps, seed=4, target_cov=0.1, calls_before=calls,
                              max_calls=2000 - calls)
    assert est.converged and est.cov <= 0.1 and est.calls <= 2000
    assert est.ci[0] <= EXACT <= est.ci[1]


@pytest.mark.parametrize("d", [2, 10])
def test_subset_simulation_within_its_interval(d) -> None:
    est = subset_simulation(linear(d), d, n=1000, seed=6)
    assert est.converged and est.ci[0] <= EXACT <= est.ci[1]


@pytest.mark.slow
def test_interval_coverage_over_many_seeds() -> None:
    # The reported 95 % intervals must contain the exact P_f in at least 93 % of independent runs.
    g = linear(2)
    dps, _ = form(g, 2)
    hits_is = 0
    for s in range(100):
        est = importance_sampling(g, dps, seed=s, target_cov=0.1)
        hits_is += est.ci[0] <= EXACT <= est.ci[1]
    hits_ss = 0
    for s in range(100):
        est = subset_simulation(g, 2, n=500, seed=1000 + s)
        hits_ss += est.ci[0] <= EXACT <= est.ci[1]
    # With a true coverage of at least 95 %, hits are binomial(100, 0.95) or better: P(hits < 85) = 3.7e-5
    # (scipy.stats.binom), so a correct method fails each count under 1 in 10^4 runs of this test.
    assert hits_is >= 85 and hits_ss >= 85


def four_branch(u):
    # Waarts 2000 (PhD thesis, TU Delft): reference P_f ~ 2.2228e-3, four design points;
    # tests/test_rare_problems.py recomputes it by Monte Carlo (2.20e-3).
    x1, x2 = u[:, 0], u[:, 1]
    return np.minimum.reduce([3 + 0.1 * (x1 - x2) ** 2 - (x1 + x2) / np.sqrt(2),
                              3 + 0.1 * (x1 - x2) ** 2 + (x1 + x2) / np.sqrt(2),
                              (x1 - x2) + 7 / np.sqrt(2), (x2 - x1) + 7 / np.sqrt(2)])


def test_four_branch_system_robust_methods_and_the_disagreement_guard() -> None:
    ref = 2.2228e-3
    dps, calls = form(four_branch, 2, starts=12, seed=3)
    assert len(dps) == 4  # the multi-start search finds every design point
    mixture = importance_sampling(four_branch, dps, seed=1, target_cov=0.05, calls_before=calls,
                                  max_calls=10_000 - calls)
    assert mixture.probability == pytest.approx(ref, rel=0.10) and mixture.calls <= 10_000
    subset = subset_simulation(four_branch, 2, n=1000, seed=2)  # needs no design point
    assert subset.ci[0] <= ref <= subset.ci[1] and subset.calls <= 30_000
    single = importance_sampling(four_branch, dps[:1], seed=1, target_cov=0.05)
    assert single.probability < 0.6 * ref  # confidently wrong, as FORM-centred sampling is here
    assert intervals_disagree(single, subset)
    assert not intervals_disagree(mixture, subset)


@pytest.fixture(scope="module")
def short_runway():
    # The demo on a short runway, where P(overrun) ~ 1e-3 and a 1e6-sample Monte Carlo sees it well.
    scenario, uncertain = api.load_study(None, ['runway.lda="1800 m"'])
    mc = api.assess(scenario, uncertain, samples=1_000_000, seed=3)
    return scenario, uncertain, mc


@pytest.mark.slow
@pytest.mark.parametrize("method", ["importance", "subset", "form"])
def test_demo_methods_agree_with_a_million_sample_monte_carlo(short_runway, method) -> None:
    scenario, uncertain, mc = short_runway
    r = rare_assess(scenario, uncertain.problem(), RareSettings(method=method, risk_curve=False))
    assert r.converged
    p_mc = mc.p_overrun.estimate
    sd_mc = math.sqrt(p_mc * (1 - p_mc) / mc.n)
    if method == "form":  # no sampling interval: FORM's own approximation, within 20 % here
        assert r.probability == pytest.approx(p_mc, rel=0.2)
    else:
        sd = r.cov * r.probability
        assert abs(r.probability - p_mc) <= 1.96 * math.hypot(sd, sd_mc)
    assert not any(m.startswith("WARNING") for m in r.messages)
    if method != "subset":  # the design point lies on the limit state: margin about 0 m
        from landrisk.studies.rare import solve_check

        assert abs(solve_check(scenario, r.design_point)) < 0.5
        assert sum(r.importance.values()) == pytest.approx(1.0, abs=1e-6)


def test_method_that_does_not_converge_says_so(short_runway) -> None:
    scenario, uncertain, _ = short_runway
    r = rare_assess(scenario, uncertain.problem(), RareSettings(method="importance", target_cov=0.001,
                                                                max_calls=1500, risk_curve=False,
                                                                cross_check=False))
    assert not r.converged
    text = render_rare(r)
    assert "NO ESTIMATE - THE METHOD DID NOT CONVERGE" in text and "P(overrun) = " not in text
    assert "LDA 1800 m (5906 ft)" in text  # 1800 m / 0.3048 m/ft (NIST SP 811, 2008, B.8)
    assert "LDA 5906 ft" in render_rare(r, None, "aviation")
    from landrisk.export import rare_record

    assert rare_record(r)["p_overrun"] is None


def test_cli_assess_rare_json_and_files(tmp_path) -> None:
    out = tmp_path / "rare"
    res = CliRunner().invoke(main, ["assess", "--method", "importance", "--set", 'runway.lda="2100 m"',
                                    "--json", "--units", "aviation", "--out", str(out)])
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout, parse_constant=_refuse)  # RFC 8259: no NaN or Infinity
    json.loads((out / "summary.json").read_text(encoding="utf-8"), parse_constant=_refuse)
    curve_csv = pd.read_csv(out / "risk-curve.csv")  # plain CSV, the unit in the header
    assert list(curve_csv.columns) == ["lda [ft]", "p_overrun_subset", "p_overrun_mc"]  # --units aviation
    for key in ("method", "cov", "model_calls", "beta", "design_point", "p_overrun", "p_overrun_ci95",
                "lda_m", "seed", "samples", "sampler", "version", "inputs"):
        assert key in data, key
    assert data["method"] == "importance" and data["cov"] <= 0.1
    assert "runway.braking_mu" in data["design_point"]
    assert {p.name for p in out.iterdir()} == {"summary.json", "risk-curve.csv", "risk-curve.png",
                                               "risk-curve.svg"}
    curve = data["risk_curve"]
    assert min(curve["p_subset"]) <= 1e-8 and max(curve["p_subset"]) >= 1e-1
    # The JSON stays SI; the table is in feet: 1 ft = 0.3048 m exactly (NIST SP 811, 2008, B.8).
    assert np.allclose(curve_csv["lda [ft]"] * 0.3048, curve["lda_m"], rtol=1e-12)


def _refuse(name: str) -> None:
    raise ValueError(f"not valid JSON: {name}")


# ---------------------------------------------------------------------------------------------------
# SORM, the subset interval, stalled levels, the worst corner


@pytest.mark.parametrize("beta, kappa, d", [(3.5, 0.1, 4), (4.5, -0.05, 4)])
def test_sorm_on_a_paraboloid_against_exact_integration(beta, kappa, d) -> None:
    # g = beta - u_d + kappa/2 sum_{i<d} u_i^2: a paraboloid with principal curvatures kappa at the design
    # point beta e_d. Exact: P = int_0^inf Phi(-(beta + kappa s / 2)) f_chi2(s; d-1) ds (scipy.integrate.quad,
    # scipy.stats.chi2). Breitung 1984 (J. Eng. Mech. 110:357): P ~ Phi(-beta) (1 + beta kappa)^(-(d-1)/2).
    from scipy import integrate

    from landrisk.uq.rare import sorm

    def g(u):
        return beta - u[:, -1] + kappa / 2 * (u[:, :-1] ** 2).sum(axis=1)

    exact = integrate.quad(lambda s: stats.norm.sf(beta + kappa * s / 2) * stats.chi2.pdf(s, d - 1),
                           0, np.inf,
                           epsabs=0, epsrel=1e-10, limit=200)[0]
    dps, _ = form(g, d)
    p, curv, calls = sorm(g, dps[0])
    np.testing.assert_allclose(curv, kappa, rtol=1e-3)
    assert p == pytest.approx(stats.norm.sf(beta) * (1 + beta * kappa) ** (-(d - 1) / 2), rel=1e-3)
    assert p == pytest.approx(exact, rel=0.05)
    assert abs(dps[0].probability / exact - 1) > 0.1  # FORM alone is off here: the test can tell them apart
    assert calls == 8 * d * d


def test_subset_interval_is_the_student_t_interval_over_the_replicates() -> None:
    # mean +- t_{0.975, R-1} s / sqrt(R) (Student 1908; scipy.stats.t), where the replicates' scatter s
    # exceeds the Au-Beck value; else the Au-Beck standard error sqrt(sum (cov_r p_r)^2) / R.
    from landrisk.uq.rare import RareEstimate, pool_replicates

    p = np.array([1.0e-6, 2.0e-6, 1.5e-6, 1.2e-6])
    runs = [RareEstimate("subset", float(v), 0.01, (0, 1), 100, True) for v in p]
    est = pool_replicates(runs)
    t = stats.t.ppf(0.975, 3)
    half = t * p.std(ddof=1) / 2
    assert est.ci == pytest.approx((p.mean() - half, p.mean() + half), rel=1e-12)
    assert est.ci[1] - est.ci[0] > 1.6 * 2 * 1.96 * p.std(ddof=1) / 2  # 62 % wider than a normal interval
    same = pool_replicates([RareEstimate("subset", 1e-6, 0.3, (0, 1), 100, True) for _ in range(4)])
    assert same.ci == pytest.approx((1e-6 * (1 - t * 0.15), 1e-6 * (1 + t * 0.15)), rel=1e-12)
    # and subset_simulation reports exactly this pooling of its replicates
    real = subset_simulation(linear(2), 2, n=500, seed=9)
    s_rep = np.std(real.replicates, ddof=1) / 2
    assert real.ci[1] - real.ci[0] >= 2 * t * s_rep * (1 - 1e-12)


def test_levels_that_stall_above_zero_give_an_upper_bound_only() -> None:
    # g >= 1 everywhere: no failure; the levels stall at g = 1 after the first.
    est = subset_simulation(lambda u: np.maximum(1.0, 2.0 - u[:, 0]), 2, n=500, seed=1)
    assert est.kind == "upper bound" and est.probability == 0 and not est.converged
    assert 0 < est.ci[1] <= 1 and "upper bound" in est.message


def test_worst_corner() -> None:
    from landrisk.uq.rare import worst_corner

    # g = 2.5 - Phi(u1) - Phi(u2): its minimum over the box is 0.5 at the corner (+, +); bounded inputs.
    wc, calls = worst_corner(lambda u: 2.5 - stats.norm.cdf(u).sum(axis=1), np.array([True, True]),
                             np.array([True, True]))
    assert wc.g == pytest.approx(0.5) and np.all(wc.u > 0) and wc.outside == 0 and calls == 4
    # an unbounded upper side: the box stops at 8 there, and P(outside) <= Phi(-8) (the union bound)
    wc, _ = worst_corner(lambda u: 10.0 - u[:, 0], np.array([True]), np.array([False]))
    assert wc.g == pytest.approx(2.0) and wc.outside == pytest.approx(stats.norm.sf(8.0))


def test_tasks_side_by_side_give_the_same_answers_as_one_at_a_time() -> None:
    from landrisk.uq.rare import _Counter, run_tasks, subset_task

    g = _Counter(linear(3))
    alone = [run_tasks([(0, subset_task(3, np.random.default_rng(s), n=500))], g.evaluator())[0]
             for s in range(3)]
    calls_alone = g.calls
    together = run_tasks([(0, subset_task(3, np.random.default_rng(s), n=500)) for s in range(3)],
                         g.evaluator())
    assert [a.probability for a in alone] == [b.probability for b in together]
    assert g.calls == 2 * calls_alone

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
# n (Hasofer-Lind / Cornell reliability index; REFERENCES.md). beta = 5.2 -> 9.96e-8.
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
    # Waarts 2000 (PhD thesis, TU Delft): reference P_f ~ 2.2228e-3, four design points (REFERENCES.md).
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
    from landrisk.export import rare_record

    assert rare_record(r)["p_overrun"] is None


def test_cli_assess_rare_json_and_files(tmp_path) -> None:
    out = tmp_path / "rare"
    res = CliRunner().invoke(main, ["assess", "--method", "importance", "--set", 'runway.lda="2100 m"',
                                    "--json", "--out", str(out)])
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout, parse_constant=_refuse)  # RFC 8259: no NaN or Infinity
    json.loads((out / "summary.json").read_text(encoding="utf-8"), parse_constant=_refuse)
    curve_csv = pd.read_csv(out / "risk-curve.csv")  # plain CSV, the unit in the header
    assert list(curve_csv.columns) == ["lda [m]", "p_overrun_subset", "p_overrun_mc"]
    for key in ("method", "cov", "model_calls", "beta", "design_point", "p_overrun", "p_overrun_ci95",
                "lda_m", "seed", "samples", "sampler", "version", "inputs"):
        assert key in data, key
    assert data["method"] == "importance" and data["cov"] <= 0.1
    assert "runway.braking_mu" in data["design_point"]
    assert {p.name for p in out.iterdir()} == {"summary.json", "risk-curve.csv", "risk-curve.png",
                                               "risk-curve.svg"}
    curve = data["risk_curve"]
    assert min(curve["p_subset"]) <= 1e-8 and max(curve["p_subset"]) >= 1e-1


def _refuse(name: str) -> None:
    raise ValueError(f"not valid JSON: {name}")

"""Sensitivity: polynomial chaos and Monte Carlo Sobol indices against analytic values and SALib."""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from landrisk import api
from landrisk.cli import main
from landrisk.uq import ChaosSpace, Problem, fit_chaos, make_marginal, sobol_indices, sobol_monte_carlo

# Ishigami function, a = 7, b = 0.1, x_i ~ U(-pi, pi) (Ishigami & Homma 1990; analytic indices as
# tabulated in Saltelli et al., Global Sensitivity Analysis: The Primer, Wiley 2008).
ISHIGAMI_S1 = np.array([0.3139, 0.4424, 0.0])
ISHIGAMI_ST = np.array([0.5576, 0.4424, 0.2437])
ISHIGAMI = Problem.independent(("x1", "x2", "x3"), tuple(
    make_marginal("uniform", {"lower": -np.pi, "upper": np.pi}) for _ in range(3)))


def ishigami(x):
    return np.sin(x[:, 0]) + 7 * np.sin(x[:, 1]) ** 2 + 0.1 * x[:, 2] ** 4 * np.sin(x[:, 0])


def pce_indices(problem, f, calls, seed=0, **kw):
    space = ChaosSpace(problem)
    xi = space.design(calls, seed)
    fit = fit_chaos(space, xi, f(space.to_inputs(xi))[:, None], ["y"], **kw)
    return sobol_indices(fit.index, [fit.coefficients[:, 0]], names=problem.names), fit


def test_ishigami_by_chaos_with_200_calls() -> None:
    si, fit = pce_indices(ISHIGAMI, ishigami, 200, max_order=16)
    assert fit.terms <= 100  # oversampling ratio >= 2
    np.testing.assert_allclose(si.first, ISHIGAMI_S1, atol=0.01)
    np.testing.assert_allclose(si.total, ISHIGAMI_ST, atol=0.01)
    assert si.mean == pytest.approx(3.5, abs=0.05)  # analytic mean a/2 = 3.5 (Saltelli et al. 2008)


def test_ishigami_by_monte_carlo_within_the_bootstrap_interval() -> None:
    mc = sobol_monte_carlo(ISHIGAMI, ishigami, 2**13, seed=3)
    for i in range(3):
        assert mc.first_ci[i, 0] <= ISHIGAMI_S1[i] <= mc.first_ci[i, 1]
        assert mc.total_ci[i, 0] <= ISHIGAMI_ST[i] <= mc.total_ci[i, 1]
    assert mc.variance == pytest.approx(13.845, rel=0.03)  # analytic variance (Saltelli et al. 2008)


@pytest.mark.slow
def test_sobol_g_function_by_chaos_with_500_calls() -> None:
    # Saltelli & Sobol' 1995 (Reliab. Eng. Syst. Saf. 50:225): V_i = 1/(3(1 + a_i)^2),
    # S_i = V_i / (prod(1 + V_j) - 1), ST_i = V_i prod_{j != i}(1 + V_j) / (prod(1 + V_j) - 1).
    a = np.array([0, 1, 4.5, 9, 99, 99, 99, 99])
    v = 1 / (3 * (1 + a) ** 2)
    s1 = v / (np.prod(1 + v) - 1)
    st = v * np.prod(1 + v) / (1 + v) / (np.prod(1 + v) - 1)
    problem = Problem.independent(tuple(f"x{i}" for i in range(8)), tuple(
        make_marginal("uniform", {"lower": 0.0, "upper": 1.0}) for _ in range(8)))
    si, _ = pce_indices(problem, lambda x: np.prod((np.abs(4 * x - 2) + a) / (1 + a), axis=1), 500,
                        max_order=12, q_norms=(1.0, 0.75, 0.5, 0.35))
    np.testing.assert_allclose(si.first, s1, atol=0.02)
    np.testing.assert_allclose(si.total, st, atol=0.02)


def test_linear_model_indices_are_squared_standardised_coefficients() -> None:
    # Y = sum c_i X_i with independent X_i: S_i = ST_i = c_i^2 Var X_i / sum_j c_j^2 Var X_j (exact).
    marg = (make_marginal("normal", {"mean": 2.0, "sd": 3.0}),
            make_marginal("uniform", {"lower": 0, "upper": 6}),
            make_marginal("normal", {"mean": -1.0, "sd": 0.5}))
    coef = np.array([1.5, -2.0, 4.0])
    var = np.array([9.0, 3.0, 0.25]) * coef**2
    si, _ = pce_indices(Problem.independent(("a", "b", "c"), marg), lambda x: x @ coef + 7.0, 40, order=1)
    np.testing.assert_allclose(si.first, var / var.sum(), rtol=1e-10)
    np.testing.assert_allclose(si.total, var / var.sum(), rtol=1e-10)
    assert si.variance == pytest.approx(var.sum(), rel=1e-10)


@pytest.fixture(scope="module")
def demo_ranking():
    scenario, uncertain = api.load_study()
    return api.rank(scenario, uncertain, calls=1000, seed=1, mc_check=0), scenario, uncertain


@pytest.mark.slow
def test_demo_surrogate_matches_a_million_sample_monte_carlo(demo_ranking) -> None:
    r, scenario, uncertain = demo_ranking
    mc = api.assess(scenario, uncertain, samples=1_000_000, seed=11)
    by = {p.p: p.value for p in r.surrogate.percentiles}
    mc_pct = {p.p: p.value for p in mc.percentiles["total_m"]}
    assert r.surrogate.mean_m == pytest.approx(mc.moments["total_m"][0], rel=0.005)
    assert r.surrogate.sd_m == pytest.approx(mc.moments["total_m"][1], rel=0.005)
    assert by[50.0] == pytest.approx(mc_pct[50.0], rel=0.005)
    assert by[99.0] == pytest.approx(mc_pct[99.0], rel=0.005)
    assert r.calls <= 1000


@pytest.mark.slow
def test_demo_indices_agree_with_salib(demo_ranking) -> None:
    # SALib (test-only reference): Saltelli sampling and Sobol analysis on the real solver, in the same
    # independent uniform variables (the copula's Cholesky order) as the chaos germs.
    from SALib.analyze import sobol as salib_analyze
    from SALib.sample import sobol as salib_sample

    from landrisk.studies import landing_model

    r, scenario, uncertain = demo_ranking
    problem = uncertain.problem()
    d = problem.dimension
    spec = {"num_vars": d, "names": list(problem.names), "bounds": [[0, 1]] * d}
    u = np.clip(salib_sample.sample(spec, 2**13, seed=2), 1e-12, 1 - 1e-12)
    y = landing_model(scenario, problem.names)(problem.transform(u))["total_m"]
    ref = salib_analyze.analyze(spec, y, seed=2)
    ours = {i.name: i for i in r.inputs}
    for k, name in enumerate(problem.names):
        assert ours[name].first == pytest.approx(ref["S1"][k], abs=0.03), name
        assert ours[name].total == pytest.approx(ref["ST"][k], abs=0.03), name


@pytest.mark.slow
def test_indices_are_consistent(demo_ranking) -> None:
    r, _, _ = demo_ranking
    assert sum(r.form_importance.values()) == pytest.approx(1.0, abs=1e-6)  # alpha is a unit vector
    for i in r.inputs:
        assert 0 <= i.first <= i.total + 1e-12 <= 1 + 1e-12
    assert sum(i.first for i in r.inputs) <= 1 + 1e-9
    assert r.chaos.holdout_rel_error < 0.05 and r.chaos.terms * 2 <= r.chaos.training_calls


def run(*args: str):
    return CliRunner().invoke(main, list(args))


@pytest.mark.slow
def test_cli_rank_json(tmp_path: Path) -> None:
    out = tmp_path / "rank"
    r = run("rank", "--calls", "400", "--mc-check", "0", "--json", "--out", str(out))
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout, parse_constant=_refuse)  # RFC 8259: no NaN or Infinity
    json.loads((out / "ranking.json").read_text(encoding="utf-8"), parse_constant=_refuse)
    for key in ("method", "calls", "inputs", "order", "holdout_rel_error", "version", "seed"):
        assert key in data
    assert data["method"] == "pce" and data["calls"] == 400
    assert {"name", "first_order", "total"} <= set(data["inputs"][0])
    names = {p.name for p in out.iterdir()}
    stems = ("indices", "tornado", "overrun-profile", "surrogate-exceedance")
    assert names == {"ranking.json", "indices.csv", "overrun-profile.csv"} | {
        f"{s}.{e}" for s in stems for e in ("png", "svg")}
    # every uncertain input once, the discrete one included; the overrun keys of the interface
    listed = [i["name"] for i in data["inputs"]]
    assert len(listed) == len(set(listed)) == 7  # the demo's seven uncertain inputs
    assert "procedure.use_reverse" in {i["name"] for i in data["inputs"]}
    for key in ("overrun_indices", "overrun_profile", "parameter_sensitivity", "shapley", "tail_check"):
        assert key in data, key
    assert {"name", "first_order", "first_order_ci95"} <= set(data["overrun_indices"][0])
    assert {"name", "prior_median", "overrun_median", "shift"} <= set(data["overrun_profile"][0])
    assert {"input", "parameter", "change", "dp_overrun"} <= set(data["parameter_sensitivity"][0])
    assert {"passed", "p99_m", "p_overrun"} <= set(data["tail_check"])
    table = pd.read_csv(out / "indices.csv")  # plain CSV, a unit in each dimensional header
    assert {"input", "total", "swing_total [m]", "unit"} <= set(table.columns)
    assert table["total"].dtype == float and table["discrete"].dtype == bool


def _refuse(name: str) -> None:
    raise ValueError(f"not valid JSON: {name}")


def test_cli_rank_monte_carlo_and_table() -> None:
    r = run("rank", "configs/turboprop-grass-strip.toml", "--method", "mc", "--calls", "7000",
            "--set", 'scenario.units="aviation"')
    assert r.exit_code == 0, r.output
    for text in ("Monte Carlo pick-freeze", "first order", "swing of total", "overrun indicator",
                 " ft ", "not an operational or certified performance source"):
        assert text in r.output


@pytest.mark.parametrize(("args", "needle"), [
    (("rank", "--order", "zero"), "not a whole number"),
    (("rank", "--calls", "25"), "too few"),
])
def test_cli_rank_bad_options(args, needle) -> None:
    r = run(*args)
    assert r.exit_code == 2 and needle in r.output + r.stderr
    assert "Traceback" not in r.output + r.stderr


WET = Path(__file__).parent.parent / "configs" / "wet-short-runway.toml"
REVERSER = """
[uncertain."procedure.use_reverse"]
distribution = "discrete"
values = [true, false]
probabilities = [0.9, 0.1]
source = "invented for this test"
"""


@pytest.fixture(scope="module")
def two_discrete(tmp_path_factory):
    folder = tmp_path_factory.mktemp("two")
    path = folder / "wet-two-discrete.toml"
    path.write_text(WET.read_text() + REVERSER)
    for csv in WET.parent.glob("*.csv"):  # data files the scenario names
        (folder / csv.name).write_text(csv.read_text())
    from landrisk.studies.rank import RankSettings, rank

    scenario, uncertain = api.load_study(str(path))
    settings = RankSettings(calls=900, seed=2, mc_check=20_000, surrogate_samples=100_000,
                            importance_samples=6_000, tail_checks=60, form_iterations=8)
    return rank(scenario, uncertain.problem(), settings), path


def test_every_discrete_input_has_its_own_row_and_swing(two_discrete) -> None:
    r, _ = two_discrete
    by = {i.name: i for i in r.inputs}
    assert len(by) == len(r.inputs) == r.problem.dimension
    for name in ("runway.condition_code", "procedure.use_reverse"):
        i = by[name]
        assert i.discrete and np.isfinite(i.swing_total_m) and i.swing_total_m != 0
        assert 0 <= i.first <= i.total + 1e-12 <= 1 + 1e-12
        assert len(i.levels) >= 2
    # a better runway condition code (5 against 3) shortens the landing; the reverser (true against
    # false) too: the signs of the physics, not a value
    assert by["runway.condition_code"].swing_total_m < 0
    assert by["procedure.use_reverse"].swing_total_m < 0
    assert not any("&" in i.name for i in r.inputs)
    names = [p.name for p in r.overrun.profile]
    assert "runway.condition_code" in names and "procedure.use_reverse" in names


def test_discrete_inputs_appear_in_every_figure_and_table(two_discrete) -> None:
    from landrisk.export import rank_table
    from landrisk.export.tables import overrun_profile_table
    from landrisk.plotting import indices_figure, overrun_profile_figure, tornado_figure

    r, _ = two_discrete
    for make in (indices_figure, tornado_figure):
        fig = make(r)
        labels = " ".join(t.get_text() for t in fig.axes[0].get_yticklabels())
        for name in ("runway.condition_code", "procedure.use_reverse"):
            assert name in labels, (make.__name__, name)
        assert "&" not in labels
    tornado = " ".join(t.get_text() for t in tornado_figure(r).axes[0].get_yticklabels())
    assert "3 to 5" in tornado and "False to True" in tornado  # the branches named in the key's type
    titles = {ax.get_title() for ax in overrun_profile_figure(r).axes}
    assert {"runway.condition_code", "procedure.use_reverse"} <= titles
    for table in (rank_table(r), overrun_profile_table(r)):
        names = list(table.iloc[:, 0])
        assert len(names) == len(set(names)) == r.problem.dimension


def test_ranking_in_the_units_asked_for(two_discrete) -> None:
    # 1 ft = 0.3048 m and 1 kt = 1852/3600 m/s exactly (NIST SP 811, 2008, appendix B.8).
    from landrisk.export import rank_table
    from landrisk.export.tables import overrun_profile_table
    from landrisk.plotting import overrun_profile_figure, tornado_figure
    from landrisk.report import render_rank

    r, _ = two_discrete
    si, ft = rank_table(r), rank_table(r, "aviation")
    assert np.allclose(ft["swing_total [ft]"] * 0.3048, si["swing_total [m]"], rtol=1e-12)
    p_si = overrun_profile_table(r).set_index("name")
    p_av = overrun_profile_table(r, "aviation").set_index("name")
    wind = "conditions.headwind"
    assert p_si.loc[wind, "unit"] == "m/s" and p_av.loc[wind, "unit"] == "kt"
    assert p_av.loc[wind, "prior_median"] == pytest.approx(p_si.loc[wind, "prior_median"] * 3600 / 1852)
    assert p_av.loc[wind, "shift"] == pytest.approx(p_si.loc[wind, "shift"] * 3600 / 1852)
    fig = tornado_figure(r, units="aviation")
    assert "[ft]" in fig.axes[0].get_xlabel()
    bars = sorted(abs(b.get_width()) for b in fig.axes[0].patches)
    assert bars[-1] == pytest.approx(max(abs(i.swing_total_m) for i in r.inputs) / 0.3048)
    assert "kt" in " ".join(ax.get_xlabel() for ax in overrun_profile_figure(r, units="aviation").axes)
    text = render_rank(r, None, "aviation")
    big = max(r.inputs, key=lambda i: abs(i.swing_total_m))
    assert f"{big.swing_total_m / 0.3048:+.0f} ft" in text and " m " not in text.split("From ")[0]


def test_discrete_indices_match_a_brute_force_variance_decomposition(two_discrete) -> None:
    # S_D = Var(E[Y | D]) / V by Monte Carlo on the real solver: E[Y | D = d] from samples with D fixed
    # at d (the law of total variance; Sobol 1993). 20 000 samples per level give a standard error of
    # the conditional means of about 1 m, far below the differences between levels; the tolerance
    # 0.02 covers that and the surrogate's hold-out error.
    from landrisk.studies import landing_model

    r, path = two_discrete
    scenario, uncertain = api.load_study(str(path))
    problem = uncertain.problem()
    rng = np.random.default_rng(4)
    x = problem.transform(rng.random((60_000, problem.dimension)))
    y = landing_model(scenario, problem.names)(x)["total_m"]
    v = np.var(y)
    for name in ("runway.condition_code", "procedure.use_reverse"):
        j = problem.names.index(name)
        values, probs = problem.marginals[j].choices()
        means = []
        for val in values:
            xv = x.copy()
            xv[:, j] = val
            means.append(landing_model(scenario, problem.names)(xv[:20_000])["total_m"].mean())
        means = np.array(means)
        s_first = float(probs @ (means - probs @ means) ** 2 / v)
        ours = next(i for i in r.inputs if i.name == name)
        assert ours.first == pytest.approx(s_first, abs=0.02), name


@pytest.mark.slow
def test_tail_check_passes_on_the_demo_and_fails_on_a_poor_surrogate() -> None:
    scenario, uncertain = api.load_study()
    good = api.rank(scenario, uncertain, calls=1000, seed=1, mc_check=100_000)
    t = good.tail
    assert t.passed and t.p99_passed and t.p_overrun_passed
    # a first-order surrogate misses the skew of the distance: its P99 and P(overrun) fall outside
    # the Monte Carlo check's intervals, and the check says so
    poor = api.rank(scenario, uncertain, calls=200, order=1, seed=1, mc_check=100_000)
    assert not poor.tail.passed
    assert poor.tail.p99_passed is False or poor.tail.p_overrun_passed is False
    assert any("tail check failed" in w for w in poor.warnings)


@pytest.mark.slow
def test_demo_overrun_influence_agrees_between_importance_and_monte_carlo_samples() -> None:
    # At an LDA of 1700 m P(overrun) is about 3e-3: 400 000 Monte Carlo samples hold about 1000 overruns
    # and importance sampling around the design points thousands (weighted). Both estimate the same
    # quantities, so their 95 % intervals must meet; each interval misses its true value 5 % of the
    # time, so two intervals that are both right always meet, and the chance that some pair fails to
    # meet for a correct method is well below 1e-4 per pair when the intervals are stretched to twice
    # their half-widths (about 3.9 standard errors each, as in test_overrun_sensitivity).
    from landrisk.studies.rank import RankSettings, rank

    scenario, uncertain = api.load_study(None, ("runway.lda=1700 m",))
    settings = RankSettings(calls=600, seed=3, mc_check=0, risk_samples=400_000, importance_samples=40_000,
                            surrogate_samples=100_000)
    r = rank(scenario, uncertain.problem(), settings)
    assert r.overrun is not None and r.overrun_mc is not None
    a, b = r.overrun, r.overrun_mc
    assert min(a.effective_events, b.effective_events) > 500

    def stretched(i):
        return (i.first_order - 2 * (i.first_order - i.ci[0]), i.first_order + 2 * (i.ci[1] - i.first_order))

    for ia, ib in zip(a.indices, b.indices, strict=True):
        lo_a, hi_a = stretched(ia)
        lo_b, hi_b = stretched(ib)
        assert lo_a <= hi_b and lo_b <= hi_a, (ia, ib)
    for pa, pb in zip(a.profile, b.profile, strict=True):
        # Medians given an overrun: a sample median has a standard error of about 1.25 sd / sqrt(n)
        # (Kendall & Stuart, asymptotic variance of the median of a normal sample; from memory); with
        # n > 500 and the conditional sd below the prior 5-95 % range / 3.3, each is within 0.017 of that
        # range, their difference within 0.024: 0.1 of the range is over 4 of those standard errors.
        if not pa.discrete:
            m = r.problem.marginals[r.problem.names.index(pa.name)]
            spread = float(np.diff(m.ppf(np.array([0.05, 0.95])))[0])
            assert abs(pa.overrun_median - pb.overrun_median) <= 0.1 * spread, pa.name


@pytest.mark.parametrize("method", ["pce", "mc"])
def test_landings_that_cannot_stop_are_refused_not_fitted(method) -> None:
    # A 20 % downhill slope: gravity outweighs braking on some landings, whose distance is infinite. A
    # surrogate or a variance of the distance must never be computed from them (a one-line error, exit 2).
    r = run("rank", "--method", method, "--calls", "700", "--mc-check", "0", "--set", 'runway.slope="-20 %"')
    assert r.exit_code == 2, r.output
    assert "cannot stop" in r.stderr and "Traceback" not in r.output + r.stderr
    assert len(r.stderr.strip().splitlines()) == 1

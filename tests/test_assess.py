"""The Monte Carlo assessment on the real solver, its files and its command line."""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from conftest import FT, scenario_text
from scipy import stats

from landrisk import api
from landrisk.cli import main
from landrisk.errors import ConfigError
from landrisk.io import parse_study
from landrisk.report import render_assess

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).resolve().parent / "data"

# A scenario of the tests' own: Anderson (1999) Example 6.7's aircraft in SI, rounded (not a check
# value here; the checks below are relations that hold for any aircraft).
BASE = scenario_text()


def study(extra: str = "", overrides=(), base_dir=None):
    return parse_study(BASE + extra, "test.toml", overrides, base_dir=base_dir)


def test_degenerate_inputs_give_the_deterministic_answer() -> None:
    # Every uncertain input fixed at one value: every percentile is the deterministic distance.
    extra = """
[uncertain."runway.braking_mu"]
distribution = "discrete"
values = [0.4]
probabilities = [1.0]
[uncertain."procedure.reaction_time"]
distribution = "discrete"
values = ["3 s"]
probabilities = [1.0]
"""
    scenario, uncertain = study(extra)
    a = api.assess(scenario, uncertain, samples=2000, seed=1)
    exact = api.solve(scenario).total_m
    for p in a.percentiles["total_m"]:
        if p.supported:
            assert p.value == pytest.approx(exact, rel=1e-12)
            assert p.lo == pytest.approx(exact, rel=1e-12) and p.hi == pytest.approx(exact, rel=1e-12)
    assert a.moments["total_m"][1] == pytest.approx(0.0, abs=1e-9)


def test_uniform_braking_friction_exceeds_its_midpoint_distance_half_the_time() -> None:
    # Raymer 2018, Table 17.1: dry brakes-on 0.3-0.5. The distance is monotone in mu, so with mu uniform
    # on [0.3, 0.5], P(total > distance at mu = 0.4) = P(mu < 0.4) = 0.5 exactly.
    scenario, uncertain = study('[uncertain."runway.braking_mu"]\ndistribution = "uniform"\n'
                                "lower = 0.3\nupper = 0.5\n")
    at_mid = api.solve(scenario).total_m  # the file's braking_mu is 0.4
    a = api.assess(scenario, uncertain, samples=20_000, seed=2)
    k = int(np.sum(a.outputs["total_m"] > at_mid))
    ci = stats.binomtest(k, a.n).proportion_ci()
    assert ci.low <= 0.5 <= ci.high
    assert a.comparisons[0].distance_m == at_mid and a.comparisons[0].p_exceed.events == k


def test_same_seed_same_results_whatever_the_chunk_size() -> None:
    scenario, uncertain = api.load_study()
    runs = [api.assess(scenario, uncertain, samples=5000, seed=4, chunk=c, sampler=s)
            for s in ("random", "sobol") for c in (5000, 700)]
    for s in (0, 2):
        assert np.array_equal(runs[s].outputs["total_m"], runs[s + 1].outputs["total_m"])
    assert api.assessment_record(runs[0]) == api.assessment_record(runs[1])
    other = api.assess(scenario, uncertain, samples=5000, seed=5)
    assert not np.array_equal(other.outputs["total_m"], runs[0].outputs["total_m"])


def test_sobol_converges_faster_than_random_on_the_demo() -> None:
    # Quasi-Monte Carlo error for a smooth integrand falls faster than n^-1/2 (Owen 1997, scrambled nets):
    # compare the spread of the mean distance over seeds at the same sample count.
    scenario, uncertain = api.load_study()
    means = {s: [api.assess(scenario, uncertain, samples=2**12, seed=seed, sampler=s).moments["total_m"][0]
                 for seed in range(8)] for s in ("random", "sobol")}
    assert np.std(means["sobol"]) < 0.5 * np.std(means["random"])


def test_comparison_lines_and_regulatory_factors() -> None:
    scenario, uncertain = api.load_study()
    a = api.assess(scenario, uncertain, samples=20_000, seed=1)
    # The samples place the touchdown point by its distribution (lognormal, median 420 m, sigma_log 0.3,
    # truncated to [150, 1200] m); the deterministic line takes its median, computed here with
    # scipy.stats.lognorm (the median of a truncated law: F^-1((F(lo) + F(hi)) / 2)).
    base = stats.lognorm(0.3, scale=420.0)
    median = float(base.ppf(0.5 * (base.cdf(150.0) + base.cdf(1200.0))))
    assert median == pytest.approx(420.0, rel=2e-3)
    nominal = api.solve(api.load(None, [f'procedure.touchdown_distance="{median!r} m"'])).total_m
    assert a.nominal_total_m == pytest.approx(nominal, rel=1e-9)
    # 14 CFR 121.195(b) 1/0.6; 121.195(d) 1.15 on that; FAA SAFO 06012 1.15.
    factors = [c.factor for c in a.comparisons]
    assert factors == pytest.approx([1.0, 1 / 0.6, 1.15 / 0.6, 1.15])
    for c in a.comparisons:
        assert c.distance_m == pytest.approx(nominal * c.factor)
        assert c.p_exceed.events == int(np.sum(a.outputs["total_m"] > c.distance_m))


def test_overrun_speeds_and_the_safety_area() -> None:
    scenario, uncertain = api.load_study(None, ['runway.lda="1500 m"'])
    a = api.assess(scenario, uncertain, samples=20_000, seed=1)
    over = a.outputs["margin_m"] < 0
    assert a.p_overrun.events == int(over.sum()) > 0
    assert a.p_beyond_resa.events == int(np.sum(a.outputs["margin_m"] < -240.0))
    speeds = a.outputs["runway_end_ground_speed"]
    assert np.all(speeds[~over] == 0) and np.all(speeds[over] > 0)
    assert a.overrun_speed_max == pytest.approx(speeds.max())


def test_no_overrun_is_reported_as_an_upper_bound() -> None:
    scenario, uncertain = api.load_study(None, ['runway.lda="4000 m"'])
    a = api.assess(scenario, uncertain, samples=10_000, seed=1)
    assert a.p_overrun.upper_bound_only and a.p_overrun.events == 0
    assert a.p_overrun.hi == pytest.approx(3e-4, rel=0.01)  # rule of three
    # One bound everywhere: the one-sided Clopper-Pearson 1 - 0.05^(1/n) (Clopper & Pearson 1934), which
    # scipy.stats.binomtest gives as the upper end of its one-sided ("less") exact interval.
    exact = stats.binomtest(0, 10_000, alternative="less").proportion_ci(0.95, method="exact").high
    assert a.p_overrun.hi == pytest.approx(exact, rel=1e-9)
    record = api.assessment_record(a)
    assert record["p_overrun_upper_bound_only"] is True
    assert record["p_overrun"] is None  # not 0.0, which a sum over a fleet would add
    assert record["p_overrun_upper_bound"] == pytest.approx(exact, rel=1e-9)
    assert f"< {exact:.2e}" in render_assess(a)
    from landrisk.plotting import exceedance_figure

    fig = exceedance_figure(a)
    band = fig.axes[0].collections[0].get_paths()[0].vertices
    # the band's top at the largest sample (no exceedance there) is the same bound
    top_right = band[band[:, 0] >= a.sorted_total()[-1] - 1e-9, 1]
    assert top_right.max() == pytest.approx(exact, rel=1e-9)


def test_empirical_touchdown_points_from_csv() -> None:
    extra = """
[uncertain."procedure.touchdown_distance"]
distribution = "empirical"
file = "touchdown-invented.csv"
column = "touchdown_ft"
unit = "ft"
"""
    scenario, uncertain = study(extra, base_dir=DATA)
    data = np.loadtxt(DATA / "touchdown-invented.csv", delimiter=",", skiprows=2, usecols=1) * FT
    a = api.assess(scenario, uncertain, samples=4000, seed=1)
    air = a.outputs["air_distance_m"]
    assert air.min() >= data.min() - 1e-9 and air.max() <= data.max() + 1e-9
    assert np.median(air) == pytest.approx(np.median(data), rel=0.02)


@pytest.mark.parametrize(
    ("extra", "needle"),
    [
        ('[uncertain."runway.braking_mu"]\ndistribution = "normal"\nmean = 0.3\nsd = -0.1\n',
         "sd must be positive"),
        ('[uncertain."runway.braking_mu"]\ndistribution = "uniform"\nlower = 0.5\nupper = 0.3\n',
         "must be below upper"),
        ('[uncertain."runway.braking_mu"]\ndistribution = "normal"\nmean = 0.3\nsd = 0.05\n',
         "outside the allowed range of runway.braking_mu; truncate"),
        ('[uncertain."runway.condition_code"]\ndistribution = "discrete"\nvalues = [6, 5]\n'
         "probabilities = [0.5, 0.4]\n", "sum to 1"),
        ('[uncertain."runway.braking_mu"]\ndistribution = "gauss"\n', "unknown or missing distribution"),
        ('[uncertain."runway.lda"]\ndistribution = "uniform"\nlower = "1 kg"\nupper = "2 m"\n', "not m"),
        ('[uncertain."runway.name"]\ndistribution = "uniform"\nlower = 0\nupper = 1\n', "not a scalar key"),
        ('[uncertain."procedure.use_reverse"]\ndistribution = "uniform"\nlower = 0\nupper = 1\n',
         "discrete"),
        ('[uncertain."runway.braking_mu"]\ndistribution = "uniform"\nlower = 0.3\nupper = 0.5\n'
         '[[correlation]]\nbetween = ["runway.braking_mu", "aircraft.mass"]\nspearman = 0.2\n',
         "is not an uncertain input"),
        ('[uncertain."runway.braking_mu"]\ndistribution = "empirical"\nfile = "touchdown-invented.csv"\n'
         'column = "nope"\n', "no such column"),
        ('[uncertain."runway.condition_code"]\ndistribution = "discrete"\nvalues = [6, 3]\n'
         "probabilities = [0.5, 0.5]\n", "remove runway.braking_mu"),
    ],
)
def test_bad_uncertain_specifications(extra, needle) -> None:
    with pytest.raises(ConfigError) as err:
        study(extra, base_dir=DATA)
    assert needle in str(err.value)
    assert str(err.value).startswith("test.toml: ")


def run(*args: str):
    return CliRunner().invoke(main, list(args))


def test_cli_assess_json() -> None:
    r = run("assess", "--samples", "4000", "--seed", "3", "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    for key in ("samples", "seed", "sampler", "lda_m", "percentiles_m", "p_overrun", "p_overrun_ci95",
                "overruns", "mean_m", "sd_m", "version", "inputs", "uncertain", "comparison_lines"):
        assert key in data, key
    assert data["samples"] == 4000 and data["seed"] == 3 and data["sampler"] == "random"
    assert set(data["percentiles_m"]) >= {"50", "90", "99"}
    assert data["p_overrun_ci95"][0] <= data["p_overrun"] <= data["p_overrun_ci95"][1]


def test_cli_assess_table_and_a_scenario_of_our_own(tmp_path: Path) -> None:
    path = tmp_path / "own.toml"
    path.write_text(BASE + '[uncertain."runway.braking_mu"]\ndistribution = "triangular"\n'
                    "lower = 0.2\nmode = 0.4\nupper = 0.45\n", encoding="utf-8")
    r = run("assess", str(path), "--samples", "3000")
    assert r.exit_code == 0, r.output
    for text in ("P(overrun)", "P50", "P99", "Comparison lines", "14 CFR 121.195(b)",
                 "not an operational or certified performance source"):
        assert text in r.output


@pytest.mark.slow
def test_cli_assess_writes_files_with_provenance(tmp_path: Path) -> None:
    out = tmp_path / "run"
    r = run("assess", "--samples", "3000", "--seed", "7", "--sampler", "sobol", "--out", str(out),
            "--save-samples", "--quiet")
    assert r.exit_code == 0, r.output
    names = {p.name for p in out.iterdir()}
    assert names == {"summary.json", "percentiles.csv", "samples.csv"} | {
        f"{s}.{e}" for s in ("exceedance", "histogram", "convergence") for e in ("png", "svg")}
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert (summary["seed"], summary["sampler"], summary["samples"]) == (7, "sobol", 3000)
    assert summary["inputs"]["runway.lda"] == 1900.0 and "scenario_text" in summary
    assert set(summary["files"].values()) == names  # the summary references every file
    assert summary["version"] and summary["caution"] and len(summary["run_id"]) == 12
    for name in ("percentiles.csv", "samples.csv"):  # plain CSV: no comment lines, a unit in each header
        assert not (out / name).read_text(encoding="utf-8").startswith("#")
    samples = pd.read_csv(out / "samples.csv")
    assert len(samples) == 3000
    assert {"runway.braking_mu", "procedure.use_reverse", "total [m]", "margin [m]"} <= set(samples.columns)
    assert samples["procedure.use_reverse"].dtype == bool and samples["overrun"].dtype == bool
    assert samples["total [m]"].dtype == float and samples["aircraft.mass [kg]"].dtype == float
    np.testing.assert_allclose(samples["total [m]"], samples["air_distance [m]"] + samples["free_roll [m]"]
                               + samples["braking_roll [m]"], rtol=1e-9)
    for fig in ("exceedance.png", "exceedance.svg"):
        assert b'"seed": 7' in (out / fig).read_bytes()
    assert f"Files written:\n  {out / 'summary.json'}" in r.output
    assert (out / "summary.json").stat().st_mode & 0o044  # readable like any file the user writes
    again = run("assess", "--samples", "3000", "--out", str(out))
    assert again.exit_code == 2 and "--force" in again.stderr
    assert run("assess", "--samples", "3000", "--out", str(out), "--force").exit_code == 0


def test_cli_assess_bad_input_exits_2(tmp_path: Path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text(BASE + '[uncertain."runway.braking_mu"]\ndistribution = "normal"\nmean = 0.3\n'
                   "sd = 0\n", encoding="utf-8")
    r = run("assess", str(bad))
    assert r.exit_code == 2 and "bad.toml" in r.stderr and "sd must be positive" in r.stderr
    assert "Traceback" not in r.output + r.stderr
    no_uncertain = tmp_path / "plain.toml"
    no_uncertain.write_text(BASE, encoding="utf-8")
    r = run("assess", str(no_uncertain))
    assert r.exit_code == 2 and "no uncertain inputs" in r.stderr
    r = run("assess", "--set", "runway.braking_mu=0.2", "--samples", "2000")
    assert r.exit_code == 0 and "runway.braking_mu is fixed by --set" in r.stderr

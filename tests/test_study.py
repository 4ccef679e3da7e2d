"""Studies: study files, cases and grids, paired comparisons, yearly risk, parallel runs and the cache."""

from __future__ import annotations

import json
import math
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from conftest import small_study_text
from scipy import stats

from landrisk import api
from landrisk.cli import main
from landrisk.errors import ConfigError
from landrisk.io.config import parse_study
from landrisk.io.study import parse_study_file, resolve_case
from landrisk.studies.assess import AssessSettings, assess
from landrisk.studies.study import StudyResult, yearly_risk
from landrisk.testing.testmodels import StoppingDistance
from landrisk.uq.chunked import Histogram, PairedCounts, chunk_seeds, chunk_sizes, paired_comparison

ROOT = Path(__file__).resolve().parents[1]
BASE = ROOT / "configs" / "study-base-invented.toml"

GRID_STUDY = f"""
[study]
name = "grid test"
scenario = "{BASE.as_posix()}"
samples = 1500
seed = 3
method = "mc"

[[case]]
name = "none"

[[case]]
name = "aim"
'uncertain."procedure.touchdown_distance".median' = "380 m"

[grid]
"runway.lda" = ["1600 m", "1900 m"]
"runway.condition_code" = [5, 3, 2]

[[comparison]]
baseline = "none"
alternative = "aim"
"""


def write(tmp_path: Path, text: str, name: str = "study.toml") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def strict_json(text: str) -> object:
    def bad(c: str) -> None:
        raise ValueError(f"not strict JSON: {c}")

    return json.loads(text, parse_constant=bad)


# -------------------------------------------------------------------------- paired comparison (generic)


def test_paired_interval_covers_the_exact_difference_on_the_lognormal_model() -> None:
    # Exact answer: d = V^2 / (2 mu g) is lognormal (Aitchison & Brown, The Lognormal Distribution, 1957,
    # §2.3), so P(d > L) is exact for the baseline (mu50 = 0.3) and the alternative (mu50 = 0.31).
    base, alt = StoppingDistance(), StoppingDistance(mu50=0.31)
    limit = float(base.ppf(0.95))
    pb, pa = float(base.sf(limit)), float(alt.sf(limit))
    n = 100_000
    u = np.random.default_rng(11).random((n, 2))  # the same uniforms for both: common random numbers
    ib = base(base.problem().transform(u))["distance"] > limit
    ia = alt(alt.problem().transform(u))["distance"] > limit
    # A 99.99 % interval: a correct (normal-approximation) interval misses at most 1 in 10^4 seeds.
    c = paired_comparison(PairedCounts.of(ib, ia), conf=0.9999)
    assert c.difference_ci[0] <= pa - pb <= c.difference_ci[1]
    assert c.ratio_ci is not None and c.ratio_ci[0] <= pa / pb <= c.ratio_ci[1]
    # The events are nested (a larger mu stops shorter on the same sample), so Var(D) = delta(1 - delta)
    # with delta = pb - pa; two independent runs have pa(1 - pa) + pb(1 - pb): a reduction of 7.5 here.
    delta = pb - pa
    exact_reduction = (pa * (1 - pa) + pb * (1 - pb)) / (delta * (1 - delta))
    # The estimate's relative standard error is about 1/sqrt(n delta) = 3 %; 15 % is 5 standard errors
    # (two-sided normal tail 6e-7).
    assert c.variance_reduction is not None
    assert abs(c.variance_reduction / exact_reduction - 1) < 0.15
    assert c.sd_paired < c.sd_independent / 2


def test_paired_comparison_arithmetic_by_hand() -> None:
    # 10 samples: both 2, only baseline 3, only alternative 1 -> pb = 0.5, pa = 0.3, D mean -0.2,
    # sum D^2 = 4, sample variance (4 - 10 * 0.04) / 9 = 0.4.
    c = paired_comparison(PairedCounts(10, 2, 3, 1), conf=0.95)
    assert c.difference == pytest.approx(-0.2)
    assert c.sd_paired == pytest.approx(math.sqrt(0.4 / 10))
    assert c.difference_ci[0] < -0.2 < c.difference_ci[1]
    assert c.ratio == pytest.approx(0.6)
    assert c.sd_independent == pytest.approx(math.sqrt((0.3 * 0.7 + 0.5 * 0.5) / 10))


def test_paired_interval_with_no_event_keeps_its_width() -> None:
    # No overrun in either case on 2000 common samples: not a difference of exactly 0 [0, 0] (the Wald
    # interval) but +-u, u the Wilson upper bound for 0 events in 2000 (Wilson 1927; scipy.stats.binomtest
    # as the reference), as Newcombe's method gives (Newcombe 1998, Statistics in Medicine 17:2635).
    c = paired_comparison(PairedCounts(2000, 0, 0, 0), conf=0.95)
    u = stats.binomtest(0, 2000).proportion_ci(confidence_level=0.95, method="wilson").high
    assert c.difference == 0.0
    assert c.difference_ci == pytest.approx((-u, u), rel=1e-12)


def test_paired_interval_coverage_on_correlated_events() -> None:
    # Correlated events with known probabilities: U uniform, baseline U < 0.030, alternative U < 0.020
    # on 60 % of the samples and an independent V < 0.020 on the rest, so pa = 0.020 exactly and the
    # true difference is -0.010. Over 2000 replicates of n = 800 the 95 % interval must cover it in at
    # least 92 % of them: at a true 95 % coverage the count sd is 0.49 %, and 92 % lies 6 sd below
    # (one-sided normal tail < 1e-9); Newcombe (1998, table II) reports method 10 near nominal.
    rng = np.random.default_rng(21)
    reps, n, hits = 2000, 800, 0
    for _ in range(reps):
        u, v, w = rng.random(n), rng.random(n), rng.random(n)
        base = u < 0.030
        alt = np.where(w < 0.6, u < 0.020, v < 0.020)
        lo, hi = paired_comparison(PairedCounts.of(base, alt), conf=0.95).difference_ci
        hits += lo <= -0.010 <= hi
    assert hits / reps >= 0.92


def test_histogram_merges_exactly_and_bounds_percentiles() -> None:
    x = np.random.default_rng(2).lognormal(7.0, 0.2, 30_000)
    parts = np.array_split(x, 3)
    merged = Histogram.of(parts[0], 1.0, 5000).merge(Histogram.of(parts[1], 1.0, 5000)).merge(
        Histogram.of(parts[2], 1.0, 5000))
    whole = Histogram.of(x, 1.0, 5000)
    assert np.array_equal(merged.counts, whole.counts) and merged.n == x.size
    for p in merged.percentiles([1.0, 50.0, 99.0]):
        assert p.value is not None and abs(p.value - np.percentile(x, p.p)) <= 1.0  # one bin width
    assert chunk_sizes(25, 10) == [10, 10, 5]
    a, b = chunk_seeds(5, 2)
    assert np.random.default_rng(a).random() != np.random.default_rng(b).random()


# ---------------------------------------------------------------------------------------------- yearly


def test_yearly_figures_by_hand() -> None:
    # Poisson yearly count with mean N p (common practice, no source): lambda = 20000 * 1e-4 = 2,
    # P(>= 1) = 1 - e^-2 = 0.8646647, mean years between overruns 1 / 2.
    y = yearly_risk(1e-4, (5e-5, 2e-4), 20_000)
    assert y.overruns_per_year == pytest.approx(2.0)
    assert y.overruns_per_year_ci == pytest.approx((1.0, 4.0))
    assert y.p_at_least_one == pytest.approx(1 - math.exp(-2.0))
    assert y.p_at_least_one_ci == pytest.approx((1 - math.exp(-1.0), 1 - math.exp(-4.0)))
    assert y.mean_years_between == pytest.approx(0.5)
    assert y.mean_years_between_ci == pytest.approx((0.25, 1.0))
    assert yearly_risk(0.0, (0.0, 1e-5), 1000).mean_years_between_ci[1] is None


def test_mixed_exposure_and_target(tmp_path: Path) -> None:
    text = f"""
[study]
scenario = "{BASE.as_posix()}"
samples = 2000
method = "mc"
[[case]]
name = "code 5"
"runway.lda" = "1600 m"
[[case]]
name = "code 3"
"runway.lda" = "1600 m"
"runway.condition_code" = 3
[exposure]
landings_per_year = 5000
target_per_landing = 1e-3
mix = {{ "code 5" = 0.7, "code 3" = 0.3 }}
"""
    r = api.study(write(tmp_path, text), workers=1)
    e = r.exposure
    assert e is not None and e.basis == "mix"
    p5, p3 = r.cases
    # by hand: p = 0.7 p5 + 0.3 p3; sd^2 = 0.49 sd5^2 + 0.09 sd3^2; lambda = 5000 p
    p = 0.7 * p5.p_overrun + 0.3 * p3.p_overrun
    sd = math.sqrt((0.7 * p5.sd) ** 2 + (0.3 * p3.sd) ** 2)
    assert e.p_per_landing == pytest.approx(p)
    assert e.yearly.overruns_per_year == pytest.approx(5000 * p)
    assert e.yearly.overruns_per_year_ci[1] == pytest.approx(5000 * (p + stats.norm.ppf(0.975) * sd))
    assert e.yearly.p_at_least_one == pytest.approx(1 - math.exp(-5000 * p))
    assert e.yearly.mean_years_between == pytest.approx(1 / (5000 * p))
    assert e.target_per_year == pytest.approx(5.0)
    lo, hi = e.yearly.overruns_per_year_ci
    assert e.target_status == ("met" if hi <= 5 else "not met" if lo > 5 else
                               "undecided: the interval contains the target")
    # each case's own yearly figures: N times its probability and interval
    assert e.per_case["code 3"].overruns_per_year_ci == pytest.approx((5000 * p3.ci[0], 5000 * p3.ci[1]))


def test_example_study_reads_and_resolves() -> None:
    spec = parse_study_file((ROOT / "configs" / "studies" / "invented-study.toml").read_text(),
                            str(ROOT / "configs" / "studies" / "invented-study.toml"),
                            base_dir=ROOT / "configs" / "studies")
    assert len(spec.cases) == 12 and len(spec.comparisons) == 6 and spec.exposure is not None
    for c in spec.cases:
        scenario, _ = resolve_case(spec, c)
        assert scenario.values["runway.condition_code"] in (5, 3, 2)
    aim = resolve_case(spec, spec.cases[-1])[1]
    td = next(u for u in aim.inputs if u.key == "procedure.touchdown_distance")
    assert td.written["median"] == "380 m"


# ----------------------------------------------------------------------------------------- the grid


def test_grid_study_rows_orderings_and_equal_to_single_assess(tmp_path: Path) -> None:
    r = api.study(write(tmp_path, GRID_STUDY), workers=1)
    assert len(r.cases) == 12 and len(r.comparisons) == 6
    p = {x.name: x.p_overrun for x in r.cases}
    for m in ("none", "aim"):
        for code in (5, 3, 2):
            short = p[f"{m} | lda=1600 m, condition_code={code}"]
            long = p[f"{m} | lda=1900 m, condition_code={code}"]
            # Common random numbers: every sample's margin grows with the LDA, so the count cannot rise.
            assert long <= short and (short < 0.01 or long < short)
        for lda in ("1600 m", "1900 m"):
            seq = [p[f"{m} | lda={lda}, condition_code={k}"] for k in (5, 3, 2)]
            assert seq[0] <= seq[1] <= seq[2] and seq[0] < seq[2]
    # Each case equals a single assessment of the same inputs with the same seed.
    scenario, uncertain = api.load_study(BASE, ['runway.lda="1900 m"', "runway.condition_code=3"])
    single = api.assess(scenario, uncertain, samples=1500, seed=3)
    case = next(x for x in r.cases if x.name == "none | lda=1900 m, condition_code=3")
    assert case.mc.events == single.p_overrun.events and case.ci == (single.p_overrun.lo, single.p_overrun.hi)
    assert [q.value for q in case.percentiles] == [q.value for q in single.percentiles["total_m"]]
    sc2, un2 = parse_study(BASE.read_text(), str(BASE), ['runway.lda="1600 m"', "runway.condition_code=2"],
                           base_dir=BASE.parent,
                           assign={("uncertain", "procedure.touchdown_distance", "median"): "380 m"})
    single2 = assess(sc2, un2.problem(), AssessSettings(samples=1500, seed=3))
    case2 = next(x for x in r.cases if x.name == "aim | lda=1600 m, condition_code=2")
    assert case2.mc.events == single2.p_overrun.events
    # The comparisons see the cases' own samples: their marginal probabilities are the cases'.
    cmp = next(c for c in r.comparisons if c.alternative == "aim | lda=1600 m, condition_code=2")
    assert cmp.paired.p_alt == pytest.approx(case2.p_overrun)
    assert cmp.paired.difference < 0 and cmp.paired.sd_paired < cmp.paired.sd_independent
    # Units asked for: the distance columns in feet, named in their headers; 1 ft = 0.3048 m exactly
    # (international foot; NIST SP 811, 2008, appendix B.8). The probabilities do not change.
    si, ft = api.study_table(r), api.study_table(r, "aviation")
    assert "p50 [m]" in si.columns and "p50 [ft]" in ft.columns and "p50_m" not in si.columns
    assert np.allclose(ft["p50 [ft]"] * 0.3048, si["p50 [m]"], rtol=1e-12)
    assert ft["p_overrun"].tolist() == si["p_overrun"].tolist()
    from landrisk.report import render_study

    text = render_study(r, None, "aviation")
    assert "p50 ft" in text and "p50 m" not in text
    row = next(x for x in r.cases if x.name == "none | lda=1900 m, condition_code=3")
    p50 = next(q.value for q in row.percentiles if q.p == 50.0)
    assert f"{round(p50 / 0.3048)}" in text


# ------------------------------------------------------------------------------------- study file errors


@pytest.mark.parametrize(("patch", "words"), [
    (("[grid]", "[grids]"), ["grids", "unknown section"]),
    (('name = "aim"', 'name = "aim"\n"runway.ldaa" = "2 km"'), ["runway.ldaa", "unknown key", "runway.lda"]),
    (('"runway.lda" = ["1600 m", "1900 m"]', '"runway.lda" = "1600 m"'), ["grid.runway.lda", "list"]),
    (('alternative = "aim"', 'alternative = "nope"'),
     ["comparison[1].alternative", "'nope'", "not the name"]),
    (('method = "mc"', 'method = "fast"'), ["study.method", "'fast'", "auto, mc, subset"]),
    (('samples = 1500', 'samples = -5'), ["study.samples", "-5"]),
])
def test_bad_study_files_give_one_line_errors(tmp_path: Path, patch: tuple[str, str],
                                             words: list[str]) -> None:
    p = write(tmp_path, GRID_STUDY.replace(*patch))
    with pytest.raises(ConfigError) as info:
        api.study(p, workers=1)
    msg = str(info.value)
    assert "\n" not in msg and str(p) in msg
    for w in words:
        assert w in msg


def test_case_refused_by_the_scenario_reader_names_study_and_case(tmp_path: Path) -> None:
    text = GRID_STUDY.replace('name = "aim"', 'name = "aim"\n"runway.lda" = "-5 m"').replace(
        '"runway.lda" = ["1600 m", "1900 m"]\n', "")
    p = write(tmp_path, text)
    spec = parse_study_file(p.read_text(), str(p))
    with pytest.raises(ConfigError) as info:
        resolve_case(spec, spec.cases[-1])
    msg = str(info.value)
    assert str(p) in msg and "case 'aim" in msg and "runway.lda" in msg and "-5 m" in msg
    r = CliRunner().invoke(main, ["study", str(p)])
    assert r.exit_code == 2 and "Traceback" not in r.output and "runway.lda" in r.output


def test_mix_must_add_up(tmp_path: Path) -> None:
    p = write(tmp_path, GRID_STUDY + '[exposure]\nlandings_per_year = 10\n[exposure.mix]\n'
              '"none | lda=1600 m, condition_code=5" = 0.5\n')
    with pytest.raises(ConfigError, match=r"add up to 0\.5"):
        parse_study_file(p.read_text(), str(p))


# ------------------------------------------------------------------------------- CLI, JSON and files


SMALL = small_study_text()


@pytest.mark.slow
def test_cli_json_and_files(tmp_path: Path) -> None:
    p = write(tmp_path, SMALL)
    out = tmp_path / "out"
    r = CliRunner().invoke(main, ["study", str(p), "--json", "--workers", "1", "--out", str(out)])
    assert r.exit_code == 0, r.output
    rec = strict_json(r.output)
    assert isinstance(rec, dict)
    for c in rec["cases"]:
        for k in ("name", "overrides", "method", "p_overrun", "p_overrun_ci95", "cov", "percentiles_m"):
            assert k in c
        assert c["chunks"] == 3 and c["percentile_error_m"] == 1.0  # 3000 samples in chunks of 1000
    for k in ("baseline", "alternative", "ratio", "ratio_ci95", "difference", "difference_ci95"):
        assert k in rec["comparisons"][0]
    for k in ("overruns_per_year", "overruns_per_year_ci95", "p_at_least_one_per_year", "mean_years_between"):
        assert k in rec["exposure"]
    assert rec["cases"][1]["overrides"] == {'uncertain."procedure.reaction_time".mode': "1.5 s"}
    recorded = strict_json((out / "study.json").read_text())
    assert isinstance(recorded, dict) and str(recorded["command"]).startswith("landrisk study")
    table = pd.read_parquet(out / "study.parquet")
    csv = pd.read_csv(out / "study.csv", comment="#")
    assert list(table["case"]) == ["base", "quick"] == list(csv["case"])
    assert np.allclose(table["p_overrun"], [c["p_overrun"] for c in rec["cases"]])
    for stem in ("study-cases", "study-comparisons", "study-yearly"):
        assert (out / f"{stem}.png").stat().st_size > 1000
    again = CliRunner().invoke(main, ["study", str(p), "--out", str(out)])
    assert again.exit_code == 2 and "--force" in again.output


def _comparable(r: StudyResult) -> list[object]:
    cases = [(c.name, c.method, c.mc.events, c.p_overrun, c.ci, [q.value for q in c.percentiles])
             for c in r.cases]
    comps = [(c.baseline, c.paired.counts, c.paired.difference_ci) for c in r.comparisons]
    return [cases, comps]


def test_identical_results_for_1_2_and_4_workers(tmp_path: Path) -> None:
    p = write(tmp_path, SMALL)
    results = [_comparable(api.study(p, workers=w)) for w in (1, 2, 4)]
    assert results[0] == results[1] == results[2]


@pytest.mark.slow
def test_identical_results_on_a_dask_local_cluster(tmp_path: Path) -> None:
    p = write(tmp_path, SMALL)
    one = api.study(p, workers=1)
    on_dask = api.study(p, workers=2, use_dask=True)
    assert on_dask.engine == "dask" and _comparable(one) == _comparable(on_dask)


def test_rerun_recomputes_only_what_changed(tmp_path: Path) -> None:
    p = write(tmp_path, SMALL)
    cache = tmp_path / "cache"
    first = api.study(p, workers=1, cache_dir=cache)
    assert first.reused == 0 and first.computed == 3
    p.write_text(SMALL + '\n[[case]]\nname = "slow"\n\'uncertain."procedure.reaction_time".mode\' = "3 s"\n')
    second = api.study(p, workers=1, cache_dir=cache)
    assert second.reused == 3 and second.computed == 1
    assert _comparable(first)[0] == _comparable(second)[0][:2]  # type: ignore[index]


@pytest.mark.slow
def test_a_study_killed_mid_run_resumes(tmp_path: Path) -> None:
    cases = "".join(f'\n[[case]]\nname = "t{k}"\n"procedure.reaction_time" = "{1 + k / 4} s"\n'
                    for k in range(6))
    text = SMALL.split("[[case]]")[0].replace("samples = 3000", "samples = 3000").replace(
        "split = 1000", "") + cases
    p = write(tmp_path, text)
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "landrisk.cli", "study", str(p), "--workers", "1", "--out", str(out),
           "--quiet"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and len(list((out / "cache").glob("*.pkl"))) < 1:
        time.sleep(0.01)
    proc.kill()
    proc.wait()
    finished = len(list((out / "cache").glob("*.pkl")))
    assert 1 <= finished < 6, finished  # killed mid-run
    resumed = api.study(p, workers=1, cache_dir=out / "cache")
    assert resumed.reused == finished and resumed.computed == 6 - finished
    fresh = api.study(p, workers=1)
    assert _comparable(resumed) == _comparable(fresh)


def test_study_help_carries_the_caution() -> None:
    out = " ".join(CliRunner().invoke(main, ["study", "--help"]).output.split())
    assert "not an operational or certified performance source" in out and "--scheduler" in out


@pytest.mark.slow
def test_example_study_runs_with_auto_methods(tmp_path: Path) -> None:
    example = ROOT / "configs" / "studies" / "invented-study.toml"
    r = CliRunner().invoke(main, ["study", str(example), "--json", "--workers", "2", "--out", str(tmp_path)])
    assert r.exit_code == 0, r.output
    rec = strict_json(r.output)
    assert isinstance(rec, dict) and len(rec["cases"]) == 12 and len(rec["comparisons"]) == 6
    methods = {c["method"] for c in rec["cases"]}
    assert methods <= {"mc", "subset"}
    for c in rec["cases"]:  # the rule: Monte Carlo exactly where it saw at least 50 overruns
        assert (c["method"] == "mc") == (c["mc_overruns"] >= 50)
        assert 0 <= c["p_overrun_ci95"][0] <= c["p_overrun"] <= c["p_overrun_ci95"][1]
    assert rec["exposure"]["target_status"] in ("met", "not met",
                                                "undecided: the interval contains the target")

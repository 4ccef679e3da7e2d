"""What the commands write and print: landings that cannot stop, valid JSON, units, plain CSV, Parquet,
result sets that cannot be mixed up, terminals that cannot show every character, comparison lines."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from conftest import DRY_FRICTION, scenario_text
from scipy import stats

from landrisk import CAUTION, api
from landrisk.cli import main
from landrisk.io import parse_study
from landrisk.report import BEYOND, ascii_text, render_assess
from landrisk.uq import mean_interval, percentiles

FT = 0.3048  # m, exact by definition (international foot, 1959)
KT = 1852.0 / 3600.0  # m/s, exact by definition (international nautical mile per hour)
LB = 0.45359237  # kg, exact by definition (international pound, 1959)

DRY = DRY_FRICTION
UNCERTAIN = """
[uncertain."procedure.reaction_time"]
distribution = "uniform"
lower = "1 s"
upper = "4 s"
"""


def run(*args: str):
    return CliRunner().invoke(main, list(args))


def _refuse(name: str) -> None:
    raise ValueError(f"not valid JSON: {name}")


def strict_json(text: str):
    """json.loads that refuses NaN, Infinity and -Infinity (RFC 8259 has no such numbers)."""
    return json.loads(text, parse_constant=_refuse)


def keys_of(obj) -> set[str]:
    if isinstance(obj, dict):
        return set(obj) | set().union(*(keys_of(v) for v in obj.values()))
    if isinstance(obj, list):
        return set().union(*(keys_of(v) for v in obj)) if obj else set()
    return set()


# --- landings that cannot stop ----------------------------------------------------------------------

def test_moments_and_percentiles_with_infinite_values_against_numpy() -> None:
    x = np.concatenate([np.arange(1.0, 901.0), np.full(100, np.inf)])  # 10 % cannot stop
    m = mean_interval(x)
    finite = x[np.isfinite(x)]
    # numpy's mean and ddof=1 standard deviation of the finite values; normal interval of the mean.
    assert (m.used, m.excluded) == (900, 100)
    assert m.mean == pytest.approx(np.mean(finite)) and m.sd == pytest.approx(np.std(finite, ddof=1))
    half = stats.norm.ppf(0.975) * np.std(finite, ddof=1) / np.sqrt(900)
    assert (m.lo, m.hi) == pytest.approx((np.mean(finite) - half, np.mean(finite) + half))
    big = np.where(np.isfinite(x), x, 1e300)
    for p in percentiles(x, [5, 50, 85, 89.9, 95, 99]):
        ref = np.quantile(big, p.p / 100)  # numpy's linear quantile with a huge stand-in for inf
        if ref < 1e299:
            assert not p.infinite and p.value == pytest.approx(ref, rel=1e-12)
        else:
            assert p.infinite and p.value is None and p.hi is None and p.hi_infinite
    one = mean_interval([5.0])
    assert one.mean == 5.0 and one.sd is None and one.lo is None and one.hi is None
    assert mean_interval([np.inf, np.inf]).mean is None


def test_assess_with_landings_that_cannot_stop() -> None:
    # A steep downhill runway: on part of the samples slope and thrust outweigh the braking.
    scenario, uncertain = api.load_study(None, ["runway.slope=\"-20 %\""])
    a = api.assess(scenario, uncertain, samples=3000, seed=2)
    cannot = a.outputs["cannot_stop"]
    assert 0 < cannot.sum() < 3000 and a.cannot_stop == int(cannot.sum())
    assert np.all(a.outputs["margin_m"][cannot] < 0) or np.all(np.isinf(a.outputs["total_m"][cannot]))
    over = (a.outputs["margin_m"] < 0) | cannot
    assert a.p_overrun.events == int(over.sum())  # every landing that cannot stop is an overrun
    finite = a.outputs["total_m"][~cannot]
    mom = a.moments["total_m"]
    assert mom.mean == pytest.approx(finite.mean()) and mom.sd == pytest.approx(finite.std(ddof=1))
    assert mom.excluded == cannot.sum()
    share = cannot.mean()
    for p in a.percentiles["total_m"]:
        if p.supported and p.p / 100 > 1 - share + 1e-3:
            assert p.infinite and p.value is None
    record = strict_json(api.dumps(api.assessment_record(a)))
    assert record["landings_cannot_stop"] == int(cannot.sum())
    assert record["percentiles_beyond_any_runway"] and record["mean_m"] == pytest.approx(mom.mean)
    assert "non_finite_values" not in record  # every infinite value is handled by name, not by the net
    text = render_assess(a)
    assert f"{int(cannot.sum()):,} of 3,000 landings cannot stop" in text and BEYOND in text
    for word in ("inf", "nan", "NaN"):
        assert word not in text.replace("information", "")


def test_cli_assess_cannot_stop_prints_no_inf_or_nan() -> None:
    r = run("assess", "--samples", "2000", "--set", "runway.slope=\"-20 %\"", "--quiet")
    assert r.exit_code == 0, r.output
    assert "cannot stop" in r.stdout and BEYOND in r.stdout
    assert " inf" not in r.stdout and "nan" not in r.stdout.lower()
    data = strict_json(run("assess", "--samples", "2000", "--set", "runway.slope=\"-20 %\"", "--json").stdout)
    assert data["sd_m"] > 0 and data["landings_cannot_stop"] > 0


def test_one_sample_gives_no_standard_deviation() -> None:
    r = run("assess", "--samples", "1", "--quiet")
    assert r.exit_code == 0, r.output
    assert "standard deviation" in r.stdout and "cannot be estimated" in r.stdout
    data = strict_json(run("assess", "--samples", "1", "--json").stdout)
    assert data["sd_m"] is None and data["mean_ci95_m"] is None and data["mean_m"] > 0
    assert data["p_overrun"] is None and data["p_overrun_upper_bound"] == pytest.approx(0.95)


# --- JSON -------------------------------------------------------------------------------------------

@pytest.mark.slow
def test_every_json_is_valid_and_speeds_read_mps(tmp_path: Path) -> None:
    texts = {"solve": run("solve", "--json").stdout,
             "assess": run("assess", "--samples", "2000", "--json", "--out", str(tmp_path / "a")).stdout}
    texts["summary.json"] = (tmp_path / "a" / "summary.json").read_text(encoding="utf-8")
    for name, text in texts.items():
        data = strict_json(text)
        keys = keys_of(data)
        assert not [k for k in keys if k.endswith("_ms")], name  # m/s is _mps, never _ms
    assert "runway_end_ground_speed_mps" in strict_json(texts["solve"])
    assert "overrun_ground_speed_mps" in strict_json(texts["assess"])


def test_dumps_replaces_leftover_non_finite_numbers() -> None:
    text = api.dumps({"a": float("inf"), "b": [1.0, float("nan")], "c": {"d": np.float64(-np.inf)}})
    data = strict_json(text)
    assert data["a"] is None and data["b"] == [1.0, None] and data["c"]["d"] is None
    assert data["non_finite_values"] == ["a", "b[1]", "c.d"]


# --- units ------------------------------------------------------------------------------------------

def test_solve_in_aviation_and_si_units() -> None:
    landing = api.solve(api.load())
    av = run("solve", "--units", "aviation").stdout
    si = run("solve", "--units", "si").stdout
    assert f"{landing.total_m / FT:10.1f} ft" in av and " m " not in av.split("Speeds")[0]
    assert f"{landing.touchdown_speed / KT:10.1f} kt" in av
    assert f"{landing.total_m:10.1f} m" in si and " ft" not in si and " kt" not in si
    assert f"{landing.touchdown_speed:10.1f} m/s" in si
    assert strict_json(run("solve", "--json", "--units", "aviation").stdout)["total_m"] == pytest.approx(
        landing.total_m)  # JSON stays SI


def test_assess_units_in_text_csv_and_json(tmp_path: Path) -> None:
    scenario, uncertain = api.load_study()
    si_dir, av_dir = tmp_path / "si", tmp_path / "av"
    opts = {"save_samples": True, "figures": False, "samples": 2000, "seed": 4}
    a, _ = api.assess_into(scenario, uncertain, si_dir, units="si", **opts)
    api.assess_into(scenario, uncertain, av_dir, units="aviation", **opts)
    assert "interval [ft]" in render_assess(a, units="aviation")
    assert "interval [m]" in render_assess(a, units="si")
    s_si, s_av = pd.read_csv(si_dir / "samples.csv"), pd.read_csv(av_dir / "samples.csv")
    np.testing.assert_allclose(s_av["total [ft]"], s_si["total [m]"] / FT, rtol=1e-12)
    np.testing.assert_allclose(s_av["runway_end_ground_speed [kt]"],
                               s_si["runway_end_ground_speed [m/s]"] / KT, rtol=1e-12)
    np.testing.assert_allclose(s_av["aircraft.mass [lb]"], s_si["aircraft.mass [kg]"] / LB, rtol=1e-12)
    np.testing.assert_allclose(s_av["conditions.headwind [kt]"], s_si["conditions.headwind [m/s]"] / KT,
                               rtol=1e-12)
    p_si, p_av = pd.read_csv(si_dir / "percentiles.csv"), pd.read_csv(av_dir / "percentiles.csv")
    np.testing.assert_allclose(p_av["value [ft]"], p_si["value [m]"] / FT, rtol=1e-12)
    assert p_si["supported"].dtype == bool and p_si["percentile"].dtype == float
    # the JSON summaries agree: SI whatever the display
    j_si = strict_json((si_dir / "summary.json").read_text(encoding="utf-8"))
    j_av = strict_json((av_dir / "summary.json").read_text(encoding="utf-8"))
    assert j_si["percentiles_m"] == j_av["percentiles_m"]
    r = run("assess", "--samples", "500", "--units", "aviation", "--quiet")
    assert r.exit_code == 0 and "interval [ft]" in r.stdout


def test_figure_axes_follow_the_units() -> None:
    from landrisk.plotting import exceedance_figure, histogram_figure

    scenario, uncertain = api.load_study()
    a = api.assess(scenario, uncertain, samples=2000, seed=1)
    fig = exceedance_figure(a, units="aviation")
    assert fig.axes[0].get_xlabel().endswith("[ft]")
    lda_line = next(ln for ln in fig.axes[0].lines if ln.get_label().startswith("LDA"))
    assert lda_line.get_xdata()[0] == pytest.approx(a.lda_m / FT)
    assert histogram_figure(a, units="si").axes[0].get_xlabel().endswith("[m]")


# --- files ------------------------------------------------------------------------------------------

def test_streamed_samples_equal_the_kept_ones_csv_and_parquet(tmp_path: Path) -> None:
    scenario, uncertain = api.load_study()
    kept = api.assess(scenario, uncertain, samples=5000, seed=3, chunk=1024, keep_samples=True)
    table = api.samples_table(kept)
    assert table.attrs["caution"] == CAUTION
    for fmt in ("csv", "parquet"):
        a, _ = api.assess_into(scenario, uncertain, tmp_path / fmt, save_samples=True,
                                   samples_format=fmt, figures=False, samples=5000, seed=3, chunk=1024)
        assert a.inputs is None  # not kept in memory: written as made
        got = (pd.read_csv(tmp_path / fmt / "samples.csv") if fmt == "csv"
               else pd.read_parquet(tmp_path / fmt / "samples.parquet"))
        assert list(got.columns) == list(table.columns) and len(got) == 5000
        for col in table.columns:
            if table[col].dtype == bool:
                assert (got[col] == table[col]).all(), col
            else:
                np.testing.assert_allclose(got[col], table[col], rtol=1e-15 if fmt == "parquet" else 1e-12)
        summary = strict_json((tmp_path / fmt / "summary.json").read_text(encoding="utf-8"))
        assert f"samples.{fmt}" in summary["files"].values()
        assert summary["percentiles_m"] == api.assessment_record(kept)["percentiles_m"]


def test_force_rerun_replaces_the_whole_set_and_keeps_other_files(tmp_path: Path) -> None:
    out = tmp_path / "run"
    scenario, uncertain = api.load_study()
    api.assess_into(scenario, uncertain, out, save_samples=True, figures=False, samples=2000)
    (out / "my-notes.txt").write_text("mine", encoding="utf-8")
    first = strict_json((out / "summary.json").read_text(encoding="utf-8"))["run_id"]
    api.assess_into(scenario, uncertain, out, force=True, figures=False, samples=2000, seed=2)
    refused = run("assess", "--samples", "200", "--out", str(out), "--quiet")
    assert refused.exit_code == 2 and "--force" in refused.stderr
    summary = strict_json((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["run_id"] != first
    names = {p.name for p in out.iterdir()}
    assert "samples.csv" not in names  # the old set's samples do not stay beside the new summary
    assert names == set(summary["files"].values()) | {"my-notes.txt"}
    assert (out / "my-notes.txt").read_text(encoding="utf-8") == "mine"
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no staging folder left


@pytest.mark.slow
def test_sigterm_mid_write_leaves_the_old_set_and_no_temporary_files(tmp_path: Path) -> None:
    out = tmp_path / "run"
    scenario, uncertain = api.load_study()
    api.assess_into(scenario, uncertain, out, figures=False, samples=2000)
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    cmd = [sys.executable, "-m", "landrisk.cli", "assess", "--samples", "3000000", "--out", str(out),
           "--force", "--save-samples", "--quiet"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.time() + 120
    staged: list[Path] = []
    while time.time() < deadline and proc.poll() is None:  # wait until samples are being written
        staged = [p for p in tmp_path.glob(".run.*.tmp/samples.csv") if p.stat().st_size > 0]
        if staged:
            break
        time.sleep(0.05)
    assert staged, "the run never started writing its samples"
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 128 + signal.SIGTERM and b"Traceback" not in err
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before  # the complete old set, untouched
    assert [p.name for p in tmp_path.iterdir()] == ["run"]  # the staging folder is gone


def test_a_terminal_that_cannot_show_every_character(tmp_path: Path) -> None:
    path = tmp_path / "s.toml"
    path.write_text('[scenario]\nname = "ünïcode — test"\ndescription = "μ ≥ 0.3 — by design"\n'
                    + scenario_text(DRY), encoding="utf-8")
    env = {**os.environ, "PYTHONIOENCODING": "latin-1"}
    res = subprocess.run([sys.executable, "-m", "landrisk.cli", "solve", str(path)], env=env,
                         capture_output=True, timeout=120)
    assert res.returncode == 0, res.stderr
    text = res.stdout.decode("ascii")  # the fallback is plain ASCII
    assert "mu >= 0.3 - by design" in text and "unicode - test" in text
    assert ascii_text("15 °C, μ ≈ 0.3") == "15 degC, mu ~ 0.3"


# --- comparison lines -------------------------------------------------------------------------------

@pytest.mark.parametrize("friction, why", [("rolling_mu = 0.03\nbraking_mu = 0.2", "braking_mu 0.2"),
                                           ("condition_code = 3", "condition_code 3")])
def test_regulatory_factors_multiply_a_dry_runway_distance(friction: str, why: str) -> None:
    scenario, uncertain = parse_study(scenario_text(friction) + UNCERTAIN, "wet.toml")
    a = api.assess(scenario, uncertain, samples=2000, seed=1)
    dry = api.solve(parse_study(scenario_text("condition_code = 6"), "dry.toml")[0]).total_m
    wet = api.solve(scenario).total_m
    by = {c.name: c for c in a.comparisons}
    # 14 CFR 121.195(b): the dry requirement is the dry-runway distance / 0.6; (d): 115 % of it.
    assert by["dry-runway factor 1/0.6"].distance_m == pytest.approx(dry / 0.6, rel=1e-12)
    assert by["wet-runway factor 1.15/0.6"].distance_m == pytest.approx(1.15 * dry / 0.6, rel=1e-12)
    # FAA SAFO 06012: 15 % over the actual (here wet) landing distance.
    assert by["time-of-arrival margin x1.15"].distance_m == pytest.approx(1.15 * wet, rel=1e-12)
    assert by["deterministic, nominal inputs"].distance_m == pytest.approx(wet, rel=1e-12)
    for c in a.comparisons:
        assert c.meets == (1200.0 >= c.distance_m)
    text = render_assess(a)
    assert why in a.dry_basis_note and "dry runway" in text
    assert ("LDA does NOT meet it" in text) == any(not c.meets for c in a.comparisons)


def test_dry_runway_factors_use_the_deterministic_distance() -> None:
    scenario, uncertain = parse_study(scenario_text(DRY) + UNCERTAIN, "dry.toml")
    a = api.assess(scenario, uncertain, samples=2000, seed=1)
    total = api.solve(scenario).total_m
    assert a.dry_basis_note == "" and a.nominal_note == ""
    assert [c.distance_m for c in a.comparisons] == pytest.approx(
        [total, total / 0.6, 1.15 * total / 0.6, 1.15 * total], rel=1e-12)


# --- results that show themselves -------------------------------------------------------------------

def test_results_objects_show_a_few_lines() -> None:
    scenario, uncertain = api.load_study()
    a = api.assess(scenario, uncertain, samples=2000, seed=1)
    from landrisk.studies.rank import RankSettings, rank

    r = rank(scenario, uncertain.problem(), RankSettings(calls=300, mc_check=0, surrogate_samples=20_000,
                                                         tail_checks=50, risk_samples=1024))
    rare = api.rare(scenario, uncertain, method="form", risk_curve=False)
    for obj, kind in ((a, "Assessment"), (r, "Ranking"), (rare, "RareAssessment")):
        text = repr(obj)
        assert text.startswith(f"<{kind}: scenario 'demo'") and len(text) < 600 and text.count("\n") <= 5
        assert obj._repr_html_().startswith(f"<div><strong>{kind}</strong>")
    assert "P(overrun)" in repr(a) and "2,000 samples" in repr(a)
    assert api.percentile_table(a).attrs["caution"] == CAUTION
    assert api.rank_table(r).attrs["caution"] == CAUTION


def test_init_file_carries_the_caution(tmp_path: Path) -> None:
    path = tmp_path / "start.toml"
    assert run("init", str(path)).exit_code == 0
    assert CAUTION in path.read_text(encoding="utf-8")


@pytest.mark.slow
def test_no_landing_stops(tmp_path: Path) -> None:
    scenario, uncertain = api.load_study(None, ["runway.slope=\"-20 %\"", 'aircraft.thrust.idle.t0="150 kN"',
                                                "procedure.use_reverse=false"])
    with pytest.warns(UserWarning, match="use_reverse is fixed"):
        a, _ = api.assess_into(scenario, uncertain, tmp_path / "out", samples=100, seed=1)
    assert a.cannot_stop == 100 and a.p_overrun.events == 100 and a.comparisons == []
    data = strict_json((tmp_path / "out" / "summary.json").read_text(encoding="utf-8"))
    assert data["mean_m"] is None and data["sd_m"] is None and data["nominal_total_m"] is None
    assert data["nominal_cannot_stop"] is True and "non_finite_values" not in data
    text = render_assess(a)
    assert "cannot be estimated: no landing stops" in text and "nan" not in text.lower()
    assert pd.read_csv(tmp_path / "out" / "percentiles.csv")["beyond_any_runway"].dtype == bool

"""Calibration against reference distances: recovery, covariance, a closed form, the formats, the CLI."""

from __future__ import annotations

import json
import math
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.optimize import curve_fit

from landrisk import api
from landrisk.cli import main
from landrisk.errors import ConfigError, LandriskError
from landrisk.io import calibration as io_cal
from landrisk.io import parse_scenario, parse_study
from landrisk.studies import calibrate as st_cal
from landrisk.studies.calibrate import FitParameter, calibrate, reference_model

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "configs"))
import make_reference_invented as invented  # noqa: E402

DEMO = ROOT / "configs" / "demo.toml"
TABLE = ROOT / "configs" / "demo-reference-distances-invented.csv"


def _demo_fit_parameters(scenario) -> list[FitParameter]:
    specs = io_cal.calibration_parameters(scenario.text, scenario.source, scenario)
    return [FitParameter(s.name, s.lower, s.upper, s.start, s.unit) for s in specs]


def test_pseudo_keys_agree_between_reader_and_fit() -> None:
    assert set(io_cal.SCALE_KEYS) == set(st_cal.SCALE_KEYS)
    assert io_cal.CODE_MU_PREFIX == st_cal.CODE_MU_PREFIX


def test_recovers_the_parameters_of_the_invented_table() -> None:
    # The table is the model at invented parameters plus Gaussian noise of known sd (its tolerance
    # column). A correct fit lands within its standard errors. Tolerance: 4.5 standard errors; for an
    # asymptotically normal estimate P(|z| > 4.5) = 6.8e-6 per parameter, 4.1e-5 for the six
    # (Seber & Wild, Nonlinear Regression, 1989, §2.1: normality of the least-squares estimate).
    scenario = api.load(DEMO)
    c = api.calibrate(scenario, TABLE)
    assert c.sigma_from == "tolerance"
    for p in c.parameters:
        true = invented.TRUE_PARAMETERS[p.name]
        assert p.standard_error is not None and p.standard_error > 0
        assert abs(p.value - true) < 4.5 * p.standard_error, (p.name, p.value, true, p.standard_error)
    # the residuals have the sd of the noise: chi-square with 54 degrees of freedom, s^2 in
    # [0.45, 1.75] with probability above 1 - 1e-4 (scipy.stats.chi2(54).ppf(5e-5)/54 = 0.46,
    # .ppf(1 - 5e-5)/54 = 1.74)
    assert 0.45 < c.residual_sd**2 < 1.75
    assert float(np.sqrt(np.mean(c.residual_m**2))) < float(np.sqrt(np.mean((c.start_model_m
                                                                            - c.reference_m) ** 2)))


@pytest.mark.slow
def test_standard_errors_cover_the_true_parameters_over_noisy_tables() -> None:
    # 50 tables from the invented parameters with fresh noise; each parameter must lie within 2.576
    # standard errors (a 99 % interval) in at least 90 % of the fits. With correct standard errors the
    # misses are Binomial(50, 0.01): P(6 or more) = 1.4e-5 per parameter, 8.6e-5 for the six
    # (scipy.stats.binom(50, 0.01).sf(5) = 1.44e-5).
    scenario = api.load(DEMO)
    params = _demo_fit_parameters(scenario)
    cond = invented.conditions()
    clean = invented.distances()
    tol = np.full(invented.ROWS, invented.TOLERANCE_FT * invented.FT)
    true = np.array([invented.TRUE_PARAMETERS[p.name] for p in params])
    rng = np.random.default_rng(7)
    hits = np.zeros(len(params))
    tables = 50
    for _ in range(tables):
        c = calibrate(scenario, params, cond, clean + rng.normal(0.0, tol), tol)
        value = np.array([p.value for p in c.parameters])
        se = np.array([p.standard_error for p in c.parameters], dtype=float)
        hits += np.abs(value - true) < 2.576 * se
    assert np.all(hits / tables >= 0.9), hits


def _curve_fit_case(with_tolerance: bool):
    scenario = api.load(DEMO)
    params = [p for p in _demo_fit_parameters(scenario)
              if p.name in ("aircraft.cd0", "aircraft.thrust.reverse.scale", "runway.braking_mu.code_6",
                            "runway.braking_mu.code_5", "runway.braking_mu.code_3")]
    cond = invented.conditions()
    n = invented.ROWS
    true = {k: v for k, v in invented.TRUE_PARAMETERS.items() if k in [p.name for p in params]}
    model = reference_model(scenario, list(true), cond, n)
    rng = np.random.default_rng(11)
    tol = np.full(n, 9.0)
    ref = model(np.array([list(true.values())]))[0] + rng.normal(0.0, tol)
    return scenario, params, cond, ref, (tol if with_tolerance else None), model


@pytest.mark.parametrize("with_tolerance", [True, False])
def test_covariance_matches_scipy_curve_fit(with_tolerance: bool) -> None:
    # scipy.optimize.curve_fit (a general-purpose reference library) on the same model and data:
    # absolute_sigma=True with the tolerances, and absolute_sigma=False without them.
    scenario, params, cond, ref, tol, model = _curve_fit_case(with_tolerance)
    c = calibrate(scenario, params, cond, ref, tol)
    x = np.array([p.value for p in c.parameters])

    def f(_rows, *theta):
        return model(np.array([theta]))[0]

    popt, pcov = curve_fit(f, np.arange(ref.size), ref, p0=x, sigma=tol, absolute_sigma=tol is not None,
                           bounds=([p.lower for p in params], [p.upper for p in params]), method="trf",
                           xtol=1e-14, ftol=1e-14, gtol=1e-14, diff_step=1e-6)
    np.testing.assert_allclose(popt, x, rtol=1e-5)
    # compare in correlation-scaled form: covariance entries relative to the standard errors
    scale = np.sqrt(np.outer(np.diag(pcov), np.diag(pcov)))
    np.testing.assert_allclose(c.covariance / scale, pcov / scale, rtol=0, atol=1e-3)
    np.testing.assert_allclose(np.diag(c.covariance), np.diag(pcov), rtol=2e-3)


RAYMER_SCENARIO = """
[scenario]
name = "closed form"
[aircraft]
mass = "60000 kg"
wing_area = "120 m^2"
wing_span = "34 m"
wing_height = "3 m"
cl_max = 2.6
cd0 = 0.09
cl_ground = 0.0
[aircraft.thrust.idle]
t0 = "6 kN"
[conditions]
pressure_altitude = "0 m"
isa_deviation = "0 K"
headwind = "0 kt"
[runway]
lda = "3000 m"
braking_mu = 0.3
[procedure]
reaction_time = "0 s"
touchdown_distance = "400 m"
touchdown_speed_ratio = 1.2
use_reverse = false

[calibration."runway.braking_mu"]
lower = 0.05
upper = 0.8
"""


def test_effective_mu_from_raymer_closed_form(tmp_path: Path) -> None:
    # Raymer, Aircraft Design: A Conceptual Approach, 6th ed., AIAA 2018, eqs. 17.100-17.104: with
    # constant thrust and no wind the ground roll from V_i to V_f is
    #   S = 1 / (2 g K_A) ln((K_T + K_A V_f^2) / (K_T + K_A V_i^2)),
    #   K_T = T/W - mu,  K_A = rho / (2 W/S) (mu C_L - C_D0 - K C_L^2);
    # here C_L = 0 on the ground, V_f = 0, V_i the touchdown speed 1.2 V_S, V_S = sqrt(2 W / (rho S
    # C_Lmax)), rho = 1.225 kg/m^3 (ISA sea level, ICAO Doc 7488), no reaction time, the touchdown point
    # given. The reference distances are the touchdown point plus S at mu = 0.37; the fit must return it.
    g, rho, area, clmax, cd0, mu_true = 9.80665, 1.225, 120.0, 2.6, 0.09, 0.37
    mass = np.linspace(45_000.0, 68_000.0, 8)
    thrust = np.array([2_000.0, 6_000.0, 10_000.0, 4_000.0] * 2)
    w = mass * g
    v_i = 1.2 * np.sqrt(2 * w / (rho * area * clmax))
    k_t = thrust / w - mu_true
    k_a = rho / (2 * w / area) * (-cd0)
    s = 1 / (2 * g * k_a) * np.log(k_t / (k_t + k_a * v_i**2))
    ref_ft = (400.0 + s) / 0.3048
    lines = ["aircraft.mass [kg],aircraft.thrust.idle.t0 [N],reference_distance [ft]"]
    lines += [f"{m:.17g},{t:.17g},{r:.17g}" for m, t, r in zip(mass, thrust, ref_ft, strict=True)]
    (tmp_path / "ref.csv").write_text("\n".join(lines) + "\n")
    (tmp_path / "s.toml").write_text(RAYMER_SCENARIO)
    c = api.calibrate(api.load(tmp_path / "s.toml"), tmp_path / "ref.csv")
    assert c.parameters[0].value == pytest.approx(mu_true, abs=1e-6)
    assert np.max(np.abs(c.residual_m)) < 1e-3


def test_flat_direction_is_reported(tmp_path: Path) -> None:
    # No row uses the reversers: the data cannot fix the reverse-thrust scale.
    scenario = api.load(DEMO)
    cond = {k: v for k, v in invented.conditions().items() if k != "procedure.use_reverse"}
    cond["procedure.use_reverse"] = np.zeros(invented.ROWS, dtype=bool)
    params = [FitParameter("runway.braking_mu.code_6", 0.1, 0.8, 0.4),
              FitParameter("aircraft.thrust.reverse.scale", 0.3, 2.0, 1.0)]
    ref = reference_model(scenario, [p.name for p in params], cond, invented.ROWS)(np.array([[0.36, 1.0]]))[0]
    c = calibrate(scenario, params, cond, ref + 5.0, np.full(invented.ROWS, 10.0))
    assert any("flat direction" in w and "aircraft.thrust.reverse.scale" in w for w in c.warnings)
    assert c.parameters[1].standard_error is None
    assert c.parameters[0].standard_error is not None
    record = api.calibration_record(c)
    assert record["parameters"][1]["standard_error"] is None
    json.dumps(record, allow_nan=False)


def test_confounded_parameters_are_reported() -> None:
    # Idle thrust t0 and the idle-thrust scale act almost alike (t1 is small): their estimates are
    # strongly correlated.
    scenario = api.load(DEMO)
    cond = invented.conditions()
    params = [FitParameter("aircraft.thrust.idle.t0", 0.0, 20_000.0, 7_000.0),
              FitParameter("aircraft.thrust.idle.scale", 0.3, 2.0, 1.0),
              FitParameter("runway.braking_mu.code_6", 0.1, 0.8, 0.4)]
    model = reference_model(scenario, [p.name for p in params], cond, invented.ROWS)
    rng = np.random.default_rng(3)
    ref = model(np.array([[8_000.0, 1.1, 0.36]]))[0] + rng.normal(0.0, 5.0, invented.ROWS)
    c = calibrate(scenario, params, cond, ref, np.full(invented.ROWS, 5.0))
    assert abs(c.correlation[0, 1]) > 0.95
    assert any("confounded" in w for w in c.warnings) or any("flat direction" in w for w in c.warnings)


@pytest.mark.slow
def test_cli_calibrate_writes_the_folder_with_figures(tmp_path: Path) -> None:
    out = tmp_path / "cal"
    r = CliRunner().invoke(main, ["calibrate", str(DEMO), str(TABLE), "--out", str(out)])
    assert r.exit_code == 0, r.output
    assert "std. error" in r.output and "calibrated.toml" in r.output
    names = {p.name for p in out.iterdir()}
    assert {"calibration.json", "residuals.csv", "calibrated.toml", "calibration-residuals.png",
            "calibration-residuals.svg"} <= names


def test_cli_calibrate_json_and_calibrated_scenario(tmp_path: Path) -> None:
    r = CliRunner().invoke(main, ["calibrate", str(DEMO), str(TABLE), "--json"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    for key in ("parameters", "correlation", "residuals", "warnings"):
        assert key in data
    assert {"name", "value", "standard_error"} <= set(data["parameters"][0])
    assert len(data["residuals"]) == invented.ROWS
    c = api.calibrate(api.load(DEMO), TABLE)
    assert [p.value for p in c.parameters] == [p["value"] for p in data["parameters"]]
    out = tmp_path / "cal"
    api.write_calibration(c, out, uncertain=True, figures=False)
    text = (out / "calibrated.toml").read_text()
    scenario, uncertain = parse_study(text, "calibrated")
    fitted = {p["name"]: p["value"] for p in data["parameters"]}
    assert scenario.values["aircraft.cd0"] == pytest.approx(fitted["aircraft.cd0"], rel=1e-7)
    raw = tomllib.loads(text)
    demo_rev = api.load(DEMO).values["aircraft.thrust.reverse.t0"]
    assert scenario.values["aircraft.thrust.reverse.t0"] == pytest.approx(
        demo_rev * fitted["aircraft.thrust.reverse.scale"], rel=1e-7)
    assert text.count("# source: landrisk calibrate") == 3  # cd0, cl_ground, the reverse thrust
    # the fitted keys as uncertain inputs; the Spearman value written gives back the estimated
    # normal-space correlation through rho_N = 2 sin(pi rho_S / 6) (Kruskal 1958)
    assert "aircraft.cd0" in uncertain.keys and "aircraft.cl_ground" in uncertain.keys
    pair = next(c for c in raw["correlation"] if set(c["between"]) == {"aircraft.cd0", "aircraft.cl_ground"})
    names = data["correlation"]["names"]
    rho_n = data["correlation"]["matrix"][names.index("aircraft.cd0")][names.index("aircraft.cl_ground")]
    assert 2 * math.sin(math.pi * pair["spearman"] / 6) == pytest.approx(rho_n, abs=1e-5)


def _write(tmp_path: Path, body: str) -> Path:
    p = tmp_path / "ref.csv"
    p.write_text(body)
    return p


@pytest.mark.parametrize(("body", "expected"), [
    ("aircraft.mass [lb],reference_distance [ft]\n120000,abc\n", ["row 2", "reference_distance", "'abc'"]),
    ("aircraft.mass,reference_distance [ft]\n120000,3000\n", ["aircraft.mass", "unit in brackets"]),
    ("aircraft.mass [lb]\n120000\n", ["no reference_distance column"]),
    ("# comment\naircraft.mass [lb],reference_distance [ft]\n120000,3000\n1e9,3000\n",
     ["row 4", "aircraft.mass", "outside the allowed range"]),
    ("aircraft.mass [parsec],reference_distance [ft]\n120000,3000\n", ["row 2", "aircraft.mass"]),
    ("runway.condition_code,reference_distance [ft]\n7,3000\n", ["row 2", "runway.condition_code", "'7'"]),
    ("nonsense.key [m],reference_distance [ft]\n1,3000\n", ["nonsense.key", "not a numeric scenario key"]),
])
def test_reference_errors_name_file_row_column_value(tmp_path: Path, body: str, expected: list[str]) -> None:
    path = _write(tmp_path, body)
    with pytest.raises(ConfigError) as info:
        io_cal.read_reference(path)
    message = str(info.value)
    assert "\n" not in message and str(path) in message
    for text in expected:
        assert text in message, message
    r = CliRunner().invoke(main, ["calibrate", str(DEMO), str(path)])
    assert r.exit_code == 2 and "Traceback" not in r.output and r.output.startswith("error:")


@pytest.mark.parametrize(("table", "expected"), [
    ('[calibration."conditions.headwind"]\nlower = 0\nupper = 1\n', "cannot be calibrated"),
    ('[calibration."aircraft.cd0"]\nlower = 0.2\nupper = 0.1\n', "needs lower < upper"),
    ('[calibration."aircraft.cd0"]\nlower = 0.1\nupper = 0.2\n', "starting value 0.085"),
    ('[calibration."aircraft.cd0"]\nlower = 0.0\nupper = 0.9\n', "allowed range"),
    ('[calibration."aircraft.cd0"]\nlower = 0.01\nupper = 0.2\nguess = 1\n', "unknown key"),
])
def test_calibration_table_errors(table: str, expected: str) -> None:
    base = DEMO.read_text().split("[calibration.", 1)[0]
    text = base + table
    scenario = parse_scenario(text, "s.toml")
    with pytest.raises(ConfigError, match=expected) as info:
        io_cal.calibration_parameters(text, "s.toml", scenario)
    assert "s.toml" in str(info.value)


def test_reference_units_are_converted(tmp_path: Path) -> None:
    path = _write(tmp_path, "aircraft.mass [lb],conditions.headwind [kt],conditions.temperature [degC],"
                  "reference_distance [ft],tolerance [ft]\n100000,10,15,3000,20\n")
    t = io_cal.read_reference(path)
    # exact conversion factors: 1 lb = 0.45359237 kg, 1 kt = 1852/3600 m/s, 1 ft = 0.3048 m
    assert t.columns["aircraft.mass"][0] == pytest.approx(45_359.237)
    assert t.columns["conditions.headwind"][0] == pytest.approx(10 * 1852 / 3600)
    assert t.columns["conditions.temperature"][0] == pytest.approx(288.15)
    assert t.reference_m[0] == pytest.approx(914.4) and t.tolerance_m is not None
    assert t.tolerance_m[0] == pytest.approx(6.096)


def test_too_few_rows_is_an_error(tmp_path: Path) -> None:
    path = _write(tmp_path, "aircraft.mass [kg],reference_distance [m]\n60000,1000\n")
    with pytest.raises(LandriskError, match="cannot fix"):
        api.calibrate(api.load(DEMO), path)

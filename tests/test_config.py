"""Reading scenario files: units, defaults, overrides and the rules between keys."""

from pathlib import Path

import numpy as np
import pytest
from ambiance import Atmosphere

from landrisk.errors import ConfigError, LandriskWarning
from landrisk.io import demo_text, load_scenario, parse_scenario
from landrisk.model import solve_one
from landrisk.physics import friction_from_condition_code

ROOT = Path(__file__).resolve().parents[1]
CONFIGS = sorted((ROOT / "configs").glob("*.toml"))

MINIMAL = """
[aircraft]
mass = "20000 kg"
wing_area = "60 m^2"
wing_span = "25 m"
wing_height = "2 m"
cl_max = 2.4
cd0 = 0.06
cl_ground = 0.2
[runway]
lda = "1500 m"
braking_mu = 0.3
"""


def scenario(extra: str = "", overrides=()):
    return parse_scenario(MINIMAL + extra, "test.toml", overrides)


def test_demo_is_embedded_and_identical_to_configs_copy() -> None:
    assert (ROOT / "configs" / "demo.toml").read_text(encoding="utf-8") == demo_text()
    s = load_scenario()
    assert s.source == "<demo>"
    assert "invented" in s.values["scenario.description"].lower()


@pytest.mark.parametrize("path", CONFIGS, ids=lambda p: p.name)
def test_every_example_scenario_loads_and_solves(path: Path) -> None:
    text = path.read_text(encoding="utf-8").lower()
    assert "invented" in text  # example data is labelled as invented
    res = solve_one(load_scenario(path).case())
    assert 0 < res.total_m[0] < 5_000
    from landrisk import api

    scenario, uncertain = api.load_study(path)
    assert uncertain.inputs  # every example has uncertain inputs for `assess`
    a = api.assess(scenario, uncertain, samples=2000, seed=1)
    assert np.all(np.isfinite(a.outputs["total_m"]))


def test_defaults_of_a_minimal_file() -> None:
    v = scenario().values
    assert v["procedure.screen_height"] == pytest.approx(15.24)  # 50 ft, 14 CFR 25.125
    assert v["procedure.approach_angle"] == 3.0
    assert v["conditions.headwind"] == 0.0
    assert v["runway.rolling_mu"] is None  # default 0.04 applied in the case
    assert float(scenario().case().rolling_mu) == 0.04


# Exact definitions: 1 kt = 1852/3600 m/s, 1 ft = 0.3048 m, 1 lb = 0.45359237 kg, 0 degC = 273.15 K,
# 1 hPa = 100 Pa; 1 inHg = 3 386.389 Pa, so 29.92 inHg -> 101 320.7 Pa (NIST Special Publication 811,
# Guide for the Use of the International System of Units, 2008, Appendix B.8).
@pytest.mark.parametrize(
    ("key", "text", "expected"),
    [
        ("aircraft.mass", '"141000 lb"', 141_000 * 0.45359237),
        ("conditions.headwind", '"35 kt"', 35 * 1852 / 3600),
        ("runway.lda", '"7200 ft"', 7200 * 0.3048),
        ("conditions.temperature", '"15 degC"', 288.15),
        ("conditions.temperature", '"59 degF"', 288.15),
        ("runway.slope", '"2 %"', 2.0),
        ("runway.slope", '"-1.5 %"', -1.5),
        ("runway.slope", '"-1.5 percent"', -1.5),
        ("procedure.approach_angle", '"3.5 deg"', 3.5),
        ("procedure.approach_angle", '"0.06 rad"', np.degrees(0.06)),
        ("procedure.reaction_time", '"1500 ms"', 1.5),
        ("aircraft.wing_area", '"1000 ft^2"', 1000 * 0.3048**2),
        ("conditions.isa_deviation", '"10 delta_degC"', 10.0),
    ],
)
def test_units_are_converted(key: str, text: str, expected: float) -> None:
    s = scenario(overrides=[f"{key}={text}"])
    assert s.values[key] == pytest.approx(expected, rel=1e-12)


def test_units_module_against_exact_definitions() -> None:
    # NIST SP 811 (2008), Appendix B.8: "135 kt" -> 69.45 m/s (1 kt = 1852/3600 m/s exactly), "29.92 inHg" ->
    # 101 320.7 Pa, "141000 lb" -> 63 956.5 kg (1 lb = 0.45359237 kg exactly).
    from landrisk.units import convert, to_unit

    assert to_unit("135 kt", "m/s") == pytest.approx(135 * 1852 / 3600, rel=1e-15)
    assert to_unit("29.92 inHg", "Pa") == pytest.approx(101_320.7, abs=0.05)
    assert to_unit("141000 lb", "kg") == pytest.approx(63_956.5, abs=0.05)
    assert convert(1.0, "m", "ft") == pytest.approx(1 / 0.3048, rel=1e-15)


def test_station_pressure_gives_its_pressure_altitude() -> None:
    # 1013.25 hPa is the ISA sea-level pressure; 29.92 inHg = 101 320.7 Pa lies about 0.36 m above it.
    assert scenario(overrides=['conditions.pressure_altitude="1013.25 hPa"']).values[
        "conditions.pressure_altitude"] == pytest.approx(0.0, abs=1e-9)
    # Against ambiance (ICAO 1993): the pressure at 1 500 m geopotential, read back as an altitude.
    p = float(Atmosphere(Atmosphere.geop2geom_height(1_500.0)).pressure[0])
    s = scenario(overrides=[f'conditions.pressure_altitude="{p / 100:.6f} hPa"'])
    assert s.values["conditions.pressure_altitude"] == pytest.approx(1_500.0, abs=1e-3)
    s = scenario(overrides=['conditions.pressure_altitude="29.92 inHg"'])
    assert 0.2 < s.values["conditions.pressure_altitude"] < 0.5


def test_thrust_points_are_fitted_by_a_quadratic() -> None:
    s = scenario('[aircraft.thrust.reverse]\npoints = [["0 kt", "-50 kN"], ["100 kt", "-60 kN"], '
                 '["150 kt", "-70 kN"]]\n')
    v = s.values
    for kt, kn in ((0, -50), (100, -60), (150, -70)):  # three points: the quadratic interpolates
        speed = kt * 1852 / 3600
        t = v["aircraft.thrust.reverse.t0"] + v["aircraft.thrust.reverse.t1"] * speed + \
            v["aircraft.thrust.reverse.t2"] * speed**2
        assert t == pytest.approx(kn * 1000, rel=1e-10)
    two = scenario('[aircraft.thrust.idle]\npoints = [["0 m/s", "6000 N"], ["50 m/s", "5 kN"]]\n').values
    assert (two["aircraft.thrust.idle.t0"], two["aircraft.thrust.idle.t1"]) == pytest.approx((6000, -20))
    assert two["aircraft.thrust.idle.t2"] == 0.0


def test_condition_code_sets_friction() -> None:
    case = scenario(overrides=["runway.condition_code=3"]).case()
    rolling, braking = friction_from_condition_code(3)
    assert float(case.braking_mu) == braking and float(case.rolling_mu) == rolling


def test_set_replaces_the_other_form_of_friction_and_temperature() -> None:
    s = scenario('[conditions]\ntemperature = "300 K"\n', overrides=["runway.condition_code=2",
                                                                    'conditions.isa_deviation="5 K"'])
    assert s.values["runway.braking_mu"] is None and s.values["conditions.temperature"] is None
    assert s.overrides == ("runway.condition_code=2", 'conditions.isa_deviation="5 K"')


def test_set_bare_text_is_read_as_a_quantity() -> None:
    # The shell removes quotes: --set runway.lda="6500 ft" arrives as runway.lda=6500 ft.
    assert scenario(overrides=["runway.lda=6500 ft"]).values["runway.lda"] == pytest.approx(1981.2)


def test_low_touchdown_ratio_warns() -> None:
    with pytest.warns(LandriskWarning, match="1.15"):
        scenario(overrides=["procedure.touchdown_speed_ratio=1.1"])


@pytest.mark.parametrize(
    ("extra", "overrides", "needle"),
    [
        ("", ['aircraft.mass="-5 kg"'],
         "aircraft.mass = '-5 kg': outside the allowed range (= -5 kg) (allowed: [100, 7"),
        ("", ['aircraft.mass="5 m"'], "has units of [length], not kg"),
        ("", ["runway.braking_mu=1.6"], "allowed: (0, 1.5]"),
        ("", ["runway.rolling_mu=0"], "allowed: (0, 1.5]"),
        ("", ["procedure.touchdown_speed_ratio=1.0"], "allowed: (1, 2]"),
        ("", ['procedure.approach_angle="45 deg"'], "allowed: (0, 12] deg"),
        ("", ['conditions.headwind="58 m/s"'], "below the touchdown speed"),
        ("", ['conditions.isa_deviation="10 degC"'], "absolute temperature"),
        ("", ["runway.condition_code=9"], "integer 0..6"),
        ("", ["procedure.use_reverse=true"], "needs an [aircraft.thrust.reverse] table"),
        ('[conditions]\ntemperature = "290 K"\nisa_deviation = "3 K"\n', [], "not both"),
        ("[runway2]\nx = 1\n", [], "unknown section"),
        ("[procedure]\nreacton_time = 2\n", [], "did you mean 'procedure.reaction_time'"),
        ("[aircraft.thrust.idle]\nt0 = 1\npoints = [[0, 1]]\n", [], "not both"),
        ('[aircraft.thrust.idle]\npoints = [["0 kt", "1 kN"], ["0 m/s", "2 kN"]]\n', [], "0 m/s apart"),
        ("[aircraft.thrust.climb]\nt0 = 1\n", [], "unknown thrust setting"),
    ],
)
def test_bad_input_names_file_key_value_and_range(extra, overrides, needle) -> None:
    with pytest.raises(ConfigError) as err:
        parse_scenario(MINIMAL + extra, "test.toml", overrides)
    message = str(err.value)
    assert needle in message
    assert message.startswith("test.toml")
    assert "\n" not in message


def test_required_key_missing() -> None:
    with pytest.raises(ConfigError, match=r"aircraft.cl_max: is required"):
        parse_scenario(MINIMAL.replace("cl_max = 2.4\n", ""), "t.toml")
    with pytest.raises(ConfigError, match=r"braking_mu: is required unless runway\.condition_code"):
        parse_scenario(MINIMAL.replace("braking_mu = 0.3\n", ""), "t.toml")


def test_missing_file_and_bad_toml(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="no such file"):
        load_scenario(tmp_path / "absent.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[aircraft\nmass = 1", encoding="utf-8")
    with pytest.raises(ConfigError, match=r"bad\.toml: not valid TOML"):
        load_scenario(bad)


def test_scenario_units_key_takes_its_choices_or_empty() -> None:
    # "" is the key's default (not set: metres with feet beside them); anything else but si or aviation
    # is a one-line error naming the key.
    from click.testing import CliRunner

    from landrisk.cli import main

    for value, code in (('""', 0), ('"aviation"', 0), ('"si"', 0), ('"feet"', 2)):
        r = CliRunner().invoke(main, ["solve", "--set", f"scenario.units={value}"])
        assert r.exit_code == code, (value, r.output)
    assert "scenario.units = 'feet'" in r.output and "si or aviation" in r.output

"""Bad input through the command line: every case exits 2 with one line naming the file, key and value.

The scenario is the tests' own (an invented twin-jet written in SI with units, not data of any aircraft).
Each file case replaces or adds one value of it; each ``--set`` case overrides one key of it.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from click.testing import CliRunner

from landrisk.cli import main

# Section -> key -> TOML text. Invented values, chosen to solve without warnings.
BASE: dict[str, dict[str, str]] = {
    "aircraft": {
        "mass": '"60000 kg"', "wing_area": '"120 m^2"', "wing_span": '"34 m"', "wing_height": '"3.5 m"',
        "cl_max": "2.6", "cd0": "0.08", "cl_ground": "0.15", "reverse_cutoff_speed": '"30 m/s"',
    },
    "aircraft.thrust.idle": {"t0": '"6 kN"', "t1": '"-25 N*s/m"', "t2": '"0 N*s^2/m^2"'},
    "aircraft.thrust.reverse": {"points": '[["0 kt", "-50 kN"], ["80 kt", "-60 kN"], ["140 kt", "-66 kN"]]'},
    "conditions": {"pressure_altitude": '"300 m"', "temperature": '"295 K"', "headwind": '"3 m/s"'},
    "runway": {"lda": '"2000 m"', "slope": '"0.2 %"', "rolling_mu": "0.03", "braking_mu": "0.35"},
    "procedure": {"screen_height": '"15 m"', "approach_angle": '"3 deg"', "reaction_time": '"2 s"',
                  "touchdown_speed_ratio": "1.18", "use_reverse": "true"},
}


def scenario_text(changes: dict[str, str | None] | None = None, extra: str = "") -> str:
    """The base scenario with ``changes`` ("section.key" -> TOML text, None to remove) and ``extra``."""
    tables = {s: dict(body) for s, body in BASE.items()}
    for dotted, text in (changes or {}).items():
        section, key = dotted.rsplit(".", 1)
        if text is None:
            tables[section].pop(key, None)
        else:
            tables.setdefault(section, {})[key] = text
    lines = []
    for section, body in tables.items():
        lines.append(f"[{section}]")
        lines += [f"{k} = {v}" for k, v in body.items()]
    return "\n".join(lines) + "\n" + extra


def run(*args: str):
    return CliRunner().invoke(main, list(args))


def assert_one_line_error(result, *needles: str) -> str:
    assert result.exit_code == 2, (result.exit_code, result.output)
    err = result.stderr.strip()
    assert "Traceback" not in result.output + result.stderr
    assert len(err.splitlines()) == 1, err
    assert err.startswith("error: ")
    for needle in needles:
        assert needle in err, (needle, err)
    return err


def test_the_base_scenario_solves(tmp_path: Path) -> None:
    path = tmp_path / "own.toml"
    path.write_text(scenario_text(), encoding="utf-8")
    r = run("solve", str(path))
    assert r.exit_code == 0, r.output
    assert r.stderr == ""


# Every key with a unit, as a bare number (the value in the key's own unit).
BARE = [
    ("aircraft.mass", "60000"), ("aircraft.wing_area", "120"), ("aircraft.wing_span", "34"),
    ("aircraft.wing_height", "3.5"), ("aircraft.reverse_cutoff_speed", "30"),
    ("aircraft.thrust.idle.t0", "6000"), ("aircraft.thrust.idle.t1", "-25"), ("aircraft.thrust.idle.t2", "0"),
    ("conditions.pressure_altitude", "300"), ("conditions.temperature", "295"),
    ("conditions.headwind", "-6"), ("runway.lda", "4300"), ("runway.resa_length", "240"),
    ("runway.slope", "-0.3"), ("procedure.screen_height", "15"), ("procedure.approach_angle", "3"),
    ("procedure.reaction_time", "2"), ("procedure.touchdown_distance", "400"),
]


@pytest.mark.parametrize(("key", "value"), BARE, ids=[k for k, _ in BARE])
def test_bare_number_in_the_file_is_refused(tmp_path: Path, key: str, value: str) -> None:
    path = tmp_path / "own.toml"
    path.write_text(scenario_text({key: value}), encoding="utf-8")
    assert_one_line_error(run("solve", str(path)), str(path), f"{key} = {value}",
                          "a bare number has no unit; write")


@pytest.mark.parametrize(("key", "value"), BARE, ids=[k for k, _ in BARE])
def test_bare_number_by_set_is_refused(tmp_path: Path, key: str, value: str) -> None:
    path = tmp_path / "own.toml"
    changes = {key.rsplit(".", 1)[0] + ".points": None} if key.startswith("aircraft.thrust.reverse") else {}
    path.write_text(scenario_text(changes), encoding="utf-8")
    assert_one_line_error(run("solve", str(path), "--set", f"{key}={value}"), f"{path} (--set)",
                          f"{key} = {value}", "a bare number has no unit; write")


def test_the_bare_number_message_gives_an_example_in_two_units(tmp_path: Path) -> None:
    path = tmp_path / "own.toml"
    path.write_text(scenario_text(), encoding="utf-8")
    err = assert_one_line_error(run("solve", str(path), "--set", "conditions.headwind=-6"))
    # 6 kt = 6 x 1852/3600 m/s = 3.087 m/s (1 kt = 1852 m/h exactly, by definition).
    assert err.endswith('conditions.headwind = -6: a bare number has no unit; write "-6 kt" or "-3.09 m/s"')


# Values written wrong: (key, TOML text as written in the file, text the message must show).
WRONG = [
    ("runway.lda", '"1,900 m"', "'1,900 m'"),
    ("runway.lda", '"1 900 m"', "'1 900 m'"),
    ("runway.lda", '"5 600 ft"', "'5 600 ft'"),
    ("procedure.reaction_time", '"1,5 s"', "'1,5 s'"),
    ("runway.lda", '"9**9**9 m"', "'9**9**9 m'"),
    ("aircraft.mass", '"10**400 kg"', "'10**400 kg'"),
    ("aircraft.mass", '"' + "1" * 400 + ' kg"', "1111111111"),
    ("aircraft.mass", "1" * 400, "111111111111..."),
    ("runway.lda", '"1e400 m"', "'1e400 m'"),
    ("runway.lda", '"1e308 km"', "'1e308 km'"),
    ("runway.lda", '"nan m"', "'nan m'"),
    ("runway.lda", '"inf m"', "'inf m'"),
    ("runway.lda", "inf", "inf"),
    ("runway.lda", "nan", "nan"),
    ("runway.lda", '"0x10 m"', "'0x10 m'"),
    ("runway.lda", '"1.2.3 m"', "'1.2.3 m'"),
    ("runway.lda", '"--5 m"', "'--5 m'"),
    ("runway.lda", '"1900 m;"', "'1900 m;'"),
    ("runway.lda", '"1900 m^99"', "'1900 m^99'"),
    ("runway.lda", '"1900 m**(1/2)"', "'1900 m**(1/2)'"),
    ("runway.lda", '"\u0661\u0669\u0660\u0660 m"', "runway.lda"),
    ("runway.lda", '"1900 furlongz"', "'1900 furlongz'"),
    ("runway.lda", '"1900 m/s"', "'1900 m/s'"),
    ("runway.lda", '"1900 m m"', "'1900 m m'"),
    ("runway.lda", '"m"', "'m'"),
    ("runway.lda", '""', "''"),
    ("runway.lda", '"50000 ft"', "'50000 ft'"),
    ("runway.lda", "[1, 2]", "[1, 2]"),
    ("runway.lda", "true", "True"),
    ("runway.lda", "{ a = 1 }", "{'a': 1}"),
    ("aircraft.mass", '"50 kg"', "'50 kg'"),
    ("aircraft.mass", '"5 m"', "'5 m'"),
    ("aircraft.cl_max", '"2 m"', "'2 m'"),
    ("aircraft.cl_max", "9", "9"),
    ("runway.braking_mu", "2", "2"),
    ("runway.braking_mu", "0", "0"),
    ("conditions.headwind", '"150 kt"', "'150 kt'"),
    ("conditions.temperature", '"100 degC"', "'100 degC'"),
    ("runway.slope", '"30 %"', "'30 %'"),
    ("procedure.approach_angle", '"20 deg"', "'20 deg'"),
    ("procedure.approach_angle", '"0 deg"', "'0 deg'"),
    ("procedure.reaction_time", '"-1 s"', "'-1 s'"),
    ("procedure.touchdown_speed_ratio", "0.9", "0.9"),
    ("procedure.use_reverse", '"yes"', "'yes'"),
    ("aircraft.thrust.idle.t1", '"-30 N"', "'-30 N'"),
    ("aircraft.thrust.idle.t2", '"1e9 N*s^2/m^2"', "'1e9 N*s^2/m^2'"),
    ("aircraft.thrust.reverse.points", '[["1e300 m/s", "-50 kN"], ["80 kt", "-60 kN"]]', "1e300 m/s"),
    ("aircraft.thrust.reverse.points", '[["100 kt", "-50 kN"], ["100.000001 kt", "-60 kN"]]',
     "speeds are 5.14e-07 m/s apart"),
    ("aircraft.thrust.reverse.points", '[["0 kt", "0 kN"], ["10 kt", "-1500 kN"]]',
     "the fit gives t1 = -2.916e+05 N*s/m"),
    ("aircraft.thrust.reverse.points", '[["0 kt", "0 N"], ["2 kt", "-1000 kN"], ["4 kt", "0 N"]]',
     "the fit gives t1"),
    ("aircraft.thrust.reverse.points", '[[0, -50000], [40, -60000]]', "[[0, -50000], [40, -60000]]"),
    ("aircraft.thrust.reverse.points", '[["0 kt", "-50 kN"], ["-10 kt", "-60 kN"]]', "-10 kt"),
    ("aircraft.thrust.reverse.points", '[["0 kt", "-5e7 N"], ["80 kt", "-60 kN"]]', "-5e7 N"),
    ("aircraft.thrust.reverse.points", '"-50 kN"', "'-50 kN'"),
    ("aircraft.thrust.reverse.points", '[["0 kt"]]', "[['0 kt']]"),
    ("aircraft.thrust.reverse.points", '[["0 kt", "-50 kN"], ["1 900 kt", "-60 kN"]]', "1 900 kt"),
    ("aircraft.thrust.reverse.points", "[" * 100 + "]" * 100, "aircraft.thrust.reverse.points"),
]
SET_WRONG = [
    ("runway.lda", "1 900 m", "'1 900 m'"),
    ("runway.lda", '"1,900 m"', "'1,900 m'"),
    ("runway.lda", "9**9**9 m", "'9**9**9 m'"),
    ("aircraft.mass", "10**400 kg", "'10**400 kg'"),
    ("aircraft.mass", "1" * 400, "'111111111111... (400 digits)'"),
    ("runway.lda", "1e400", "inf"),
    ("runway.lda", "nan", "nan"),
    ("runway.lda", "[" * 10_000 + "]" * 10_000, "runway.lda"),
    ("conditions.isa_deviation", '"10 degC"', "'10 degC'"),
    ("runway.condition_code", "9", "9"),
    ("runway.condition_code", "3.5", "3.5"),
    ("runway.condition_code", '"3"', "'3'"),
    ("aircraft.thrust.idle.t0", "2e7 N", "'2e7 N'"),
]


@pytest.mark.parametrize(("key", "text", "shown"), WRONG, ids=[f"{k}={t[:24]}" for k, t, _ in WRONG])
def test_wrong_value_in_the_file(tmp_path: Path, key: str, text: str, shown: str) -> None:
    path = tmp_path / "own.toml"
    changes: dict[str, str | None] = {key: text}
    if key.startswith("aircraft.thrust.reverse"):
        changes.update({f"aircraft.thrust.reverse.{n}": None for n in ("t0", "t1", "t2")})
    path.write_text(scenario_text(changes), encoding="utf-8")
    assert_one_line_error(run("solve", str(path)), str(path), key, shown)


@pytest.mark.parametrize(("key", "text", "shown"), SET_WRONG, ids=[f"{k}={t[:24]}" for k, t, _ in SET_WRONG])
def test_wrong_value_by_set(tmp_path: Path, key: str, text: str, shown: str) -> None:
    path = tmp_path / "own.toml"
    path.write_text(scenario_text(), encoding="utf-8")
    assert_one_line_error(run("solve", str(path), "--set", f"{key}={text}"), str(path) if len(text) < 100
                          else "--set", key, shown)


# Uncertain tables: (text of the table, key named, value shown).
UNCERTAIN = [
    ('[uncertain."conditions.headwind"]\ndistribution = "normal"\nmean = 6\nsd = "3 kt"\n',
     'uncertain."conditions.headwind".mean', "= 6: a bare number has no unit"),
    ('[uncertain."conditions.headwind"]\ndistribution = "normal"\nmean = "6 kt"\nsd = 3\n',
     'uncertain."conditions.headwind".sd', "= 3: a bare number has no unit"),
    ('[uncertain."runway.lda"]\ndistribution = "uniform"\nlower = 1800\nupper = "2200 m"\n',
     'uncertain."runway.lda".lower', "= 1800"),
    ('[uncertain."procedure.reaction_time"]\ndistribution = "discrete"\nvalues = [1, "2 s"]\n'
     "probabilities = [0.5, 0.5]\n", 'uncertain."procedure.reaction_time".values', "[1, '2 s']"),
    ('[uncertain."procedure.touchdown_distance"]\ndistribution = "lognormal"\nmedian = 400\n'
     "sigma_log = 0.3\n", 'uncertain."procedure.touchdown_distance".median', "= 400"),
    ('[uncertain."procedure.touchdown_distance"]\ndistribution = "lognormal"\nmedian = "400 m"\n'
     'sigma_log = "0.3 m"\n', 'uncertain."procedure.touchdown_distance".sigma_log', "'0.3 m'"),
    ('[uncertain."conditions.isa_deviation"]\ndistribution = "normal"\nmean = "5 degC"\nsd = "2 K"\n',
     'uncertain."conditions.isa_deviation".mean', "'5 degC'"),
    ('[uncertain."runway.lda"]\ndistribution = "uniform"\nlower = "1,800 m"\nupper = "2200 m"\n',
     'uncertain."runway.lda".lower', "'1,800 m'"),
    ('[uncertain."runway.braking_mu"]\ndistribution = "normal"\nmean = 0.3\nsd = 0.05\nlower = 0.1\n'
     "upper = 1e400\n", 'uncertain."runway.braking_mu".upper', "inf"),
    ('[uncertain."runway.braking_mu"]\ndistribution = "discrete"\nvalues = [0.3, 0.4]\n'
     "probabilities = [" + "1" * 30 + ", 0]\n", 'uncertain."runway.braking_mu".probabilities[0]',
     "111111111111..."),
]


@pytest.mark.parametrize(("table", "key", "shown"), UNCERTAIN, ids=[k for _, k, _ in UNCERTAIN])
def test_bad_uncertain_table(tmp_path: Path, table: str, key: str, shown: str) -> None:
    path = tmp_path / "own.toml"
    path.write_text(scenario_text(extra=table), encoding="utf-8")
    assert_one_line_error(run("assess", str(path), "--samples", "100"), str(path), key, shown)


def _empirical(file: str, column: str = "touchdown", unit: str | None = '"m"') -> str:
    text = (f'[uncertain."procedure.touchdown_distance"]\ndistribution = "empirical"\nfile = "{file}"\n'
            f'column = "{column}"\n')
    return text + (f"unit = {unit}\n" if unit is not None else "")


# Empirical columns: (CSV text or None for no file, table, key named, value shown).
EMPIRICAL = [
    ("touchdown\n400\n420\n", _empirical("points.csv", unit=None),
     'uncertain."procedure.touchdown_distance".unit', "needs the unit of its numbers"),
    ("touchdown\n400\n420\n", _empirical("points.csv", unit="100"),
     'uncertain."procedure.touchdown_distance".unit', "= 100: is not a unit"),
    ("touchdown\n400\n420\n", _empirical("points.csv", unit='"100"'),
     'uncertain."procedure.touchdown_distance".unit', "= '100': is not a unit"),
    ("touchdown\n400\n420\n", _empirical("points.csv", unit='"100 m"'),
     'uncertain."procedure.touchdown_distance".unit', "= '100 m': is not a unit"),
    ("touchdown\n400\n420\n", _empirical("points.csv", unit='"kt"'),
     'uncertain."procedure.touchdown_distance".unit', "= 'kt'"),
    ("touchdown\n400\n420\n", _empirical("points.csv", unit='"furlongz"'),
     'uncertain."procedure.touchdown_distance".unit', "= 'furlongz'"),
    ("# comment\ntouchdown\n400\nabc\n420\n\n1.5.1\n", _empirical("points.csv"),
     'uncertain."procedure.touchdown_distance".column', "2 of 4 cells are empty or not finite numbers "
     "(the first on line 4)"),
    ("touchdown\n400\ninf\n", _empirical("points.csv"),
     'uncertain."procedure.touchdown_distance".column', "1 of 2 cells"),
    ("touchdown\n400\n", _empirical("points.csv"),
     'uncertain."procedure.touchdown_distance".column', "fewer than two numbers"),
    ("touchdown\n400\n420\n", _empirical("points.csv", column="landing"),
     'uncertain."procedure.touchdown_distance".column', "= 'landing': no such column"),
    (None, _empirical("absent.csv"), 'uncertain."procedure.touchdown_distance".file', "no such file"),
    ("touchdown\n400\n420,5\n", _empirical("points.csv"),
     'uncertain."procedure.touchdown_distance".file', "(line 3 has more fields than the header)"),
    (b"touchdown\n\xff\xfe400\n", _empirical("points.csv"),
     'uncertain."procedure.touchdown_distance".file', "is not UTF-8 text"),
    ("touchdown\n400\n420\n", _empirical(".", unit='"m"'),
     'uncertain."procedure.touchdown_distance".file', "is not a regular file"),
]


@pytest.mark.parametrize(("csv", "table", "key", "shown"), EMPIRICAL, ids=[s for *_, s in EMPIRICAL])
def test_bad_empirical_column(tmp_path: Path, csv: str | bytes | None, table: str, key: str,
                              shown: str) -> None:
    if isinstance(csv, str):
        (tmp_path / "points.csv").write_text(csv, encoding="utf-8")
    elif csv is not None:
        (tmp_path / "points.csv").write_bytes(csv)
    path = tmp_path / "own.toml"
    path.write_text(scenario_text(extra=table), encoding="utf-8")
    assert_one_line_error(run("assess", str(path), "--samples", "100"), str(path), key, shown)


SECRET = "SECRET-FIRST-LINE-do-not-print:x:0:0"


@pytest.mark.parametrize("column", ["touchdown", SECRET])
def test_an_unreadable_file_is_never_echoed(tmp_path: Path, column: str) -> None:
    other = tmp_path / "system-file"
    other.write_text(SECRET + "\nroot line two\n" + "\x00\x01 binary\n", encoding="utf-8")
    path = tmp_path / "own.toml"
    path.write_text(scenario_text(extra=_empirical(str(other), column="touchdown")), encoding="utf-8")
    err = assert_one_line_error(run("assess", str(path), "--samples", "100"), str(path),
                                'uncertain."procedure.touchdown_distance"')
    assert "SECRET" not in err and "root line" not in err
    err = assert_one_line_error(run("solve", str(other)), str(other))
    assert "SECRET" not in err and "root line" not in err
    if os.path.exists("/etc/passwd"):  # a real system file, as the scenario and as the CSV
        first = Path("/etc/passwd").read_text(encoding="utf-8", errors="replace").splitlines()[:1]
        path.write_text(scenario_text(extra=_empirical("/etc/passwd", column="touchdown")), encoding="utf-8")
        for args in (("solve", "/etc/passwd"), ("assess", str(path), "--samples", "100")):
            err = assert_one_line_error(run(*args))
            assert not first or first[0] not in err


def test_duplicate_keys_in_a_file_are_not_quoted(tmp_path: Path) -> None:
    path = tmp_path / "own.toml"
    path.write_text(scenario_text() + "[runway]\nsecret_key_name = 1\n", encoding="utf-8")
    err = assert_one_line_error(run("solve", str(path)), str(path), "defined twice (at line")
    assert "runway" not in err.split(str(path), 1)[1]


@pytest.mark.parametrize(
    ("content", "needle"),
    [
        (b"[aircraft]\n" + b"# padding\n" * 200_000, "is larger than 1 MiB"),
        (b"a = " + b"[" * 10_000 + b"]" * 10_000 + b"\n", "nested too deeply"),
        (b"[aircraft]\nmass = \"60000 kg\"\nname = \"\xff\xfe\"\n", "is not UTF-8 text (byte 38"),
        (b"", "aircraft.mass: is required"),
        (b"[aircraft]\nmass = " + b"1" * 5000 + b"\n", "a number on line 2 has thousands of digits"),
        (b"\x00\x00\x00\x00", "not valid TOML"),
    ],
    ids=["huge", "nested", "not-utf8", "empty", "5000-digits", "binary"],
)
def test_hard_edges_of_the_file(tmp_path: Path, content: bytes, needle: str) -> None:
    path = tmp_path / "own.toml"
    path.write_bytes(content)
    assert_one_line_error(run("solve", str(path)), str(path), needle)


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero")
def test_dev_zero_as_the_scenario() -> None:
    assert_one_line_error(run("solve", "/dev/zero"), "/dev/zero", "is larger than 1 MiB")


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (("--set", "runway.lda"), "expected KEY=VALUE"),
        (("--set", "runway.ldaa=\"1 m\""), "did you mean 'runway.lda'"),
        (("--set", "=3"), "expected KEY=VALUE"),
    ],
)
def test_malformed_set(tmp_path: Path, args: tuple[str, ...], needle: str) -> None:
    path = tmp_path / "own.toml"
    path.write_text(scenario_text(), encoding="utf-8")
    assert_one_line_error(run("solve", str(path), *args), "--set", needle)


def test_a_byte_order_mark_is_accepted(tmp_path: Path) -> None:
    plain, marked = tmp_path / "plain.toml", tmp_path / "marked.toml"
    plain.write_text(scenario_text(), encoding="utf-8")
    marked.write_text(scenario_text(), encoding="utf-8-sig")  # what Windows editors write
    assert marked.read_bytes().startswith(b"\xef\xbb\xbf")
    a, b = run("solve", str(plain), "--json"), run("solve", str(marked), "--json")
    assert a.exit_code == 0 and b.exit_code == 0, b.output
    assert a.stdout.replace(str(plain), "") == b.stdout.replace(str(marked), "")

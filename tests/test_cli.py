"""The command line: what a user sees, and that bad input never shows a traceback."""

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from landrisk import CAUTION, __version__, api
from landrisk.cli import main

ROOT = Path(__file__).resolve().parents[1]


def run(*args: str):
    return CliRunner().invoke(main, list(args))


def test_version() -> None:
    r = run("--version")
    assert r.exit_code == 0 and __version__ in r.output


def test_help_carries_the_caution() -> None:
    for args in ((), ("solve",), ("init",)):
        out = " ".join(run(*args, "--help").output.split())
        assert "not an operational or certified performance source" in out
        assert "flight manual" in out


def test_solve_table_on_demo() -> None:
    r = run("solve")
    assert r.exit_code == 0, r.output
    for text in ("air distance", "free roll", "braking roll", "total landing distance",
                 "landing distance available", "margin", " ft", " kt", "stall V_S", "touchdown V_TD"):
        assert text in r.output
    assert CAUTION in r.output


def test_solve_json_keys_and_values() -> None:
    r = run("solve", str(ROOT / "configs" / "turboprop-grass-strip.toml"), "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    for key in ("air_distance_m", "free_roll_m", "braking_m", "total_m", "lda_m", "margin_m",
                "touchdown_speed_kt", "stall_speed_kt", "inputs", "version"):
        assert key in data
    assert data["total_m"] == pytest.approx(data["air_distance_m"] + data["free_roll_m"] + data["braking_m"])
    assert data["margin_m"] == pytest.approx(data["lda_m"] - data["total_m"])
    assert data["inputs"]["aircraft.mass"] == 18_000.0
    # the CLI prints what the Python API computes
    landing = api.solve(api.load(ROOT / "configs" / "turboprop-grass-strip.toml"))
    assert data["total_m"] == landing.total_m
    assert data["touchdown_speed_kt"] == pytest.approx(landing.touchdown_speed * 3600 / 1852)


def test_set_overrides_from_the_command_line() -> None:
    base = json.loads(run("solve", "--json").stdout)
    r = run("solve", "--json", "--set", "runway.braking_mu=0.2", "--set", 'runway.lda="6500 ft"')
    data = json.loads(r.stdout)
    assert data["braking_m"] > base["braking_m"]
    assert data["lda_m"] == pytest.approx(6500 * 0.3048)
    assert data["overrides"] == ["runway.braking_mu=0.2", 'runway.lda="6500 ft"']


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (("solve", "no-such-file.toml"), "no-such-file.toml: no such file"),
        (("solve", "--set", 'aircraft.mass="-1 kg"'), "aircraft.mass = '-1 kg'"),
        (("solve", "--set", "runway.braking_mu=2"), "(allowed: (0, 1.5])"),
        (("solve", "--set", "procedure.touchdown_speed_ratio=0.9"), "procedure.touchdown_speed_ratio"),
        (("solve", "--set", 'aircraft.mass="30000 kg"', "--set", 'conditions.headwind="100 kt"'),
         "below the touchdown speed"),
        (("solve", "--set", 'procedure.approach_angle="20 deg"'), "procedure.approach_angle = '20 deg'"),
        (("solve", "--set", 'aircraft.mass="64 t/s"'), "aircraft.mass"),
        (("solve", "--set", "aircraft.cl_ground=2.5"), "lift exceeds weight"),
        (("solve", "--set", "nonsense=1"), "unknown key"),
    ],
)
def test_bad_input_exits_2_with_one_line(args, needle) -> None:
    r = run(*args)
    assert r.exit_code == 2
    assert needle in r.stderr
    assert "Traceback" not in r.output + r.stderr
    assert len(r.stderr.strip().splitlines()) == 1


def test_bad_toml_file(tmp_path: Path) -> None:
    bad = tmp_path / "broken.toml"
    bad.write_text("[runway]\nlda = = 3", encoding="utf-8")
    r = run("solve", str(bad))
    assert r.exit_code == 2 and "broken.toml: not valid TOML" in r.stderr


def test_low_touchdown_ratio_warns_on_stderr() -> None:
    r = run("solve", "--set", "procedure.touchdown_speed_ratio=1.1")
    assert r.exit_code == 0
    assert r.stderr.startswith("warning: procedure.touchdown_speed_ratio = 1.1")


def test_init_writes_a_starter_that_solves(tmp_path: Path) -> None:
    path = tmp_path / "mine.toml"
    assert run("init", str(path)).exit_code == 0
    assert path.read_text(encoding="utf-8").startswith("# Starter scenario")
    assert json.loads(run("solve", str(path), "--json").stdout)["total_m"] == json.loads(
        run("solve", "--json").stdout)["total_m"]
    again = run("init", str(path))
    assert again.exit_code == 2 and "exists" in again.stderr
    assert run("init", str(path), "--force").exit_code == 0

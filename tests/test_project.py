"""Project rules checked in the test run: layering of imports and lint."""

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _tool(name: str) -> str:
    found = shutil.which(name, path=str(Path(sys.executable).parent)) or shutil.which(name)
    if found is None:
        pytest.fail(f"{name} is part of the test extra and must be installed")
    return found


def test_import_layers() -> None:
    # import-linter contracts in pyproject.toml: physics <- model <- (io, report) <- api <- cli.
    out = subprocess.run([_tool("lint-imports"), "--config", str(ROOT / "pyproject.toml")],
                         capture_output=True, text=True, check=False, cwd=ROOT)
    assert out.returncode == 0, out.stdout + out.stderr


def test_ruff_is_clean() -> None:
    out = subprocess.run([_tool("ruff"), "check", str(ROOT)], capture_output=True, text=True, check=False)
    assert out.returncode == 0, out.stdout + out.stderr


def test_readme_documents_every_key_and_ci_runs_its_test_command() -> None:
    from landrisk.model.schema import keys_markdown

    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    # The key table is generated: python -c "import landrisk.model.schema as s; print(s.keys_markdown())"
    assert keys_markdown() in (ROOT / "docs" / "scenario.md").read_text(encoding="utf-8")
    test_command = next(line for line in readme.splitlines() if "pytest" in line and "pip install" in line)
    assert test_command.strip() in (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert "not an operational or certified performance source" in readme


def _imported_modules(*args: str) -> set[str]:
    """The modules a fresh interpreter imports to run ``landrisk ARGS`` (from ``python -X importtime``)."""
    out = subprocess.run([sys.executable, "-X", "importtime", "-m", "landrisk.cli", *args],
                         capture_output=True, text=True, check=False, cwd=ROOT)
    assert out.returncode == 0, out.stderr[-2000:]
    lines = [line for line in out.stderr.splitlines() if line.startswith("import time:")]
    return {line.rsplit("|", 1)[1].strip() for line in lines}


@pytest.mark.parametrize("args", [("solve", "--json"), ("--help",)])
def test_commands_import_only_what_they_use(args) -> None:
    # `solve` uses no polynomial chaos, figures or tables: importing chaospy alone costs more than a
    # second, so it and matplotlib, pandas and scipy.stats stay out of its import graph.
    modules = _imported_modules(*args)
    for heavy in ("chaospy", "matplotlib", "pandas", "scipy.stats"):
        assert heavy not in modules, heavy


def test_assess_imports_only_what_it_uses() -> None:
    # The Monte Carlo assessment without --out draws no figure and writes no table; pint is read without
    # dask (units._pint: dask is for study scale-out only).
    modules = _imported_modules("assess", "--samples", "2000", "--quiet")
    assert "pint" in modules
    for heavy in ("chaospy", "matplotlib", "pandas", "scipy.stats", "dask"):
        assert heavy not in modules, heavy


def test_readme_links_to_files_that_exist() -> None:
    import re

    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    links = re.findall(r"\]\(([^)#]+)\)", readme)
    local = [link for link in links if not link.startswith("http")]
    assert "docs/scenario.md" in local and "DEVELOPERS.md" in local
    for link in local:
        assert (ROOT / link).exists(), link


def _readme_blocks(kind: str) -> list[str]:
    import re

    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    return re.findall(rf"```{kind}\n(.*?)```", readme, flags=re.S)


def _in_a_copy_of_the_repository(tmp_path: Path) -> Path:
    """A folder with the example configs, so that examples run as written without writing into the tree."""
    shutil.copytree(ROOT / "configs", tmp_path / "configs")
    return tmp_path


@pytest.mark.slow
def test_readme_python_example_runs(tmp_path: Path, monkeypatch) -> None:
    (code,) = _readme_blocks("python")
    monkeypatch.chdir(_in_a_copy_of_the_repository(tmp_path))
    exec(compile(code, "README.md", "exec"), {})
    assert (tmp_path / "results" / "summary.json").exists()


@pytest.mark.slow
def test_readme_tour_commands_run(tmp_path: Path, monkeypatch) -> None:
    import shlex

    from click.testing import CliRunner

    from landrisk.cli import main

    monkeypatch.chdir(_in_a_copy_of_the_repository(tmp_path))
    tour = next(b for b in _readme_blocks("bash") if b.lstrip().startswith("landrisk"))
    for line in tour.splitlines():
        args = shlex.split(line, comments=True)
        assert args[0] == "landrisk", line
        result = CliRunner().invoke(main, args[1:])
        assert result.exit_code == 0, f"{line}: {result.output}"


def test_mypy_is_clean() -> None:
    # The package ships py.typed: its type hints are checked (configuration in pyproject.toml).
    out = subprocess.run([_tool("mypy")], capture_output=True, text=True, check=False, cwd=ROOT)
    assert out.returncode == 0, out.stdout + out.stderr

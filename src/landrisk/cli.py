"""The ``landrisk`` command line. It parses options, calls :mod:`landrisk.api` and prints."""

from __future__ import annotations

import json
import shlex
import sys
import warnings
from collections.abc import Callable
from functools import wraps
from typing import Any

import click

from landrisk import CAUTION, __version__
from landrisk.errors import LandriskError, LandriskWarning

__all__ = ["main"]

_HELP_CAUTION = (
    "\b\nCAUTION: an analysis aid, not an operational or certified performance source. The aircraft\n"
    "flight manual, the operator's approved data, local regulations and licensed practice govern."
)


def _reported(fn: Callable[..., Any]) -> Callable[..., Any]:
    """Run a command, printing landrisk's warnings and errors as one line each (errors exit 2)."""

    @wraps(fn)
    def run(*args: Any, **kwargs: Any) -> Any:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", LandriskWarning)
            try:
                result = fn(*args, **kwargs)
            except LandriskError as exc:
                _print_warnings(caught)
                click.echo(f"error: {exc}", err=True)
                sys.exit(2)
        _print_warnings(caught)
        return result

    return run


def _print_warnings(caught: list[warnings.WarningMessage]) -> None:
    for w in caught:
        if issubclass(w.category, LandriskWarning):
            click.echo(f"warning: {w.message}", err=True)


_set_option = click.option(
    "--set", "overrides", multiple=True, metavar="KEY=VALUE",
    help='Override one scalar of the scenario, e.g. --set runway.braking_mu=0.2 or '
         "--set 'runway.lda=\"6500 ft\"'. Repeatable.",
)
_config_argument = click.argument("config", required=False, type=click.Path(dir_okay=False))


class _Group(click.Group):
    """The root group: it keeps the arguments it was given, for the provenance of files written."""

    def parse_args(self, ctx: click.Context, args: list[str]) -> list[str]:
        ctx.meta["landrisk.argv"] = list(args)
        return super().parse_args(ctx, args)


def _command_line() -> str:
    """The command line of this run, ``landrisk assess --out run``, quoted for a POSIX shell."""
    ctx = click.get_current_context(silent=True)
    argv = ctx.meta.get("landrisk.argv", sys.argv[1:]) if ctx is not None else sys.argv[1:]
    return shlex.join(["landrisk", *argv])


_report_option = click.option(
    "--report", "with_report", is_flag=True,
    help="With --out: also write report.html, one self-contained review document of the results "
         "(see landrisk report).")


def _write_report(out_dir: str | None, with_report: bool, written: list[str] | None, force: bool) -> None:
    """The review document of ``out_dir``, its path added to ``written``."""
    if not with_report or out_dir is None or written is None:
        return
    from landrisk import api

    written += [str(p) for p in api.write_report(out_dir, force=force)]


@click.group(cls=_Group, help=f"""landrisk: how likely is a landing to overrun the runway, and why.

Every command runs on the embedded, invented demo scenario when no CONFIG file is given.

{_HELP_CAUTION}""")
@click.version_option(__version__, prog_name="landrisk")
def main() -> None:
    """Entry point of the console script."""


@main.command(epilog=_HELP_CAUTION)
@_config_argument
@_set_option
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
@_reported
def solve(config: str | None, overrides: tuple[str, ...], as_json: bool) -> None:
    """Deterministic landing distance of one landing at the scenario's nominal inputs.

    Prints the air distance, free roll, braking roll and total in m and ft, the stall and touchdown
    speeds in kt, the landing distance available and the margin.
    """
    from landrisk import api, report

    landing = api.solve(api.load(config, overrides))
    if as_json:
        click.echo(json.dumps(api.solve_record(landing), indent=2))
    else:
        click.echo(report.render_solve(landing))


class _ProgressBar:
    """A one-line progress bar on stderr, for long runs in a terminal only."""

    def __init__(self, enabled: bool) -> None:
        self.enabled = enabled and sys.stderr.isatty()
        self.shown = False

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled or total <= (1 << 16):
            return
        width = 30
        filled = int(width * done / total)
        sys.stderr.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {done:,}/{total:,} samples")
        sys.stderr.flush()
        self.shown = True

    def close(self) -> None:
        if self.shown:
            sys.stderr.write("\n")


@main.command(epilog=_HELP_CAUTION)
@_config_argument
@click.option("--samples", type=click.IntRange(min=1), default=100_000, show_default=True,
              help="Number of Monte Carlo samples.")
@click.option("--seed", type=click.IntRange(min=0), default=1, show_default=True,
              help="Seed of the sampler; the same seed gives the same results.")
@click.option("--sampler", type=click.Choice(["random", "sobol", "halton", "lhs"]), default="random",
              show_default=True, help="Pseudo-random, scrambled Sobol or Halton points, or Latin hypercube.")
@click.option("--method", type=click.Choice(["mc", "importance", "subset", "form"]), default="mc",
              show_default=True, help="Monte Carlo, or for rare overruns: importance sampling around the "
              "design points, subset simulation, or FORM.")
@_set_option
@click.option("--out", "out_dir", type=click.Path(file_okay=False),
              help="Write summary.json, percentiles.csv and the figures (PNG, SVG) to this folder.")
@click.option("--save-samples", is_flag=True, help="With --out: also samples.csv, every sample's inputs "
              "and phase distances.")
@click.option("--force", is_flag=True, help="Replace existing output files.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the summary.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@_report_option
@_reported
def assess(config: str | None, samples: int, seed: int, sampler: str, method: str,
           overrides: tuple[str, ...], out_dir: str | None, save_samples: bool, force: bool, as_json: bool,
           quiet: bool, with_report: bool) -> None:
    """Probability of an overrun and percentile landing distances, by Monte Carlo.

    Samples the scenario's uncertain inputs ([uncertain."<key>"] tables), solves every landing, and
    reports percentiles of the landing distance and of each phase with their confidence intervals, the
    probability of an overrun and of stopping beyond the runway-end safety area with binomial
    intervals, and comparison lines with regulatory factors. For overrun probabilities far below 1/N,
    --method importance, subset or form estimates the probability with its coefficient of variation,
    the most likely overrun and a risk curve against runway length (--samples and --sampler then do
    not apply).
    """
    from landrisk import api, report

    if save_samples and not out_dir:
        raise click.UsageError("--save-samples needs --out DIR")
    if with_report and not out_dir:
        raise click.UsageError("--report needs --out DIR")
    scenario, uncertain = api.load_study(config, overrides)
    if method != "mc":
        rare = api.rare(scenario, uncertain, method=method, seed=seed)
        written = ([str(p) for p in api.write_rare(rare, out_dir, force=force, command=_command_line())]
                   if out_dir else None)
        _write_report(out_dir, with_report, written, force)
        if as_json:
            click.echo(json.dumps(api.rare_record(rare), indent=2, default=str))
        else:
            click.echo(report.render_rare(rare, written))
        return
    bar = _ProgressBar(not quiet)
    try:
        result = api.assess(scenario, uncertain, samples=samples, seed=seed, sampler=sampler,
                            keep_samples=save_samples, progress=bar)
    finally:
        bar.close()
    written = ([str(p) for p in api.write_assessment(result, out_dir, force=force, command=_command_line())]
               if out_dir else None)
    _write_report(out_dir, with_report, written, force)
    if as_json:
        click.echo(json.dumps({k: v for k, v in api.assessment_record(result).items()
                               if k != "scenario_text"}, indent=2, default=str))
    else:
        click.echo(report.render_assess(result, written))


def _order(value: str) -> int | None:
    if value == "auto":
        return None
    try:
        order = int(value)
    except ValueError:
        raise click.BadParameter(f"{value!r} is not a whole number or 'auto'") from None
    if not 1 <= order <= 12:
        raise click.BadParameter(f"{order} is outside 1..12")
    return order


@main.command(epilog=_HELP_CAUTION)
@_config_argument
@click.option("--method", type=click.Choice(["pce", "mc"]), default="pce", show_default=True,
              help="Polynomial chaos surrogate, or Monte Carlo pick-freeze estimators on the solver.")
@click.option("--order", default="auto", show_default=True, metavar="N|auto",
              help="Total order of the polynomial chaos, or chosen by leave-one-out error.")
@click.option("--calls", type=click.IntRange(min=20), default=None,
              help="Solver calls for the indices [pce: 1000; mc: 8192 x (inputs + 2)].")
@click.option("--seed", type=click.IntRange(min=0), default=1, show_default=True)
@click.option("--mc-check", type=click.IntRange(min=0), default=100_000, show_default=True,
              help="Monte Carlo solver runs to check the surrogate against (0: none).")
@_set_option
@click.option("--out", "out_dir", type=click.Path(file_okay=False),
              help="Write ranking.json, indices.csv and the index and tornado figures to this folder.")
@click.option("--force", is_flag=True, help="Replace existing output files.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
@_report_option
@_reported
def rank(config: str | None, method: str, order: str, calls: int | None, seed: int, mc_check: int,
         overrides: tuple[str, ...], out_dir: str | None, force: bool, as_json: bool,
         with_report: bool) -> None:
    """Rank the uncertain inputs by their influence on the landing distance and on the overrun.

    Prints first-order and total Sobol indices of the total distance for every uncertain input, the
    one-at-a-time swings of the distance and of the margin, the surrogate's validation error and tail
    check, and Sobol indices of the overrun indicator from the real solver.
    """
    from landrisk import api, report

    if with_report and not out_dir:
        raise click.UsageError("--report needs --out DIR")
    scenario, uncertain = api.load_study(config, overrides)
    result = api.rank(scenario, uncertain, method=method, calls=calls, order=_order(order), seed=seed,
                      mc_check=mc_check if method == "pce" else 0)
    written = ([str(p) for p in api.write_ranking(result, out_dir, force=force, command=_command_line())]
               if out_dir else None)
    _write_report(out_dir, with_report, written, force)
    if as_json:
        click.echo(json.dumps({k: v for k, v in api.ranking_record(result).items() if k != "scenario_text"},
                              indent=2, default=str))
    else:
        click.echo(report.render_rank(result, written))


@main.command("report", epilog=_HELP_CAUTION)
@click.argument("results_dir", type=click.Path(file_okay=False))
@click.option("--out", "out_file", type=click.Path(dir_okay=False),
              help="The HTML file to write [default: report.html in RESULTS_DIR].")
@click.option("--pdf", is_flag=True, help="Also print it to PDF (same name, .pdf) with headless Chromium.")
@click.option("--force", is_flag=True, help="Replace existing report files.")
@_reported
def report_command(results_dir: str, out_file: str | None, pdf: bool, force: bool) -> None:
    """Write one self-contained review document (HTML, optionally PDF) of a results folder.

    RESULTS_DIR is a folder written by assess --out (also with a rare-event --method) or rank --out.
    The document puts the caution first, then what was asked, the answer with its intervals, every input
    with its distribution and source, the model and its limits, the ranking, the checks and the
    provenance; its figures are embedded, so it needs no other file and no network.
    """
    from landrisk import api

    for path in api.write_report(results_dir, out_file, pdf=pdf, force=force):
        click.echo(f"wrote {path}")
    click.echo(CAUTION)


@main.command(epilog=_HELP_CAUTION)
@click.argument("path", type=click.Path(dir_okay=False))
@click.option("--force", is_flag=True, help="Replace the file if it exists.")
@_reported
def init(path: str, force: bool) -> None:
    """Write a commented starter scenario file to PATH (a copy of the invented demo)."""
    from landrisk import api

    written = api.write_starter(path, force=force)
    click.echo(f"wrote {written}; edit it, then run: landrisk solve {written}")
    click.echo(CAUTION)


if __name__ == "__main__":  # pragma: no cover
    main()

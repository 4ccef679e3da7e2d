"""The ``landrisk`` command line. It parses options, calls :mod:`landrisk.api` and prints."""

from __future__ import annotations

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
                _echo(f"error: {exc}", err=True)
                sys.exit(2)
        _print_warnings(caught)
        return result

    return run


def _print_warnings(caught: list[warnings.WarningMessage]) -> None:
    for w in caught:
        if issubclass(w.category, LandriskWarning):
            _echo(f"warning: {w.message}", err=True)


def _echo(text: str, err: bool = False) -> None:
    """Print ``text``; on a stream that cannot encode it (e.g. latin-1), in ASCII spellings."""
    from landrisk.report import ascii_text

    stream = sys.stderr if err else sys.stdout
    encoding = getattr(stream, "encoding", None) or "ascii"
    try:
        text.encode(encoding)
    except (UnicodeEncodeError, LookupError):
        text = ascii_text(text)
    click.echo(text, err=err)


_units_option = click.option(
    "--units", type=click.Choice(["si", "aviation"]), default=None,
    help="Show results in si (m, m/s, kg) or aviation (ft, kt, lb) units [default: the scenario's "
         "[scenario] units, else metres with feet beside them]. JSON stays SI.")

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
@_units_option
@_reported
def solve(config: str | None, overrides: tuple[str, ...], as_json: bool, units: str | None) -> None:
    """Deterministic landing distance of one landing at the scenario's nominal inputs.

    Prints the air distance, free roll, braking roll and total in m and ft, the stall and touchdown
    speeds in kt, the landing distance available and the margin.
    """
    from landrisk import api, report

    landing = api.solve(api.load(config, overrides))
    if as_json:
        _echo(api.dumps(api.solve_record(landing)))
    else:
        _echo(report.render_solve(landing, api.display_units(landing.scenario, units)))


class _ProgressBar:
    """A one-line progress bar on stderr, for long runs in a terminal only: over the samples of a run
    (shown above ``least`` of them) or the cases of a study."""

    def __init__(self, enabled: bool, what: str = "samples", least: int = 1 << 16) -> None:
        self.enabled = enabled and sys.stderr.isatty()
        self.what = what
        self.least = least
        self.shown = False

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled or total == 0 or total <= self.least:
            return
        width = 30
        filled = int(width * done / total)
        sys.stderr.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {done:,}/{total:,} {self.what}")
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
@click.option("--stream-above", type=click.IntRange(min=1), default=1 << 22, show_default=True,
              help="With more samples than this, the distances are counted in 1 m bins as they are made "
              "instead of kept: memory stays bounded, percentiles are within 1 m (the output says so).")
@click.option("--method", type=click.Choice(["mc", "auto", "subset", "importance", "form", "sorm"]),
              default="mc", show_default=True, help="Monte Carlo, or for rare overruns: auto (subset "
              "simulation with FORM's design point and importance sampling beside it; the one to use), "
              "subset simulation, importance sampling around the design points, FORM or SORM.")
@click.option("--target-cov", type=click.FloatRange(min=0.001, max=1.0), default=0.1, show_default=True,
              help="Rare methods: the coefficient of variation aimed at.")
@click.option("--max-calls", type=click.IntRange(min=1000), default=100_000, show_default=True,
              help="Rare methods: at most this many solver calls per discrete branch for the estimate.")
@click.option("--subset-samples", type=click.IntRange(min=100), default=1000, show_default=True,
              help="Rare methods: subset-simulation samples per level and replicate.")
@_set_option
@click.option("--out", "out_dir", type=click.Path(file_okay=False),
              help="Write summary.json, percentiles.csv and the figures (PNG, SVG) to this folder.")
@click.option("--save-samples", is_flag=True, help="With --out: also the samples (every sample's inputs "
              "and phase distances), written as they are made.")
@click.option("--samples-format", type=click.Choice(["csv", "parquet"]), default="csv", show_default=True,
              help="File format of --save-samples.")
@click.option("--force", is_flag=True, help="Replace existing output files.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the summary.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@click.option("--epistemic", "epistemic", is_flag=True, help="Also the distribution of P(overrun) over the "
              "scenario's [epistemic.\"<key>\".<parameter>] tables: median, upper quantile, drivers (Monte "
              "Carlo inner samples, --samples of them, reweighted for every outer draw).")
@click.option("--outer", type=click.IntRange(min=2), default=200, show_default=True,
              help="With --epistemic: outer draws of the epistemic parameters.")
@click.option("--epistemic-method", type=click.Choice(["reweight", "nested"]), default="reweight",
              show_default=True, help="With --epistemic: reweight one inner sample, or a nested loop.")
@_units_option
@_report_option
@_reported
def assess(config: str | None, samples: int, seed: int, sampler: str, stream_above: int, method: str,
           target_cov: float,
           max_calls: int, subset_samples: int, overrides: tuple[str, ...], out_dir: str | None,
           save_samples: bool, force: bool, as_json: bool, quiet: bool, epistemic: bool, outer: int,
           epistemic_method: str, samples_format: str, units: str | None, with_report: bool) -> None:
    """Probability of an overrun and percentile landing distances, by Monte Carlo.

    Samples the scenario's uncertain inputs ([uncertain."<key>"] tables), solves every landing, and
    reports percentiles of the landing distance and of each phase with their confidence intervals, the
    probability of an overrun and of stopping beyond the runway-end safety area with binomial
    intervals, and comparison lines with regulatory factors. For overrun probabilities far below 1/N,
    --method importance, subset or form estimates the probability with its coefficient of variation,
    the most likely overrun and a risk curve against runway length (--samples, --sampler and
    --save-samples then do not apply and are refused; --target-cov, --max-calls and --subset-samples
    apply to them only).
    """
    from landrisk import api, report

    if save_samples and not out_dir:
        raise click.UsageError("--save-samples needs --out DIR")
    ctx = click.get_current_context()
    given = [f"--{n.replace('_', '-')}" for n in ("samples", "sampler", "save_samples", "stream_above",
                                                   "target_cov", "max_calls", "subset_samples")
             if ctx.get_parameter_source(n) is not click.core.ParameterSource.DEFAULT]
    mc_only = [g for g in given if g in ("--samples", "--sampler", "--save-samples", "--stream-above")]
    rare_only = [g for g in given if g in ("--target-cov", "--max-calls", "--subset-samples")]
    if method != "mc" and mc_only:
        raise click.UsageError(f"{', '.join(mc_only)}: for Monte Carlo only, not --method {method}; "
                               "the rare methods take --target-cov, --max-calls and --subset-samples")
    if method == "mc" and rare_only:
        raise click.UsageError(f"{', '.join(rare_only)}: for the rare methods only (--method auto, subset, "
                               "importance, form, sorm)")
    if with_report and not out_dir:
        raise click.UsageError("--report needs --out DIR")
    scenario, uncertain = api.load_study(config, overrides)
    if epistemic and method != "mc":
        raise click.UsageError("--epistemic works with --method mc (Monte Carlo inner samples)")
    shown = api.display_units(scenario, units)
    if method != "mc":
        rare = api.rare(scenario, uncertain, method=method, seed=seed, target_cov=target_cov,
                        max_calls=max_calls, subset_samples=subset_samples)
        rare_written = ([str(p) for p in api.write_rare(rare, out_dir, force=force, units=shown,
                                                      command=_command_line())]
                        if out_dir else None)
        _write_report(out_dir, with_report, rare_written, force)
        if as_json:
            _echo(api.dumps(api.rare_record(rare)))
        else:
            _echo(report.render_rare(rare, rare_written, shown))
        return
    bar = _ProgressBar(not quiet)
    options: dict[str, Any] = {"samples": samples, "seed": seed, "sampler": sampler, "progress": bar,
                               "stream_above": stream_above}
    written: list[str] | None = None
    try:
        if out_dir:
            result, paths = api.assess_into(scenario, uncertain, out_dir, force=force,
                                            save_samples=save_samples, samples_format=samples_format,
                                            units=shown, command=_command_line(), **options)
            written = [str(p) for p in paths]
        else:
            result = api.assess(scenario, uncertain, **options)
    finally:
        bar.close()
    ep = (api.epistemic(scenario, uncertain, outer=outer, inner=samples, seed=seed, method=epistemic_method)
          if epistemic else None)
    if ep is not None and out_dir and written is not None:
        written += [str(p) for p in api.write_epistemic(ep, out_dir, force=True)]
    _write_report(out_dir, with_report, written, force)
    if as_json:
        record = {k: v for k, v in api.assessment_record(result).items() if k != "scenario_text"}
        if ep is not None:
            record["epistemic"] = api.epistemic_record(ep)
        _echo(api.dumps(record))
    else:
        _echo(report.render_assess(result, written, shown))
        if ep is not None:
            _echo("\n" + report.render_epistemic(ep))


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
              help="Write ranking.json, indices.csv, overrun-profile.csv and the index, tornado and "
                   "overrun-profile figures to this folder.")
@click.option("--force", is_flag=True, help="Replace existing output files.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
@_units_option
@_report_option
@_reported
def rank(config: str | None, method: str, order: str, calls: int | None, seed: int, mc_check: int,
         overrides: tuple[str, ...], out_dir: str | None, force: bool, as_json: bool, units: str | None,
         with_report: bool) -> None:
    """Rank the uncertain inputs by their influence on the landing distance and on the overrun.

    Prints first-order and total Sobol indices of the total distance for every uncertain input (each
    discrete input its own row), Shapley effects when inputs are correlated, the one-at-a-time swings of
    the distance and of the margin, the surrogate's validation error and its tail check (its P99 and
    P(overrun) against a Monte Carlo run of the real solver), and, from overrun samples of the real
    solver: each input's first-order index of the overrun indicator, its median given an overrun, and
    the change of P(overrun) per stated change of each distribution parameter.
    """
    from landrisk import api, report

    if with_report and not out_dir:
        raise click.UsageError("--report needs --out DIR")
    scenario, uncertain = api.load_study(config, overrides)
    shown = api.display_units(scenario, units)
    result = api.rank(scenario, uncertain, method=method, calls=calls, order=_order(order), seed=seed,
                      mc_check=mc_check if method == "pce" else 0)
    written = ([str(p) for p in api.write_ranking(result, out_dir, force=force, units=shown,
                                                  command=_command_line())]
               if out_dir else None)
    _write_report(out_dir, with_report, written, force)
    if as_json:
        _echo(api.dumps({k: v for k, v in api.ranking_record(result).items() if k != "scenario_text"}))
    else:
        _echo(report.render_rank(result, written, shown))


@main.command(epilog=_HELP_CAUTION)
@click.argument("config", type=click.Path(dir_okay=False))
@click.argument("reference", type=click.Path(dir_okay=False))
@_set_option
@click.option("--out", "out_dir", type=click.Path(file_okay=False),
              help="Write calibration.json, residuals.csv, calibrated.toml and the residual figure here.")
@click.option("--uncertain", is_flag=True, help="In calibrated.toml, also add the fitted keys as "
              "correlated normal uncertain inputs (the fit's covariance as a Gaussian copula).")
@click.option("--force", is_flag=True, help="Replace existing output files.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
@_reported
def calibrate(config: str, reference: str, overrides: tuple[str, ...], out_dir: str | None, uncertain: bool,
              force: bool, as_json: bool) -> None:
    """Fit the parameters of CONFIG's [calibration] table to the reference distances in REFERENCE.csv.

    REFERENCE.csv has one row per reference landing: headers name a scenario key and its unit in
    brackets (aircraft.mass [lb], conditions.headwind [kt], runway.condition_code), the column
    reference_distance [ft] the total distance from the screen height, and an optional tolerance [ft]
    each row's standard uncertainty. Prints the fitted values with standard errors, their correlation,
    the residuals and warnings where parameters are confounded.
    """
    from landrisk import api, report

    result = api.calibrate(api.load(config, overrides), reference)
    written = ([str(p) for p in api.write_calibration(result, out_dir, force=force, uncertain=uncertain)]
               if out_dir else None)
    if as_json:
        _echo(api.dumps(api.calibration_record(result)))
    else:
        _echo(report.render_calibration(result, written))


@main.command(epilog=_HELP_CAUTION)
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option("--out", "out_dir", type=click.Path(file_okay=False),
              help="Write study.json, study.csv, study.parquet and the figures; finished cases are kept "
              "in DIR/cache and reused by a rerun.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes [default: the number of cores].")
@click.option("--dask", "use_dask", is_flag=True, help="Run on a dask.distributed LocalCluster.")
@click.option("--scheduler", metavar="ADDRESS", default=None,
              help="Run on the dask.distributed scheduler at ADDRESS (tcp://host:8786).")
@click.option("--seed", type=click.IntRange(min=0), default=None, help="Replace the study's seed.")
@click.option("--samples", type=click.IntRange(min=100), default=None,
              help="Replace the study's Monte Carlo samples per case.")
@click.option("--force", is_flag=True, help="Replace existing output files.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@_units_option
@_report_option
@_reported
def study(study_file: str, out_dir: str | None, as_json: bool, workers: int | None, use_dask: bool,
          scheduler: str | None, seed: int | None, samples: int | None, force: bool, quiet: bool,
          units: str | None, with_report: bool) -> None:
    """Many cases of one scenario: P(overrun) per case, paired comparisons and the yearly risk.

    STUDY_FILE names a base scenario and [[case]] tables and/or a [grid] of overrides (any key, and
    parameters of uncertain inputs: 'uncertain."runway.braking_mu".mode' = 0.25), optional
    [[comparison]] pairs evaluated on common random numbers, and an optional [exposure] table (landings
    per year, a mix of the cases, a target level of safety).
    """
    from pathlib import Path

    from landrisk import api, report

    if use_dask and scheduler:
        raise click.UsageError("give --dask or --scheduler, not both")
    if with_report and not out_dir:
        raise click.UsageError("--report needs --out DIR")
    if out_dir and not force:
        existing = [n for n in ("study.json", "study.csv") if (Path(out_dir) / n).exists()]
        if existing:
            raise LandriskError(f"{out_dir}: {existing[0]} exists; use --force to replace it (finished "
                                "cases are reused from the cache)")
    bar = _ProgressBar(not quiet, "cases and comparisons", least=0)
    try:
        result = api.study(study_file, seed=seed, samples=samples, workers=workers, use_dask=use_dask,
                           scheduler=scheduler, cache_dir=Path(out_dir) / "cache" if out_dir else None,
                           progress=bar)
    finally:
        bar.close()
    shown = api.display_units(result.base, units) if result.base is not None else units
    written = ([str(p) for p in api.write_study(result, out_dir, force=True, units=shown,
                                                command=_command_line())]
               if out_dir else None)
    _write_report(out_dir, with_report, written, True)
    if as_json:
        record = {k: v for k, v in api.study_record(result).items() if not k.endswith("_text")}
        _echo(api.dumps(record))
    else:
        _echo(report.render_study(result, written, shown))


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

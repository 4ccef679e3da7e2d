"""The high-level entry points: what the command line does, in a few lines from Python.

>>> import landrisk.api as lr
>>> scenario = lr.load()                      # the embedded, invented demo scenario
>>> result = lr.solve(scenario)               # one landing, every phase
>>> round(result.total_m)                     # doctest: +SKIP
947
>>> table = lr.solve_many(scenario, {"runway.braking_mu": [0.2, 0.3, 0.4]})   # a pandas DataFrame
>>> scenario, uncertain = lr.load_study()     # the demo with its uncertain inputs
>>> result = lr.assess(scenario, uncertain, samples=100_000, seed=1)
>>> lr.percentile_table(result)               # doctest: +SKIP

Each function is a few lines over the layers below: :mod:`landrisk.io` reads scenarios,
:mod:`landrisk.studies` computes, :mod:`landrisk.export` turns results into records, tables and files.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Callable, Iterable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

from numpy.typing import ArrayLike

from landrisk.errors import ConfigError, LandriskWarning, SolveError
from landrisk.export import (
    SampleStream,
    assessment_record,
    dumps,
    percentile_table,
    rank_table,
    ranking_record,
    rare_record,
    samples_table,
    solve_record,
    write_assessment,
    write_ranking,
    write_rare,
)
from landrisk.export.writers import previous_files
from landrisk.io import UncertainSet, load_scenario
from landrisk.io import load_study as _load_study
from landrisk.io.config import demo_text
from landrisk.io.output import StagedFolder, write_text_new
from landrisk.model import Scenario, SingleLanding, solve_landings, solve_one

if TYPE_CHECKING:
    import pandas as pd

    from landrisk.studies import Assessment, AssessSettings, Ranking, RareAssessment
    from landrisk.studies.calibrate import Calibration
    from landrisk.studies.epistemic import EpistemicAssessment
    from landrisk.studies.study import StudyResult

__all__ = [
    "AssessSettings",
    "Assessment",
    "Calibration",
    "EpistemicAssessment",
    "SingleLanding",
    "assess",
    "assess_into",
    "assessment_record",
    "calibrate",
    "calibrated_scenario_text",
    "calibration_record",
    "display_units",
    "dumps",
    "epistemic",
    "epistemic_record",
    "load",
    "load_study",
    "percentile_table",
    "rank",
    "rank_record",
    "rank_table",
    "ranking_record",
    "rare",
    "rare_full_record",
    "rare_record",
    "samples_table",
    "solve",
    "solve_many",
    "solve_record",
    "study",
    "study_record",
    "study_table",
    "write_assessment",
    "write_calibration",
    "write_epistemic",
    "write_ranking",
    "write_rare",
    "write_report",
    "write_starter",
    "write_study",
]

#: Older names of the record functions, kept for scripts written against them.
rank_record = ranking_record
rare_full_record = rare_record


def load(path: str | Path | None = None, overrides: Iterable[str] = ()) -> Scenario:
    """Read a scenario file (``None``: the embedded demo) with ``KEY=VALUE`` overrides."""
    return load_scenario(path, overrides)


def load_study(
    path: str | Path | None = None, overrides: Iterable[str] = ()
) -> tuple[Scenario, UncertainSet]:
    """Read a scenario and its uncertain inputs (``None``: the embedded demo)."""
    return _load_study(path, overrides)


def solve(scenario: Scenario) -> SingleLanding:
    """The deterministic landing of ``scenario`` at its nominal inputs.

    Raises
    ------
    landrisk.errors.SolveError
        If lift exceeds weight at touchdown or the aircraft cannot stop.
    """
    try:
        return SingleLanding.of(scenario, solve_one(scenario.case()))
    except SolveError as exc:
        raise SolveError(f"{scenario.source}: {exc}") from None


def solve_many(scenario: Scenario, values: Mapping[str, ArrayLike]) -> pd.DataFrame:
    """Many landings of ``scenario`` with some keys replaced by arrays (one value per landing).

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    values : mapping
        Dotted key -> array of values in the key's unit (see ``landrisk.model.schema``).

    Returns
    -------
    pandas.DataFrame
        One row per landing: the varied inputs, then every result column of
        :class:`landrisk.model.LandingResult` (metres, m/s, seconds, flags).
    """
    from landrisk.export import landings_table

    return landings_table(values, solve_landings(scenario.case(values)))


def write_starter(path: str | Path, force: bool = False) -> Path:
    """Write a commented starter scenario (the invented demo, every key explained) to ``path``."""
    from landrisk import CAUTION

    header = (
        "# Starter scenario written by `landrisk init`: a copy of the invented demo. Replace every value\n"
        "# with your own data; see the README for the meaning, unit and range of each key.\n"
        f"# {CAUTION}\n"
    )
    return write_text_new(Path(path), header + demo_text(), force=force)


def write_report(folder: str | Path, out: str | Path | None = None, *, pdf: bool = False,
                 force: bool = False) -> list[Path]:
    """Write the review document of a results folder: ``report.html`` (or ``out``) and with ``pdf`` the
    PDF beside it, printed by headless Chromium. See :mod:`landrisk.document`."""
    from landrisk.document import write_report as _write_report

    return _write_report(folder, out, pdf=pdf, force=force)


def _warn_fixed(uncertain: UncertainSet) -> None:
    for key in uncertain.fixed:
        warnings.warn(f"{key} is fixed by --set; its distribution is not used", LandriskWarning,
                      stacklevel=3)


def assess(
    scenario: Scenario,
    uncertain: UncertainSet,
    *,
    samples: int = 100_000,
    seed: int = 1,
    sampler: str = "random",
    chunk: int = 1 << 16,
    keep_samples: bool = False,
    progress: Callable[[int, int], None] | None = None,
    sink: Callable[[Any, Any], None] | None = None,
    stream_above: int = 1 << 22,
) -> Assessment:
    """Monte Carlo overrun assessment of ``scenario`` over its ``uncertain`` inputs.

    Returns the :class:`landrisk.studies.Assessment`; see :func:`percentile_table`,
    :func:`samples_table` and :func:`assessment_record` for pandas and JSON views of it. ``sink(x, y)``
    receives each chunk of samples as it is made. Beyond ``stream_above`` samples (without
    ``keep_samples``) the outputs are counted in 1 m bins chunk by chunk instead of kept: memory stays
    bounded, and percentiles are within 1 m of the sample's (the result says so).
    """
    from landrisk.studies.assess import AssessSettings, assess

    _warn_fixed(uncertain)
    settings = AssessSettings(samples=samples, seed=seed, sampler=sampler, chunk=chunk,
                              keep_samples=keep_samples, stream_above=stream_above)
    return assess(scenario, uncertain.problem(), settings, progress=progress, record=uncertain.record(),
                  sink=sink)


def assess_into(
    scenario: Scenario,
    uncertain: UncertainSet,
    folder: str | Path,
    *,
    force: bool = False,
    save_samples: bool = False,
    samples_format: str = "csv",
    units: str | None = None,
    figures: bool = True,
    command: str | None = None,
    **options: Any,
) -> tuple[Assessment, list[Path]]:
    """:func:`assess` writing its result set into ``folder`` (see :func:`write_assessment`).

    With ``save_samples`` every sample is written as it is made (``samples.csv`` or
    ``samples.parquet``), not kept in memory. The set is written into a hidden sibling folder and swapped
    in when complete: a rerun with ``force`` leaves the complete old set or the complete new one.
    ``options`` go to :func:`assess`.
    """
    from landrisk.plotting import FIGURES

    if samples_format not in ("csv", "parquet"):
        raise ConfigError("is not a samples format", key="--samples-format", value=samples_format,
                          allowed="csv or parquet")
    folder = Path(folder)
    sample_file = f"samples.{samples_format}"
    names = ["summary.json", "percentiles.csv", *([sample_file] if save_samples else []),
             *([f"{k}.{e}" for k in FIGURES for e in ("png", "svg")] if figures else [])]
    with StagedFolder(folder, names, force=force, previous=previous_files(folder, "summary.json")) as st:
        stream = None
        if save_samples:
            stream = SampleStream(st.path(sample_file), uncertain.problem().names,
                                  float(scenario.values["runway.lda"]), samples_format, units)
        try:
            result = assess(scenario, uncertain, sink=stream, **options)
        finally:
            if stream is not None:
                stream.close()
        paths = write_assessment(result, folder, figures=figures, units=units, stage=st, stream=stream,
                                 command=command)
    return result, paths


def display_units(scenario: Scenario, option: str | None = None) -> str | None:
    """The unit system results are shown in: ``option`` (--units), else the scenario's ``[scenario]
    units``, else None (metres with feet beside them)."""
    if option:
        return option
    chosen = scenario.values.get("scenario.units") or None
    if chosen is not None and chosen not in ("si", "aviation"):
        raise ConfigError("is not a unit system", file=scenario.source, key="scenario.units", value=chosen,
                          allowed="si or aviation")
    return chosen


def rank(
    scenario: Scenario,
    uncertain: UncertainSet,
    *,
    method: str = "pce",
    calls: int | None = None,
    order: int | None = None,
    seed: int = 1,
    mc_check: int = 100_000,
) -> Ranking:
    """Rank the uncertain inputs by Sobol indices (polynomial chaos or Monte Carlo); see studies.rank."""
    from landrisk.studies.rank import RankSettings
    from landrisk.studies.rank import rank as rank_inputs

    _warn_fixed(uncertain)
    settings = RankSettings(method=method, calls=calls, order=order, seed=seed, mc_check=mc_check)
    ranking = rank_inputs(scenario, uncertain.problem(), settings)
    return dataclasses.replace(ranking, record=uncertain.record())


def rare(
    scenario: Scenario,
    uncertain: UncertainSet,
    *,
    method: str = "auto",
    seed: int = 1,
    target_cov: float = 0.1,
    risk_curve: bool = True,
    **options: Any,
) -> RareAssessment:
    """P(overrun) by auto (the default), subset simulation, importance sampling, FORM or SORM; see
    studies.rare.

    ``options`` are further fields of :class:`landrisk.studies.RareSettings` (``max_calls``,
    ``subset_samples``, ...).
    """
    from landrisk.studies.rare import RareSettings, rare_assess

    _warn_fixed(uncertain)
    settings = RareSettings(method=method, seed=seed, target_cov=target_cov, risk_curve=risk_curve, **options)
    return dataclasses.replace(rare_assess(scenario, uncertain.problem(), settings),
                               record=uncertain.record())


def calibrate(scenario: Scenario, reference: str | Path) -> Calibration:
    """Fit the parameters of the scenario's ``[calibration]`` table to the reference CSV ``reference``.

    See :mod:`landrisk.io.calibration` for the formats and :mod:`landrisk.studies.calibrate` for the
    fit; :func:`calibration_record`, :func:`calibrated_scenario_text` and :func:`write_calibration`
    give its JSON record, the calibrated scenario file and a results folder.
    """
    from landrisk.io.calibration import calibration_parameters, read_reference
    from landrisk.studies.calibrate import FitParameter
    from landrisk.studies.calibrate import calibrate as fit

    specs = calibration_parameters(scenario.text, scenario.source, scenario)
    table = read_reference(reference)
    params = [FitParameter(p.name, p.lower, p.upper, p.start, p.unit) for p in specs]
    return fit(scenario, params, table.columns, table.reference_m, table.tolerance_m,
                      lines=table.lines, reference_source=table.source)


def epistemic(
    scenario: Scenario,
    uncertain: UncertainSet,
    *,
    outer: int = 200,
    inner: int = 100_000,
    seed: int = 1,
    method: str = "reweight",
    upper_level: float = 0.95,
) -> EpistemicAssessment:
    """The distribution of P(overrun) over the scenario's ``[epistemic."<key>".<parameter>]`` tables:
    its median, an upper quantile and the parameters that drive it; see studies.epistemic."""
    from landrisk.io.epistemic import epistemic_parameters
    from landrisk.studies.epistemic import EpistemicSettings, epistemic_assess

    _warn_fixed(uncertain)
    params = epistemic_parameters(scenario.text, scenario.source, uncertain)
    settings = EpistemicSettings(outer=outer, inner=inner, seed=seed, method=method, upper_level=upper_level)
    return epistemic_assess(scenario, uncertain.problem(), params, settings)


def calibration_record(c: Calibration) -> dict[str, Any]:
    """The JSON record of a calibration (see :mod:`landrisk.export.calibration`)."""
    from landrisk.export import calibration

    return calibration.calibration_record(c)


def calibrated_scenario_text(c: Calibration, *, uncertain: bool = False) -> str:
    """The scenario file with the fitted values in place, each with its ``source`` line."""
    from landrisk.export import calibration

    return calibration.calibrated_scenario_text(c, uncertain=uncertain)


def write_calibration(c: Calibration, folder: str | Path, *, force: bool = False,
                      uncertain: bool = False, figures: bool = True) -> list[Path]:
    """calibration.json, residuals.csv, calibrated.toml and the residual figure."""
    from landrisk.export import calibration

    return calibration.write_calibration(c, folder, force=force, uncertain=uncertain, figures=figures)


def epistemic_record(e: EpistemicAssessment) -> dict[str, Any]:
    """The JSON record of an epistemic assessment (median, upper quantile, drivers)."""
    from landrisk.export import epistemic as records

    return records.epistemic_record(e)


def write_epistemic(e: EpistemicAssessment, folder: str | Path, *, force: bool = False,
                    figures: bool = True) -> list[Path]:
    """epistemic.json, epistemic.csv and the figure of P(overrun) over the epistemic parameters."""
    from landrisk.export import epistemic as records

    return records.write_epistemic(e, folder, force=force, figures=figures)


def study_record(r: StudyResult) -> dict[str, Any]:
    """The JSON record of a study (see :mod:`landrisk.export.study`)."""
    from landrisk.export import study as records

    return records.study_record(r)


def study_table(r: StudyResult, units: str | None = None) -> pd.DataFrame:
    """One row per case of a study: its overrides, method, P(overrun) with interval, yearly figures."""
    from landrisk.export import study as records

    return records.study_table(r, units)


def write_study(r: StudyResult, folder: str | Path, **options: Any) -> list[Path]:
    """study.json, study.csv, study.parquet and the study's figures (see export.study.write_study)."""
    from landrisk.export import study as records

    return records.write_study(r, folder, **options)


def __getattr__(name: str) -> Any:
    # The result and settings classes, re-exported without importing every study up front.
    if name in ("AssessSettings", "Assessment"):
        import importlib

        return getattr(importlib.import_module("landrisk.studies.assess"), name)

    raise AttributeError(f"module 'landrisk.api' has no attribute {name!r}")


def study(
    path: str | Path,
    *,
    seed: int | None = None,
    samples: int | None = None,
    workers: int | None = None,
    use_dask: bool = False,
    scheduler: str | None = None,
    cache_dir: str | Path | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> StudyResult:
    """Run the study file at ``path``: every case, comparison and the yearly risk (see studies.study).

    ``seed`` and ``samples`` replace the file's; ``cache_dir`` keeps each finished case so that a rerun
    computes only what changed (the CLI uses ``<out>/cache``).
    """
    from dataclasses import replace

    from landrisk.io.study import CaseCache, load_study_file, resolve_case
    from landrisk.studies.study import Exposure, StudyCase, StudySettings, exposure_risk, run_study

    spec = load_study_file(path)
    cases = []
    for c in spec.cases:
        scenario, uncertain = resolve_case(spec, c)
        cases.append(StudyCase(c.name, c.written(), scenario, uncertain.problem(), uncertain.record()))
    settings = StudySettings(samples=samples or spec.samples, seed=spec.seed if seed is None else seed,
                             method=spec.method, min_events=spec.min_events, split=spec.split,
                             subset_samples=spec.subset_samples)
    result = run_study(cases, [(x.baseline, x.alternative) for x in spec.comparisons], settings,
                       workers=workers, use_dask=use_dask, scheduler=scheduler,
                       cache=CaseCache(cache_dir) if cache_dir is not None else None, progress=progress)
    exposure = None
    if spec.exposure is not None:
        x = spec.exposure
        exposure = exposure_risk(result.cases, Exposure(x.landings_per_year, x.mix, x.target_per_year,
                                                        x.target_per_landing), settings.confidence)
    base, base_uncertain = resolve_case(spec, type(spec.cases[0])("base", "", ()))
    return replace(result, name=spec.name, source=spec.source, text=spec.text, base=base,
                   base_uncertain=base_uncertain.record(), exposure=exposure)

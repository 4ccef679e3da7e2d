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

from landrisk.errors import LandriskWarning, SolveError
from landrisk.export import (
    assessment_record,
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
from landrisk.io import UncertainSet, load_scenario
from landrisk.io import load_study as _load_study
from landrisk.io.config import demo_text
from landrisk.io.output import write_text_new
from landrisk.model import Scenario, SingleLanding, solve_landings, solve_one
from landrisk.studies import (
    Assessment,
    AssessSettings,
    Ranking,
    RankSettings,
    RareAssessment,
    RareSettings,
)
from landrisk.studies import assess as _assess
from landrisk.studies import rank as _rank
from landrisk.studies import rare_assess as _rare_assess

if TYPE_CHECKING:
    import pandas as pd

__all__ = [
    "AssessSettings",
    "Assessment",
    "SingleLanding",
    "assess",
    "assessment_record",
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
    "write_assessment",
    "write_ranking",
    "write_rare",
    "write_report",
    "write_starter",
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
    header = (
        "# Starter scenario written by `landrisk init`: a copy of the invented demo. Replace every value\n"
        "# with your own data; see the README for the meaning, unit and range of each key.\n"
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
) -> Assessment:
    """Monte Carlo overrun assessment of ``scenario`` over its ``uncertain`` inputs.

    Returns the :class:`landrisk.studies.Assessment`; see :func:`percentile_table`,
    :func:`samples_table` and :func:`assessment_record` for pandas and JSON views of it.
    """
    _warn_fixed(uncertain)
    settings = AssessSettings(samples=samples, seed=seed, sampler=sampler, chunk=chunk,
                              keep_samples=keep_samples)
    return _assess(scenario, uncertain.problem(), settings, progress=progress, record=uncertain.record())


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
    _warn_fixed(uncertain)
    settings = RankSettings(method=method, calls=calls, order=order, seed=seed, mc_check=mc_check)
    return dataclasses.replace(_rank(scenario, uncertain.problem(), settings), record=uncertain.record())


def rare(
    scenario: Scenario,
    uncertain: UncertainSet,
    *,
    method: str = "importance",
    seed: int = 1,
    target_cov: float = 0.1,
    risk_curve: bool = True,
    **options: Any,
) -> RareAssessment:
    """P(overrun) by FORM, importance sampling or subset simulation; see studies.rare.

    ``options`` are further fields of :class:`landrisk.studies.RareSettings` (``max_calls``,
    ``subset_samples``, ...).
    """
    _warn_fixed(uncertain)
    settings = RareSettings(method=method, seed=seed, target_cov=target_cov, risk_curve=risk_curve, **options)
    result = _rare_assess(scenario, uncertain.problem(), settings)
    return dataclasses.replace(result, record=uncertain.record())

"""Writing a result's files: one skeleton for every command that writes a folder.

:func:`write_result_set` takes the record (the JSON summary), the tables (CSV) and the figures (PNG and
SVG) of one result and writes them together into one folder: each file atomically, none over an existing
file without ``force``, each CSV headed by the run's provenance and each figure carrying it in its
metadata, and the summary listing every file written beside it.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from landrisk.export.records import assessment_record, inputs_hash, ranking_record, rare_record
from landrisk.export.tables import percentile_table, rank_table, risk_curve_table, samples_table
from landrisk.io.output import comment_header, write_files
from landrisk.studies import Assessment, Ranking, RareAssessment

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["write_assessment", "write_ranking", "write_rare", "write_result_set"]

#: Keys of a record that make up the provenance written into every CSV header and figure.
_PROVENANCE = ("tool", "version", "caution", "scenario", "source", "overrides", "seed", "sampler", "samples",
               "method")
#: Keys of a record written after the inputs in CSV headers and figure metadata: when and how it was made.
_RUN = ("created_utc", "inputs_sha256", "command")


def _file_key(name: str) -> str:
    stem, _, ext = name.rpartition(".")
    return f"{stem}_{ext}"


def write_result_set(
    folder: str | Path,
    summary_name: str,
    record: dict[str, Any],
    tables: Mapping[str, pd.DataFrame],
    figures: Mapping[str, Callable[[Any], Any]],
    result: Any,
    *,
    inputs: Mapping[str, Any],
    force: bool = False,
    command: str | None = None,
) -> list[Path]:
    """Write ``summary_name`` (the JSON ``record``), each table as CSV and each figure as PNG and SVG.

    Parameters
    ----------
    folder : str or Path
        The results folder (created if missing).
    summary_name : str
        File name of the JSON summary (``summary.json``, ``ranking.json``).
    record : dict
        The JSON-ready record; its provenance keys head every CSV and go into every figure's metadata.
        A ``files`` entry is added: file key (``percentiles_csv``) -> file name, every file written.
    tables : mapping
        CSV file name -> DataFrame.
    figures : mapping
        Figure stem -> function of ``result`` returning a matplotlib figure.
    inputs : mapping
        The resolved scenario values, recorded with the provenance.
    command : str, optional
        The command line that produced the result, recorded with the provenance.

    The record gains ``created_utc`` (ISO 8601, UTC, to the second), ``inputs_sha256`` (see
    :func:`landrisk.export.inputs_hash`) and ``command`` (``None`` when not given).
    """
    record = {**record, "created_utc": datetime.now(UTC).replace(microsecond=0).isoformat(),
              "inputs_sha256": inputs_hash(inputs, record.get("uncertain")), "command": command}
    meta = {k: record[k] for k in _PROVENANCE if k in record}
    run = {k: record[k] for k in _RUN}
    head = {**meta, "inputs": dict(inputs)}
    if "uncertain" in record:
        head["uncertain"] = record["uncertain"]
    head.update(run)
    files: dict[str, str | bytes] = {name: comment_header(head) + frame.to_csv(index=False)
                                     for name, frame in tables.items()}
    if figures:
        from landrisk.plotting import figure_bytes

        fig_meta = {**meta, "inputs": dict(inputs), **run}
        for stem, make in figures.items():
            fig = make(result)  # drawn once, saved twice
            for fmt in ("png", "svg"):
                files[f"{stem}.{fmt}"] = figure_bytes(fig, fmt, fig_meta, close=fmt == "svg")
    names = [summary_name, *files]
    record = {**record, "files": {_file_key(n): n for n in names}}
    files = {summary_name: json.dumps(record, indent=2, default=str) + "\n", **files}
    return write_files(Path(folder), files, force=force)


def write_assessment(a: Assessment, folder: str | Path, *, force: bool = False,
                     figures: bool = True, command: str | None = None) -> list[Path]:
    """summary.json, percentiles.csv, the figures (PNG and SVG) and, if kept, samples.csv."""
    tables = {"percentiles.csv": percentile_table(a)}
    if a.inputs is not None:
        tables["samples.csv"] = samples_table(a)
    figs: dict[str, Callable[[Any], Any]] = {}
    if figures:
        from landrisk.plotting import FIGURES

        figs = dict(FIGURES)
    return write_result_set(folder, "summary.json", assessment_record(a), tables, figs, a,
                            inputs=a.scenario.values, force=force, command=command)


def write_ranking(r: Ranking, folder: str | Path, *, force: bool = False,
                  command: str | None = None) -> list[Path]:
    """ranking.json, indices.csv and the index and tornado figures (and the surrogate's exceedance)."""
    from landrisk.plotting import RANK_FIGURES

    figs = {k: f for k, f in RANK_FIGURES.items() if r.method == "pce" or k != "surrogate-exceedance"}
    return write_result_set(folder, "ranking.json", ranking_record(r), {"indices.csv": rank_table(r)}, figs,
                            r, inputs=r.scenario.values, force=force, command=command)


def write_rare(r: RareAssessment, folder: str | Path, *, force: bool = False,
               command: str | None = None) -> list[Path]:
    """summary.json and, with a risk curve, risk-curve.csv and its figure (PNG and SVG)."""
    tables, figs = {}, {}
    if r.risk_curve is not None:
        from landrisk.plotting import risk_curve_figure

        tables["risk-curve.csv"] = risk_curve_table(r)
        figs["risk-curve"] = risk_curve_figure
    return write_result_set(folder, "summary.json", rare_record(r), tables, figs, r,
                            inputs=r.scenario.values, force=force, command=command)

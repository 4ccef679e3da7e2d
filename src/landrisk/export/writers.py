"""Writing a result's files: one skeleton for every command that writes a folder.

:func:`write_result_set` takes the record (the JSON summary), the tables (CSV) and the figures (PNG and
SVG) of one result and writes them together into one folder as a set (:class:`landrisk.io.output.
StagedFolder`: a rerun with ``force`` leaves the complete old set or the complete new set, never a mix).
CSV files are plain (a header row with the unit of each column, then data: ``pandas.read_csv`` reads
them with no options); the run's provenance is in the JSON summary, which lists every file of the set
and carries its ``run_id``, and in each figure's metadata.

Samples can be written as they are made (:class:`SampleStream`), in CSV or Parquet, so that a large run
never holds them all in memory.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterable, Mapping, Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import ConfigError
from landrisk.export.records import (
    assessment_record,
    dumps,
    inputs_hash,
    json_safe,
    ranking_record,
    rare_record,
)
from landrisk.export.tables import (
    Units,
    overrun_profile_table,
    percentile_table,
    rank_table,
    risk_curve_table,
    samples_columns,
    samples_table,
)
from landrisk.io.output import StagedFolder
from landrisk.units import DisplayUnits

if TYPE_CHECKING:
    import pandas as pd

    from landrisk.studies import Assessment, Ranking, RareAssessment

__all__ = ["SAMPLE_FORMATS", "SampleStream", "previous_files", "write_assessment", "write_ranking",
           "write_rare", "write_result_set"]

#: Keys of a record that make up the provenance written into every figure.
_PROVENANCE = ("tool", "version", "caution", "scenario", "source", "overrides", "seed", "sampler", "samples",
               "method", "run_id")
#: File formats of the samples.
SAMPLE_FORMATS = ("csv", "parquet")
#: Names every result set may hold (dropped by a rerun even when the new set has no such file).
_KNOWN = ("summary.json", "ranking.json", "percentiles.csv", "samples.csv", "samples.parquet",
          "indices.csv", "risk-curve.csv")
#: Keys of a record written after the inputs in figure metadata: when and how it was made.
_RUN = ("created_utc", "inputs_sha256", "command")


def _file_key(name: str) -> str:
    stem, _, ext = name.rpartition(".")
    return f"{stem}_{ext}"


def previous_files(folder: str | Path, summary_name: str) -> list[str]:
    """The files of an earlier result set in ``folder``, as its summary lists them (and known names)."""
    path = Path(folder) / summary_name
    names = set(_KNOWN)
    try:
        files = json.loads(path.read_text(encoding="utf-8")).get("files", {})
        names |= {str(v) for v in files.values() if isinstance(v, str) and "/" not in v}
    except (OSError, ValueError, AttributeError):
        pass
    return sorted(names)


def _figure_names(figures: Iterable[str]) -> list[str]:
    return [f"{stem}.{fmt}" for stem in figures for fmt in ("png", "svg")]


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
    stage: StagedFolder | None = None,
    streamed: Sequence[str] = (),
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
        The JSON-ready record; its provenance keys go into every figure's metadata. A ``files`` entry is
        added (file key such as ``percentiles_csv`` -> file name, every file of the set) and ``run_id``.
    tables : mapping
        CSV file name -> DataFrame.
    figures : mapping
        Figure stem -> function of ``result`` returning a matplotlib figure.
    inputs : mapping
        The resolved scenario values, recorded in the figures' metadata.
    stage : StagedFolder, optional
        An open staging folder holding files already written (``streamed``); committed here.
    command : str, optional
        The command line that produced the result, recorded with the provenance.

    The record gains ``created_utc`` (ISO 8601, UTC, to the second), ``inputs_sha256`` (see
    :func:`landrisk.export.inputs_hash`) and ``command`` (``None`` when not given).
    """
    record = {**record, "created_utc": datetime.now(UTC).replace(microsecond=0).isoformat(),
              "inputs_sha256": inputs_hash(inputs, record.get("uncertain")), "command": command}
    names = [summary_name, *tables, *streamed, *_figure_names(figures)]
    if stage is None:
        with StagedFolder(Path(folder), names, force=force,
                          previous=previous_files(folder, summary_name)) as st:
            return _fill(st, names, summary_name, record, tables, figures, result, inputs)
    return _fill(stage, names, summary_name, record, tables, figures, result, inputs)


def _fill(stage: StagedFolder, names: list[str], summary_name: str, record: dict[str, Any],
          tables: Mapping[str, pd.DataFrame], figures: Mapping[str, Callable[[Any], Any]], result: Any,
          inputs: Mapping[str, Any]) -> list[Path]:
    """Write the set's files into ``stage``, the summary last, and swap the set in."""
    record = {**record, "run_id": stage.run_id, "files": {_file_key(n): n for n in names}}
    meta = {k: record[k] for k in _PROVENANCE if k in record}
    for name, frame in tables.items():
        stage.write(name, frame.to_csv(index=False))
    if figures:
        from landrisk.plotting import figure_bytes

        fig_meta = json_safe({**meta, "inputs": dict(inputs), **{k: record[k] for k in _RUN}})
        for stem, make in figures.items():
            fig = make(result)  # drawn once, saved twice
            for fmt in ("png", "svg"):
                stage.write(f"{stem}.{fmt}", figure_bytes(fig, fmt, fig_meta, close=fmt == "svg"))
    stage.write(summary_name, dumps(record) + "\n")
    stage.names = names
    return stage.commit()


class SampleStream:
    """Writes each chunk of samples (inputs and outputs) to ``samples.csv`` or ``samples.parquet`` as it
    is made; use as the ``sink`` of :func:`landrisk.studies.assess`.

    Parameters
    ----------
    path : Path
        The file to write (in a staging folder).
    names : sequence of str
        The uncertain inputs, in the order of the sample's columns.
    lda_m : float
        The scenario's LDA (for the ``lda`` column of landings that cannot stop).
    fmt : str
        ``csv`` or ``parquet``.
    units : DisplayUnits or str, optional
        The unit system of the columns (SI by default).
    """

    def __init__(self, path: Path, names: Sequence[str], lda_m: float, fmt: str = "csv",
                 units: Units = None) -> None:
        if fmt not in SAMPLE_FORMATS:
            raise ConfigError(f"unknown samples format {fmt!r}; allowed: {', '.join(SAMPLE_FORMATS)}")
        self.path = path
        self.names = list(names)
        self.lda_m = lda_m
        self.fmt = fmt
        self.units = units
        self.rows = 0
        self._writer: Any = None
        self._fh: Any = None

    @property
    def name(self) -> str:
        return self.path.name

    def __call__(self, x: NDArray[np.float64], y: Mapping[str, NDArray]) -> None:
        import pandas as pd

        frame = pd.DataFrame(samples_columns(self.names, x, y, self.lda_m, self.units))
        if self.fmt == "csv":
            if self._fh is None:
                self._fh = self.path.open("w", encoding="utf-8", newline="")
            frame.to_csv(self._fh, index=False, header=self.rows == 0)
        else:
            import pyarrow as pa
            import pyarrow.parquet as pq

            table = pa.Table.from_pandas(frame, preserve_index=False)
            if self._writer is None:
                self._writer = pq.ParquetWriter(self.path, table.schema)
            self._writer.write_table(table)
        self.rows += len(frame)

    def close(self) -> None:
        """Finish the file (Parquet needs its footer)."""
        if self._fh is not None:
            self._fh.close()
            self._fh = None
        if self._writer is not None:
            self._writer.close()
            self._writer = None


def _assess_figures(figures: bool, units: Units) -> dict[str, Callable[[Any], Any]]:
    if not figures:
        return {}
    from functools import partial

    from landrisk.plotting import FIGURES

    system = units.system if isinstance(units, DisplayUnits) else units
    return {k: partial(f, units=system) for k, f in FIGURES.items()}


def write_assessment(a: Assessment, folder: str | Path, *, force: bool = False, figures: bool = True,
                     units: Units = None, samples_format: str = "csv",
                     stage: StagedFolder | None = None, stream: SampleStream | None = None,
                     command: str | None = None) -> list[Path]:
    """summary.json, percentiles.csv, the figures (PNG and SVG) and, if kept, the samples.

    The samples are ``samples.csv`` or ``samples.parquet`` (``samples_format``): from the assessment if
    it kept them, or already written by ``stream`` into the open ``stage``.
    """
    tables = {"percentiles.csv": percentile_table(a, units)}
    streamed: list[str] = []
    if stream is not None:
        stream.close()
        streamed.append(stream.name)
    elif a.inputs is not None:
        if samples_format not in SAMPLE_FORMATS:
            raise ConfigError(f"unknown samples format {samples_format!r}; allowed: csv, parquet")
        if samples_format == "csv":
            tables["samples.csv"] = samples_table(a, units)
        else:
            streamed.append("samples.parquet")
    record = assessment_record(a)
    if streamed and stream is None:  # parquet from samples kept in memory: write them into the stage
        names = ["summary.json", *tables, *streamed, *_figure_names(_assess_figures(figures, units))]
        with StagedFolder(Path(folder), names, force=force,
                          previous=previous_files(folder, "summary.json")) as st:
            samples_table(a, units).to_parquet(st.path("samples.parquet"), index=False)
            return write_result_set(folder, "summary.json", record, tables, _assess_figures(figures, units),
                                    a, inputs=a.scenario.values, stage=st, streamed=streamed,
                                    command=command)
    return write_result_set(folder, "summary.json", record, tables, _assess_figures(figures, units), a,
                            inputs=a.scenario.values, force=force, stage=stage, streamed=streamed,
                            command=command)


def write_ranking(r: Ranking, folder: str | Path, *, force: bool = False, units: Units = None,
                  command: str | None = None) -> list[Path]:
    """ranking.json, indices.csv and the index and tornado figures (and the surrogate's exceedance)."""
    from functools import partial

    from landrisk.plotting import RANK_FIGURES

    system = units.system if isinstance(units, DisplayUnits) else units
    figs = {k: (f if k == "indices" else partial(f, units=system)) for k, f in RANK_FIGURES.items()
            if r.method == "pce" or k != "surrogate-exceedance"}
    tables = {"indices.csv": rank_table(r, units), "overrun-profile.csv": overrun_profile_table(r, units)}
    return write_result_set(folder, "ranking.json", ranking_record(r), tables, figs, r,
                            inputs=r.scenario.values, force=force, command=command)


def write_rare(r: RareAssessment, folder: str | Path, *, force: bool = False,
               units: Units = None, command: str | None = None) -> list[Path]:
    """summary.json and, with a risk curve, risk-curve.csv and its figure (PNG and SVG)."""
    tables, figs = {}, {}
    if r.risk_curve is not None:
        from functools import partial

        from landrisk.plotting import risk_curve_figure

        tables["risk-curve.csv"] = risk_curve_table(r, units)
        figs["risk-curve"] = partial(risk_curve_figure,
                                     units=units.system if isinstance(units, DisplayUnits) else units)
    return write_result_set(folder, "summary.json", rare_record(r), tables, figs, r,
                            inputs=r.scenario.values, force=force, command=command)

"""Results as records (JSON), tables (pandas) and files: what every command writes, in one place."""

from landrisk.export.records import (
    assessment_record,
    input_units,
    inputs_hash,
    provenance,
    ranking_record,
    rare_record,
    solve_record,
    summary_record,
)
from landrisk.export.tables import (
    landings_table,
    percentile_table,
    rank_table,
    risk_curve_table,
    samples_table,
)
from landrisk.export.writers import write_assessment, write_ranking, write_rare, write_result_set

__all__ = [
    "assessment_record",
    "input_units",
    "inputs_hash",
    "landings_table",
    "percentile_table",
    "provenance",
    "rank_table",
    "ranking_record",
    "rare_record",
    "risk_curve_table",
    "samples_table",
    "solve_record",
    "summary_record",
    "write_assessment",
    "write_ranking",
    "write_rare",
    "write_result_set",
]

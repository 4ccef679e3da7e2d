"""Results as records (JSON), tables (pandas) and files: what every command writes, in one place."""

from landrisk.export.records import (
    assessment_record,
    dumps,
    input_units,
    inputs_hash,
    json_safe,
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
    samples_columns,
    samples_table,
)
from landrisk.export.writers import (
    SAMPLE_FORMATS,
    SampleStream,
    write_assessment,
    write_ranking,
    write_rare,
    write_result_set,
)

__all__ = [
    "SAMPLE_FORMATS",
    "SampleStream",
    "assessment_record",
    "dumps",
    "input_units",
    "inputs_hash",
    "json_safe",
    "landings_table",
    "percentile_table",
    "provenance",
    "rank_table",
    "ranking_record",
    "rare_record",
    "risk_curve_table",
    "samples_columns",
    "samples_table",
    "solve_record",
    "summary_record",
    "write_assessment",
    "write_ranking",
    "write_rare",
    "write_result_set",
]

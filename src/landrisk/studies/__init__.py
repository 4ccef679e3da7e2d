"""Studies that join the landing model and the uncertainty machinery."""

from landrisk.studies.assess import (
    COMPARISON_FACTORS,
    PERCENTILES,
    PHASES,
    Assessment,
    AssessSettings,
    ComparisonLine,
    assess,
    landing_model,
    samples_frame_columns,
    summary_record,
)

__all__ = [
    "COMPARISON_FACTORS",
    "PERCENTILES",
    "PHASES",
    "AssessSettings",
    "Assessment",
    "ComparisonLine",
    "assess",
    "landing_model",
    "samples_frame_columns",
    "summary_record",
]

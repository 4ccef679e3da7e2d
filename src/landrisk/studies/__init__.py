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
from landrisk.studies.rank import InputRank, Ranking, RankSettings, rank, ranking_record

__all__ = [
    "COMPARISON_FACTORS",
    "PERCENTILES",
    "PHASES",
    "AssessSettings",
    "Assessment",
    "ComparisonLine",
    "InputRank",
    "RankSettings",
    "Ranking",
    "assess",
    "landing_model",
    "rank",
    "ranking_record",
    "samples_frame_columns",
    "summary_record",
]

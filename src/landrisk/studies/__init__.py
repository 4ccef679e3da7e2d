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
from landrisk.studies.rare import RARE_METHODS, RareAssessment, RareSettings, rare_assess, rare_record

__all__ = [
    "COMPARISON_FACTORS",
    "PERCENTILES",
    "PHASES",
    "RARE_METHODS",
    "AssessSettings",
    "Assessment",
    "ComparisonLine",
    "InputRank",
    "RankSettings",
    "Ranking",
    "RareAssessment",
    "RareSettings",
    "assess",
    "landing_model",
    "rank",
    "ranking_record",
    "rare_assess",
    "rare_record",
    "samples_frame_columns",
    "summary_record",
]

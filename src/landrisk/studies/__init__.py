"""Studies that join the landing model and the uncertainty machinery. They compute; they neither
format nor write (records, tables and files are :mod:`landrisk.export`'s)."""

from landrisk.studies.assess import (
    COMPARISON_FACTORS,
    PERCENTILES,
    PHASES,
    Assessment,
    AssessSettings,
    ComparisonLine,
    assess,
)
from landrisk.studies.binding import OUTPUTS, Branch, landing_model, limit_state
from landrisk.studies.rank import InputRank, Ranking, RankSettings, rank
from landrisk.studies.rare import RARE_METHODS, RareAssessment, RareSettings, rare_assess

__all__ = [
    "COMPARISON_FACTORS",
    "OUTPUTS",
    "PERCENTILES",
    "PHASES",
    "RARE_METHODS",
    "AssessSettings",
    "Assessment",
    "Branch",
    "ComparisonLine",
    "InputRank",
    "RankSettings",
    "Ranking",
    "RareAssessment",
    "RareSettings",
    "assess",
    "landing_model",
    "limit_state",
    "rank",
    "rare_assess",
]

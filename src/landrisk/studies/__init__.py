"""Studies that join the landing model and the uncertainty machinery. They compute; they neither
format nor write (records, tables and files are :mod:`landrisk.export`'s).

Each study module is imported on first use of one of its names, so that a command imports only the
methods it runs (``rank`` brings in chaospy, ``solve`` none of them). The functions that share a name
with their module are imported from the module itself: ``from landrisk.studies.assess import assess``,
``from landrisk.studies.rank import rank``.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from landrisk._lazy import lazy_names

if TYPE_CHECKING:
    from landrisk.studies.assess import (
        COMPARISON_FACTORS,
        PERCENTILES,
        PHASES,
        Assessment,
        AssessSettings,
        ComparisonLine,
    )
    from landrisk.studies.binding import OUTPUTS, Branch, landing_model, limit_state
    from landrisk.studies.rank import InputRank, Ranking, RankSettings
    from landrisk.studies.rare import RARE_METHODS, RareAssessment, RareSettings, rare_assess

_WHERE = {
    "landrisk.studies.assess": ("COMPARISON_FACTORS", "PERCENTILES", "PHASES", "Assessment",
                                "AssessSettings", "ComparisonLine"),
    "landrisk.studies.binding": ("OUTPUTS", "Branch", "landing_model", "limit_state"),
    "landrisk.studies.rank": ("InputRank", "Ranking", "RankSettings"),
    "landrisk.studies.rare": ("RARE_METHODS", "RareAssessment", "RareSettings", "rare_assess"),
}
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
    "landing_model",
    "limit_state",
    "rare_assess",
]


__getattr__, __dir__ = lazy_names("landrisk.studies", _WHERE, globals())

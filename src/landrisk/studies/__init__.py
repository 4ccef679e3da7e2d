"""Studies that join the landing model and the uncertainty machinery. They compute; they neither
format nor write (records, tables and files are :mod:`landrisk.export`'s).

Each study module is imported on first use of one of its names, so that a command imports only the
methods it runs (``rank`` brings in chaospy, ``solve`` none of them). ``assess`` and ``rank`` name
functions here, as their modules do (``import landrisk.studies.assess as module`` gives the function
too: use ``importlib.import_module`` for the module itself).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from landrisk._lazy import keep_functions, lazy_names

if TYPE_CHECKING:
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

_WHERE = {
    "landrisk.studies.assess": ("COMPARISON_FACTORS", "PERCENTILES", "PHASES", "Assessment",
                                "AssessSettings", "ComparisonLine", "assess"),
    "landrisk.studies.binding": ("OUTPUTS", "Branch", "landing_model", "limit_state"),
    "landrisk.studies.rank": ("InputRank", "Ranking", "RankSettings", "rank"),
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
    "assess",
    "landing_model",
    "limit_state",
    "rank",
    "rare_assess",
]


__getattr__, __dir__ = lazy_names("landrisk.studies", _WHERE, globals())
keep_functions(__name__, ("assess", "rank"))

"""The landing model: scenario keys, the landing case built from them, and the vectorised solver."""

from landrisk.model.case import DEFAULT_ROLLING_MU, LandingCase, case_from_values
from landrisk.model.scenario import Scenario, SingleLanding
from landrisk.model.schema import KEYS, Key
from landrisk.model.solver import LandingResult, solve_landings, solve_one

__all__ = [
    "DEFAULT_ROLLING_MU",
    "KEYS",
    "Key",
    "LandingCase",
    "LandingResult",
    "Scenario",
    "SingleLanding",
    "case_from_values",
    "solve_landings",
    "solve_one",
]

"""The epistemic study: how sure we are of P(overrun) when the inputs' distributions are uncertain.

Binds the landing model's overrun indicator (margin < 0) to :func:`landrisk.uq.epistemic_probability`:
an outer sample of the epistemic parameters, one inner Monte Carlo sample of landings at the nominal
distributions reweighted for every outer draw (nested runs where the reweighting fails), the median and
an upper quantile of P(overrun) over the outer draws, and the parameters that drive it.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import LandriskError
from landrisk.model import Scenario
from landrisk.studies.binding import landing_model
from landrisk.uq import Problem
from landrisk.uq.epistemic import (
    EPISTEMIC_METHODS,
    EpistemicParameter,
    EpistemicResult,
    epistemic_probability,
)

__all__ = ["EpistemicAssessment", "EpistemicSettings", "epistemic_assess"]


@dataclass(frozen=True)
class EpistemicSettings:
    """How the epistemic study is run."""

    outer: int = 200
    inner: int = 100_000
    seed: int = 1
    method: str = "reweight"
    upper_level: float = 0.95
    min_ess_fraction: float = 0.1


@dataclass(frozen=True)
class EpistemicAssessment:
    """P(overrun) over the epistemic parameters of ``scenario`` (see :class:`EpistemicResult`)."""

    scenario: Scenario
    settings: EpistemicSettings
    result: EpistemicResult


def epistemic_assess(
    scenario: Scenario,
    problem: Problem,
    parameters: Sequence[EpistemicParameter],
    settings: EpistemicSettings | None = None,
) -> EpistemicAssessment:
    """The distribution of P(overrun) over ``parameters`` (the uncertain parameters of ``problem``'s
    distributions); Monte Carlo inner samples of the landing model."""
    s = settings or EpistemicSettings()
    if not parameters:
        raise LandriskError(f"{scenario.source}: the scenario has no epistemic parameters; add "
                            '[epistemic."<key>".<parameter>] tables (see the README)')
    if s.method not in EPISTEMIC_METHODS:
        raise LandriskError(f"the epistemic method must be one of {', '.join(EPISTEMIC_METHODS)} "
                            f"(got {s.method!r})")
    if s.outer < 2 or s.inner < 1:
        raise LandriskError(f"--outer must be at least 2 (got {s.outer}) and the samples at least 1")
    if not 0.5 <= s.upper_level < 1:
        raise LandriskError(f"the upper level must lie in [0.5, 1) (got {s.upper_level})")
    model = landing_model(scenario, problem.names)

    def failed(x: NDArray[np.float64]) -> NDArray[np.bool_]:
        return np.asarray(model(x)["margin_m"] < 0)

    try:
        result = epistemic_probability(problem, parameters, failed, outer=s.outer, inner=s.inner, seed=s.seed,
                                       method=s.method, min_ess_fraction=s.min_ess_fraction,
                                       upper_level=s.upper_level)
    except ValueError as exc:
        raise LandriskError(f"{scenario.source}: epistemic study: {exc}") from None
    return EpistemicAssessment(scenario, s, result)

"""The landing model bound to the uncertainty layer: the one home of what every study shares.

- :func:`landing_model` binds the columns of a sample matrix X[n, d] to dotted scenario keys and
  returns the vectorised model f(X) -> {output: y[n]} that the generic methods of :mod:`landrisk.uq`
  call.
- :func:`limit_state` is the margin g = LDA - total landing distance [m] as a function of independent
  standard normal variables u, through the problem's Gaussian copula and marginals
  (:meth:`landrisk.uq.Problem.from_standard_normal`); an overrun is g < 0.
- :func:`discrete_branches` and :func:`split_discrete`: methods that need continuous inputs (polynomial
  chaos, the rare-event methods in standard normal space) condition on every combination of the
  discrete inputs' values (reverser used, runway condition code) and mix the results by its
  probability; the discrete inputs are taken as independent of each other and of the rest.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import LandriskError, SolveError
from landrisk.model import KEYS, Scenario, solve_landings
from landrisk.uq import Problem

__all__ = [
    "OUTPUTS",
    "Branch",
    "LandingModel",
    "LimitState",
    "branch_label",
    "discrete_branches",
    "landing_model",
    "limit_state",
    "split_discrete",
]

#: The solver outputs every study model returns (metres, m/s and flags).
OUTPUTS = ("total_m", "air_distance_m", "free_roll_m", "braking_m", "margin_m",
           "runway_end_ground_speed", "overrun", "lift_exceeds_weight", "cannot_stop")

Array = NDArray[np.float64]
LandingModel = Callable[[Array], dict[str, NDArray]]
LimitState = Callable[[Array], Array]


def landing_model(scenario: Scenario, keys: tuple[str, ...]) -> LandingModel:
    """The vectorised model f(X[n, d]) of the scenario, X's columns being the dotted ``keys``.

    Each column is cast to its key's type (:meth:`landrisk.model.Key.cast_array`: whole-valued keys
    rounded, true/false keys compared with 1/2). Samples the solver cannot evaluate (a headwind at or
    above the touchdown speed) raise :class:`~landrisk.errors.SolveError` naming the scenario.
    """
    specs = [KEYS[k] for k in keys]

    def f(x: Array) -> dict[str, NDArray]:
        values = {spec.name: spec.cast_array(x[:, j]) for j, spec in enumerate(specs)}
        try:
            r = solve_landings(scenario.case(values))
        except ValueError as exc:
            raise SolveError(f"{scenario.source}: samples the model cannot evaluate ({exc}); "
                             "truncate the distributions involved (for a headwind: its upper bound "
                             "below the touchdown speed)") from None
        return {name: getattr(r, name) for name in OUTPUTS}

    return f


def limit_state(
    scenario: Scenario, problem: Problem, values: dict[str, Any]
) -> tuple[LimitState, LandingModel]:
    """g(u) = margin [m] in the standard normal space of ``problem`` (its continuous inputs), with the
    discrete inputs fixed at ``values``; and the landing model underneath (inputs in physical units)."""
    model = landing_model(scenario.with_values(**values) if values else scenario, problem.names)

    def g(u: Array) -> Array:
        return model(problem.from_standard_normal(u))["margin_m"]

    return g, model


@dataclass(frozen=True)
class Branch:
    """One combination of the discrete inputs' values and its probability."""

    values: dict[str, Any]
    probability: float

    @property
    def label(self) -> str:
        """``procedure.use_reverse = True`` or ``all landings``."""
        return branch_label(self.values)


def branch_label(values: dict[str, Any]) -> str:
    """The discrete values of a branch in words (``all landings`` when there are none)."""
    return ", ".join(f"{k} = {v}" for k, v in values.items()) or "all landings"


def discrete_branches(problem: Problem, disc: list[int]) -> list[Branch]:
    """Every combination of the discrete inputs' values with its probability (independent inputs)."""
    choices = []
    for i in disc:
        levels, probs = problem.marginals[i].choices()
        choices.append([(problem.names[i], float(v), float(p)) for v, p in zip(levels, probs, strict=True)
                        if p > 0])
    out = []
    for combo in itertools.product(*choices) if choices else [()]:
        values = {k: KEYS[k].cast(v) for k, v, _ in combo}
        out.append(Branch(values, float(np.prod([p for _, _, p in combo])) if combo else 1.0))
    return out


def split_discrete(problem: Problem) -> tuple[list[int], list[int], Problem]:
    """Indices of the discrete and continuous inputs, and the Problem of the continuous ones."""
    disc = [i for i, m in enumerate(problem.marginals) if m.discrete]
    cont = [i for i, m in enumerate(problem.marginals) if not m.discrete]
    if problem.spearman is not None and disc:
        r = problem.spearman
        if np.any(r[np.ix_(disc, cont)] != 0) or np.any(r[np.ix_(disc, disc)] - np.eye(len(disc)) != 0):
            raise LandriskError("a discrete input cannot take part in a rank correlation for `rank`")
    sub = None if problem.spearman is None else problem.spearman[np.ix_(cont, cont)]
    if sub is not None and np.allclose(sub, np.eye(len(cont))):
        sub = None
    cont_problem = Problem(tuple(problem.names[i] for i in cont), tuple(problem.marginals[i] for i in cont),
                           sub)
    return disc, cont, cont_problem

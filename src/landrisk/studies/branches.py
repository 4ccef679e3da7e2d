"""Discrete uncertain inputs (reverser used, runway condition code): their branches and probabilities.

Methods that need continuous inputs (polynomial chaos, rare-event methods in standard normal space)
condition on every combination of the discrete inputs' values and mix the results by its probability;
the discrete inputs are taken as independent of each other and of the rest.
"""

from __future__ import annotations

import itertools
from typing import Any

import numpy as np

from landrisk.errors import LandriskError
from landrisk.model import KEYS
from landrisk.uq import Problem

__all__ = ["cast_value", "discrete_branches", "split_discrete"]


def cast_value(key: str, v: float) -> Any:
    """A sampled value in the key's own type (see :meth:`landrisk.model.Key.cast`)."""
    return KEYS[key].cast(v)


def discrete_branches(problem: Problem, disc: list[int]) -> list[tuple[dict[str, Any], float]]:
    """Every combination of the discrete inputs' values with its probability (independent inputs)."""
    choices = []
    for i in disc:
        m = problem.marginals[i]
        values, probs = m.choices()
        choices.append([(problem.names[i], float(v), float(p)) for v, p in zip(values, probs, strict=True)
                        if p > 0])
    out = []
    for combo in itertools.product(*choices) if choices else [()]:
        values = {k: cast_value(k, v) for k, v, _ in combo}
        out.append((values, float(np.prod([p for _, _, p in combo])) if combo else 1.0))
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

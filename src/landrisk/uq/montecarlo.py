"""Monte Carlo: evaluate a vectorised model on samples of a Problem, in chunks of bounded memory.

The calling convention, shared by the uncertainty methods: ``sample`` the problem, evaluate
``f(X[n, d]) -> {name: y[n]}``, then ``analyse`` the outputs (see :mod:`landrisk.uq.stats`).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from landrisk.uq.distributions import Problem
from landrisk.uq.sampling import Seed, uniform_chunks

__all__ = ["MonteCarloRun", "run_monte_carlo", "sample"]

Model = Callable[[NDArray[np.float64]], Mapping[str, NDArray]]
Progress = Callable[[int, int], None]


def sample(problem: Problem, n: int, *, sampler: str = "random", seed: Seed = None) -> NDArray[np.float64]:
    """All n input samples x[n, d] at once (for small n; :func:`run_monte_carlo` works in chunks)."""
    return np.concatenate([problem.transform(u) for u in uniform_chunks(n, problem.dimension,
                                                                        sampler=sampler, seed=seed)])


@dataclass(frozen=True)
class MonteCarloRun:
    """Outputs of a Monte Carlo run.

    Attributes
    ----------
    outputs : dict of numpy.ndarray
        Every output of the model, one value per sample, in sample order.
    inputs : numpy.ndarray or None
        The input samples x[n, d] when kept (``keep_inputs=True``).
    n : int
        Number of samples.
    sampler : str
    """

    outputs: dict[str, NDArray]
    inputs: NDArray[np.float64] | None
    n: int
    sampler: str


def run_monte_carlo(
    problem: Problem,
    model: Model,
    n: int,
    *,
    sampler: str = "random",
    seed: Seed = None,
    chunk: int = 1 << 16,
    keep_inputs: bool = False,
    keep: tuple[str, ...] | None = None,
    progress: Progress | None = None,
) -> MonteCarloRun:
    """Draw n samples of ``problem`` and evaluate ``model`` on them, ``chunk`` samples at a time.

    Parameters
    ----------
    problem : Problem
        The uncertain inputs.
    model : callable
        f(x[m, d]) -> mapping of output name -> array of m values.
    n : int
        Number of samples.
    sampler : str
        ``random``, ``sobol``, ``halton`` or ``lhs``.
    seed : int, numpy.random.Generator or None
        Makes the run reproducible; the results do not depend on ``chunk``.
    chunk : int
        Samples per model call (bounds the working memory).
    keep_inputs : bool
        Keep the input samples (n x d floats).
    keep : tuple of str, optional
        Outputs to keep (default: all).
    progress : callable, optional
        Called as progress(done, n) after each chunk.
    """
    outputs: dict[str, NDArray] = {}
    inputs = np.empty((n, problem.dimension)) if keep_inputs else None
    done = 0
    for u in uniform_chunks(n, problem.dimension, sampler=sampler, seed=seed, chunk=chunk):
        x = problem.transform(u)
        y = model(x)
        m = x.shape[0]
        if not outputs:
            names = keep if keep is not None else tuple(y)
            outputs = {k: np.empty(n, dtype=np.asarray(y[k]).dtype) for k in names}
        for k, arr in outputs.items():
            arr[done : done + m] = y[k]
        if inputs is not None:
            inputs[done : done + m] = x
        done += m
        if progress is not None:
            progress(done, n)
    return MonteCarloRun(outputs=outputs, inputs=inputs, n=n, sampler=sampler)

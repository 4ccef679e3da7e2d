"""Uniform points in (0, 1)^d from an explicit seed, in chunks, identical whatever the chunk size.

Samplers: ``random`` (numpy PCG64 generator), ``sobol`` and ``halton`` (scrambled, scipy.stats.qmc), and
``lhs`` (Latin hypercube, scipy.stats.qmc). Pseudo-random, Sobol and Halton points are drawn in sequence,
so a run in chunks gives exactly the points of one draw; a Latin hypercube needs all its n points at
once and is drawn whole. Points are kept inside [2^-53, 1 - 2^-53] so that inverse transforms of
unbounded distributions stay finite.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterator

import numpy as np
from numpy.typing import NDArray

__all__ = ["SAMPLERS", "Seed", "normalize_seed", "uniform_chunks"]

SAMPLERS = ("random", "sobol", "halton", "lhs")
Seed = int | np.random.Generator | None
_EPS = 2.0**-53


def normalize_seed(seed: Seed) -> np.random.Generator:
    """A numpy Generator from an int, a Generator (returned as is) or None (fresh entropy)."""
    if isinstance(seed, np.random.Generator):
        return seed
    if seed is not None and (not isinstance(seed, int | np.integer) or seed < 0):
        raise ValueError(f"seed must be a non-negative integer, a numpy Generator or None, not {seed!r}")
    return np.random.default_rng(seed)


def uniform_chunks(
    n: int, d: int, *, sampler: str = "random", seed: Seed = None, chunk: int = 1 << 16
) -> Iterator[NDArray[np.float64]]:
    """Yield uniform points u[m, d] in chunks of at most ``chunk`` rows, n rows in all."""
    if sampler not in SAMPLERS:
        raise ValueError(f"unknown sampler {sampler!r}; choose one of {', '.join(SAMPLERS)}")
    if n < 1 or d < 1 or chunk < 1:
        raise ValueError("n, d and chunk must be positive")
    rng = normalize_seed(seed)
    if sampler == "lhs":
        from scipy.stats import qmc  # imported only for the quasi-random samplers (scipy.stats is slow)

        whole = qmc.LatinHypercube(d, seed=rng).random(n)
        for s in range(0, n, chunk):
            yield np.clip(whole[s : s + chunk], _EPS, 1.0 - _EPS)
        return
    engine = None
    if sampler in ("sobol", "halton"):
        from scipy.stats import qmc

        engine = (qmc.Sobol if sampler == "sobol" else qmc.Halton)(d, scramble=True, seed=rng)
    done = 0
    while done < n:
        m = min(chunk, n - done)
        if engine is None:
            u = rng.random((m, d))
        else:
            with warnings.catch_warnings():  # balance warnings for counts that are not powers of 2
                warnings.simplefilter("ignore", UserWarning)
                u = engine.random(m)
        done += m
        yield np.clip(u, _EPS, 1.0 - _EPS, out=u)  # u is a new array of this chunk's own

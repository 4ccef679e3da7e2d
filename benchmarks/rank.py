"""Benchmark: polynomial chaos on the demo against a 10^6-sample Monte Carlo, and indices from coefficients.

For each call budget, the surrogate's mean, sd, P50 and P99 are compared with a 10^6-sample Monte Carlo
of the real solver (random sampler); the first budget where all four agree within 0.5 % is reported with
its wall time. Then the time to compute Sobol indices from the coefficients of an expansion of 924
terms (6 inputs, total order 6).
Run on one core:  python benchmarks/rank.py
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import time  # noqa: E402

import numpy as np  # noqa: E402

from landrisk import __version__, api  # noqa: E402
from landrisk.uq.chaos import _index_set, sobol_indices  # noqa: E402


def main() -> None:
    scenario, uncertain = api.load_study()
    t0 = time.perf_counter()
    mc = api.assess(scenario, uncertain, samples=1_000_000, seed=11)
    t_mc = time.perf_counter() - t0
    ref = {"mean": mc.moments["total_m"][0], "sd": mc.moments["total_m"][1]}
    ref.update({f"p{p.p:g}": p.value for p in mc.percentiles["total_m"] if p.p in (50.0, 99.0)})
    print(f"landrisk {__version__} polynomial-chaos benchmark (one core), demo scenario")
    print(f"  reference: 10^6-sample Monte Carlo in {t_mc:.2f} s: mean {ref['mean']:.1f} m, "
          f"sd {ref['sd']:.1f} m, P50 {ref['p50']:.1f} m, P99 {ref['p99']:.1f} m")
    cols = ("calls", "order", "terms", "mean", "sd", "P50", "P99", "time [s]")
    print("  " + " ".join(f"{c:>{w}}" for c, w in zip(cols, (6, 5, 5, 7, 7, 7, 7, 9), strict=True)))
    reached = None
    for calls in (200, 400, 600, 800, 1000):
        t0 = time.perf_counter()
        r = api.rank(scenario, uncertain, calls=calls, seed=1, mc_check=0)
        dt = time.perf_counter() - t0
        by = {p.p: p.value for p in r.surrogate["percentiles"]}
        diffs = [r.surrogate["mean_m"] / ref["mean"] - 1, r.surrogate["sd_m"] / ref["sd"] - 1,
                 by[50.0] / ref["p50"] - 1, by[99.0] / ref["p99"] - 1]
        ok = max(abs(x) for x in diffs) <= 0.005
        if ok and reached is None:
            reached = (calls, dt)
        row = " ".join(f"{100 * x:+6.2f}%" for x in diffs)
        print(f"  {calls:>6} {r.chaos['order']:>5} {r.chaos['terms']:>5} {row} {dt:9.2f}"
              + ("  within 0.5 %" if ok else ""))
    if reached:
        print(f"  0.5 % agreement first reached with {reached[0]} solver calls, {reached[1]:.2f} s for the "
              "whole ranking (10^6 surrogate samples, tail check and overrun-indicator indices included)")
    idx = _index_set(6, 6, 1.0)
    coef = np.random.default_rng(0).normal(size=(2, idx.shape[0]))
    t0 = time.perf_counter()
    for _ in range(20):
        sobol_indices(idx, list(coef), [0.97, 0.03], [f"x{i}" for i in range(6)], "branch")
    print(f"  Sobol indices from the coefficients of {idx.shape[0]} terms (two branches): "
          f"{(time.perf_counter() - t0) / 20 * 1e3:.2f} ms")


if __name__ == "__main__":
    main()

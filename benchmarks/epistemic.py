"""Benchmark: the epistemic run on the demo, reweighting one inner sample against the nested loop.

Prints, for each method, the median and 95th percentile of P(overrun) over the outer draws of the
demo's epistemic parameters, the solver calls and the time; and the time of a calibration of the demo
against its invented reference table. Run once, on one core:
    python benchmarks/epistemic.py [--outer 50] [--inner 20000]
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

from landrisk import __version__, api  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--outer", type=int, default=50, help="outer draws of the epistemic parameters")
    ap.add_argument("--inner", type=int, default=20_000, help="inner Monte Carlo samples")
    args = ap.parse_args()
    scenario, uncertain = api.load_study()
    print(f"landrisk {__version__} epistemic benchmark (one core): demo, {args.outer} outer draws, "
          f"{args.inner:,} inner samples")
    print(f"  {'method':<10}{'median':>11}{'95th pct':>11}{'solver calls':>14}{'time [s]':>10}{'nested':>8}")
    for method in ("reweight", "nested"):
        t0 = time.perf_counter()
        r = api.epistemic(scenario, uncertain, outer=args.outer, inner=args.inner, seed=1,
                          method=method).result
        dt = time.perf_counter() - t0
        print(f"  {method:<10}{np.median(r.probability):11.3e}{np.quantile(r.probability, 0.95):11.3e}"
              f"{r.solver_calls:14,d}{dt:10.2f}{int(r.nested.sum()):8d}")
    t0 = time.perf_counter()
    c = api.calibrate(api.load(ROOT / "configs" / "demo.toml"),
                      ROOT / "configs" / "demo-reference-distances-invented.csv")
    print(f"  calibration of {len(c.parameters)} parameters to {c.reference_m.size} rows: "
          f"{c.solver_calls:,} solver calls, {time.perf_counter() - t0:.2f} s")


if __name__ == "__main__":
    main()

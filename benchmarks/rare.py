"""Benchmark: rare overrun probabilities on the demo at a runway length where P(overrun) ~ 1e-7.

Runs FORM, importance sampling (target CoV 10 %) and subset simulation and prints each one's estimate,
coefficient of variation, solver calls and time, beside the crude Monte Carlo cost for the same CoV,
(1 - P) / (P CoV^2) samples.
Run on one core:  python benchmarks/rare.py [--lda 2580]
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import time  # noqa: E402

from landrisk import __version__, api  # noqa: E402
from landrisk.studies import RareSettings, rare_assess  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--lda", type=float, default=2580.0, help="landing distance available [m]")
    ap.add_argument("--subset-samples", type=int, default=1000, help="per level and replicate")
    args = ap.parse_args()
    scenario, uncertain = api.load_study(None, [f'runway.lda="{args.lda} m"'])
    print(f"landrisk {__version__} rare-event benchmark (one core): demo, LDA {args.lda:.0f} m")
    print(f"  {'method':<12}{'P(overrun)':>12}{'CoV':>8}{'calls':>9}{'time [s]':>10}  notes")
    for method in ("form", "importance", "subset"):
        t0 = time.perf_counter()
        r = rare_assess(scenario, uncertain.problem(),
                        RareSettings(method=method, cross_check=False, risk_curve=False,
                                     subset_samples=args.subset_samples))
        dt = time.perf_counter() - t0
        cov = "-" if method == "form" else f"{100 * r.cov:.1f}%"
        print(f"  {method:<12}{r.probability:12.3e}{cov:>8}{r.calls:9,d}{dt:10.2f}  "
              + ("converged" if r.converged else "NOT converged: " + "; ".join(r.messages)))
        if method == "importance":
            p = r.probability
    print(f"  crude Monte Carlo would need about {(1 - p) / (p * 0.1**2):.1e} samples for a 10 % CoV")


if __name__ == "__main__":
    main()

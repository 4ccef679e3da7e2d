"""Benchmark: rare overrun probabilities, calls, CoV and wall time.

1. The demo at a runway length where P(overrun) ~ 1e-7 (LDA 2580 m): every method, and ``auto`` with the
   risk curve (the whole of ``landrisk assess --method auto``), beside the crude Monte Carlo cost for the
   same CoV, (1 - P) / (P CoV^2) samples.
2. An invented scenario with three discrete inputs (12 branches, some of which cannot overrun):
   tests/data/rare-three-discrete-invented.toml.

Run on one core:  python benchmarks/rare.py [--lda 2580]
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

from landrisk import __version__, api  # noqa: E402
from landrisk.studies import RareSettings, rare_assess  # noqa: E402

THREE = Path(__file__).parent.parent / "tests" / "data" / "rare-three-discrete-invented.toml"


def _row(label: str, scenario, uncertain, settings: RareSettings) -> float:
    t0, c0 = time.perf_counter(), time.process_time()
    r = rare_assess(scenario, uncertain.problem(), settings)
    dt, cpu = time.perf_counter() - t0, time.process_time() - c0
    cov = "-" if r.method in ("form", "sorm") else f"{100 * r.cov:.1f}%"
    warn = [m for m in r.messages if m.startswith("WARNING")]
    print(f"  {label:<22}{r.probability:12.3e}{cov:>8}{r.calls:9,d}{dt:9.2f}{cpu:9.2f}  "
          + ("converged" if r.converged else "NOT converged") + (" ; " + warn[0][:60] if warn else ""))
    return r.probability


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--lda", type=float, default=2580.0, help="landing distance available [m]")
    ap.add_argument("--subset-samples", type=int, default=1000, help="per level and replicate")
    args = ap.parse_args()
    print(f"landrisk {__version__} rare-event benchmark (one core)")
    header = f"  {'method':<22}{'P(overrun)':>12}{'CoV':>8}{'calls':>9}{'wall [s]':>9}{'cpu [s]':>9}  notes"
    scenario, uncertain = api.load_study(None, [f'runway.lda="{args.lda} m"'])
    print(f"demo, LDA {args.lda:.0f} m\n{header}")
    p = 0.0
    for method in ("auto", "subset", "importance", "form", "sorm"):
        p = _row(method, scenario, uncertain, RareSettings(method=method, risk_curve=False,
                                                           subset_samples=args.subset_samples)) or p
    _row("auto + risk curve", scenario, uncertain, RareSettings(subset_samples=args.subset_samples))
    if p > 0:
        print(f"  crude Monte Carlo would need about {(1 - p) / (p * 0.1**2):.1e} samples for a 10 % CoV")
    scenario, uncertain = api.load_study(str(THREE), [])
    print(f"{scenario.name} (three discrete inputs, invented)\n{header}")
    _row("auto + risk curve", scenario, uncertain, RareSettings(subset_samples=args.subset_samples))


if __name__ == "__main__":
    main()

"""Benchmark: the Monte Carlo assessment of the demo scenario, end to end, at several sample counts.

Each size runs in a fresh process (so that its peak memory is its own) and is timed from reading the
scenario to the finished summary record; figures and files are timed separately for one size.
Run on one core:  python benchmarks/assess.py [--sizes 1000000 10000000]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile

CHILD = r"""
import json, resource, sys, time
t0 = time.perf_counter()
from landrisk import api
n, figures = int(sys.argv[1]), sys.argv[2] == "1"
scenario, uncertain = api.load_study()
a = api.assess(scenario, uncertain, samples=n, seed=1)
record = api.assessment_record(a)
t1 = time.perf_counter()
if figures:
    api.write_assessment(a, sys.argv[3], force=True)
t2 = time.perf_counter()
print(json.dumps({"samples": n, "assess_s": t1 - t0, "files_s": t2 - t1,
                  "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
                  "p_overrun": record["p_overrun"], "overruns": record["overruns"],
                  "p99_m": record["percentiles_m"].get("99")}))
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[100_000, 1_000_000, 10_000_000])
    ap.add_argument("--figures-at", type=int, default=1_000_000, help="size at which files are timed")
    args = ap.parse_args()
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    print("landrisk assess benchmark: demo scenario, random sampler, seed 1, one core")
    print(f"{'samples':>12} {'assess [s]':>11} {'files [s]':>10} {'peak RSS [MB]':>14} {'P(overrun)':>11}")
    with tempfile.TemporaryDirectory() as out:
        for n in args.sizes:
            figures = "1" if n == args.figures_at else "0"
            res = subprocess.run([sys.executable, "-c", CHILD, str(n), figures, out], env=env,
                                 capture_output=True, text=True, check=True)
            r = json.loads(res.stdout.strip().splitlines()[-1])
            files = f"{r['files_s']:10.2f}" if figures == "1" else f"{'-':>10}"
            print(f"{n:>12,d} {r['assess_s']:11.2f} {files} {r['peak_mb']:14.0f} {r['p_overrun']:11.2e}")


if __name__ == "__main__":
    main()

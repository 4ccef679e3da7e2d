"""Benchmark: studies. (1) One large Monte Carlo case cut into seeded chunks: time and peak memory of
the process (samples are not kept, so memory should not grow with the sample count). (2) A 48-case study
on 1 and 2 workers: the speed-up.

Run:  python benchmarks/study.py [--samples 10000000] [--cases-samples 5000]
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
BASE = (ROOT / "configs" / "study-base-invented.toml").as_posix()

CHILD = r"""
import json, resource, sys, time
from landrisk import api
t0 = time.perf_counter()
r = api.study(sys.argv[1], workers=int(sys.argv[2]))
t1 = time.perf_counter()
c = r.cases[0]
print(json.dumps({"cases": len(r.cases), "workers": int(sys.argv[2]), "seconds": t1 - t0,
                  "samples_per_case": r.settings.samples, "chunks": c.chunks, "p_overrun": c.p_overrun,
                  "p50_m": [p.value for p in c.percentiles if p.p == 50.0][0],
                  "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def run(text: str, workers: int) -> dict:
    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / "study.toml"
        p.write_text(text, encoding="utf-8")
        out = subprocess.run([sys.executable, "-c", CHILD, str(p), str(workers)], check=True,
                             capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=10_000_000)
    ap.add_argument("--cases-samples", type=int, default=5000)
    args = ap.parse_args()
    big = (f'[study]\nscenario = "{BASE}"\nsamples = {args.samples}\nsplit = 1048576\nmethod = "mc"\n'
           '[[case]]\nname = "large"\n"runway.lda" = "1900 m"\n')
    print(json.dumps({"large_case": run(big, 1)}))
    grid = (f'[study]\nscenario = "{BASE}"\nsamples = {args.cases_samples}\nmethod = "mc"\n[grid]\n'
            '"runway.lda" = ["1600 m", "1800 m", "2000 m", "2200 m"]\n"runway.condition_code" = [5, 3, 2]\n'
            '"conditions.headwind" = ["-6 kt", "-2 kt", "2 kt", "6 kt"]\n')
    one, two = run(grid, 1), run(grid, 2)
    print(json.dumps({"study_48": [one, two], "speed_up": one["seconds"] / two["seconds"]}))


if __name__ == "__main__":
    main()

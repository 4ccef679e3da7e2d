"""Benchmark: the Monte Carlo assessment of the demo scenario, end to end, and its memory per sample.

1. ``landrisk assess --samples N --quiet`` in a fresh process per run, best of ``--repeat``: wall time,
   peak memory, and the time inside the solver (the model's calls, timed in one more run) beside the
   rest (imports, reading the scenario, sampling, statistics, the report).
2. Peak memory of three ways of running ``api.assess``: the outputs only (the default), ``keep_samples``
   (the inputs kept too) and the samples written as they are made (``--save-samples``, Parquet unless
   ``--samples-format csv``), and the memory per sample between one size and the next (what a sample
   adds, without the fixed cost of the libraries and of the chunks in flight).
3. Ratios measured in this one run: pint imported as landrisk imports it (without dask) and plainly
   (fresh processes, best of 7); ``Problem.transform`` against the plain column-by-column expressions of
   ``landrisk.testing.plain`` (the earlier code), on the demo's inputs, with the largest difference.

Run on one core:  python benchmarks/assess.py [--sizes 100000 1000000 10000000] [--repeat 3]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

ENV = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")

#: ``landrisk assess`` in this process with the model's solver calls timed (argv: samples).
SOLVER_SHARE = r"""
import sys, time
import landrisk.studies.binding as binding
from landrisk.cli import main
solve, spent = binding.solve_landings, [0.0]
def timed(case):
    t = time.perf_counter()
    try:
        return solve(case)
    finally:
        spent[0] += time.perf_counter() - t
binding.solve_landings = timed
sys.argv = ["landrisk", "assess", "--samples", sys.argv[1], "--quiet"]
try:
    main()
except SystemExit:
    pass
print(spent[0], file=sys.stderr)
"""

#: One assessment through the api (argv: samples, mode, samples format, folder); prints its peak memory.
MEMORY = r"""
import json, resource, sys
from landrisk import api
n, mode, fmt, folder = int(sys.argv[1]), sys.argv[2], sys.argv[3], sys.argv[4]
scenario, uncertain = api.load_study()
if mode == "streamed":
    api.assess_into(scenario, uncertain, folder, force=True, save_samples=True, samples_format=fmt,
                    figures=False, samples=n, seed=1)
else:
    api.assess(scenario, uncertain, samples=n, seed=1, keep_samples=mode == "keep_samples")
print(json.dumps({"peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}), file=sys.stderr)
"""


def _run(args: list[str]) -> tuple[float, float, str]:
    """Wall time [s], peak memory [MB] and stderr of one fresh process."""
    t = time.perf_counter()
    p = subprocess.Popen(args, env=ENV, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    err = p.stderr.read() if p.stderr is not None else ""
    _, status, usage = os.wait4(p.pid, 0)
    wall = time.perf_counter() - t
    if os.waitstatus_to_exitcode(status) != 0:
        raise RuntimeError(f"{' '.join(args[:4])} failed:\n{err[-2000:]}")
    return wall, usage.ru_maxrss / 1024, err


def end_to_end(sizes: list[int], repeat: int) -> None:
    print(f"1. landrisk assess --samples N --quiet, a fresh process per run: best of {repeat}, and one more "
          "run with the solver's calls timed")
    print(f"{'samples':>12} {'wall [s]':>9} {'peak [MB]':>10} | {'timed run [s]':>14} {'solver [s]':>11} "
          f"{'rest [s]':>9}")
    for n in sizes:
        runs = [_run([sys.executable, "-m", "landrisk.cli", "assess", "--samples", str(n), "--quiet"])
                for _ in range(repeat)]
        timed, _, err = _run([sys.executable, "-c", SOLVER_SHARE, str(n)])
        solver = float(err.strip().splitlines()[-1])
        print(f"{n:>12,d} {min(r[0] for r in runs):9.2f} {max(r[1] for r in runs):10.0f} | {timed:14.2f} "
              f"{solver:11.2f} {timed - solver:9.2f}")


def memory(sizes: list[int], fmt: str) -> None:
    print(f"\n2. peak memory of api.assess [MB], and per sample between one size and the next [B] "
          f"(streamed: {fmt})")
    modes = ("outputs only", "keep_samples", "streamed")
    print(f"{'samples':>12} " + " ".join(f"{m:>22}" for m in modes))
    with tempfile.TemporaryDirectory() as tmp:
        def peak(n: int, mode: str) -> float:
            folder = os.path.join(tmp, f"{mode.replace(' ', '_')}-{n}")
            _, _, err = _run([sys.executable, "-c", MEMORY, str(n), mode.replace(" ", "_"), fmt, folder])
            return float(_run_json(err)["peak_mb"])

        previous: tuple[int, list[float]] | None = None
        for n in sizes:
            peaks = [peak(n, m) for m in modes]
            cells = []
            for j, mb in enumerate(peaks):
                per = "" if previous is None else \
                    f"{(mb - previous[1][j]) * 2**20 / (n - previous[0]):6.1f} B/sample"
                cells.append(f"{mb:6.0f} MB {per:>12}")
            print(f"{n:>12,d} " + " ".join(f"{c:>22}" for c in cells))
            previous = (n, peaks)


def _run_json(err: str) -> dict[str, float]:
    return dict(json.loads(err.strip().splitlines()[-1]))


def ratios(repeat: int) -> None:
    import numpy as np

    from landrisk import api
    from landrisk.testing.plain import plain_transform
    from landrisk.uq import uniform_chunks

    print("\n3. ratios measured in this run")
    statements = {"landrisk": "from landrisk.units import _pint; _pint()", "plain": "import pint"}
    best = {}
    for name, stmt in statements.items():
        code = f"import time; t = time.perf_counter(); {stmt}; print(time.perf_counter() - t)"
        times = [float(subprocess.run([sys.executable, "-c", code], env=ENV, capture_output=True, text=True,
                                      check=True).stdout) for _ in range(7)]
        best[name] = min(times)
    print(f"  import pint: {best['landrisk']:.3f} s without dask vs {best['plain']:.3f} s plainly "
          f"({best['plain'] / best['landrisk']:.2f}x)")

    _, uncertain = api.load_study()
    problem = uncertain.problem()
    chunks = list(uniform_chunks(1_000_000, problem.dimension, seed=1))
    ways = {"transform": problem.transform, "plain": lambda u: plain_transform(problem, u)}
    spent: dict[str, list[float]] = {name: [] for name in ways}
    for _ in range(repeat):
        for name, f in ways.items():
            t = time.perf_counter()
            for u in chunks:
                f(u)
            spent[name].append(time.perf_counter() - t)
    diff = max(float(np.max(np.abs(problem.transform(u) - plain_transform(problem, u)))) for u in chunks)
    t_new, t_old = min(spent["transform"]), min(spent["plain"])
    print(f"  Problem.transform, 10^6 demo samples in chunks of 2^16: {t_new:.3f} s vs {t_old:.3f} s for the "
          f"plain expressions ({t_old / t_new:.2f}x); largest difference {diff:g}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[100_000, 1_000_000, 10_000_000])
    ap.add_argument("--repeat", type=int, default=3, help="runs of each timing (the best is shown)")
    ap.add_argument("--samples-format", choices=("parquet", "csv"), default="parquet",
                    help="file format of the streamed samples (CSV takes minutes at 10^7)")
    args = ap.parse_args()
    print("landrisk assess benchmark: demo scenario, random sampler, seed 1, one core")
    end_to_end(args.sizes, args.repeat)
    memory(args.sizes, args.samples_format)
    ratios(args.repeat)


if __name__ == "__main__":
    main()

"""Benchmark: the solver against the solver of an earlier revision, the quadrature method and solve_ivp,
in one run.

Prints the time for 10^6 demo-like landings (the invented demo scenario with random perturbations of
mass, wind, friction, reaction time, touchdown speed, temperature and reverser use), landings per second,
the per-landing speed-up over ``landrisk.testing.reference.reference_ground_roll`` (scipy solve_ivp,
DOP853, rtol 1e-12) measured on a subset, the largest relative difference from that reference, and the
peak memory of one solve per landing.

Three solvers are timed on the same landings, in turns (so that a change of machine speed during the run
touches all of them alike): this checkout's ``solve_landings`` (``method="closed"``), its
``method="quadrature"`` (Gauss-Legendre braking, fixed-step RK4 free roll, kept for comparison), and the
``solve_landings`` of an earlier revision (``--baseline``, by default the closed-form solver as it was
before the speed work of issue 14), read with ``git show`` and run against this checkout's physics.
Speed and error are printed as ratios to the baseline. The cost of one ``log`` and one ``arctan`` per
element on this machine is printed too, since those bound what any closed form can reach.

Run on one core:  python benchmarks/solver.py [--landings 1000000] [--reference 200] [--baseline REV]
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
import types  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

from landrisk import __version__  # noqa: E402
from landrisk.io import load_scenario  # noqa: E402
from landrisk.model import solve_landings  # noqa: E402
from landrisk.testing.reference import reference_ground_roll  # noqa: E402

#: The closed-form solver before the speed work of issue 14 (commit of 2026-12-02).
DEFAULT_BASELINE = "81a657b"
ROOT = Path(__file__).resolve().parents[1]


def perturbed_demo(n: int, seed: int = 2026):
    """n landings of the demo scenario with plausible random scatter (invented, for timing only)."""
    rng = np.random.default_rng(seed)
    s = load_scenario()
    v = s.values
    samples = {
        "aircraft.mass": v["aircraft.mass"] * rng.uniform(0.85, 1.1, n),
        "conditions.headwind": rng.normal(v["conditions.headwind"], 4.0, n),
        "conditions.temperature": v["conditions.temperature"] + rng.normal(0.0, 8.0, n),
        "runway.braking_mu": rng.uniform(0.08, 0.45, n),
        "procedure.reaction_time": rng.uniform(0.5, 4.0, n),
        "procedure.touchdown_speed_ratio": rng.uniform(1.12, 1.3, n),
        "procedure.use_reverse": rng.random(n) < 0.9,
    }
    return s.case(samples)


def baseline_solver(rev: str):
    """``solve_landings`` of ``src/landrisk/model/solver.py`` at git revision ``rev`` (None if git cannot
    show it), as a module of its own that imports this checkout's physics and model."""
    try:
        src = subprocess.run(["git", "show", f"{rev}:src/landrisk/model/solver.py"], cwd=ROOT,
                             capture_output=True, text=True, check=True).stdout
    except (OSError, subprocess.CalledProcessError) as exc:
        print(f"  (no baseline: git show {rev} failed: {exc})")
        return None
    module = types.ModuleType("landrisk_baseline_solver")
    module.__dict__["__name__"] = "landrisk_baseline_solver"
    sys.modules[module.__name__] = module  # dataclasses look their module up by name
    exec(compile(src, f"{rev}:solver.py", "exec"), module.__dict__)
    return module.solve_landings


def log_and_atan_cost(n: int = 1 << 14, repeat: int = 200) -> tuple[float, float, float]:
    """Best time per element [ns] of numpy's log, arctan and a multiplication on this machine."""
    x = np.random.default_rng(0).uniform(0.5, 2.0, n)
    y = np.empty(n)
    out = []
    for f in (lambda: np.log(x, out=y), lambda: np.arctan(x, out=y), lambda: np.multiply(x, x, out=y)):
        best = np.inf
        for _ in range(repeat):
            t0 = time.perf_counter()
            f()
            best = min(best, time.perf_counter() - t0)
        out.append(best / n * 1e9)
    return out[0], out[1], out[2]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--landings", type=int, default=1_000_000)
    ap.add_argument("--reference", type=int, default=200, help="landings in the solve_ivp loop")
    ap.add_argument("--repeat", type=int, default=5, help="timed repeats of each vectorised solve")
    ap.add_argument("--baseline", default=DEFAULT_BASELINE, help="git revision of the baseline solver")
    args = ap.parse_args()

    case = perturbed_demo(args.landings)
    solvers = {"closed": lambda c: solve_landings(c), "quadrature": lambda c: solve_landings(c, "quadrature")}
    old = baseline_solver(args.baseline)
    if old is not None:
        solvers["baseline"] = old
    timing: dict[str, list[float]] = {m: [] for m in solvers}
    results = {}
    for f in solvers.values():
        f(case.broadcast().take(slice(0, 1000)))  # warm-up
    for _ in range(args.repeat):  # in turns, so that a slower spell of the machine touches all alike
        for m, f in solvers.items():
            t0 = time.perf_counter()
            results[m] = f(case)
            timing[m].append(time.perf_counter() - t0)
    best = {m: min(t) for m, t in timing.items()}  # best of the repeats, as timeit reports

    idx = np.linspace(0, args.landings - 1, args.reference).astype(int)
    sub = case.broadcast()
    t0 = time.perf_counter()
    refs = [reference_ground_roll(sub, int(i)) for i in idx]
    t_ref = (time.perf_counter() - t0) / len(idx)
    names = ("free_roll_m", "braking_m", "time_to_stop_s")
    worst = {m: dict.fromkeys(names, 0.0) for m in results}
    for m, res in results.items():
        for i, ref in zip(idx, refs, strict=True):
            for k in names:
                err = abs(float(getattr(res, k)[i]) - ref[k]) / max(abs(ref[k]), 1e-9)
                worst[m][k] = max(worst[m][k], err)
    same = {m: bool(np.array_equal(results[m].overrun, results["closed"].overrun)) for m in results}

    print(f"landrisk {__version__} solver benchmark (one core)")
    print(f"  landings solved                {args.landings:>12,d}")
    if "baseline" in results:
        print(f"  baseline                       solve_landings of git revision {args.baseline}")
    for m in results:
        print(f"  {m:<10} solver time         {best[m]:12.3f} s   (best of {args.repeat}; "
              f"all: {', '.join(f'{t:.3f}' for t in timing[m])})")
        print(f"  {m:<10} landings per second {args.landings / best[m]:12,.0f}")
    for m in results:
        if m != "closed":
            print(f"  speed ratio closed / {m:<10} {best[m] / best['closed']:9.2f} x")
    print(f"  overruns in the sample         {int(results['closed'].overrun.sum()):>12,d}   "
          f"(same landings flagged: {', '.join(f'{m} {same[m]}' for m in results if m != 'closed')})")
    print(f"  solve_ivp loop, per landing    {t_ref * 1e3:12.3f} ms   ({len(idx)} landings)")
    print(f"  speed-up per landing (closed)  {t_ref / (best['closed'] / args.landings):12,.0f} x")
    for k in names:
        print(f"  largest relative difference from solve_ivp, {k:<15}"
              + "".join(f" {m} {worst[m][k]:.2e}" for m in results))
    peak = _peak_bytes_per_landing()
    print(f"  peak memory per landing (closed, 2^17 landings) {peak:8.0f} bytes")
    t_log, t_atan, t_mul = log_and_atan_cost()
    per_landing = best["closed"] / args.landings * 1e9
    print(f"  numpy on this machine, per element: log {t_log:.1f} ns, arctan {t_atan:.1f} ns, "
          f"multiply {t_mul:.2f} ns; the closed solver's time per landing {per_landing:.0f} ns")


def _peak_bytes_per_landing(n: int = 1 << 17) -> float:
    """Peak traced allocation of one closed-form solve of n landings, per landing."""
    import tracemalloc

    case = perturbed_demo(n, seed=7)
    tracemalloc.start()
    solve_landings(case)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak / n


if __name__ == "__main__":
    main()

"""Benchmark: the closed-form solver against the earlier quadrature solver and solve_ivp, in one run.

Prints the time for 10^6 demo-like landings (the invented demo scenario with random perturbations of
mass, wind, friction, reaction time, touchdown speed, temperature and reverser use), landings per second,
the per-landing speed-up over ``landrisk.testing.reference.reference_ground_roll`` (scipy solve_ivp,
DOP853, rtol 1e-12) measured on a subset, and the largest relative difference from that reference.

The closed-form solver (``method="closed"``) and the earlier one (``method="quadrature"``: Gauss-Legendre
braking, fixed-step RK4 free roll) are timed on the same landings; speed and error are printed as ratios.

Run on one core:  python benchmarks/solver.py [--landings 1000000] [--reference 200]
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

from landrisk import __version__  # noqa: E402
from landrisk.io import load_scenario  # noqa: E402
from landrisk.model import solve_landings  # noqa: E402
from landrisk.testing.reference import reference_ground_roll  # noqa: E402


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


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--landings", type=int, default=1_000_000)
    ap.add_argument("--reference", type=int, default=200, help="landings in the solve_ivp loop")
    ap.add_argument("--repeat", type=int, default=3, help="timed repeats of the vectorised solve")
    args = ap.parse_args()

    case = perturbed_demo(args.landings)
    timing: dict[str, list[float]] = {}
    results = {}
    for method in ("closed", "quadrature"):
        solve_landings(case.broadcast().take(slice(0, 1000)), method=method)  # warm-up
        timing[method] = []
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            results[method] = solve_landings(case, method=method)
            timing[method].append(time.perf_counter() - t0)
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

    print(f"landrisk {__version__} solver benchmark (one core)")
    print(f"  landings solved                {args.landings:>12,d}")
    for m in results:
        print(f"  {m:<10} solver time         {best[m]:12.3f} s   (best of {args.repeat}; "
              f"all: {', '.join(f'{t:.3f}' for t in timing[m])})")
        print(f"  {m:<10} landings per second {args.landings / best[m]:12,.0f}")
    print(f"  speed ratio closed / quadrature {best['quadrature'] / best['closed']:11.2f} x")
    print(f"  overruns in the sample         {int(results['closed'].overrun.sum()):>12,d}")
    print(f"  solve_ivp loop, per landing    {t_ref * 1e3:12.3f} ms   ({len(idx)} landings)")
    print(f"  speed-up per landing (closed)  {t_ref / (best['closed'] / args.landings):12,.0f} x")
    for k in names:
        e_c, e_q = worst["closed"][k], worst["quadrature"][k]
        print(f"  largest relative difference from solve_ivp, {k:<15} closed {e_c:.2e}   "
              f"quadrature {e_q:.2e}   (ratio {e_c / e_q if e_q else float('nan'):.2g})")
    peak = _peak_bytes_per_landing()
    print(f"  peak memory per landing (closed, 2^17 landings) {peak:8.0f} bytes")


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

"""Plain vs accelerated iteration, and thread scaling inside one point.

Prints figures and ratios, asserts nothing.  Run from the repository root:

    python benchmarks/bench_acceleration.py            # a few minutes on 2 cores
    python benchmarks/bench_acceleration.py --quick    # plane channel only

1. Poiseuille flow (BGK, diffuse walls, default grids, tol 1e-8) at
   delta = 0.01 ... 1000 in the plane channel, the tube and a duct of aspect
   ratio 2, and plane-channel heat transfer: iterations and wall time with and without synthetic acceleration,
   and their ratios.  The plain iteration needs ~delta^2 iterations; where it
   would take too long it runs to a cap only (to time one iteration) and its
   count is EXTRAPOLATED, marked '~': from the largest delta where it
   converged, with the growth exponent measured on the plane channel between
   its two largest converged deltas (heat transfer: on its own runs); where a run reached its full cap, at
   least the cap plus the iterations its last-100-iteration rate still needs.
   Tables run with one numba thread (as in a sweep).
2. Thread scaling: one accelerated point with numba.set_num_threads(1) and (2).

Timings use the solver's own wall_time (error estimate off: one solve per
point); the numba cache is warmed first.  On a shared machine the load
average printed at the top tells how much to trust the seconds; the
iteration counts do not depend on it.
"""

from __future__ import annotations

import argparse
import math
import os
import platform
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
os.environ.setdefault("NUMBA_CACHE_DIR", str(REPO / ".numba_cache"))

import numba  # noqa: E402
import numpy as np  # noqa: E402

from knudsweep.solver.plane_channel import solve_plane_channel  # noqa: E402

DELTAS = (0.01, 1.0, 10.0, 100.0, 1000.0)
TOL = 1e-8


def machine_description() -> str:
    """CPU model, cores, numba threads, versions, load average."""
    model = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    usable = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    load = ", ".join(f"{x:.2f}" for x in os.getloadavg()) if hasattr(os, "getloadavg") else "n/a"
    return "\n".join(
        [
            f"CPU: {model}; logical cores {os.cpu_count()}, usable {usable}",
            f"numba threads: {numba.get_num_threads()} (NUMBA_NUM_THREADS {numba.config.NUMBA_NUM_THREADS}); "
            f"threading layer: {numba.config.THREADING_LAYER}",
            f"python {platform.python_version()}, numba {numba.__version__}, numpy {np.__version__}, {platform.platform()}",
            f"load average (1, 5, 15 min): {load}",
        ]
    )


# --- the three geometries, Poiseuille flow --------------------------------------------


def plane(delta, accelerate, max_iter=None):
    return solve_plane_channel(
        "poiseuille", delta=delta, accelerate=accelerate, tol=TOL, max_iter=max_iter, error_estimate=False
    )


def plane_heat(delta, accelerate, max_iter=None):
    return solve_plane_channel(
        "heat_transfer", delta=delta, accelerate=accelerate, tol=TOL, max_iter=max_iter, error_estimate=False
    )


def tube(delta, accelerate, max_iter=None):
    from knudsweep.solver.tube import solve_tube

    return solve_tube("poiseuille", delta=delta, accelerate=accelerate, tol=TOL, max_iter=max_iter)


def duct(delta, accelerate, max_iter=None):
    from knudsweep.solver.duct import solve_duct

    return solve_duct("poiseuille", delta=delta, aspect_ratio=2.0, accelerate=accelerate, tol=TOL, max_iter=max_iter)


GEOMETRIES = {
    "plane channel": (plane, "G_P"),
    "plane channel heat transfer": (plane_heat, "heat_flux"),
    "tube": (tube, "G_P"),
    "duct A=2": (duct, "G_P"),
}
PROBLEM_LABEL = {"plane channel heat transfer": "heat flux between walls at T0 -/+ dT/2"}
# plain-iteration caps: the full count is measured while it stays affordable
PLAIN_CAP = {"plane channel": 60_000, "plane channel heat transfer": 60_000, "tube": 1_000, "duct A=2": 1_000}
PLAIN_TIMING_CAP = 100  # iterations run only to time one plain iteration


def bench_geometry(name, solve, coef, growth):
    """Table of plain vs accelerated; returns the measured plain counts {delta: iterations}."""
    print(f"\n{name}: {PROBLEM_LABEL.get(name, 'Poiseuille')}, BGK, diffuse wall, tol {TOL:g}")
    print(
        f"{'delta':>8} | {'plain it':>10} {'plain s':>9} | {'accel it':>8} {'accel s':>8} | "
        f"{'it ratio':>9} {'time ratio':>10} | {'rel diff':>8}"
    )
    measured: dict[float, int] = {}
    too_long = False
    for delta in DELTAS:
        fast = solve(delta, True)
        a_it, a_t = fast.convergence.iterations, fast.wall_time
        if not too_long and len(measured) >= (2 if growth is None else 1):
            # predict the plain count; beyond the cap, run only to time one iteration
            ref = max(measured)
            exponent = measured_growth(measured) if growth is None else growth
            too_long = measured[ref] * (delta / ref) ** exponent > PLAIN_CAP[name]
        cap = PLAIN_TIMING_CAP if too_long else PLAIN_CAP[name]
        plain = solve(delta, False, max_iter=cap)
        p_t_per_it = plain.wall_time / max(plain.convergence.iterations, 1)
        if plain.status == "converged":
            p_it, p_t, mark = plain.convergence.iterations, plain.wall_time, " "
            measured[delta] = p_it
            diff = f"{abs(plain.coefficient(coef) / fast.coefficient(coef) - 1):8.1e}"
        else:
            ref = max(measured)
            exponent = measured_growth(measured) if growth is None else growth
            p_it = int(measured[ref] * (delta / ref) ** exponent)
            if not too_long:
                # ran to the full cap: add the iterations still needed at the tail rate
                p_it = max(p_it, cap + tail_iterations(plain.convergence.residuals))
            too_long = True
            p_t = p_it * p_t_per_it
            mark, diff = "~", f"{'(capped)':>8}"
        print(
            f"{delta:8.3g} | {mark}{p_it:9d} {mark}{p_t:8.3g} | {a_it:8d} {a_t:8.3f} | "
            f"{mark}{p_it / a_it:8.3g} {mark}{p_t / a_t:9.3g} | {diff}",
            flush=True,
        )
    return measured


def tail_iterations(history, window=100) -> int:
    """Iterations still needed to bring the last history entry below TOL at the rate of the last `window`."""
    h = np.asarray(history)
    if h.size <= window or not (0 < h[-1] < h[-1 - window]):
        return 0
    rate = (h[-1] / h[-1 - window]) ** (1.0 / window)
    return int(math.ceil(math.log(h[-1] / TOL) / -math.log(rate))) if h[-1] > TOL else 0


def measured_growth(measured: dict[float, int]) -> float:
    d1, d2 = sorted(measured)[-2:]
    return math.log(measured[d2] / measured[d1]) / math.log(d2 / d1)


def bench_threads(cases):
    print("\nthread scaling inside one point (accelerated, best of 2 runs)")
    print(f"{'case':>28} | {'1 thread s':>10} {'2 threads s':>11} | {'speed-up':>8}")
    avail = numba.config.NUMBA_NUM_THREADS
    for label, fn in cases:
        times = {}
        for n in (1, 2):
            numba.set_num_threads(min(n, avail))
            times[n] = min(fn().wall_time for _ in range(2))
        numba.set_num_threads(avail)
        print(f"{label:>28} | {times[1]:10.3f} {times[2]:11.3f} | {times[1] / times[2]:8.2f}", flush=True)
    if avail < 2:
        print("   (only one numba thread available: speed-up not measurable)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="plane channel only (Poiseuille and heat transfer)")
    args = parser.parse_args()
    print(machine_description())
    names = ["plane channel", "plane channel heat transfer"] if args.quick else list(GEOMETRIES)
    # tables with one numba thread (the setting of a sweep: one process per core);
    # thread scaling is measured separately below
    numba.set_num_threads(1)
    for name in names:  # warm the numba cache (compile on first use)
        GEOMETRIES[name][0](1.0, True, None)

    # the plane channel first: its two largest converged plain counts give the growth exponent
    measured = bench_geometry("plane channel", plane, "G_P", growth=None)
    growth = measured_growth(measured)
    d1, d2 = sorted(measured)[-2:]
    print(
        f"   growth exponent of the plain count, delta {d1:g} -> {d2:g}: {growth:.2f} "
        f"(used for every '~' row beyond the last converged plain run)"
    )
    for name in names[1:]:
        # the heat-transfer problem measures its own growth (its slow modes differ)
        own = name.startswith("plane channel")
        bench_geometry(name, GEOMETRIES[name][0], GEOMETRIES[name][1], None if own else growth)

    cases = [
        ("plane channel delta=0.01", lambda: plane(0.01, True)),
        ("plane channel delta=1000", lambda: plane(1000.0, True)),
        (
            "plane 1000, 4000 x 64 nodes",
            lambda: solve_plane_channel(
                "poiseuille", delta=1000.0, accelerate=True, tol=TOL, n_space=4000, n_velocity=64, error_estimate=False
            ),
        ),
    ]
    if not args.quick:
        cases += [("tube delta=10", lambda: tube(10.0, True)), ("duct A=2 delta=10", lambda: duct(10.0, True))]
    bench_threads(cases)


if __name__ == "__main__":
    sys.exit(main())

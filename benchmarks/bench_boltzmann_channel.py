"""Plane channel: linearized Boltzmann equation (hard spheres, VHS argon) against the S-model, seconds per point and iterations.

All with synthetic acceleration, default grids, one solve per point plus the
coarse solve of the error estimate (as a sweep runs them); iterations are
those of the default-grid solve (the stopping rule watches velocity and heat
flux).  VHS argon: omega of argon from config/gases.yaml.  Run:
    NUMBA_CACHE_DIR=.numba_cache python benchmarks/bench_boltzmann_channel.py [--threads N]
No assertions.
"""

from __future__ import annotations

import argparse
import time

import numba

from knudsweep.solver.gas import get_gas
from knudsweep.solver.plane_channel import linearized_boltzmann as lb
from knudsweep.solver.plane_channel import solve_plane_channel
from knudsweep.solver.plane_channel.boltzmann_driver import solve_plane_channel_boltzmann

DELTAS = (0.1, 1.0, 10.0, 100.0)
OMEGA_AR = get_gas("Ar").omega


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--threads", type=int, default=1, help="numba threads for the velocity loop")
    args = parser.parse_args()
    numba.set_num_threads(min(args.threads, numba.config.NUMBA_NUM_THREADS))
    # compile / load the cached kernels and build the operator of the default speed set once
    solve_plane_channel("poiseuille", delta=1.0, accelerate=True)
    solve_plane_channel_boltzmann("poiseuille", delta=1.0)
    print(f"numba threads: {numba.get_num_threads()}")
    # operator build (first point of a worker): default speed set and the coarse one of the error estimate
    for omega in (0.5, OMEGA_AR):
        t = time.perf_counter()
        for n in (8, 6):
            lb.speed_matrices(n, 2 * n, omega)
        print(f"operator build omega = {omega:g}: {time.perf_counter() - t:.2f} s (8 and 6 speeds)")
    solve_plane_channel_boltzmann("poiseuille", delta=1.0, molecule="vhs", omega=OMEGA_AR)
    print(
        f"{'problem':>13} {'delta':>6} | {'S-model s':>9} {'it':>4} {'G':>10} | {'LBE s':>7} {'it':>4} {'G':>10} {'est. err':>9} | "
        f"{'time ratio':>10} {'G_S/G_LBE':>9} | {'VHS Ar s':>8} {'it':>4} {'G':>10} {'est. err':>9} {'time ratio':>10}"
    )
    for problem, name in (("poiseuille", "G_P"), ("thermal_creep", "G_T")):
        for delta in DELTAS:
            t = time.perf_counter()
            s = solve_plane_channel(problem, delta=delta, model="s_model", accelerate=True)
            ts = time.perf_counter() - t
            t = time.perf_counter()
            b = solve_plane_channel_boltzmann(problem, delta=delta)
            tb = time.perf_counter() - t
            t = time.perf_counter()
            v = solve_plane_channel_boltzmann(problem, delta=delta, molecule="vhs", omega=OMEGA_AR)
            tv = time.perf_counter() - t
            print(
                f"{problem:>13} {delta:6g} | {ts:9.2f} {s.convergence.iterations:4d} {s.coefficient(name):10.6f} | "
                f"{tb:7.2f} {b.convergence.iterations:4d} {b.coefficient(name):10.6f} {b.coefficient(name + '_error_estimate'):9.1e} | "
                f"{tb / ts:10.1f} {s.coefficient(name) / b.coefficient(name):9.4f} | "
                f"{tv:8.2f} {v.convergence.iterations:4d} {v.coefficient(name):10.6f} "
                f"{v.coefficient(name + '_error_estimate'):9.1e} {tv / ts:10.1f}"
            )


if __name__ == "__main__":
    main()

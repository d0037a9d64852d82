"""Tube: linearized Boltzmann equation (hard spheres) against the S-model, seconds per point and iterations.

All with synthetic acceleration, default grids, one solve per point plus the coarse solve of the error estimate
(as a sweep runs them); iterations are those of the default-grid solve.  Also printed: G of the S-model over G of
the hard-sphere Boltzmann equation (the model error).  Run:
    NUMBA_CACHE_DIR=.numba_cache python benchmarks/bench_tube_boltzmann.py [--threads N] [--deltas 0.1 1 10 100]
No assertions.
"""

from __future__ import annotations

import argparse
import time

import numba

from knudsweep.solver.tube import solve_tube
from knudsweep.solver.tube.boltzmann_driver import solve_tube_boltzmann

DELTAS = (0.1, 1.0, 10.0, 100.0)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--threads", type=int, default=1, help="numba threads for the sweeps")
    parser.add_argument("--deltas", type=float, nargs="+", default=list(DELTAS))
    args = parser.parse_args()
    numba.set_num_threads(min(args.threads, numba.config.NUMBA_NUM_THREADS))
    # compile / load the cached kernels and build the operator of the default speed sets once
    solve_tube("poiseuille", delta=1.0, model="s_model")
    solve_tube_boltzmann("poiseuille", delta=1.0, n_space=11)
    print(f"numba threads: {numba.get_num_threads()}")
    print(
        f"{'problem':>13} {'delta':>6} | {'S-model s':>9} {'it':>4} {'G':>10} | {'LBE s':>7} {'it':>4} {'G':>10} "
        f"{'est. err':>9} | {'time ratio':>10} {'G_S/G_LBE':>9}"
    )
    for problem, name in (("poiseuille", "G_P"), ("thermal_creep", "G_T")):
        for delta in args.deltas:
            t = time.perf_counter()
            s = solve_tube(problem, delta=delta, model="s_model")
            ts = time.perf_counter() - t
            t = time.perf_counter()
            b = solve_tube_boltzmann(problem, delta=delta)
            tb = time.perf_counter() - t
            print(
                f"{problem:>13} {delta:6g} | {ts:9.2f} {s.convergence.iterations:4d} {s.coefficient(name):10.6f} | "
                f"{tb:7.2f} {b.convergence.iterations:4d} {b.coefficient(name):10.6f} "
                f"{b.coefficient(name + '_error_estimate'):9.1e} | {tb / ts:10.1f} "
                f"{s.coefficient(name) / b.coefficient(name):9.4f}",
                flush=True,
            )


if __name__ == "__main__":
    main()
